"""The training budget rule, the evidence cells (budget and capacity checks) and the diagnoses."""

import math

import numpy as np
import pandas as pd
import pytest

from manireg.curves import Campaign, LearnerSpec
from manireg.curves.evidence import (DIAGNOSES, EvidenceSettings, diagnose, evidence_name, gate_verdict,
                                     summarise_evidence)
from manireg.curves.fitting import VERDICT_MEASURED, VERDICT_OPTIMISATION_LIMITED, VERDICTS, fit_all, fit_exponent
from manireg.curves.learners import make_learner
from manireg.curves.readout import read_out
from manireg.theory.sizing import TrainingBudget, training_budget, width_capped

TINY = {"max_steps": 30, "min_steps": 10, "patience_steps": 20, "eval_every": 10}


# ------------------------------------------------------------------------------------------ budget rule
@pytest.mark.parametrize("n_fit,width,steps", [
    (200, 32, 500),       # full batch (n_fit <= 256): 20 epochs = 20 steps, below the floor of 500
    (3277, 64, 520),      # ceil(3277/128) = 26 steps per epoch x 20 epochs = 520
    (12800, 200, 2000),   # 100 steps per epoch x 20 = 2000
    (80000, 512, 4000),   # 625 x 20 = 12500, clipped to the ceiling of 4000
])
def test_step_budget_closed_form(n_fit, width, steps):
    # closed form of the documented rule: clip(ceil(epochs * ceil(n_fit / rows)), steps_min, steps_max)
    r = training_budget(n_fit, width)
    assert r["max_steps"] == steps
    assert training_budget(n_fit, width, budget=TrainingBudget(multiplier=2))["max_steps"] == 2 * steps
    rows = n_fit if n_fit <= 256 else 128
    assert r["epochs"] == pytest.approx(steps * rows / n_fit)
    assert r["patience_steps"] == math.ceil(0.2 * steps)


def test_learning_rate_rule_closed_form():
    b = TrainingBudget(lr_base=1e-2, lr_width_ref=64, lr_width_power=0.5)
    # lr = lr_base * min(1, 64 / width)^0.5: width 256 -> 1e-2 / 2; narrower than 64 keeps lr_base
    assert training_budget(1000, 256, budget=b)["learning_rate"] == pytest.approx(5e-3)
    assert training_budget(1000, 64, budget=b)["learning_rate"] == pytest.approx(1e-2)
    assert training_budget(1000, 16, budget=b)["learning_rate"] == pytest.approx(1e-2)
    # the default rule: 1e-2 * 64 / width, e.g. 1e-2 * 64 / 295 at the benchmark's n = 4096
    assert training_budget(3277, 295)["learning_rate"] == pytest.approx(1e-2 * 64 / 295)
    flat = TrainingBudget(lr_base=3e-3, lr_width_power=0.0)
    assert training_budget(1000, 512, budget=flat)["learning_rate"] == pytest.approx(3e-3)


def test_large_n_nets_see_their_data_more_often_than_a_fixed_cap():
    # the old fixed budget of 500 steps of 128 rows saw n_fit = 12800 rows 5 times; the rule sees them 20 times
    assert 500 * 128 / 12800 == 5.0
    assert training_budget(12800, 200)["epochs"] == pytest.approx(20.0)
    small = [training_budget(n, 32)["max_steps"] for n in (20, 60, 200)]
    assert small == [500, 500, 500]  # small-n nets are never cut off below the floor


def test_net_learner_uses_the_rule_unless_steps_are_given(small_campaign_data):
    data = small_campaign_data
    ruled = make_learner(LearnerSpec("net"))
    cfg = ruled.train_config(160, data)
    arch = ruled.architecture(160, data)
    expect = training_budget(160 - data.n_val(160), arch.width)
    assert (cfg.max_steps, cfg.learning_rate) == (expect["max_steps"], pytest.approx(expect["learning_rate"]))
    assert "budget" in ruled.resolve(data)
    fixed = make_learner(LearnerSpec("net", params=TINY))
    assert fixed.train_config(160, data).max_steps == 30 and "budget" not in fixed.resolve(data)
    doubled = make_learner(LearnerSpec("net", params=dict(TINY, budget_multiplier=2)))
    assert doubled.train_config(160, data).max_steps == 60


def test_width_capped_closed_form():
    # d = 2, s = 1: width rule 2 sqrt(n); 2 sqrt(65536) = 512 is not above 512, 2 sqrt(66000) is
    assert not width_capped(65536, 2, 1)
    assert width_capped(66000, 2, 1)


# ------------------------------------------------------------------------------------------ evidence cells
@pytest.fixture(scope="module")
def small_campaign_data():
    from manireg.data import make_regression, manifolds

    sample = make_regression(manifolds.sphere(400, d=2, ambient_dim=5, seed=0), 1.0, noise_std=0.1, seed=1)
    return Campaign.from_regression_sample(sample, sizes=[40, 80, 160], repeats=2, learners=["knn"]).data


@pytest.mark.filterwarnings("ignore:fit_exponent. only 2 repeats")
def test_evidence_cells_keep_their_own_labels_and_never_retrain(tmp_path):
    from manireg.data import make_regression, manifolds

    sample = make_regression(manifolds.sphere(400, d=2, ambient_dim=5, seed=0), 1.0, noise_std=0.1, seed=1)
    kw = dict(sizes=[40, 80, 160], repeats=2, learners=[LearnerSpec("net", params=TINY), "knn"], seed=0,
              store=str(tmp_path / "c.sqlite"))
    campaign = Campaign.from_regression_sample(sample, **kw)
    checks = EvidenceSettings(budget_repeats=1, capacity_sizes=1)
    result = campaign.run(progress=False, evidence=checks)
    assert set(result.rows["learner"]) == {"net", "knn"}
    labels = {evidence_name("net", "budget", 2), evidence_name("net", "budget", 4), evidence_name("net", "capacity", 2)}
    assert set(result.evidence["learner"]) == labels == {"net budget x2", "net budget x4", "net width x2"}
    # one cell per size and budget factor, the largest size with 2x width; same n, repeat and seed as the checked cell
    assert len(result.evidence) == 3 * 2 + 1
    assert not set(result.evidence["key"]) & set(result.rows["key"])
    main = result.rows.set_index("key")
    for _, r in result.evidence.iterrows():
        assert (main.loc[r["checked_key"], "n"], main.loc[r["checked_key"], "seed"]) == (r["n"], r["seed"])
    wide = result.evidence[result.evidence["check"] == "capacity"].iloc[0]
    assert wide["width"] > main.loc[wide["checked_key"], "width"]
    # the main fit sees only the main curve
    assert set(fit_all(result.rows, floor=None).fits) == {"net", "knn"}
    # running again trains nothing
    again = Campaign.from_regression_sample(sample, **kw).run(progress=False, evidence=checks)
    assert again.summary["ran"] == 0 and again.summary["evidence"]["ran"] == 0
    # reloading from the store splits the rows the same way
    loaded = Campaign.from_store(str(tmp_path / "c.sqlite"))
    assert set(loaded.rows["learner"]) == {"net", "knn"} and len(loaded.evidence) == len(result.evidence)
    assert {"width_capped", "train_to_noise"} <= set(loaded.rows.columns)
    ev = loaded.evidence_summary()
    assert set(ev) == {"net"} and len(ev["net"].budget) == 3 and len(ev["net"].capacity) == 1


# ------------------------------------------------------------------------------------------ verdict and diagnosis
SIZES = [250, 500, 1000, 2000, 4000, 8000]


def _rows(exponent=0.5, repeats=5, seed=0, bend=None, sizes=SIZES):
    rng = np.random.default_rng(seed)
    recs = []
    for r in range(repeats):
        shift = 0.02 * rng.standard_normal()
        for n in sizes:
            b = exponent if bend is None or n <= bend[0] else bend[1]
            log_err = math.log(2.0) - exponent * math.log(n)
            if bend is not None and n > bend[0]:
                log_err = math.log(2.0) - exponent * math.log(bend[0]) - b * (math.log(n) - math.log(bend[0]))
            err = math.exp(log_err + shift + 0.01 * rng.standard_normal())
            recs.append({"key": f"k{n}-{r}", "learner": "net", "n": n, "repeat": r, "test_mse": err, "train_mse": err,
                         "steps": 500, "stop_reason": "step_cap", "late_best": True, "status": "ok"})
    return pd.DataFrame(recs)


def _evidence(rows, moved_n=None, factor_drop=0.5):
    recs = []
    for _, r in rows[rows["repeat"] == 0].iterrows():
        for f in (2.0, 4.0):
            drop = factor_drop if (r["n"] == moved_n and f == 4.0) else 1.0 - 0.001
            recs.append({"key": f"e{r['key']}-{f}", "learner": f"net budget x{f:g}", "n": r["n"], "repeat": 0,
                         "test_mse": r["test_mse"] * drop, "status": "ok", "check": "budget", "factor": f,
                         "checked_learner": "net", "checked_key": r["key"]})
    return pd.DataFrame(recs)


def test_optimisation_limited_verdict_when_end_cells_move_with_budget():
    rows = _rows()
    fit = fit_exponent(rows, "net", floor=None)
    assert fit.verdict != VERDICT_OPTIMISATION_LIMITED  # fit_exponent alone never gives it
    assert VERDICT_OPTIMISATION_LIMITED in VERDICTS
    # the largest cell halves its error with 4x the steps: a move of 50 %, against a seed spread of about 2 %
    ev = summarise_evidence(rows, _evidence(rows, moved_n=8000))["net"]
    assert ev.limited_sizes == [8000]
    gated = gate_verdict(fit, ev)
    assert gated.verdict == VERDICT_OPTIMISATION_LIMITED and "n = 8000" in gated.verdict_reason
    ro = read_out(rows, dimension=2, smoothness=1, floor=None, evidence={"net": ev})
    assert ro.fits["net"].verdict == VERDICT_OPTIMISATION_LIMITED
    assert ro.diagnoses["net"].causes[0] == "optimiser"
    assert "8000" in ro.diagnoses["net"].text and ro.diagnoses["net"].evidence


def test_no_optimisation_limited_verdict_when_nothing_moves_or_only_the_middle_moves():
    rows = _rows()
    fit = fit_exponent(rows, "net", floor=None)
    ev = summarise_evidence(rows, _evidence(rows, moved_n=None))["net"]
    assert ev.limited_sizes == [] and ev.checked
    kept = gate_verdict(fit, ev)
    assert kept.verdict == fit.verdict and "none moved" in kept.verdict_reason
    middle = summarise_evidence(rows, _evidence(rows, moved_n=1000))["net"]
    assert middle.limited_sizes == [1000]
    assert gate_verdict(fit, middle).verdict == fit.verdict


def test_diagnosis_of_a_bending_curve():
    # exponent 1.0 up to n = 1000, 0.3 beyond: the curve flattens; 5 repeats, 1 % cell noise
    sizes = [125, 250, 500, 1000, 2000, 4000, 8000, 16000]
    rows = _rows(exponent=1.0, bend=(1000, 0.3), sizes=sizes)
    ro = read_out(rows, dimension=4, smoothness=1, floor=None)
    f = ro.fits["net"]
    assert f.verdict != VERDICT_MEASURED
    dg = ro.diagnoses["net"]
    assert dg.causes and set(dg.causes) <= set(DIAGNOSES)
    assert "pre-asymptotic" in dg.causes and "flattens" in dg.text
    assert dg.to_dict()["text"] == dg.text and ro.to_frame()["diagnosis"].iloc[0] == dg.text


def test_measured_curve_has_no_diagnosis():
    # a clean power law (exponent 0.5, 1.5 decades, 5 repeats, 1 % cell noise) earns its exponent
    fit = fit_exponent(_rows(), "net", floor=None)
    assert fit.verdict == VERDICT_MEASURED and diagnose(fit) is None
    # the same curve over half a decade does not, and then it always gets a diagnosis
    short = fit_exponent(_rows(sizes=[1000, 2000, 3000]), "net", floor=None)
    assert short.verdict != VERDICT_MEASURED and diagnose(short).text


def test_evidence_settings_reject_bad_values():
    with pytest.raises(ValueError, match="budget_factors"):
        EvidenceSettings(budget_factors=(1.0,))
    with pytest.raises(ValueError, match="budget_repeats"):
        EvidenceSettings(budget_repeats=-1)


def test_curves_command_with_evidence(tmp_path, capsys):
    import json

    from manireg.cli import main
    from manireg.data import make_regression, sphere

    reg = make_regression(sphere(400, 2, ambient_dim=5, seed=3), 1.0, noise_std=0.1, seed=4)
    df = pd.DataFrame(reg.X, columns=[f"x{j}" for j in range(5)])
    df["y"] = reg.y
    csv = tmp_path / "s.csv"
    df.to_csv(csv, index=False)
    argv = ["curves", str(csv), "--target", "y", "--sizes", "40", "80", "160", "--repeats", "2", "--learners", "net",
            "--no-geometry", "--dimension", "2", "--smoothness", "1", "--evidence", "--quiet", "--out", str(tmp_path / "o")]
    assert main(argv) == 0
    text = capsys.readouterr().out
    assert "evidence cells" in text
    summary = json.loads((tmp_path / "o" / "summary.json").read_text())
    assert set(summary["exponents"]) == {"net"}  # the evidence cells are not a curve of their own
    assert summary["evidence"]["net"]["budget"]
    for name, d in summary.get("diagnoses", {}).items():
        assert d["text"] and d["causes"]
    assert main(argv) == 0  # again: nothing is retrained
    assert "evidence cells (budget and capacity checks of the nets): " in capsys.readouterr().out
