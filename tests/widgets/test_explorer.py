"""The explorer in plain Python: its controls reproduce the library's runs, and its views never go stale unmarked."""

import datetime
import os
import stat
import time
from pathlib import Path

import numpy as np
import psutil
import pytest

import tdakit
from tdakit.pipeline import check_options
from tdakit.widgets import Explorer

from .conftest import start_long_run

DEMO_FILE = Path(__file__).resolve().parents[2] / "datasets" / "marrowfield_halos.csv"


def test_the_explorer_reproduces_the_demo_run_from_its_controls(tmp_path):
    from tdakit.cli.demo import demo_options
    from tdakit.cli.main import main
    from tdakit.scenarios import MARROWFIELD_BOX

    assert main(["demo", "--out", str(tmp_path / "demo"), "--no-figures", "--quiet"]) == 0
    demo = tdakit.load_run(tmp_path / "demo" / "marrowfield.tdkrun")
    cloud = tdakit.load_cloud(DEMO_FILE, columns=["x", "y", "z"], metric="periodic", box=MARROWFIELD_BOX)
    app = Explorer(cloud)
    for name, value in {"seed": 2026, "sampling.n_landmarks": 200, "complex.max_dim": 1, "band.n_boot": 100,
                        "band.method": "auto"}.items():  # what `tdakit demo` states as its defaults
        app.controls[name].value = value
    assert app.current_options() == demo_options()
    assert check_options(cloud, app.current_options()) == demo.options  # the same resolved run ...
    app.controls["run"].click()
    assert app.wait() == "done", app.log.text
    run = app.run
    for k in range(len(demo.diagrams)):  # ... and the same numbers
        np.testing.assert_array_equal(run.diagrams[k], demo.diagrams[k])
    assert run.band.method == demo.band.method and run.band.radii == demo.band.radii
    assert run.seed == demo.seed == 2026
    app.close()


def test_run_draws_every_view_and_says_what_it_shows(explorer):
    assert all(view.image.layout.display == "none" and not view.value for view in explorer.views.values())
    assert all(view.placeholder.layout.display != "none" for view in explorer.views.values())  # no broken image
    assert explorer.controls["view_dim"].disabled and explorer.controls["export"].disabled
    explorer.controls["run"].click()
    assert explorer.wait() == "done"
    assert all(view.value[:4] == b"\x89PNG" and view.image.layout.display != "none"
               for view in explorer.views.values())
    assert "Showing 50 maxmin landmarks, dtm, bootstrap band at 0.95" in explorer.actions.status.value
    assert explorer.actions.progress.value == explorer.actions.progress.max
    assert not explorer.actions.job.process.is_alive()


def test_progress_names_the_step_the_count_and_the_time_left(explorer):
    seen = []
    report = explorer.actions._progress
    explorer.actions._progress = lambda step, done, total: (seen.append((step, done, total)), report(step, done,
                                                                                                       total))
    explorer.controls["run"].click()
    assert explorer.wait() == "done"
    steps = [step for step, _, _ in seen]
    assert steps.index("landmarks") < steps.index("diagrams") < steps.index("band")
    assert ("band", 20, 20) in seen
    from tdakit.widgets.common import describe_progress

    assert describe_progress("band", 5, 20, 10.0) == "band: 5 of 20, 10 s so far, about 30 s left"
    assert describe_progress("diagrams", 0, 1, 3.2) == "diagrams: working, 3 s so far"


def test_level_change_is_instant_and_matches_the_band(explorer):
    explorer.controls["run"].click()
    explorer.wait()
    job, before = explorer.actions.job, explorer.run.band.radius(1)
    explorer.controls["band.level"].value = 0.6
    assert explorer.actions.job is job  # no new worker
    assert "no recomputation" in explorer.actions.status.value
    expected = float(np.quantile(explorer.run.band.replicates[:, 1], 0.6, method="higher"))
    expected += explorer.run.band.params["landmark_term"]  # the bootstrap's radius adds the landmark bound
    assert explorer.run.band.radius(1) == expected <= before
    assert not any(view.stale for view in explorer.views.values())


def test_settings_change_marks_the_views_out_of_date_and_changing_back_clears_it(explorer):
    explorer.controls["run"].click()
    explorer.wait()
    explorer.controls["complex.max_scale"].set(0.5)  # an advanced option counts like any other
    assert all(view.stale and "settings changed" in view.banner.value for view in explorer.views.values())
    assert "Settings changed" in explorer.actions.status.value
    explorer.controls["complex.max_scale"].set(None)
    assert not any(view.stale for view in explorer.views.values())


def test_cache_hit_returns_the_earlier_run_without_a_worker(explorer):
    explorer.controls["run"].click()
    explorer.wait()
    first = explorer.run
    explorer.controls["sampling.n_landmarks"].value = 30
    explorer.controls["run"].click()
    explorer.wait()
    job = explorer.actions.job
    explorer.controls["sampling.n_landmarks"].value = 50
    explorer.controls["run"].click()
    assert explorer.actions.job is job and "from cache" in explorer.actions.status.value
    assert explorer.run.diagrams is first.diagrams and explorer.run.band.replicates is first.band.replicates


def test_show_dimension_offers_only_computed_dimensions_and_the_table_follows_it(explorer):
    explorer.controls["run"].click()
    explorer.wait()
    assert [value for _, value in explorer.controls["view_dim"].options] == [0, 1]
    table = explorer.run.table
    for dim in (0, 1):
        explorer.controls["view_dim"].value = dim
        total = int((table.dimension == dim).sum())
        assert f"H{dim}: showing {min(15, total)} of {total}</b>" in explorer.table.value
        assert explorer.table.value.count("<tr>") == min(15, total) + 1  # header + rows of this dimension only
    explorer.controls["complex.max_dim"].value = 2
    explorer.controls["run"].click()
    explorer.wait()
    assert [value for _, value in explorer.controls["view_dim"].options] == [0, 1, 2]


def test_a_highlighted_feature_keeps_its_number_and_shows_its_own_points(explorer):
    explorer.controls["run"].click()
    explorer.wait()
    explorer.controls["view_dim"].value = 1
    options = explorer.controls["feature"].options
    assert len(options) == 1, "the planted loop, and nothing else, should be significant"
    text, label = options[0]
    explorer.controls["feature"].value = label
    assert explorer.highlighted == [label]
    assert text.startswith("1: H1") and explorer._numbers(1) == {label: 1}
    row = explorer.run.table.loc[label]
    vertices = set(row.birth_vertices) | set(row.death_vertices)
    marks = explorer.run.landmarks
    assert set(explorer.location.vertices) == vertices
    assert explorer.location.points.size > len(vertices)
    assert set(marks.indices[marks.nearest[explorer.location.points]]) <= vertices  # nearest to its vertices
    radius = np.hypot(*explorer.cloud.points[explorer.location.points].T)
    assert np.all(np.abs(radius - 1) < 0.2)  # on the planted unit circle, not scattered across the plane
    assert "Feature 1</b>" in explorer.location_text.value and "catalogue points" in explorer.location_text.value


def test_incompatible_options_disable_run_and_say_why_before_running(explorer, ring):
    run = explorer.controls["run"]
    explorer.controls["complex.filtration"].value = "rips"
    explorer.controls["band.method"].value = "dtm"
    assert run.disabled and "Cannot run" in explorer.problems.value and "'subsample'" in explorer.problems.value
    explorer.controls["band.method"].value = "subsample"
    assert not run.disabled and explorer.problems.value == ""
    explorer.controls["band.method"].value = "density"
    assert run.disabled and "default sampling and complex" in explorer.problems.value
    explorer.controls["complex.filtration"].value = "dtm"
    explorer.controls["sampling.n_landmarks"].set(200)
    assert not run.disabled and "every point" in explorer.problems.value  # what the density band really uses
    explorer.controls["band.method"].value = "auto"
    assert "will use the <b>density</b> band" in explorer.problems.value
    for filtration in ("alpha", "witness", "rips", "dtm"):  # the panel's verdict is the pipeline's own
        for band in ("auto", "dtm", "density", "subsample", "landscape"):
            explorer.controls["complex.filtration"].value = filtration
            explorer.controls["band.method"].value = band
            try:
                check_options(ring, explorer.current_options())
                refused = False
            except ValueError:
                refused = True
            assert run.disabled == refused, (filtration, band)


def test_every_warning_of_a_run_reaches_the_log(ring):
    app = Explorer(ring, seed=0)
    app.controls["sampling.n_landmarks"].value = 100  # 5 witnesses per landmark: the core warns
    app.controls["complex.filtration"].value = "witness"
    app.controls["band.method"].value = "none"
    app.controls["run"].click()
    assert app.wait() == "done"
    assert "Warning: FewWitnessesWarning: Only 5 witnesses per landmark" in app.log.text
    assert "1 warning(s)" in app.actions.status.value
    app.close()


def test_a_failed_run_reports_and_marks_the_earlier_figures(explorer):
    explorer.controls["run"].click()
    explorer.wait()
    explorer.controls["complex.memory_budget"].set(1000.0)  # far too small: the core refuses before building
    explorer.controls["run"].click()
    assert explorer.wait() == "failed"
    assert "Failed" in explorer.actions.status.value and "memory" in explorer.log.text.lower()
    assert all(view.stale for view in explorer.views.values())
    assert not explorer.controls["run"].disabled


def test_cancel_stops_the_worker_and_marks_the_figures(ring):
    app = Explorer(ring, seed=0)
    app.controls["sampling.n_landmarks"].value = 20
    app.controls["band.method"].value = "none"
    app.controls["run"].click()
    assert app.wait() == "done"
    app.controls["n_jobs"].value = 2  # the worker then runs its own pool of replicate workers
    start_long_run(app)
    job = app.actions.job
    deadline = time.time() + 120
    pool = []
    while not pool and time.time() < deadline:  # until the band's replicate workers have started
        time.sleep(0.1)
        pool = psutil.Process(job.process.pid).children(recursive=True)
    assert pool, "no replicate workers were started"
    app.controls["cancel"].click()
    assert job.state == "cancelled" and not job.process.is_alive() and job.process.exitcode is not None
    gone, alive = psutil.wait_procs(pool, timeout=10)
    assert not alive, f"replicate workers outlived the cancel: {alive}"
    assert "Cancelled" in app.actions.status.value and "worker process was stopped" in app.log.text
    assert all(view.stale and "cancelled" in view.banner.value for view in app.views.values())
    assert not app.controls["run"].disabled and app.controls["cancel"].disabled


def test_closing_the_page_stops_the_worker(ring):
    app = Explorer(ring, seed=0)
    start_long_run(app)
    job = app.actions.job
    assert job.state == "running"
    app.root.comm.handle_close({"content": {"comm_id": app.root.model_id, "data": {}}})  # what the page sends
    assert job.state == "cancelled" and not job.process.is_alive()


def test_export_feedback_numbered_names_and_same_permissions(explorer):
    explorer.export_formats = ("svg",)  # one format is enough here (all three take ~10 s)
    explorer.controls["export"].click()
    assert "Nothing to export yet" in explorer.log.text  # disabled before a run; explained if forced
    explorer.controls["run"].click()
    explorer.wait()
    button = explorer.controls["export"]
    button.click()
    assert button.disabled and "Exporting" in button.description and "Writing" in explorer.export_status.value
    explorer.wait_export()
    assert not button.disabled and "Exported" in explorer.export_status.value
    first = {p.name: p.read_bytes() for p in explorer.export_folder.iterdir()}
    button.click()
    explorer.wait_export()
    names = {p.name for p in explorer.export_folder.iterdir()}
    assert {"explorer-001.tdkrun", "explorer-002.tdkrun", "explorer-001_features.csv",
            "explorer-002_features.csv"} <= names
    assert all((explorer.export_folder / name).read_bytes() == data for name, data in first.items())  # kept
    modes = {stat.S_IMODE(os.stat(explorer.export_folder / name).st_mode) for name in names}
    assert len(modes) == 1, f"the run file and the figures differ in permissions: {modes}"
    assert tdakit.load_run(explorer.export_folder / "explorer-002.tdkrun").band.radii == explorer.run.band.radii


def test_a_run_file_fills_the_panels_and_shows_its_figures(explorer, ring, tmp_path):
    options = tdakit.AnalysisOptions(tdakit.SamplingOptions(n_landmarks=40), tdakit.ComplexOptions(max_scale=1.5),
                                     tdakit.BandOptions(method="bootstrap", n_boot=15, level=0.9))
    path = tdakit.analyze(ring, options, rng=4).save(tmp_path / "saved")
    explorer.controls["load_path"].value = str(path)
    explorer.controls["load"].click()
    assert explorer.current_options() == options and explorer.controls["seed"].value == 4
    assert explorer.actions.job is None and "loaded from saved.tdkrun" in explorer.actions.status.value
    assert explorer.views["diagram"].value[:4] == b"\x89PNG" and not explorer.views["diagram"].stale
    explorer.controls["run"].click()  # the loaded run is in the cache: nothing is recomputed
    assert explorer.actions.job is None and "from cache" in explorer.actions.status.value


def test_an_options_file_fills_the_panels(explorer, tmp_path):
    path = tmp_path / "options.toml"
    path.write_text('[sampling]\nmethod = "core_maxmin"\nkeep_fraction = 0.4\n[complex]\ndtm_neighbors = 12\n'
                    '[band]\nmethod = "subsample"\nsubsample_size = 150\n')
    explorer.controls["load_path"].value = str(path)
    explorer.controls["load"].click()
    options = explorer.current_options()
    assert (options.sampling.method, options.sampling.keep_fraction) == ("core_maxmin", 0.4)
    assert (options.complex.dtm_neighbors, options.band.method, options.band.subsample_size) == (12, "subsample", 150)
    path.write_text("[band]\nreplicates = 3\n")
    explorer.controls["load"].click()
    assert "'replicates'" in explorer.log.text


def test_an_uploaded_options_file_fills_the_panels(explorer):
    text = b'[complex]\nmax_scale = 0.7\n[band]\nn_boot = 33\n'
    explorer.controls["upload"].value = ({"name": "mine.toml", "type": "", "size": len(text),
                                          "content": memoryview(text),
                                          "last_modified": datetime.datetime.now(datetime.timezone.utc)},)
    options = explorer.current_options()
    assert (options.complex.max_scale, options.band.n_boot) == (0.7, 33)
    assert "Loaded the options" in explorer.log.text


def test_the_status_area_has_a_fixed_height(explorer):
    from tdakit.widgets.common import STATUS_HEIGHT

    status = explorer.actions.status
    assert status.layout.height == STATUS_HEIGHT and status.layout.overflow == "auto"  # long text scrolls inside
    assert explorer.actions.step.layout.height and explorer.actions.progress.layout.width == "100%"


def test_the_metric_control_remeasures_the_cloud(explorer):
    explorer.controls["metric"].value = "periodic"
    assert explorer.controls["run"].disabled and "'box'" in explorer.problems.value  # a periodic metric needs a box
    explorer.controls["metric"].value = "manhattan"
    assert not explorer.controls["run"].disabled
    cloud = explorer.current_cloud()
    assert cloud.metric.name == "manhattan" and cloud.source == explorer.cloud.source
    assert np.array_equal(cloud.points, explorer.cloud.points)
    explorer.controls["run"].click()
    assert explorer.wait() == "done" and explorer.run.provenance["input"]["metric"]["name"] == "manhattan"


def test_the_log_shows_the_newest_line_first(explorer):
    for i in range(3):
        explorer.log.write(f"message {i}")
    assert explorer.log.widget.value.splitlines()[0].endswith("message 2")
    assert explorer.log.widget.layout.height == "200px"


def test_the_band_and_its_jargon_are_explained_beside_the_figures(explorer):
    explorer.controls["run"].click()
    explorer.wait()
    for term in ("certificate", "margin", "Hausdorff level c", "nu=1"):
        assert term in explorer.band_note.value
    assert 'title="how far the feature stands above' in explorer.table.value  # the table's "margin" column


@pytest.mark.parametrize("bad", [None, "cloud", np.zeros((3, 2))])
def test_the_explorer_refuses_what_is_not_a_cloud(bad):
    with pytest.raises(TypeError, match="'cloud'"):
        Explorer(bad)


def test_warnings_raised_in_the_panel_itself_reach_the_log():
    points = np.random.default_rng(3).normal(size=(60, 2))
    points[1] = points[0]  # one repeated point: remeasuring the cloud warns again
    with pytest.warns(tdakit.errors.DuplicatePointsWarning):
        cloud = tdakit.load_cloud(points)
    app = Explorer(cloud)
    app.controls["metric"].value = "chebyshev"
    assert "Warning: DuplicatePointsWarning" in app.log.text and app.current_cloud().metric.name == "chebyshev"
