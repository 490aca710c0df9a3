"""What each worker holds: its rows of the cloud, in working coordinates, and their distances to the landmarks.

A :class:`PartitionSet` lives on one worker (a Dask actor) for one call of the distributed
routines. It reads its own rows (from a file the worker opens itself, or from blocks already
on the worker), checks them, and keeps them for the whole selection; the driver only ever
sends it a landmark's coordinates and gets back one (distance, row, coordinates) triple.
Rows are checked by the core's own checks (those of :func:`tdakit.load_cloud`), a chunk at a time;
errors come back as (error class name, message, parameter) so the driver raises tdakit's own
error with global row numbers.

With ``keep_rows="disk"`` the box-ordered working coordinates and the boxes' order (``rank``) live
in scratch files in the worker's own local directory, memory-mapped: the kernel's page cache holds
them (reclaimable, written back to the file when memory is short) instead of the worker's private
memory, which keeps only each point's distance to and index of its nearest landmark (12 bytes).
Each file is unlinked as soon as it is mapped, so the kernel frees its space when the last map goes:
when the selection ends or fails (:meth:`PartitionSet.release`), and also when the worker is killed.
"""

from __future__ import annotations

import os
import tempfile
from types import SimpleNamespace

import numpy as np

from tdakit.core.geometry.metrics import Metric
from tdakit.distributed._worker_density import DensityMixin

# Rows read, checked and embedded at a time while loading (bounds the extra memory of a load).
LOAD_ROWS = 1 << 20
KEEP_ROWS = ("auto", "memory", "disk")
# Scratch files are named tdakit-rows-*.bin (in the worker's local directory; unlinked once mapped).
SCRATCH_PREFIX = "tdakit-rows-"
# Per-point bytes besides the working coordinates (8 each): distance, landmark, rank (for the "auto" choice).
STATE_BYTES = 16
# File systems whose pages are memory (not reclaimable without swap): "auto" keeps the rows in memory there.
MEMORY_FILE_SYSTEMS = ("tmpfs", "ramfs")


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


class PartitionSet(DensityMixin):
    """A worker's partitions (see the module docstring). Created with ``client.submit(..., actor=True)``."""

    def __init__(self, metric: dict, n_landmarks: int, pieces: list, keep_rows: str = "memory"):
        self.pieces = pieces
        self.metric = Metric(name=metric["name"], p=float(metric["p"]),
                             box=None if metric["box"] is None else tuple(metric["box"]))
        self.n_landmarks = int(n_landmarks)
        self.parts: list[Part] = []
        self.marks = None
        self.keep_rows = keep_rows
        self.scratch: Scratch | None = None
        self.low = self.high = None  # per-column extremes of the rows as read (before embedding)

    # -- loading ---------------------------------------------------------------------------
    def load(self) -> dict:
        """Read and check every piece ``(offset, reader)``; where the rows are kept, and the first problem.

        A reader is ``("file", filename, file_offset, dtype, shape, order, start, stop)`` for rows of a
        file this worker reads itself, or ``("block", array)`` for rows already here. Returns ``problem``
        (error class name, message, parameter; None without), ``keep_rows`` ("memory" or "disk") and
        ``low``/``high``, the per-column extremes of the rows as read (None without rows).
        """
        pieces, self.pieces = self.pieces, None
        sources = [(offset, _open(reader)) for offset, reader in pieces]
        problem = None
        try:
            self._choose_storage(sources)
            for offset, source in sources:
                work, problem = self._checked_work(source, offset)
                if problem is not None:
                    break
                self.parts.append(Part(offset, work))
        except ScratchError as exc:
            problem = ("OutputWriteError", str(exc), "keep_rows")
        if problem is not None:
            self.release()
        return {"problem": problem, "keep_rows": "disk" if self.scratch is not None else "memory",
                "low": self.low, "high": self.high}

    def _choose_storage(self, sources: list) -> None:
        """Resolve ``keep_rows``: "auto" is disk when rows and state would pass half this worker's memory limit,
        unless the scratch folder is in memory itself (tmpfs, ramfs), where mapping gains nothing.
        """
        folder = scratch_folder()
        if self.keep_rows == "auto":
            dims = 3 if self.metric.name == "angular" else max((s.shape[1] for _, s in sources), default=1)
            need = sum(s.shape[0] for _, s in sources) * (8 * dims + STATE_BYTES)
            fits = need <= memory_limit() / 2
            self.keep_rows = "memory" if fits or file_system(folder) in MEMORY_FILE_SYSTEMS else "disk"
        if self.keep_rows == "disk":
            self.scratch = Scratch(folder)

    def new_array(self, shape: tuple, dtype) -> np.ndarray:
        """An uninitialised array: in memory, or mapped from a scratch file (``keep_rows="disk"``)."""
        if self.scratch is None or int(np.prod(shape)) == 0:
            return np.empty(shape, dtype=dtype)
        return self.scratch.array(shape, dtype)

    def _checked_work(self, source, offset: int):
        from tdakit.core.geometry._checks_metric import check_points_for_metric
        from tdakit.core.geometry.cloud import _check_finite
        from tdakit.errors import TdakitError

        rows = source.shape[0]
        dims = 3 if self.metric.name == "angular" else source.shape[1]
        work = self.new_array((rows, dims), np.float64)
        for start in range(0, rows, LOAD_ROWS):
            chunk = np.asarray(source[start:start + LOAD_ROWS], dtype=np.float64)
            try:  # the core's checks of load_cloud, with global row numbers
                _check_finite(chunk, "source", first_row=offset + start)
                check_points_for_metric(chunk, self.metric, "source", first_row=offset + start)
            except TdakitError as exc:
                return None, (type(exc).__name__, str(exc), exc.parameter)
            self._note_extent(chunk)
            work[start:start + chunk.shape[0]] = self.metric.embed(chunk)
        return work, None

    def _note_extent(self, chunk: np.ndarray) -> None:
        if not chunk.size:
            return
        low, high = chunk.min(axis=0), chunk.max(axis=0)
        self.low = low if self.low is None else np.minimum(self.low, low)
        self.high = high if self.high is None else np.maximum(self.high, high)

    def release(self) -> None:
        """Drop every array (scratch files included: their space goes back with the last map)."""
        for part in self.parts:  # also for a Part still referenced elsewhere
            part.work = part.rank = part.tree = part.to_mark = part.owner = None
        self.parts = []
        self.marks = None
        if self.scratch is not None:
            self.scratch.close()

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
    def _guarded(self, method, *args):
        """``method(*args)``; a scratch file that cannot be made frees everything first, then raises.

        The error is raised anew outside the handler, so no traceback keeps the frames (and their maps) alive.
        """
        try:
            return method(*args)
        except ScratchError as exc:
            message = str(exc)
        self.release()
        raise ScratchError(message)

    def start_maxmin(self, leaf_size: int, group: int) -> None:
        """Cut every partition into boxes and start its maxmin state (no landmark yet)."""
        self._guarded(self._start_maxmin, leaf_size, group)

    def _start_maxmin(self, leaf_size: int, group: int) -> None:
        from tdakit.distributed import _kernels

        dims = self.parts[0].work.shape[1] if self.parts else 1
        self.marks = np.empty((self.n_landmarks, dims))
        self.half = np.empty(self.n_landmarks)
        self.stamp = np.full(self.n_landmarks, -1, dtype=np.int64)
        self.group = int(group)
        for part in self.parts:
            part.rank = self.new_array((part.n,), np.int32 if part.n < 2**31 else np.int64)
            for start in range(0, part.n, LOAD_ROWS):
                part.rank[start:start + LOAD_ROWS] = np.arange(start, min(start + LOAD_ROWS, part.n))
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

        Ends the selection: the coordinates and boxes are freed first, so the per-point arrays take their place
        (scratch files with ``keep_rows="disk"``). Returns (first row, nearest or None, distance or None, largest
        distance) per partition.
        """
        return self._guarded(self._maxmin_per_point, outputs)

    def _maxmin_per_point(self, outputs) -> list:
        results = []
        for part in self.parts:
            part.work = part.tree = None
            distance = self._unshuffle(part, part.to_mark, np.float64)
            part.to_mark = None
            radius = 0.0
            for start in range(0, part.n, LOAD_ROWS):
                block = self.metric.to_metric(distance[start:start + LOAD_ROWS])
                radius = max(radius, float(block.max()))
                distance[start:start + LOAD_ROWS] = block
            distance = self._deliver(outputs, "distance", part.offset, distance)
            nearest = self._unshuffle(part, part.owner, np.intp)
            part.owner = part.rank = None
            results.append((part.offset, self._deliver(outputs, "nearest", part.offset, nearest), distance, radius))
        return results

    def _unshuffle(self, part: Part, values: np.ndarray, dtype) -> np.ndarray:
        """``values`` (one per slot) in row order, a block of slots at a time."""
        ordered = self.new_array((part.n,), dtype)
        for start in range(0, part.n, LOAD_ROWS):
            ordered[part.rank[start:start + LOAD_ROWS]] = values[start:start + LOAD_ROWS]
        return ordered

    def _deliver(self, outputs, name: str, first_row: int, values: np.ndarray):
        """Write ``values`` to the output file in blocks (None), or return them (copied out of a scratch map)."""
        if outputs is None:
            return values if self.scratch is None else np.array(values)
        for start in range(0, values.size, LOAD_ROWS):
            _write(outputs, name, first_row + start, values[start:start + LOAD_ROWS])
        return None

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


def memory_limit() -> float:
    """The memory limit of this worker in bytes (its Dask ``memory_limit``; without one, the machine's memory)."""
    import psutil

    limit = getattr(getattr(_dask_worker(), "memory_manager", None), "memory_limit", None)
    return float(limit) if limit else float(psutil.virtual_memory().total)


def scratch_folder() -> str:
    """The folder for scratch files: the Dask worker's ``local_directory``, else the system's temporary folder."""
    folder = getattr(_dask_worker(), "local_directory", None)
    return str(folder) if folder else tempfile.gettempdir()


def file_system(folder: str) -> str | None:
    """The type of the file system holding ``folder``, from /proc/mounts (None where unknown)."""
    try:
        with open("/proc/mounts") as mounts:
            table = [line.split()[1:3] for line in mounts if len(line.split()) > 2]
    except OSError:
        return None
    path = os.path.realpath(folder)
    found, longest = None, -1
    for point, kind in table:
        point = point.replace("\\040", " ")
        inside = path == point or path.startswith(point.rstrip("/") + "/")
        if inside and len(point) >= longest:  # the longest mount point holding it; a later mount hides an earlier
            found, longest = kind, len(point)
    return found


def _dask_worker():
    try:
        from distributed import get_worker

        return get_worker()
    except (ImportError, ValueError):
        return None


def _scratch_message(folder: str, exc: OSError) -> str:
    return (f"The 'keep_rows' parameter was 'disk' (or 'auto' chose it), which needs a writable local folder with "
            f"room for the worker's rows, but a scratch file could not be made in {folder!r} ({exc}). Give the "
            f"workers a writable local directory with free space (Dask's 'temporary-directory' setting, or "
            f"local_directory= of the workers), or pass keep_rows='memory'.")


class ScratchError(Exception):
    """A scratch file could not be made; the message says where and why (the driver raises OutputWriteError)."""


class Scratch:
    """Arrays in files of one folder, mapped read-write; each file is unlinked as soon as it is mapped.

    The space is reserved up front (``posix_fallocate``), so a full disk fails here (:class:`ScratchError`) and
    not later as a fault while writing through the map. Where a mapped file cannot be unlinked (not on Linux),
    its name is kept and the file removed by :meth:`close`.
    """

    def __init__(self, folder: str):
        self.folder = str(folder)
        self.kept: list[str] = []

    def array(self, shape: tuple, dtype) -> np.ndarray:
        try:
            return self._array(shape, np.dtype(dtype))
        except OSError as exc:
            raise ScratchError(_scratch_message(self.folder, exc)) from exc

    def _array(self, shape: tuple, dtype: np.dtype) -> np.ndarray:
        size = int(np.prod(shape)) * dtype.itemsize
        handle, name = tempfile.mkstemp(prefix=SCRATCH_PREFIX, suffix=".bin", dir=self.folder)
        try:
            with os.fdopen(handle, "w+b") as stream:
                if hasattr(os, "posix_fallocate"):
                    os.posix_fallocate(stream.fileno(), 0, size)
                else:
                    stream.truncate(size)
                mapped = np.memmap(stream, dtype=dtype, mode="r+", shape=shape)
        finally:
            try:
                os.unlink(name)
            except OSError:
                self.kept.append(name)
        return np.asarray(mapped)  # a plain array over the map (the map lives as long as the array)

    def close(self) -> None:
        for name in self.kept:
            try:
                os.unlink(name)
            except OSError:
                pass
        self.kept = []
