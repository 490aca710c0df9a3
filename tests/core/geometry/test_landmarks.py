import warnings

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st
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
    from tdakit.core.geometry import _maxmin

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
def test_box_and_streaming_kernels_agree_with_the_plain_loop(metric, dims, monkeypatch, global_seed):
    # Integer coordinates make many exact ties; the plain loop (de Silva & Carlsson 2004, ties to the lowest
    # index) is the reference for both compiled routines.
    from tdakit.core.geometry import _maxmin

    points = np.random.default_rng(global_seed).integers(0, 4, (300, dims)).astype(float)
    kwargs = {"box": 4.0} if metric == "periodic" else {}
    cloud = tdakit.load_cloud(points, metric=metric, **kwargs)
    count = min(25, cloud.n_distinct)
    results = []
    for threshold in (99, 0):  # 99: always boxes; 0: always streaming
        monkeypatch.setattr(_maxmin, "STREAM_ABOVE_DIMS", threshold)
        results.append(tdakit.select_landmarks(cloud, count, start=3))
    monkeypatch.setattr(_maxmin, "_kernel", lambda: None)
    plain = tdakit.select_landmarks(cloud, count, start=3)
    for marks in results:
        np.testing.assert_array_equal(marks.indices, plain.indices)
        # Nearest landmarks may differ on exact ties between two landmarks; the distances may not.
        np.testing.assert_allclose(marks.distance_to_nearest, plain.distance_to_nearest, rtol=1e-12, atol=1e-12)
        assert marks.coverage_radius == pytest.approx(plain.coverage_radius, rel=1e-12)


def _plain_maxmin(cloud, count, start, monkeypatch):
    """The numpy loop of de Silva & Carlsson (2004): every candidate streamed once per landmark."""
    from tdakit.core.geometry import _maxmin

    with monkeypatch.context() as patch:
        patch.setattr(_maxmin, "_kernel", lambda: None)
        return tdakit.select_landmarks(cloud, count, start=start)


def _assert_same_selection(fast, plain):
    np.testing.assert_array_equal(fast.indices, plain.indices)
    np.testing.assert_allclose(fast.distance_to_nearest, plain.distance_to_nearest, rtol=1e-12, atol=0)
    assert fast.coverage_radius == pytest.approx(plain.coverage_radius, rel=1e-12)


def _awkward_cloud(kind, rng):
    if kind == "orders_of_magnitude":  # boxes over 18 orders of magnitude, and far outliers
        points = rng.normal(size=(150, 3)) * 10.0 ** rng.integers(-6, 7, (150, 1))
        return np.vstack((points, [[1e9, 0.0, 0.0], [-1e9, 1e-9, 0.0]]))
    if kind == "repeats":  # many exact copies and exact ties
        return rng.integers(0, 3, (200, 3)).astype(float)
    if kind == "line":
        return rng.normal(size=(200, 1))
    if kind == "four_coordinates":
        return rng.standard_t(2, size=(200, 4))
    raise ValueError(kind)


@pytest.mark.filterwarnings("ignore::tdakit.errors.DuplicatePointsWarning")
@pytest.mark.parametrize("metric", [("euclidean", {}), ("manhattan", {}), ("chebyshev", {}),
                                    ("minkowski", {"p": 3.0})], ids=lambda m: m[0])
@pytest.mark.parametrize("kind", ["orders_of_magnitude", "repeats", "line", "four_coordinates"])
def test_box_route_matches_the_plain_loop_on_awkward_clouds(kind, metric, monkeypatch, global_seed):
    # Two points per box and two boxes per group: every pruning test fires many times.
    from tdakit.core.geometry import _maxmin

    monkeypatch.setattr(_maxmin, "_LEAF_SIZE", 2)
    monkeypatch.setattr(_maxmin, "_GROUP", 2)
    cloud = tdakit.load_cloud(_awkward_cloud(kind, np.random.default_rng(global_seed)), metric=metric[0],
                              **metric[1])
    count = min(40, cloud.n_distinct)
    _assert_same_selection(tdakit.select_landmarks(cloud, count, start=1),
                           _plain_maxmin(cloud, count, 1, monkeypatch))


def test_box_route_sees_across_the_periodic_boundary(monkeypatch, global_seed):
    # Points hugging both faces of the box are neighbours through the boundary (minimum image).
    from tdakit.core.geometry import _maxmin

    monkeypatch.setattr(_maxmin, "_LEAF_SIZE", 3)
    rng = np.random.default_rng(global_seed)
    points = rng.uniform(0, 1, (240, 3))
    points[:40, 0] = rng.choice([1e-9, 1 - 1e-9], 40)
    cloud = tdakit.load_cloud(points, metric="periodic", box=1.0)
    _assert_same_selection(tdakit.select_landmarks(cloud, 50, start=0), _plain_maxmin(cloud, 50, 0, monkeypatch))


@pytest.mark.parametrize("kind", ["far_from_origin", "tiny_beside_huge", "huge", "a_few_distinct"])
def test_fixed_point_screen_keeps_the_float64_choices(kind, monkeypatch, global_seed):
    # The screen may only pass points on to exact distances, never decide: distances that 16-bit steps cannot
    # tell apart (points 1e-7 apart beside points 1e3 away) must still be ordered as float64 orders them.
    from tdakit.core.geometry import _maxmin

    rng = np.random.default_rng(global_seed)
    points = rng.normal(size=(400, 8))
    if kind == "far_from_origin":
        points = 1e7 + points * 1e-3
    elif kind == "tiny_beside_huge":
        points = np.vstack((points * 1e-7, [[1e3] * 8, [-1e3] * 8]))
    elif kind == "huge":
        points = points * 1e140  # near the largest span the cloud accepts (1e150)
    else:
        points = np.repeat(points[:5], 80, axis=0)
    used = []
    real = _maxmin._stream_euclidean
    monkeypatch.setattr(_maxmin, "_stream_euclidean", lambda *a: used.append(1) or real(*a))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cloud = tdakit.load_cloud(points)
    count = min(60, cloud.n_distinct)
    fast = tdakit.select_landmarks(cloud, count, start=2)
    assert used
    _assert_same_selection(fast, _plain_maxmin(cloud, count, 2, monkeypatch))


@given(st.integers(1, 6), st.integers(2, 60), st.integers(0, 2**32 - 1), st.sampled_from([-8, 0, 8]))
def test_every_route_matches_the_plain_loop_on_random_clouds(dims, n, seed, exponent):
    rng = np.random.default_rng(seed)
    points = np.round(rng.normal(size=(n, dims)), int(rng.integers(0, 3))) * 10.0**exponent  # rounding: ties
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cloud = tdakit.load_cloud(points)
    count = int(rng.integers(1, cloud.n_distinct + 1))

    fast = tdakit.select_landmarks(cloud, count, start=0)
    with pytest.MonkeyPatch.context() as patch:
        _assert_same_selection(fast, _plain_maxmin(cloud, count, 0, patch))


def test_thread_count_follows_the_environment(monkeypatch):
    # Dask's workers set OMP_NUM_THREADS=1 (common practice for process-parallel jobs): the compiled passes
    # must then stay on one thread; small passes never split.
    from tdakit.core.geometry._maxmin import worker_threads

    assert worker_threads(1000) == 1
    monkeypatch.setenv("OMP_NUM_THREADS", "1")
    assert worker_threads(10**8) == 1
    monkeypatch.setenv("OMP_NUM_THREADS", "not a number")
    assert 1 <= worker_threads(10**8) <= 4


def test_threads_do_not_change_the_landmarks(monkeypatch):
    # The streaming pass splits its blocks over threads and combines by exact maxima (lowest position on
    # ties): one thread and several must choose the same landmarks.
    from tdakit.core.geometry import _maxmin

    points = np.round(np.random.default_rng(3).normal(size=(6000, 6)), 1)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cloud = tdakit.load_cloud(points)
    runs = []
    for threads in (1, 3):
        monkeypatch.setattr(_maxmin, "worker_threads", lambda size, t=threads: t)
        runs.append(tdakit.select_landmarks(cloud, 200, start=0))
    _assert_same_selection(runs[1], runs[0])
