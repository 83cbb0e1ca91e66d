"""Figures: legends carry exponent, interval and verdict; colours come from the style; every axis has numbers."""

import re

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
import pytest  # noqa: E402

from manireg import style  # noqa: E402
from manireg.curves import fit_all  # noqa: E402
from manireg.plots import plot_chart_counts, plot_learning_curves, plot_local_slopes, plot_reach  # noqa: E402


def _rows(learners=("net", "knn"), sizes=(100, 200, 400, 800, 1600), repeats=5, seed=0, span=1.0):
    """Synthetic curves err = a n^-b with 5% multiplicative noise; ``span`` scales log10 of the y range."""
    rng = np.random.default_rng(seed)
    out = []
    for i, learner in enumerate(learners):
        b = (0.5 + 0.1 * i) * span
        for n in sizes:
            for r in range(repeats):
                out.append({"learner": learner, "n": n, "repeat": r, "status": "ok",
                            "test_mse": 3.0 * n ** (-b) * (1 + 0.05 * rng.standard_normal())})
    return pd.DataFrame(out)


@pytest.fixture(scope="module")
def curve():
    rows = _rows()
    fits = fit_all(rows, n_boot=60, seed=0, smoothness=1.0, dimension=2.0, ambient_dim=50)
    return rows, fits


def _legend_texts(fig):
    return [t.get_text() for ax in fig.axes if ax.get_legend() for t in ax.get_legend().get_texts()]


def _visible_tick_labels(axis):
    axis.figure.canvas.draw()
    lo, hi = sorted(axis.get_view_interval())
    labels = [t for t in axis.get_majorticklabels() + axis.get_minorticklabels() if t.get_visible()]
    return [t.get_text() for t in labels if t.get_text() and lo <= (t.get_position()[0] if axis.axis_name == "x" else t.get_position()[1]) <= hi]


def test_learning_curve_legend_has_interval_and_verdict(curve):
    rows, fits = curve
    fig = plot_learning_curves(rows, fits)
    texts = _legend_texts(fig)
    pattern = re.compile(r"^(net|knn): exponent \d\.\d\d \[\d\.\d\d, \d\.\d\d\], (measured|not a power law over this range|insufficient data)$")
    assert sum(bool(pattern.match(t)) for t in texts) == 2, texts
    assert any(t.endswith("predicted exponent 0.50") for t in texts), texts  # 2s/(2s+d) = 2/4 for s=1, d=2
    assert any(t.startswith("ambient exponent") for t in texts), texts
    assert not any("slope" in t for t in texts)
    plt.close(fig)


def test_learner_colours_and_markers_come_from_the_style_whatever_the_order(curve):
    rows, fits = curve
    for frame in (rows, rows.iloc[::-1]):
        fig = plot_learning_curves(frame, fits)
        ax = fig.axes[0]
        for line in ax.get_lines():
            label = line.get_label()
            for learner in ("net", "knn"):
                if label.startswith(f"{learner}: exponent"):
                    assert matplotlib.colors.to_hex(line.get_color()) == style.learner_style(learner)["color"]
                    assert line.get_marker() == style.learner_style(learner)["marker"]
        plt.close(fig)


def test_one_decade_curve_has_numbers_on_its_y_axis():
    rows = _rows(learners=("net",), sizes=(200, 300, 400, 600, 800), span=0.5)  # y within a factor of about 2
    vals = rows["test_mse"]
    assert np.log10(vals.max() / vals.min()) < 1.0
    fig = plot_learning_curves(rows, None)
    labels = _visible_tick_labels(fig.axes[0].yaxis)
    assert len(labels) >= 2, labels
    assert all(re.fullmatch(r"[0-9.e+-]+", t) for t in labels), labels
    plt.close(fig)


def test_local_slopes_are_labelled_as_diagnostics(curve):
    _, fits = curve
    fig = plot_local_slopes(fits)
    texts = _legend_texts(fig)
    assert any(t == "net: local slope (diagnostic, no interval)" for t in texts), texts
    assert any(re.match(r"net: exponent \d\.\d\d \[", t) for t in texts), texts
    plt.close(fig)


def test_chart_counts_report_a_positive_dimension_like_slope():
    from manireg.geometry.charts import ChartCounts

    r = np.geomspace(0.1, 1.0, 8)
    N = 5.0 * r ** -2.0
    counts = ChartCounts(radii=r, counts=N, slope=-2.0, intercept=np.log(5.0), dimension_estimate=2.0,
                         fit_range=(0.1, 1.0), fit_mask=np.ones(8, bool), fit_rule="all", n_points=500)
    fig = plot_chart_counts(counts)
    texts = _legend_texts(fig)
    assert "dimension-like slope 2.00 (diagnostic, no interval)" in texts, texts
    plt.close(fig)


def test_reach_legend_shows_the_radius_used():
    from manireg.geometry.reach import ReachEstimate

    reach = ReachEstimate(reach=0.4, infimum=0.4, quantile=None, pair=(0, 1), pair_distance=0.1, recommended_radius=0.1,
                          radius_factor=0.25, dimension=2, n_neighbors=10, n_base=50, exclusion=0.01,
                          per_point=np.linspace(0.4, 1.2, 50), base_indices=np.arange(50))
    fig = plot_reach(reach, chart_radius=0.456)
    texts = _legend_texts(fig)
    assert "chart radius used 0.456" in texts, texts
    assert not any("0.1" == t.split()[-1] for t in texts)
    plt.close(fig)
    fig = plot_reach(reach)  # no radius given: the line is named for what it is
    assert any(t.startswith("radius the reach suggests") for t in _legend_texts(fig))
    plt.close(fig)
