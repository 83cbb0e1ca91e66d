"""Panels without a browser: set control values, check the core call and the displayed numbers."""

import dataclasses
import json
import re
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("ipywidgets")

from manireg.curves import execution, fitting  # noqa: E402
from manireg.curves.campaign import Campaign  # noqa: E402
from manireg.data import make_regression, sphere  # noqa: E402
from manireg.widgets import CurvePanel, GeometryPanel, SizingPanel, WorkbenchPanel  # noqa: E402
from manireg.widgets import _look  # noqa: E402

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


def descendants(widget):
    """Every widget reachable from ``widget`` through its traits (children, layouts, styles, ...)."""
    import ipywidgets as widgets

    seen, stack = {}, [widget]
    while stack:
        w = stack.pop()
        if id(w) in seen:
            continue
        seen[id(w)] = w
        for name in w.keys:
            value = getattr(w, name, None)
            values = value if isinstance(value, (list, tuple)) else [value]
            stack.extend(v for v in values if isinstance(v, widgets.Widget))
    return list(seen.values())


def assert_json_states(panel):
    """Every widget state as the comm would send it: valid JSON (no NaN or inf)."""
    from ipywidgets.widgets.widget import _remove_buffers

    for w in descendants(panel):
        state, _, _ = _remove_buffers(w.get_state())
        json.dumps(state, allow_nan=False)  # raises ValueError on NaN or inf


def screen_texts(panel):
    """The texts a panel puts on screen: control descriptions, option labels, button labels, HTML."""
    import ipywidgets as widgets

    out = []
    for w in descendants(panel):
        if isinstance(w, widgets.HTML):
            out.append(("html", re.sub(r"<[^>]+>", " ", w.value)))
        for attr in ("description", "placeholder"):
            if isinstance(getattr(w, attr, None), str) and getattr(w, attr):
                out.append((attr, getattr(w, attr)))
        labels = getattr(w, "_options_labels", None)
        if labels:
            out.extend(("option", str(lab)) for lab in labels)
        if isinstance(w, widgets.Label):
            out.append(("label", w.value))
    return out


# code names that must not reach the screen (plain words first is allowed for the sizing constants)
CODE_NAMES = re.compile(r"test_mse|loglog|floor_fit|step_cap|time_cap|\bmle\b|\btwonn\b|\blpca\b|\bcorr\b|"
                        r"input_dim|ambient_dim|noise_variance|interval_kind|n_lo|n_hi|\(0:")


def assert_plain_screen(panel):
    for kind, text in screen_texts(panel):
        assert not CODE_NAMES.search(text), (kind, text)
        if kind != "html":
            for token in re.findall(r"\b\w+_\w+\b", text):  # a snake_case name only after plain words
                assert text.index(token) > 0 and token in " ".join(_SIZING_CONSTANT_LABELS), (kind, text)
        assert "nan" not in text.lower().split(), (kind, text)


_SIZING_CONSTANT_LABELS = ("depth constant c_depth", "width constant c_width", "nonzero-weight constant c_nonzero",
                           "largest depth depth_max", "largest width width_max")


def status_log(panel):
    """Every value the panel's status line takes from now on."""
    log = []
    panel.status.observe(lambda change: log.append(change["new"]), names="value")
    return log


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
    panel = SizingPanel(n=1000, dimension=2.0, smoothness=1.0, ambient_dim=10)
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
    panel.dimension.value = 3.0
    assert spy.calls[-1][0][1] == 3.0
    panel.ambient_dim.value = 12
    assert spy.calls[-1][0][3] == 12
    # 2s/(2s+d) (Stone 1982; Chen, Jiang, Liao, Zhao 2022), a predicted value and labelled so
    assert panel.predicted_exponent == pytest.approx(2.0 / (2.0 + 3.0))
    assert "predicted exponent 2s/(2s+d)" in panel.spec_html.value
    assert "predicted exponent" in panel.status.value
    res = panel.results()
    assert res.n == 20000 and res.spec is panel.spec and res.dimension == 3.0 and res.ambient_dim == 12
    assert res.to_dict()["constants"]["c_width"] == 4.0
    assert_plain_screen(panel)


def test_sizing_panel_plot_uses_sizing_table():
    panel = SizingPanel(n=1000, dimension=2.0, smoothness=1.0, ambient_dim=10)
    assert panel.error is None and panel.table is not None
    png = panel.image.value
    assert png[:4] == b"\x89PNG"
    panel.smoothness.value = 2.0
    assert panel.image.value != png


def test_sizing_panel_shows_errors_instead_of_raising():
    panel = SizingPanel(n=1000, dimension=2.0, smoothness=1.0, ambient_dim=10)
    panel.dimension.value = 50.0  # d > D: size_network refuses
    assert panel.error is not None and "cannot exceed the ambient" in panel.error
    assert "failed" in panel.status.value and _look.COLOURS["error"] in panel.status.value


# ---------------------------------------------------------------------------------------------- geometry
def test_geometry_panel_dimension_and_charts(sample, monkeypatch):
    import manireg.geometry.charts as charts
    import manireg.geometry.dimension as dimension
    import manireg.geometry.reach as reach

    spy = Spy(dimension.estimate_dimension)
    monkeypatch.setattr(dimension, "estimate_dimension", spy)
    panel = GeometryPanel(sample.X, sample.y, estimators=("mle", "twonn"), scales=(5, 10, 20), n_boot=20)
    assert panel.error is None, panel.error
    assert spy.calls[-1][1]["k_min"] == 10
    assert panel.consensus == pytest.approx(2.0, abs=0.5)
    assert panel.chart_dimension.value == 2
    html_before = panel.dimension_html.value
    log = status_log(panel)
    panel.k_range.value = (6, 12)
    assert spy.calls[-1][1]["k_min"] == 6 and spy.calls[-1][1]["k_max"] == 12
    assert panel.dimension_html.value != html_before
    # the read-out says what it is doing and how far it is, step by step
    for step in ("step 1 of 4: intrinsic dimension", "step 2 of 4: charts", "step 3 of 4: reach",
                 "step 4 of 4: chart counts"):
        assert any(step in v for v in log), (step, log)
    panel.scales.value = "4, 8, 16"
    assert spy.calls[-1][1]["scales"] == [4, 8, 16]
    assert list(panel.report.profile.scale[panel.report.profile.rows("mle")]) == [4, 8, 16]
    assert panel.profile_image.value[:4] == b"\x89PNG"

    # the rule's radius is a checkbox, not a 0-sentinel; the number box shows the rule's radius meanwhile
    assert panel.radius_rule.value and panel.radius.disabled and panel.chart_settings()["radius"] is None
    assert panel.radius.value == pytest.approx(panel.atlas.radius_, rel=1e-3)
    atlas_spy = Spy(charts.ChartAtlas)
    monkeypatch.setattr(charts, "ChartAtlas", atlas_spy)
    charts_before = panel.charts_html.value
    panel.radius_rule.value = False
    panel.radius.value = 0.5
    assert not panel.radius.disabled
    assert atlas_spy.calls[-1][1]["radius"] == 0.5
    assert panel.atlas.radius_ == 0.5
    assert panel.charts_html.value != charts_before
    # the reach's quantile likewise: unticking "smallest value over pairs" passes the slider's quantile
    reach_spy = Spy(reach.estimate_reach)
    monkeypatch.setattr(reach, "estimate_reach", reach_spy)
    panel.reach_infimum.value = False
    assert reach_spy.calls[-1][1]["quantile"] == pytest.approx(0.05)
    panel.reach_infimum.value = True
    assert reach_spy.calls[-1][1]["quantile"] is None
    res = panel.results()
    assert res.chart_dimension == 2 and res.atlas.radius == 0.5
    assert res.to_dict()["dimension"] == pytest.approx(panel.consensus)
    assert "maximum likelihood" in panel.dimension_html.value and "diagnostic, no interval" in panel.charts_html.value
    assert_plain_screen(panel)
    assert_json_states(panel)


def test_geometry_panel_embedding_only_on_button(sample, monkeypatch):
    import manireg.geometry.embedding as embedding

    def fake_embed(X, random_state=0, n_neighbors=15, **kw):  # UMAP is slow; the wiring is what is tested
        print("third-party chatter")  # swallowed: nothing of a library's own prints reaches the panel
        return embedding.Embedding2D(np.asarray(X)[:, :2].copy(), "pca", n_neighbors, 0.1, random_state)

    spy = Spy(fake_embed)
    monkeypatch.setattr(embedding, "embed_2d", spy)
    panel = GeometryPanel(sample.X, sample.y, estimators=("mle",), scales=(5, 10), n_boot=0)
    assert spy.calls == [] and panel.embedding is None
    panel.umap_neighbors.value = 9
    panel.seed.value = 3
    log = status_log(panel)
    panel.embed_button.click()
    assert spy.calls[-1][1] == {"random_state": 3, "n_neighbors": 9}
    assert any("working: 2-D view" in v for v in log), log
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


def test_panel_warnings_have_one_prefix_and_library_chatter_is_dropped(sample):
    import warnings

    panel = SizingPanel(n=1000, dimension=2.0, smoothness=1.0, ambient_dim=10)

    def noisy():
        warnings.warn("manireg says: few samples", UserWarning)
        warnings.warn("Tensorflow not installed; ParametricUMAP will be unavailable", ImportWarning)
        warnings.warn("old API", DeprecationWarning)
        return 1

    assert panel._call("a step", noisy) == 1
    assert panel.notes == ["manireg says: few samples"]
    panel._set_status("done")
    assert "warning: manireg says: few samples" in panel.status.value
    assert "Tensorflow" not in panel.status.value and "old API" not in panel.status.value


# ------------------------------------------------------------------------------------------------ curves
def test_curve_panel_runs_in_background_and_matches_fit_exponent(sample, tmp_path, monkeypatch):
    campaign = Campaign.from_regression_sample(sample, sizes=[24, 48, 96, 192], repeats=2,
                                               learners=[TINY_NET, "knn"], store=str(tmp_path / "s.sqlite"))
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
    log = status_log(panel)
    panel.start()
    assert panel.wait(timeout=300)
    assert not panel.running
    assert 0 < panel.progress.value < total
    assert len(ran) == 1 and panel.progress.value == ran[0]
    assert panel.run_message == f"started: {total} cells to run"
    assert "paused" in panel.progress_label.value and "paused" in panel.status.value

    panel.start()  # resume: finished cells are skipped, and the panel says how many it found
    assert panel.wait(timeout=300)
    assert panel.run_message == f"resumed: found {ran[0]} finished cells of {total}; {total - ran[0]} remain"
    assert any(panel.run_message in v for v in log)
    assert any(f"campaign run: {total} of {total} cells finished, 0 remain" in v for v in log)
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
    # the "estimate" floor is the campaign's own estimate (outside the test rows), not a new one on all rows
    assert settings["floor"] == "estimate" and settings["noise_variance"] == campaign.noise_level()


def test_curve_panel_default_fit_is_the_campaign_default(finished_campaign):
    """With its default controls the panel shows exactly what CampaignResult.fit (the command line's default)
    gives, for a campaign, its result and the same campaign read back from its store."""
    from manireg.curves.floors import DEFAULT_FLOOR

    result = finished_campaign.result()
    stored = Campaign.from_store(result.store_path, result.name)  # noise estimate from the store metadata
    assert stored.noise_estimate == result.noise_estimate
    for source in (finished_campaign, result, stored):
        panel = CurvePanel(source)
        assert panel.floor.value == DEFAULT_FLOOR == "fit"
        assert panel.error is None, panel.error
        for name in ("net", "knn"):
            ref = result.fit(name)
            got = panel.fits[name]
            assert got.exponent == ref.exponent and tuple(got.interval) == tuple(ref.interval)
            assert got.verdict == ref.verdict and got.floor == ref.floor
            assert got.predicted_exponent == ref.predicted_exponent
        assert panel.noise_estimate == result.noise_estimate
        assert f"{result.noise_estimate:.4f}"[:5] in panel.noise_html.value


def test_curve_panel_floor_choices_go_through_choose_floor(finished_campaign, monkeypatch):
    import manireg.curves.floors as floors

    spy = Spy(fitting.fit_exponent)
    monkeypatch.setattr(fitting, "fit_exponent", spy)
    resolve_spy = Spy(floors.choose_floor)
    monkeypatch.setattr(floors, "choose_floor", resolve_spy)
    result = finished_campaign.result()
    panel = CurvePanel(result, n_boot=20, target_error=0.05)
    # exactly the four choices of floors.py, labelled in its words
    assert [v for _, v in panel.floor.options] == [*floors.FLOOR_CHOICES, "value"]
    assert [lab for lab, _ in panel.floor.options][:3] == [floors.describe_floor(c) for c in floors.FLOOR_CHOICES]
    choice, metric, noise = resolve_spy.calls[-1][0]
    assert (choice, metric) == ("estimate", "test_mse") and noise == result.noise_level
    assert panel.learner.value == "net"
    html_before = panel.exponent_html.value
    exp_before = panel.fit.exponent

    panel.n_range.value = (48, 192)
    args, kwargs = spy.calls[-1]
    assert kwargs["n_range"] == (48, 192)
    assert panel.fit.n_range == (48, 192)
    assert panel.fit.exponent != exp_before
    assert panel.exponent_html.value != html_before

    assert panel.floor_value.disabled
    panel.floor.value = "value"
    assert not panel.floor_value.disabled
    # the value box starts at the true noise variance of the synthetic data (0.1 ** 2)
    assert panel.floor_value.value == pytest.approx(0.01)
    panel.floor_value.value = 0.001
    assert spy.calls[-1][1]["floor"] == 0.001 and resolve_spy.calls[-1][0][0] == 0.001
    panel.floor.value = "estimate"
    kwargs = spy.calls[-1][1]
    assert kwargs["floor"] == "estimate" and kwargs["noise_variance"] == result.noise_level
    panel.floor.value = "fit"
    assert spy.calls[-1][1]["floor"] == "fit"
    assert "power law plus a fitted floor" in panel.exponent_html.value

    panel.learner.value = "knn"
    assert panel.fit.learner == "knn"
    expected = fitting.fit_exponent.func(result.rows, "knn", **panel.fit_settings())
    assert panel.fit.exponent == expected.exponent

    # implied d follows the s control; "s unknown" passes None (no 0-sentinel)
    panel.floor.value = "none"
    panel.smoothness.value = 2.0
    assert spy.calls[-1][1]["smoothness"] == 2.0
    assert panel.fit.predicted_exponent[0] == pytest.approx(4.0 / 6.0)  # 2s/(2s+d) at s=2, d=2
    panel.ambient_dim_unknown.value = True
    assert spy.calls[-1][1]["ambient_dim"] is None and panel.ambient_dim.disabled
    assert_plain_screen(panel)


def test_curve_panel_estimate_floor_without_an_estimate_says_so(finished_campaign):
    rows = finished_campaign.result().rows
    panel = CurvePanel(rows, dimension=2.0, smoothness=1.0, ambient_dim=5, n_boot=20)
    assert panel.noise_estimate is None and panel.fit is None
    assert panel.error is not None and "noise-variance estimate" in panel.error
    assert "none recorded" in panel.noise_html.value
    panel.floor.value = "fit"
    assert panel.error is None and panel.fit is not None
    given = CurvePanel(rows, n_boot=20, noise_estimate=0.02)
    assert given.fit_settings()["noise_variance"].value == 0.02


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
        if panel.plan.warning:
            assert "warning: " in panel.plan_html.value
    else:  # e.g. a target below the fitted floor: the planner's reason is shown
        assert "plan" in panel.plan_html.value
    panel.allow_unverified.value = False
    if panel.fit.verdict != "measured":
        assert panel.plan is None and "refusing" in panel.plan_html.value
    res = panel.results()
    assert res.cells_done == len(finished_campaign.cells())
    assert set(res.to_dict()) >= {"learner", "fit", "plan", "fit_settings", "floor", "noise_estimate"}


def test_curve_panel_from_rows_cannot_run(finished_campaign):
    panel = CurvePanel(finished_campaign.result().rows, dimension=2.0, smoothness=1.0, ambient_dim=5, n_boot=20)
    assert panel.start_button.disabled
    panel.start()
    assert panel.error is not None and "Campaign" in panel.error
    with pytest.raises(ValueError, match="Campaign, a CampaignResult or a DataFrame"):
        CurvePanel([1, 2, 3])


def test_widget_messages_are_json_after_nan_fits(finished_campaign, monkeypatch):
    """NaN and inf never reach a widget value or HTML: they read "not available" / "none"."""
    nan = float("nan")
    real = fitting.fit_exponent

    def nan_fit(*args, **kwargs):
        f = real(*args, **kwargs)
        return dataclasses.replace(f, exponent=nan, interval=(nan, nan), floor=nan, implied_dimension=(nan, nan),
                                   implied_smoothness=None,
                                   local_slopes=[{**s, "slope": float("inf")} for s in f.local_slopes])

    monkeypatch.setattr(fitting, "fit_exponent", nan_fit)
    rows = finished_campaign.result().rows.copy()
    rows.loc[rows.index[0], "test_mse"] = nan  # a failed measurement among the rows
    panels = [CurvePanel(rows, n_boot=20, floor="fit", target_error=0.05),  # no d, s, D, noise estimate
              CurvePanel(finished_campaign.result(), n_boot=20, target_error=0.05)]
    for panel in panels:
        panel.allow_unverified.value = True
        assert panel.fit is not None
        assert "not available" in panel.exponent_html.value
        assert_json_states(panel)
    assert panels[0].dimension_unknown.value and panels[0].smoothness_unknown.value
    assert panels[0].ambient_dim_unknown.value
    sizing = SizingPanel(n=1000, dimension=2.0, smoothness=1.0, ambient_dim=10)
    assert_json_states(sizing)


# ------------------------------------------------------------------------------------------------- workbench
def test_workbench_passes_dimension_smoothness_width_and_constants(sample, tmp_path):
    from manireg.widgets.workbench import SET_UP_LABEL

    panel = WorkbenchPanel(sample.X, sample.y, smoothness=1.0, sizes=[24, 48, 96], repeats=2, learners=[TINY_NET],
                           store=str(tmp_path / "s.sqlite"),
                           geometry_kwargs={"estimators": ("mle",), "scales": (5, 10), "n_boot": 0})
    assert panel.create_button.description == SET_UP_LABEL == "Set up campaign (d and s from the sizing panel)"
    assert panel.sizing.dimension.value == pytest.approx(round(panel.geometry.consensus, 2))
    panel.geometry.k_range.value = (5, 8)
    assert panel.sizing.dimension.value == pytest.approx(round(panel.geometry.consensus, 2))
    panel.sizing.smoothness.value = 1.5
    panel.sizing.width_multiplier.value = 2.0
    panel.sizing.constants["c_width"].value = 3.0
    panel.sizing.constants["depth_max"].value = 4
    campaign = panel.create_campaign()
    assert panel.error is None, panel.error
    assert campaign.data.smoothness == 1.5
    assert campaign.data.dimension == pytest.approx(panel.sizing.dimension.value)
    (net,) = campaign.data.learners
    assert net.kind == "net" and net.name == "net-w2"
    assert net.params["width_multiplier"] == 2.0
    assert net.params["constants"]["c_width"] == 3.0 and net.params["constants"]["depth_max"] == 4
    assert net.params["max_steps"] == TINY_NET["params"]["max_steps"]  # the learner's own settings kept
    # the cells' networks are the sizing panel's networks at their n
    from manireg.curves.learners import make_learner
    from manireg.theory.sizing import size_network

    for n in campaign.data.sizes:
        spec = size_network(n, campaign.data.dimension, 1.5, campaign.data.ambient_dim,
                            constants=panel.sizing.sizing_constants(), width_multiplier=2.0)
        arch = make_learner(net).architecture(n, campaign.data)
        assert (arch.width, arch.depth) == (spec.width, spec.depth)
    assert campaign.cells()[0].config["learner"]["params"]["constants"]["c_width"] == 3.0  # in the cell key
    assert panel.curves is not None and panel.curves_box.children == (panel.curves,)
    assert "press Start / resume" in panel.status.value
    panel.sizing.smoothness.value = 2.0
    assert panel.curves.smoothness.value == 2.0
    res = panel.results()
    assert res.sizing.smoothness == 2.0 and res.curves.cells_total == len(campaign.cells())


# ------------------------------------------------------------------------------------------------- look
STOCK_STYLES = {"success", "warning", "info", "primary", "danger"}


def test_workbench_with_a_finished_campaign_has_our_look_and_plain_labels(finished_campaign):
    import ipywidgets as widgets

    panel = WorkbenchPanel(finished_campaign.data.X, finished_campaign.data.y, campaign=finished_campaign,
                           geometry_kwargs={"estimators": ("mle",), "scales": (5, 10), "n_boot": 0})
    total = len(finished_campaign.cells())
    assert f"found {total} finished cells in the store, 0 remain" in panel.status.value
    assert_plain_screen(panel)
    assert_json_states(panel)
    buttons = [w for w in descendants(panel) if isinstance(w, widgets.Button)]
    assert len(buttons) == 3  # 2-D view, start, pause (the set-up button gave way to the curve panel)
    for w in descendants(panel):
        assert getattr(w, "button_style", "") not in STOCK_STYLES, w
        assert getattr(w, "bar_style", "") not in STOCK_STYLES, w
        assert not getattr(w, "icon", ""), w
    for b in buttons:
        assert b.style.button_color in _look.COLOURS.values()
    # every colour of the panels lives in _look.py; the error colour is not a common design-system red
    # (Bootstrap #dc3545, Material #d32f2f / #f44336 / #b00020: from memory)
    src = Path(_look.__file__).parent
    for path in src.glob("*.py"):
        if path.name != "_look.py":
            assert not re.search(r"#[0-9a-fA-F]{6}\b", path.read_text()), path.name
    r, g, b = (int(_look.COLOURS["error"][i:i + 2], 16) for i in (1, 3, 5))
    for ref in ("#dc3545", "#d32f2f", "#f44336", "#b00020"):
        r2, g2, b2 = (int(ref[i:i + 2], 16) for i in (1, 3, 5))
        assert abs(r - r2) + abs(g - g2) + abs(b - b2) > 60, ref
    with pytest.raises(ValueError, match="role must be one of"):
        _look.style_button(widgets.Button(), "success")
