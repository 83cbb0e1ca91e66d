"""Panels without a browser: set control values, check the core call and the displayed numbers."""

import numpy as np
import pytest

pytest.importorskip("ipywidgets")

from manireg.curves import execution, fitting  # noqa: E402
from manireg.curves.campaign import Campaign  # noqa: E402
from manireg.data import make_regression, sphere  # noqa: E402
from manireg.widgets import CurvePanel, GeometryPanel, SizingPanel, WorkbenchPanel  # noqa: E402

# tiny campaigns have 2 repeats on purpose (speed); the fit's warning about that is expected here
pytestmark = pytest.mark.filterwarnings("ignore:fit_exponent.*repeats:UserWarning")

TINY_NET = {"kind": "net", "params": {"max_steps": 120, "min_steps": 40, "patience_steps": 80, "eval_every": 20}}


class Spy:
    """Wraps a function, records every call and passes it on."""

    def __init__(self, func):
        self.func = func
        self.calls = []

    def __call__(self, *args, **kwargs):
        self.calls.append((args, kwargs))
        return self.func(*args, **kwargs)


@pytest.fixture(scope="module")
def sample():
    return make_regression(sphere(400, 2, ambient_dim=5, seed=0), 1.0, noise_std=0.1, seed=1)


@pytest.fixture(scope="module")
def finished_campaign(sample, tmp_path_factory):
    campaign = Campaign.from_regression_sample(sample, sizes=[24, 48, 96, 192], repeats=2, learners=[TINY_NET, "knn"],
                                         store=str(tmp_path_factory.mktemp("campaign") / "s.sqlite"))
    campaign.run(progress=False)
    return campaign


# ------------------------------------------------------------------------------------------------ sizing
def test_sizing_panel_calls_size_network_with_control_values(monkeypatch):
    import manireg.theory.sizing as sizing

    spy = Spy(sizing.size_network)
    monkeypatch.setattr(sizing, "size_network", spy)
    panel = SizingPanel(n=1000, d=2.0, s=1.0, input_dim=10)
    width_before, html_before = panel.spec.width, panel.spec_html.value
    start = len(spy.calls)
    panel.n.value = 20000
    # the panel's own spec call (the plot's sizing_table also calls size_network over its grid)
    assert (20000, 2.0, 1.0, 10) in [c[0] for c in spy.calls[start:]]
    assert panel.spec.width > width_before
    assert panel.spec_html.value != html_before
    assert f"{panel.spec.n_parameters:,}" in panel.spec_html.value

    panel.constants["c_width"].value = 4.0
    assert spy.calls[-1][1]["constants"].c_width == 4.0
    panel.d.value = 3.0
    assert spy.calls[-1][0][1] == 3.0
    assert panel.exponent == pytest.approx(2.0 / (2.0 + 3.0))
    res = panel.results()
    assert res.n == 20000 and res.spec is panel.spec
    assert res.to_dict()["constants"]["c_width"] == 4.0


def test_sizing_panel_plot_uses_sizing_table():
    import manireg.theory.sizing as sizing

    if not hasattr(sizing, "sizing_table"):
        pytest.skip("manireg.theory.sizing.sizing_table is not available yet")
    panel = SizingPanel(n=1000, d=2.0, s=1.0, input_dim=10)
    assert panel.error is None and panel.table is not None
    png = panel.image.value
    assert png[:4] == b"\x89PNG"
    panel.s.value = 2.0
    assert panel.image.value != png


def test_sizing_panel_shows_errors_instead_of_raising():
    panel = SizingPanel(n=1000, d=2.0, s=1.0, input_dim=10)
    panel.d.value = 50.0  # d > D: size_network refuses
    assert panel.error is not None and "input_dim" in panel.error
    assert "failed" in panel.status.value


# ---------------------------------------------------------------------------------------------- geometry
def test_geometry_panel_dimension_and_charts(sample, monkeypatch):
    import manireg.geometry.charts as charts
    import manireg.geometry.dimension as dimension

    spy = Spy(dimension.estimate_dimension)
    monkeypatch.setattr(dimension, "estimate_dimension", spy)
    panel = GeometryPanel(sample.X, sample.y, estimators=("mle", "twonn"), scales=(5, 10, 20), n_boot=20)
    assert panel.error is None, panel.error
    assert spy.calls[-1][1]["k_min"] == 10
    assert panel.consensus == pytest.approx(2.0, abs=0.5)
    assert panel.chart_dimension.value == 2
    html_before = panel.dimension_html.value
    panel.k_range.value = (6, 12)
    assert spy.calls[-1][1]["k_min"] == 6 and spy.calls[-1][1]["k_max"] == 12
    assert panel.dimension_html.value != html_before
    panel.scales.value = "4, 8, 16"
    assert spy.calls[-1][1]["scales"] == [4, 8, 16]
    assert list(panel.report.profile.scale[panel.report.profile.rows("mle")]) == [4, 8, 16]
    assert panel.profile_image.value[:4] == b"\x89PNG"

    atlas_spy = Spy(charts.ChartAtlas)
    monkeypatch.setattr(charts, "ChartAtlas", atlas_spy)
    charts_before = panel.charts_html.value
    panel.radius.value = 0.5
    assert atlas_spy.calls[-1][1]["radius"] == 0.5
    assert panel.atlas.radius_ == 0.5
    assert panel.charts_html.value != charts_before
    res = panel.results()
    assert res.chart_dimension == 2 and res.atlas.radius == 0.5
    assert res.to_dict()["dimension"] == pytest.approx(panel.consensus)


def test_geometry_panel_embedding_only_on_button(sample, monkeypatch):
    import manireg.geometry.embedding as embedding

    def fake_embed(X, random_state=0, n_neighbors=15, **kw):  # UMAP is slow; the wiring is what is tested
        return embedding.Embedding2D(np.asarray(X)[:, :2].copy(), "pca", n_neighbors, 0.1, random_state)

    spy = Spy(fake_embed)
    monkeypatch.setattr(embedding, "embed_2d", spy)
    panel = GeometryPanel(sample.X, sample.y, estimators=("mle",), scales=(5, 10), n_boot=0)
    assert spy.calls == [] and panel.embedding is None
    panel.umap_neighbors.value = 9
    panel.seed.value = 3
    panel.embed_button.click()
    assert spy.calls[-1][1] == {"random_state": 3, "n_neighbors": 9}
    target_png = panel.embedding_image.value
    assert target_png[:4] == b"\x89PNG"
    panel.colour_by.value = "chart"
    assert panel.embedding_image.value != target_png
    panel.colour_by.value = "dimension"
    assert panel.local_dimension is not None and len(panel.local_dimension) == len(sample.X)
    assert len(spy.calls) == 1  # colouring does not recompute the view


def test_geometry_panel_bad_input_is_shown_not_raised(sample):
    panel = GeometryPanel(sample.X, estimators=("mle",), scales=(5, 10), n_boot=0)
    panel.scales.value = "five, ten"
    assert panel.error is not None and "scales" in panel.error
    panel.scales.value = "5, 10"
    assert panel.error is None
    panel.chart_dimension.value = 4  # a tangent space of 4 directions in R^5 is allowed; 5 is not
    panel.min_points.value = 3  # min_points must exceed d
    assert panel.error is not None and "min_points" in panel.error
    assert "failed" in panel.status.value


# ------------------------------------------------------------------------------------------------ curves
def test_curve_panel_runs_in_background_and_matches_fit_exponent(sample, tmp_path, monkeypatch):
    campaign = Campaign.from_regression_sample(sample, sizes=[24, 48, 96, 192], repeats=2, learners=[TINY_NET, "knn"],
                                         store=str(tmp_path / "s.sqlite"))
    total = len(campaign.cells())
    real_run_unit = execution.run_unit
    panel = CurvePanel(campaign, n_boot=20, seed=0, target_error=0.02)
    assert panel.progress.value == 0 and panel.progress.max == total
    ran = []

    def run_and_pause_after_first_unit(unit, *args, **kwargs):
        ran.append(len(unit))
        out = real_run_unit(unit, *args, **kwargs)
        if len(ran) == 1:
            panel.pause()  # the stop flag is read between units
        return out

    monkeypatch.setattr(execution, "run_unit", run_and_pause_after_first_unit)
    panel.start()
    assert panel.wait(timeout=300)
    assert not panel.running
    assert 0 < panel.progress.value < total
    assert len(ran) == 1 and panel.progress.value == ran[0]

    panel.start()  # resume: finished cells are skipped
    assert panel.wait(timeout=300)
    assert panel.progress.value == total
    assert sum(ran) == total  # every cell ran exactly once
    assert panel.error is None, panel.error

    rows = campaign.result().rows
    panel.learner.value = "net"
    settings = panel.fit_settings()
    ref = fitting.fit_exponent(rows, "net", **settings)
    assert panel.fit.exponent == ref.exponent
    assert tuple(panel.fit.interval) == tuple(ref.interval)
    assert panel.fit.verdict == ref.verdict
    assert f"{ref.exponent:.3f}" in panel.exponent_html.value
    assert ref.verdict in panel.exponent_html.value
    assert set(panel.fits) == {"net", "knn"}
    assert panel.curves_image.value[:4] == b"\x89PNG"


def test_curve_panel_fit_controls_call_fit_exponent(finished_campaign, monkeypatch):
    spy = Spy(fitting.fit_exponent)
    monkeypatch.setattr(fitting, "fit_exponent", spy)
    panel = CurvePanel(finished_campaign.result(), n_boot=20, target_error=0.05)
    assert panel.learner.value == "net"
    html_before = panel.exponent_html.value
    exp_before = panel.fit.exponent

    panel.n_range.value = (48, 192)
    args, kwargs = spy.calls[-1]
    assert kwargs["n_range"] == (48, 192)
    assert panel.fit.n_range == (48, 192)
    assert panel.fit.exponent != exp_before
    assert panel.exponent_html.value != html_before

    panel.floor.value = "known"
    panel.known_floor.value = 0.001
    assert spy.calls[-1][1]["floor"] == 0.001
    panel.floor.value = "estimate"
    kwargs = spy.calls[-1][1]
    assert kwargs["floor"] == "estimate" and kwargs["noise_variance"] == pytest.approx(0.01)
    panel.floor.value = "fit"
    assert spy.calls[-1][1]["floor"] == "fit"

    panel.learner.value = "knn"
    assert panel.fit.learner == "knn"
    expected = fitting.fit_exponent.func(finished_campaign.result().rows, "knn", **panel.fit_settings())
    assert panel.fit.exponent == expected.exponent

    # implied d follows the s control
    panel.floor.value = "none"
    panel.s.value = 2.0
    assert spy.calls[-1][1]["smoothness"] == 2.0
    assert panel.fit.predicted_exponent[0] == pytest.approx(4.0 / 6.0)


def test_curve_panel_planner(finished_campaign, monkeypatch):
    import manireg.curves.planning as planning

    spy = Spy(planning.plan_samples)
    monkeypatch.setattr(planning, "plan_samples", spy)
    panel = CurvePanel(finished_campaign.result(), n_boot=20)
    assert panel.plan is None
    panel.allow_unverified.value = True
    panel.target_error.value = 0.05
    args, kwargs = spy.calls[-1]
    assert args[1] == 0.05 and kwargs["allow_unverified"] is True
    if panel.plan is not None:
        assert f"{panel.plan.n_required:,.0f}" in panel.plan_html.value
    else:  # e.g. a target below the fitted floor: the planner's reason is shown
        assert "plan" in panel.plan_html.value
    panel.allow_unverified.value = False
    if panel.fit.verdict != "measured":
        assert panel.plan is None and "refusing" in panel.plan_html.value
    res = panel.results()
    assert res.cells_done == len(finished_campaign.cells())
    assert set(res.to_dict()) >= {"learner", "fit", "plan", "fit_settings"}


def test_curve_panel_from_rows_cannot_run(finished_campaign):
    panel = CurvePanel(finished_campaign.result().rows, d=2.0, s=1.0, input_dim=5, n_boot=20)
    assert panel.start_button.disabled
    panel.start()
    assert panel.error is not None and "Campaign" in panel.error
    with pytest.raises(ValueError, match="Campaign, a CampaignResult or a DataFrame"):
        CurvePanel([1, 2, 3])


# ------------------------------------------------------------------------------------------------- campaign
def test_campaign_panel_passes_d_and_s(sample, tmp_path):
    panel = WorkbenchPanel(sample.X, sample.y, s=1.0, sizes=[24, 48, 96], repeats=2, learners=[TINY_NET],
                       store=str(tmp_path / "s.sqlite"),
                       geometry_kwargs={"estimators": ("mle",), "scales": (5, 10), "n_boot": 0})
    assert panel.sizing.d.value == pytest.approx(round(panel.geometry.consensus, 2))
    panel.geometry.k_range.value = (5, 8)
    assert panel.sizing.d.value == pytest.approx(round(panel.geometry.consensus, 2))
    panel.sizing.s.value = 1.5
    campaign = panel.create_campaign()
    assert panel.error is None, panel.error
    assert campaign.data.smoothness == 1.5 and campaign.data.dimension == pytest.approx(panel.sizing.d.value)
    assert panel.curves is not None and panel.curves_box.children == (panel.curves,)
    panel.sizing.s.value = 2.0
    assert panel.curves.s.value == 2.0
    res = panel.results()
    assert res.sizing.s == 2.0 and res.curves.cells_total == len(campaign.cells())
