"""The one pipeline: analyze, its provenance, reproducibility and rerun."""

import warnings

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



def test_the_memory_budget_goes_with_the_density_band_and_bounds_its_grid(circle_file):
    # A budget is no choice of complex: the density band accepts it, and it bounds the grid (450 bytes a cell).
    cloud = tdakit.load_cloud(circle_file)
    plain = analyze(cloud, {"band": {"method": "density", "n_boot": 10}}, rng=2)
    budgeted = analyze(cloud, {"complex": {"memory_budget": "1GB"}, "band": {"method": "density", "n_boot": 10}},
                       rng=2)
    assert budgeted.band.radii == plain.band.radii and budgeted.band.calls == plain.band.calls
    with pytest.raises(tdakit.errors.MemoryBudgetError, match=r"at most resolution=\d+, or raise 'memory_budget'"):
        analyze(cloud, {"complex": {"memory_budget": "1MB"}, "band": {"method": "density", "n_boot": 10}}, rng=2)
    auto = analyze(cloud, {"complex": {"memory_budget": "1GB"}, "band": {"n_boot": 10}}, rng=2)
    assert auto.band.method == "density"  # the budget does not change which band "auto" stands for


def test_rng_in_analyze_and_in_select_landmarks_choose_the_same_landmarks(circle_file):
    cloud = tdakit.load_cloud(circle_file)
    for method in ("random", "maxmin", "density"):
        run = analyze(cloud, {"sampling": {"n_landmarks": 25, "method": method}, "complex": {"filtration": "rips"},
                              "band": {"method": "none"}}, rng=1)
        chosen = tdakit.select_landmarks(cloud, 25, method=method, rng=1)
        np.testing.assert_array_equal(run.landmarks.indices, chosen.indices)


def test_runs_recorded_before_the_seed_scheme_replay_their_own_landmarks(circle_file):
    # Runs saved before 'seed_scheme' was recorded drew their landmarks from a child seed: rerun keeps that.
    import dataclasses

    cloud = tdakit.load_cloud(circle_file)
    options = {"sampling": {"n_landmarks": 25, "method": "random"}, "complex": {"filtration": "rips"},
               "band": {"method": "none"}}
    run = analyze(cloud, options, rng=3)
    old = dataclasses.replace(run, provenance={k: v for k, v in run.provenance.items() if k != "seed_scheme"})
    child = int(np.random.SeedSequence(3).generate_state(4, np.uint32)[0])
    np.testing.assert_array_equal(rerun(old).landmarks.indices,
                                  tdakit.select_landmarks(cloud, 25, method="random", rng=child).indices)
    np.testing.assert_array_equal(rerun(run).landmarks.indices, run.landmarks.indices)


def test_progress_reports_landmarks_diagrams_and_band_for_every_band(circle_file):
    cloud = tdakit.load_cloud(circle_file)
    for options in ({"band": {"n_boot": 16}},  # auto: the density band, which builds its own diagrams
                    {"sampling": {"n_landmarks": 30}, "complex": {"filtration": "rips"},
                     "band": {"method": "bootstrap", "n_boot": 16}}):
        calls = []
        analyze(cloud, options, rng=2, progress=lambda step, done, total, seen=calls: seen.append((step, done, total)))
        steps = [c[0] for c in calls]
        assert ("diagrams", 0, 1) in calls and ("diagrams", 1, 1) in calls
        assert steps.index("diagrams") < steps.index("band") and calls[-1] == ("band", 16, 16)
        assert max(i for i, s in enumerate(steps) if s == "diagrams") < max(i for i, s in enumerate(steps)
                                                                             if s == "band")
        band = [done for step, done, _ in calls if step == "band"]
        assert band == sorted(band) and len(band) >= 2


def test_the_checkpoint_reaches_the_band_and_a_rerun_recomputes_nothing(circle_file, tmp_path):
    cloud = tdakit.load_cloud(circle_file)
    options = {"sampling": {"n_landmarks": 30}, "complex": {"filtration": "rips"},
               "band": {"method": "bootstrap", "n_boot": 12}}
    first = analyze(cloud, options, rng=4, checkpoint=tmp_path / "band.npz")
    assert np.load(tmp_path / "band.npz")["indices"].tolist() == list(range(12))
    calls = []
    again = analyze(cloud, options, rng=4, checkpoint=tmp_path / "band.npz",
                    progress=lambda step, done, total: calls.append((step, done)))
    assert [c for c in calls if c[0] == "band"] == [("band", 0)]  # no replicate was computed again
    assert_same(first.band.replicates, again.band.replicates)


def test_check_options_resolves_auto_and_refuses_contradictions(circle_file):
    from tdakit.pipeline import check_options

    cloud = tdakit.load_cloud(circle_file)
    resolved = check_options(cloud, {"band": {"n_boot": 5}})
    assert resolved.band.method == "density" and resolved.sampling.n_landmarks is None
    with pytest.raises(InvalidParameterError, match="options"):
        check_options(cloud, {"sampling": {"method": "random"}, "band": {"method": "density"}})


def test_alpha_on_a_periodic_box_is_refused_before_any_landmark_is_chosen(monkeypatch):
    import tdakit.pipeline as pipeline

    cloud = tdakit.load_cloud(np.random.default_rng(1).uniform(0, 10, (300, 3)), metric="periodic", box=10)
    monkeypatch.setattr(pipeline, "_landmarks", lambda *a, **k: pytest.fail("landmarks chosen before the refusal"))
    options = tdakit.AnalysisOptions.from_dict({"complex": {"filtration": "alpha"}, "band": {"method": "subsample"}})
    with pytest.raises(InvalidParameterError, match="alpha.*periodic"):
        pipeline.check_options(cloud, options)
    with pytest.raises(InvalidParameterError, match="alpha.*periodic"):
        tdakit.analyze(cloud, options, rng=1)


def test_resampling_bands_with_core_landmarks_fit_the_kept_share_of_each_sample():
    # 150 core landmarks on 50 % of an 800-point cloud: a 200-point landscape subsample keeps only 100 points.
    cloud = tdakit.load_cloud(np.random.default_rng(2).normal(size=(800, 2)))
    options = {"sampling": {"method": "core_maxmin", "n_landmarks": 150, "keep_fraction": 0.5},
               "complex": {"filtration": "rips"}, "band": {"method": "landscape", "n_boot": 10}}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        run = tdakit.analyze(cloud, options, rng=1)
    assert run.band.method == "landscape" and np.all(np.isfinite(run.band.radii))


def test_lazy_witness_edges_computed_elsewhere_give_the_same_diagrams(circle_file):
    cloud = tdakit.load_cloud(circle_file)
    marks = tdakit.select_landmarks(cloud, 30, rng=2)
    calls = []

    def elsewhere(cloud_, landmarks, *, nu, max_scale):
        calls.append((nu, max_scale))
        return tdakit.witness_edge_values(cloud_, landmarks, nu=nu, max_scale=max_scale)

    for nu, cap in ((1, None), (2, 0.4)):
        here = tdakit.compute_diagrams(cloud, landmarks=marks, filtration="witness", witness_nu=nu, max_scale=cap)
        given = tdakit.compute_diagrams(cloud, landmarks=marks, filtration="witness", witness_nu=nu, max_scale=cap,
                                        lazy_witness_edges=elsewhere)
        assert_same(given, here)
    assert calls == [(1, np.inf), (2, 0.4)]
    tdakit.compute_diagrams(cloud, landmarks=marks, filtration="rips", lazy_witness_edges=elsewhere)
    assert len(calls) == 2  # only the lazy witness complex asks for them


@pytest.mark.parametrize("function", [
    "not callable",
    lambda cloud, landmarks, **_: np.zeros((3, 3)),
    lambda cloud, landmarks, **_: np.triu(np.ones((30, 30)), 1),
    lambda cloud, landmarks, **_: np.full((30, 30), np.nan),
], ids=["not callable", "wrong shape", "not symmetric", "NaN"])
def test_lazy_witness_edges_that_cannot_be_are_refused(circle_file, function):
    cloud = tdakit.load_cloud(circle_file)
    marks = tdakit.select_landmarks(cloud, 30, rng=2)
    with pytest.raises(InvalidParameterError) as caught:
        tdakit.compute_diagrams(cloud, landmarks=marks, filtration="witness", lazy_witness_edges=function)
    assert caught.value.parameter == "lazy_witness_edges" and "'lazy_witness_edges'" in str(caught.value)


def test_run_steps_say_where_each_step_runs(circle_file):
    from tdakit.pipeline import RunSteps, check_options

    cloud = tdakit.load_cloud(circle_file)
    cluster = RunSteps(lazy_witness_edges=tdakit.witness_edge_values, replicates=object(),
                       cluster_methods=("maxmin", "random"))
    lazy = check_options(cloud, {"complex": {"filtration": "witness"}, "band": {"method": "bootstrap"}})
    assert cluster.placement(lazy) == {"landmarks": "cluster", "witness": "cluster", "diagrams": "driver",
                                       "replicates": "cluster"}
    strong = check_options(cloud, {"sampling": {"method": "density"},
                                   "complex": {"filtration": "witness", "witness": "strong"},
                                   "band": {"method": "none"}})
    assert cluster.placement(strong) == {"landmarks": "driver", "witness": "driver", "diagrams": "driver",
                                         "replicates": "not used"}
    density = check_options(cloud, {"band": {"method": "density"}})
    assert cluster.placement(density) == {"landmarks": "not used", "witness": "not used", "diagrams": "driver",
                                          "replicates": "cluster"}
    assert RunSteps().placement(lazy) == {"landmarks": "driver", "witness": "driver", "diagrams": "driver",
                                          "replicates": "driver"}
