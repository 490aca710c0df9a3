"""The explorer in a real browser: Voila serves a notebook, Playwright drives Debian's Chromium.

Change the landmark count, press Run, wait for the status line the explorer writes after redrawing,
check the diagram image changed, and save a screenshot (``TDAKIT_SCREENSHOTS`` or the test's temp dir).
"""

import os
import re
import signal
import socket
import subprocess
import sys
import time
from pathlib import Path

import psutil
import pytest

CHROMIUM = "/usr/bin/chromium"
NOTEBOOK = Path(__file__).with_name("explorer_app.ipynb")


def _requirements():
    if not Path(CHROMIUM).exists():
        pytest.skip("Chromium is not installed (apt-get install --no-install-recommends chromium)")
    for module in ("voila", "playwright"):
        try:
            __import__(module)
        except ImportError:
            pytest.skip(f"{module} is not installed (pip install -e '.[test]')")


def _free_port() -> int:
    with socket.socket() as probe:
        probe.bind(("127.0.0.1", 0))
        return probe.getsockname()[1]


def _wait_for_port(port, server, log, limit=90):
    deadline = time.time() + limit
    while time.time() < deadline:
        if server.poll() is not None:
            pytest.fail(f"Voila exited early:\n{log.read_text()[-3000:]}")
        with socket.socket() as probe:
            if probe.connect_ex(("127.0.0.1", port)) == 0:
                return
        time.sleep(0.3)
    pytest.fail(f"Voila did not open port {port}:\n{log.read_text()[-3000:]}")


def _stop(server):
    family = psutil.Process(server.pid).children(recursive=True)
    server.send_signal(signal.SIGTERM)
    try:
        server.wait(timeout=20)
    except subprocess.TimeoutExpired:
        server.kill()
        server.wait(timeout=10)
    gone, alive = psutil.wait_procs(family, timeout=20)
    for process in alive:
        process.kill()
    return alive


@pytest.fixture
def voila(tmp_path):
    _requirements()
    port = _free_port()
    log = tmp_path / "voila.log"
    env = {**os.environ, "JUPYTER_DATA_DIR": str(tmp_path / "jupyter"), "MPLBACKEND": "Agg"}
    with open(log, "w") as stream:
        server = subprocess.Popen(
            [sys.executable, "-m", "voila", str(NOTEBOOK), "--no-browser", f"--port={port}", "--Voila.ip=127.0.0.1",
             "--Voila.port_retries=0", "--show_tracebacks=True"],
            stdout=stream, stderr=subprocess.STDOUT, env=env, start_new_session=True,
            cwd=str(Path(__file__).resolve().parents[2]))
    try:
        _wait_for_port(port, server, log)
        yield f"http://127.0.0.1:{port}/", log
    finally:
        survivors = _stop(server)
    assert not survivors, f"processes outlived Voila: {survivors}"


# Only requests leaving the machine are intercepted (and refused: there is no network). Intercepting the
# local ones too, even to let them continue, left Voila's widget manager waiting forever.
OUTSIDE = re.compile(r"^https?://(?!127\.0\.0\.1[:/])")


def _wait_for_text(page, text, log, limit=180):
    deadline = time.time() + limit
    while time.time() < deadline:
        errors = page.locator('[data-mime-type="application/vnd.jupyter.stderr"]')
        if errors.count():
            pytest.fail(f"the notebook wrote to stderr: {errors.first.inner_text()[:2000]}")
        if page.get_by_text(text).count():
            return
        page.wait_for_timeout(300)
    pytest.fail(f"never saw {text!r}; Voila log:\n{log.read_text()[-3000:]}")


@pytest.mark.browser
def test_explorer_reruns_after_a_control_changes(voila, tmp_path):
    from playwright.sync_api import sync_playwright

    url, log = voila
    shots = Path(os.environ.get("TDAKIT_SCREENSHOTS", tmp_path))
    shots.mkdir(parents=True, exist_ok=True)
    args = ["--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--disable-background-networking",
            "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic"]
    with sync_playwright() as driver:
        browser = driver.chromium.launch_persistent_context(str(tmp_path / "profile"), executable_path=CHROMIUM,
                                                             headless=True, args=args,
                                                             viewport={"width": 1400, "height": 1000})
        try:
            page = browser.new_page()
            page.route(OUTSIDE, lambda route: route.abort())
            page.goto(url, timeout=180_000)
            run_button = page.locator("button.jupyter-button").filter(has_text=re.compile(r"^\s*Run\s*$"))
            run_button.wait_for(timeout=180_000)
            run_button.click()
            _wait_for_text(page, "Showing 60 maxmin landmarks", log)
            diagram = page.locator(".widget-tab img, .jupyter-widget-tab img, .lm-TabPanel img").nth(1)
            before = diagram.get_attribute("src")
            readout = page.locator(".widget-slider", has_text="Landmarks").locator(".widget-readout")
            readout.click()
            page.keyboard.press("Control+A")
            page.keyboard.type("40")
            page.keyboard.press("Enter")
            _wait_for_text(page, "Settings changed", log)
            run_button.click()
            _wait_for_text(page, "Showing 40 maxmin landmarks", log)
            after = diagram.get_attribute("src")
            assert before and after and before != after
            page.get_by_text("Diagram", exact=True).first.click()
            page.wait_for_timeout(500)
            page.screenshot(path=str(shots / "explorer_after_rerun.png"), full_page=True)
        finally:
            browser.close()
    assert (shots / "explorer_after_rerun.png").stat().st_size > 10_000
