"""Planted-truth clouds: shapes, reproducibility, validation, and the planted topology seen by plain Rips.

The truths are the Betti numbers of the sampled shapes (common practice). The topological checks run
Rips on every point of small samples, where the planted features must stand out by a wide margin; the
margins below were measured over 20 seeds (TDAKIT_SEEDS=all) and hold with room to spare.
"""

import dataclasses

import numpy as np
import pytest

import tdakit
from tdakit import planted
from tdakit.errors import InvalidParameterError


def _bars(diagrams, k):
    """Finite persistences of dimension k, longest first."""
    persistence = diagrams.persistence(k)
    return np.sort(persistence[np.isfinite(persistence)])[::-1]


def _rips(cloud, max_dim=1):
    return tdakit.compute_diagrams(cloud.to_cloud(), filtration="rips", max_dim=max_dim)


# -- shapes and records -------------------------------------------------------------------------------------
@pytest.mark.parametrize("name", sorted(planted.SCENARIOS))
def test_every_scenario_returns_a_planted_cloud(name, global_seed):
    cloud = planted.planted_cloud(name, 300, rng=global_seed)
    assert isinstance(cloud, planted.PlantedCloud) and cloud.name == name and cloud.description
    assert cloud.points.shape[0] == 300 and cloud.points.dtype == np.float64 and np.isfinite(cloud.points).all()
    assert not cloud.points.flags.writeable
    assert sorted(cloud.betti) == list(range(len(cloud.betti))) and cloud.betti[0] >= 1
    assert set(cloud.scored_dims(1)) <= {0, 1} and cloud.scored_dims(1)
    assert cloud.to_cloud().n_points == 300


@pytest.mark.parametrize(("name", "params", "n_dims", "betti"), [
    ("uniform_cube", {}, 3, {0: 1, 1: 0, 2: 0}),
    ("gaussian_blob", {}, 3, {0: 1, 1: 0, 2: 0}),
    ("gaussian_blob", {"n_dims": 2}, 2, {0: 1, 1: 0}),
    ("gaussian_clumps", {"n_clumps": 4}, 3, {0: 4, 1: 0, 2: 0}),
    ("uniform_sphere", {}, 3, {0: 1, 1: 0, 2: 1}),
    ("noisy_circle", {"noise": 0.2}, 2, {0: 1, 1: 1}),
    ("two_circles", {}, 2, {0: 2, 1: 2}),
    ("torus", {}, 3, {0: 1, 1: 2, 2: 1}),
    ("noisy_sphere", {}, 3, {0: 1, 1: 0, 2: 1}),
    ("loop_with_outliers", {}, 12, {0: 1, 1: 1}),
    ("marrowfield", {}, 3, {0: 1, 1: 4, 2: 5, 3: 1}),
])
def test_truths_are_the_shapes_betti_numbers(name, params, n_dims, betti):
    # Betti numbers of the sampled shapes: common practice (cube and blob contractible, circle (1, 1), sphere
    # (1, 0, 1), torus (1, 2, 1), 3-torus (1, 3, 3, 1) for the periodic box plus the ring and two voids).
    cloud = planted.planted_cloud(name, 200, rng=0, **params)
    assert cloud.n_dims == n_dims and cloud.betti == betti
    assert cloud.params == {**cloud.params, **params}


def test_surfaces_lie_on_their_shapes():
    sphere = planted.uniform_sphere(400, radius=2.0, rng=1).points
    np.testing.assert_allclose(np.linalg.norm(sphere, axis=1), 2.0, atol=1e-12)
    cube = planted.uniform_cube(400, side=3.0, rng=1).points
    assert cube.min() >= 0.0 and cube.max() <= 3.0
    left, right = np.split(np.sort(planted.two_circles(400, noise=0.0, gap=1.5, rng=1).points[:, 0]), [200])
    assert left.max() <= 1.0 + 1e-12 and right.min() >= 2.5 - 1e-12  # centres 3.5 apart, radius 1


def test_clump_centres_lie_on_a_line_with_the_requested_spacing():
    cloud = planted.gaussian_clumps(5000, n_clumps=4, separation=30.0, scale=0.5, rng=2)
    centres = np.sort([cluster.mean(axis=0)[0] for cluster in np.split(
        cloud.points[np.argsort(cloud.points[:, 0])], 4)])
    np.testing.assert_allclose(np.diff(centres), 30.0, atol=0.2)
    np.testing.assert_allclose(cloud.points[:, 1:].std(), 0.5, rtol=0.05)


def test_outliers_narrow_the_scored_dimensions_to_h1():
    assert planted.loop_with_outliers(300, rng=0).scored_dims(2) == (1,)
    assert planted.loop_with_outliers(300, outlier_fraction=0.0, rng=0).scored_dims(1) == (0, 1)
    assert planted.torus(300, rng=0).scored_dims(1) == (0, 1)
    assert planted.torus(300, rng=0).scored_dims(2) == (0, 1, 2)


def test_marrowfield_is_read_in_its_periodic_box():
    cloud = planted.marrowfield(500, rng=4)
    assert cloud.metric == "periodic" and cloud.box == 100.0
    assert cloud.points.min() >= 0.0 and cloud.points.max() < 100.0
    assert cloud.to_cloud().metric.name == "periodic"


def test_truth_reads_one_dimension():
    cloud = planted.two_circles(100, rng=0)
    assert (cloud.truth(0), cloud.truth(1)) == (2, 2)
    with pytest.raises(InvalidParameterError, match="'k'"):
        cloud.truth(2)


def test_planted_cloud_is_frozen():
    cloud = planted.noisy_circle(50, rng=0)
    with pytest.raises(dataclasses.FrozenInstanceError):
        cloud.name = "other"
    with pytest.raises(ValueError):
        cloud.points[0, 0] = 1.0


# -- reproducibility -----------------------------------------------------------------------------------------
@pytest.mark.parametrize("name", sorted(planted.SCENARIOS))
def test_same_rng_same_cloud(name):
    first, second = (planted.planted_cloud(name, 200, rng=11) for _ in range(2))
    np.testing.assert_array_equal(first.points, second.points)
    assert first.betti == second.betti and first.description == second.description
    other = planted.planted_cloud(name, 200, rng=12)
    assert not np.array_equal(first.points, other.points)


def test_generator_and_seed_sequence_are_accepted():
    from_generator = planted.torus(100, rng=np.random.default_rng(5)).points
    np.testing.assert_array_equal(from_generator, planted.torus(100, rng=np.random.default_rng(5)).points)
    from_sequence = planted.torus(100, rng=np.random.SeedSequence(5)).points
    np.testing.assert_array_equal(from_sequence, planted.torus(100, rng=np.random.SeedSequence(5)).points)


# -- validation ----------------------------------------------------------------------------------------------
@pytest.mark.parametrize(("call", "parameter"), [
    (lambda: planted.uniform_cube(0), "n_points"),
    (lambda: planted.uniform_cube(100.0), "n_points"),
    (lambda: planted.uniform_cube(100, side=0.0), "side"),
    (lambda: planted.gaussian_blob(100, n_dims=0), "n_dims"),
    (lambda: planted.gaussian_clumps(100, n_clumps=0), "n_clumps"),
    (lambda: planted.gaussian_clumps(12, n_clumps=5), "n_points"),
    (lambda: planted.gaussian_clumps(100, separation=5.0), "separation"),
    (lambda: planted.uniform_sphere(100, radius=-1.0), "radius"),
    (lambda: planted.noisy_circle(100, noise=-0.1), "noise"),
    (lambda: planted.noisy_circle(100, noise=float("nan")), "noise"),
    (lambda: planted.two_circles(100, gap=0.0), "gap"),
    (lambda: planted.torus(100, minor=2.0), "minor"),
    (lambda: planted.loop_with_outliers(100, outlier_fraction=0.9), "outlier_fraction"),
    (lambda: planted.loop_with_outliers(100, n_coords=1), "n_coords"),
    (lambda: planted.marrowfield(50), "n_points"),
    (lambda: planted.noisy_sphere(100, rng=-1), "rng"),
    (lambda: planted.noisy_sphere(100, rng="seed"), "rng"),
    (lambda: planted.planted_cloud("moebius", 100), "name"),
    (lambda: planted.planted_cloud("noisy_circle", 100, nosie=0.1), "nosie"),
    (lambda: planted.planted_cloud("uniform_cube", 100, rng=0, noise=0.1), "noise"),
])
def test_bad_input_names_the_parameter(call, parameter):
    with pytest.raises(InvalidParameterError, match=f"'{parameter}'") as info:
        call()
    assert info.value.parameter == parameter


@pytest.mark.parametrize(("fields", "parameter"), [
    ({"points": np.zeros(3)}, "points"),
    ({"points": np.array([[0.0, np.nan]])}, "points"),
    ({"betti": {}}, "betti"),
    ({"betti": {0: -1}}, "betti"),
    ({"betti": {-1: 1}}, "betti"),
    ({"metric": "cosine"}, "metric"),
    ({"metric": "periodic"}, "box"),
    ({"box": 10.0}, "box"),
    ({"evaluate_dims": (2,)}, "evaluate_dims"),
    ({"evaluate_dims": ()}, "evaluate_dims"),
])
def test_planted_cloud_checks_its_fields(fields, parameter):
    values = {"points": np.zeros((4, 2)), "betti": {0: 1, 1: 0}, "name": "test", "description": "d", **fields}
    with pytest.raises(InvalidParameterError, match=f"'{parameter}'"):
        planted.PlantedCloud(**values)


def test_registry_lists_every_scenario_once():
    assert set(planted.NULL_SCENARIOS) | set(planted.SIGNAL_SCENARIOS) == set(planted.SCENARIOS)
    assert not set(planted.NULL_SCENARIOS) & set(planted.SIGNAL_SCENARIOS)
    assert all(planted.SCENARIOS[name].__name__ == name for name in planted.SCENARIOS)


# -- the planted topology, seen by plain Rips on every point of a small sample -------------------------------------
def test_circle_loop_dominates(global_seed):
    h1 = _bars(_rips(planted.noisy_circle(150, rng=global_seed)), 1)
    assert h1[0] > 1.0 and h1[0] > 10 * h1[1]  # near (0, sqrt 3) for the unit circle; noise bars are short


def test_two_circles_show_two_loops_and_one_long_merge(global_seed):
    diagrams = _rips(planted.two_circles(200, rng=global_seed))
    h0, h1 = _bars(diagrams, 0), _bars(diagrams, 1)
    assert h1[1] > 1.0 and h1[1] > 10 * h1[2]
    assert h0[0] > 2.5 and h0[0] > 5 * h0[1]  # the circles join across the gap of 3


def test_clumps_show_their_gaps_in_h0(global_seed):
    n_clumps = 5
    h0 = _bars(_rips(planted.gaussian_clumps(200, n_clumps=n_clumps, rng=global_seed)), 0)
    # n_clumps - 1 merges near the gap between clumps (separation 20, s.d. 1), far above the rest.
    assert h0[n_clumps - 2] > 10.0 and h0[n_clumps - 2] > 3 * h0[n_clumps - 1]


@pytest.mark.parametrize(("name", "ceiling"), [("uniform_cube", 0.25), ("gaussian_blob", 1.0)])
def test_nulls_have_no_long_loop(name, ceiling, global_seed):
    # The longest H1 bar of 200 points stays a small fraction of the cloud's size: cube of side 1 (measured at
    # most 0.15 over 20 seeds), Gaussian of s.d. 1 (at most 0.57).
    h1 = _bars(_rips(planted.planted_cloud(name, 200, rng=global_seed)), 1)
    assert h1[0] < ceiling


def test_sphere_shows_its_cavity_and_no_dominant_loop(global_seed):
    diagrams = _rips(planted.noisy_sphere(120, rng=global_seed), max_dim=2)
    h1, h2 = _bars(diagrams, 1), _bars(diagrams, 2)
    assert h2[0] > 0.4 and h2[0] > 10 * (h2[1] if h2.size > 1 else 0.0)
    assert h1[0] < 0.7  # the small holes between points (measured at most 0.52 over 20 seeds), no loop


def test_torus_shows_two_loops(global_seed):
    cloud = planted.torus(2000, rng=global_seed).to_cloud()
    marks = tdakit.select_landmarks(cloud, 150, rng=global_seed)  # evenly spread vertices for a small complex
    h1 = _bars(tdakit.compute_diagrams(cloud, landmarks=marks, filtration="rips", max_dim=1), 1)
    assert h1[1] > 0.9 and h1[1] > 1.5 * h1[2]


def test_loop_stands_out_despite_outliers(global_seed):
    h1 = _bars(_rips(planted.loop_with_outliers(300, rng=global_seed)), 1)
    assert h1[0] > 2.0 and h1[0] > 4 * h1[1]
