"""The command line: each command end to end on small settings, the report's contents, bad input."""

import json
import os
import re
import signal
import sqlite3
import subprocess
import sys
import time

import numpy as np
import pandas as pd
import pytest

from manireg.cli import main

ENV = {**os.environ, "PYTHONWARNINGS": "ignore"}


def _cli(*args, timeout=600):
    return subprocess.run([sys.executable, "-m", "manireg", *args], capture_output=True, text=True, timeout=timeout, env=ENV)


@pytest.fixture(scope="module")
def sphere_csv(tmp_path_factory):
    """A 2-sphere in R^8 with a Lipschitz target (s = 1), written as CSV."""
    from manireg.data import make_regression, sphere

    reg = make_regression(sphere(700, 2, ambient_dim=8, seed=3), 1.0, noise_std=0.1, seed=4)
    df = pd.DataFrame(reg.X, columns=[f"x{j}" for j in range(8)])
    df["y"] = reg.y
    path = tmp_path_factory.mktemp("data") / "sphere.csv"
    df.to_csv(path, index=False)
    return path


@pytest.fixture(scope="module")
def finished_campaign(sphere_csv, tmp_path_factory):
    out = tmp_path_factory.mktemp("campaign")
    r = _cli("curves", str(sphere_csv), "--target", "y", "--sizes", "40", "80", "160", "320", "--repeats", "3",
             "--learners", "knn", "net", "--no-view", "--quiet", "--out", str(out), "--smoothness", "1",
             "--precision", "float32")
    assert r.returncode == 0, r.stderr
    return out, r


def test_campaign_writes_report_consistent_with_core(finished_campaign):
    out, r = finished_campaign
    summary = json.loads((out / "summary.json").read_text())
    for key in ("data", "geometry", "sizing", "campaign", "rows", "exponents", "optimisation_limited", "settings", "versions", "note", "figures"):
        assert key in summary, key
    # the report's exponents equal the core fit on the same stored rows with the same settings
    from manireg.curves import Campaign

    res = Campaign.from_store(out / "campaign.sqlite")
    from manireg.curves.floors import DEFAULT_FLOOR

    core = res.fit("knn", floor=DEFAULT_FLOOR, smoothness=1.0, seed=0)
    rep = summary["exponents"]["knn"]
    assert rep["exponent"] == pytest.approx(core.exponent, rel=1e-9)
    assert rep["verdict"] == core.verdict and rep["interval"] == pytest.approx(list(core.interval))
    assert len(summary["rows"]) == len(res.rows) == 2 * 4 * 3
    # --precision reaches the nets (and is recorded per row); the baselines have none
    assert set(res.rows.loc[res.rows.learner == "net", "precision"]) == {"float32"}
    assert res.rows.loc[res.rows.learner == "knn", "precision"].isna().all()
    assert summary["settings"]["precision"] == "float32"
    # every exponent shown with its interval and verdict in the printed summary
    assert re.search(r"knn: exponent [0-9.]+ \[95% interval [0-9.]+, [0-9.]+\] - verdict: ", r.stdout)
    html = (out / "report.html").read_text()
    for name in summary["figures"]:
        assert f"id='fig-{name[:-4]}'" in html
        assert (out / "figures" / name).exists()
    assert "asymptotic statements" in html and "data:image/png;base64," in html
    # no raw Python warning or library chatter on the screen: every warning is one "warning: ..." line
    for text in (r.stdout, r.stderr):
        assert not re.search(r"\w+Warning:|\.py:\d+|Traceback|Tensorflow", text), text


def test_report_rebuilds_from_store_without_training(finished_campaign, tmp_path):
    out, _ = finished_campaign
    before = sqlite3.connect(out / "campaign.sqlite").execute("SELECT COUNT(*) FROM cells").fetchone()[0]
    assert main(["report", "--store", str(out / "campaign.sqlite"), "--out", str(tmp_path), "--quiet"]) == 0
    after = sqlite3.connect(out / "campaign.sqlite").execute("SELECT COUNT(*) FROM cells").fetchone()[0]
    assert before == after  # nothing trained, nothing added
    a = json.loads((out / "summary.json").read_text())["exponents"]["knn"]
    b = json.loads((tmp_path / "summary.json").read_text())["exponents"]["knn"]
    assert a["exponent"] == pytest.approx(b["exponent"]) and a["verdict"] == b["verdict"]


def test_size_from_rules_and_plan_from_store(finished_campaign, capsys):
    out, _ = finished_campaign
    assert main(["size", "--dimension", "2", "--smoothness", "1", "--ambient-dim", "64"]) == 0
    text = capsys.readouterr().out
    # 2s/(2s+d) = 0.5 for s = 1, d = 2 (REFERENCES.md exponent table); halving the error takes 2^(1/0.5) = 4x
    assert "2s/(2s+d) = 0.500" in text and "needs 4x the samples" in text
    # sizing constants reach the table: twice c_width doubles the width below the cap
    assert main(["size", "--dimension", "2", "--smoothness", "1", "--sizes", "100", "--sizing", "c_width=4"]) == 0
    wide = capsys.readouterr().out
    assert main(["size", "--dimension", "2", "--smoothness", "1", "--sizes", "100"]) == 0
    plain = capsys.readouterr().out
    assert wide != plain
    rc = main(["plan", "--store", str(out / "campaign.sqlite"), "--learner", "knn", "--target-error", "0.3", "--allow-unverified"])
    text = capsys.readouterr().out
    assert rc == 0 and "samples for test error 0.3" in text


def test_geometry_command_on_csv(sphere_csv, tmp_path, capsys):
    assert main(["geometry", str(sphere_csv), "--target", "y", "--no-view", "--quiet", "--out", str(tmp_path)]) == 0
    text = capsys.readouterr().out
    geo = json.loads((tmp_path / "geometry.json").read_text())
    assert 1.5 < geo["dimension"]["consensus"] < 2.6  # a 2-sphere
    assert "consensus" in text and (tmp_path / "dimension_profile.png").exists()


def test_demo_quick(tmp_path):
    r = _cli("demo", "--quick", "--quiet", "--out", str(tmp_path))
    assert r.returncode == 0, r.stderr
    summary = json.loads((tmp_path / "summary.json").read_text())
    assert summary["data"]["true_dimension"] == 2 and summary["data"]["ambient_dim"] == 1024
    assert set(summary["exponents"]) == {"net", "knn"}
    assert "report:" in r.stdout and (tmp_path / "report.html").exists()
    # each learner against its own reference rate, in the printout and the summary
    assert r.stdout.count("against theory:") == 2 and set(summary["theory"]) == {"net", "knn"}
    _no_raw_warnings(r.stdout, r.stderr)


def _no_raw_warnings(*texts):
    """No raw Python warning, traceback, source line or library chatter: each condition is one line in our words."""
    for text in texts:
        assert not re.search(r"\w+Warning:|\.py:\d+|Traceback|Tensorflow|NumbaWarning", text), text


def test_every_command_speaks_in_one_line_warnings(finished_campaign, sphere_csv, tmp_path, capsys):
    out, _ = finished_campaign
    store = str(out / "campaign.sqlite")
    for argv in (["geometry", str(sphere_csv), "--no-view", "--quiet", "--out", str(tmp_path / "g")],
                 ["size", "--dimension", "2", "--smoothness", "1", "--ambient-dim", "8"],
                 ["plan", "--store", store, "--learner", "knn", "--target-error", "0.3", "--allow-unverified"],
                 ["report", "--store", store, "--quiet", "--out", str(tmp_path / "r")]):
        main(argv)
        captured = capsys.readouterr()
        _no_raw_warnings(captured.out, captured.err)


@pytest.mark.parametrize(
    "args,message",
    [
        (["geometry", "nope.csv"], "no such file"),
        (["curves", "{csv}", "--target", "price"], "target column 'price' is not in"),
        (["curves", "{csv}", "--target", "Y"], "Did you mean 'y'?"),
        (["curves", "{csv}", "--target", "y", "--sizes", "100", "100000", "--no-geometry", "--dimension", "2"], "size"),
        (["curves", "{nan}", "--target", "y"], "missing or infinite"),
        (["curves", "{csv}", "--target", "y", "--repeats", "0"], "--repeats must be >= 1"),
        (["curves", "{csv}", "--target", "y", "--no-geometry"], "--no-geometry needs --dimension"),
        (["curves", "{csv}", "--target", "y", "--floor", "sometimes"], "--floor"),
        (["curves", "{csv}", "--target", "y", "--sizing", "c_widht=4"], "Did you mean 'c_width'?"),
        (["size", "--dimension", "2", "--smoothness", "0"], "must be > 0"),
        (["report", "--store", "missing.sqlite"], "no store at"),
        (["plan", "--store", "missing.sqlite", "--target-error", "0.1"], "no store at"),
    ],
)
def test_bad_input_exit_2_one_line(args, message, sphere_csv, tmp_path, capsys):
    nan_csv = tmp_path / "nan.csv"
    pd.DataFrame({"a": [1.0, np.nan, 2.0], "y": [1.0, 2.0, 3.0]}).to_csv(nan_csv, index=False)
    args = [a.format(csv=sphere_csv, nan=nan_csv) for a in args] + (["--out", str(tmp_path / "o")] if args[0] not in ("plan", "size") else [])
    rc = main(args)
    err = capsys.readouterr().err
    assert rc == 2
    assert message in err and "Traceback" not in err
    assert err.count("\n") == 1


def test_unwritable_out_folder(tmp_path, capsys):
    blocker = tmp_path / "file"
    blocker.write_text("x")
    assert main(["demo", "--quick", "--out", str(blocker / "sub")]) == 2
    assert "cannot create output folder" in capsys.readouterr().err


def test_no_command_prints_help(capsys):
    assert main([]) == 2
    assert "usage" in capsys.readouterr().out


def test_interrupt_then_resume(sphere_csv, tmp_path):
    out = tmp_path / "run"
    args = [sys.executable, "-m", "manireg", "curves", str(sphere_csv), "--target", "y", "--sizes", "40", "80", "160", "320",
            "--repeats", "3", "--learners", "net", "knn", "--no-geometry", "--dimension", "2", "--quiet", "--out", str(out)]
    # a shell without job control starts background commands with SIGINT ignored, and Python then installs no
    # handler; give the child the default disposition, as an interactive terminal would
    proc = subprocess.Popen(args, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=ENV,
                            preexec_fn=lambda: signal.signal(signal.SIGINT, signal.SIG_DFL))
    store = out / "campaign.sqlite"
    deadline = time.time() + 300
    n_rows = 0
    while time.time() < deadline and proc.poll() is None:
        if store.exists():
            try:
                n_rows = sqlite3.connect(store, timeout=5).execute("SELECT COUNT(*) FROM cells").fetchone()[0]
            except sqlite3.OperationalError:
                n_rows = 0
            if n_rows >= 1:
                break
        time.sleep(0.05)
    if proc.poll() is not None:
        pytest.skip("the campaign finished before it could be interrupted")
    proc.send_signal(signal.SIGINT)
    _, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err
    assert "interrupted" in err and "Traceback" not in err
    kept = sqlite3.connect(store).execute("SELECT COUNT(*) FROM cells").fetchone()[0]
    assert kept >= 1
    r = subprocess.run(args, capture_output=True, text=True, timeout=600, env=ENV)
    assert r.returncode == 0, r.stderr
    keys = [k for (k,) in sqlite3.connect(store).execute("SELECT key FROM cells")]
    assert len(keys) == len(set(keys)) == 2 * 4 * 3  # every cell once
    # the second run says that it resumed and how much was left
    found = re.search(r"resuming: (\d+) cells already in the store, (\d+) to run", r.stdout)
    assert found and int(found.group(1)) >= kept and int(found.group(1)) + int(found.group(2)) == 24


def test_sizes_beyond_the_data_fail_before_any_file(sphere_csv, tmp_path, capsys):
    out = tmp_path / "o"
    assert main(["curves", str(sphere_csv), "--target", "y", "--sizes", "100", "5000", "--quiet", "--out", str(out)]) == 2
    err = capsys.readouterr().err
    assert "only 560 rows are left for training" in err and "--test-size" in err
    assert not out.exists()  # no folder, no empty store
    # the fix it names: a smaller test set (rows or a share); a bad value is refused with both forms
    for bad in ("0", "-3", "12.5"):
        assert main(["curves", str(sphere_csv), "--target", "y", "--sizes", "100", "600", "--test-size", bad, "--quiet",
                     "--out", str(out)]) == 2
        assert "--test-size" in capsys.readouterr().err
    assert not out.exists()


def test_test_size_sets_the_fixed_test_set(sphere_csv, tmp_path):
    from manireg.curves import ResultStore

    for value, rows in (("50", 50), ("0.1", 70)):  # 700 rows in the table
        store = tmp_path / f"s{value}.sqlite"
        assert main(["curves", str(sphere_csv), "--target", "y", "--sizes", "100", "200", "--repeats", "1", "--learners",
                     "knn", "--no-geometry", "--dimension", "2", "--smoothness", "1", "--test-size", value, "--quiet",
                     "--store", str(store), "--out", str(tmp_path / value)]) == 0
        assert ResultStore(store).campaign_meta("campaign")["test_size"] == rows


def test_id_column_is_a_one_flag_fix(sphere_csv, tmp_path, capsys):
    df = pd.read_csv(sphere_csv)
    df.insert(0, "sample_id", np.arange(len(df)))
    path = tmp_path / "with_id.csv"
    df.to_csv(path, index=False)
    assert main(["geometry", str(path), "--no-view", "--quiet", "--out", str(tmp_path / "a")]) == 2
    err = capsys.readouterr().err
    assert "--drop sample_id" in err and err.count("\n") == 1
    assert main(["geometry", str(path), "--drop", "sample_id", "y", "--no-view", "--quiet", "--out", str(tmp_path / "b")]) == 0
    assert "8 feature columns" in capsys.readouterr().out


@pytest.mark.parametrize("argv,new", [(["study", "x.csv"], "'study' is now 'curves'"),
                                      (["report", "--study", "a"], "'--study' is now '--campaign'"),
                                      (["size", "--input-dim", "3"], "'--input-dim' is now '--ambient-dim'"),
                                      (["plan", "--from-store", "s.sqlite"], "'--from-store' is now '--store'")])
def test_old_names_get_the_new_name(argv, new, capsys):
    assert main(argv) == 2
    err = capsys.readouterr().err
    assert "usage:" in err and new in err


def test_report_figures_and_settings_agree_with_the_summary(finished_campaign, tmp_path):
    # every legend of the learning-curve figure and every row of the settings table come from the same
    # read-out as summary.json (the report never recomputes a number)
    from manireg import style
    from manireg.curves import Campaign
    from manireg.report import compose_report

    out, _ = finished_campaign
    result = Campaign.from_store(out / "campaign.sqlite")
    ro = result.read_out(seed=0)
    settings = {"floor": "noise-variance estimate", "dimension": result.dimension, "smoothness": result.smoothness,
                "noise_estimate": result.noise_estimate}
    sections, summary = compose_report(title="t", data={"source": "sphere.csv"}, campaign=result, fits=ro.fits,
                                       theory=ro.theory, plan=ro.plan, plan_note=ro.plan_note, settings=settings)
    figs = {name: fig for sec in sections for name, fig, _ in sec.figures}
    legend = [t.get_text() for t in figs["learning_curves"].axes[0].get_legend().get_texts()]
    for name, fit in summary["exponents"].items():
        shown = [t for t in legend if t.startswith(name + ":") and "exponent" in t and "predicted" not in t]
        assert shown, (name, legend)
        # the legend's exponent, interval and verdict are the summary's, to the digits shown
        assert style.fmt_number(fit["exponent"], 2) in shown[0] and fit["verdict"] in shown[0]
        assert summary["theory"][name]["verdict"] in {c.verdict for c in ro.theory.values()}
    table = [frame for sec in sections for cap, frame in sec.tables if cap == "Settings"][0]
    shown = dict(zip(table["setting"], table["value"]))
    for key, value in summary["settings"].items():
        assert shown[style.plain_label(key)] == style.fmt_value(value)
