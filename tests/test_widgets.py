"""Panels without a browser: set control values, check the core call and the displayed numbers."""

import dataclasses
import json
import re
from pathlib import Path

import numpy as np
import pytest

pytest.importorskip("ipywidgets")

from manireg.curves import execution, fitting, floors  # noqa: E402
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


def panel_calls(spy):
    """The curve panel's own fit calls (they pass the fit range; the core read-out's fits do not)."""
    return [c for c in spy.calls if "n_range" in c[1]]


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
    assert spy.calls[-1][1] == {"random_state": 3, "n_neighbors": 9, "method": "umap"}  # the button says UMAP
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
    # the default floor ("fit": within the noise estimate's interval) uses the campaign's own estimate (outside
    # the test rows), not a new one on all rows
    assert settings["floor"] == floors.DEFAULT_FLOOR and settings["noise_variance"] == campaign.noise_level()


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
    assert (choice, metric) == (floors.DEFAULT_FLOOR, "test_mse") and noise == result.noise_level
    assert panel.learner.value == "net"
    html_before = panel.exponent_html.value
    exp_before = panel.fit.exponent

    panel.n_range.value = (48, 192)
    args, kwargs = panel_calls(spy)[-1]
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
    assert panel_calls(spy)[-1][1]["floor"] == 0.001 and resolve_spy.calls[-1][0][0] == 0.001
    panel.floor.value = "estimate"
    kwargs = panel_calls(spy)[-1][1]
    assert kwargs["floor"] == "estimate" and kwargs["noise_variance"] == result.noise_level
    panel.floor.value = "fit"
    assert panel_calls(spy)[-1][1]["floor"] == "fit"
    assert "power law plus a fitted floor" in panel.exponent_html.value

    panel.learner.value = "knn"
    assert panel.fit.learner == "knn"
    expected = fitting.fit_exponent.func(result.rows, "knn", **panel.fit_settings())
    assert panel.fit.exponent == expected.exponent

    # implied d follows the s control; "s unknown" passes None (no 0-sentinel)
    panel.floor.value = "none"
    panel.smoothness.value = 2.0
    assert panel_calls(spy)[-1][1]["smoothness"] == 2.0
    assert panel.fit.predicted_exponent[0] == pytest.approx(4.0 / 6.0)  # 2s/(2s+d) at s=2, d=2
    panel.ambient_dim_unknown.value = True
    assert panel_calls(spy)[-1][1]["ambient_dim"] is None and panel.ambient_dim.disabled
    assert_plain_screen(panel)


def test_curve_panel_estimate_floor_without_an_estimate_says_so(finished_campaign):
    rows = finished_campaign.result().rows
    panel = CurvePanel(rows, dimension=2.0, smoothness=1.0, ambient_dim=5, n_boot=20, floor="estimate")
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


# ------------------------------------------------------------------------------------------------- size view
def test_size_view_adds_only_the_missing_cells(finished_campaign, tmp_path, monkeypatch):
    """The size view adds nets at other widths and depth constants; cells already in the store are never trained
    again (their keys are unchanged), the new ones run in the background, and the capacity read-out is the
    core's, paired over shared repeats."""
    import shutil

    from manireg.curves.capacity import depth_groups
    from manireg.curves.planning import CapacityReadout, capacity_readout

    store = tmp_path / "copy.sqlite"  # a copy: the module's finished campaign keeps its own store
    shutil.copy(finished_campaign.store.path, store)
    campaign = Campaign(finished_campaign.spec, store=str(store))
    before = {c.key for c in campaign.cells()}
    assert campaign.progress()["remaining"] == 0
    panel = CurvePanel(campaign, n_boot=20)
    assert not panel.size_button.disabled and panel.size_depths.value == "0.5"  # the rule's c_depth
    ran = []
    real_run_unit = execution.run_unit

    def recording(unit, *args, **kwargs):
        ran.extend(c.key for c in unit)
        return real_run_unit(unit, *args, **kwargs)

    monkeypatch.setattr(execution, "run_unit", recording)
    # depth constants are checked without training: every pair, the rule's width and depth included
    panel.size_widths.value, panel.size_depths.value = "2, 1", "1"
    assert [l.name for l in panel.size_learners()] == ["net", "net-w2", "net-cd1", "net-w2-cd1"]
    panel.size_depths.value = "0.5"
    added = panel.add_sizes()
    assert panel.wait(timeout=300) and panel.error is None, panel.error
    assert [l.name for l in added] == ["net-w2"]  # "net" at width 1 is the campaign's own net: not added
    after = {c.key for c in campaign.cells()}
    n_new = len(campaign.data.sizes) * campaign.data.repeats
    assert before < after and len(after) == len(before) + n_new
    assert sorted(ran) == sorted(after - before)  # only the new cells ran, each once
    assert panel.cells_total == len(after) and panel.progress.value == len(after)
    assert "net-w2" in panel.fits and panel.fits["net-w2"].verdict in panel.fits_html.value
    assert f"{panel.fits['net-w2'].exponent:.3f}" in panel.fits_html.value
    # the capacity read-out is capacity_readout on the nets of one depth setting
    rows = campaign.result().rows
    assert depth_groups(rows) == [("c_depth 0.5", ["net", "net-w2"])]
    (label, ro), = panel.capacity
    assert isinstance(ro, CapacityReadout)
    ref = capacity_readout(rows[rows["learner"].isin(["net", "net-w2"])])
    assert ro.table == ref.table
    assert ref.table[0]["status"] in panel.capacity_html.value
    # pressing again adds nothing and trains nothing
    ran.clear()
    assert panel.add_sizes() == [] and panel.wait(timeout=60) and not ran
    assert "every requested net is in the campaign" in panel.status.value
    assert_plain_screen(panel)
    assert_json_states(panel)


def test_size_view_needs_a_campaign_with_a_net(finished_campaign):
    panel = CurvePanel(finished_campaign.result(), n_boot=20)
    assert panel.size_button.disabled and panel.size_widths.disabled
    assert panel.add_sizes() is None and "net learner" in panel.error


# --------------------------------------------------------------------------------------------- classification
@pytest.fixture(scope="module")
def classify_campaign(tmp_path_factory):
    campaign = Campaign(generator={"manifold": "sphere", "n": 500, "d": 2, "ambient_dim": 5, "n_classes": 2,
                                   "seed": 0}, task="classify", sizes=[40, 80, 160, 320], repeats=2,
                        learners=["knn_classifier", "logistic"], store=str(tmp_path_factory.mktemp("c") / "c.sqlite"))
    campaign.run(progress=False)
    return campaign


def test_curve_panel_shows_classification_metrics(classify_campaign):
    """A classify campaign offers the classification metrics its rows hold; each metric's exponent, interval and
    verdict are the core read-out's (and the command line's) with the command line's floor; the excess
    logistic risk gets the reference exponent s / (2s + 2 max(s, d))."""
    from manireg.cli.curves import CLASSIFY_METRICS, classification_read_out
    from manireg.curves.metrics import CLASSIFICATION_COLUMNS
    from manireg.curves.readout import read_out

    result = classify_campaign.result()
    for source in (classify_campaign, result):
        panel = CurvePanel(source)
        assert panel.task == "classify" and panel.error is None, panel.error
        assert [v for _, v in panel.metric.options][0] == "excess_logistic_risk"
        assert {v for _, v in panel.metric.options} == {c for c in CLASSIFICATION_COLUMNS if result.rows[c].notna().any()}
    cli = classification_read_out(result, 0)
    for metric in ("excess_logistic_risk", "test_error_rate"):
        panel.metric.value = metric
        floor = CLASSIFY_METRICS[metric]
        assert panel.floor.value == (floor or "none")
        core = read_out(result.rows, dimension=result.dimension, smoothness=result.smoothness, metric=metric,
                        floor=floor, seed=0)
        for learner in ("knn_classifier", "logistic"):
            got, ref = panel.fits[learner], core.fits[learner]
            assert got.exponent == ref.exponent and tuple(got.interval) == tuple(ref.interval)
            assert got.verdict == ref.verdict
            assert got.exponent == next(f for f in cli[metric] if f.learner == learner).exponent
            assert got.predicted_exponent is None  # no regression prediction on a classification metric
        assert panel.readout is not None and panel.readout.fits[panel.learner.value].exponent == panel.fit.exponent
        assert f"{panel.fit.exponent:.3f}" in panel.exponent_html.value and panel.fit.verdict in panel.fits_html.value
    assert "none for this metric" in panel.exponent_html.value and panel.reference_exponent is None
    panel.metric.value = "excess_logistic_risk"
    # s / (2s + 2 max(s, d)) at s = 1, d = 2 is 1/6 (Liu, Chen, Zhao, Liao, ICML 2021, abstract)
    assert result.smoothness == 1.0 and result.dimension == 2.0
    assert panel.reference_exponent == pytest.approx(1.0 / 6.0)
    assert "0.167" in panel.exponent_html.value and "upper bound" in panel.exponent_html.value
    assert "against its reference rate" not in panel.readout_html.value  # the regression rates are not shown
    assert panel.results().task == "classify"
    assert_plain_screen(panel)
    assert_json_states(panel)


def test_read_out_fields_and_unknown_learners_do_not_break_the_panel(finished_campaign):
    """Learners the panel has no label for (evidence cells, say) and curves without a fit are listed with the
    reason; a text field added to ReadOut is shown by the one rendering function."""
    import pandas as pd
    from manireg.widgets.curves import readout_rows

    rows = finished_campaign.result().rows
    extra = rows[rows["learner"] == "net"].copy()
    extra["learner"] = "net-budget-4x"  # a learner label the panel and the style module do not know
    single = extra[extra["n"] == extra["n"].max()].copy()
    single["learner"] = "width-check"  # one size: no curve to fit
    broken = extra.assign(learner="train_mse_check", test_mse=float("nan"))  # no error to fit at all
    panel = CurvePanel(pd.concat([rows, extra, single, broken], ignore_index=True), dimension=2.0, smoothness=1.0,
                       ambient_dim=5, floor="fit", n_boot=20)
    assert panel.error is None, panel.error
    assert set(panel.fits) == {"net", "knn", "net-budget-4x", "width-check"}
    assert set(panel.fit_errors) == {"train_mse_check"}
    assert panel.fits["width-check"].verdict in panel.fits_html.value  # "insufficient data", in the table
    assert "no fit" in panel.fits_html.value and "train_mse_check" in panel.fits_html.value
    assert "train mse check" in [lab for lab, _ in panel.learner.options]  # no snake_case name in a control
    panel.learner.value = "train_mse_check"  # the selected learner's failure is the panel's error, not an exception
    assert panel.fit is None and panel.error is not None
    panel.learner.value = "net-budget-4x"
    assert panel.error is None and panel.readout is not None

    ro = dataclasses.replace(panel.readout,
                             diagnoses={"net": "limited by the optimiser: 3 cells moved beyond the seed spread"})
    shown = dict(readout_rows(ro, "net"))
    assert shown["diagnosis"] == "limited by the optimiser: 3 cells moved beyond the seed spread"
    assert "diagnosis" not in dict(readout_rows(ro, "knn"))
    assert "against its reference rate" in shown and "exponent" not in shown
    assert_json_states(panel)


# ------------------------------------------------------------------------------------------------- workbench
def test_workbench_passes_dimension_smoothness_width_and_constants(sample, tmp_path):
    from manireg.widgets.workbench import SET_UP_LABEL

    panel = WorkbenchPanel(sample.X, sample.y, smoothness=1.0, sizes=[24, 48, 96], repeats=2, learners=[TINY_NET],
                           store=str(tmp_path / "s.sqlite"),
                           geometry_kwargs={"estimators": ("mle",), "scales": (5, 10), "n_boot": 0})
    assert panel.create_button.description == SET_UP_LABEL == "Set up campaign (d, s and network size from the sizing tab)"
    assert panel.sizing.dimension.value == pytest.approx(round(panel.geometry.consensus, 2))
    panel.geometry.k_range.value = (5, 8)
    assert panel.sizing.dimension.value == pytest.approx(round(panel.geometry.consensus, 2))
    panel.sizing.smoothness.value = 1.5
    panel.sizing.width_multiplier.value = 2.0
    panel.sizing.constants["c_width"].value = 3.0
    panel.sizing.constants["depth_max"].value = 4
    panel.sizing.constants["c_depth"].value = 0.75
    panel.sizing.constants["c_nonzero"].value = 8.0
    panel.sizing.constants["width_max"].value = 40
    campaign = panel.create_campaign()
    assert panel.error is None, panel.error
    assert campaign.data.smoothness == 1.5
    assert campaign.data.dimension == pytest.approx(panel.sizing.dimension.value)
    (net,) = campaign.data.learners
    assert net.kind == "net" and net.name == "net-w2"
    assert net.params["width_multiplier"] == 2.0
    assert net.params["constants"]["c_width"] == 3.0 and net.params["constants"]["depth_max"] == 4
    # every constant and cap of the sizing panel reaches the campaign's net, not only d and s
    assert {k: net.params["constants"][k] for k in panel.sizing.constants} == panel.sizing.constants_dict() == {
        "c_depth": 0.75, "c_width": 3.0, "c_nonzero": 8.0, "depth_max": 4, "width_max": 40}
    assert net.params["max_steps"] == TINY_NET["params"]["max_steps"]  # the learner's own settings kept
    # the cells' networks are the sizing panel's networks at their n
    from manireg.curves.learners import make_learner
    from manireg.theory.sizing import size_network

    for n in campaign.data.sizes:
        spec = size_network(n, campaign.data.dimension, 1.5, campaign.data.ambient_dim,
                            constants=panel.sizing.sizing_constants(), width_multiplier=2.0)
        arch = make_learner(net).architecture(n, campaign.data)
        assert (arch.width, arch.depth) == (spec.width, spec.depth)
    cell_constants = campaign.cells()[0].config["learner"]["params"]["constants"]  # in the cell key
    assert cell_constants["c_width"] == 3.0 and cell_constants["width_max"] == 40 and cell_constants["c_depth"] == 0.75
    assert campaign.spec.to_dict()["learners"][0]["params"]["width_multiplier"] == 2.0
    # the curve panel's size view copies those settings into the nets it adds (only the multiplier and c_depth vary)
    panel.curves.size_widths.value, panel.curves.size_depths.value = "1, 2", "0.75, 1.5"
    grid = panel.curves.size_learners()
    assert [l.name for l in grid] == ["net", "net-w2", "net-cd1.5", "net-w2-cd1.5"]
    for l in grid:
        assert {k: v for k, v in l.params["constants"].items() if k != "c_depth"} == {
            k: v for k, v in net.params["constants"].items() if k != "c_depth"}
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
    # 2-D view, start, pause, the size view's button (the set-up button gave way to the curve panel)
    assert len(buttons) == 4
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
