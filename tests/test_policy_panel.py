"""The policy panel without a browser: set control values, check the core call and what the panel shows."""

import dataclasses
import json
import re

import numpy as np
import pytest

pytest.importorskip("ipywidgets")

from manireg.curves import execution  # noqa: E402
from manireg.curves import policy as core  # noqa: E402
from manireg.curves.learners import LearnerSpec  # noqa: E402
from manireg.curves.policy import PolicyCampaign, PolicyResult  # noqa: E402
from manireg.widgets import PolicyPanel  # noqa: E402
from manireg.widgets._base import fmt, fmt_interval  # noqa: E402

# tiny campaigns have 2 repeats on purpose (speed); the fit's warning about that is expected here
pytestmark = pytest.mark.filterwarnings("ignore:fit_exponent.*repeats:UserWarning")

QUICK = {"max_steps": 20, "min_steps": 0, "eval_every": 5}
SPEC = dict(generator={"manifold": "sphere", "n": 900, "d": 2, "ambient_dim": 6, "n_actions": 3, "seed": 2,
                       "min_propensity": 0.05},
            sizes=[120, 240, 480], repeats=2, test_size=300,
            learners=[LearnerSpec("policy", params={"method": m, **QUICK}) for m in ("dr", "direct")])


class Spy:
    """Wraps a function, records every call and passes it on."""

    def __init__(self, func):
        self.func = func
        self.calls = []

    def __call__(self, *args, **kwargs):
        self.calls.append((args, kwargs))
        return self.func(*args, **kwargs)


def assert_json_states(panel):
    """Every widget state as the comm would send it: valid JSON (no NaN or inf)."""
    import ipywidgets as widgets
    from ipywidgets.widgets.widget import _remove_buffers

    seen, stack = {}, [panel]
    while stack:
        w = stack.pop()
        if id(w) in seen:
            continue
        seen[id(w)] = w
        for name in w.keys:
            value = getattr(w, name, None)
            stack.extend(v for v in (value if isinstance(value, (list, tuple)) else [value])
                         if isinstance(v, widgets.Widget))
        state, _, _ = _remove_buffers(w.get_state())
        json.dumps(state, allow_nan=False)  # raises ValueError on NaN or inf


def text(html_value):
    return re.sub(r"<[^>]+>", " ", html_value)


@pytest.fixture(scope="module")
def finished(tmp_path_factory):
    camp = PolicyCampaign(store=str(tmp_path_factory.mktemp("ppanel") / "p.sqlite"), **SPEC)
    camp.run(progress=False)
    return camp


def test_policy_panel_runs_in_background_pauses_resumes_and_shows_fit_all(tmp_path, monkeypatch):
    campaign = PolicyCampaign(store=str(tmp_path / "p.sqlite"), **SPEC)
    total = len(campaign.cells())
    panel = PolicyPanel(campaign, n_boot=40, seed=3)
    assert panel.progress.value == 0 and panel.progress.max == total
    assert "no finished cells" in panel.exponent_html.value
    real_run_unit = execution.run_unit
    ran = []

    def run_and_pause_after_first_unit(unit, *args, **kwargs):
        ran.append(len(unit))
        out = real_run_unit(unit, *args, **kwargs)
        if len(ran) == 1:
            panel.pause()  # the stop flag is read between units
        return out

    monkeypatch.setattr(execution, "run_unit", run_and_pause_after_first_unit)
    panel.start()
    assert panel.wait(timeout=300) and not panel.running
    assert 0 < panel.progress.value < total and panel.progress.value == ran[0]
    assert panel.run_message == f"started: {total} cells to run"
    assert "paused" in panel.progress_label.value and "paused" in panel.status.value
    panel.start()  # resume: only the missing cells run
    assert panel.wait(timeout=300)
    assert panel.run_message == f"resumed: found {ran[0]} finished cells of {total}; {total - ran[0]} remain"
    assert sum(ran) == total and panel.progress.value == total
    assert panel.error is None, panel.error

    # the exponents are PolicyResult.fit_all's with the panel's settings, not recomputed
    assert panel.fit_settings() == {"n_boot": 40, "seed": 3}
    ref = campaign.result().fit_all(n_boot=40, seed=3)
    assert set(panel.fits) == set(ref.fits) == {"dr", "direct"}
    shown = text(panel.exponent_html.value)
    for name, fit in ref.fits.items():
        np.testing.assert_equal((panel.fits[name].exponent, tuple(panel.fits[name].interval)),
                                (fit.exponent, tuple(fit.interval)))  # NaN == NaN here
        assert panel.fits[name].verdict == fit.verdict
        assert fmt(fit.exponent) in shown and fmt_interval(fit.interval) in shown and fit.verdict in shown
    assert panel.learner.value == "dr" and "dr: regret exponent" in panel.status.value
    assert panel.regret_image.value[:4] == b"\x89PNG" and panel.overlap_image.value[:4] == b"\x89PNG"
    assert_json_states(panel)


def test_controls_go_to_fit_all_and_overlap(finished, monkeypatch):
    fit_all, overlap = Spy(PolicyResult.fit_all), Spy(PolicyResult.overlap)
    monkeypatch.setattr(PolicyResult, "fit_all", lambda self, **kw: fit_all(self, **kw))
    monkeypatch.setattr(PolicyResult, "overlap", lambda self, learner=None: overlap(self, learner))
    panel = PolicyPanel(finished, n_boot=20)
    fit_all.calls.clear()
    panel.n_boot.value = 30
    panel.seed.value = 7
    assert fit_all.calls[-1][1] == {"n_boot": 30, "seed": 7}
    overlap.calls.clear()
    panel.learner.value = "direct"
    assert overlap.calls[-1][0][1] == "direct"
    ov = finished.result().overlap("direct")
    assert panel.overlap["ess"] == ov["ess"] and panel.overlap["sizes"] == [120, 240, 480]
    shown = text(panel.overlap_html.value)
    for n, ess, share in zip(ov["sizes"], ov["ess"], ov["clipped_share"]):
        assert f"{n}" in shown and fmt(ess, 1) in shown and fmt(share) in shown
    assert "estimated propensities; clipping at 0.01" in shown
    assert "direct: regret exponent" in panel.status.value
    json.dumps(panel.results().to_dict(), allow_nan=False)


def test_learned_policy_is_drawn_from_the_chosen_cell(finished, monkeypatch):
    spy = Spy(core.learned_policy)
    monkeypatch.setattr(core, "learned_policy", spy)
    panel = PolicyPanel(finished, n_boot=20, max_points=150)
    assert not spy.calls and panel.map_image.layout.display == "none"  # only on the button
    panel.learner.value = "direct"
    panel.map_n.value = 120
    panel.map_repeat.value = 1
    panel.map_button.click()
    (args, kwargs), = spy.calls
    assert args == (finished, "direct") and kwargs == {"n": 120, "repeat": 1, "max_points": 150}
    pmap = panel.policy_map
    assert (pmap.learner, pmap.n, pmap.repeat) == ("direct", 120, 1) and pmap.view.shape == (150, 2)
    assert panel.map_image.value[:4] == b"\x89PNG" and panel.error is None
    assert f"{fmt(100 * pmap.agreement, 1)}%" in panel.map_html.value
    assert panel.results().policy_map is pmap
    json.dumps(panel.results().to_dict(), allow_nan=False)


def test_errors_are_shown_not_raised(finished, monkeypatch):
    def broken(*args, **kwargs):
        raise ValueError("no cell there")

    monkeypatch.setattr(core, "learned_policy", broken)
    panel = PolicyPanel(finished, n_boot=20)
    panel.map_button.click()
    assert "the learned policy failed: no cell there" in panel.status.value and panel.policy_map is None
    with pytest.raises(ValueError, match="PolicyCampaign or a PolicyResult"):
        PolicyPanel("rows.csv")


def test_stored_result_cannot_run_or_draw_and_nan_regret_is_not_sent(finished):
    stored = PolicyCampaign.from_store(finished.store.path)
    panel = PolicyPanel(stored, n_boot=20)
    assert panel.start_button.disabled and panel.map_button.disabled
    panel.start()
    assert "pass a PolicyCampaign" in panel.status.value and not panel.running
    panel.draw_policy()
    assert "needs the campaign's data" in panel.error
    assert set(panel.fits) == {"dr", "direct"}

    # a learner whose regret is missing is listed as not fitted; no NaN reaches a widget
    rows = stored.rows.copy()
    rows.loc[rows["learner"] == "direct", "regret"] = np.nan
    gap = PolicyPanel(dataclasses.replace(stored, rows=rows), n_boot=20)
    assert set(gap.fits) == {"dr"} and "direct" in gap.unfitted
    assert "not fitted" in text(gap.exponent_html.value)
    assert_json_states(gap)
    json.dumps(gap.results().to_dict(), allow_nan=False)

    # logged data from a table have no true mean rewards: the panel says so instead of an exponent
    table = PolicyPanel(dataclasses.replace(stored, truth=False), n_boot=20)
    assert "true mean rewards" in table.exponent_html.value
