import warnings

import numpy as np
import pytest
from scipy.spatial.distance import cdist

import tdakit
from tdakit import shapes

HOUSE = np.array([(-1, 0), (1, 0), (1, 2), (-1, 2), (0, 3)], dtype=float)
METRIC_CASES = ["euclidean", "manhattan", "periodic", "angular", "cosine", "precomputed"]


def reference_distances(points, metric):
    """Full distance matrices computed independently of tdakit (scipy, or the formula written here)."""
    if metric == "euclidean":
        return cdist(points, points)
    if metric == "manhattan":
        return cdist(points, points, "cityblock")
    if metric == "cosine":
        return cdist(points, points, "cosine")
    if metric == "periodic":  # minimum image in a box of side 1 (common practice)
        diff = np.abs(points[:, None, :] - points[None, :, :])
        return np.sqrt((np.minimum(diff, 1 - diff) ** 2).sum(axis=2))
    if metric == "angular":  # haversine formula for the great-circle angle (common practice)
        lon, lat = np.radians(points[:, 0]), np.radians(points[:, 1])
        dlon, dlat = lon[:, None] - lon[None, :], lat[:, None] - lat[None, :]
        h = np.sin(dlat / 2) ** 2 + np.cos(lat[:, None]) * np.cos(lat[None, :]) * np.sin(dlon / 2) ** 2
        return np.degrees(2 * np.arcsin(np.sqrt(np.clip(h, 0, 1))))
    raise ValueError(metric)


def make_cloud(metric, n=60, seed=0):
    rng = np.random.default_rng(seed)
    if metric == "periodic":
        points = rng.uniform(0, 1, (n, 3))
        return tdakit.load_cloud(points, metric="periodic", box=1.0), reference_distances(points, metric)
    if metric == "angular":
        points = np.column_stack((rng.uniform(-180, 180, n), np.degrees(np.arcsin(rng.uniform(-1, 1, n)))))
        return tdakit.load_cloud(points, metric="angular"), reference_distances(points, metric)
    if metric == "precomputed":
        points = rng.normal(size=(n, 3))
        matrix = cdist(points, points)
        return tdakit.load_cloud(matrix, metric="precomputed"), matrix
    points = rng.normal(size=(n, 3))
    return tdakit.load_cloud(points, metric=metric), reference_distances(points, metric)


def reference_maxmin(matrix, n_landmarks, start):
    """Plain maxmin on a full distance matrix, ties to the lowest index (de Silva & Carlsson 2004)."""
    chosen = [start]
    nearest = matrix[start].copy()
    for _ in range(1, n_landmarks):
        chosen.append(int(np.argmax(nearest)))
        nearest = np.minimum(nearest, matrix[chosen[-1]])
    return chosen, nearest.max()


def test_house_maxmin_order():
    # javaPlex tutorial (Adams & Tausz), section 5.2: start at (1, 0), three landmarks -> (1,0), (0,3), (-1,0).
    marks = tdakit.select_landmarks(tdakit.load_cloud(HOUSE), 3, start=1)
    np.testing.assert_array_equal(HOUSE[marks.indices], [(1, 0), (0, 3), (-1, 0)])
    assert marks.coverage_radius == pytest.approx(np.sqrt(2))  # (1,2) and (-1,2) lie sqrt(2) from (0,3)


@pytest.mark.parametrize("metric", METRIC_CASES)
def test_maxmin_matches_reference_under_every_metric(metric):
    cloud, matrix = make_cloud(metric)
    marks = tdakit.select_landmarks(cloud, 12, start=5)
    expected, radius = reference_maxmin(matrix, 12, 5)
    np.testing.assert_array_equal(marks.indices, expected)
    assert marks.coverage_radius == pytest.approx(radius, rel=1e-9, abs=1e-12)


@pytest.mark.parametrize("metric", METRIC_CASES)
@pytest.mark.parametrize("method", ["maxmin", "random", "density", "core_maxmin"])
def test_coverage_and_nearest_are_exact_under_every_metric(metric, method, global_seed):
    cloud, matrix = make_cloud(metric, seed=global_seed)
    marks = tdakit.select_landmarks(cloud, 10, method=method, rng=global_seed)
    assert np.unique(marks.indices).size == 10
    to_landmarks = matrix[:, marks.indices]
    np.testing.assert_allclose(marks.distance_to_nearest, to_landmarks.min(axis=1), rtol=1e-9, atol=1e-9)
    assert marks.coverage_radius == pytest.approx(to_landmarks.min(axis=1).max(), rel=1e-9, abs=1e-9)
    chosen = to_landmarks[np.arange(cloud.n_points), marks.nearest]
    np.testing.assert_allclose(chosen, to_landmarks.min(axis=1), rtol=1e-9, atol=1e-9)


def test_maxmin_landmarks_are_at_least_the_coverage_radius_apart():
    # Each new maxmin landmark is the farthest point, so all pairs are >= epsilon apart (de Silva & Carlsson 2004).
    points = shapes.circle(500, noise=0.1, rng=3)
    marks = tdakit.select_landmarks(tdakit.load_cloud(points), 25, rng=3)
    pair = cdist(points[marks.indices], points[marks.indices])
    assert pair[np.triu_indices(25, 1)].min() >= marks.coverage_radius - 1e-12


def test_more_landmarks_than_distinct_points_says_how_many():
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cloud = tdakit.load_cloud(np.repeat(HOUSE, 3, axis=0))
    for method in ["maxmin", "random", "density"]:
        with pytest.raises(tdakit.errors.InvalidParameterError, match="distinct points, 5"):
            tdakit.select_landmarks(cloud, 6, method=method, rng=0)
    assert tdakit.select_landmarks(cloud, 5).n_landmarks == 5


PRIMES = np.array([p for p in range(2, 3572) if all(p % d for d in range(2, int(p**0.5) + 1))])


def test_densest_primes_on_a_line():
    # javaPlex tutorial, appendix A: the 500 primes <= 3571 on a line; k = 1 and k = 50 densest ten.
    assert PRIMES.size == 500
    cloud = tdakit.load_cloud(PRIMES[:, None].astype(float))
    np.testing.assert_array_equal(PRIMES[tdakit.densest_points(cloud, 10 / 500, k=1)],
                                  [2, 3, 5, 7, 11, 13, 17, 19, 29, 31])
    np.testing.assert_array_equal(PRIMES[tdakit.densest_points(cloud, 10 / 500, k=50)],
                                  [113, 127, 109, 131, 107, 137, 139, 157, 149, 151])


def test_calibrated_density_integrates_to_about_one():
    # k/(n V_d rho^d) estimates a probability density (Loftsgaarden & Quesenberry 1965): for N(0, I_2) the
    # estimate at the points is close to the true density 1/(2 pi) exp(-|x|^2/2) on average.
    points = np.random.default_rng(1).normal(size=(4000, 2))
    estimate = tdakit.knn_density(tdakit.load_cloud(points), 30, calibrated=True)
    truth = np.exp(-(points**2).sum(axis=1) / 2) / (2 * np.pi)
    assert np.median(estimate / truth) == pytest.approx(1.0, abs=0.1)


def test_density_power_moves_landmarks_between_dense_and_sparse_regions(global_seed):
    # tdakit design choice (no published source): power > 0 favours dense regions, power < 0 evens out.
    rng = np.random.default_rng(global_seed)
    dense, sparse = rng.normal(scale=0.1, size=(800, 2)), rng.normal(scale=1.0, size=(200, 2)) + 5
    cloud = tdakit.load_cloud(np.vstack((dense, sparse)))
    share = {}
    for power in (-2.0, 0.0, 2.0):
        marks = tdakit.select_landmarks(cloud, 100, method="density", density_power=power, rng=global_seed)
        share[power] = np.mean(marks.indices < 800)
    assert share[2.0] > 0.95 and share[-2.0] < 0.2 and share[-2.0] < share[0.0] < share[2.0]


def test_core_maxmin_skips_outliers_that_maxmin_picks_first():
    points = np.vstack((shapes.circle(400, noise=0.02, rng=1), [[8, 8], [-9, 7], [7, -8]]))
    cloud = tdakit.load_cloud(points)
    plain = tdakit.select_landmarks(cloud, 10, rng=0)
    core = tdakit.select_landmarks(cloud, 10, method="core_maxmin", keep_fraction=0.95, rng=0)
    assert np.isin([400, 401, 402], plain.indices).all()
    assert not np.isin([400, 401, 402], core.indices).any()


@pytest.mark.parametrize("metric", ["euclidean", "chebyshev", "periodic"])
def test_compiled_maxmin_breaks_ties_like_the_plain_loop(metric, monkeypatch):
    # An integer grid has many exactly equal distances: both routes must pick the lowest index each time.
    grid = np.array([(x, y) for x in range(12) for y in range(9)], dtype=float)
    kwargs = {"box": [12.0, 9.0]} if metric == "periodic" else {}
    cloud = tdakit.load_cloud(grid, metric=metric, **kwargs)
    fast = tdakit.select_landmarks(cloud, 40, start=17)
    from tdakit.core import _maxmin

    monkeypatch.setattr(_maxmin, "_kernel", lambda: None)  # the numpy fallback streams every point
    plain = tdakit.select_landmarks(cloud, 40, start=17)
    np.testing.assert_array_equal(fast.indices, plain.indices)
    assert fast.coverage_radius == plain.coverage_radius
    np.testing.assert_allclose(fast.distance_to_nearest, plain.distance_to_nearest, atol=1e-12)


def test_core_maxmin_may_start_outside_the_core():
    points = np.vstack((shapes.circle(200, noise=0.02, rng=1), [[9.0, 9.0]]))
    cloud = tdakit.load_cloud(points)
    marks = tdakit.select_landmarks(cloud, 8, method="core_maxmin", start=200, rng=0)
    assert marks.indices[0] == 200 and not np.isin(200, marks.indices[1:])


@pytest.mark.filterwarnings("ignore::tdakit.errors.DuplicatePointsWarning")
@pytest.mark.parametrize("metric", ["euclidean", "manhattan", "chebyshev", "periodic"])
@pytest.mark.parametrize("dims", [2, 6])
def test_list_and_streaming_kernels_agree_with_the_plain_loop(metric, dims, monkeypatch, global_seed):
    # Integer coordinates make many exact ties; the plain loop (de Silva & Carlsson 2004, ties to the lowest
    # index) is the reference for both compiled routines.
    from tdakit.core import _maxmin

    points = np.random.default_rng(global_seed).integers(0, 4, (300, dims)).astype(float)
    kwargs = {"box": 4.0} if metric == "periodic" else {}
    cloud = tdakit.load_cloud(points, metric=metric, **kwargs)
    count = min(25, cloud.n_distinct)
    results = []
    for threshold in (99, 0):  # 99: always lists; 0: always streaming
        monkeypatch.setattr(_maxmin, "STREAM_ABOVE_DIMS", threshold)
        results.append(tdakit.select_landmarks(cloud, count, start=3))
    monkeypatch.setattr(_maxmin, "_kernel", lambda: None)
    plain = tdakit.select_landmarks(cloud, count, start=3)
    for marks in results:
        np.testing.assert_array_equal(marks.indices, plain.indices)
        # Nearest landmarks may differ on exact ties between two landmarks; the distances may not.
        np.testing.assert_allclose(marks.distance_to_nearest, plain.distance_to_nearest, rtol=1e-12, atol=1e-12)
        assert marks.coverage_radius == pytest.approx(plain.coverage_radius, rel=1e-12)
