"""The point-cloud value object and the checks that guard every array that becomes one."""

from __future__ import annotations

import hashlib
import warnings
from dataclasses import dataclass, field
from functools import cached_property

import numpy as np
from numpy.typing import ArrayLike, NDArray

from tdakit.core.geometry.metrics import Metric
from tdakit.errors import DuplicatePointsWarning, InvalidDataError, InvalidParameterError

__all__ = ["Cloud", "make_cloud", "MAX_EXTENT", "MIN_EXTENT"]

# Squared distances overflow float64 near 1.3e154 and underflow near 1e-154 (common practice:
# float64 range is ~1e308 / 1e-308). Keep a margin so sums over many axes stay finite.
MAX_EXTENT = 1e150
MIN_EXTENT = 1e-150


@dataclass(frozen=True, eq=False)
class Cloud:
    """An immutable, validated point cloud together with the metric that measures it.

    Build one with :func:`tdakit.load_cloud`; every later step (landmarks,
    complexes, densities) measures distances through ``metric``.

    Attributes
    ----------
    points : ndarray of shape (n_points, n_dims)
        Float64 coordinates, read-only. For ``metric.name == "precomputed"`` this
        has zero columns and ``distance_matrix`` holds the distances.
    metric : Metric
        How distances are measured.
    columns : tuple of str
        Names of the coordinate columns.
    source : str
        Where the data came from (file path or a description).
    distance_matrix : ndarray of shape (n_points, n_points) or None
        The given distances (precomputed metric only), read-only.
    n_duplicates : int
        Number of points that repeat an earlier point exactly (accepted, reported).
    shift, scale : ndarray or None
        Standardisation applied at load time: ``points = (raw - shift) / scale``.
    source_checksum : str or None
        SHA-256 of the input file, when the cloud was read from one.
    read_options : tuple of (name, value) pairs
        The file-reading options given to ``load_cloud`` (``key``, ``delimiter``, ``header``,
        ``columns``), so that a run can read the same file the same way again.
    unit : str or None
        The unit of the coordinates as the user or the file named it (``"Mpc/h"``, ``"pc"``,
        ``"deg"``, ...); figures and tables label their scales with it. None when unnamed.
    """

    points: NDArray[np.float64]
    metric: Metric
    columns: tuple[str, ...]
    source: str = "array"
    distance_matrix: NDArray[np.float64] | None = None
    n_duplicates: int = 0
    shift: NDArray[np.float64] | None = field(default=None, repr=False)
    scale: NDArray[np.float64] | None = field(default=None, repr=False)
    source_checksum: str | None = None
    read_options: tuple = ()
    unit: str | None = None

    @property
    def n_points(self) -> int:
        return int(self.points.shape[0])

    @property
    def n_dims(self) -> int:
        return int(self.points.shape[1])

    @property
    def n_distinct(self) -> int:
        return self.n_points - self.n_duplicates

    @cached_property
    def fingerprint(self) -> str:
        """SHA-256 of the coordinates (or distances) and metric: identifies the data of a run."""
        digest = hashlib.sha256(repr(self.metric.to_dict()).encode())
        data = self.points if self.distance_matrix is None else self.distance_matrix
        digest.update(np.ascontiguousarray(data).tobytes())
        return digest.hexdigest()

    def subset(self, indices) -> Cloud:
        """The points at ``indices`` (repeats allowed, e.g. a bootstrap sample) as a new cloud, same metric."""
        indices = np.asarray(indices, dtype=np.intp)
        if self.distance_matrix is not None:
            matrix = self.distance_matrix[np.ix_(indices, indices)]
            repeats = int(np.triu(matrix == 0.0, k=1).any(axis=0).sum())
            return Cloud(np.zeros((indices.size, 0)), self.metric, (), f"subset of {self.source}", matrix, repeats)
        points = self.points[indices]
        return Cloud(points, self.metric, self.columns, f"subset of {self.source}", None,
                     count_duplicates(points, self.metric))

    def __repr__(self) -> str:
        return (f"Cloud(n_points={self.n_points}, n_dims={self.n_dims}, metric={self.metric.name!r}, "
                f"source={self.source!r}, n_duplicates={self.n_duplicates})")


def as_point_array(points: ArrayLike, name: str = "points", min_points: int = 2) -> NDArray[np.float64]:
    """Check that ``points`` is a finite numeric 2-D array with enough rows; return float64 C-order."""
    array = _to_numeric_array(points, name)
    if array.ndim != 2:
        hint = " Use reshape(-1, 1) for one coordinate per point." if array.ndim == 1 else ""
        raise InvalidDataError(
            f"Input '{name}' must be a 2-D array of shape (n_points, n_dims). Got {array.ndim}-D input "
            f"with shape={array.shape} instead.{hint}", parameter=name)
    if array.shape[0] < min_points:
        raise InvalidDataError(
            f"Found a point cloud with {array.shape[0]} point(s) (shape={array.shape}) while a minimum of "
            f"{min_points} is required.", parameter=name)
    if array.shape[1] < 1:
        raise InvalidDataError(
            f"Found a point cloud with 0 column(s) (shape={array.shape}) while a minimum of 1 is required.",
            parameter=name)
    array = np.ascontiguousarray(array, dtype=np.float64)
    _check_finite(array, name)
    return array


def _to_numeric_array(points: ArrayLike, name: str) -> np.ndarray:
    if isinstance(points, np.ma.MaskedArray):
        points = _unmask(points, name)
    try:
        array = np.asarray(points)
    except ValueError as exc:  # numpy refuses ragged nested sequences
        raise InvalidDataError(
            f"Input '{name}' has rows of different lengths, so it is not a table of coordinates ({exc}).",
            parameter=name) from None
    kind = array.dtype.kind
    if kind == "b":
        raise InvalidDataError(
            f"Input '{name}' is boolean; coordinates must be numbers. Cast explicitly with "
            f".astype(float) if 0/1 coordinates are really meant.", parameter=name)
    if kind == "c":
        raise InvalidDataError(
            f"Input '{name}' is complex; coordinates must be real. Split real and imaginary parts into "
            f"separate columns first.", parameter=name)
    if kind not in "iuf":
        raise InvalidDataError(
            f"Input '{name}' must hold real numbers (int or float). Got dtype {array.dtype} instead; "
            f"convert or drop non-numeric columns first.", parameter=name)
    return array


def _unmask(points: np.ma.MaskedArray, name: str) -> np.ndarray:
    """The data of a masked array without masked entries; one with masked entries is refused (not guessed)."""
    mask = np.ma.getmaskarray(points)
    if mask.any():
        where = np.argwhere(mask)[0]
        place = f"row {where[0]} (column {where[1]})" if where.size == 2 else f"position {tuple(where.tolist())}"
        raise InvalidDataError(
            f"Input '{name}' is a masked array with {int(mask.sum())} masked entr{'y' if mask.sum() == 1 else 'ies'}, "
            f"the first at {place}; tdakit does not guess what a masked coordinate was. Drop those rows "
            f"(points[~points.mask.any(axis=1)]) or fill them (points.filled(value)) first.", parameter=name)
    return np.ma.getdata(points)


def _check_finite(array: NDArray[np.float64], name: str, first_row: int | None = None) -> None:
    """Refuse NaN or infinity; ``first_row``: the array is rows [first_row, ...) of a larger source."""
    bad = ~np.isfinite(array)
    if bad.any():
        row, col = np.argwhere(bad)[0]
        what = "NaN" if np.isnan(array[row, col]) else "infinity"
        among = "" if first_row is None else f" of rows {first_row}-{first_row + array.shape[0] - 1}"
        raise InvalidDataError(
            f"Input '{name}' contains {what} at row {(first_row or 0) + row} (column {col}); "
            f"{int(bad.any(axis=1).sum())} row(s){among} are affected. Drop or impute those rows first.",
            parameter=name)


def check_extent(array: NDArray[np.float64], name: str) -> None:
    """Refuse coordinates whose squared differences would overflow or underflow float64."""
    extent = float((array.max(axis=0) - array.min(axis=0)).max()) if array.size else 0.0
    if extent > MAX_EXTENT:
        raise InvalidDataError(
            f"Input '{name}' spans {extent:.3g} along one axis; squared distances would overflow float64 "
            f"(limit {MAX_EXTENT:g}). Rescale the coordinates (or pass standardize=True, for the coordinate "
            f"metrics euclidean, manhattan, chebyshev and minkowski); tdakit does not rescale silently.",
            parameter=name)
    if 0.0 < extent < MIN_EXTENT:
        raise InvalidDataError(
            f"Input '{name}' spans only {extent:.3g}; squared distances would underflow to zero "
            f"(limit {MIN_EXTENT:g}). Rescale the coordinates (or pass standardize=True, for the coordinate "
            f"metrics euclidean, manhattan, chebyshev and minkowski); tdakit does not rescale silently.",
            parameter=name)


# Unit vectors (sky positions, cosine directions) that agree to this many units of 1 are one point: the
# trigonometry of the embedding rounds at ~1e-16 (longitude 0 against 360, the pole at any longitude), and
# 1e-12 of a unit vector is 6e-11 degrees on the sky, far below any catalogue's precision (common practice).
UNIT_VECTOR_TOLERANCE = 1e-12


def duplicate_coordinates(work: NDArray[np.float64], metric: Metric | None) -> NDArray[np.float64]:
    """Working coordinates as compared for copies (C-contiguous float64).

    Unit vectors (sky positions, cosine directions) are rounded to ``UNIT_VECTOR_TOLERANCE`` and -0.0
    counts as 0.0; equal rows are points at distance 0.
    """
    rows = np.asarray(work, dtype=np.float64)
    if metric is not None and metric.name in ("angular", "cosine"):
        rows = np.round(rows / UNIT_VECTOR_TOLERANCE)
    return np.ascontiguousarray(rows + 0.0)


def _duplicate_keys(array: NDArray[np.float64], metric: Metric | None, embedded: bool = False) -> NDArray[np.void]:
    """One hashable key per row; equal keys are points at distance 0 under ``metric``.

    ``embedded``: the rows are already working coordinates (``metric.embed``).
    """
    rows = np.asarray(array, dtype=np.float64)
    if not embedded and metric is not None and metric.name in ("angular", "cosine", "periodic"):
        rows = metric.embed(rows)  # working coordinates: 0 and 360 degrees, or 0 and the box side, coincide
    rows = duplicate_coordinates(rows, metric)
    return rows.view(np.dtype((np.void, rows.dtype.itemsize * rows.shape[1]))).ravel()


# Rows hashed at a time while looking for repeats (bounds the working copies to a few MiB).
_HASH_ROWS = 1 << 16


def _row_hashes(array: NDArray[np.float64], metric: Metric | None, embedded: bool = False) -> NDArray[np.uint64]:
    """A 64-bit hash of every row's duplicate key (equal keys give equal hashes), computed a block at a time."""
    hashes = np.empty(array.shape[0], dtype=np.uint64)
    for start in range(0, array.shape[0], _HASH_ROWS):
        keys = _duplicate_keys(array[start:start + _HASH_ROWS], metric, embedded)
        words = keys.view(np.uint64).reshape(keys.size, -1)
        mixed = np.full(keys.size, 0x9E3779B97F4A7C15, dtype=np.uint64)
        for column in words.T:  # FNV-style combination, then the splitmix64 finaliser (common practice)
            mixed = (mixed ^ column) * np.uint64(0x100000001B3)
        mixed ^= mixed >> np.uint64(30)
        mixed *= np.uint64(0xBF58476D1CE4E5B9)
        mixed ^= mixed >> np.uint64(27)
        mixed *= np.uint64(0x94D049BB133111EB)
        hashes[start:start + keys.size] = mixed ^ (mixed >> np.uint64(31))
    return hashes


def first_occurrences(array: NDArray[np.float64], metric: Metric | None = None, *,
                      embedded: bool = False) -> NDArray[np.intp]:
    """Sorted indices of the rows that repeat no earlier row: one representative of every distinct point.

    Rows are compared exactly, except for sky positions and cosine directions, compared as unit vectors
    to ``UNIT_VECTOR_TOLERANCE``, and periodic coordinates, compared after wrapping the box side to 0
    (``embedded``: the rows are already working coordinates, ``metric.embed``). Memory: about 25 bytes
    a row (a hash, its sort order and the sorted hashes); only rows whose hash another row shares are
    compared in full.
    """
    n = array.shape[0]
    if n == 0:
        return np.zeros(0, dtype=np.intp)
    hashes = _row_hashes(array, metric, embedded)
    order = np.argsort(hashes, kind="stable")
    hashes = hashes[order]
    shared = np.zeros(n, dtype=bool)
    shared[1:] = hashes[1:] == hashes[:-1]
    del hashes
    shared[:-1] |= shared[1:]
    if not shared.any():
        return np.arange(n, dtype=np.intp)
    suspects = np.sort(order[shared])
    del order, shared
    _, first = np.unique(_duplicate_keys(array[suspects], metric, embedded), return_index=True)
    keep = np.ones(n, dtype=bool)
    keep[suspects] = False
    keep[suspects[first]] = True
    return np.flatnonzero(keep).astype(np.intp)


def count_duplicates(array: NDArray[np.float64], metric: Metric | None = None) -> int:
    """Number of rows equal to an earlier row (see :func:`first_occurrences` for what counts as equal)."""
    return int(array.shape[0] - first_occurrences(array, metric).size)


def make_cloud(
    points: ArrayLike,
    metric: Metric,
    *,
    columns: tuple[str, ...] | None = None,
    source: str = "array",
    standardize: bool = False,
    source_checksum: str | None = None,
    read_options: tuple = (),
    unit: str | None = None,
) -> Cloud:
    """Validate coordinates (or a distance matrix) against ``metric`` and build a :class:`Cloud`."""
    if metric.name == "precomputed":
        from tdakit.core.geometry._checks_matrix import check_distance_matrix

        if standardize is not False:
            raise InvalidParameterError(
                f"The 'standardize' parameter of load_cloud must be False with metric='precomputed': standardising "
                f"rescales coordinate columns, and a distance matrix has none (rescale the distances yourself if "
                f"meant). Got {standardize!r} instead.", parameter="standardize")
        matrix = check_distance_matrix(points, "points")
        n_dup = int(np.triu(matrix == 0.0, k=1).any(axis=0).sum())
        empty = np.zeros((matrix.shape[0], 0))
        return _finish(Cloud(empty, metric, (), source, matrix, n_dup, source_checksum=source_checksum,
                              read_options=read_options, unit=check_unit(unit)))
    array = as_point_array(points)
    cols = tuple(columns) if columns is not None else tuple(f"x{i}" for i in range(array.shape[1]))
    shift = scale = None
    if standardize:
        array, shift, scale = _standardize(array, metric)
    check_extent(array, "points")
    from tdakit.core.geometry._checks_metric import check_points_for_metric

    metric = check_points_for_metric(array, metric)
    if unit is None and metric.name == "angular":
        unit = "deg"  # sky positions are read in degrees
    cloud = Cloud(array, metric, cols, source, None, count_duplicates(array, metric), shift, scale, source_checksum,
                  read_options, check_unit(unit))
    return _finish(cloud)


def check_unit(unit, function: str = "load_cloud") -> str | None:
    """A coordinate unit: None or a short printable name (stripped); refused otherwise, naming ``function``."""
    if unit is None:
        return None
    if not isinstance(unit, str) or not unit.strip() or len(unit) > 40 or not unit.isprintable():
        raise InvalidParameterError(
            f"Parameter 'unit' of {function} must be None or a short printable name such as 'Mpc/h', 'pc' or "
            f"'deg' (at most 40 characters). Got {unit!r} instead.", parameter="unit")
    return unit.strip()


def _standardize(array, metric):
    if metric.name not in ("euclidean", "manhattan", "chebyshev", "minkowski"):
        raise InvalidDataError(
            f"standardize=True rescales columns and is only meaningful for coordinate metrics "
            f"(euclidean, manhattan, chebyshev, minkowski); got metric={metric.name!r}.", parameter="standardize")
    # Mean and spread of each column divided by its largest magnitude first: near 1e200 the squares in a
    # plain std overflow to inf (every point became (0, 0)), near 1e-200 they underflow to 0.
    size = np.abs(array).max(axis=0)
    size[size == 0] = 1.0
    unit = array / size
    centre, spread = unit.mean(axis=0), unit.std(axis=0)
    shift, scale = centre * size, spread * size
    flat = np.flatnonzero((spread == 0) | (scale == 0))
    if flat.size:
        raise InvalidDataError(
            f"Column {int(flat[0])} is constant, so it cannot be standardised (its spread is 0). Drop it first.",
            parameter="standardize")
    return (unit - centre) / spread, shift, scale


def _finish(cloud: Cloud) -> Cloud:
    cloud.points.setflags(write=False)
    if cloud.distance_matrix is not None:
        cloud.distance_matrix.setflags(write=False)
    if cloud.n_duplicates:
        warnings.warn(
            f"The cloud from {cloud.source} holds {cloud.n_duplicates} repeated point(s) out of "
            f"{cloud.n_points}; they are kept and add nothing to the topology.", DuplicatePointsWarning,
            stacklevel=3)
    return cloud
