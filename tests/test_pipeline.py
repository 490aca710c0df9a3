"""The one pipeline: analyze, its provenance, reproducibility and rerun."""

import numpy as np
import pytest

import tdakit
from tdakit.config import AnalysisOptions
from tdakit.errors import InvalidDataError, InvalidParameterError
from tdakit.pipeline import analyze, rerun
from tdakit.shapes import circle
from tests.helpers import assert_same

FAST = {"sampling": {"n_landmarks": 40}, "complex": {"filtration": "rips"},
        "band": {"method": "subsample", "n_boot": 30}}


@pytest.fixture(scope="module")
def circle_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("data") / "ring.csv"
    points = circle(400, noise=0.02, rng=3)
    np.savetxt(path, points, delimiter=",", header="x,y", comments="")
    return path


def test_run_holds_every_piece_and_its_provenance(circle_file):
    cloud = tdakit.load_cloud(circle_file)
    steps = []
    run = analyze(cloud, FAST, rng=7, progress=lambda step, done, total: steps.append(step))
    assert run.landmarks.n_landmarks == 40 and run.coverage_radius == run.landmarks.coverage_radius
    np.testing.assert_array_equal(run.landmark_points, cloud.points[run.landmarks.indices])
    assert run.band.method == "subsample" and run.diagrams is run.band.diagrams
    assert {"landmarks", "diagrams", "band"} <= set(steps) and set(run.timings) == {"landmarks", "diagrams", "band"}
    assert run.peak_memory["bytes"] > 0 and run.peak_memory["scope"] in ("this step", "process lifetime")
    info = run.provenance
    assert info["seed"] == run.seed == 7 and info["options"] == AnalysisOptions.from_dict(FAST).to_dict()
    assert set(info["versions"]) >= {"tdakit", "gudhi", "numpy"} and info["input"]["file_checksum"]
    assert list(run.table.columns[:5]) == ["dimension", "birth", "death", "persistence", "status"]


def test_same_seed_same_numbers_for_any_number_of_workers(circle_file):
    cloud = tdakit.load_cloud(circle_file)
    options = {"sampling": {"n_landmarks": 30}, "band": {"method": "bootstrap", "n_boot": 8}}
    one = analyze(cloud, options, rng=11)
    two = analyze(cloud, options, rng=11, n_jobs=2)
    assert_same(one.band.replicates, two.band.replicates)
    assert_same(one.diagrams.pairs, two.diagrams.pairs)


def test_without_landmarks_or_band(circle_file):
    cloud = tdakit.load_cloud(circle_file).subset(np.arange(120))
    run = analyze(cloud, {"sampling": {"n_landmarks": None}, "band": {"method": "none"}}, rng=1)
    assert run.landmarks is None and run.band is None and run.coverage_radius == 0.0
    assert run.table["significant"].isna().all() and "diagrams" in run.timings
    with pytest.raises(InvalidDataError):
        run.landmark_coordinates([0])


def test_rerun_reloads_the_file_and_reproduces(circle_file):
    run = analyze(tdakit.load_cloud(circle_file), FAST, rng=5)
    again = rerun(run)
    assert_same(again.diagrams.pairs, run.diagrams.pairs)
    assert again.band.radii == run.band.radii


def test_rerun_reads_a_file_the_way_it_was_read(tmp_path):
    # One array of two in an .npz, and a ';'-separated table: the run records key, delimiter and header,
    # survives a run file, and rerun reads the same numbers again.
    from tdakit.io import load_run, save_run

    ring = circle(300, noise=0.02, rng=4)
    np.savez(tmp_path / "two.npz", other=ring[::-1] * 3, ring=ring)
    np.savetxt(tmp_path / "ring.txt", ring, delimiter=";", header="a;b", comments="")
    for path, reading in ((tmp_path / "two.npz", {"key": "ring"}),
                          (tmp_path / "ring.txt", {"delimiter": ";", "header": True})):
        run = analyze(tdakit.load_cloud(path, **reading), FAST, rng=5)
        assert run.provenance["input"]["read_options"] == reading
        save_run(run, tmp_path / "run.tdkrun")
        again = rerun(load_run(tmp_path / "run.tdkrun"))
        assert_same(again.diagrams.pairs, run.diagrams.pairs)


def test_rerun_refuses_other_data(circle_file):
    run = analyze(tdakit.load_cloud(circle_file), FAST, rng=5)
    other = tdakit.load_cloud(circle(400, rng=99))
    with pytest.raises(InvalidDataError, match="differs"):
        rerun(run, cloud=other)


@pytest.mark.parametrize("kwargs, name", [
    ({"options": "fast"}, "options"), ({"options": {"sampling": {"method": "grid"}}}, "method"),
    ({"progress": 3}, "progress"), ({"rng": -1}, "rng")])
def test_analyze_rejects_bad_input(circle_file, kwargs, name):
    cloud = tdakit.load_cloud(circle_file)
    with pytest.raises(InvalidParameterError) as info:
        analyze(cloud, **kwargs)
    assert info.value.parameter == name


def test_analyze_needs_a_cloud():
    with pytest.raises(InvalidParameterError, match="'cloud'"):
        analyze(np.zeros((5, 2)))


def test_auto_band_is_density_in_plain_low_dimensions_and_dtm_otherwise(circle_file):
    # The defaults follow the planted-truth evaluation (benchmarks/README.md); the run records what it computed.
    cloud = tdakit.load_cloud(circle_file)
    low = analyze(cloud, {"band": {"n_boot": 20}}, rng=1)
    assert low.band.method == "density" and low.options.band.method == "density"
    assert low.landmarks is None and low.options.sampling.n_landmarks is None and low.diagrams.filtration == "density"
    chosen = analyze(cloud, {"sampling": {"n_landmarks": 30}, "band": {"n_boot": 20}}, rng=1)
    assert chosen.band.method == "dtm" and chosen.diagrams.filtration == "dtm" and chosen.band is not None
    assert chosen.diagrams is chosen.band.diagrams and chosen.band.params["landmark_term"] > 0
    rips = analyze(cloud, {"sampling": {"n_landmarks": 30}, "complex": {"filtration": "rips"}, "band": {"n_boot": 20}},
                   rng=1)
    assert rips.band.method == "subsample" and rips.band.calls


@pytest.mark.parametrize("options", [
    {"complex": {"filtration": "rips"}, "band": {"method": "density"}},
    {"sampling": {"n_landmarks": 30}, "band": {"method": "density"}},
    {"complex": {"filtration": "rips"}, "band": {"method": "dtm"}}])
def test_contradictory_options_are_refused(circle_file, options):
    with pytest.raises(InvalidParameterError, match="options"):
        analyze(tdakit.load_cloud(circle_file), options, rng=1)

