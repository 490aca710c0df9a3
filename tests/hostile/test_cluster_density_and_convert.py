"""Hostile input to ``knn_radius_distributed``, the density methods and new keywords of
``select_landmarks_distributed``, and ``catalogue_to_npy``: refused by tdakit's own error class with a message naming
the parameter, or answered exactly as the in-memory routine answers (``tdakit.knn_radius``, ``tdakit.select_landmarks``,
``tdakit.load_cloud``).

Two single-threaded workers in this process (module scope) serve the cluster cases, so that cells and partitions
really are spread over workers. The catalogues are invented (``tdakit.shapes`` and numpy random numbers) and written
with astropy, h5py and pyarrow. Case ids start with the entry point's name, for ``benchmarks/reliability.py``.
"""

import os
import sys

import numpy as np
import pytest

import tdakit
from tdakit import shapes
from tdakit.core.geometry.cloud import Cloud
from tdakit.core.geometry.metrics import make_metric
from tdakit.errors import DataFileNotFoundError, InvalidDataError, InvalidParameterError, OutputWriteError
from tests.helpers import in_process_client

distributed = pytest.importorskip("distributed")
da = pytest.importorskip("dask.array")

from tdakit.distributed import knn_radius_distributed, select_landmarks_distributed  # noqa: E402 - after the skip
from tdakit.io import catalogue_to_npy  # noqa: E402

pytestmark = [pytest.mark.filterwarnings("ignore::tdakit.errors.DuplicatePointsWarning"),
              pytest.mark.filterwarnings("ignore::tdakit.errors.SuspiciousDataWarning")]

P, D, F, W = InvalidParameterError, InvalidDataError, DataFileNotFoundError, OutputWriteError
KNN, SEL, CONV = "knn_radius_distributed", "select_landmarks_distributed", "catalogue_to_npy"
POINTS = shapes.circle(80, noise=0.05, rng=9)
REPEATED = np.repeat(POINTS[:10], 6, axis=0)  # every point 6 times
MIXED = np.vstack([REPEATED, POINTS[40:45]])  # repeats and single points
TWO_HEAPS = np.vstack([np.zeros((40, 2)), np.ones((40, 2)), [[5.0, 5.0]]])
SKY_GRID = np.column_stack([np.linspace(0.0, 350.0, 80), np.linspace(-80.0, 80.0, 80)])
POLES = np.array([[0.0, 90.0], [180.0, 90.0], [90.0, 90.0], [10.0, -90.0], [200.0, -90.0], [0.0, 0.0],
                  [359.9999999, 0.0], [1e-7, 0.0]] * 3)  # copies of the poles and across longitude 0
RAYS = np.array([[1.0, 0.0], [2.0, 0.0], [3.0, 0.0], [0.0, 1.0], [0.0, 5.0], [-1.0, 0.0]] * 3)  # cosine copies
EDGES = np.repeat(np.array([[0.01, 0.5], [0.99, 0.5], [0.5, 0.5]]), 5, axis=0)  # copies on both sides of x = 0


@pytest.fixture(scope="module")
def client():
    """Two worker threads in this process; not the default client, so nothing relies on one being set."""
    with in_process_client(2, default=False) as connected:
        yield connected


@pytest.fixture(scope="module")
def folder(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hostile_cluster_density")
    np.save(folder / "points.npy", POINTS)
    np.save(folder / "fortran.npy", np.asfortranarray(POINTS))
    POINTS.tofile(folder / "raw.bin")
    np.save(folder / "big_endian.npy", POINTS.astype(">f8"))
    np.save(folder / "structured.npy", np.zeros((5, 2), dtype=[("a", "f8")]))
    np.save(folder / "scalar.npy", np.float64(3.0))
    (folder / "a_file").write_text("not a folder\n")
    return folder


def _mapped(name):
    return lambda folder: np.load(folder / name, mmap_mode="r")


def _raw(folder):
    """The raw file's values from the second number on, 79 rows: a memmap with a byte offset."""
    return np.memmap(folder / "raw.bin", dtype=np.float64, mode="r", offset=8, shape=(79, 2))


RAW_ROWS = POINTS.ravel()[1:159].reshape(79, 2)
HUGE_INTS = np.array([[2**62, 0], [2**62 + 1, 0], [0, 5], [7, 7]] * 3, dtype=np.int64)


def _knn(k=5, source=POINTS, **options):
    return lambda client, folder: knn_radius_distributed(source, k, client=client, **options)


# --------------------------------------------------------------------------------------------------------------------
# knn_radius_distributed: refused
KNN_REFUSED = [
    (f"{KNN}: k 0", _knn(0), P, "'k'"),
    (f"{KNN}: k negative", _knn(-3), P, "'k'"),
    (f"{KNN}: k bool", _knn(True), P, "'k'"),
    (f"{KNN}: k float", _knn(2.0), P, "'k'"),
    (f"{KNN}: k NaN", _knn(np.nan), P, "'k'"),
    (f"{KNN}: k string", _knn("3"), P, "'k'"),
    (f"{KNN}: k None", _knn(None), P, "'k'"),
    (f"{KNN}: k equal to the points", _knn(80), P, "'k'"),
    (f"{KNN}: k 10**30", _knn(10**30), P, "'k'"),
    (f"{KNN}: k 1 on one point", _knn(1, POINTS[:1]), D, "source"),
    (f"{KNN}: n_cells 0", _knn(n_cells=0), P, "n_cells"),
    (f"{KNN}: n_cells negative", _knn(n_cells=-2), P, "n_cells"),
    (f"{KNN}: n_cells bool", _knn(n_cells=True), P, "n_cells"),
    (f"{KNN}: n_cells float", _knn(n_cells=2.5), P, "n_cells"),
    (f"{KNN}: n_cells NaN", _knn(n_cells=np.nan), P, "n_cells"),
    (f"{KNN}: n_cells string", _knn(n_cells="4"), P, "n_cells"),
    (f"{KNN}: chunk_rows 0", _knn(chunk_rows=0), P, "chunk_rows"),
    (f"{KNN}: chunk_rows negative", _knn(chunk_rows=-1), P, "chunk_rows"),
    (f"{KNN}: chunk_rows bool", _knn(chunk_rows=True), P, "chunk_rows"),
    (f"{KNN}: chunk_rows NaN", _knn(chunk_rows=np.nan), P, "chunk_rows"),
    (f"{KNN}: chunk_rows string", _knn(chunk_rows="5"), P, "chunk_rows"),
    (f"{KNN}: metric precomputed", _knn(metric="precomputed"), P, "metric"),
    (f"{KNN}: metric a number", _knn(metric=2), P, "metric"),
    (f"{KNN}: Minkowski p NaN", _knn(metric="minkowski", p=np.nan), P, "'p'"),
    (f"{KNN}: Minkowski p below 1", _knn(metric="minkowski", p=0.5), P, "'p'"),
    (f"{KNN}: p without minkowski", _knn(p=3), P, "'p'"),
    (f"{KNN}: periodic box NaN", _knn(metric="periodic", box=np.nan), P, "box"),
    (f"{KNN}: periodic box 0", _knn(metric="periodic", box=0.0), P, "box"),
    (f"{KNN}: periodic box with a NaN side", _knn(metric="periodic", box=[1.0, np.nan]), P, "box"),
    (f"{KNN}: periodic box of 3 sides on 2 columns", _knn(source=POINTS % 1.0, metric="periodic", box=[1, 2, 3]),
     D, "box"),
    (f"{KNN}: periodic without a box", _knn(source=POINTS % 1.0, metric="periodic"), P, "box"),
    (f"{KNN}: box without periodic", _knn(box=1.0), P, "box"),
    (f"{KNN}: periodic points outside the box", _knn(source=POINTS * 3.0, metric="periodic", box=1.0), D,
     "outside the periodic box"),
    (f"{KNN}: angular latitude 95", _knn(source=np.vstack([SKY_GRID, [[10.0, 95.0]]]), metric="angular"), D,
     "latitude"),
    (f"{KNN}: angular on 3 columns", _knn(3, np.ones((5, 3)) * np.arange(5)[:, None], metric="angular"), D,
     "angular"),
    (f"{KNN}: cosine with an all-zero row", _knn(source=np.vstack([POINTS, [[0.0, 0.0]]]), metric="cosine"), D,
     "all-zero row"),
    (f"{KNN}: metric with a Cloud", _knn(source=tdakit.load_cloud(POINTS), metric="euclidean"), P, "metric"),
    (f"{KNN}: precomputed Cloud", _knn(1, source=tdakit.load_cloud(np.array([[0.0, 1.0], [1.0, 0.0]]),
                                                                    metric="precomputed")), P, "metric"),
    (f"{KNN}: per_point a number", _knn(per_point=3), P, "per_point"),
    (f"{KNN}: per_point bytes", _knn(per_point=b"/tmp/radii"), P, "per_point"),
    (f"{KNN}: per_point empty (the current folder)", _knn(per_point=""), P, "per_point"),
    (f"{KNN}: per_point an existing file", lambda client, folder: knn_radius_distributed(
        POINTS, 5, client=client, per_point=folder / "a_file"), P, "per_point"),
    (f"{KNN}: client an address string", lambda client, folder: knn_radius_distributed(POINTS, 5, client="tcp://x"),
     P, "client"),
    (f"{KNN}: client an object", lambda client, folder: knn_radius_distributed(POINTS, 5, client=object()), P,
     "client"),
    (f"{KNN}: empty cloud", _knn(1, np.zeros((0, 2))), D, "source"),
    (f"{KNN}: no columns", _knn(1, np.zeros((5, 0))), D, "source"),
    (f"{KNN}: booleans", _knn(3, np.ones((10, 2), dtype=bool)), D, "source"),
    (f"{KNN}: a nested list", _knn(source=POINTS.tolist()), P, "source"),
    (f"{KNN}: masked entry", _knn(source=np.ma.masked_array(POINTS, mask=np.arange(160).reshape(80, 2) == 7)), D,
     "masked"),
    (f"{KNN}: NaN coordinate", _knn(source=np.vstack([POINTS, [[np.nan, 0.0]]])), D, "NaN at row 80"),
    (f"{KNN}: infinite coordinate", _knn(source=np.vstack([POINTS, [[np.inf, 0.0]]])), D, "infinity"),
    (f"{KNN}: coordinates near 1e200", _knn(source=POINTS * 1e200), D, "overflow"),
    (f"{KNN}: coordinates near 1e-300", _knn(source=POINTS * 1e-300), D, "underflow"),
    (f"{KNN}: dask array of unknown length", lambda client, folder: knn_radius_distributed(
        da.from_array(POINTS, chunks=(13, 2))[da.from_array(POINTS[:, 0], chunks=13) > 0], 5, client=client), D,
     "compute_chunk_sizes"),
    (f"{KNN}: dask array of strings", _knn(2, da.from_array(np.array([["a", "b"]] * 5))), D, "source"),
    (f"{KNN}: dask array 3-D", _knn(1, da.zeros((4, 2, 2))), D, "2-D"),
    (f"{KNN}: a bytes path", _knn(source=b"points.npy"), P, "source"),
    (f"{KNN}: .npy of a structured dtype", lambda client, folder: knn_radius_distributed(
        folder / "structured.npy", 1, client=client), D, "source"),
    (f"{KNN}: .npy of one number", lambda client, folder: knn_radius_distributed(folder / "scalar.npy", 1,
                                                                               client=client), D, "2-D"),
    (f"{KNN}: dask array of complex numbers", _knn(source=da.from_array(POINTS + 1j, chunks=(20, 2))), D, "source"),
    (f"{KNN}: dask array with NaN", _knn(3, da.from_array(np.vstack([POINTS, [[np.nan, 1.0]]]), chunks=(20, 2))), D,
     "NaN at row 80"),
]


@pytest.mark.parametrize("call, error, needle", [c[1:] for c in KNN_REFUSED], ids=[c[0] for c in KNN_REFUSED])
def test_knn_radius_distributed_refuses_hostile_input(client, folder, call, error, needle):
    with pytest.raises(error) as caught:
        call(client, folder)
    assert needle in str(caught.value), str(caught.value)


def _in_memory_radius(points, k, **metric):
    return tdakit.knn_radius(tdakit.load_cloud(np.asarray(points), **metric), k)


# (id, source(folder), k, options, the same cloud in memory, load_cloud's metric options)
KNN_AGREES = [
    ("k = n - 1", lambda f: POINTS, 79, {}, POINTS, {}),
    ("two points", lambda f: POINTS[:2], 1, {}, POINTS[:2], {}),
    ("n_cells far above the points", lambda f: POINTS, 5, {"n_cells": 1000}, POINTS, {}),
    ("n_cells 10**30", lambda f: POINTS, 5, {"n_cells": 10**30}, POINTS, {}),
    ("chunk_rows 1", lambda f: POINTS, 5, {"chunk_rows": 1}, POINTS, {}),
    ("chunk_rows 10**30", lambda f: POINTS, 5, {"chunk_rows": 10**30}, POINTS, {}),
    ("all points equal", lambda f: np.zeros((30, 2)), 5, {"n_cells": 8}, np.zeros((30, 2)), {}),
    ("every point 6 times, k 5", lambda f: REPEATED, 5, {"n_cells": 8}, REPEATED, {}),
    ("every point 6 times, k 6", lambda f: REPEATED, 6, {"n_cells": 8}, REPEATED, {}),
    ("every point 6 times, k 7", lambda f: REPEATED, 7, {"n_cells": 8}, REPEATED, {}),
    ("-0.0 and 0.0 copies", lambda f: np.vstack([[[0.0, 0.0]] * 3, [[-0.0, 0.0]] * 3, POINTS]), 5, {"n_cells": 8},
     np.vstack([[[0.0, 0.0]] * 6, POINTS]), {}),
    ("int64 array", lambda f: (POINTS * 100).astype(np.int64), 5, {}, (POINTS * 100).astype(np.int64), {}),
    ("float32 array", lambda f: POINTS.astype(np.float32), 5, {}, POINTS.astype(np.float32), {}),
    ("masked array without masked entries", lambda f: np.ma.masked_array(POINTS), 5, {}, POINTS, {}),
    ("Fortran-ordered array", lambda f: np.asfortranarray(POINTS), 5, {}, POINTS, {}),
    ("20 columns (no kd-tree)", lambda f: np.random.default_rng(0).normal(size=(60, 20)), 5, {"n_cells": 8},
     np.random.default_rng(0).normal(size=(60, 20)), {}),
    ("memmap", _mapped("points.npy"), 5, {"chunk_rows": 7, "n_cells": 5}, POINTS, {}),
    ("memmap of a row slice", lambda f: np.load(f / "points.npy", mmap_mode="r")[10:50], 5, {}, POINTS[10:50], {}),
    ("memmap of every other row", lambda f: np.load(f / "points.npy", mmap_mode="r")[::2], 5, {}, POINTS[::2], {}),
    ("memmap of one column", lambda f: np.load(f / "points.npy", mmap_mode="r")[:, :1], 5, {}, POINTS[:, :1], {}),
    ("memmap reversed", lambda f: np.load(f / "points.npy", mmap_mode="r")[::-1], 5, {}, POINTS[::-1], {}),
    ("Fortran memmap of a row slice", lambda f: np.load(f / "fortran.npy", mmap_mode="r")[5:50], 5, {},
     POINTS[5:50], {}),
    ("Fortran memmap of one column", lambda f: np.load(f / "fortran.npy", mmap_mode="r")[:, 1:], 5, {},
     POINTS[:, 1:], {}),
    ("memmap with a byte offset", _raw, 5, {}, RAW_ROWS, {}),
    ("slice of a memmap with a byte offset", lambda f: _raw(f)[7:70], 5, {}, RAW_ROWS[7:70], {}),
    ("int64 near 2**62", lambda f: HUGE_INTS, 2, {}, HUGE_INTS, {}),
    ("uint64 near 2**62", lambda f: HUGE_INTS.astype(np.uint64), 2, {}, HUGE_INTS.astype(np.uint64), {}),
    ("float16 array", lambda f: POINTS.astype(np.float16), 5, {}, POINTS.astype(np.float16), {}),
    ("read-only array", lambda f: np.lib.stride_tricks.as_strided(POINTS, writeable=False), 5, {}, POINTS, {}),
    ("one row broadcast to 20", lambda f: np.broadcast_to(POINTS[:1], (20, 2)), 5, {}, np.repeat(POINTS[:1], 20, 0),
     {}),
    ("big-endian .npy path", lambda f: f / "big_endian.npy", 5, {"chunk_rows": 9}, POINTS, {}),
    ("dask array", lambda f: da.from_array(POINTS, chunks=(13, 2)), 5, {"n_cells": 6}, POINTS, {}),
    ("dask array chunked by column", lambda f: da.from_array(POINTS, chunks=(13, 1)), 5, {"chunk_rows": 7}, POINTS,
     {}),
    ("dask array, chunk_rows 10**30", lambda f: da.from_array(POINTS, chunks=(13, 2)), 5, {"chunk_rows": 10**30},
     POINTS, {}),
    ("dask array, chunk_rows 1", lambda f: da.from_array(POINTS, chunks=(13, 2)), 5, {"chunk_rows": 1}, POINTS, {}),
    ("numpy integers for k and n_cells", lambda f: POINTS, np.int64(5), {"n_cells": np.uint8(4)}, POINTS, {}),
    ("dask array of int32", lambda f: da.from_array((POINTS * 10).astype(np.int32), chunks=(20, 2)), 3, {},
     (POINTS * 10).astype(np.int32), {}),
    ("Cloud", lambda f: tdakit.load_cloud(POINTS), 5, {}, POINTS, {}),
    ("Metric object", lambda f: POINTS, 3, {"metric": make_metric("manhattan")}, POINTS, {"metric": "manhattan"}),
    ("periodic, points on the box's faces", lambda f: np.vstack([POINTS % 1.0, [[1.0, 1.0], [0.0, 0.0]]]), 3,
     {"metric": "periodic", "box": 1.0, "n_cells": 6}, np.vstack([POINTS % 1.0, [[1.0, 1.0], [0.0, 0.0]]]),
     {"metric": "periodic", "box": 1.0}),
    ("periodic, copies on both sides of a face", lambda f: EDGES, 6, {"metric": "periodic", "box": 1.0, "n_cells": 4},
     EDGES, {"metric": "periodic", "box": 1.0}),
    ("angular, copies of the poles", lambda f: POLES, 4, {"metric": "angular", "n_cells": 5}, POLES,
     {"metric": "angular"}),
    ("angular, longitude 720", lambda f: np.vstack([SKY_GRID, [[720.0, 0.0]]]), 5, {"metric": "angular"},
     np.vstack([SKY_GRID, [[720.0, 0.0]]]), {"metric": "angular"}),
    ("cosine, scaled copies", lambda f: RAYS, 4, {"metric": "cosine", "n_cells": 5}, RAYS, {"metric": "cosine"}),
    ("Minkowski p = inf", lambda f: POINTS, 5, {"metric": "minkowski", "p": np.inf, "n_cells": 8}, POINTS,
     {"metric": "minkowski", "p": np.inf}),
]


@pytest.mark.silent
@pytest.mark.parametrize("make, k, options, points, metric", [c[1:] for c in KNN_AGREES],
                         ids=[f"{KNN}: {c[0]}" for c in KNN_AGREES])
def test_knn_radius_distributed_gives_the_in_memory_radii(client, folder, make, k, options, points, metric):
    found = knn_radius_distributed(make(folder), k, client=client, **options)
    np.testing.assert_array_equal(found, _in_memory_radius(points, k, **metric))


@pytest.mark.silent
@pytest.mark.parametrize("after", ["deleted", "truncated", "replaced by other values of the same size"],
                         ids=lambda after: f"{KNN}: memmap whose file was {after}")
def test_a_memmap_whose_file_changed_is_measured_as_mapped(client, tmp_path, after):
    """The workers opened the memmap's file by its name: a crash when it was gone or shorter, and the radii of
    other points (silently) when another file of the same size had taken its name."""
    path = tmp_path / "points.npy"
    np.save(path, POINTS)
    mapped = np.load(path, mmap_mode="r")
    path.unlink()
    if after != "deleted":
        np.save(path, POINTS[:10] if after == "truncated" else POINTS * 2.0)
    found = knn_radius_distributed(mapped, 5, client=client)
    np.testing.assert_array_equal(found, _in_memory_radius(POINTS, 5))


@pytest.mark.entry(KNN)
def test_knn_radius_distributed_writes_per_point_radii_only_where_asked(client, tmp_path, monkeypatch):
    """An empty ``per_point`` was read as the current folder: a stray ``knn_radius.npy`` appeared there."""
    monkeypatch.chdir(tmp_path)
    with pytest.raises(InvalidParameterError):
        knn_radius_distributed(POINTS, 5, client=client, per_point="")
    with pytest.raises(InvalidParameterError):  # a refused client: no radii file either
        knn_radius_distributed(POINTS, 5, client=object(), per_point=tmp_path / "radii")
    assert list(tmp_path.iterdir()) == []
    found = knn_radius_distributed(POINTS, 5, client=client, per_point=tmp_path / "radii")
    assert isinstance(found, np.memmap) and not found.flags.writeable
    np.testing.assert_array_equal(found, _in_memory_radius(POINTS, 5))


@pytest.mark.hang
@pytest.mark.entry(KNN)
@pytest.mark.parametrize("n_cells", [81, 10**30])
def test_knn_radius_distributed_makes_no_more_cells_than_help(client, monkeypatch, n_cells):
    """``n_cells`` above the points made one cell a point; each then reached every other (its k nearest lie outside),
    so the tasks grew with the square of the cells: seconds for 80 points, hours for a sample of 20,000 rows."""
    from tdakit.distributed import density
    from tdakit.distributed._cells import build_cells

    asked = []
    monkeypatch.setattr(density, "build_cells", lambda sample, cells: asked.append(cells) or build_cells(sample, cells))
    found = knn_radius_distributed(POINTS, 5, client=client, n_cells=n_cells)
    np.testing.assert_array_equal(found, _in_memory_radius(POINTS, 5))
    assert asked == [max(density.FEW_CELLS, 80 // 6)]


@pytest.mark.silent
@pytest.mark.entry(KNN)
def test_a_second_run_into_the_same_folder_leaves_the_first_result_alone(client, tmp_path):
    """The radii file was truncated and rewritten in place: the first result (a map of it) changed silently, and
    read as zeros past the second, shorter cloud's end (beyond a page, the process would die of SIGBUS)."""
    first = knn_radius_distributed(POINTS, 5, client=client, per_point=tmp_path)
    second = knn_radius_distributed(POINTS[:10], 3, client=client, per_point=tmp_path)
    np.testing.assert_array_equal(first, _in_memory_radius(POINTS, 5))
    np.testing.assert_array_equal(second, _in_memory_radius(POINTS[:10], 3))


@pytest.mark.entry(KNN)
def test_a_folder_in_the_way_of_the_radii_file_is_refused_naming_per_point(client, tmp_path):
    (tmp_path / "knn_radius.npy").mkdir()
    with pytest.raises(OutputWriteError) as caught:
        knn_radius_distributed(POINTS, 5, client=client, per_point=tmp_path)
    assert caught.value.parameter == "per_point" and "knn_radius.npy" in str(caught.value)


# --------------------------------------------------------------------------------------------------------------------
# select_landmarks_distributed: the new keywords and methods
def _sel(n=3, source=POINTS, **options):
    return lambda client, folder: select_landmarks_distributed(source, n, client=client, **options)


SEL_REFUSED = [
    (f"{SEL}: density_power NaN", _sel(method="density", density_power=np.nan), P, "density_power"),
    (f"{SEL}: density_power inf", _sel(method="density", density_power=np.inf), P, "density_power"),
    (f"{SEL}: density_power string", _sel(method="density", density_power="1"), P, "density_power"),
    (f"{SEL}: density_power bool", _sel(method="density", density_power=True), P, "density_power"),
    (f"{SEL}: density_power None", _sel(method="density", density_power=None), P, "density_power"),
    (f"{SEL}: density_power complex", _sel(method="density", density_power=1j), P, "density_power"),
    (f"{SEL}: density_power -10.5", _sel(method="density", density_power=-10.5), P, "density_power"),
    (f"{SEL}: density_neighbors equal to the points", _sel(method="density", density_neighbors=80), P,
     "density_neighbors"),
    (f"{SEL}: density_neighbors negative", _sel(method="density", density_neighbors=-1), P, "density_neighbors"),
    (f"{SEL}: density_neighbors float", _sel(method="core_maxmin", density_neighbors=3.0), P, "density_neighbors"),
    (f"{SEL}: density_neighbors bool", _sel(method="core_maxmin", density_neighbors=True), P, "density_neighbors"),
    (f"{SEL}: density_neighbors 10**30", _sel(method="density", density_neighbors=10**30), P, "density_neighbors"),
    (f"{SEL}: density_neighbors NaN", _sel(method="density", density_neighbors=np.nan), P, "density_neighbors"),
    (f"{SEL}: keep_fraction NaN", _sel(method="core_maxmin", keep_fraction=np.nan), P, "keep_fraction"),
    (f"{SEL}: keep_fraction 1.5", _sel(method="core_maxmin", keep_fraction=1.5), P, "keep_fraction"),
    (f"{SEL}: keep_fraction negative", _sel(method="core_maxmin", keep_fraction=-0.1), P, "keep_fraction"),
    (f"{SEL}: keep_fraction inf", _sel(method="core_maxmin", keep_fraction=np.inf), P, "keep_fraction"),
    (f"{SEL}: keep_fraction string", _sel(method="core_maxmin", keep_fraction="0.5"), P, "keep_fraction"),
    (f"{SEL}: keep_fraction bool", _sel(method="core_maxmin", keep_fraction=True), P, "keep_fraction"),
    (f"{SEL}: keep_rows unknown", _sel(keep_rows="ram"), P, "keep_rows"),
    (f"{SEL}: keep_rows None", _sel(keep_rows=None), P, "keep_rows"),
    (f"{SEL}: keep_rows upper case", _sel(keep_rows="DISK"), P, "keep_rows"),
    (f"{SEL}: keep_rows bytes", _sel(keep_rows=b"disk"), P, "keep_rows"),
    (f"{SEL}: method bytes", _sel(method=b"density"), P, "method"),
    (f"{SEL}: density on periodic points outside the box", _sel(source=POINTS * 3.0, method="density",
                                                                metric="periodic", box=1.0), D, "periodic box"),
    (f"{SEL}: core_maxmin on a NaN", _sel(source=np.vstack([POINTS, [[np.nan, 0.0]]]), method="core_maxmin"), D,
     "NaN at row 80"),
    (f"{SEL}: density on a dask array of unknown length", lambda client, folder: select_landmarks_distributed(
        da.from_array(POINTS, chunks=(13, 2))[da.from_array(POINTS[:, 0], chunks=13) > 0], 3, client=client,
        method="density"), D, "compute_chunk_sizes"),
]


@pytest.mark.parametrize("call, error, needle", [c[1:] for c in SEL_REFUSED], ids=[c[0] for c in SEL_REFUSED])
def test_select_landmarks_distributed_refuses_hostile_density_options(client, folder, call, error, needle):
    with pytest.raises(error) as caught:
        call(client, folder)
    assert needle in str(caught.value), str(caught.value)


def _in_memory_marks(points, n, metric=None, **options):
    cloud = tdakit.load_cloud(np.asarray(points), **(metric or {}))
    return tdakit.select_landmarks(cloud, n, **options)


# (id, source(folder), n_landmarks, options shared with the in-memory call, cluster-only options, metric options)
SEL_CASES = [
    ("all points as landmarks", lambda f: POINTS, 80, {"rng": 3}, {}, None),
    ("all points, density_neighbors n - 1", lambda f: POINTS, 80, {"rng": 3, "density_neighbors": 79}, {}, None),
    ("all points equal, one landmark", lambda f: np.zeros((30, 2)), 1, {"rng": 3}, {}, None),
    ("all points equal, two landmarks", lambda f: np.zeros((30, 2)), 2, {"rng": 3}, {}, None),
    ("every point 6 times, 5 neighbours", lambda f: REPEATED, 4, {"rng": 3, "density_neighbors": 5}, {}, None),
    ("every point 6 times, 6 neighbours", lambda f: REPEATED, 4, {"rng": 3, "density_neighbors": 6}, {}, None),
    ("every point 6 times, 10 landmarks", lambda f: REPEATED, 10, {"rng": 3, "density_neighbors": 6}, {}, None),
    ("every point 6 times, 11 landmarks", lambda f: REPEATED, 11, {"rng": 3, "density_neighbors": 6}, {}, None),
    ("repeats and singles, chunk_rows 7", lambda f: MIXED, 6, {"rng": 3, "density_neighbors": 5},
     {"chunk_rows": 7}, None),
    ("two heaps of 40 copies", lambda f: TWO_HEAPS[:80], 2, {"rng": 3}, {}, None),
    ("ties at the threshold", lambda f: TWO_HEAPS, 3, {"rng": 3, "density_neighbors": 3}, {}, None),
    ("ties, keep_fraction 0.5", lambda f: TWO_HEAPS, 2, {"rng": 3, "density_neighbors": 3, "keep_fraction": 0.5},
     {}, None),
    ("two points", lambda f: POINTS[:2], 2, {"rng": 3}, {}, None),
    ("int array", lambda f: (POINTS * 10).astype(int), 4, {"rng": 3}, {}, None),
    ("float32 array", lambda f: POINTS.astype(np.float32), 4, {"rng": 3}, {}, None),
    ("memmap of a row slice", lambda f: np.load(f / "points.npy", mmap_mode="r")[5:60], 4, {"rng": 3}, {}, None),
    ("dask array", lambda f: da.from_array(POINTS, chunks=(9, 2)), 4, {"rng": 3}, {}, None),
    ("Cloud", lambda f: tdakit.load_cloud(POINTS), 4, {"rng": 3}, {}, None),
    ("start among the sparsest", lambda f: POINTS, 3, {"rng": 2, "start": 0, "keep_fraction": 0.05}, {}, None),
    ("density_power -10", lambda f: POINTS, 4, {"rng": 3, "density_power": -10.0}, {}, None),
    ("density_power 10", lambda f: POINTS, 4, {"rng": 3, "density_power": 10.0}, {}, None),
    ("coordinates near 1e-140, density_power 10", lambda f: POINTS * 1e-140, 5,
     {"rng": 4, "density_power": 10.0}, {"chunk_rows": 11}, None),
    ("coordinates near 1e140, density_power -10", lambda f: POINTS * 1e140, 5,
     {"rng": 4, "density_power": -10.0}, {"chunk_rows": 11}, None),
    ("30 columns, density_power 10", lambda f: np.random.default_rng(1).normal(size=(60, 30)), 5,
     {"rng": 4, "density_power": 10.0}, {}, None),
    ("20 copies (radius 0) beside single points, density_power -10", lambda f: np.vstack([np.zeros((20, 2)), POINTS]),
     5, {"rng": 4, "density_neighbors": 5, "density_power": -10.0}, {}, None),
    ("keep_fraction 1e-9, one landmark", lambda f: POINTS, 1, {"rng": 3, "keep_fraction": 1e-9}, {}, None),
    ("keep_fraction 1e-9, two landmarks", lambda f: POINTS, 2, {"rng": 3, "keep_fraction": 1e-9}, {}, None),
    ("angular", lambda f: SKY_GRID, 4, {"rng": 3}, {}, {"metric": "angular"}),
    ("angular, copies of the poles", lambda f: POLES, 3, {"rng": 2, "density_neighbors": 2},
     {}, {"metric": "angular"}),
    ("cosine, scaled copies", lambda f: RAYS, 2, {"rng": 2, "density_neighbors": 3}, {},
     {"metric": "cosine"}),
    ("periodic", lambda f: POINTS % 1.0, 4, {"rng": 3}, {},
     {"metric": "periodic", "box": 1.0}),
    ("Philox generator", lambda f: POINTS, 4, {"rng": "philox"}, {}, None),
    ("chunk_rows 1", lambda f: POINTS, 4, {"rng": 3}, {"chunk_rows": 1}, None),
    ("dask array, chunk_rows 10**30", lambda f: da.from_array(POINTS, chunks=(9, 2)), 4, {"rng": 3},
     {"chunk_rows": 10**30}, None),
    ("keep_rows memory", lambda f: POINTS, 5, {"rng": 3}, {"keep_rows": "memory"}, None),
    ("keep_rows disk", lambda f: POINTS, 5, {"rng": 3}, {"keep_rows": "disk"}, None),
]


def _outcome(call):
    """(landmarks, radius) of a call, or (error class, parameter) of its refusal by tdakit."""
    try:
        marks = call()
    except (InvalidParameterError, InvalidDataError) as exc:
        return type(exc), exc.parameter
    return marks.indices.tolist(), marks.coverage_radius


@pytest.mark.silent
@pytest.mark.parametrize("method", ["density", "core_maxmin"])
@pytest.mark.parametrize("make, n, shared, cluster_only, metric", [c[1:] for c in SEL_CASES],
                         ids=[f"{SEL}: {c[0]}" for c in SEL_CASES])
def test_density_methods_answer_or_refuse_as_in_memory(client, folder, method, make, n, shared, cluster_only,
                                                       metric):
    """The same landmarks and radius as ``tdakit.select_landmarks``, or the same refusal (class and parameter)."""
    def rng():
        return np.random.Generator(np.random.Philox(4)) if shared["rng"] == "philox" else shared["rng"]

    source = make(folder)
    options = {**shared, "method": method}
    found = _outcome(lambda: select_landmarks_distributed(source, n, client=client, **cluster_only,
                                                          **(metric or {}), **{**options, "rng": rng()}))
    in_memory = POINTS if isinstance(source, Cloud) else np.asarray(source)
    expected = _outcome(lambda: _in_memory_marks(in_memory, n, metric, **{**options, "rng": rng()}))
    assert found == expected


@pytest.mark.silent
@pytest.mark.entry(SEL)
@pytest.mark.parametrize("method", ["density", "core_maxmin"])
def test_density_methods_write_per_point_results_as_in_memory(client, tmp_path, monkeypatch, method):
    """Also: a second run into the same folder leaves the first result's maps alone, an empty folder name is not
    taken for the current folder, and a folder in the way of a file is refused naming ``per_point``."""
    marks = select_landmarks_distributed(POINTS, 3, client=client, method=method, rng=2, per_point=tmp_path)
    select_landmarks_distributed(POINTS[:10], 2, client=client, method=method, rng=2, per_point=tmp_path,
                                 density_neighbors=3)
    expected = _in_memory_marks(POINTS, 3, method=method, rng=2)
    np.testing.assert_array_equal(marks.distance_to_nearest, expected.distance_to_nearest)
    np.testing.assert_array_equal(marks.nearest, expected.nearest)
    (tmp_path / "here").mkdir()
    monkeypatch.chdir(tmp_path / "here")
    with pytest.raises(InvalidParameterError):
        select_landmarks_distributed(POINTS, 3, client=client, method=method, per_point="")
    assert list((tmp_path / "here").iterdir()) == []
    (tmp_path / "blocked").mkdir()
    (tmp_path / "blocked" / "nearest.npy").mkdir()
    with pytest.raises(OutputWriteError) as caught:
        select_landmarks_distributed(POINTS, 3, client=client, method=method, per_point=tmp_path / "blocked")
    assert caught.value.parameter == "per_point"


# --------------------------------------------------------------------------------------------------------------------
# catalogue_to_npy
fits = pytest.importorskip("astropy.io.fits")
h5py = pytest.importorskip("h5py")
pq = pytest.importorskip("pyarrow.parquet")
pa = pytest.importorskip("pyarrow")

N = 80


@pytest.fixture(scope="module")
def catalogues(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hostile_convert")
    rng = np.random.default_rng(31)
    ring = shapes.circle(N, noise=0.05, rng=4)
    x = ring[:, 0].copy()
    x[5] = np.nan  # one missing value
    columns = {"x": x, "y": ring[:, 1], "ra": rng.uniform(0, 360, N), "dec": rng.uniform(-80, 80, N),
               "z": rng.uniform(0.01, 0.2, N), "parallax": rng.uniform(1, 4, N)}
    units = {"ra": "deg", "dec": "deg", "parallax": "mas", "x": "Mpc", "y": "Mpc"}
    fits.BinTableHDU.from_columns([fits.Column(name=k, format="D", array=v, unit=units.get(k))
                                   for k, v in columns.items()], name="HALOS").writeto(folder / "halos.fits")
    pq.write_table(pa.table({"x": ring[:, 0], "y": ring[:, 1]}), folder / "halos.parquet")
    pq.write_table(pa.table({"x": ring[:, 0], "y": ring[:, 1]}), folder / "parquet_named.npy")
    with h5py.File(folder / "halos.h5", "w") as handle:
        handle["survey/x"] = ring[:, 0]
        handle["survey/y"] = ring[:, 1]
    (folder / "empty.fits").write_bytes(b"")
    (folder / "folder.fits").mkdir()
    (folder / "taken.npy").mkdir()
    (folder / "blocked.npy.json").mkdir()
    if hasattr(os, "mkfifo"):
        os.mkfifo(folder / "pipe.fits")
    return folder


class _NumberPath:
    """An ``os.PathLike`` whose ``__fspath__`` gives a number (os.fspath raises TypeError)."""

    def __fspath__(self):
        return 5


XY = {"columns": ["x", "y"], "drop_missing": True}
RDP = {"columns": ["ra", "dec", "parallax"]}
RDZ = {"columns": ["ra", "dec", "z"]}


def _conv(destination="out.npy", source="halos.fits", **options):
    """A conversion of a file of the ``catalogues`` folder (names are joined to it; other values passed as they are)."""
    def call(folder):
        where = folder / source if isinstance(source, str) else source
        target = folder / destination if isinstance(destination, str) and destination else destination
        return catalogue_to_npy(where, target, **({} if "columns" in options or "sky" in options else XY), **options)
    return call


CONV_REFUSED = [
    # chunk_rows
    (f"{CONV}: chunk_rows bool", _conv(chunk_rows=True), P, "chunk_rows"),
    (f"{CONV}: chunk_rows string", _conv(chunk_rows="5"), P, "chunk_rows"),
    (f"{CONV}: chunk_rows None", _conv(chunk_rows=None), P, "chunk_rows"),
    (f"{CONV}: chunk_rows NaN", _conv(chunk_rows=np.nan), P, "chunk_rows"),
    (f"{CONV}: chunk_rows float", _conv(chunk_rows=5.0), P, "chunk_rows"),
    (f"{CONV}: chunk_rows 0", _conv(chunk_rows=0), P, "chunk_rows"),
    (f"{CONV}: chunk_rows negative", _conv(chunk_rows=-1), P, "chunk_rows"),
    # destination
    (f"{CONV}: destination an int", _conv(5), P, "destination"),
    (f"{CONV}: destination None", _conv(None), P, "destination"),
    (f"{CONV}: destination a list", _conv(["out.npy"]), P, "destination"),
    (f"{CONV}: destination empty", _conv(""), P, "destination"),
    (f"{CONV}: destination without .npy", _conv("out"), P, "destination"),
    (f"{CONV}: destination '.npy' alone", _conv(".npy"), P, "destination"),
    (f"{CONV}: destination a folder", _conv("taken.npy"), P, "destination"),
    (f"{CONV}: destination in a missing folder", _conv("no_such_folder/out.npy"), F, "destination"),
    (f"{CONV}: destination with a NUL byte", _conv("a\0b.npy"), P, "destination"),
    (f"{CONV}: destination whose .json is a folder", _conv("blocked.npy"), P, "destination"),
    (f"{CONV}: destination the source itself", _conv("parquet_named.npy", "parquet_named.npy", columns=["x"],
                                                     file_format="parquet"), P, "destination"),
    (f"{CONV}: destination a PathLike giving a number", _conv(_NumberPath()), P, "destination"),
    (f"{CONV}: destination name of 300 characters", _conv("d" * 296 + ".npy"), P, "destination"),
    (f"{CONV}: destination under a file", _conv("halos.parquet/out.npy"), F, "destination"),
    # source
    (f"{CONV}: source a PathLike giving a number", _conv(source=_NumberPath()), P, "source"),
    (f"{CONV}: source under a file", _conv(source="halos.parquet/x.fits"), D, "source"),
    (f"{CONV}: source None", _conv(source=None), P, "source"),
    (f"{CONV}: source an int", _conv(source=3), P, "source"),
    (f"{CONV}: source an array", _conv(source=POINTS), P, "source"),
    (f"{CONV}: source a folder", _conv(source="folder.fits"), D, "folder"),
    (f"{CONV}: source an empty file", _conv(source="empty.fits"), D, "empty.fits"),
    (f"{CONV}: source missing", _conv(source="absent.fits"), F, "absent.fits"),
    (f"{CONV}: source a .npy file", _conv(source="parquet_named.npy"), P, "source"),
    (f"{CONV}: source with a NUL byte", _conv(source="a\0b.fits"), D, "source"),
    # unit
    (f"{CONV}: unit empty", _conv(unit=""), P, "unit"),
    (f"{CONV}: unit an int", _conv(unit=3), P, "unit"),
    (f"{CONV}: unit bytes", _conv(unit=b"Mpc"), P, "unit"),
    (f"{CONV}: unit NaN", _conv(unit=np.nan), P, "unit"),
    (f"{CONV}: unit of 10,000 characters", _conv(unit="x" * 10_000), P, "unit"),
    (f"{CONV}: unit with a newline", _conv(unit="Mpc\nlength"), P, "unit"),
    (f"{CONV}: unit contradicting sky", _conv(**RDP, sky="parallax", unit="Mpc"), P, "unit"),
    # sky
    (f"{CONV}: sky unknown name", _conv(**RDP, sky="distance"), P, "sky"),
    (f"{CONV}: sky an int", _conv(**RDP, sky=1), P, "sky"),
    (f"{CONV}: sky True", _conv(**RDP, sky=True), P, "sky"),
    (f"{CONV}: sky empty mapping", _conv(**RDP, sky={}), P, "sky"),
    (f"{CONV}: sky unknown key", _conv(**RDP, sky={"distance": "parallax", "colour": 1}), P, "sky"),
    (f"{CONV}: sky distance an int", _conv(**RDP, sky={"distance": 3}), P, "distance"),
    (f"{CONV}: sky distance a list", _conv(**RDP, sky={"distance": ["parallax"]}), P, "distance"),
    (f"{CONV}: sky angle_unit unknown", _conv(**RDP, sky={"distance": "parallax", "angle_unit": "grad"}), P,
     "angle_unit"),
    (f"{CONV}: sky angle_unit None", _conv(**RDP, sky={"distance": "parallax", "angle_unit": None}), P,
     "angle_unit"),
    (f"{CONV}: sky cosmology unknown", _conv(**RDZ, sky={"distance": "redshift", "cosmology": "Nowhere"}), P,
     "cosmology"),
    (f"{CONV}: sky cosmology a number", _conv(**RDZ, sky={"distance": "redshift", "cosmology": 5}), P, "cosmology"),
    (f"{CONV}: sky little_h a string", _conv(**RDZ, sky={"distance": "redshift", "little_h": "yes"}), P, "little_h"),
    (f"{CONV}: sky cosmology_parameters a string", _conv(**RDZ, sky={"distance": "redshift",
                                                                     "cosmology_parameters": "x"}), P,
     "cosmology_parameters"),
    (f"{CONV}: sky unit contradicting its settings", _conv(**RDZ, sky={"distance": "redshift", "unit": "pc"}), P,
     "sky"),
    (f"{CONV}: sky on two columns", _conv(columns=["ra", "dec"], sky="parallax"), P, "columns"),
    (f"{CONV}: sky on four columns", _conv(columns=["ra", "dec", "z", "y"], sky="redshift"), P, "columns"),
    (f"{CONV}: sky with latitudes beyond 90", _conv(columns=["dec", "ra", "z"], sky="redshift"), D, "dec"),
    (f"{CONV}: sky with a parallax in Mpc", _conv(columns=["ra", "dec", "y"], sky="parallax"), D, "parallax"),
    # drop_missing, columns, where, dataset, file_format
    (f"{CONV}: drop_missing a string", _conv(columns=["x", "y"], drop_missing="yes"), P, "drop_missing"),
    (f"{CONV}: drop_missing None", _conv(columns=["x", "y"], drop_missing=None), P, "drop_missing"),
    (f"{CONV}: drop_missing NaN", _conv(columns=["x", "y"], drop_missing=np.nan), P, "drop_missing"),
    (f"{CONV}: drop_missing 1", _conv(columns=["x", "y"], drop_missing=1), P, "drop_missing"),
    (f"{CONV}: a missing value kept", _conv(columns=["x", "y"]), D, "drop_missing=True"),
    (f"{CONV}: columns a string", _conv(columns="x,y"), P, "columns"),
    (f"{CONV}: columns empty", _conv(columns=[]), P, "columns"),
    (f"{CONV}: where an int", _conv(where=3), P, "where"),
    (f"{CONV}: where bytes", _conv(where=b"x > 0"), P, "where"),
    (f"{CONV}: where keeps no row", _conv(where="x > 99"), D, "where"),
    (f"{CONV}: where keeps one row", _conv(where="x > 0.99"), D, "where"),
    (f"{CONV}: dataset True", _conv(dataset=True), P, "dataset"),
    (f"{CONV}: dataset a float", _conv(dataset=1.0), P, "dataset"),
    (f"{CONV}: dataset 10**30", _conv(dataset=10**30), P, "dataset"),
    (f"{CONV}: file_format an int", _conv(file_format=1), P, "file_format"),
    (f"{CONV}: HDF5 dataset absent", _conv(source="halos.h5", columns=["x", "y"], dataset="survey/absent"), P,
     "dataset"),
]


@pytest.mark.parametrize("call, error, needle", [c[1:] for c in CONV_REFUSED], ids=[c[0] for c in CONV_REFUSED])
def test_catalogue_to_npy_refuses_hostile_input(catalogues, call, error, needle):
    before = sorted(p.name for p in catalogues.iterdir())
    with pytest.raises(error) as caught:
        call(catalogues)
    assert needle in str(caught.value), str(caught.value)
    assert sorted(p.name for p in catalogues.iterdir()) == before  # nothing written, nothing left behind


@pytest.mark.entry(CONV)
def test_catalogue_to_npy_writes_both_files_or_neither_for_long_names(catalogues, tmp_path):
    """A name the ``.npy`` file (and its temporary file) could take but the description's could not: the ``.npy``
    was written, then the description failed. Now the longest name that both take works, and one more is refused."""
    longest = 255 - len(".x.npy.json.12345678.partial.json") + len("x.npy")
    fits_name = "n" * (longest - 4) + ".npy"
    catalogue_to_npy(catalogues / "halos.fits", tmp_path / fits_name, **XY)
    assert (tmp_path / fits_name).is_file() and (tmp_path / (fits_name + ".json")).is_file()
    with pytest.raises(InvalidParameterError) as caught:
        catalogue_to_npy(catalogues / "halos.fits", tmp_path / ("m" + fits_name), **XY)
    assert caught.value.parameter == "destination"
    assert sorted(p.name for p in tmp_path.iterdir()) == [fits_name, fits_name + ".json"]


@pytest.mark.entry(CONV)
def test_catalogue_to_npy_leaves_a_source_named_like_the_destination_intact(catalogues):
    """A Parquet file named ``.npy`` converted onto itself was replaced by the conversion: the catalogue was lost."""
    source = catalogues / "parquet_named.npy"
    content = source.read_bytes()
    with pytest.raises(InvalidParameterError):
        catalogue_to_npy(source, source, columns=["x", "y"], file_format="parquet")
    link = catalogues / "link_to_source.npy"
    link.symlink_to(source)
    try:
        with pytest.raises(InvalidParameterError):
            catalogue_to_npy(source, link, columns=["x", "y"], file_format="parquet")
    finally:
        link.unlink()
    assert source.read_bytes() == content


def _converted(source, target, **options):
    catalogue_to_npy(source, target, **options)
    return np.load(target)


# (id, source name, options, load_cloud options)
CONV_AGREES = [
    ("chunk_rows 1", "halos.fits", {**XY, "chunk_rows": 1}, XY),
    ("chunk_rows 7", "halos.fits", {**XY, "chunk_rows": 7}, XY),
    ("chunk_rows 10**30", "halos.fits", {**XY, "chunk_rows": 10**30}, XY),
    ("numpy int chunk_rows", "halos.fits", {**XY, "chunk_rows": np.int64(3)}, XY),
    ("columns a numpy array", "halos.fits", {**XY, "columns": np.array(["x", "y"])}, XY),
    ("redshift, chunk_rows 10**30", "halos.fits", {**RDZ, "sky": "redshift", "chunk_rows": 10**30},
     {**RDZ, "sky": "redshift"}),
    ("redshift, filter and missing values, chunk_rows 3", "halos.fits",
     {**RDZ, "sky": "redshift", "where": "x > 0", "drop_missing": True, "chunk_rows": 3},
     {**RDZ, "sky": "redshift", "where": "x > 0", "drop_missing": True}),
    ("where, chunk_rows 2", "halos.fits", {**XY, "where": "y > 0", "chunk_rows": 2}, {**XY, "where": "y > 0"}),
    ("parallax, chunk_rows 1", "halos.fits", {**RDP, "sky": "parallax", "chunk_rows": 1}, {**RDP, "sky": "parallax"}),
    ("redshift, chunk_rows 5", "halos.fits", {**RDZ, "sky": "redshift", "chunk_rows": 5}, {**RDZ, "sky": "redshift"}),
    ("redshift mapping with its own unit", "halos.fits",
     {**RDZ, "sky": {"distance": "redshift", "little_h": True, "unit": "Mpc/h"}, "chunk_rows": 3},
     {**RDZ, "sky": {"distance": "redshift", "little_h": True}}),
    ("Parquet, chunk_rows 3", "halos.parquet", {"columns": ["x", "y"], "chunk_rows": 3}, {"columns": ["x", "y"]}),
    ("HDF5, chunk_rows 3", "halos.h5", {"columns": ["x", "y"], "dataset": "survey", "chunk_rows": 3},
     {"columns": ["x", "y"], "dataset": "survey"}),
]


@pytest.mark.silent
@pytest.mark.parametrize("name, options, loaded", [c[1:] for c in CONV_AGREES],
                         ids=[f"{CONV}: {c[0]}" for c in CONV_AGREES])
def test_catalogue_to_npy_writes_what_load_cloud_reads(catalogues, tmp_path, name, options, loaded):
    written = _converted(catalogues / name, tmp_path / "out.npy", **options)
    np.testing.assert_array_equal(written, tdakit.load_cloud(catalogues / name, **loaded).points)


@pytest.mark.silent
@pytest.mark.entry(CONV)
def test_catalogue_to_npy_takes_bytes_paths(catalogues, tmp_path):
    target = tmp_path / "bytes.npy"
    record = catalogue_to_npy(os.fsencode(str(catalogues / "halos.fits")), os.fsencode(str(target)), **XY)
    np.testing.assert_array_equal(np.load(target), tdakit.load_cloud(catalogues / "halos.fits", **XY).points)
    assert record["n_rows"] == N - 1 and (tmp_path / "bytes.npy.json").is_file()


@pytest.mark.hang
@pytest.mark.entry(CONV)
@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no named pipes on this system")
def test_catalogue_to_npy_refuses_a_named_pipe_without_waiting_on_it(catalogues, tmp_path):
    with pytest.raises(InvalidDataError) as caught:
        catalogue_to_npy(catalogues / "pipe.fits", tmp_path / "out.npy", **XY)
    assert caught.value.parameter == "source" and "pipe" in str(caught.value)


@pytest.mark.entry(CONV)
@pytest.mark.skipif(sys.platform == "win32" or os.geteuid() == 0,
                    reason="running as root (or on Windows): file permissions do not stop writing")
def test_catalogue_to_npy_into_a_read_only_folder_is_refused_naming_the_file(catalogues, tmp_path):
    locked = tmp_path / "locked"
    locked.mkdir()
    locked.chmod(0o500)
    try:
        with pytest.raises(OutputWriteError) as caught:
            catalogue_to_npy(catalogues / "halos.fits", locked / "out.npy", **XY)
    finally:
        locked.chmod(0o700)
    assert "out.npy" in str(caught.value) and list(locked.iterdir()) == []
