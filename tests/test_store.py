"""The result store: resume after SIGKILL, concurrent writers, no duplicates, no lost rows, clear errors."""

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from manireg.curves.store import ResultStore, StoreError
from manireg.curves.sweep import ROW_COLUMNS

HERE = Path(__file__).parent
WORKER = HERE / "_campaign_worker.py"
sys.path.insert(0, str(HERE))
from _campaign_worker import make_campaign  # noqa: E402


def _row(key, status="ok", test=1.0, campaign="s"):
    row = dict.fromkeys(ROW_COLUMNS)
    row.update(key=key, campaign=campaign, learner="knn", n=10, repeat=0, seed=1, test_mse=test, status=status,
               error=None if status == "ok" else "boom")
    return row


def _spawn(store, *args):
    env = dict(os.environ, OMP_NUM_THREADS="1", PYTHONPATH=os.pathsep.join(sys.path))
    return subprocess.Popen([sys.executable, str(WORKER), str(store), *args], env=env,
                            stdout=subprocess.PIPE, stderr=subprocess.PIPE)


def test_put_is_idempotent_and_failed_rows_are_kept_until_retried(tmp_path):
    store = ResultStore(tmp_path / "s.sqlite")
    assert store.put(_row("a", test=1.0))
    assert not store.put(_row("a", test=2.0))  # an ok row is never overwritten
    assert store.put(_row("b", status="failed"))
    assert not store.put(_row("b", status="failed"))
    assert store.finished_keys() == {"a", "b"}
    assert store.finished_keys(include_failed=False) == {"a"}
    assert store.put(_row("b", test=3.0))  # a retry replaces the failed row
    df = store.rows()
    assert len(df) == 2 and df.set_index("key").loc["a", "test_mse"] == 1.0
    assert df.set_index("key").loc["b", "status"] == "ok"
    con = __import__("sqlite3").connect(store.path)
    assert con.execute("PRAGMA journal_mode").fetchone()[0] == "wal"
    con.close()


def test_store_from_an_older_version_gains_new_columns_and_keeps_its_rows(tmp_path):
    import sqlite3

    path = tmp_path / "old.sqlite"
    old_columns = [c for c in ROW_COLUMNS if c != "precision"]  # the schema before rows recorded precision
    con = sqlite3.connect(path)
    from manireg.curves.store import _TYPES

    con.execute(f"CREATE TABLE cells ({', '.join(f'{c!r} {_TYPES[c]}' for c in old_columns)})")
    con.execute("INSERT INTO cells (key, campaign, learner, n, repeat, test_mse, status) "
                "VALUES ('old', 's', 'knn', 10, 0, 0.5, 'ok')")
    con.commit()
    con.close()
    store = ResultStore(path)
    assert store.put(_row("new", test=0.25) | {"precision": "float32"})
    df = store.rows().set_index("key")
    assert df.loc["old", "test_mse"] == 0.5 and df.loc["new", "test_mse"] == 0.25
    assert df.loc["new", "precision"] == "float32" and pd.isna(df.loc["old", "precision"])
    assert store.finished_keys() == {"old", "new"}


def test_unwritable_path_is_a_clear_error(tmp_path):
    ro = tmp_path / "ro"
    ro.mkdir()
    ro.chmod(0o500)
    try:
        if os.access(ro, os.W_OK):  # running as root: permissions do not bind
            pytest.skip("permissions are not enforced for this user")
        with pytest.raises(StoreError, match="cannot write the result store at .*ro.*Pass a path"):
            ResultStore(ro / "s.sqlite")
    finally:
        ro.chmod(0o700)


def test_store_path_that_is_a_folder(tmp_path):
    with pytest.raises(StoreError, match="is a folder"):
        ResultStore(tmp_path)


def test_unwritable_store_fails_before_any_work_and_keeps_rows(tmp_path):
    good = tmp_path / "s.sqlite"
    campaign = make_campaign(good, learners=("knn",))
    campaign.run(progress=False)
    before = len(ResultStore(good))
    (tmp_path / "blocker").write_text("a file, so no folder can be made here")
    with pytest.raises(StoreError, match="cannot write the result store"):
        make_campaign(tmp_path / "blocker" / "s.sqlite", learners=("knn",))
    assert len(ResultStore(good)) == before == 6


def test_resume_after_sigkill_matches_uninterrupted_run(tmp_path):
    killed = tmp_path / "killed.sqlite"
    proc = _spawn(killed, "--delay", "0.4")
    try:
        deadline = time.monotonic() + 120
        n = 0
        while time.monotonic() < deadline and proc.poll() is None:
            if killed.exists():
                try:
                    n = len(ResultStore(killed))
                except Exception:  # noqa: BLE001 - the worker may be creating the schema
                    n = 0
                if n >= 1:
                    break
            time.sleep(0.05)
        assert proc.poll() is None, "the worker finished before it could be killed: " + proc.stderr.read().decode()
        proc.send_signal(signal.SIGKILL)
        proc.wait(30)
    finally:
        if proc.poll() is None:
            proc.kill()
    partial = ResultStore(killed).rows()
    total = len(make_campaign(tmp_path / "probe.sqlite").cells())
    assert 1 <= len(partial) < total

    resumed = make_campaign(killed).run(progress=False)
    assert resumed.summary["skipped"] == len(partial)
    clean = make_campaign(tmp_path / "clean.sqlite").run(progress=False)
    a = resumed.rows.set_index("key").sort_index()
    b = clean.rows.set_index("key").sort_index()
    assert len(a) == len(b) == total and a.index.is_unique
    assert list(a.index) == list(b.index)
    np.testing.assert_allclose(a["test_mse"], b["test_mse"], rtol=1e-5)
    assert (a["status"] == "ok").all()


def test_two_processes_writing_one_store(tmp_path):
    store = tmp_path / "shared.sqlite"
    procs = [_spawn(store, "--learners", "knn,kernel_ridge") for _ in range(2)]
    for p in procs:
        out, err = p.communicate(timeout=180)
        assert p.returncode == 0, err.decode()
    df = ResultStore(store).rows()
    cells = make_campaign(tmp_path / "probe.sqlite", learners=("knn", "kernel_ridge")).cells()
    assert len(df) == len(cells) and df["key"].is_unique
    assert set(df["key"]) == {c.key for c in cells}
    assert (df["status"] == "ok").all()


def test_concurrent_puts_from_threads_lose_nothing(tmp_path):
    import threading

    store = ResultStore(tmp_path / "s.sqlite")

    def write(offset):
        for i in range(40):
            store.put(_row(f"k{(i + offset) % 60}"))

    threads = [threading.Thread(target=write, args=(o,)) for o in (0, 20, 40)]
    for t in threads:
        t.start()
    for t in threads:
        t.join()
    assert store.finished_keys() == {f"k{i}" for i in range(60)}


def test_campaign_metadata_rebuilds_result(tmp_path):
    from manireg.curves.campaign import Campaign

    path = tmp_path / "s.sqlite"
    res = make_campaign(path, learners=("knn",)).run(progress=False)
    back = Campaign.from_store(path)
    assert back.name == "resume" and back.dimension == res.dimension and back.smoothness == res.smoothness and back.ambient_dim == 8
    assert back.noise_variance == pytest.approx(0.01)
    assert sorted(back.rows["key"]) == sorted(res.rows["key"])
    with pytest.raises(ValueError, match="holds no campaign 'other'"):
        Campaign.from_store(path, campaign="other")


# ------------------------------------------------------------------ stores written before the campaign vocabulary
FIXTURE = os.path.join(os.path.dirname(__file__), "data", "store_before_campaigns.sqlite")


def _legacy_campaign(store):
    # the settings the fixture was written with (tests/data/store_before_campaigns.sqlite, 12 ok rows)
    from manireg.curves import Campaign, LearnerSpec

    # the fixture's data used the ridge target that was then the default (kind="lacunary")
    return Campaign(generator={"manifold": "sphere", "n": 400, "d": 2, "ambient_dim": 5, "smoothness": 1.0,
                               "noise_std": 0.1, "seed": 3, "kind": "lacunary"},
                    sizes=[40, 80, 160], repeats=2, learners=[LearnerSpec("knn"), LearnerSpec("net", params={"max_steps": 60})],
                    seed=1, name="legacy", store=store)


def test_old_store_migrates_in_place_with_every_row(tmp_path):
    import shutil
    import sqlite3

    from manireg.curves.store import SCHEMA_VERSION

    path = str(tmp_path / "old.sqlite")
    shutil.copy(FIXTURE, path)
    before = sqlite3.connect(path).execute("SELECT COUNT(*), SUM(test_mse) FROM cells").fetchone()
    store = ResultStore(path)
    assert os.path.exists(path + ".before-migration")
    assert store.campaigns() == ["legacy"]
    meta = store.campaign_meta("legacy")
    assert meta["dimension"] == 2.0 and meta["smoothness"] == 1.0 and meta["ambient_dim"] == 5
    assert meta["spec"]["name"] == "legacy" and meta["spec"]["validation_fraction"] == 0.2
    rows = store.rows("legacy")
    assert len(rows) == before[0] == 12 and rows["test_mse"].sum() == pytest.approx(before[1])
    con = sqlite3.connect(path)
    assert con.execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION
    # opening again is a no-op
    assert len(ResultStore(path).rows()) == 12
    # the same settings find every migrated cell finished: nothing is trained again
    campaign = _legacy_campaign(path)
    assert store.finished_keys(include_failed=False) == {c.key for c in campaign.cells()}
    result = campaign.run(progress=False)
    assert result.summary["ran"] == 0 and len(result.rows) == 12


def test_store_from_a_newer_version_is_refused_unchanged(tmp_path):
    import sqlite3

    path = str(tmp_path / "new.sqlite")
    con = sqlite3.connect(path)
    con.execute("CREATE TABLE cells (key TEXT PRIMARY KEY)")
    con.execute("PRAGMA user_version = 99")
    con.commit()
    con.close()
    size = os.path.getsize(path)
    with pytest.raises(StoreError, match="newer manireg"):
        ResultStore(path)
    assert os.path.getsize(path) == size


# ------------------------------------------------------------------ stores of schema 1 and the geometry cache
FIXTURE_V1 = os.path.join(os.path.dirname(__file__), "data", "store_schema_1.sqlite")


def test_schema_1_store_gains_the_geometry_table_and_keeps_every_row(tmp_path):
    import shutil
    import sqlite3

    from manireg.curves.store import SCHEMA_VERSION, geometry_key

    path = str(tmp_path / "v1.sqlite")
    shutil.copy(FIXTURE_V1, path)  # written by schema 1 (12 ok rows of campaign "v1"), before the geometry table
    before = sqlite3.connect(path).execute("SELECT COUNT(*), SUM(test_mse) FROM cells").fetchone()
    store = ResultStore(path)
    assert not os.path.exists(path + ".before-migration")  # an added table rewrites nothing: no copy
    rows = store.rows("v1")
    assert len(rows) == before[0] == 12 and rows["test_mse"].sum() == pytest.approx(before[1])
    assert store.campaign_meta("v1")["dimension"] == 2.0
    assert sqlite3.connect(path).execute("PRAGMA user_version").fetchone()[0] == SCHEMA_VERSION == 2
    key = geometry_key("abc", {"seed": 0})
    assert store.geometry(key) is None
    assert store.put_geometry(key, {"x": np.arange(3)}, fingerprint="abc", settings={"seed": 0}, notes=["warning: w"])
    got, notes, _ = ResultStore(path).geometry(key)
    assert np.array_equal(got["x"], np.arange(3)) and notes == ["warning: w"]


def test_geometry_read_out_round_trips_through_the_store(tmp_path):
    from manireg.curves.store import decode_result, encode_result
    from manireg.data import sphere
    from manireg.geometry import describe_geometry

    X = sphere(300, 2, ambient_dim=6, seed=1).points
    with pytest.warns(UserWarning):
        geo = describe_geometry(X, embed=False, n_boot=20, seed=0)
    store = ResultStore(tmp_path / "g.sqlite")
    assert store.put_geometry("k", geo, fingerprint="f", settings={})
    back, _, _ = store.geometry("k")
    assert type(back) is type(geo) and type(back.dimension) is type(geo.dimension)
    assert back.to_dict() == geo.to_dict() and str(back) == str(geo)
    assert np.array_equal(back.assignments, geo.assignments) and back.assignments.dtype == geo.assignments.dtype
    assert np.array_equal(back.reach.per_point, geo.reach.per_point, equal_nan=True)
    # anything that is not a manireg result, an array or a plain value is refused, never pickled
    assert not store.put_geometry("bad", {"f": open}, fingerprint="f", settings={})
    with pytest.raises(ValueError, match="not a manireg module"):
        decode_result({"__dataclass__": "os:PathLike", "fields": {}})
    assert decode_result(encode_result((1, np.float32(2.5), {3: "a"}))) == (1, np.float32(2.5), {3: "a"})


def test_second_curves_run_reads_the_geometry_from_the_store(tmp_path, monkeypatch, capsys):
    import manireg.cli.geometry as cli_geometry
    from manireg.cli import main
    from manireg.data import make_regression, sphere

    reg = make_regression(sphere(400, 2, ambient_dim=6, seed=3), 1.0, noise_std=0.1, seed=4)
    df = pd.DataFrame(reg.X, columns=[f"x{j}" for j in range(6)])
    df["y"] = reg.y
    csv = tmp_path / "d.csv"
    df.to_csv(csv, index=False)
    real = cli_geometry.describe
    calls = []

    def counting(*a, **kw):
        calls.append(kw)
        return real(*a, **kw)

    monkeypatch.setattr(cli_geometry, "describe", counting)
    argv = ["curves", str(csv), "--target", "y", "--sizes", "50", "100", "200", "--repeats", "2", "--learners", "knn",
            "--no-view", "--quiet", "--smoothness", "1", "--out", str(tmp_path / "o")]
    assert main(argv) == 0
    first = capsys.readouterr().out
    assert len(calls) == 1

    def refuse(*a, **kw):
        raise AssertionError("the geometry read-out was computed again")

    monkeypatch.setattr(cli_geometry, "describe", refuse)
    assert main(argv) == 0
    second = capsys.readouterr().out
    assert "read from the store" in second
    summary = json.loads((tmp_path / "o" / "summary.json").read_text())
    consensus = summary["geometry"]["dimension"]["consensus"]
    # the same consensus line as the first run (the stored read-out is the computed one)
    line = [ln for ln in first.splitlines() if "consensus" in ln][0]
    assert line in second and consensus is not None
    # a changed setting (--seed) or changed data computes it again (stopped right there: nothing else to check)
    class Recomputed(BaseException):
        pass

    def stop(*a, **kw):
        raise Recomputed

    monkeypatch.setattr(cli_geometry, "describe", stop)
    with pytest.raises(Recomputed):
        main(argv + ["--seed", "1"])
    df.loc[0, "x0"] += 1e-3
    df.to_csv(csv, index=False)
    with pytest.raises(Recomputed):
        main(argv)
