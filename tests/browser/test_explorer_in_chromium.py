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
        yield f"http://127.0.0.1:{port}/", log, server
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


def _button(scope, text):
    return scope.locator("button.jupyter-button").filter(has_text=re.compile(rf"^\s*{re.escape(text)}\s*$")).first


def _row(scope, label):
    """The labelled row of a control (labels are their own widgets, so they are never cut)."""
    return scope.locator(".widget-hbox").filter(has=scope.page.get_by_text(label, exact=True)).last


def _type_into(locator, text):
    locator.click()
    locator.press("Control+A")
    locator.type(text)
    locator.press("Enter")


def _shoot(target, shots, name, seen):
    """A screenshot of the whole page, scrolled so that ``target`` (a panel) is at the top."""
    target.evaluate("element => element.scrollIntoView()")
    target.page.wait_for_timeout(700)  # images decoded, layout settled
    path = shots / f"{len(seen) + 1:02d}_{name}.png"
    target.page.screenshot(path=str(path))
    seen.append(path)


def _worker_processes(server_pid):
    return {p.pid: p for p in psutil.Process(server_pid).children(recursive=True)}


def _clipped_texts(page):
    """Texts that do not fit their box: labels, buttons and status lines cut with an ellipsis or hidden, and
    choices of a drop-down or list wider than the control (any of them may be chosen)."""
    return page.evaluate("""() => {
        const boxes = Array.from(document.querySelectorAll(
                '.widget-label, .widget-html-content span, button.jupyter-button, .widget-readout'))
            .filter(e => e.offsetParent !== null && e.scrollWidth > e.clientWidth + 1
                    && getComputedStyle(e).overflow !== 'visible')
            .map(e => e.innerText.trim()).filter(t => t.length > 0);
        const ruler = document.createElement('canvas').getContext('2d');
        const choices = [];
        for (const select of document.querySelectorAll('select')) {
            if (select.offsetParent === null) continue;
            ruler.font = getComputedStyle(select).font;
            const room = select.clientWidth - (select.multiple || select.size > 1 ? 8 : 28);
            for (const option of select.options) {
                if (ruler.measureText(option.text).width > room) choices.push(option.text);
            }
        }
        return boxes.concat(choices);
    }""")


@pytest.mark.browser
def test_every_view_of_the_three_panels_in_chromium(voila, tmp_path):
    from playwright.sync_api import sync_playwright

    url, log, server = voila
    shots = Path(os.environ.get("TDAKIT_SCREENSHOTS", "/tmp/explorer_shots"))
    shots.mkdir(parents=True, exist_ok=True)
    seen = []
    args = ["--no-sandbox", "--disable-gpu", "--disable-dev-shm-usage", "--disable-background-networking",
            "--disable-component-update", "--disable-sync", "--no-first-run", "--disable-quic"]
    with sync_playwright() as driver:
        browser = driver.chromium.launch_persistent_context(str(tmp_path / "profile"), executable_path=CHROMIUM,
                                                             headless=True, args=args,
                                                             viewport={"width": 1400, "height": 1300})
        try:
            page = browser.new_page()
            page.route(OUTSIDE, lambda route: route.abort())
            page.goto(url, timeout=180_000)
            panels = page.locator(".jp-OutputArea-output").filter(has=page.locator(".widget-textarea"))
            _button(page, "Run").wait_for(timeout=180_000)
            explorer, study, comparison = (panels.nth(i) for i in range(3))
            images = page.locator("img")
            assert not [i for i in range(images.count()) if images.nth(i).is_visible()], \
                "an empty image is shown (a broken-image icon) before any figure exists"
            _shoot(explorer, shots, "explorer_before_run", seen)
            _walk_explorer(page, explorer, shots, seen, log)
            _walk_subsampling(page, study, shots, seen, log)
            _walk_comparison(page, comparison, shots, seen, log)
            assert not _clipped_texts(page), f"cut labels: {_clipped_texts(page)}"
            _close_page_stops_the_worker(page, explorer, server, log)
        finally:
            browser.close()
    assert all(path.stat().st_size > 5_000 for path in seen)


def _walk_explorer(page, explorer, shots, seen, log):
    diagram = explorer.locator(".lm-TabPanel img, .widget-tab img").nth(1)
    _button(explorer, "Run").click()
    _wait_for_text(page, "Showing 60 maxmin landmarks", log)
    _shoot(explorer, shots, "explorer_cloud", seen)
    for tab in ("Diagram", "Barcode", "Feature table"):
        explorer.get_by_text(tab, exact=True).first.click()
        page.wait_for_timeout(400)
        _shoot(explorer, shots, f"explorer_{tab.lower().replace(' ', '_')}", seen)
    assert explorer.get_by_text("H1: showing").count()
    explorer.get_by_text("Cloud", exact=True).first.click()
    explorer.locator(".widget-select select").select_option(index=0)  # highlight the planted loop
    _wait_for_text(page, "catalogue points nearest them", log)
    _shoot(explorer, shots, "explorer_highlighted_feature", seen)
    before = diagram.get_attribute("src")
    _type_into(_row(explorer, "Landmarks").locator(".widget-readout"), "40")
    _wait_for_text(page, "Settings changed", log)
    assert explorer.get_by_text("Out of date").count()
    _shoot(explorer, shots, "explorer_out_of_date", seen)
    _button(explorer, "Run").click()
    _wait_for_text(page, "Showing 40 maxmin landmarks", log)
    assert diagram.get_attribute("src") != before and not explorer.get_by_text("Out of date").count()
    explorer.get_by_text("Advanced: every other setting of the pipeline").click()
    page.wait_for_timeout(400)
    for label in ("Scale cap", "Dense-core fraction", "DTM neighbours", "Subsample size", "Memory budget",
                  "Worker processes", "Metric", "Dask scheduler", "Checkpoint file"):
        assert _row(explorer, label).is_visible(), label
    _shoot(explorer, shots, "explorer_advanced_options", seen)
    explorer.get_by_text("Advanced: every other setting of the pipeline").click()
    _row(explorer, "Complex").locator("select").select_option(label="Vietoris-Rips")
    _row(explorer, "Noise band").locator("select").select_option(label="DTM: proven")
    _wait_for_text(page, "Cannot run these settings", log)
    assert _button(explorer, "Run").is_disabled()
    _shoot(explorer, shots, "explorer_settings_that_cannot_run", seen)
    _row(explorer, "Complex").locator("select").select_option(label="DTM-weighted Rips")
    _wait_for_text(page, "Settings changed", log)


def _walk_subsampling(page, study, shots, seen, log):
    _shoot(study, shots, "subsampling_before_study", seen)
    _button(study, "Run study").click()
    _wait_for_text(page, "Study done", log)
    _button(study, "Compare the two settings").click()
    _wait_for_text(page, "Side by side:", log)
    _shoot(study, shots, "subsampling_study_and_pair", seen)


def _walk_comparison(page, comparison, shots, seen, log):
    _type_into(_row(comparison, "Pieces per catalogue").locator(".widget-readout"), "3")
    _wait_for_text(page, "no outcome can be significant", log)
    _shoot(comparison, shots, "comparison_three_pieces_warning", seen)
    _type_into(_row(comparison, "Pieces per catalogue").locator(".widget-readout"), "4")
    _type_into(_row(comparison, "Points per piece").locator(".widget-readout"), "80")
    _type_into(_row(comparison, "Landmarks per piece").locator(".widget-readout"), "30")
    _button(comparison, "Run test").click()
    _wait_for_text(page, "Test done", log)
    _shoot(comparison, shots, "comparison_null_distribution", seen)


def _close_page_stops_the_worker(page, explorer, server, log):
    before = _worker_processes(server.pid)
    _type_into(_row(explorer, "Replicates").locator("input"), "5000")
    _button(explorer, "Run").click()
    deadline = time.time() + 60
    while time.time() < deadline and not set(_worker_processes(server.pid)) - set(before):
        time.sleep(0.2)
    workers = [p for pid, p in _worker_processes(server.pid).items() if pid not in before]
    assert workers, "no worker process started"
    page.close()
    gone, alive = psutil.wait_procs(workers, timeout=60)
    assert not alive, f"the worker outlived the page: {alive}\n{log.read_text()[-2000:]}"
