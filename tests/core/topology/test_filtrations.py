import warnings

import gudhi
import numpy as np
import pytest
from gudhi.dtm_rips_complex import DTMRipsComplex
from hypothesis import given
from hypothesis import strategies as st
from scipy.sparse.csgraph import minimum_spanning_tree
from scipy.spatial.distance import cdist

import tdakit
from tdakit import shapes
from tdakit.errors import MemoryBudgetError
from tests.core.geometry.test_landmarks import HOUSE, make_cloud


def finite_deaths(diagrams, dim):
    pairs = diagrams[dim]
    return np.sort(pairs[np.isfinite(pairs[:, 1]), 1])


# -- published values ------------------------------------------------------------------------
def test_house_rips():
    # javaPlex tutorial (Adams & Tausz): house cloud Rips H1 = (2, sqrt 8); finite H0 deaths sqrt2, sqrt2, 2, 2.
    diagrams = tdakit.compute_diagrams(tdakit.load_cloud(HOUSE), max_dim=1)
    np.testing.assert_allclose(diagrams[1], [[2.0, np.sqrt(8)]], atol=1e-12)
    np.testing.assert_allclose(finite_deaths(diagrams, 0), [np.sqrt(2), np.sqrt(2), 2, 2], atol=1e-12)
    assert diagrams.essential(0).sum() == 1


@pytest.mark.parametrize(("nu", "edge", "triangle"), [(0, 2.0, 2.0), (1, 2 - np.sqrt(2), np.sqrt(2)), (2, 0.0, 0.0)])
def test_house_lazy_witness_values(nu, edge, triangle):
    # javaPlex tutorial section 5.4 (lazy witness), L = {(1,0), (0,3), (-1,0)}: edge (1,0)-(0,3) and the
    # triangle's value (the largest of its edges, flag complex) for nu = 0, 1, 2.
    cloud = tdakit.load_cloud(HOUSE)
    values = tdakit.witness_edge_values(cloud, np.array([1, 4, 0]), nu=nu)
    assert values[0, 1] == pytest.approx(edge, abs=1e-12)
    assert values[np.triu_indices(3, 1)].max() == pytest.approx(triangle, abs=1e-12)


@pytest.mark.parametrize("n", [6, 7, 8, 9, 12, 30])
def test_evenly_spaced_circle_has_one_known_bar(n):
    # Adamaszek & Adams, Pacific J. Math. 290 (2017) 1-40: one H1 bar [2 sin(pi/n), 2 sin(pi ceil(n/3)/n)).
    diagrams = tdakit.compute_diagrams(tdakit.load_cloud(shapes.evenly_spaced_circle(n)), max_dim=1)
    expected = [2 * np.sin(np.pi / n), 2 * np.sin(np.pi * np.ceil(n / 3) / n)]
    np.testing.assert_allclose(diagrams[1], [expected], atol=1e-9)


def test_six_points_on_a_circle_also_have_an_octahedron():
    # Adamaszek & Adams 2017: the Rips complex of the regular hexagon at scale in [sqrt3, 2) is an octahedron (H2).
    diagrams = tdakit.compute_diagrams(tdakit.load_cloud(shapes.evenly_spaced_circle(6)), max_dim=2)
    np.testing.assert_allclose(diagrams[2], [[np.sqrt(3), 2.0]], atol=1e-9)


def test_dtm_rips_check_values():
    # gudhi documentation (DTMRipsComplex example): points [[2,2],[0,1],[3,4]], k=2 ->
    # H0 (sqrt10, inf) and (sqrt10, 5.39834563766817) twice.
    diagrams = tdakit.compute_diagrams(tdakit.load_cloud([[2, 2], [0, 1], [3, 4]]), filtration="dtm", dtm_neighbors=2,
                                       dtm_power=1, max_dim=0)
    np.testing.assert_allclose(diagrams[0], [[np.sqrt(10), np.inf], [np.sqrt(10), 5.39834563766817],
                                             [np.sqrt(10), 5.39834563766817]], atol=1e-9)


def test_dtm_with_one_neighbour_is_rips_and_matches_gudhi(global_seed):
    # gudhi doc: k = 1 is the usual Rips complex. Cross-check k = 5 against gudhi's DTMRipsComplex.
    points = np.random.default_rng(global_seed).normal(size=(40, 2))
    cloud = tdakit.load_cloud(points)
    rips, dtm1 = (tdakit.compute_diagrams(cloud, filtration=f, dtm_neighbors=1, dtm_power=1) for f in ("rips", "dtm"))
    for k in (0, 1):
        np.testing.assert_allclose(rips[k], dtm1[k])
    ours = tdakit.compute_diagrams(cloud, filtration="dtm", dtm_neighbors=5, dtm_power=1)
    tree = DTMRipsComplex(points=points, k=5).create_simplex_tree(max_dimension=2)
    tree.compute_persistence(homology_coeff_field=2)
    for k in (0, 1):
        reference = tree.persistence_intervals_in_dimension(k)
        np.testing.assert_allclose(np.sort(ours[k], axis=0), np.sort(reference, axis=0), atol=1e-9)


def test_alpha_circle_reports_radii():
    # Alpha values are squared radii in gudhi (gudhi doc); tdakit reports radii. n points on the unit circle:
    # the loop is born at half the side, sin(pi/n), and fills at the circumradius 1 (common practice).
    diagrams = tdakit.compute_diagrams(tdakit.load_cloud(shapes.evenly_spaced_circle(12)), filtration="alpha")
    np.testing.assert_allclose(diagrams[1], [[np.sin(np.pi / 12), 1.0]], atol=1e-9)
    assert "sqrt(alpha^2)" in diagrams.units


def test_strong_witness_matches_gudhis_euclidean_version(global_seed):
    # Our metric-agnostic nearest-landmark table must give what gudhi's Euclidean strong witness complex gives.
    points = shapes.circle(400, noise=0.05, rng=global_seed)
    cloud = tdakit.load_cloud(points)
    marks = tdakit.select_landmarks(cloud, 20, rng=global_seed)
    for kind, reference in (("strong", gudhi.EuclideanStrongWitnessComplex), ("weak", gudhi.EuclideanWitnessComplex)):
        ours = tdakit.compute_diagrams(cloud, landmarks=marks, filtration="witness", witness=kind, max_scale=1.0)
        tree = reference(landmarks=points[marks.indices], witnesses=points).create_simplex_tree(
            max_alpha_square=1.0, limit_dimension=2)
        tree.compute_persistence(homology_coeff_field=2)
        for k in (0, 1):
            expected = np.sqrt(tree.persistence_intervals_in_dimension(k))
            expected = expected[expected[:, 1] > expected[:, 0]]
            np.testing.assert_allclose(np.sort(ours[k], axis=0), np.sort(expected, axis=0), atol=1e-9)


# -- identities ------------------------------------------------------------------------------
@pytest.mark.parametrize("metric", ["euclidean", "manhattan", "periodic", "angular", "precomputed"])
def test_h0_deaths_are_minimum_spanning_tree_edges(metric, global_seed):
    # Common practice: finite H0 deaths of a Rips filtration = MST edge lengths (scipy), one essential class.
    cloud, matrix = make_cloud(metric, n=50, seed=global_seed)
    diagrams = tdakit.compute_diagrams(cloud, max_dim=0)
    mst = np.sort(minimum_spanning_tree(matrix).data)
    np.testing.assert_allclose(finite_deaths(diagrams, 0), mst, rtol=1e-12, atol=1e-12)
    assert diagrams.essential(0).sum() == 1


def test_edge_collapse_gives_identical_diagrams(global_seed):
    # Boissonnat & Pritam, SoCG 2020: edge collapse preserves the persistence of flag complexes exactly.
    cloud = tdakit.load_cloud(np.random.default_rng(global_seed).normal(size=(70, 3)))
    with_collapse = tdakit.compute_diagrams(cloud, max_dim=2, collapse=True)
    without = tdakit.compute_diagrams(cloud, max_dim=2, collapse=False)
    assert with_collapse.params["n_simplices"] < without.params["n_simplices"]
    for k in range(3):
        np.testing.assert_array_equal(with_collapse[k], without[k])


def test_sparse_rips_stays_within_its_bound(global_seed):
    # Sheehy 2013; Cavanna, Jahanseir, Sheehy 2015: log-scale bottleneck <= -log(1 - eps).
    cloud = tdakit.load_cloud(shapes.circle(150, noise=0.1, rng=global_seed))
    exact = tdakit.compute_diagrams(cloud, max_dim=1)
    for eps in (0.2, 0.5):
        sparse = tdakit.compute_diagrams(cloud, max_dim=1, sparse=eps, rng=global_seed)
        distance = tdakit.diagram_distance(np.log(exact[1]), np.log(sparse[1]))
        assert distance <= sparse.params["sparse_log_bound"] + 1e-12
        assert sparse.params["sparse_log_bound"] == pytest.approx(-np.log(1 - eps))


@given(n_points=st.integers(8, 40), n_landmarks=st.integers(2, 8), seed=st.integers(0, 2**31),
       method=st.sampled_from(["maxmin", "random", "density", "core_maxmin"]))
def test_landmark_diagrams_within_twice_the_coverage_radius(n_points, n_landmarks, seed, method):
    # Chazal, de Silva, Oudot, Geom. Dedicata 173 (2014): d_B(Rips X, Rips L) <= 2 d_H(X, L) in edge length units.
    points = np.random.default_rng(seed).uniform(size=(n_points, 2))
    cloud = tdakit.load_cloud(points)
    marks = tdakit.select_landmarks(cloud, min(n_landmarks, int(0.9 * n_points)), method=method, rng=seed,
                                    keep_fraction=0.9)
    full = tdakit.compute_diagrams(cloud, max_dim=1)
    sub = tdakit.compute_diagrams(cloud, landmarks=marks, max_dim=1)
    assert sub.params["landmark_bound"] == pytest.approx(2 * marks.coverage_radius)
    for k in (0, 1):
        assert tdakit.diagram_distance(full[k], sub[k]) <= 2 * marks.coverage_radius + 1e-12


# -- Betti numbers of sampled manifolds (common practice) -----------------------------------------
def long_bars(diagrams, threshold):
    """Bars longer than ``threshold`` (one number, or one per dimension) in each dimension."""
    limits = np.broadcast_to(threshold, (len(diagrams),))
    return tuple(int((diagrams.persistence(k) > limits[k]).sum()) for k in range(len(diagrams)))


def test_sphere_betti_numbers():
    cloud = tdakit.load_cloud(shapes.sphere(400, rng=1))
    diagrams = tdakit.compute_diagrams(cloud, landmarks=tdakit.select_landmarks(cloud, 100, rng=1), max_dim=2)
    assert long_bars(diagrams, 0.6) == (1, 0, 1)


def test_torus_betti_numbers():
    diagrams = tdakit.compute_diagrams(tdakit.load_cloud(shapes.torus(3000, rng=1)), filtration="alpha", max_dim=2)
    assert long_bars(diagrams, 0.4) == (1, 2, 1)


@pytest.mark.parametrize(("field", "betti"), [(2, (1, 2, 1)), (3, (1, 1, 0))])
def test_klein_bottle_betti_numbers_depend_on_the_field(field, betti):
    cloud = tdakit.load_cloud(shapes.klein_bottle(3000, rng=1))
    marks = tdakit.select_landmarks(cloud, 200, rng=1)
    diagrams = tdakit.compute_diagrams(cloud, landmarks=marks, max_dim=2, coefficient_field=field)
    # Measured gaps (seed 1): H0 finite bars <= 0.70; H1 real 1.20-1.25 vs noise <= 0.53; H2 real 0.80 vs <= 0.13.
    assert long_bars(diagrams, (0.75, 0.75, 0.5)) == betti
    assert diagrams.coefficient_field == field


# -- the diagram object ---------------------------------------------------------------------------
def test_cutoff_classes_are_not_essential():
    cloud = tdakit.load_cloud(shapes.evenly_spaced_circle(12))
    capped = tdakit.compute_diagrams(cloud, max_scale=1.0)  # the loop is born at 0.518 and dies at sqrt 3
    assert capped[1].shape == (1, 2) and np.isinf(capped[1][0, 1])
    assert capped.alive_at_cutoff(1).tolist() == [True] and capped.essential(1).tolist() == [False]
    assert capped.essential(0).sum() == 1 and capped.max_scale == 1.0


def test_h0_present_without_edges():
    cloud = tdakit.load_cloud(shapes.evenly_spaced_circle(12))
    diagrams = tdakit.compute_diagrams(cloud, max_scale=0.1)
    assert diagrams[0].shape == (12, 2) and diagrams.essential(0).sum() == 1
    assert diagrams.alive_at_cutoff(0).sum() == 11 and diagrams[1].shape == (0, 2)


def test_feature_location_vertices_without_collapse_are_exact():
    points = shapes.evenly_spaced_circle(12)
    diagrams = tdakit.compute_diagrams(tdakit.load_cloud(points), max_dim=1, collapse=False)
    assert diagrams.params["location"] == "exact birth and death simplices"
    (birth, death), = diagrams[1]
    born, died = diagrams.birth_vertices[1][0], diagrams.death_vertices[1][0]
    assert np.linalg.norm(points[born[0]] - points[born[1]]) == pytest.approx(birth)
    assert cdist(points[died], points[died]).max() == pytest.approx(death)
    assert (diagrams.death_vertices[0][diagrams.essential(0)] == -1).all()


def test_feature_location_after_collapse_is_flagged():
    points = shapes.evenly_spaced_circle(12)
    diagrams = tdakit.compute_diagrams(tdakit.load_cloud(points), max_dim=1)
    assert diagrams.params["location"].startswith("collapsed complex")
    assert (diagrams.death_vertices[1] >= 0).all()


def test_landmark_vertices_map_to_cloud_indices():
    cloud = tdakit.load_cloud(shapes.circle(300, noise=0.02, rng=4))
    marks = tdakit.select_landmarks(cloud, 30, rng=4)
    diagrams = tdakit.compute_diagrams(cloud, landmarks=marks, collapse=False)
    assert np.isin(diagrams.birth_vertices[1], marks.indices).all()
    top = np.argmax(diagrams.persistence(1))
    born = diagrams.birth_vertices[1][top]
    assert np.linalg.norm(cloud.points[born[0]] - cloud.points[born[1]]) == pytest.approx(diagrams[1][top, 0])


def test_units_and_parameters_are_recorded():
    cloud = tdakit.load_cloud(shapes.circle(200, rng=1))
    marks = tdakit.select_landmarks(cloud, 20, rng=1)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        units = {f: tdakit.compute_diagrams(cloud, landmarks=marks, filtration=f).units
                 for f in ("rips", "witness", "alpha", "dtm")}
    assert len(set(units.values())) == 4 and "edge length" in units["rips"]
    diagrams = tdakit.compute_diagrams(cloud, landmarks=marks)
    assert diagrams.params["n_landmarks"] == 20 and diagrams.params["coverage_radius"] == marks.coverage_radius


# -- pre-flight ----------------------------------------------------------------------------------------
def test_preflight_refuses_a_huge_rips_complex():
    cloud = tdakit.load_cloud(np.random.default_rng(0).normal(size=(3000, 3)))
    with pytest.raises(MemoryBudgetError, match="simplices") as info:
        tdakit.compute_diagrams(cloud, max_dim=3)
    assert info.value.parameter == "memory_budget"


def test_preflight_estimate_is_close_to_the_built_complex():
    cloud = tdakit.load_cloud(np.random.default_rng(0).normal(size=(300, 3)))
    built = tdakit.compute_diagrams(cloud, max_dim=2, max_scale=0.8, collapse=False)
    from tdakit.core.topology.preflight import estimate_flag_complex

    estimate = estimate_flag_complex(cdist(cloud.points, cloud.points), 0.8, 3)
    assert estimate.total == pytest.approx(built.params["n_simplices"], rel=0.05)


def test_preflight_honours_an_explicit_budget():
    cloud = tdakit.load_cloud(np.random.default_rng(0).normal(size=(200, 3)))
    with pytest.raises(MemoryBudgetError, match="memory budget"):
        tdakit.compute_diagrams(cloud, max_dim=2, memory_budget=10_000, collapse=False)


def test_preflight_refuses_a_dense_matrix_and_an_alpha_complex_over_budget():
    cloud = tdakit.load_cloud(np.random.default_rng(0).normal(size=(2000, 3)))
    with pytest.raises(MemoryBudgetError, match="2000 x 2000 distance matrix") as info:
        tdakit.compute_diagrams(cloud, memory_budget=1e6)
    assert info.value.parameter == "landmarks"
    with pytest.raises(MemoryBudgetError, match="alpha complex"):
        tdakit.compute_diagrams(cloud, filtration="alpha", memory_budget=1e6)


@pytest.mark.parametrize("metric", ["euclidean", "manhattan", "chebyshev", "periodic"])
@pytest.mark.parametrize("nu", [0, 1, 2])
def test_compiled_lazy_witness_edges_match_the_numpy_blocks(metric, nu, monkeypatch, global_seed):
    # Both evaluate e(a, b) = max(0, min_w max(d(a, w), d(b, w)) - m_nu(w)) (de Silva & Carlsson 2004, sec. 5);
    # the numpy route (dense blocks of witnesses) is the reference for the compiled one.
    from tdakit.core.topology import _witness

    rng = np.random.default_rng(global_seed)
    points = np.round(rng.uniform(0, 4, (500, 3)), 1)  # rounding: many equal distances
    kwargs = {"box": 4.0} if metric == "periodic" else {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cloud = tdakit.load_cloud(points, metric=metric, **kwargs)
    marks = tdakit.select_landmarks(cloud, 30, rng=global_seed).indices
    for cap in (np.inf, 1.0):
        compiled = _witness.lazy_witness_edges(cloud, marks, nu, cap)
        monkeypatch.setattr(_witness, "_compiled_edges", lambda *args: None)
        plain = _witness.lazy_witness_edges(cloud, marks, nu, cap)
        monkeypatch.undo()
        np.testing.assert_allclose(compiled, plain, rtol=1e-12, atol=1e-12)


def test_default_memory_budget_is_stable_and_a_quarter_of_the_machine():
    # Same budget whatever else runs (it used to be half of the memory available at the moment).
    import psutil

    from tdakit.core.topology.preflight import default_memory_budget

    budgets = {default_memory_budget() for _ in range(3)}
    assert len(budgets) == 1 and budgets.pop() <= psutil.virtual_memory().total // 4
