"""The driver's side: where the rows go, the workers' actors, and one small reduction per round.

Nothing here imports dask at module level; :mod:`tdakit.distributed` is itself imported only on demand.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from tdakit import errors
from tdakit._validation import check_choice, check_int, fail
from tdakit.core.geometry.cloud import Cloud
from tdakit.core.geometry.metrics import Metric, make_metric
from tdakit.errors import DataFileNotFoundError, InvalidDataError, InvalidParameterError, MemoryBudgetError


@dataclass(frozen=True)
class Source:
    """A cloud not (necessarily) in this process: its size, and how each worker reads its rows.

    ``kind`` is "file" (a memory-mapped array the workers map themselves), "array" (rows in this
    process, sent to the workers once) or "dask" (a Dask array, computed on the cluster).
    """

    kind: str
    n_rows: int
    n_cols: int
    data: object
    description: str


def describe_source(source, function: str) -> tuple[Source, Metric | None]:
    """Check ``source`` and say how to read it; the Cloud's metric for a Cloud (else None)."""
    if isinstance(source, Cloud):
        if source.distance_matrix is not None:
            raise _precomputed(function)
        return Source("array", source.n_points, source.n_dims, source.points, source.source), source.metric
    if isinstance(source, (str, os.PathLike)):
        return _file_source(Path(source), function), None
    if _is_dask_array(source):
        if any(not np.isfinite(size) for size in source.shape):  # rows filtered by a mask: sizes not known yet
            raise InvalidDataError(f"Input 'source' of {function} is a dask array of unknown shape {source.shape}; "
                                   f"call its compute_chunk_sizes() first.", parameter="source")
        _check_shape(source.shape, source.dtype, function)
        return Source("dask", int(source.shape[0]), int(source.shape[1]), source, "dask array"), None
    if isinstance(source, np.ma.MaskedArray):
        from tdakit.core.geometry.cloud import _unmask

        source = _unmask(source, "source")  # refused with masked entries, as load_cloud does
    if isinstance(source, np.memmap) and getattr(source, "filename", None) is not None:
        _check_shape(source.shape, source.dtype, function)
        reader = _memmap_reader(source)
        if reader is not None and _still_mapped(source, reader):
            return Source("file", source.shape[0], source.shape[1], reader, str(source.filename)), None
    if isinstance(source, np.ndarray):
        _check_shape(source.shape, source.dtype, function)
        return Source("array", source.shape[0], source.shape[1], source, "array"), None
    raise fail("source", function, "a .npy file path, a numpy array or memmap, a dask array or a Cloud", source)


def _is_dask_array(value) -> bool:
    return type(value).__module__.startswith("dask.array") and hasattr(value, "chunks")


def _file_source(path: Path, function: str) -> Source:
    if not path.is_file():
        raise DataFileNotFoundError(f"The 'source' parameter of {function} names no file: {str(path)!r}.",
                                    parameter="source")
    if path.suffix.lower() != ".npy":
        raise fail("source", function, "a .npy file (memory-mapped by every worker); convert other formats with "
                   "numpy.lib.format.open_memmap, or pass a dask array", str(path))
    try:
        mapped = np.load(path, mmap_mode="r")
    except (ValueError, OSError) as exc:
        raise InvalidDataError(f"The file {str(path)!r} is not a readable .npy array ({exc}).",
                               parameter="source") from None
    _check_shape(mapped.shape, mapped.dtype, function)
    return Source("file", mapped.shape[0], mapped.shape[1], _memmap_reader(mapped), str(path))


def _memmap_reader(mapped: np.memmap) -> tuple | None:
    """How a worker maps the same rows itself; None for a view the file cannot describe (then sent as an array).

    A slice of a memmap keeps its parent's ``offset``, so the offset is taken from where its data start in the
    mapping (the first memmap whose base is the ``mmap`` itself); a strided view has no (offset, shape, order).
    """
    import mmap

    root = mapped
    while isinstance(root.base, np.memmap):
        root = root.base
    if not isinstance(root.base, mmap.mmap) or not (mapped.flags.c_contiguous or mapped.flags.f_contiguous):
        return None
    offset = int(root.offset) + (mapped.__array_interface__["data"][0] - root.__array_interface__["data"][0])
    order = "F" if mapped.flags.f_contiguous and not mapped.flags.c_contiguous else "C"
    return (str(Path(mapped.filename).resolve()), offset, mapped.dtype.str, tuple(mapped.shape), order)


def _still_mapped(mapped: np.memmap, reader: tuple) -> bool:
    """Whether the file by that name still holds the mapped rows (not deleted, truncated or replaced since it was
    mapped): compared at a few rows spread over the array. Else the rows are sent from this process instead.
    """
    path, offset, dtype, shape, order = reader
    try:
        if os.stat(path).st_size < offset + mapped.nbytes:
            return False
        fresh = np.memmap(path, dtype=np.dtype(dtype), mode="r", offset=offset, shape=shape, order=order)
    except (OSError, ValueError):
        return False
    rows = np.unique(np.linspace(0, shape[0] - 1, min(shape[0], 17)).astype(np.int64))
    return np.asarray(fresh[rows]).tobytes() == np.asarray(mapped[rows]).tobytes()


def _check_shape(shape, dtype, function: str) -> None:
    if len(shape) != 2:
        raise InvalidDataError(f"Input 'source' of {function} must be 2-D, (n_points, n_dims). Got shape "
                               f"{tuple(shape)} instead.", parameter="source")
    if shape[0] < 2 or shape[1] < 1:
        raise InvalidDataError(f"Input 'source' of {function} needs at least 2 points and 1 column. Got shape "
                               f"{tuple(shape)} instead.", parameter="source")
    if np.dtype(dtype).kind not in "iuf":
        raise InvalidDataError(f"Input 'source' of {function} must hold real numbers (int or float). Got dtype "
                               f"{np.dtype(dtype)} instead.", parameter="source")


def _precomputed(function: str) -> InvalidParameterError:
    return InvalidParameterError(
        f"The 'metric' parameter of {function} must name a coordinate metric: 'precomputed' needs the whole "
        f"distance matrix in one process, which the distributed routines exist to avoid. Use "
        f"tdakit.select_landmarks on the in-memory cloud instead.", parameter="metric")


def resolve_metric(metric, box, p, cloud_metric: Metric | None, n_cols: int, function: str) -> Metric:
    """The metric the rows are measured by, with one periodic side per column."""
    if cloud_metric is not None:
        if metric is not None or box is not None or p is not None:
            raise fail("metric", function, "None when the source is a Cloud (its own metric is used)", metric)
        return cloud_metric
    if isinstance(metric, Metric):
        chosen = metric
    else:
        chosen = make_metric("euclidean" if metric is None else metric, p=p, box=box, function=function)
    if chosen.name == "precomputed":
        raise _precomputed(function)
    if chosen.name == "angular" and n_cols != 2:
        raise InvalidDataError(f"metric='angular' needs exactly 2 columns (longitude, latitude in degrees); the "
                               f"source has {n_cols}.", parameter="source")
    if chosen.name == "periodic":
        sides = np.asarray(chosen.box, dtype=np.float64)
        if sides.size == 1:
            sides = np.full(n_cols, sides[0])
        elif sides.size != n_cols:
            raise InvalidDataError(f"The 'box' parameter has {sides.size} side length(s) but the source has "
                                   f"{n_cols} column(s); give one side per column or a single number.",
                                   parameter="box")
        chosen = Metric(name="periodic", p=2.0, box=tuple(float(s) for s in sides))
    return chosen


def get_client(client, function: str):
    """The given Client, or the current default one; a clear error without either (or without dask)."""
    try:
        from distributed import Client
    except ImportError:
        raise InvalidParameterError(
            f"{function} runs on a Dask cluster and needs dask.distributed, which is not installed: "
            f"pip install 'tdakit[distributed]'.", parameter="client") from None

    if client is None:
        from distributed import default_client

        try:
            return default_client()
        except ValueError:
            raise fail("client", function, "a dask.distributed Client, or None with a Client already started "
                       "(e.g. Client(LocalCluster()) or a dask-jobqueue cluster)", client) from None
    if not isinstance(client, Client):
        raise fail("client", function, "a dask.distributed Client or None", client)
    if client.status != "running":  # closed, closing or never connected: calls would fail deep inside dask
        raise fail("client", function, f"a connected Client (this one's status is {client.status!r}; open a new "
                   f"one with Client(address))", client)
    return client


def worker_addresses(client, function: str) -> list[str]:
    """The addresses of the workers that have joined, asked of the scheduler itself.

    Not ``client.scheduler_info()["workers"]``: the client's own periodic refresh can replace its cached
    answer with one that lists no worker between the fetch and the read (seen in tests).
    """
    workers = sorted(client.sync(client.scheduler.identity, n_workers=-1).get("workers", {}))
    if not workers:
        raise fail("client", function, "a Client with at least one worker (none has joined yet; "
                   "client.wait_for_workers(n) waits for them)", client)
    return workers


class Workers:
    """One :class:`~tdakit.distributed._worker.PartitionSet` actor per worker holding rows, for one call."""

    def __init__(self, client, source: Source, metric: Metric, n_landmarks: int, chunk_rows: int | None,
                 function: str, keep_rows: str = "memory"):
        from tdakit.distributed._worker import KEEP_ROWS, PartitionSet

        keep_rows = check_choice(keep_rows, "keep_rows", function, KEEP_ROWS)
        self.client, self.source, self.metric = client, source, metric
        self.keep_rows = keep_rows  # after loading: "memory", "disk", or "mixed" (auto chose per worker)
        self.bytes_moved = 0  # the selection rounds' messages (arrays, plus 64 bytes a message for the rest)
        addresses = worker_addresses(client, function)
        if chunk_rows is not None:
            chunk_rows = check_int(chunk_rows, "chunk_rows", function, low=1, note="rows per partition")
        placed, blocks = _place(client, source, addresses, chunk_rows)
        self.n_partitions = sum(len(pieces) for pieces in placed.values())
        # The blocks (futures) inside the pieces reach each actor as arrays on its own worker.
        self._futures = [client.submit(PartitionSet, metric.to_dict(), n_landmarks, pieces, keep_rows,
                                       workers=[address], actor=True, pure=False) for address, pieces in placed.items()]
        self.actors = []
        try:
            self.actors = [future.result() for future in self._futures]
            loaded = self.call("load")
            placed.clear()
            blocks.clear()  # the actors hold their own copies now; dropping the last references frees the blocks
            problem = next((item["problem"] for item in loaded if item["problem"] is not None), None)
            if problem is not None:
                raise getattr(errors, problem[0], InvalidDataError)(problem[1], parameter=problem[2])
            _check_extent(loaded)
            modes = {item["keep_rows"] for item in loaded}
            self.keep_rows = modes.pop() if len(modes) == 1 else "mixed"
        except BaseException:
            self.close()
            raise

    def call(self, method: str, *args) -> list:
        """Call ``method(*args)`` on every worker at once; the results in worker order.

        A scratch file that cannot be made (``keep_rows="disk"``, e.g. a full local disk) raises OutputWriteError.
        """
        from tdakit.distributed._worker import ScratchError

        pending = [getattr(actor, method)(*args) for actor in self.actors]
        try:
            return [item.result() for item in pending]
        except ScratchError as exc:
            raise errors.OutputWriteError(str(exc), parameter="keep_rows") from None

    def coordinates(self, rows) -> np.ndarray:
        found: dict = {}
        for part in self.call("coordinates", [int(r) for r in rows]):
            found.update(part)
        return np.array([found[int(r)] for r in rows])

    def close(self) -> None:
        """Free every worker's arrays (and scratch files) at once, then let the actors go."""
        actors, self.actors = self.actors, []
        pending = []
        for actor in actors:
            try:
                pending.append(actor.release())
            except Exception:  # noqa: BLE001 - a worker already gone has nothing left to free
                pass
        for item in pending:
            try:
                item.result()
            except Exception:  # noqa: BLE001
                pass
        if self._futures:
            self.client.cancel(self._futures)
        self._futures = []


def _check_extent(loaded: list[dict]) -> None:
    """The core's extent check (that of load_cloud) on the rows as read, over every worker."""
    from tdakit.core.geometry.cloud import check_extent

    ranges = [(item["low"], item["high"]) for item in loaded if item["low"] is not None]
    if ranges:
        low, high = np.min([r[0] for r in ranges], axis=0), np.max([r[1] for r in ranges], axis=0)
        check_extent(np.vstack((low, high)), "source")


def _place(client, source: Source, addresses: list[str], chunk_rows: int | None) -> tuple[dict[str, list], list]:
    """Worker address -> [(first global row, reader)], and the futures of blocks placed on workers.

    Arrays and files give each worker one contiguous range of rows (cut into ``chunk_rows`` pieces).
    """
    if source.kind == "dask":
        return _place_dask(client, source, chunk_rows)
    edges = np.linspace(0, source.n_rows, len(addresses) + 1).astype(np.int64)
    placed: dict[str, list] = {}
    blocks = []
    for address, first, stop in zip(addresses, edges[:-1], edges[1:]):
        step = int(stop - first) if chunk_rows is None else chunk_rows
        pieces = []
        for start in range(int(first), int(stop), max(step, 1)):
            end = min(start + step, int(stop))
            if source.kind == "file":
                pieces.append((start, ("file", *source.data, start, end)))
            else:
                block = client.scatter(np.asarray(source.data[start:end]), workers=[address], direct=True,
                                       hash=False)
                blocks.append(block)
                pieces.append((start, ("block", block)))
        if pieces:
            placed[address] = pieces
    return placed, blocks


def _place_dask(client, source: Source, chunk_rows: int | None) -> tuple[dict[str, list], list]:
    from distributed import wait

    array = source.data
    if chunk_rows is not None:  # at most the rows: dask cannot take a chunk beyond int64 (10**30 failed inside it)
        array = array.rechunk({0: min(chunk_rows, source.n_rows), 1: -1})
    elif len(array.chunks[1]) > 1:
        array = array.rechunk({1: -1})
    blocks = client.compute(list(array.to_delayed()[:, 0]))
    with client.as_current():  # wait() asks for the default client, which the caller need not have set
        wait(blocks)
    where = client.who_has(blocks)
    offsets = np.concatenate(([0], np.cumsum(array.chunks[0])[:-1]))
    placed: dict[str, list] = {}
    for block, offset in zip(blocks, offsets):
        address = sorted(where[block.key])[0]
        placed.setdefault(address, []).append((int(offset), ("block", block)))
    return placed, blocks


def per_point_outputs(per_point, n_rows: int, files: dict, what: str, limit: int, function: str) -> dict | None:
    """The per-point result files ``{name: (file name, dtype)}`` created in the folder ``per_point``; without a
    folder (None), the check that gathering them into this process fits ``limit`` bytes, and None.
    """
    per_row = sum(np.dtype(dtype).itemsize for _, dtype in files.values())
    if per_point is None:
        if per_row * n_rows > limit:
            raise MemoryBudgetError(
                f"Gathering every point's {what} would take {per_row * n_rows / 2**30:.1f} GiB in this process (limit "
                f"{limit / 2**30:.0f} GiB); pass per_point=<a folder every worker can write> to have the workers "
                f"write to memory-mapped files instead.", parameter="per_point")
        return None
    if not isinstance(per_point, (str, Path)) or not str(per_point).strip():  # "" would be the current folder
        raise fail("per_point", function, "None or a folder path", per_point)
    folder = Path(per_point)
    try:
        folder.mkdir(parents=True, exist_ok=True)
    except OSError as exc:
        raise fail("per_point", function, f"a folder that can be created and written ({exc})", str(folder)) from None
    return {name: _new_output_file(folder / file_name, dtype, n_rows, function)
            for name, (file_name, dtype) in files.items()}


def _new_output_file(path: Path, dtype, n_rows: int, function: str) -> str:
    """Create the ``.npy`` file the workers write a per-point result into; its resolved path.

    A new file, not the old one truncated: an earlier result still mapping it keeps its values (rewritten in
    place, they changed under it, and reading past a shorter new file could kill the process).
    """
    target = Path(path).resolve()
    try:
        target.unlink(missing_ok=True)
        np.lib.format.open_memmap(target, mode="w+", dtype=dtype, shape=(n_rows,)).flush()
    except OSError as exc:
        raise errors.OutputWriteError(f"The file {str(target)!r} in the 'per_point' folder of {function} cannot be "
                                      f"written: {exc.strerror or exc}.", parameter="per_point") from None
    return str(target)
