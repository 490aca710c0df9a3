"""Landmarks on a Dask cluster: the in-memory routine's landmarks, coverage and per-point results, exactly."""

import warnings

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

import tdakit
from tdakit.distributed import select_landmarks_distributed
from tdakit.errors import (
    DataFileNotFoundError,
    InvalidDataError,
    InvalidParameterError,
    MemoryBudgetError,
    OutputWriteError,
)

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
       ties=st.booleans(), keep_rows=st.sampled_from(["memory", "disk"]))
def test_same_landmarks_for_any_partitioning(client, seed, n_points, chunk, ties, keep_rows):
    rng = np.random.default_rng(seed)
    points = rng.integers(0, 3, size=(n_points, 2)).astype(float) if ties else rng.normal(size=(n_points, 2))
    n = int(min(8, len(np.unique(points, axis=0))))
    expected = _in_memory(points, n, rng=seed)
    _assert_same(expected, select_landmarks_distributed(points, n, rng=seed, client=client, chunk_rows=chunk,
                                                        keep_rows=keep_rows))


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
        (dict(source=good, n_landmarks=3, method="density", density_power=11.0), InvalidParameterError,
         "density_power"),
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
        (dict(source=good, n_landmarks=3, keep_rows="ssd"), InvalidParameterError, "keep_rows"),
        (dict(source=good, n_landmarks=3, keep_rows=None), InvalidParameterError, "keep_rows"),
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
    on_disk = select_landmarks_distributed(path, 100, rng=5, client=process_client, keep_rows="disk")
    _assert_same(expected, on_disk)
    assert on_disk.params["cluster"]["keep_rows"] == "disk" and _scratch_left(process_client) == []
    _assert_same(expected, select_landmarks_distributed(np.load(path, mmap_mode="r"), 100, rng=5,
                                                        client=process_client, chunk_rows=3000))
    lazy = da.from_array(points, chunks=(2_500, 3))
    _assert_same(expected, select_landmarks_distributed(lazy, 100, rng=5, client=process_client))
    _assert_same(expected, select_landmarks_distributed(lazy, 100, rng=5, client=process_client, keep_rows="disk"))
    _assert_same(_in_memory(points, 100, rng=5, method="random"),
                 select_landmarks_distributed(path, 100, rng=5, method="random", client=process_client,
                                              per_point=tmp_path / "marks"))


# -- rows kept in scratch files (keep_rows="disk") ------------------------------------------------------------------

def _scratch_left(client) -> list[str]:
    """Scratch files still in any worker's local directory, or still mapped by a worker process.

    Mapped scratch files are unlinked at once, so /proc/self/maps (Linux) is where a leaked one would show.
    """

    def left_here(dask_worker) -> list[str]:
        from pathlib import Path

        from tdakit.distributed._worker import SCRATCH_PREFIX

        left = [str(f) for f in Path(dask_worker.local_directory).rglob(SCRATCH_PREFIX + "*")]
        maps = Path("/proc/self/maps")
        return left + ([line for line in maps.read_text().splitlines() if SCRATCH_PREFIX in line]
                       if maps.exists() else [])

    return [line for lines in client.run(left_here).values() for line in lines]


@pytest.mark.parametrize("metric", ["euclidean", "periodic", "angular", "manhattan", "chebyshev", "cosine"])
def test_rows_in_memory_or_on_disk_give_identical_results(client, metric):
    rng = np.random.default_rng(12)
    if metric == "angular":
        points = np.column_stack((rng.uniform(-180, 540, 1200), rng.uniform(-90, 90, 1200)))
    else:
        points = rng.uniform(0.1, 10, size=(1200, 3))
    points[100:110] = points[5]  # exact ties
    box = 10.0 if metric == "periodic" else None
    expected = _in_memory(points, 45, rng=3, metric=metric, box=box)
    for chunk, keep_rows in ((None, "disk"), (97, "disk"), (97, "memory")):
        got = select_landmarks_distributed(points, 45, rng=3, metric=metric, box=box, client=client,
                                           chunk_rows=chunk, keep_rows=keep_rows)
        _assert_same(expected, got)
        assert got.params["cluster"]["keep_rows"] == keep_rows
    assert _scratch_left(client) == []


def test_rows_on_disk_for_random_landmarks_and_per_point_files(client, tmp_path):
    points = np.random.default_rng(13).normal(size=(2000, 3))
    for method in ("maxmin", "random"):
        expected = _in_memory(points, 30, rng=2, method=method)
        for per_point in (None, tmp_path / method):
            _assert_same(expected, select_landmarks_distributed(points, 30, rng=2, method=method, client=client,
                                                                per_point=per_point, keep_rows="disk",
                                                                chunk_rows=700))
    assert _scratch_left(client) == []


def test_scratch_files_are_gone_after_an_error_in_the_data(client):
    points = np.random.default_rng(14).uniform(0, 1, size=(600, 2))
    points[450, 0] = np.inf
    with pytest.raises(InvalidDataError, match="infinity at row 450"):
        select_landmarks_distributed(points, 3, client=client, chunk_rows=200, keep_rows="disk")
    assert _scratch_left(client) == []
    with pytest.raises(InvalidParameterError, match="distinct points"):  # fails in the selection, after loading
        select_landmarks_distributed(np.repeat(points[:3], 4, axis=0), 4, rng=0, client=client, keep_rows="disk")
    assert _scratch_left(client) == []


def test_unwritable_scratch_folder_is_a_clear_error(client, tmp_path, monkeypatch):
    from tdakit.distributed import _worker

    blocker = tmp_path / "a-file"
    blocker.write_text("not a folder")
    monkeypatch.setattr(_worker, "scratch_folder", lambda: str(blocker / "scratch"))  # the workers run here
    points = np.random.default_rng(15).normal(size=(300, 2))
    with pytest.raises(OutputWriteError, match="keep_rows='memory'") as caught:
        select_landmarks_distributed(points, 5, rng=0, client=client, keep_rows="disk")
    assert caught.value.parameter == "keep_rows" and str(blocker) in str(caught.value)
    _assert_same(_in_memory(points, 5, rng=0), select_landmarks_distributed(points, 5, rng=0, client=client,
                                                                           keep_rows="memory"))


@pytest.mark.parametrize("fits", [2, 5])  # two workers: coordinates (2), boxes' order (2), per-point results (4)
def test_a_full_disk_after_loading_is_a_clear_error(client, monkeypatch, fits):
    from tdakit.distributed import _worker

    made = []
    real = _worker.Scratch._array

    def fills_up(self, shape, dtype):  # the first ``fits`` scratch arrays fit, the next one does not
        made.append(shape)
        if len(made) > fits:
            raise OSError(28, "No space left on device")
        return real(self, shape, dtype)

    monkeypatch.setattr(_worker.Scratch, "_array", fills_up)
    points = np.random.default_rng(19).normal(size=(400, 2))
    with pytest.raises(OutputWriteError, match="No space left") as caught:
        select_landmarks_distributed(points, 5, rng=0, client=client, keep_rows="disk")
    assert caught.value.parameter == "keep_rows" and len(made) > fits
    assert _scratch_left(client) == []


def test_auto_keeps_rows_on_disk_above_half_the_memory_limit(client, monkeypatch):
    from tdakit.distributed import _worker

    points = np.random.default_rng(16).normal(size=(1000, 3))  # 500 rows a worker: 20 kB of rows and state
    expected = _in_memory(points, 20, rng=1)
    for limit, where in ((30_000, "disk"), (50_000, "memory")):
        monkeypatch.setattr(_worker, "memory_limit", lambda limit=limit: float(limit))
        got = select_landmarks_distributed(points, 20, rng=1, client=client, keep_rows="auto")
        assert got.params["cluster"]["keep_rows"] == where
        _assert_same(expected, got)
    monkeypatch.setattr(_worker, "memory_limit", lambda: 30_000.0)
    monkeypatch.setattr(_worker, "file_system", lambda folder: "tmpfs")  # mapping a tmpfs file saves nothing
    got = select_landmarks_distributed(points, 20, rng=1, client=client, keep_rows="auto")
    assert got.params["cluster"]["keep_rows"] == "memory"
    _assert_same(expected, got)


def test_file_system_of_a_folder():
    from pathlib import Path

    from tdakit.distributed._worker import file_system

    if not Path("/proc/mounts").exists():
        pytest.skip("needs /proc/mounts (Linux)")
    mounts = [line.split()[1:3] for line in Path("/proc/mounts").read_text().splitlines()]
    assert file_system("/") == [kind for point, kind in mounts if point == "/"][-1]
    for point, kind in mounts:
        if kind == "proc" and point == "/proc":  # the longest mount point holding the folder decides
            assert file_system("/proc/self") == "proc"


# -- the rows are checked by load_cloud's own checks ----------------------------------------------------------------

def _bad_sources():
    rng = np.random.default_rng(17)
    sky = np.column_stack((rng.uniform(0, 360, 500), rng.uniform(-90, 90, 500)))
    far_lon, bad_lat = sky.copy(), sky.copy()
    far_lon[321, 0] = 725.0
    bad_lat[321, 1] = -90.5
    flat = rng.normal(size=(500, 3))
    zero, infinite = flat.copy(), flat.copy()
    zero[321] = 0.0
    infinite[321, 2] = -np.inf
    tiny = np.vstack((rng.uniform(0, 1, size=(498, 2)), [[0.25, 0.5], [0.25, 0.5 + 1e-14]]))
    masked = np.ma.masked_array(flat, mask=np.zeros_like(flat, dtype=bool))
    masked.mask[321, 1] = True
    return [
        (far_lon, dict(metric="angular"), InvalidDataError, "longitude 725.0 at row 321"),
        (bad_lat, dict(metric="angular"), InvalidDataError, "latitude -90.5 at row 321"),
        (flat, dict(metric="angular"), InvalidDataError, "exactly 2 columns"),
        (zero, dict(metric="cosine"), InvalidDataError, "all-zero row at row 321"),
        (infinite, dict(), InvalidDataError, "infinity at row 321"),
        (tiny, dict(metric="minkowski", p=40.0), InvalidParameterError, "largest order"),
        (masked, dict(), InvalidDataError, "masked"),
        (np.array([[0.0, 0.0], [1e-151, 0.0], [0.0, 0.0]]), dict(), InvalidDataError, "underflow"),
    ]


@pytest.mark.parametrize("case", range(len(_bad_sources())))
def test_the_cluster_refuses_what_load_cloud_refuses(client, case):
    points, kwargs, error, message = _bad_sources()[case]
    with pytest.raises(error, match=message):
        tdakit.load_cloud(points, **kwargs)
    for chunk in (None, 100):
        with pytest.raises(error, match=message) as caught:
            select_landmarks_distributed(points, 2, rng=0, client=client, chunk_rows=chunk, keep_rows="disk",
                                         **kwargs)
        assert caught.value.parameter in ("source", "p")
    assert _scratch_left(client) == []


def test_rows_on_disk_for_the_density_methods(client):
    points = np.random.default_rng(18).normal(size=(900, 3))
    for method in ("density", "core_maxmin"):
        got = select_landmarks_distributed(points, 20, method=method, rng=4, client=client, keep_rows="disk",
                                           chunk_rows=300)
        _assert_same(_in_memory(points, 20, method=method, rng=4), got)
        assert got.params["cluster"]["keep_rows"] == "disk"
    assert _scratch_left(client) == []
