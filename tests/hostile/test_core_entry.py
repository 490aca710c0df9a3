"""Hostile inputs across the core's public entry points: each must be refused by tdakit's own error class,
with a message naming the parameter at fault (wrong types, NaN/inf, empty, zero or negative counts, bools
where ints are expected, huge values, numpy scalars, wrong shapes).

Case ids start with the entry point's name (``select_landmarks: ...``): ``benchmarks/reliability.py`` counts
them per entry point.
"""

import os
import tempfile
import warnings

import numpy as np
import pytest

import tdakit
from tdakit import (
    compute_diagrams,
    confidence_band,
    densest_points,
    diagram_distance,
    knn_density,
    knn_radius,
    landmarks_from_indices,
    load_cloud,
    permutation_test,
    persistence_landscape,
    select_landmarks,
    shapes,
    witness_edge_values,
)
from tdakit.comparison import compare_catalogues
from tdakit.config import ComplexOptions
from tdakit.core.inference.confidence import band_at_level
from tdakit.errors import InvalidDataError, InvalidParameterError, MemoryBudgetError

POINTS = np.random.default_rng(23).normal(size=(60, 2))
CLOUD = load_cloud(POINTS)
LANDMARKS = select_landmarks(CLOUD, 10, rng=0)
DIAGRAMS = compute_diagrams(CLOUD)
PAIR = [[0.0, 1.0]]
TWO = [np.array([[0.0, 1.0]]), np.array([[0.0, 1.5]])]
P = InvalidParameterError
D = InvalidDataError
M = MemoryBudgetError


def _garbage():
    folder = tempfile.mkdtemp(prefix="tdakit-hostile-")
    path = os.path.join(folder, "band.npy")
    with open(path, "wb") as stream:
        stream.write(b"\x93NUMPY garbage, not a checkpoint")
    return path


def _sky():
    rng = np.random.default_rng(1)
    return load_cloud(np.column_stack([rng.uniform(0, 360, 50), rng.uniform(-80, 80, 50)]), metric="angular")


CASES = [
    # select_landmarks
    ("select_landmarks: numpy float count", lambda: select_landmarks(CLOUD, np.float64(5.0)), P, "n_landmarks"),
    ("select_landmarks: count 10**20", lambda: select_landmarks(CLOUD, 10**20), P, "n_landmarks"),
    ("select_landmarks: negative count", lambda: select_landmarks(CLOUD, -3), P, "n_landmarks"),
    ("select_landmarks: count None", lambda: select_landmarks(CLOUD, None), P, "n_landmarks"),
    ("select_landmarks: density_power inf", lambda: select_landmarks(CLOUD, 3, method="density", density_power=np.inf),
     P, "density_power"),
    ("select_landmarks: keep_fraction string", lambda: select_landmarks(CLOUD, 3, method="core_maxmin",
                                                                         keep_fraction="0.5"), P, "keep_fraction"),
    ("select_landmarks: keep_fraction above 1", lambda: select_landmarks(CLOUD, 3, method="core_maxmin",
                                                                          keep_fraction=1.5), P, "keep_fraction"),
    ("select_landmarks: negative start", lambda: select_landmarks(CLOUD, 3, start=-1), P, "start"),
    ("select_landmarks: bool start", lambda: select_landmarks(CLOUD, 3, start=True), P, "start"),
    ("select_landmarks: float rng", lambda: select_landmarks(CLOUD, 3, rng=1.5), P, "rng"),
    ("select_landmarks: method None", lambda: select_landmarks(CLOUD, 3, method=None), P, "method"),
    ("select_landmarks: density_neighbors bool", lambda: select_landmarks(CLOUD, 3, method="density",
                                                                           density_neighbors=True),
     P, "density_neighbors"),
    ("select_landmarks: array for cloud", lambda: select_landmarks(POINTS, 3), P, "cloud"),
    # landmarks_from_indices (coverage radius of given landmarks)
    ("landmarks_from_indices: array for cloud", lambda: landmarks_from_indices(POINTS, [0, 1]), P, "cloud"),
    ("landmarks_from_indices: float indices", lambda: landmarks_from_indices(CLOUD, [0.5, 1.0]), P, "landmarks"),
    ("landmarks_from_indices: boolean mask", lambda: landmarks_from_indices(CLOUD, np.array([True, False])),
     P, "landmarks"),
    ("landmarks_from_indices: 2-D indices", lambda: landmarks_from_indices(CLOUD, [[0, 1]]), P, "landmarks"),
    ("landmarks_from_indices: ragged", lambda: landmarks_from_indices(CLOUD, [[0, 1], [2]]), P, "landmarks"),
    ("landmarks_from_indices: empty", lambda: landmarks_from_indices(CLOUD, []), P, "landmarks"),
    ("landmarks_from_indices: negative index", lambda: landmarks_from_indices(CLOUD, [-1, 2]), P, "landmarks"),
    # kNN density
    ("knn_radius: array for cloud", lambda: knn_radius(POINTS, 3), P, "cloud"),
    ("knn_radius: bool k", lambda: knn_radius(CLOUD, True), P, "k"),
    ("knn_radius: k as many as the points", lambda: knn_radius(CLOUD, 60), P, "k"),
    ("knn_density: calibrated string", lambda: knn_density(CLOUD, 3, calibrated="yes"), P, "calibrated"),
    ("densest_points: fraction NaN", lambda: densest_points(CLOUD, np.nan), P, "fraction"),
    ("densest_points: k zero", lambda: densest_points(CLOUD, 0.5, k=0), P, "k"),
    ("densest_points: array for cloud", lambda: densest_points(POINTS, 0.5), P, "cloud"),
    # compute_diagrams, every filtration
    ("compute_diagrams: landmarks of another cloud", lambda: compute_diagrams(load_cloud(POINTS[:30]),
                                                                               landmarks=LANDMARKS), P, "landmarks"),
    ("compute_diagrams: max_dim 10**6", lambda: compute_diagrams(CLOUD, max_dim=10**6), P, "max_dim"),
    ("compute_diagrams: max_dim bool", lambda: compute_diagrams(CLOUD, max_dim=True), P, "max_dim"),
    ("compute_diagrams: max_scale string", lambda: compute_diagrams(CLOUD, max_scale="1"), P, "max_scale"),
    ("compute_diagrams: max_scale zero", lambda: compute_diagrams(CLOUD, max_scale=0.0), P, "max_scale"),
    ("compute_diagrams: witness_nu bool", lambda: compute_diagrams(CLOUD, filtration="witness", landmarks=LANDMARKS,
                                                                    witness_nu=False), P, "witness_nu"),
    ("compute_diagrams: witness kind unknown", lambda: compute_diagrams(CLOUD, filtration="witness",
                                                                         landmarks=LANDMARKS, witness="medium"),
     P, "witness"),
    ("compute_diagrams: dtm_power 2", lambda: compute_diagrams(CLOUD, filtration="dtm", dtm_power=2), P, "dtm_power"),
    ("compute_diagrams: dtm_neighbors 0", lambda: compute_diagrams(CLOUD, filtration="dtm", dtm_neighbors=0),
     P, "dtm_neighbors"),
    ("compute_diagrams: rng string for sparse Rips", lambda: compute_diagrams(CLOUD, sparse=0.5, rng="x"), P, "rng"),
    ("compute_diagrams: memory_budget NaN", lambda: compute_diagrams(CLOUD, memory_budget=np.nan), P,
     "memory_budget"),
    ("compute_diagrams: memory_budget string", lambda: compute_diagrams(CLOUD, memory_budget="8GB"), P,
     "memory_budget"),
    ("compute_diagrams: float landmark indices", lambda: compute_diagrams(CLOUD, landmarks=np.array([0.0, 1.0])),
     P, "landmarks"),
    ("compute_diagrams: empty landmarks", lambda: compute_diagrams(CLOUD, landmarks=np.array([], dtype=int)),
     P, "landmarks"),
    ("compute_diagrams: alpha in 6-D", lambda: compute_diagrams(load_cloud(np.random.default_rng(2).normal(
        size=(20, 6))), filtration="alpha"), P, "filtration"),
    ("compute_diagrams: alpha on the sky", lambda: compute_diagrams(_sky(), filtration="alpha"), P, "filtration"),
    ("compute_diagrams: array for cloud", lambda: compute_diagrams(POINTS), P, "cloud"),
    ("compute_diagrams: coefficient_field 1", lambda: compute_diagrams(CLOUD, coefficient_field=1), P,
     "coefficient_field"),
    ("compute_diagrams: sparse NaN", lambda: compute_diagrams(CLOUD, sparse=np.nan), P, "sparse"),
    ("witness_edge_values: nu 5", lambda: witness_edge_values(CLOUD, LANDMARKS, nu=5), P, "nu"),
    ("witness_edge_values: negative max_scale", lambda: witness_edge_values(CLOUD, LANDMARKS, max_scale=-1), P,
     "max_scale"),
    ("witness_edge_values: array for cloud", lambda: witness_edge_values(POINTS, LANDMARKS), P, "cloud"),
    # Diagrams methods
    ("Diagrams: string dimension", lambda: DIAGRAMS["1"], P, "dim"),
    ("Diagrams: dimension 5", lambda: DIAGRAMS[5], P, "dim"),
    ("Diagrams: dimension -1", lambda: DIAGRAMS[-1], P, "dim"),
    ("Diagrams: capped dimension 2", lambda: DIAGRAMS.capped(2), P, "dim"),
    ("Diagrams: persistence of dimension 1.0", lambda: DIAGRAMS.persistence(1.0), P, "dim"),
    ("Diagrams: essential of dimension True", lambda: DIAGRAMS.essential(True), P, "dim"),
    ("Diagrams: betti_at string", lambda: DIAGRAMS.betti_at("0.5"), P, "scale"),
    # diagram_distance
    ("diagram_distance: None", lambda: diagram_distance(None, PAIR), P, "a"),
    ("diagram_distance: 3-D array", lambda: diagram_distance(np.zeros((2, 2, 2)), PAIR), P, "a"),
    ("diagram_distance: order inf", lambda: diagram_distance(PAIR, PAIR, kind="wasserstein", order=np.inf), P,
     "order"),
    ("diagram_distance: order NaN", lambda: diagram_distance(PAIR, PAIR, kind="wasserstein", order=np.nan), P,
     "order"),
    ("diagram_distance: kind None", lambda: diagram_distance(PAIR, PAIR, kind=None), P, "kind"),
    ("diagram_distance: birth -inf", lambda: diagram_distance([[-np.inf, 1.0]], PAIR), D, "a"),
    ("diagram_distance: a string", lambda: diagram_distance("abc", PAIR), P, "a"),
    ("diagram_distance: a dict", lambda: diagram_distance({"a": 1}, PAIR), P, "a"),
    ("diagram_distance: death NaN in b", lambda: diagram_distance(PAIR, [[0.0, np.nan]]), D, "b"),
    # persistence_landscape
    ("persistence_landscape: one grid point", lambda: persistence_landscape(PAIR, [0.5]), P, "grid"),
    ("persistence_landscape: NaN in grid", lambda: persistence_landscape(PAIR, [0, np.nan, 1]), P, "grid"),
    ("persistence_landscape: 2-D grid", lambda: persistence_landscape(PAIR, [[0, 1], [2, 3]]), P, "grid"),
    ("persistence_landscape: string grid", lambda: persistence_landscape(PAIR, "abc"), P, "grid"),
    ("persistence_landscape: decreasing grid", lambda: persistence_landscape(PAIR, [1.0, 0.0]), P, "grid"),
    ("persistence_landscape: n_levels 0", lambda: persistence_landscape(PAIR, [0, 1], n_levels=0), P, "n_levels"),
    ("persistence_landscape: n_levels 10**9", lambda: persistence_landscape(PAIR, [0, 1], n_levels=10**9), P,
     "n_levels"),
    ("persistence_landscape: birth after death", lambda: persistence_landscape([[1, 0]], [0, 1]), D, "diagram"),
    # permutation_test
    ("permutation_test: int group", lambda: permutation_test(5, TWO), P, "group_a"),
    ("permutation_test: string group", lambda: permutation_test("ab", TWO), P, "group_a"),
    ("permutation_test: one diagram in a group", lambda: permutation_test(TWO[:1], TWO), P, "group_a"),
    ("permutation_test: power 0", lambda: permutation_test(TWO, TWO, power=0), P, "power"),
    ("permutation_test: zero labelings", lambda: permutation_test(TWO, TWO, n_permutations=0), P, "n_permutations"),
    ("permutation_test: bool labelings", lambda: permutation_test(TWO, TWO, n_permutations=True), P,
     "n_permutations"),
    ("permutation_test: float labelings", lambda: permutation_test(TWO, TWO, n_permutations=10.5), P,
     "n_permutations"),
    ("permutation_test: Diagrams without dim", lambda: permutation_test([DIAGRAMS] * 2, [DIAGRAMS] * 2), P, "dim"),
    ("permutation_test: Diagrams with dim 7", lambda: permutation_test([DIAGRAMS] * 2, [DIAGRAMS] * 2, dim=7), P,
     "dim"),
    ("permutation_test: string rng", lambda: permutation_test(TWO, TWO, rng="a"), P, "rng"),
    ("permutation_test: bad diagram in group_b", lambda: permutation_test(TWO, [TWO[0], [[2.0, 1.0]]]), D,
     "group_b"),
    # confidence_band, every method
    ("confidence_band: array for cloud", lambda: confidence_band(POINTS), P, "cloud"),
    ("confidence_band: level 1", lambda: confidence_band(CLOUD, level=1.0), P, "level"),
    ("confidence_band: level bool", lambda: confidence_band(CLOUD, level=True), P, "level"),
    ("confidence_band: n_boot 0", lambda: confidence_band(CLOUD, n_boot=0), P, "n_boot"),
    ("confidence_band: n_boot 10**9", lambda: confidence_band(CLOUD, n_boot=10**9), P, "n_boot"),
    ("confidence_band: unknown method", lambda: confidence_band(CLOUD, method="x"), P, "method"),
    ("confidence_band: n_jobs 0", lambda: confidence_band(CLOUD, n_jobs=0, n_boot=2), P, "n_jobs"),
    ("confidence_band: progress not callable", lambda: confidence_band(CLOUD, progress=5, n_boot=2), P, "progress"),
    ("confidence_band: unknown diagram option", lambda: confidence_band(CLOUD, diagram_options={"foo": 1}, n_boot=2),
     P, "diagram_options"),
    ("confidence_band: diagram_options a list", lambda: confidence_band(CLOUD, diagram_options=[1], n_boot=2), P,
     "diagram_options"),
    ("confidence_band: subsample_size 0", lambda: confidence_band(CLOUD, method="subsample", subsample_size=0,
                                                                    n_boot=2), P, "subsample_size"),
    ("confidence_band: negative bandwidth", lambda: confidence_band(CLOUD, method="density", bandwidth=-1, n_boot=2),
     P, "bandwidth"),
    ("confidence_band: bandwidth NaN", lambda: confidence_band(CLOUD, method="density", bandwidth=np.nan, n_boot=2),
     P, "bandwidth"),
    ("confidence_band: resolution 3", lambda: confidence_band(CLOUD, method="density", resolution=3, n_boot=2), P,
     "resolution"),
    ("confidence_band: density on the sky", lambda: confidence_band(_sky(), method="density", n_boot=2), P, "method"),
    ("confidence_band: landscape n_levels 0", lambda: confidence_band(CLOUD, method="landscape", n_levels=0,
                                                                        n_boot=2), P, "n_levels"),
    ("confidence_band: landscape n_subsamples 1", lambda: confidence_band(CLOUD, method="landscape", n_subsamples=1,
                                                                            n_boot=2), P, "n_subsamples"),
    ("confidence_band: account_for_landmarks string", lambda: confidence_band(
        CLOUD, method="subsample", account_for_landmarks="yes", n_boot=2), P, "account_for_landmarks"),
    ("confidence_band: landmarks as indices", lambda: confidence_band(CLOUD, landmarks=np.arange(5), n_boot=2), P,
     "landmarks"),
    ("confidence_band: diagrams a list", lambda: confidence_band(CLOUD, diagrams=[[0, 1]], n_boot=2), P,
     "diagrams"),
    ("confidence_band: negative rng", lambda: confidence_band(CLOUD, rng=-3, n_boot=2), P, "rng"),
    ("confidence_band: bootstrap with alpha filtration name typo", lambda: confidence_band(
        CLOUD, method="bootstrap", filtration="alfa", n_boot=2), P, "filtration"),
    ("confidence_band: checkpoint an int", lambda: confidence_band(CLOUD, checkpoint=5, n_boot=2), P, "checkpoint"),
    ("confidence_band: checkpoint a folder", lambda: confidence_band(CLOUD, checkpoint=tempfile.gettempdir(),
                                                                      n_boot=2), P, "checkpoint"),
    ("confidence_band: checkpoint in a missing folder", lambda: confidence_band(
        CLOUD, checkpoint="/no/such/folder/band.json", n_boot=2), P, "checkpoint"),
    ("confidence_band: checkpoint holding garbage", lambda: confidence_band(CLOUD, checkpoint=_garbage(), n_boot=2),
     D, "checkpoint"),
    ("band_at_level: level 2", lambda: band_at_level(confidence_band(CLOUD, n_boot=3, rng=0), 2.0), P, "level"),
    ("band_at_level: not a band", lambda: band_at_level("x", 0.5), P, "band"),
    # compare_catalogues
    ("compare_catalogues: array for cloud_a", lambda: compare_catalogues(POINTS, CLOUD), P, "cloud_a"),
    ("compare_catalogues: one piece", lambda: compare_catalogues(CLOUD, CLOUD, n_pieces=1), P, "n_pieces"),
    ("compare_catalogues: pieces too large", lambda: compare_catalogues(CLOUD, CLOUD, piece_size=10**6), P,
     "piece_size"),
    ("compare_catalogues: one landmark", lambda: compare_catalogues(CLOUD, CLOUD, piece_size=10, n_landmarks=1), P,
     "n_landmarks"),
    ("compare_catalogues: dim 5", lambda: compare_catalogues(CLOUD, CLOUD, piece_size=10, n_landmarks=5, dim=5), P,
     "dim"),
    ("compare_catalogues: progress not callable", lambda: compare_catalogues(CLOUD, CLOUD, piece_size=10,
                                                                              n_landmarks=5, progress=3),
     P, "progress"),
    ("compare_catalogues: options as dict", lambda: compare_catalogues(
        CLOUD, CLOUD, piece_size=10, n_landmarks=5, complex_options={"filtration": "rips"}), P, "complex_options"),
    ("compare_catalogues: 10**9 labelings", lambda: compare_catalogues(CLOUD, CLOUD, piece_size=10, n_landmarks=5,
                                                                        n_permutations=10**9), P, "n_permutations"),
    ("compare_catalogues: options of the wrong class", lambda: compare_catalogues(
        CLOUD, CLOUD, piece_size=10, n_landmarks=5, complex_options=ComplexOptions), P, "complex_options"),
    # shapes
    ("shapes: circle with 0 points", lambda: shapes.circle(0), P, "n_points"),
    ("shapes: circle with a float count", lambda: shapes.circle(10.5), P, "n_points"),
    ("shapes: sphere with negative noise", lambda: shapes.sphere(10, noise=-1.0), P, "noise"),
    ("shapes: torus with NaN radius", lambda: shapes.torus(10, major=np.nan), P, "major"),
    ("shapes: add_noise to strings", lambda: shapes.add_noise([["a", "b"]], 0.1), P, "points"),
]


@pytest.mark.parametrize(("case", "call", "error", "parameter"), CASES, ids=[c[0] for c in CASES])
def test_hostile_input_is_refused_naming_the_parameter(case, call, error, parameter):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", tdakit.errors.TdakitWarning)
        with pytest.raises(error) as info:
            call()
    assert info.value.parameter == parameter, f"{case}: parameter {info.value.parameter!r}: {info.value}"
    assert f"'{parameter}'" in str(info.value) or f" {parameter} " in str(info.value), str(info.value)
