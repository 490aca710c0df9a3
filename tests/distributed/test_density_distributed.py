"""kNN radii and density-weighted landmarks on a Dask cluster: the in-memory results, exactly."""

import copy
import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import tdakit
from tdakit.core.geometry.density import knn_radius
from tdakit.distributed import knn_radius_distributed, select_landmarks_distributed
from tdakit.distributed._worker_density import restore_generator
from tdakit.distributed.density import skip_exponentials
from tdakit.errors import InvalidDataError, InvalidParameterError, MemoryBudgetError

pytestmark = pytest.mark.filterwarnings("ignore::tdakit.errors.DuplicatePointsWarning")


def _cloud(points, **metric):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return tdakit.load_cloud(points, **metric)


def _same_radii(client, points, k, **options):
    metric = {name: options.pop(name) for name in ("metric", "box", "p") if name in options}
    expected = knn_radius(_cloud(points, **metric), k)
    got = knn_radius_distributed(points, k, client=client, **metric, **options)
    assert got.shape == expected.shape
    assert np.array_equal(got, expected)
    return got


def _same_landmarks(client, points, n, **options):
    metric = {name: options.pop(name) for name in ("metric", "box") if name in options}
    chunk = options.pop("chunk_rows", None)
    fresh = copy.deepcopy(options)  # a Generator given as rng is drawn from by each call
    expected = tdakit.select_landmarks(_cloud(points, **metric), n, method="density", **options)
    got = select_landmarks_distributed(points, n, method="density", client=client, chunk_rows=chunk, **metric,
                                       **fresh)
    np.testing.assert_array_equal(got.indices, expected.indices)
    np.testing.assert_array_equal(got.nearest, expected.nearest)
    np.testing.assert_array_equal(got.distance_to_nearest, expected.distance_to_nearest)
    assert got.coverage_radius == expected.coverage_radius
    assert got.params["density_power"] == expected.params["density_power"]
    assert got.params["density_neighbors"] == expected.params["density_neighbors"]
    return got


def _same_core(client, points, n, **options):
    metric = {name: options.pop(name) for name in ("metric", "box") if name in options}
    chunk = options.pop("chunk_rows", None)
    expected = tdakit.select_landmarks(_cloud(points, **metric), n, method="core_maxmin", **options)
    got = select_landmarks_distributed(points, n, method="core_maxmin", client=client, chunk_rows=chunk, **metric,
                                       **options)
    np.testing.assert_array_equal(got.indices, expected.indices)  # in selection order
    np.testing.assert_array_equal(got.nearest, expected.nearest)
    np.testing.assert_array_equal(got.distance_to_nearest, expected.distance_to_nearest)
    assert got.coverage_radius == expected.coverage_radius
    return got


def _clustered_and_uniform(rng, n=2400):
    centres = rng.uniform(-5, 5, size=(6, 3))
    clumps = centres[rng.integers(0, 6, size=n // 2)] + 0.05 * rng.normal(size=(n // 2, 3))
    return np.concatenate((clumps, rng.uniform(-6, 6, size=(n - n // 2, 3))))


# -- the random stream ------------------------------------------------------------------------------------
@pytest.mark.parametrize("bit_generator", ["PCG64", "Philox", "SFC64", "MT19937"])
def test_exponentials_drawn_in_chunks_equal_one_draw(bit_generator):
    """The driver's walk relies on this: chunked draws, and draws after restoring a recorded state, are one stream."""
    make = getattr(np.random, bit_generator)
    whole = np.random.Generator(make(11)).exponential(size=5000)
    walker = np.random.Generator(make(11))
    sizes = [0, 1, 7, 1234, 2, 3000, 756]
    pieces = []
    for size in sizes:
        state = walker.bit_generator.state
        pieces.append(restore_generator(state).exponential(size=size))
        skip_exponentials(walker, size)
    assert sum(sizes) == whole.size
    np.testing.assert_array_equal(np.concatenate(pieces), whole)
    np.testing.assert_array_equal(walker.exponential(size=3),
                                  np.random.Generator(make(11)).exponential(size=5003)[-3:])


# -- kNN radius ---------------------------------------------------------------------------------------------
def test_euclidean_radii_identical_with_copies_across_partitions(client):
    rng = np.random.default_rng(1)
    points = rng.normal(size=(2000, 3))
    points[1500:1540] = points[7]  # 41 copies of one point, spread over several partitions
    points[1900:1903] = points[1999]
    radius = {k: _same_radii(client, points, k, chunk_rows=350) for k in (1, 15, 45)}
    assert radius[15][7] == 0.0 < radius[45][7]  # 40 other copies: within k = 15, not k = 45
    assert radius[1][1900] == 0.0 < radius[15][1900]


def test_periodic_radii_wrap_across_the_faces(client):
    rng = np.random.default_rng(2)
    points = rng.uniform(0, 10, size=(2000, 3))
    points[:300, 0] = rng.uniform(0, 0.2, 300)  # a slab on each face: nearest neighbours across the wrap
    points[300:600, 0] = rng.uniform(9.8, 10.0, 300)
    points[600:605] = 10.0  # on the far faces: the same point as 0 after wrapping
    points[605:610] = 0.0
    radius = _same_radii(client, points, 8, metric="periodic", box=10.0, chunk_rows=450)
    plain = knn_radius(_cloud(points), 8)
    assert (radius[:600] < plain[:600]).any()  # the wrap matters for these points


def test_angular_radii_count_lon_0_and_360_as_one_point(client):
    rng = np.random.default_rng(3)
    sky = np.column_stack((rng.uniform(0, 360, 1800), np.degrees(np.arcsin(rng.uniform(-1, 1, 1800)))))
    sky[:4] = [[0.0, 10.0], [360.0, 10.0], [0.0, 90.0], [123.0, 90.0]]  # the same points twice each
    _same_radii(client, sky, 1, metric="angular", chunk_rows=300)
    _same_radii(client, sky, 12, metric="angular", chunk_rows=300)


@pytest.mark.parametrize("metric", [{"metric": "manhattan"}, {"metric": "chebyshev"},
                                    {"metric": "minkowski", "p": 3.0}, {"metric": "cosine"}])
def test_other_minkowski_orders_identical(client, metric):
    points = _clustered_and_uniform(np.random.default_rng(4), 1500)
    _same_radii(client, points, 6, chunk_rows=400, **metric)


@pytest.mark.parametrize("metric", [{}, {"metric": "periodic", "box": 1.0}, {"metric": "cosine"}])
def test_many_coordinates_searched_by_exact_distances_as_in_memory(client, metric):
    points = np.random.default_rng(17).uniform(0, 1, size=(700, 14))  # beyond the kd-trees' 12 coordinates
    points[600:610] = points[3]
    _same_radii(client, points, 12, chunk_rows=160, n_cells=6, **metric)


def test_density_methods_in_many_coordinates(client):
    points = _clustered_and_uniform(np.random.default_rng(18), 600)
    points = np.concatenate((points, points[:, :2] ** 2, np.sin(points), np.cos(points), points[:, :1]), axis=1)
    _same_landmarks(client, points, 20, rng=7, chunk_rows=150)
    _same_core(client, points, 20, rng=8, chunk_rows=150)


def test_ties_on_a_grid_and_k_up_to_all_other_points(client):
    grid = np.stack(np.meshgrid(np.arange(7.0), np.arange(7.0), np.arange(3.0)), axis=-1).reshape(-1, 3)
    points = np.concatenate((grid, grid[::5]))  # every distance tied many times, and copies
    for k in (1, 6, points.shape[0] - 1):
        _same_radii(client, points, k, chunk_rows=23, n_cells=9)


def test_clustered_and_uniform_points_identical(client):
    points = _clustered_and_uniform(np.random.default_rng(5))
    _same_radii(client, points, 15, chunk_rows=500, n_cells=16)


def test_dask_array_blocks_stay_where_they_were_computed(client):
    da = pytest.importorskip("dask.array")
    points = _clustered_and_uniform(np.random.default_rng(14), 1600)
    got = knn_radius_distributed(da.from_array(points, chunks=(230, 3)), 9, client=client)
    np.testing.assert_array_equal(got, knn_radius(_cloud(points), 9))


def test_radii_written_by_the_workers_to_a_file(client, tmp_path):
    points = np.random.default_rng(6).normal(size=(900, 2))
    got = knn_radius_distributed(points, 5, client=client, per_point=tmp_path / "out")
    assert isinstance(got, np.memmap) and not got.flags.writeable
    np.testing.assert_array_equal(got, knn_radius(_cloud(points), 5))


@settings(max_examples=8, deadline=None)
@given(seed=st.integers(0, 2**31), n_points=st.integers(3, 250), chunk=st.integers(1, 250),
       cells=st.integers(1, 9), k=st.integers(1, 20), ties=st.booleans())
def test_same_radii_for_any_partitioning_and_cells(client, seed, n_points, chunk, cells, k, ties):
    rng = np.random.default_rng(seed)
    points = rng.integers(0, 4, size=(n_points, 2)).astype(float) if ties else rng.normal(size=(n_points, 2))
    _same_radii(client, points, min(k, n_points - 1), chunk_rows=chunk, n_cells=cells)


# -- density-weighted landmarks ------------------------------------------------------------------------------
def test_density_landmarks_identical_to_in_memory(client):
    points = _clustered_and_uniform(np.random.default_rng(7))
    points[100:130] = points[5]  # copies: only the first row of each may be drawn
    for seed, power in ((0, 1.0), (3, -2.0)):
        _same_landmarks(client, points, 60, rng=seed, density_power=power, chunk_rows=300)
    _same_landmarks(client, points, 25, rng=np.random.default_rng(8), density_neighbors=3, chunk_rows=1000)


@settings(max_examples=5, deadline=None)
@given(seed=st.integers(0, 2**31), n_points=st.integers(10, 200), chunk=st.integers(1, 200),
       power=st.floats(-10, 10), ties=st.booleans())
def test_same_density_landmarks_for_any_partitioning(client, seed, n_points, chunk, power, ties):
    rng = np.random.default_rng(seed)
    points = rng.integers(0, 5, size=(n_points, 2)).astype(float) if ties else rng.normal(size=(n_points, 2))
    n = int(min(6, len(np.unique(points, axis=0))))
    options = dict(rng=seed, density_power=power, density_neighbors=min(4, n_points - 1))
    try:
        tdakit.select_landmarks(_cloud(points), n, method="density", **options)
    except InvalidDataError:  # every point has k copies: refused alike
        _refused(InvalidDataError, "density_neighbors", lambda: select_landmarks_distributed(
            points, n, method="density", client=client, chunk_rows=chunk, **options))
        return
    _same_landmarks(client, points, n, chunk_rows=chunk, **options)


def test_density_landmarks_on_periodic_and_sky_data(client):
    rng = np.random.default_rng(9)
    box = rng.uniform(0, 5, size=(1200, 2))
    box[:3] = [[5.0, 1.0], [0.0, 1.0], [5.0, 1.0]]  # copies after wrapping
    _same_landmarks(client, box, 30, rng=1, metric="periodic", box=5.0, chunk_rows=200)
    sky = np.column_stack((rng.uniform(0, 360, 1000), rng.uniform(-60, 60, 1000)))
    sky[:2] = [[0.0, 5.0], [360.0, 5.0]]
    _same_landmarks(client, sky, 30, rng=2, metric="angular", chunk_rows=333, density_power=2.5)


def test_pipeline_routes_density_methods_with_their_options(client):
    from tdakit.distributed.scheduler import landmark_function

    points = np.random.default_rng(10).normal(size=(800, 3))
    cloud = _cloud(points)
    select = landmark_function(client)
    got = select(cloud, 20, method="density", rng=5, density_power=-1.5, density_neighbors=4)
    expected = tdakit.select_landmarks(cloud, 20, method="density", rng=5, density_power=-1.5, density_neighbors=4)
    np.testing.assert_array_equal(got.indices, expected.indices)
    assert "cluster" in got.params
    got = select(cloud, 15, method="core_maxmin", rng=6, keep_fraction=0.6, density_neighbors=5)
    expected = tdakit.select_landmarks(cloud, 15, method="core_maxmin", rng=6, keep_fraction=0.6, density_neighbors=5)
    np.testing.assert_array_equal(got.indices, expected.indices)
    assert got.params["cluster"]["workers"] == 2


# -- maxmin among the densest points ----------------------------------------------------------------------------
def test_core_maxmin_identical_to_in_memory(client):
    points = _clustered_and_uniform(np.random.default_rng(15), 2000)
    points[:40] = points[40]  # a heap of copies: radii tied at 0 across partitions
    _same_core(client, points, 40, rng=3, chunk_rows=300)
    _same_core(client, points, 25, start=1999, keep_fraction=0.5, density_neighbors=4, chunk_rows=700)


def test_core_maxmin_ties_on_a_grid_and_periodic_box(client):
    grid = np.stack(np.meshgrid(np.arange(9.0), np.arange(9.0)), axis=-1).reshape(-1, 2)
    points = np.concatenate((grid, 0.5 * grid[::4] + 0.25))  # many radii tied exactly at the threshold
    for fraction in (0.3, 0.77, 1.0):
        _same_core(client, points, 12, rng=4, keep_fraction=fraction, density_neighbors=3, chunk_rows=17)
    box = np.random.default_rng(16).uniform(0, 4, size=(900, 2))
    _same_core(client, box, 30, rng=5, metric="periodic", box=4.0, chunk_rows=250)


# -- refusals ----------------------------------------------------------------------------------------------------
def _refused(error, parameter, call):
    with pytest.raises(error) as caught:
        call()
    assert caught.value.parameter == parameter
    return str(caught.value)


def test_refusals_name_the_parameter(client, monkeypatch):
    points = np.random.default_rng(11).normal(size=(50, 2))
    assert "[1, 49]" in _refused(InvalidParameterError, "k", lambda: knn_radius_distributed(points, 50, client=client))
    _refused(InvalidParameterError, "k", lambda: knn_radius_distributed(points, 2.5, client=client))
    _refused(InvalidParameterError, "n_cells", lambda: knn_radius_distributed(points, 2, n_cells=0, client=client))
    _refused(InvalidParameterError, "n_cells", lambda: knn_radius_distributed(points, 2, n_cells=True, client=client))
    _refused(InvalidParameterError, "per_point", lambda: knn_radius_distributed(points, 2, per_point=3, client=client))
    _refused(InvalidParameterError, "metric", lambda: knn_radius_distributed(points, 2, metric="precomputed",
                                                                           client=client))
    monkeypatch.setattr("tdakit.distributed.landmarks.GATHER_LIMIT_BYTES", 100)
    assert "per_point" in _refused(MemoryBudgetError, "per_point", lambda: knn_radius_distributed(points, 2,
                                                                                                  client=client))


def test_density_landmark_refusals_match_in_memory(client):
    points = np.random.default_rng(12).normal(size=(40, 2))

    def both(error, parameter, n=5, data=points, method="density", **options):
        for call in (lambda: tdakit.select_landmarks(_cloud(data), n, method=method, rng=0, **options),
                     lambda: select_landmarks_distributed(data, n, method=method, rng=0, client=client,
                                                          **options)):
            message = _refused(error, parameter, call)
        return message

    both(InvalidParameterError, "density_power", density_power=10.5)
    both(InvalidParameterError, "density_power", density_power=float("nan"))
    both(InvalidParameterError, "density_neighbors", density_neighbors=0)
    both(InvalidParameterError, "density_neighbors", density_neighbors=40)
    copies = np.repeat(points[:6], 7, axis=0)  # 6 distinct points, each 7 times
    both(InvalidParameterError, "n_landmarks", n=7, data=copies)
    both(InvalidDataError, "density_neighbors", data=copies, density_neighbors=6)
    np.testing.assert_array_equal(
        select_landmarks_distributed(copies, 6, method="density", rng=0, density_neighbors=7, client=client,
                                     chunk_rows=5).indices,
        tdakit.select_landmarks(_cloud(copies), 6, method="density", rng=0, density_neighbors=7).indices)
    both(InvalidParameterError, "keep_fraction", method="core_maxmin", keep_fraction=0.0)
    both(InvalidParameterError, "keep_fraction", method="core_maxmin", keep_fraction=1.5)
    assert "4 kept points" in both(InvalidParameterError, "n_landmarks", method="core_maxmin", keep_fraction=0.1)
    both(InvalidParameterError, "n_landmarks", n=7, data=copies, method="core_maxmin")
    heap = np.concatenate((np.zeros((30, 2)), points[:10] + 5.0))  # the kept 30 rows are one point
    assert "among the candidates, 1." in both(InvalidParameterError, "n_landmarks", n=3, data=heap,
                                              method="core_maxmin", keep_fraction=0.75)


@pytest.mark.slow
def test_worker_processes_reading_a_file(process_client, tmp_path):
    points = _clustered_and_uniform(np.random.default_rng(13), 3000)
    path = tmp_path / "cloud.npy"
    np.save(path, points)
    np.testing.assert_array_equal(knn_radius_distributed(str(path), 10, client=process_client, chunk_rows=700),
                                  knn_radius(_cloud(points), 10))
    _same_landmarks(process_client, points, 40, rng=21, chunk_rows=900)
