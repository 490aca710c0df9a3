"""Widget logic in plain Python: controls drive the state; run, cancel, cache, log pane and export."""

import time

import numpy as np
import psutil
import pytest

import tdakit
from tdakit.shapes import circle
from tdakit.widgets import BackgroundJob, ComparisonPanel, Explorer, SubsamplingPanel
from tdakit.widgets.jobs import run_analysis


@pytest.fixture(scope="module")
def ring():
    return tdakit.load_cloud(circle(500, noise=0.03, rng=1))


@pytest.fixture
def explorer(ring, tmp_path):
    app = Explorer(ring, seed=1, export_folder=tmp_path / "export")
    app.controls["landmarks"].value = 50
    app.controls["replicates"].value = 20
    app.controls["band"].value = "bootstrap"
    return app


def test_every_control_drives_the_options(explorer):
    c = explorer.controls
    changes = {"sampling": "random", "landmarks": 70, "complex": "witness", "max_dim": 2, "band": "landscape",
               "level": 0.9, "replicates": 40}
    for name, value in changes.items():
        c[name].value = value
    options = explorer.current_options()
    assert (options.sampling.method, options.sampling.n_landmarks) == ("random", 70)
    assert (options.complex.filtration, options.complex.max_dim) == ("witness", 2)
    assert (options.band.method, options.band.level, options.band.n_boot) == ("landscape", 0.9, 40)


def test_run_draws_every_view_and_says_what_it_shows(explorer):
    explorer.controls["run"].click()
    assert explorer.wait() == "done"
    assert all(view.value[:4] == b"\x89PNG" for view in explorer.views.values())
    assert "Showing 50 maxmin landmarks, dtm, bootstrap band at 0.95" in explorer.actions.status.value
    assert "<table" in explorer.table.value and explorer.run.landmarks.n_landmarks == 50
    assert not explorer.actions.job.process.is_alive()


def test_level_change_is_instant_and_matches_the_band(explorer):
    explorer.controls["run"].click()
    explorer.wait()
    job, before = explorer.actions.job, explorer.run.band.radius(1)
    explorer.controls["level"].value = 0.6
    assert explorer.actions.job is job  # no new worker
    assert "no recomputation" in explorer.actions.status.value
    expected = float(np.quantile(explorer.run.band.replicates[:, 1], 0.6, method="higher"))
    expected += explorer.run.band.params["landmark_term"]  # the bootstrap's radius adds the landmark bound
    assert explorer.run.band.radius(1) == expected <= before


def test_cache_hit_returns_the_earlier_run_without_a_worker(explorer):
    explorer.controls["run"].click()
    explorer.wait()
    first = explorer.run
    explorer.controls["landmarks"].value = 30
    assert "Settings changed" in explorer.actions.status.value
    explorer.controls["run"].click()
    explorer.wait()
    job = explorer.actions.job
    explorer.controls["landmarks"].value = 50
    explorer.controls["run"].click()
    assert explorer.actions.job is job and "from cache" in explorer.actions.status.value
    assert explorer.run.diagrams is first.diagrams and explorer.run.band.replicates is first.band.replicates


def test_selecting_a_feature_highlights_its_vertices(explorer):
    explorer.controls["run"].click()
    explorer.wait()
    assert explorer.controls["feature"].options, "the planted loop should be significant under the bootstrap band"
    explorer.controls["view_dim"].value = 1
    choices = [value for _, value in explorer.controls["feature"].options]
    assert len(choices) == 1 and explorer.highlighted == choices  # the planted loop, and nothing else
    explorer.controls["feature"].value = choices[0]
    assert explorer.highlighted == [choices[0]] and explorer.views["cloud"].value[:4] == b"\x89PNG"


def test_cancel_stops_the_worker_process(ring):
    app = Explorer(tdakit.load_cloud(circle(4000, noise=0.05, rng=2)), seed=0)
    app.controls["landmarks"].value = 300
    app.controls["band"].value = "bootstrap"
    app.controls["replicates"].value = 1000
    app.controls["run"].click()
    job = app.actions.job
    deadline = time.time() + 60
    while app.actions.progress.value == 0 and time.time() < deadline:
        time.sleep(0.1)  # wait until the worker is really computing
    pid = job.process.pid
    app.controls["cancel"].click()
    assert job.state == "cancelled" and not job.process.is_alive() and job.process.exitcode is not None
    assert not psutil.pid_exists(pid) or psutil.Process(pid).status() == psutil.STATUS_ZOMBIE
    assert "Cancelled" in app.actions.status.value and "worker process was stopped" in app.log.text
    assert not app.controls["run"].disabled and app.controls["cancel"].disabled


def test_errors_from_the_worker_reach_the_log_pane():
    app = Explorer(tdakit.load_cloud(np.random.default_rng(0).normal(size=(200, 7))), seed=0)
    app.controls["complex"].value = "alpha"  # alpha complexes need at most 5 coordinates
    app.controls["band"].value = "none"
    app.controls["run"].click()
    assert app.wait() == "failed"
    assert "Failed" in app.actions.status.value and "alpha" in app.log.text
    assert not app.controls["run"].disabled


def test_export_writes_figures_run_file_and_table(explorer):
    explorer.controls["export"].click()
    assert "Nothing to export yet" in explorer.log.text  # before any run: explained, not raised
    explorer.controls["run"].click()
    explorer.wait()
    explorer.controls["export"].click()
    folder = explorer.export_folder
    names = {p.name for p in folder.iterdir()}
    assert {"explorer_diagram.pdf", "explorer_diagram.svg", "explorer_summary.png", "explorer.tdkrun",
            "explorer_features.csv"} <= names
    assert tdakit.load_run(folder / "explorer.tdkrun").band.radii == explorer.run.band.radii


def test_background_job_result_equals_a_direct_call(ring):
    options = {"sampling": {"n_landmarks": 20}, "band": {"method": "none"}}
    job = BackgroundJob(run_analysis, ring, options, 3).start()
    assert job.wait(120) == "done"
    direct = tdakit.analyze(ring, options, rng=3)
    assert np.array_equal(job.result.diagrams[1], direct.diagrams[1])


def test_subsampling_panel_runs_the_study_and_compares_two_settings(ring):
    panel = SubsamplingPanel(ring, seed=2)
    panel.controls["counts"].value = "10, 20, 40"
    panel.controls["seeds"].value = 2
    panel.controls["run"].click()
    assert panel.wait() == "done" and panel.views["study"].value[:4] == b"\x89PNG"
    assert "maxmin" in panel.recommendation.value and len(panel.study.cells) == 2 * 3 * 2
    panel.controls["first"].value = ("maxmin", 10)
    panel.controls["second"].value = ("random", 40)
    panel.controls["compare"].click()
    assert panel.wait() == "done"
    assert "maxmin, 10 landmarks | random, 40 landmarks" in panel.pair_actions.status.value
    panel.controls["counts"].value = "ten"
    panel.controls["run"].click()
    assert "'counts'" in panel.log.text


def test_comparison_panel_shows_the_null_distribution(ring):
    other = tdakit.load_cloud(np.random.default_rng(5).normal(size=(500, 2)))
    panel = ComparisonPanel(ring, other, names=("ring", "blob"), seed=1)
    panel.controls["piece_size"].value = 100
    panel.controls["landmarks"].value = 30
    panel.controls["run"].click()
    assert panel.wait() == "done" and panel.view.value[:4] == b"\x89PNG"
    # Ring pieces against Gaussian-blob pieces: the observed split is the tightest of all 35 labelings of
    # 4 + 4 pieces, so the exact p-value is 2/70 (both labelings of the same split count; Robinson & Turner 2017).
    assert panel.result.test.exact and panel.result.test.p_value == pytest.approx(2 / 70)
    assert "p = 0.0286" in panel.actions.status.value
