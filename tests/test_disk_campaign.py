"""Campaigns on data that stays on disk: workers read rows by index; rows equal the in-memory ones; bad
scheduler addresses and dead workers."""

from __future__ import annotations

import pickle

import pytest

from manireg.curves import LearnerSpec
from manireg.curves.campaign import Campaign
from manireg.curves.execution import SchedulerUnreachable, WorkerLost
from manireg.curves.store import ResultStore
from manireg.data import load_table, open_table, write_synthetic

TINY_NET = {"max_steps": 40, "min_steps": 10, "patience_steps": 30, "eval_every": 10, "max_seconds": 1e6}
SIZES = [40, 80, 160]
METRICS = ["key", "learner", "n", "repeat", "seed", "train_mse", "val_mse", "test_mse", "steps", "best_step", "status"]


@pytest.fixture(scope="module")
def disk(tmp_path_factory):
    p = tmp_path_factory.mktemp("dc") / "g.npy"
    return write_synthetic(p, "graph_manifold", 400, d=2, ambient_dim=8, chunk_rows=128, seed=0)


def _campaign(X, y, store, learners=("knn", "net")):
    specs = [LearnerSpec("net", params=TINY_NET) if k == "net" else LearnerSpec(k) for k in learners]
    return Campaign(X=X, y=y, sizes=SIZES, repeats=2, learners=specs, dimension=2.0, smoothness=1.0, seed=3,
                    name="disk", store=store)


def _rows(result):
    return result.rows.sort_values("key")[METRICS].reset_index(drop=True)


@pytest.fixture(scope="module")
def in_memory(disk, tmp_path_factory):
    """The reference: the same campaign on the table loaded in memory (run once for the module)."""
    mem = load_table(disk.path, disk.target_name)
    return _rows(_campaign(mem.X, mem.y, tmp_path_factory.mktemp("mem") / "a.sqlite").run(progress=False))


def test_disk_campaign_rows_equal_in_memory_rows(disk, in_memory, tmp_path):
    table = open_table(disk.path, disk.target_name)
    camp = _campaign(table, None, tmp_path / "b.sqlite")
    assert camp.data.on_disk and len(pickle.dumps(camp.data)) < 20_000  # the task data carries no array
    b = camp.run(progress=False)  # worker processes read from the file in the dask and dying-worker tests
    # same values, same cell keys (the fingerprint of the file equals the array's), same numbers bit for bit
    assert len(in_memory) == len(b.rows) == 12
    assert in_memory.equals(_rows(b))


def test_dask_worker_that_dies_mid_cell_is_retried_and_rows_equal_in_memory(disk, in_memory, tmp_path):
    # one LocalCluster checks both: worker processes read their rows from the file (rows equal the in-memory
    # campaign bit for bit), and a worker killed in the middle of a cell has the cell run again elsewhere
    # (dask reschedules the tasks of a lost worker), written once
    pytest.importorskip("distributed")
    import sys
    from pathlib import Path

    sys.path.insert(0, str(Path(__file__).parent))
    from _disk_worker import dying

    flag = tmp_path / "die"
    flag.write_text("")
    table = dying(open_table(disk.path, disk.target_name), flag, -1, once=True)
    store = tmp_path / "b.sqlite"
    camp = _campaign(table, None, store, learners=("knn",))
    table.die_at = 160 + len(camp.data.test_idx)  # a kNN cell reads its n rows and the test rows in one go
    b = camp.run(executor="dask", n_jobs=2, progress=False)
    assert not flag.exists()  # a worker did die in a size-160 cell
    rows = ResultStore(store).rows("disk")
    assert len(rows) == 6 and rows["key"].is_unique and set(rows["status"]) == {"ok"}
    cols = ["key", "n", "repeat", "seed", "train_mse", "val_mse", "test_mse", "status"]  # what a kNN row fills
    knn = in_memory.loc[in_memory["learner"] == "knn", cols].reset_index(drop=True)
    assert knn.equals(_rows(b)[cols])


def test_unanswered_scheduler_address_fails_fast_and_keeps_the_store(disk, tmp_path, monkeypatch):
    pytest.importorskip("distributed")
    import socket

    from manireg.curves import execution

    monkeypatch.setattr(execution, "SCHEDULER_TIMEOUT", 2.0)
    store = tmp_path / "s.sqlite"
    camp = _campaign(open_table(disk.path, disk.target_name), None, store, learners=("knn",))
    camp.run(progress=False)  # a finished campaign in the store
    before = len(ResultStore(store))
    extra = _campaign(open_table(disk.path, disk.target_name), None, store, learners=("kernel_ridge",))
    with socket.socket() as s:  # a port nobody listens on
        s.bind(("127.0.0.1", 0))
        port = s.getsockname()[1]
    with pytest.raises(SchedulerUnreachable, match=r"no dask scheduler answered at 'tcp://127.0.0.1:\d+' within 2 s"):
        extra.run(executor="dask", scheduler=f"tcp://127.0.0.1:{port}", progress=False)
    assert len(ResultStore(store)) == before


def test_worker_that_dies_mid_cell_leaves_the_cell_for_the_resume(disk, tmp_path):
    import sys
    from pathlib import Path

    sys.path.insert(0, str(Path(__file__).parent))
    from _disk_worker import dying

    flag = tmp_path / "die"
    flag.write_text("")
    table = open_table(disk.path, disk.target_name)
    store = tmp_path / "s.sqlite"
    doomed = dying(table, flag, -1)
    camp = _campaign(doomed, None, store, learners=("knn",))
    doomed.die_at = 160 + len(camp.data.test_idx)  # a size-160 kNN cell reads its rows and the test rows at once
    with pytest.raises(WorkerLost, match="Run the same campaign again to resume"):
        camp.run(executor="processes", n_jobs=2, progress=False)
    kept = ResultStore(store).rows("disk")
    assert set(kept["status"]) <= {"ok"} and len(kept) < 6 and kept["key"].is_unique
    assert 160 not in set(kept["n"])  # the cells that were running were not written
    flag.unlink()
    # the resume runs in this process: what it checks is which cells run, not where
    result = _campaign(table, None, store, learners=("knn",)).run(progress=False)
    rows = ResultStore(store).rows("disk")
    assert len(rows) == 6 and rows["key"].is_unique and set(result.rows["status"]) == {"ok"}
