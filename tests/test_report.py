"""The HTML report: header band, verdict badges, plain column names, a learner column where learners meet."""

import html
import json
import re

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402

from manireg import style  # noqa: E402
from manireg.curves import extrapolation_check, fit_all  # noqa: E402
from manireg.report import compose_report, write_report  # noqa: E402

# code names that used to reach the report's tables
SNAKE_HEADERS = ["interval_kind", "n_lo", "n_hi", "test_mse", "test_mse_clean", "nonzero_budget", "n_parameters",
                 "predicted_error", "predicted_error_ambient", "relative_error", "inside_band", "predicted_lo",
                 "predicted_hi", "n_samples", "ambient_dim", "noise_variance", "true_dimension", "dimension_used",
                 "step_cap", "c_depth", "width_max"]


class _Campaign:
    """The parts of a campaign result the report reads (rows, dimension, smoothness, ambient_dim, name, ...)."""

    def __init__(self, rows):
        self.rows, self.dimension, self.smoothness, self.ambient_dim = rows, 2.0, 1.0, 50
        self.name, self.dimension_source = "trial-7", "given"

    def to_dict(self):
        return {"name": self.name, "dimension": self.dimension, "smoothness": self.smoothness, "ambient_dim": self.ambient_dim}


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    rng = np.random.default_rng(1)
    rows = pd.DataFrame([
        {"learner": learner, "n": n, "repeat": r, "status": "ok",
         "test_mse": 3.0 * n ** (-b) * (1 + 0.05 * rng.standard_normal()), "stop_reason": "converged"}
        for learner, b in (("net", 0.6), ("knn", 0.4)) for n in (100, 200, 400, 800, 1600) for r in range(5)])
    fits = fit_all(rows, n_boot=60, seed=0, smoothness=1.0, dimension=2.0, ambient_dim=50)
    checks = [extrapolation_check(rows, name, n_boot=60, seed=0) for name in ("net", "knn")]
    sections, summary = compose_report(title="trial report", data={"source": "trial.csv", "n_samples": 1600, "ambient_dim": 50,
                                                                  "noise_variance": 0.010000000000000002, "target": None},
                                       campaign=_Campaign(rows), fits=fits, extrapolation=checks,
                                       settings={"seed": 0, "floor": None, "sizes": [100, 200, 400, 800, 1600]})
    out = tmp_path_factory.mktemp("report")
    paths = write_report(str(out), "trial report", sections, summary, save_png=False)
    with open(paths["html"], encoding="utf-8") as fh:
        text = fh.read()
    return text, paths, fits


def _headers(text):
    return re.findall(r"<th(?:\s[^>]*)?>(.*?)</th>", text)


def test_header_band_names_data_campaign_date_and_versions(report):
    text, _, _ = report
    band = re.search(r"<header class='mr-band'>(.*?)</header>", text, re.S).group(1)
    for label, value in (("data", "trial.csv"), ("campaign", "trial-7")):
        assert f"<dt>{label}</dt><dd>{value}</dd>" in band
    assert "<dt>written</dt>" in band
    assert re.search(r"<dt>versions</dt><dd>manireg \S+ \u00b7 numpy \S+", band)


def test_no_snake_case_column_header(report):
    text, _, _ = report
    headers = _headers(text)
    assert headers
    assert not set(headers) & set(SNAKE_HEADERS), set(headers) & set(SNAKE_HEADERS)
    assert not [h for h in headers if re.fullmatch(r"[a-z]+(_[a-z0-9]+)+", h)]


def test_verdict_badges_for_every_fit(report):
    text, _, fits = report
    for f in fits:
        assert style.verdict_badge(f.verdict)["label"] in text
        assert f"{f.learner}</span><span>" in text  # the verdict list names the learner beside its badge
    assert text.count("class='mr-badge'") >= 2 * len(fits)  # verdict list and exponent table


def test_extrapolation_table_has_a_learner_column(report):
    text, _, _ = report
    sec = text[text.index("Extrapolation check"):]
    table = sec[sec.index("<table"):sec.index("</table>")]
    assert _headers(table)[0] == "learner"
    assert "<td class='lbl nw'>net</td>" in table and "<td class='lbl nw'>knn</td>" in table


def test_numbers_and_none_are_plain(report):
    text, paths, _ = report
    assert "0.010000000000000" not in text
    assert "<td class='lbl nw'>0.01</td>" in text
    assert "<td class='lbl nw'>none</td>" in text  # target None and floor None read "none"
    assert ">None<" not in text and ">nan<" not in text
    with open(paths["summary"], encoding="utf-8") as fh:
        assert json.load(fh)["data"]["target"] is None  # the JSON keeps null


def test_report_text_says_campaign(report):
    text, _, _ = report
    words = html.unescape(re.sub(r"<[^>]+>", " ", text))
    assert "Campaign 'trial-7'" in words
    assert "study" not in words.lower()
