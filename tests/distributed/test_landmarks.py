"""Landmarks on a Dask cluster: the in-memory routine's landmarks, coverage and per-point results, exactly."""

import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import tdakit
from tdakit.distributed import select_landmarks_distributed
from tdakit.errors import DataFileNotFoundError, InvalidDataError, InvalidParameterError, MemoryBudgetError

pytestmark = pytest.mark.filterwarnings("ignore::tdakit.errors.DuplicatePointsWarning")


def _in_memory(points, n, **kwargs):
    metric = kwargs.pop("metric", "euclidean")
    box = kwargs.pop("box", None)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        cloud = tdakit.load_cloud(points, metric=metric, box=box)
    return tdakit.select_landmarks(cloud, n, **kwargs)


def _assert_same(expected, got):
    np.testing.assert_array_equal(got.indices, expected.indices)
    assert got.coverage_radius == expected.coverage_radius
    np.testing.assert_array_equal(got.nearest, expected.nearest)
    np.testing.assert_array_equal(got.distance_to_nearest, expected.distance_to_nearest)
    assert got.method == expected.method and type(got) is type(expected)


def _clouds():
    rng = np.random.default_rng(4)
    grid = np.stack(np.meshgrid(np.arange(6.0), np.arange(6.0), np.arange(3.0)), axis=-1).reshape(-1, 3)
    clumps = np.repeat(rng.normal(size=(40, 2)), 5, axis=0)  # every point five times: exact ties everywhere
    return {"gaussian": rng.normal(size=(3000, 3)), "grid (ties)": grid, "duplicates": clumps,
            "integers": rng.integers(0, 4, size=(400, 2)), "high-dim": rng.normal(size=(500, 7))}


@pytest.mark.parametrize("name", list(_clouds()))
def test_maxmin_identical_to_in_memory(client, name):
    points = _clouds()[name]
    n = min(60, len(np.unique(points, axis=0)))
    for seed in (0, 1):
        _assert_same(_in_memory(points, n, rng=seed), select_landmarks_distributed(points, n, rng=seed, client=client))


def test_periodic_and_other_metrics_identical(client):
    rng = np.random.default_rng(5)
    box_points = rng.uniform(0, 10, size=(2000, 3))
    box_points[:5] = 10.0  # on the far faces: the same point as 0 after wrapping
    _assert_same(_in_memory(box_points, 80, rng=2, metric="periodic", box=10.0),
                 select_landmarks_distributed(box_points, 80, rng=2, metric="periodic", box=10.0, client=client))
    sky = np.column_stack((rng.uniform(0, 360, 1500), rng.uniform(-90, 90, 1500)))
    _assert_same(_in_memory(sky, 50, start=3, metric="angular"),
                 select_landmarks_distributed(sky, 50, start=3, metric="angular", client=client))
    for name in ("manhattan", "chebyshev"):
        _assert_same(_in_memory(box_points, 40, rng=1, metric=name),
                     select_landmarks_distributed(box_points, 40, rng=1, metric=name, client=client))


@settings(max_examples=15)
@given(seed=st.integers(0, 2**31), n_points=st.integers(2, 300), chunk=st.integers(1, 300),
       ties=st.booleans())
def test_same_landmarks_for_any_partitioning(client, seed, n_points, chunk, ties):
    rng = np.random.default_rng(seed)
    points = rng.integers(0, 3, size=(n_points, 2)).astype(float) if ties else rng.normal(size=(n_points, 2))
    n = int(min(8, len(np.unique(points, axis=0))))
    expected = _in_memory(points, n, rng=seed)
    _assert_same(expected, select_landmarks_distributed(points, n, rng=seed, client=client, chunk_rows=chunk))


def test_random_landmarks_and_their_coverage_identical(client):
    points = np.random.default_rng(6).normal(size=(2500, 3))
    for seed in (0, 9):
        _assert_same(_in_memory(points, 70, rng=seed, method="random"),
                     select_landmarks_distributed(points, 70, rng=seed, method="random", client=client,
                                                  chunk_rows=600))


def test_cloud_source_uses_its_metric_and_records_the_cluster(client):
    cloud = tdakit.load_cloud(np.random.default_rng(7).uniform(0, 5, size=(800, 2)), metric="periodic", box=5.0)
    got = select_landmarks_distributed(cloud, 30, rng=4, client=client, chunk_rows=150)
    _assert_same(tdakit.select_landmarks(cloud, 30, rng=4), got)
    assert got.params["cluster"]["workers"] == 2 and got.params["cluster"]["partitions"] >= 6
    assert 1 <= got.params["cluster"]["rounds"] <= 30
    with pytest.raises(InvalidParameterError, match="metric"):
        select_landmarks_distributed(cloud, 3, metric="euclidean", client=client)


def test_per_point_files(client, tmp_path):
    points = np.random.default_rng(8).normal(size=(1000, 3))
    got = select_landmarks_distributed(points, 25, rng=1, client=client, per_point=tmp_path / "out")
    assert isinstance(got.nearest, np.memmap) and not got.nearest.flags.writeable
    _assert_same(_in_memory(points, 25, rng=1), got)


def test_default_client_and_progress(client):
    points = np.random.default_rng(9).normal(size=(300, 2))
    seen = []
    with client.as_current():
        got = select_landmarks_distributed(points, 10, rng=0, progress=lambda *a: seen.append(a))
    done = [step[1] for step in seen]
    assert seen[-1] == ("landmarks", 10, 10) and done == sorted(set(done))
    assert got.params["cluster"]["rounds"] == len(seen)
    _assert_same(_in_memory(points, 10, rng=0), got)


def test_too_many_landmarks_for_the_distinct_points(client):
    points = np.repeat(np.arange(4.0).reshape(-1, 1), 3, axis=0)
    with pytest.raises(InvalidParameterError, match="at most the number of distinct points, 4"):
        select_landmarks_distributed(points, 5, rng=0, client=client)


def test_bad_inputs_are_refused_with_the_parameter_named(client, tmp_path):
    good = np.random.default_rng(0).normal(size=(50, 2))
    cases = [
        (dict(source=[[0.0, 1.0]] * 5, n_landmarks=2), InvalidParameterError, "source"),
        (dict(source=good[:, 0], n_landmarks=2), InvalidDataError, "source"),
        (dict(source=good.astype(complex), n_landmarks=2), InvalidDataError, "source"),
        (dict(source=tmp_path / "missing.npy", n_landmarks=2), DataFileNotFoundError, "source"),
        (dict(source=good, n_landmarks=0), InvalidParameterError, "n_landmarks"),
        (dict(source=good, n_landmarks=51), InvalidParameterError, "n_landmarks"),
        (dict(source=good, n_landmarks=True), InvalidParameterError, "n_landmarks"),
        (dict(source=good, n_landmarks=3, method="density"), InvalidParameterError, "method"),
        (dict(source=good, n_landmarks=3, method="farthest"), InvalidParameterError, "method"),
        (dict(source=good, n_landmarks=3, metric="precomputed"), InvalidParameterError, "metric"),
        (dict(source=good, n_landmarks=3, metric="periodic"), InvalidParameterError, "box"),
        (dict(source=good, n_landmarks=3, metric="periodic", box=(1.0, 2.0, 3.0)), InvalidDataError, "box"),
        (dict(source=good, n_landmarks=3, rng=-1), InvalidParameterError, "rng"),
        (dict(source=good, n_landmarks=3, start=50), InvalidParameterError, "start"),
        (dict(source=good, n_landmarks=3, chunk_rows=0), InvalidParameterError, "chunk_rows"),
        (dict(source=good, n_landmarks=3, per_point=5), InvalidParameterError, "per_point"),
        (dict(source=good, n_landmarks=3, client="tcp://nowhere"), InvalidParameterError, "client"),
        (dict(source=good, n_landmarks=3, progress=3), InvalidParameterError, "progress"),
    ]
    for kwargs, error, parameter in cases:
        with pytest.raises(error) as caught:
            select_landmarks_distributed(**{"client": client, **kwargs})
        assert caught.value.parameter == parameter, kwargs


def test_bad_rows_are_named_by_their_global_row(client):
    points = np.random.default_rng(1).uniform(0, 1, size=(400, 2))
    points[333, 1] = np.nan
    with pytest.raises(InvalidDataError, match="NaN at row 333"):
        select_landmarks_distributed(points, 3, client=client, chunk_rows=100)
    points[333, 1] = 1.5
    with pytest.raises(InvalidDataError, match="outside the periodic box at row 333"):
        select_landmarks_distributed(points, 3, client=client, metric="periodic", box=1.0, chunk_rows=100)
    spread = np.array([[0.0, 0.0], [1.0, 1.0], [1e151, 0.0], [2.0, 2.0]])  # the huge span is across partitions
    with pytest.raises(InvalidDataError, match="overflow"):
        select_landmarks_distributed(spread, 2, client=client, chunk_rows=1)
    matrix = tdakit.load_cloud(np.array([[0.0, 1.0], [1.0, 0.0]]), metric="precomputed")
    with pytest.raises(InvalidParameterError) as caught:
        select_landmarks_distributed(matrix, 1, client=client)
    assert caught.value.parameter == "metric"


def test_gathering_a_huge_result_is_refused_before_it_starts(client, monkeypatch):
    from tdakit.distributed import landmarks

    monkeypatch.setattr(landmarks, "GATHER_LIMIT_BYTES", 100)
    with pytest.raises(MemoryBudgetError, match="per_point"):
        select_landmarks_distributed(np.zeros((10, 2)) + np.arange(10)[:, None], 2, client=client)


@pytest.mark.slow
def test_memmap_file_and_dask_array_on_worker_processes(process_client, tmp_path):
    import dask.array as da

    points = np.random.default_rng(11).normal(size=(20_000, 3))
    path = tmp_path / "cloud.npy"
    np.save(path, points)
    expected = _in_memory(points, 100, rng=5)
    _assert_same(expected, select_landmarks_distributed(path, 100, rng=5, client=process_client))
    _assert_same(expected, select_landmarks_distributed(np.load(path, mmap_mode="r"), 100, rng=5,
                                                        client=process_client, chunk_rows=3000))
    lazy = da.from_array(points, chunks=(2_500, 3))
    _assert_same(expected, select_landmarks_distributed(lazy, 100, rng=5, client=process_client))
    _assert_same(_in_memory(points, 100, rng=5, method="random"),
                 select_landmarks_distributed(path, 100, rng=5, method="random", client=process_client,
                                              per_point=tmp_path / "marks"))
