"""One real-browser check: a SizingPanel served by Voila, driven by headless Chromium through playwright.

Skipped only when Debian's chromium (/usr/bin/chromium) is absent; CI installs it. The server binds to
127.0.0.1 on a free port, is given a bounded time to come up and is shut down at the end. Screenshots go to
tests/artifacts/ and are copied to docs/img/.
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

pytestmark = [pytest.mark.browser, pytest.mark.slow]

PANEL_NOTEBOOK = {
    "cells": [
        {"cell_type": "code", "execution_count": None, "metadata": {}, "outputs": [],
         "source": "from manireg.widgets import SizingPanel\n"
                   "panel = SizingPanel(n=1000, d=2.0, s=1.5, input_dim=256)\npanel"},
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


@pytest.fixture
def voila_server(tmp_path):
    pytest.importorskip("voila")
    from test_notebooks import write_kernelspec

    nb_path = tmp_path / "sizing_panel.ipynb"
    nb_path.write_text(json.dumps(PANEL_NOTEBOOK))
    env = dict(os.environ, JUPYTER_PATH=str(write_kernelspec(tmp_path / "jupyter")), OMP_NUM_THREADS="1",
               JUPYTER_CONFIG_DIR=str(tmp_path / "config"), JUPYTER_RUNTIME_DIR=str(tmp_path / "runtime"))
    port = free_port()
    log = open(tmp_path / "voila.log", "w")
    proc = subprocess.Popen(
        [sys.executable, "-m", "voila", str(nb_path), "--no-browser", f"--port={port}", "--Voila.ip=127.0.0.1"],
        cwd=tmp_path, env=env, stdout=log, stderr=subprocess.STDOUT,
    )
    try:
        base = f"http://127.0.0.1:{port}/"
        if not wait_for_port(port, proc):
            log.flush()
            pytest.fail("voila did not start:\n" + (tmp_path / "voila.log").read_text()[-3000:])
        yield base
    finally:
        proc.terminate()
        try:
            proc.wait(timeout=20)
        except subprocess.TimeoutExpired:
            proc.kill()
            proc.wait(timeout=10)
        log.close()


def spec_value(page, quantity):
    """Text of the value cell next to ``quantity`` in the panel's table."""
    row = page.locator("tr", has=page.locator("td", has_text=quantity)).first
    return row.locator("td").nth(1).inner_text()


@pytest.mark.skipif(not Path(CHROMIUM).exists(), reason="needs Debian's chromium at /usr/bin/chromium")
def test_sizing_panel_in_real_browser(voila_server):
    sync_api = pytest.importorskip("playwright.sync_api")
    ARTIFACTS.mkdir(parents=True, exist_ok=True)
    with sync_api.sync_playwright() as p:
        browser = p.chromium.launch(executable_path=CHROMIUM, args=CHROMIUM_ARGS, headless=True)
        try:
            page = browser.new_page(viewport={"width": 1100, "height": 1000})
            page.set_default_timeout(90_000)
            page.goto(voila_server, wait_until="domcontentloaded", timeout=240_000)
            page.wait_for_selector("text=depth (hidden layers)")
            width_before = spec_value(page, "width")
            params_before = spec_value(page, "parameters (dense)")
            page.screenshot(path=str(ARTIFACTS / "sizing_panel.png"), full_page=True)

            box = page.locator(".widget-text", has_text="samples n").locator("input")
            box.fill("50000")
            box.press("Enter")
            page.wait_for_function(
                "before => { for (const tr of document.querySelectorAll('tr')) {"
                " const td = tr.querySelectorAll('td');"
                " if (td.length > 1 && td[0].innerText.trim() === 'width') return td[1].innerText.trim() !== before; }"
                " return false; }",
                arg=width_before,
            )
            assert spec_value(page, "width") != width_before
            assert spec_value(page, "parameters (dense)") != params_before
            page.screenshot(path=str(ARTIFACTS / "sizing_panel_changed.png"), full_page=True)
        finally:
            browser.close()
    DOCS_IMG.mkdir(parents=True, exist_ok=True)
    for name in ("sizing_panel.png", "sizing_panel_changed.png"):
        shutil.copyfile(ARTIFACTS / name, DOCS_IMG / name)
