"""Executors give the same rows; nets are batched per (learner, n); failures are stored, retried on request."""

import sys
from pathlib import Path

import numpy as np
import pytest

import manireg.curves.execution as ex
from manireg.curves.execution import make_units

sys.path.insert(0, str(Path(__file__).parent))
from _campaign_worker import make_campaign  # noqa: E402

NUMBERS = ["train_mse", "val_mse", "test_mse", "test_mse_clean"]
SAME = ["learner", "n", "repeat", "seed", "steps", "best_step", "stop_reason", "n_parameters", "width", "depth",
        "status", "config_json"]


def _compare(a, b):
    a = a.set_index("key").sort_index()
    b = b.set_index("key").sort_index()
    assert list(a.index) == list(b.index)
    for c in SAME:
        assert a[c].astype(object).where(a[c].notna(), None).tolist() == \
            b[c].astype(object).where(b[c].notna(), None).tolist(), c
    for c in NUMBERS:
        # bit for bit: every seed comes from the cell, one torch thread everywhere, and a replica's
        # arithmetic does not depend on its stack, so executors and unit splits change no number
        np.testing.assert_array_equal(a[c].astype(float), b[c].astype(float), err_msg=c)


@pytest.fixture(scope="module")
def reference(tmp_path_factory):
    return make_campaign(tmp_path_factory.mktemp("ref") / "s.sqlite").run(progress=False).rows


def test_units_batch_net_repeats(tmp_path):
    cells = make_campaign(tmp_path / "s.sqlite").cells()
    units = make_units(cells)
    net = [u for u in units if u[0].learner.kind == "net"]
    assert len(net) == 3 and all(len(u) == 2 and len({c.n for c in u}) == 1 for u in net)
    assert all(len(u) == 1 for u in units if u[0].learner.kind == "knn")


def test_units_are_split_to_balance_workers(tmp_path):
    campaign = make_campaign(tmp_path / "s.sqlite")
    cells, data = campaign.cells(), campaign.data
    whole = make_units(cells)
    assert make_units(cells, data, n_workers=1) == whole
    for workers in (2, 3):
        units = make_units(cells, data, n_workers=workers)
        # the same cells, each once
        assert sorted(c.key for u in units for c in u) == sorted(c.key for c in cells)
        costs = [len(u) * ex._cell_cost(u, data) for u in units]
        share = sum(costs) / workers
        # no unit of several cells is left above a worker's share
        assert all(cost <= share or len(u) == 1 for u, cost in zip(units, costs))
        # splitting only divides units of one (learner, n)
        assert all(len({c.unit_key for c in u}) == 1 for u in units)
    # here the two n=160 nets are over half the work: two workers get one each
    split = [u for u in make_units(cells, data, n_workers=2) if u[0].learner.kind == "net" and u[0].n == 160]
    assert [len(u) for u in split] == [1, 1]


def test_a_failing_cost_estimate_does_not_stop_the_plan(tmp_path, monkeypatch):
    from manireg.curves.learners import KNNLearner

    def broken(self, n, data):
        raise RuntimeError("no estimate")

    monkeypatch.setattr(KNNLearner, "cell_cost", broken)
    campaign = make_campaign(tmp_path / "s.sqlite")
    units = make_units(campaign.cells(), campaign.data, n_workers=2)
    assert sorted(c.key for u in units for c in u) == sorted(c.key for c in campaign.cells())


def test_split_units_give_the_same_rows(tmp_path):
    # make_units may split a unit; the rows must not change by a single bit (see
    # test_training.test_replica_numbers_do_not_depend_on_the_stack).
    campaign = make_campaign(tmp_path / "s.sqlite", learners=("net",))
    unit = [c for c in campaign.cells() if c.n == 160]
    together = ex.run_unit(unit, campaign.data)
    apart = ex.run_unit(unit[:1], campaign.data) + ex.run_unit(unit[1:], campaign.data)
    for a, b in zip(together, apart):
        for col in NUMBERS + SAME[:-2]:
            assert a[col] == b[col], col


def test_one_fit_call_per_learner_and_size(tmp_path, monkeypatch):
    import manireg.nets.training as tr

    calls = []
    orig = tr.BatchedTrainer.fit

    def spy(self, tasks):
        tasks = list(tasks)  # the learners hand over an iterator (rows read as the trainer asks for them)
        calls.append(len(tasks))
        return orig(self, tasks)

    monkeypatch.setattr(tr.BatchedTrainer, "fit", spy)
    make_campaign(tmp_path / "s.sqlite", learners=("net",)).run(progress=False)
    assert calls == [2, 2, 2]


def test_processes_match_inprocess(tmp_path, reference):
    rows = make_campaign(tmp_path / "s.sqlite").run(executor="processes", n_jobs=2, progress=False).rows
    _compare(rows, reference)


def test_dask_local_cluster_matches_inprocess(tmp_path, reference):
    distributed = pytest.importorskip("distributed")
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False,
                                  dashboard_address=None) as cluster, distributed.Client(cluster) as client:
        rows = make_campaign(tmp_path / "s.sqlite").run(executor="dask", scheduler=client, progress=False).rows
    _compare(rows, reference)


def test_second_run_skips_everything(tmp_path):
    campaign = make_campaign(tmp_path / "s.sqlite", learners=("knn",))
    first = campaign.run(progress=False)
    again = campaign.run(progress=False)
    assert again.summary["ran"] == 0 and again.summary["skipped"] == len(first.rows) == 6


def test_failed_cells_are_stored_and_retried_only_when_asked(tmp_path, monkeypatch):
    from manireg.curves.learners import KNNLearner

    campaign = make_campaign(tmp_path / "s.sqlite", learners=("knn",))

    def broken(self, cells, data):
        raise RuntimeError("solver diverged")

    monkeypatch.setattr(KNNLearner, "run", broken)
    res = campaign.run(progress=False)
    assert (res.rows["status"] == "failed").all() and res.rows["error"].str.contains("solver diverged").all()
    monkeypatch.undo()
    assert campaign.run(progress=False).summary["ran"] == 0
    res = campaign.run(progress=False, retry_failed=True)
    assert (res.rows["status"] == "ok").all() and len(res.rows) == 6


def test_keyboard_interrupt_keeps_finished_cells(tmp_path, monkeypatch):
    campaign = make_campaign(tmp_path / "s.sqlite", learners=("knn",))
    inner, count = ex.run_unit, [0]

    def interrupt_third(*a, **k):
        count[0] += 1
        if count[0] == 3:
            raise KeyboardInterrupt
        return inner(*a, **k)

    monkeypatch.setattr(ex, "run_unit", interrupt_third)
    with pytest.raises(KeyboardInterrupt):
        campaign.run(progress=False)
    assert len(campaign.result().rows) == 2
    monkeypatch.undo()
    assert campaign.run(progress=False).summary["ran"] == 4


def test_progress_bar_counts_cells(tmp_path, capsys):
    make_campaign(tmp_path / "s.sqlite", learners=("knn",)).run(progress=True)
    err = capsys.readouterr().err
    assert "6/6" in err


def test_bad_executor(tmp_path):
    campaign = make_campaign(tmp_path / "s.sqlite", learners=("knn",))
    with pytest.raises(ValueError, match="'executor' parameter of run_cells must be one of.*auto"):
        campaign.run(executor="threads")
    assert len(campaign.result().rows) == 0


def test_result_fit_and_plan(tmp_path):
    res = make_campaign(tmp_path / "s.sqlite", learners=("knn",)).run(progress=False)
    fit = res.fit("knn", n_boot=50, metric="test_mse_clean")
    assert np.isfinite(fit.to_dict()["exponent"])


def test_stop_flag_pauses_between_units_and_run_resumes(tmp_path):
    import threading

    campaign = make_campaign(tmp_path / "s.sqlite")
    total = len(campaign.cells())
    stop = threading.Event()
    seen = []

    def after_unit(rows):
        seen.append(len(rows))
        stop.set()  # ask to stop after the first unit

    res = campaign.run(progress=False, stop=stop, on_unit=after_unit)
    assert len(seen) == 1 and res.summary["stopped"] and 0 < len(res.rows) < total
    again = campaign.run(progress=False)  # resume
    assert len(again.rows) == total and again.summary["skipped"] == len(res.rows) and not again.summary["stopped"]


def test_auto_picks_by_estimated_time_and_gives_the_same_rows(tmp_path, reference, monkeypatch):
    # rows must not depend on the executor "auto" picks (same bit-for-bit comparison as above)
    monkeypatch.setattr(ex, "_last_pool", {})
    monkeypatch.setattr(ex, "FLOP_RATE", 1e30)  # any work is instant: starting workers never pays
    res = make_campaign(tmp_path / "a.sqlite").run(executor="auto", n_jobs=2, progress=False)
    assert res.summary["executor"] == "inprocess" and "flops" in res.summary["executor_reason"]
    _compare(res.rows, reference)
    monkeypatch.setattr(ex, "FLOP_RATE", 1.0)  # one flop a second: two workers halve hours of work
    res = make_campaign(tmp_path / "b.sqlite").run(executor="auto", n_jobs=2, progress=False)
    assert res.summary["executor"] == "processes"
    _compare(res.rows, reference)


def test_auto_rule_threshold_and_warm_workers(tmp_path, monkeypatch):
    import time

    import torch  # noqa: F401 - the rule counts no import cost once torch is loaded here

    campaign = make_campaign(tmp_path / "s.sqlite", learners=("net",))
    cells, data = campaign.cells(), campaign.data
    units = make_units(cells, data, 2)
    costs = [len(u) * ex._cell_cost(u, data) for u in units]
    total = sum(costs)
    assert max(costs) <= total / 2  # the balanced units fit a worker's share, so the closed form applies
    monkeypatch.setattr(ex, "_last_pool", {})
    monkeypatch.setattr(ex, "WORKER_START_SECONDS", 1.0)
    # closed form of the rule (choose_executor's docstring): in process iff W <= S r p / (p - 1), here
    # p = 2, S = 1 s: iff r >= W / 2 per second
    monkeypatch.setattr(ex, "FLOP_RATE", total / 2 * 1.01)
    assert ex.choose_executor(cells, data, 2)[0] == "inprocess"
    monkeypatch.setattr(ex, "FLOP_RATE", total / 2 * 0.99)
    assert ex.choose_executor(cells, data, 2)[0] == "processes"
    # workers used a moment ago cost no start-up: processes at any rate; one worker or one cell: in process
    monkeypatch.setattr(ex, "FLOP_RATE", total * 1e6)
    assert ex.choose_executor(cells, data, 2)[0] == "inprocess"
    ex._last_pool[2] = time.monotonic()
    assert ex.choose_executor(cells, data, 2)[0] == "processes"
    assert ex.choose_executor(cells, data, 1)[0] == "inprocess"
    assert ex.choose_executor(cells[:1], data, 2)[0] == "inprocess"
    ex._last_pool[2] = time.monotonic() - ex.WARM_SECONDS - 1  # joblib has let them go by now
    assert ex.choose_executor(cells, data, 2)[0] == "inprocess"


def test_a_unit_gives_its_freed_memory_back(monkeypatch, tmp_path):
    """Workers run unit after unit: each unit ends by collecting garbage and trimming the C heap, so a large
    cell's freed pages do not stay in the worker's resident memory under the next cell (glibc's malloc_trim,
    common practice for long-lived workers). Here: the trim runs once per unit, a failing unit included."""
    from manireg.curves import execution

    calls = []
    monkeypatch.setattr(execution, "_give_back_memory", lambda: calls.append(1))
    camp = make_campaign(tmp_path / "s.sqlite", learners=("knn",))
    cell = camp.cells()[0]
    assert execution.run_unit([cell], camp.data)[0]["status"] == "ok" and calls == [1]
    from manireg.curves.learners import KNNLearner

    def boom(self, cells, data):
        raise MemoryError("a cell too large for this worker")

    monkeypatch.setattr(KNNLearner, "run", boom)
    rows = execution.run_unit([cell], camp.data)
    assert rows[0]["status"] == "failed" and "MemoryError" in rows[0]["error"] and calls == [1, 1]
    monkeypatch.undo()
    execution._give_back_memory()  # the real one runs here (glibc or not) without raising
