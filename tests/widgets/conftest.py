import os
import time

os.environ.setdefault("MPLBACKEND", "Agg")

import pytest  # noqa: E402

import tdakit  # noqa: E402
from tdakit.shapes import circle  # noqa: E402
from tdakit.widgets import Explorer  # noqa: E402


@pytest.fixture(scope="session")
def ring():
    return tdakit.load_cloud(circle(500, noise=0.03, rng=1))


@pytest.fixture
def explorer(ring, tmp_path):
    app = Explorer(ring, seed=1, export_folder=tmp_path / "export")
    app.controls["sampling.n_landmarks"].value = 50
    app.controls["band.n_boot"].value = 20
    app.controls["band.method"].value = "bootstrap"
    yield app
    app.close()


def start_long_run(app, timeout: float = 60) -> None:
    """A run that keeps the worker busy for minutes (1000 bootstrap replicates on 300 landmarks); returns once
    the worker has reported its first step, so it is really computing."""
    app.controls["sampling.n_landmarks"].value = 300
    app.controls["band.method"].value = "bootstrap"
    app.controls["band.n_boot"].value = 1000
    app.controls["run"].click()
    deadline = time.time() + timeout
    while app.actions.step.value.startswith(("Idle", "starting")) and time.time() < deadline:
        time.sleep(0.05)
    assert app.actions.job.state == "running"


def descendants(widget):
    """Every widget reachable from ``widget`` through children (what the page can show)."""
    found = [widget]
    for child in getattr(widget, "children", ()):
        found += descendants(child)
    return found
