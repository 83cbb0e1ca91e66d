"""Classification campaigns: labels with exact Bayes probabilities, metrics against scikit-learn, the kNN
classifier against scikit-learn's, a small campaign, bad input, the reference exponent, digits."""

import numpy as np
import pandas as pd
import pytest
from sklearn.metrics import accuracy_score, log_loss
from sklearn.neighbors import KNeighborsClassifier

from manireg.cli import main
from manireg.curves import Campaign, CampaignSpec
from manireg.curves.baselines import knn_class_proba
from manireg.curves.fitting import VERDICTS
from manireg.curves.metrics import (calibration_error, classification_metrics, cross_entropy, error_rate,
                                    excess_error_rate, excess_logistic_risk)
from manireg.curves.sweep import expand, prepare
from manireg.data import sphere
from manireg.data.labels import encode_labels, make_classification
from manireg.theory.classification import logistic_excess_risk_exponent


def test_labels_follow_the_bayes_probabilities():
    # Labels are drawn from bayes_proba: per class, the count over n points is a sum of independent
    # Bernoullis with mean sum_i eta_ik; a 5-sigma band fails with probability < 1e-6 per class.
    c = make_classification(sphere(6000, d=2, ambient_dim=5, seed=0), n_classes=3, temperature=0.5, seed=1)
    eta = c.bayes_proba
    np.testing.assert_allclose(eta.sum(axis=1), 1.0)
    for k in range(3):
        mean, var = eta[:, k].sum(), (eta[:, k] * (1 - eta[:, k])).sum()
        assert abs((c.y == k).sum() - mean) < 5 * np.sqrt(var)
    # binary link: P(y = 1 | x) = 1 / (1 + exp(-f / T)) (closed form)
    b = make_classification(sphere(300, d=2, ambient_dim=5, seed=0), temperature=0.25, seed=2)
    np.testing.assert_allclose(b.bayes_proba[:, 1], 1 / (1 + np.exp(-b.scores[:, 0] / 0.25)))
    # symmetric label noise rho: eta -> (1 - rho) eta + rho / K
    n = make_classification(sphere(300, d=2, ambient_dim=5, seed=0), temperature=0.25, label_noise=0.2, seed=2)
    np.testing.assert_allclose(n.bayes_proba, 0.8 * b.bayes_proba + 0.1)
    assert n.bayes_error_rate > b.bayes_error_rate and 0 < b.bayes_cross_entropy < np.log(2)


def test_metrics_against_sklearn_and_the_bayes_probabilities():
    rng = np.random.default_rng(0)
    P = rng.dirichlet(np.ones(4), size=500)
    y = rng.integers(0, 4, 500)
    # scikit-learn's log_loss / accuracy_score (reference) on the same probabilities
    assert cross_entropy(P, y) == pytest.approx(log_loss(y, P, labels=[0, 1, 2, 3]), rel=1e-12)
    assert error_rate(P, y) == pytest.approx(1 - accuracy_score(y, P.argmax(axis=1)))
    # excess risks: zero for the Bayes probabilities (by construction), positive for any perturbation
    eta = rng.dirichlet(np.ones(4), size=500)
    assert excess_logistic_risk(eta, eta) == pytest.approx(0.0, abs=1e-12)
    assert excess_error_rate(eta, eta) == 0.0
    for scale in (1e-3, 0.1):
        Q = eta * np.exp(scale * rng.normal(size=eta.shape))
        Q /= Q.sum(axis=1, keepdims=True)
        assert excess_logistic_risk(Q, eta) > 0
    assert excess_error_rate(np.roll(eta, 1, axis=1), eta) > 0
    # calibration error: 0 when confidence equals accuracy in every bin (one bin, confidence 0.75, 3 of 4
    # right, closed form), and |acc - conf| for a single bin
    P2 = np.tile([0.75, 0.25], (4, 1))
    assert calibration_error(P2, [0, 0, 0, 1]) == pytest.approx(0.0)
    assert calibration_error(P2, [0, 1, 1, 1]) == pytest.approx(0.5)
    m = classification_metrics(P, y)
    assert m["excess_logistic_risk"] is None and m["test_error_rate"] == error_rate(P, y)


def test_knn_classifier_agrees_with_sklearn():
    # sklearn.neighbors.KNeighborsClassifier (reference) with the same k: same probabilities and labels.
    rng = np.random.default_rng(1)
    X, Q = rng.normal(size=(300, 4)), rng.normal(size=(120, 4))
    y = rng.integers(0, 3, 300)
    for k in (1, 7, 30):
        ref = KNeighborsClassifier(n_neighbors=k, algorithm="brute").fit(X, y)
        mine = knn_class_proba(X, y, Q, k, 3)
        np.testing.assert_allclose(mine, ref.predict_proba(Q))
        np.testing.assert_array_equal(mine.argmax(axis=1), ref.predict(Q))
    smoothed = knn_class_proba(X, y, Q, 7, 3, smoothing=0.5)
    assert smoothed.min() > 0 and np.allclose(smoothed.sum(axis=1), 1)


def test_encode_labels():
    assert encode_labels(["b", "a", "b"])[1] == ["a", "b"]
    codes, classes = encode_labels([3, 1, 3.0])
    assert classes == [1, 3] and codes.tolist() == [1, 0, 1]
    for bad, match in (([0.5, 1.0], "not whole numbers"), (["a", None], "missing"), (["a", 1], "mixes")):
        with pytest.raises(ValueError, match=match):
            encode_labels(bad)


def test_classification_campaign_rows_and_keys(tmp_path):
    gen = {"manifold": "sphere", "n": 600, "d": 2, "ambient_dim": 6, "n_classes": 3, "temperature": 0.3, "seed": 0}
    learners = [{"kind": "net_classifier", "params": {"max_steps": 40, "min_steps": 0}}, "knn_classifier", "logistic"]
    campaign = Campaign(generator=gen, task="classify", sizes=[60, 200], repeats=2, learners=learners,
                        store=str(tmp_path / "c.sqlite"))
    assert campaign.data.n_classes == 3 and campaign.data.bayes_proba.shape == (600, 3)
    rows = campaign.run(progress=False).rows
    assert (rows["status"] == "ok").all() and len(rows) == 12
    for col in ("test_cross_entropy", "excess_logistic_risk", "test_error_rate", "excess_error_rate", "calibration_error"):
        assert rows[col].notna().all(), col
    assert (rows["excess_logistic_risk"] > 0).all() and (rows["excess_error_rate"] >= 0).all()
    assert rows["test_mse"].isna().all()
    # regression keys do not change with the task field (the task enters the key only when it is "classify")
    X, y = np.random.default_rng(0).normal(size=(100, 3)), np.random.default_rng(1).normal(size=100)
    spec = CampaignSpec(X=X, y=y, sizes=[20, 40], repeats=1, learners=["knn"], dimension=2)
    assert "task" not in expand(spec)[0].config
    cells = expand(campaign.data)
    assert cells[0].config["task"] == "classify"


def test_classification_bad_input():
    X = np.random.default_rng(0).normal(size=(200, 3))
    base = dict(X=X, sizes=[20, 40], repeats=1, dimension=2, task="classify", learners=["knn_classifier"])
    with pytest.raises(ValueError, match="at least 2 classes"):
        prepare(CampaignSpec(y=np.zeros(200), **base))
    y = np.r_[np.zeros(190), np.ones(10)]
    with pytest.raises(ValueError, match="fewer than the smallest size 20"):
        prepare(CampaignSpec(y=y, **base))
    with pytest.raises(ValueError, match="do not do task 'classify'"):
        prepare(CampaignSpec(y=np.arange(200) % 2, **{**base, "learners": ["knn"]}))
    with pytest.raises(ValueError, match="bayes_proba"):
        prepare(CampaignSpec(y=np.arange(200) % 2, bayes_proba=np.ones((200, 3)) / 3, **base))


def test_cli_classify_bad_labels_exit_2_and_keep_the_store(tmp_path, capsys):
    rng = np.random.default_rng(0)
    df = pd.DataFrame(rng.normal(size=(200, 3)), columns=["a", "b", "c"])
    store = tmp_path / "keep.sqlite"
    store.write_bytes(b"")
    common = ["--target", "label", "--task", "classify", "--dimension", "2", "--no-geometry", "--sizes", "40", "80",
              "--store", str(store), "--out", str(tmp_path / "out"), "--quiet"]
    cases = {"one": ["x"] * 200, "cont": rng.normal(size=200), "rare": ["x"] * 195 + ["y"] * 5}
    messages = {"one": "at least 2 classes", "cont": "cannot be read as classes", "rare": "fewer than the smallest size"}
    for name, labels in cases.items():
        path = tmp_path / f"{name}.csv"
        df.assign(label=labels).to_csv(path, index=False)
        assert main(["curves", str(path)] + common) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and messages[name] in err[0], err
        assert store.read_bytes() == b""  # nothing written to (or removed from) the store
    assert main(["curves", str(path), "--target", "label", "--task", "classify", "--learners", "knn",
                 "--dimension", "2", "--no-geometry", "--quiet"]) == 2


def test_cli_classify_writes_the_report(tmp_path, monkeypatch):
    # A small labelled table through `manireg curves --task classify`: report.html, summary.json with each
    # classification metric's exponents (interval and verdict), the reference exponent with its source, and
    # figure legends that read the same numbers as summary.json.
    import json

    import manireg.plots

    drawn = []
    original = manireg.plots.plot_learning_curves

    def recording(rows, fits=None, **kw):
        fig = original(rows, fits, **kw)
        drawn.append((kw.get("metric"), [t.get_text() for t in fig.axes[0].get_legend().get_texts()]))
        return fig

    monkeypatch.setattr(manireg.plots, "plot_learning_curves", recording)
    c = make_classification(sphere(700, d=2, ambient_dim=4, seed=0), n_classes=2, temperature=0.3, seed=1)
    path = tmp_path / "labels.csv"
    pd.DataFrame(c.X, columns=["a", "b", "c", "e"]).assign(label=np.where(c.y == 1, "yes", "no")).to_csv(path, index=False)
    out = tmp_path / "out"
    assert main(["curves", str(path), "--target", "label", "--task", "classify", "--dimension", "2", "--no-geometry",
                 "--sizes", "40", "80", "160", "320", "--repeats", "3", "--learners", "knn_classifier", "logistic",
                 "--out", str(out), "--quiet"]) == 0
    page = (out / "report.html").read_text()
    summary = json.loads((out / "summary.json").read_text())
    fits = summary["classification_exponents"]
    # no Bayes probabilities in a data file: the excess risks are not measured, the other three are
    assert list(fits) == ["test_error_rate", "test_cross_entropy", "calibration_error"]
    for metric, per_learner in fits.items():
        assert sorted(per_learner) == ["knn_classifier", "logistic"]
        for f in per_learner.values():
            lo, hi = f["interval"]
            assert lo <= f["exponent"] <= hi and f["verdict"] in VERDICTS
    ref = summary["classification_reference"]
    assert ref["predicted_exponent"] == pytest.approx(logistic_excess_risk_exponent(1.0, 2.0))
    assert "Liu" in ref["source"] and "convolutional residual" in page and "Liu" in page
    assert summary["figures"] == [f"learning_curves_{m}.png" for m in fits]
    # each figure's legend: "learner: exponent e [lo, hi], verdict" with summary.json's numbers
    assert [m for m, _ in drawn] == list(fits)
    for metric, legend in drawn:
        expected = [f"{name}: exponent {f['exponent']:.2f} [{f['interval'][0]:.2f}, {f['interval'][1]:.2f}], {f['verdict']}"
                    for name, f in fits[metric].items()]
        assert legend == expected, (metric, legend)
    # the store rebuilds the same read-out without training; `manireg plan` refuses in one line
    assert main(["report", "--store", str(out / "campaign.sqlite"), "--out", str(tmp_path / "again"), "--quiet"]) == 0
    again = json.loads((tmp_path / "again" / "summary.json").read_text())
    for metric, per_learner in fits.items():
        for name, f in per_learner.items():
            g = again["classification_exponents"][metric][name]
            assert g["exponent"] == pytest.approx(f["exponent"]) and g["verdict"] == f["verdict"]
    assert main(["plan", "--store", str(out / "campaign.sqlite"), "--target-error", "0.1"]) == 2


def test_logistic_reference_exponent():
    # s / (2s + 2 max(s, d)) (Liu, Chen, Zhao, Liao, ICML 2021, abstract)
    assert logistic_excess_risk_exponent(1.0, 2.0) == pytest.approx(1 / 6)
    assert logistic_excess_risk_exponent(3.0, 2.0) == pytest.approx(3 / 12)
    np.testing.assert_allclose(logistic_excess_risk_exponent(np.array([1.0, 3.0]), 2.0), [1 / 6, 1 / 4])
    with pytest.raises(ValueError):
        logistic_excess_risk_exponent(0.0, 2.0)


@pytest.mark.slow
def test_digits_dimension_and_campaign(tmp_path):
    # scikit-learn's bundled 8x8 digits (no download): intrinsic dimension from the estimators' consensus,
    # then a small campaign with the fully connected net and kNN. Exponents come with verdicts; they are
    # not asserted to equal any theory, only to show falling error (positive exponent) for both learners.
    from sklearn.datasets import load_digits

    from manireg.curves.fitting import fit_exponent
    from manireg.geometry import estimate_dimension

    X, y = load_digits(return_X_y=True)
    with pytest.warns(UserWarning):  # the estimators' own notes (too few points for d ~ 7, disagreement)
        dim = estimate_dimension(X)
    assert 3 <= dim.consensus <= 30, dim.consensus  # far below the 64 pixels (common practice: digits d ~ 10)
    learners = [{"kind": "net_classifier", "params": {"max_steps": 100}}, "knn_classifier"]
    campaign = Campaign(X=X, y=y, task="classify", sizes=[90, 300, 1000], repeats=3, learners=learners,
                        dimension=float(round(dim.consensus)), test_size=350, store=str(tmp_path / "d.sqlite"))
    rows = campaign.run(progress=False).rows
    assert rows["excess_error_rate"].isna().all()  # no Bayes probabilities for real data
    for learner in ("net_classifier", "knn_classifier"):
        with pytest.warns(UserWarning, match="3 repeats"):
            fit = fit_exponent(rows, learner, metric="test_error_rate", floor=None)
        assert fit.verdict in VERDICTS
        assert fit.exponent > 0


def test_cli_conv_image_shape_and_label_column_errors(tmp_path, capsys):
    # --image-shape that does not match the columns, --image-shape without a conv learner, and a misspelt label
    # column: exit 2 with one line naming the fix; no store is created
    rng = np.random.default_rng(0)
    path = tmp_path / "img.csv"
    pd.DataFrame(rng.normal(size=(120, 16)), columns=[f"p{i}" for i in range(16)]).assign(
        label=np.arange(120) % 2).to_csv(path, index=False)
    store = tmp_path / "s.sqlite"
    common = ["--task", "classify", "--dimension", "2", "--no-geometry", "--sizes", "40", "80", "--store", str(store),
              "--out", str(tmp_path / "out"), "--quiet"]
    cases = [(["--target", "label", "--learners", "conv_classifier", "--image-shape", "3", "5"], "image_shape (1, 3, 5)"),
             (["--target", "label", "--learners", "knn_classifier", "--image-shape", "4", "4"], "add conv_net"),
             (["--target", "lable"], "Did you mean 'label'?")]
    for extra, message in cases:
        assert main(["curves", str(path)] + common + extra) == 2
        err = capsys.readouterr().err.strip().splitlines()
        assert len(err) == 1 and message in err[0], err
        assert not store.exists()


def test_core_classification_read_out_is_the_fit_with_the_table_floor():
    # the one core call the CLI, the report and the panel format: each metric's fit equals fit_exponent with the
    # floor of CLASSIFY_METRICS; metrics without values are left out
    from manireg.curves.fitting import fit_exponent
    from manireg.curves.readout import CLASSIFY_METRICS, classification_read_out

    rng = np.random.default_rng(3)
    rows = []
    for n in (50, 100, 200, 400, 800, 1600):
        for r in range(3):
            rows.append({"learner": "a", "n": n, "repeat": r, "status": "ok",
                         "test_error_rate": 0.1 + 2 * n ** -0.5 * np.exp(rng.normal(0, 0.05)),
                         "calibration_error": n ** -0.4 * np.exp(rng.normal(0, 0.05))})
    rows = pd.DataFrame(rows)
    ro = classification_read_out(rows, smoothness=1.0, dimension=2.0)
    assert list(ro.fits) == ["test_error_rate", "calibration_error"]
    for metric, fits in ro.fits.items():
        direct = fit_exponent(rows, "a", metric=metric, floor=CLASSIFY_METRICS[metric])
        assert fits[0].exponent == pytest.approx(direct.exponent) and fits[0].interval == pytest.approx(direct.interval)
    assert ro.reference["predicted_exponent"] == pytest.approx(logistic_excess_risk_exponent(1.0, 2.0))
    assert set(ro.to_frame()["metric"]) == {"test_error_rate", "calibration_error"}
