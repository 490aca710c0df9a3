"""What each worker holds: its rows of the cloud, in working coordinates, and their distances to the landmarks.

A :class:`PartitionSet` lives on one worker (a Dask actor) for one call of the distributed
routines. It reads its own rows (from a file the worker opens itself, or from blocks already
on the worker), checks them, and keeps them for the whole selection; the driver only ever
sends it a landmark's coordinates and gets back one (distance, row, coordinates) triple.
Errors in the data come back as (message, parameter) pairs so the driver raises tdakit's own
error with global row numbers.
"""

from __future__ import annotations

from types import SimpleNamespace

import numpy as np

from tdakit.core.geometry.cloud import MAX_EXTENT
from tdakit.core.geometry.metrics import Metric

# Rows read, checked and embedded at a time while loading (bounds the extra memory of a load).
LOAD_ROWS = 1 << 20


class Part:
    """One partition: global rows [offset, offset + n) in working coordinates, and its maxmin state."""

    def __init__(self, offset: int, work: np.ndarray):
        self.offset = offset
        self.rows = int(work.shape[0])
        self.work = work
        self.rank = None  # local row of each slot once the points are cut into boxes (reordered)
        self.tree = None
        self.to_mark = None
        self.owner = None

    @property
    def n(self) -> int:
        return self.rows

    def rows_to_slots(self, local_rows: np.ndarray) -> np.ndarray:
        """Slots now holding the given sorted, distinct local rows (the boxes reorder the points)."""
        if self.rank is None:
            return local_rows
        slots = np.flatnonzero(np.isin(self.rank, local_rows))
        return slots[np.argsort(self.rank[slots])]


class PartitionSet:
    """A worker's partitions (see the module docstring). Created with ``client.submit(..., actor=True)``."""

    def __init__(self, metric: dict, n_landmarks: int, pieces: list):
        self.pieces = pieces
        self.metric = Metric(name=metric["name"], p=float(metric["p"]),
                             box=None if metric["box"] is None else tuple(metric["box"]))
        self.n_landmarks = int(n_landmarks)
        self.parts: list[Part] = []
        self.marks = None

    # -- loading ---------------------------------------------------------------------------
    def load(self) -> tuple | None:
        """Read and check every piece ``(offset, reader)``; (message, parameter) for the first bad row, else None.

        A reader is ``("file", filename, file_offset, dtype, shape, order, start, stop)`` for rows of a
        file this worker reads itself, or ``("block", array)`` for rows already here.
        """
        pieces, self.pieces = self.pieces, None
        for offset, reader in pieces:
            source = _open(reader)
            work, problem = self._checked_work(source, offset)
            if problem is not None:
                self.parts.clear()
                return problem
            self.parts.append(Part(offset, work))
        return None

    def _checked_work(self, source, offset: int):
        rows = source.shape[0]
        dims = 3 if self.metric.name == "angular" else source.shape[1]
        work = np.empty((rows, dims))
        for start in range(0, rows, LOAD_ROWS):
            chunk = np.asarray(source[start:start + LOAD_ROWS], dtype=np.float64)
            problem = check_rows(chunk, self.metric, offset + start)
            if problem is not None:
                return None, problem
            work[start:start + chunk.shape[0]] = self.metric.embed(chunk)
        return work, None

    def extent(self) -> tuple[np.ndarray, np.ndarray] | None:
        """Per-column minimum and maximum of this worker's working coordinates (None without rows)."""
        parts = [p for p in self.parts if p.n]
        if not parts:
            return None
        low = np.min([p.work.min(axis=0) for p in parts], axis=0)
        return low, np.max([p.work.max(axis=0) for p in parts], axis=0)

    def coordinates(self, rows: list[int]) -> dict:
        """Working coordinates of the given global rows that live here, by row."""
        found = {}
        rows = np.asarray(rows, dtype=np.int64)
        for part in self.parts:
            mine = np.sort(rows[(rows >= part.offset) & (rows < part.offset + part.n)])
            if mine.size:
                slots = part.rows_to_slots(mine - part.offset)
                found.update({int(r): part.work[s].copy() for r, s in zip(mine, slots)})
        return found

    # -- maxmin ----------------------------------------------------------------------------
    def start_maxmin(self, leaf_size: int, group: int) -> None:
        from tdakit.distributed import _kernels

        dims = self.parts[0].work.shape[1] if self.parts else 1
        self.marks = np.empty((self.n_landmarks, dims))
        self.half = np.empty(self.n_landmarks)
        self.stamp = np.full(self.n_landmarks, -1, dtype=np.int64)
        self.group = int(group)
        for part in self.parts:
            part.rank = np.arange(part.n, dtype=np.int32 if part.n < 2**31 else np.int64)
            prepared = _kernels.prepare(part.work, part.rank, int(leaf_size), self.group)
            part.tree = (prepared[0], tuple(prepared[1:5]), tuple(prepared[5:]))
            part.to_mark = np.full(part.n, np.inf)
            part.owner = np.zeros(part.n, dtype=np.int32)

    def add_landmarks(self, first_new: int, coordinates: np.ndarray, slack: float, top: int) -> dict:
        """Landmarks ``first_new, first_new + 1, ...`` join at the rows of ``coordinates``, in order.

        Returns this worker's ``top`` farthest boxes after them, ordered by (distance desc, global row
        asc): each box's farthest point (``value``, ``row``, ``coordinates``) and its box (``low``,
        ``high``), and ``bound``, the largest distance of any point in the other boxes (-1 without).
        Ties go to the lowest global row, as in memory.
        """
        from tdakit.core.geometry._maxmin import distance_mode
        from tdakit.distributed import _kernels

        mode, p, box = _mode(self.metric, distance_mode)
        for step, point in enumerate(np.atleast_2d(coordinates)):
            new = int(first_new) + step
            self.marks[new] = point
            for part in self.parts:
                starts, boxes, state = part.tree
                _kernels.add_landmark(part.work, part.rank, starts, boxes, state, part.to_mark, part.owner,
                                      self.marks, new, self.half, self.stamp, self.group, mode, p, box, float(slack))
        return self._top_boxes(int(top))

    def _leading_leaves(self, leaf_r: np.ndarray, group_r: np.ndarray, keep: int) -> np.ndarray:
        """Leaves holding the ``keep`` largest leaf values, every tie included (so an exact order can follow).

        Each group's value is one of its leaves', so the keep-th largest group value t is at most the keep-th
        largest leaf value: only groups reaching t are read.
        """
        if group_r.size <= keep:
            candidates = np.arange(leaf_r.size)
        else:
            floor = np.partition(group_r, group_r.size - keep)[group_r.size - keep]
            groups = np.flatnonzero(group_r >= floor)
            candidates = (groups[:, None] * self.group + np.arange(self.group)).ravel()
            candidates = candidates[(candidates < leaf_r.size)]
            candidates = candidates[leaf_r[candidates] >= floor]
        values = leaf_r[candidates]
        keep = min(keep, values.size)
        threshold = np.partition(values, values.size - keep)[values.size - keep]
        return candidates[values >= threshold]

    def _top_boxes(self, top: int) -> dict:
        found = []
        for part in self.parts:
            leaf_r, leaf_f = part.tree[2][0], part.tree[2][1]
            low, high = part.tree[1][0], part.tree[1][1]
            leaves = self._leading_leaves(leaf_r, part.tree[2][2], top + 1)
            rows = part.offset + part.rank[leaf_f[leaves]].astype(np.int64)
            found.append((leaf_r[leaves], rows, part.work[leaf_f[leaves]], low[leaves], high[leaves]))
        if not found:
            empty = np.empty((0, self.marks.shape[1]))
            return {"value": np.empty(0), "row": np.empty(0, dtype=np.int64), "coordinates": empty, "low": empty,
                    "high": empty, "bound": -1.0}
        value, row, coords, low, high = (np.concatenate(column) for column in zip(*found))
        order = np.lexsort((row, -value))
        chosen, rest = order[:top], order[top:]
        return {"value": value[chosen], "row": row[chosen], "coordinates": coords[chosen], "low": low[chosen],
                "high": high[chosen], "bound": float(value[rest[0]]) if rest.size else -1.0}

    def maxmin_per_point(self, outputs) -> list:
        """Each row's nearest landmark and distance, written to ``outputs`` (files) or returned, one array at a time.

        Ends the selection: the coordinates and boxes are freed first, so the per-point arrays take their place.
        Returns (first row, nearest or None, distance or None, largest distance) per partition.
        """
        results = []
        for part in self.parts:
            part.work = part.tree = None
            distance = np.empty(part.n)
            distance[part.rank] = part.to_mark
            part.to_mark = None
            distance = self.metric.to_metric(distance)
            radius = float(distance.max())
            distance = _write(outputs, "distance", part.offset, distance)
            nearest = np.empty(part.n, dtype=np.intp)
            nearest[part.rank] = part.owner
            part.owner = part.rank = None
            results.append((part.offset, _write(outputs, "nearest", part.offset, nearest), distance, radius))
        return results

    # -- nearest landmark of every point (random landmarks, coverage) ----------------------
    def nearest_landmarks(self, marks: np.ndarray, mark_rows: list[int], outputs) -> list:
        """Nearest landmark (position in ``marks``) and distance of every row here, as the in-memory routine.

        Written in blocks to ``outputs`` (files) or returned as in :meth:`maxmin_per_point`.
        """
        from scipy.spatial import cKDTree

        tree = cKDTree(marks, boxsize=self.metric.working_boxsize(), balanced_tree=False, compact_nodes=False)
        mark_rows = np.asarray(mark_rows, dtype=np.int64)
        results = []
        for part in self.parts:
            kept = None if outputs is not None else (np.empty(part.n, dtype=np.intp), np.empty(part.n))
            radius = 0.0
            for start in range(0, part.n, LOAD_ROWS):
                dist, pos = tree.query(part.work[start:start + LOAD_ROWS], k=1, p=self.metric.p)
                nearest, distance = pos.astype(np.intp), self.metric.to_metric(dist)
                here = (mark_rows >= part.offset + start) & (mark_rows < part.offset + start + dist.size)
                distance[mark_rows[here] - part.offset - start] = 0.0
                nearest[mark_rows[here] - part.offset - start] = np.flatnonzero(here)
                radius = max(radius, float(distance.max()))
                if kept is None:
                    _write(outputs, "distance", part.offset + start, distance)
                    _write(outputs, "nearest", part.offset + start, nearest)
                else:
                    kept[0][start:start + dist.size], kept[1][start:start + dist.size] = nearest, distance
            results.append((part.offset, *(kept or (None, None)), radius))
        return results

    # -- lazy witness edges ----------------------------------------------------------------
    def witness_edges(self, marks: np.ndarray, nu: int, cap: float) -> np.ndarray:
        """Lazy witness edge values over the rows here (upper triangle, before the final symmetrising)."""
        from tdakit.core.geometry._maxmin import distance_mode
        from tdakit.core.topology._witness_kernels import lazy_edges

        mode, p, box = _mode(self.metric, distance_mode)
        edges = np.full((marks.shape[0], marks.shape[0]), np.inf)
        marks = np.ascontiguousarray(marks)
        for part in self.parts:
            lazy_edges(part.work, marks, 0, part.n, int(nu), float(cap), mode, p, box, edges)
        return edges


def _mode(metric: Metric, distance_mode):
    return distance_mode(SimpleNamespace(metric=metric))  # it reads only ``cloud.metric``


def _open(reader):
    if reader[0] == "block":
        return reader[1]
    _, filename, file_offset, dtype, shape, order, start, stop = reader
    if order == "C":
        return _RowFile(filename, file_offset, np.dtype(dtype), tuple(shape), start, stop)
    mapped = np.memmap(filename, dtype=np.dtype(dtype), mode="r", offset=file_offset, shape=tuple(shape), order=order)
    return mapped[start:stop]


class _RowFile:
    """Rows [start, stop) of a C-ordered array in a file, read with plain reads when sliced.

    Reads (not a memory map) so that pages of the file never count towards this worker's memory.
    """

    def __init__(self, filename, file_offset, dtype, shape, start, stop):
        self.filename, self.file_offset, self.dtype = filename, file_offset, dtype
        self.n_cols, self.start = shape[1], start
        self.shape = (stop - start, shape[1])

    def __getitem__(self, rows: slice) -> np.ndarray:
        first, stop, _ = rows.indices(self.shape[0])
        count = max(stop - first, 0)
        where = self.file_offset + (self.start + first) * self.n_cols * self.dtype.itemsize
        with open(self.filename, "rb") as handle:
            handle.seek(where)
            values = np.fromfile(handle, dtype=self.dtype, count=count * self.n_cols)
        return values.reshape(count, self.n_cols)


def _write(outputs, name: str, first_row: int, values: np.ndarray):
    """Write ``values`` at ``first_row`` of the output file ``name`` (plain writes); None. Without files: values."""
    if outputs is None:
        return values
    path = outputs[name]
    header = np.load(path, mmap_mode="r")
    where = header.offset + first_row * header.dtype.itemsize
    values = np.ascontiguousarray(values, dtype=header.dtype)
    del header
    with open(path, "r+b") as handle:
        handle.seek(where)
        handle.write(memoryview(values).cast("B"))
    return None


def check_rows(chunk: np.ndarray, metric: Metric, first_row: int) -> tuple[str, str] | None:
    """The first problem in rows [first_row, first_row + len(chunk)) as (message, parameter), else None."""
    bad = ~np.isfinite(chunk)
    if bad.any():
        row, col = np.argwhere(bad)[0]
        what = "NaN" if np.isnan(chunk[row, col]) else "infinity"
        return (f"Input 'source' contains {what} at row {first_row + row} (column {col}). Drop or impute those "
                f"rows first.", "source")
    if metric.name == "periodic":
        box = np.asarray(metric.box)
        outside = (chunk < 0) | (chunk > box)
        if outside.any():
            row, col = np.argwhere(outside)[0]
            return (f"Input 'source' has a point outside the periodic box at row {first_row + row}: column {col} "
                    f"is {float(chunk[row, col])!r}, expected within [0, {float(box[col])!r}]. tdakit does not wrap "
                    f"points silently; apply `np.mod(points, box)` yourself if wrapping is intended.", "source")
    if metric.name == "angular":
        lat = chunk[:, 1]
        bad_rows = np.flatnonzero((lat < -90) | (lat > 90))
        if bad_rows.size:
            row = int(bad_rows[0])
            return (f"Input 'source' has latitude {float(lat[row])!r} at row {first_row + row}; latitudes must lie "
                    f"in [-90, 90] degrees (column 1 is the latitude).", "source")
    if metric.name == "cosine":
        zero = np.flatnonzero(np.linalg.norm(chunk, axis=1) == 0)
        if zero.size:
            return (f"Input 'source' has an all-zero row at row {first_row + int(zero[0])}; the cosine "
                    f"dissimilarity is undefined for zero vectors. Drop those rows first.", "source")
    if chunk.size and float((chunk.max(axis=0) - chunk.min(axis=0)).max()) > MAX_EXTENT:
        return (f"Input 'source' spans more than {MAX_EXTENT:g} along one axis near row {first_row}; squared "
                f"distances would overflow float64. Rescale the coordinates first.", "source")
    return None
