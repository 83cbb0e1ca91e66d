"""Real-browser checks: the four panels served by Voila, driven by headless Chromium through playwright.

One small notebook, written into a temporary folder, builds on seeded synthetic data (400 points on a
2-sphere in R^5) a SizingPanel, a GeometryPanel, a CurvePanel of a tiny finished campaign, a CurvePanel whose
size view the test uses to add nets of other widths to a copy of that campaign, and a WorkbenchPanel.
Voila runs it once; the tests below share the page. Each test waits for its panel to render, saves an
element screenshot to tests/artifacts/ (copied to docs/img/ for docs/panels.md) and, for the sizing,
geometry and curve panels, changes a control in the browser and checks that the rendered text changed.

Skipped only when Debian's chromium (/usr/bin/chromium) is absent; CI installs it. The server binds to
127.0.0.1 on a free port, is given a bounded time to come up and is shut down at the end.
"""

import json
import os
import shutil
import socket
import subprocess
import sys
import time
from pathlib import Path

import pytest

CHROMIUM = "/usr/bin/chromium"
ROOT = Path(__file__).resolve().parent.parent
ARTIFACTS = ROOT / "tests" / "artifacts"
DOCS_IMG = ROOT / "docs" / "img"
CHROMIUM_ARGS = ["--headless", "--no-sandbox", "--disable-gpu", "--no-first-run", "--disable-background-networking",
                 "--disable-component-update", "--disable-sync"]
# waits for rendering and for a redraw after a control change (bounds, not speed checks)
WAIT_MS = 120_000
VIEWPORT = {"width": 1400, "height": 1000}

pytestmark = [
    pytest.mark.browser, pytest.mark.slow,
    pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="needs Debian's chromium at /usr/bin/chromium"),
]


def _code(source):
    return {"cell_type": "code", "execution_count": None, "metadata": {}, "outputs": [], "source": source}


# Each panel gets a CSS class so the test can find it (and only it) on the page.
PANELS_NOTEBOOK = {
    "cells": [
        _code("from manireg.curves import LearnerSpec\n"
              "from manireg.curves.campaign import Campaign\n"
              "from manireg.data import make_regression, sphere\n"
              "from manireg.widgets import CurvePanel, GeometryPanel, SizingPanel, WorkbenchPanel\n"
              "sample = make_regression(sphere(400, 2, ambient_dim=5, seed=0), 1.0, noise_std=0.1, seed=1)\n"
              "net = LearnerSpec('net', params={'max_steps': 200, 'min_steps': 50, 'patience_steps': 100})\n"
              "campaign = Campaign.from_regression_sample(sample, sizes=[24, 48, 96, 192], repeats=2,\n"
              "                                     learners=[net, 'knn'], seed=0, store='campaign.sqlite')\n"
              "campaign.run(progress=False)"),
        _code("sizing = SizingPanel(n=1000, dimension=2.0, smoothness=1.5, ambient_dim=256)\n"
              "sizing.add_class('mr-sizing-panel')\nsizing"),
        _code("geometry = GeometryPanel(sample.X, sample.y, true_dimension=2, n_boot=50, seed=0)\n"
              "geometry.add_class('mr-geometry-panel')\ngeometry"),
        # the tiny campaign spans less than a decade of n, so its verdict is not "measured": the planner plans
        # only with "plan from an unverified fit" ticked (and marks the plan with a warning); the target is
        # above the default floor, the campaign's noise estimate (about 0.19 for these rows)
        _code("curves = CurvePanel(campaign.result(), n_boot=200, seed=0)\n"
              "curves.allow_unverified.value = True\n"
              "curves.target_error.value = 0.3\n"
              "curves.add_class('mr-curve-panel')\ncurves"),
        # the size view: the same finished campaign (a copy of its store), to which the browser adds nets at
        # width multipliers 0.5 and 2; only their 16 cells are trained
        _code("import shutil\n"
              "shutil.copyfile('campaign.sqlite', 'sized.sqlite')\n"
              "sized_campaign = Campaign(campaign.spec, store='sized.sqlite')\n"
              "sized_campaign.data.noise_variance = campaign.data.noise_variance\n"
              "sized = CurvePanel(sized_campaign, n_boot=200, seed=0)\n"
              "sized.size_widths.value = '0.5, 1, 2'\n"
              "sized.add_class('mr-size-view')\nsized"),
        _code("workbench = WorkbenchPanel(sample.X, sample.y, smoothness=1.0, campaign=campaign,\n"
              "                           geometry_kwargs={'true_dimension': 2, 'n_boot': 50})\n"
              "workbench.add_class('mr-workbench-panel')\nworkbench"),
    ],
    "metadata": {"kernelspec": {"display_name": "Python 3", "language": "python", "name": "python3"}},
    "nbformat": 4, "nbformat_minor": 5,
}


def free_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def wait_for_port(port, proc, attempts=240):
    """Poll the port every 0.5 s (at most ``attempts`` times) while the server process is alive.

    A TCP connect, not an HTTP request: every GET of the notebook page makes Voila start a kernel and run
    the notebook, which a readiness probe must not do.
    """
    for _ in range(attempts):
        if proc.poll() is not None:
            return False
        with socket.socket() as s:
            s.settimeout(1.0)
            if s.connect_ex(("127.0.0.1", port)) == 0:
                return True
        time.sleep(0.5)
    return False


@pytest.fixture(scope="module")
def voila_server(tmp_path_factory):
    from test_notebooks import write_kernelspec

    tmp_path = tmp_path_factory.mktemp("voila")
    nb_path = tmp_path / "panels.ipynb"
    nb_path.write_text(json.dumps(PANELS_NOTEBOOK))
    env = dict(os.environ, JUPYTER_PATH=str(write_kernelspec(tmp_path / "jupyter")), OMP_NUM_THREADS="1",
               JUPYTER_CONFIG_DIR=str(tmp_path / "config"), JUPYTER_RUNTIME_DIR=str(tmp_path / "runtime"))
    port = free_port()
    log_path = tmp_path / "voila.log"
    log = open(log_path, "w")
    proc = subprocess.Popen(
        [sys.executable, "-m", "voila", str(nb_path), "--no-browser", f"--port={port}", "--Voila.ip=127.0.0.1",
         "--show_tracebacks=True"],
        cwd=tmp_path, env=env, stdout=log, stderr=subprocess.STDOUT,
    )
    try:
        if not wait_for_port(port, proc):
            log.flush()
            pytest.fail("voila did not start:\n" + log_path.read_text()[-3000:])
        yield f"http://127.0.0.1:{port}/", log_path
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(timeout=10)
        log.close()


@pytest.fixture(scope="module")
def page(voila_server):
    """The served notebook in headless Chromium, loaded once (Voila runs the notebook on every load)."""
    from playwright.sync_api import sync_playwright

    url, log_path = voila_server
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    with sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS, headless=True)
        try:
            pg = browser.new_page(viewport=VIEWPORT)
            pg.set_default_timeout(WAIT_MS)
            # Voila runs the notebook before the page's content arrives (about 20 s here). Once, in a fresh
            # CI clone, the first load never arrived; a second request starts a new kernel, so try twice and
            # keep the server's log for the failure message.
            for attempt in (1, 2):
                try:
                    pg.goto(url, wait_until="domcontentloaded", timeout=150_000)
                    break
                except Exception as exc:  # playwright's TimeoutError
                    if attempt == 2:
                        raise AssertionError(f"the notebook page did not load twice ({exc}); voila log:\n"
                                             + log_path.read_text()[-4000:]) from None
                    pg.close()
                    pg = browser.new_page(viewport=VIEWPORT)
                    pg.set_default_timeout(WAIT_MS)
            try:
                # the last panel's tabs: by then every cell has run
                pg.wait_for_selector(".mr-workbench-panel .lm-TabBar-tab, .mr-workbench-panel .p-TabBar-tab",
                                     timeout=240_000)
            except Exception:
                pg.screenshot(path=str(ARTIFACTS / "panels_page_failed.png"), full_page=True)
                raise AssertionError("the panels did not render; voila log:\n" + log_path.read_text()[-3000:]
                                     + "\npage text:\n" + pg.inner_text("body")[-3000:])
            yield pg
        finally:
            browser.close()


def shot(locator, name):
    """Element screenshot to tests/artifacts/<name>.png, copied to docs/img/<name>.png when the environment
    variable MANIREG_UPDATE_DOCS_IMG=1 is set (so an ordinary test run leaves the tracked docs alone).

    Voila's page scrolls inside a container, where parts of an element outside the viewport come out blank;
    so the viewport is first made taller than the element.
    """
    height = locator.evaluate("el => Math.ceil(el.getBoundingClientRect().height)")
    locator.page.set_viewport_size({"width": VIEWPORT["width"], "height": max(VIEWPORT["height"], height + 200)})
    locator.scroll_into_view_if_needed()
    locator.page.wait_for_timeout(300)  # let the layout settle after the resize (not a check)
    locator.screenshot(path=str(ARTIFACTS / f"{name}.png"), animations="disabled")
    if os.environ.get("MANIREG_UPDATE_DOCS_IMG") == "1":  # refresh the docs' copies only when asked
        DOCS_IMG.mkdir(parents=True, exist_ok=True)
        shutil.copyfile(ARTIFACTS / f"{name}.png", DOCS_IMG / f"{name}.png")


def wait_images(panel, count):
    """Wait until ``count`` figure images of the panel have been drawn (loaded with a real size)."""
    panel.page.wait_for_function(
        "([el, count]) => Array.from(el.querySelectorAll('img'))"
        ".filter(i => i.complete && i.naturalWidth > 50 && i.offsetParent !== null).length >= count",
        arg=[panel.element_handle(), count],
    )


def table_value(panel, quantity):
    """Text of the value cell next to the cell reading exactly ``quantity`` in a panel's tables."""
    return panel.evaluate(
        "(el, q) => { for (const tr of el.querySelectorAll('tr')) { const td = tr.querySelectorAll('td');"
        " if (td.length > 1 && td[0].innerText.trim() === q) return td[1].innerText.trim(); } return null; }",
        quantity,
    )


def wait_value_changes(panel, quantity, before):
    panel.page.wait_for_function(
        "([el, q, before]) => { for (const tr of el.querySelectorAll('tr')) { const td = tr.querySelectorAll('td');"
        " if (td.length > 1 && td[0].innerText.trim() === q) return td[1].innerText.trim() !== before; }"
        " return false; }",
        arg=[panel.element_handle(), quantity, before],
    )


def assert_no_error(panel):
    text = panel.inner_text()
    assert "failed:" not in text and "Traceback" not in text, text[-2000:]
    # a NaN or inf sent to the browser shows up as a serialization failure
    assert "serialization failed" not in panel.page.inner_text("body"), text[-2000:]


def tick(panel, description):
    """Click the checkbox labelled ``description``."""
    panel.locator(".widget-checkbox", has_text=description).locator("input").first.click()


def type_into(panel, description, value):
    """Fill the text box of the control labelled ``description`` and press Enter."""
    box = panel.locator(".widget-inline-hbox", has=panel.page.locator(f"label:text-is('{description}')")).locator(
        "input").first
    box.fill(str(value))
    box.press("Enter")


def test_sizing_panel(page):
    panel = page.locator(".mr-sizing-panel")
    panel.locator("text=depth (hidden layers)").wait_for()
    wait_images(panel, 1)
    assert_no_error(panel)
    width_before = table_value(panel, "width")
    params_before = table_value(panel, "parameters (dense)")
    shot(panel, "sizing_panel")

    type_into(panel, "samples n", 50000)
    wait_value_changes(panel, "width", width_before)
    assert table_value(panel, "width") != width_before
    assert table_value(panel, "parameters (dense)") != params_before
    panel.locator("text=n=50,000").first.wait_for()  # the status line is set after the table
    assert_no_error(panel)
    shot(panel, "sizing_panel_changed")


def test_geometry_panel(page):
    panel = page.locator(".mr-geometry-panel")
    panel.locator("text=consensus").first.wait_for()
    panel.locator("text=N(r) slope").wait_for()
    wait_images(panel, 4)  # dimension profile, PCA spectra, N(r), reach histogram
    assert_no_error(panel)
    charts_before = table_value(panel, "charts")
    radius_before = table_value(panel, "chart radius")
    assert "rule" in radius_before or "reach" in radius_before, radius_before
    shot(panel, "geometry_panel")

    tick(panel, "use the rule's radius")  # off: the number box (holding the rule's radius) is used
    wait_value_changes(panel, "chart radius", radius_before)
    radius_given = table_value(panel, "chart radius")
    assert "given" in radius_given, radius_given
    type_into(panel, "chart radius", 0.6)
    wait_value_changes(panel, "chart radius", radius_given)
    assert table_value(panel, "chart radius").startswith("0.600")
    assert table_value(panel, "charts") != charts_before
    assert_no_error(panel)


def test_curve_panel(page):
    panel = page.locator(".mr-curve-panel")
    panel.locator("text=local slopes").first.wait_for()
    panel.locator("text=samples needed").wait_for()
    wait_images(panel, 2)  # learning curves, local slopes
    assert "16 of 16 cells finished" in panel.inner_text()
    assert "noise-variance estimate" in panel.inner_text()  # the campaign's estimate bounds the default floor
    assert "warning: " in panel.inner_text()  # a plan from an unverified fit says so
    assert_no_error(panel)
    model_before = table_value(panel, "model")
    assert model_before.startswith("power law plus a fitted floor"), model_before  # the default floor, "fit"
    shot(panel, "curve_panel")

    panel.locator(".widget-toggle-button", has_text="noise-variance estimate").first.click()
    wait_value_changes(panel, "model", model_before)
    assert table_value(panel, "model").startswith("power law above a given floor"), table_value(panel, "model")
    assert table_value(panel, "exponent")  # still shown with its interval
    assert_no_error(panel)

    needed_before = table_value(panel, "samples needed")
    type_into(panel, "target error", 0.25)  # above the floor (the noise estimate, about 0.19 here)
    wait_value_changes(panel, "samples needed", needed_before)
    assert table_value(panel, "samples needed") != needed_before
    assert_no_error(panel)


def test_curve_panel_size_view(page):
    """Add missing cells and run: the 16 cells of the two new widths are trained in the background, the old 16
    are kept, and the capacity read-out and every width's exponent appear."""
    panel = page.locator(".mr-size-view")
    panel.locator("text=local slopes").first.wait_for()
    assert "16 of 16 cells finished" in panel.inner_text()
    assert "capacity read-out: needs nets at two or more width multipliers" in panel.inner_text()
    panel.locator("button", has_text="Add missing cells and run").click()
    panel.locator("text=32 of 32 cells finished").wait_for()
    panel.locator("text=capacity read-out, c_depth 0.5").wait_for()
    panel.locator("text=campaign run: 32 of 32 cells finished, 0 remain").wait_for()
    text = panel.inner_text()
    for name in ("net-w0.5", "net-w2"):
        assert name in text
    assert "best width multiplier" in text
    assert_no_error(panel)
    wait_images(panel, 2)
    shot(panel, "curve_panel_size_view")


def test_workbench_panel(page):
    panel = page.locator(".mr-workbench-panel")
    panel.locator("text=consensus").first.wait_for()
    wait_images(panel, 4)  # the geometry tab's figures
    assert_no_error(panel)
    assert "found 16 finished cells in the store, 0 remain" in panel.inner_text()
    shot(panel, "workbench_panel")

    panel.locator(".lm-TabBar-tab, .p-TabBar-tab", has_text="Learning curves").first.click()
    panel.locator("text=local slopes").first.wait_for()
    wait_images(panel, 2)
    assert_no_error(panel)
    shot(panel, "workbench_panel_curves")
