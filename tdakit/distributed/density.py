"""Every point's k-nearest-neighbour radius for a cloud spread over the workers of a Dask cluster."""

from __future__ import annotations

import time
from pathlib import Path

import numpy as np

from tdakit._validation import check_int, fail
from tdakit.distributed import _worker_density as tasks
from tdakit.distributed._cells import build_cells
from tdakit.distributed._cluster import Workers, describe_source, get_client, per_point_outputs, resolve_metric
from tdakit.errors import InvalidDataError, InvalidParameterError

__all__ = ["knn_radius_distributed", "density_landmarks", "core_landmarks", "CELLS_PER_WORKER", "FEW_CELLS",
           "MAX_CELLS_PER_WORKER", "SAMPLE_ROWS"]

# Cells per worker holding rows (several, so that one large cell does not hold up the others).
CELLS_PER_WORKER = 4
# Fewest rows a default cell should hold: below it, the tasks' overhead (milliseconds each) outweighs the work.
MIN_CELL_ROWS = 256
# Most cells per worker holding rows, and the fewest a cloud may always have, whatever ``n_cells`` asks: a cell of
# k rows or fewer reaches every other cell, so too many cells cost tasks quadratic in their number, and nothing else.
MAX_CELLS_PER_WORKER = 64
FEW_CELLS = 16
# Rows of cell coordinates the driver samples in all, to place the cell boundaries.
SAMPLE_ROWS = 20_000
_FN = "knn_radius_distributed"


def knn_radius_distributed(
    source,
    k: int = 15,
    *,
    client=None,
    metric=None,
    box=None,
    p: float | None = None,
    chunk_rows: int | None = None,
    n_cells: int | None = None,
    per_point: str | Path | None = None,
) -> np.ndarray:
    r"""Distance from every point to its k-th nearest neighbour, computed on a Dask cluster.

    Identical (bit for bit) to :func:`tdakit.core.geometry.density.knn_radius` on the same cloud,
    whatever the number of workers, partitions and cells: the point itself is excluded, and
    exact copies of it count as neighbours at distance 0.

    Parameters
    ----------
    source : str or path, numpy array or memmap, dask array, or Cloud
        The points, shape (n_points, n_dims), as for
        :func:`~tdakit.distributed.select_landmarks_distributed`.
    k : int, default=15
        Neighbour rank, in ``[1, n_points - 1]``.
    client : dask.distributed.Client, optional
        The cluster (default: the current client).
    metric : str or Metric, optional
        Any coordinate metric (default ``"euclidean"``; with a Cloud, the Cloud's own and this
        must be None). ``"precomputed"`` is refused. Cells search with a kd-tree up to
        ``TREE_MAX_DIMS`` (12) working coordinates and by blocks of exact distances beyond, as the
        in-memory routine does (where spatial cells prune little).
    box, p : optional
        Periodic box side(s) and Minkowski order, as in :func:`tdakit.load_cloud`.
    chunk_rows : int, optional
        Rows per partition (default: one partition per worker). The radii do not depend on it.
    n_cells : int, optional
        Spatial cells (default ``CELLS_PER_WORKER`` per worker holding rows, fewer when cells
        would hold under ``MIN_CELL_ROWS`` rows). At most ``MAX_CELLS_PER_WORKER`` (64) per worker
        holding rows and ``max(FEW_CELLS, n_points // (k + 1))`` are made: more would only add tasks
        (a cell of k rows or fewer sends its points to every other cell). The radii do not depend on it.
    per_point : str or path, optional
        A folder every worker can write: the workers write the radii to ``knn_radius.npy`` there
        and the result is that file memory-mapped read-only. Default: gathered into this process,
        refused with :class:`~tdakit.errors.MemoryBudgetError` before any work when 8 bytes a
        point exceed ``GATHER_LIMIT_BYTES`` of :mod:`tdakit.distributed.landmarks`.

    Returns
    -------
    ndarray of shape (n_points,)
        :math:`\rho_k(x)` in the metric's units, by row.

    Notes
    -----
    Space is cut into cells by median splits on the widest coordinate of a small sample of
    the points (a kd-tree [2]_ with a few leaves per worker). A cell's rows meet on one worker,
    which queries a kd-tree of the cell for each point's k+1 nearest (itself included): their
    largest distance r1 bounds the point's radius from above. A point whose ball of radius r1
    reaches another cell's bounding box (every coordinate difference is at most the distance,
    for every Minkowski order, with minimum images in a periodic box) is sent there, and that
    cell returns its k nearest within r1; the (k+1)-th smallest of all these is the radius.
    Each cell contributes distances to distinct rows, so nothing counts twice; and when the true
    radius T is below r1, every point within T lies in a cell that was asked (at most k of them
    outside the own cell, which keeps the point itself), while T = r1 is already reached in the
    own cell: the (k+1)-th smallest is T either way, the in-memory value. The same
    cells also mark the first occurrence of every repeated point (copies share a cell), which
    :func:`~tdakit.distributed.select_landmarks_distributed` uses for density-weighted landmarks.

    Cost: each row travels once to its cell (8 n_dims + 8 bytes; rows whose cell lives on their
    own worker stay), the boundary points once more to each cell their ball reaches (8 n_dims + 16
    bytes out, 8 k + 8 back), and each radius back to its worker (17 bytes with its row and
    first-occurrence flag); no per-point data passes through this process unless the result is
    gathered. Time: one kd-tree build and one query per cell, plus the boundary queries, and a few
    milliseconds of Dask overhead per task (about 6 + 2 (workers + neighbouring cells) tasks a
    cell). Memory per worker: its rows, a copy cut by cell while they travel, its cells' trees and
    the first-occurrence keys; about 6 times its rows' bytes above an idle worker for 10^7 3-D
    points on 2 workers (measured with ``benchmarks/distributed_density.py``). Copies of one point
    share a cell, so a cloud made mostly of one repeated point loads the worker of that cell.

    References
    ----------
    .. [1] D. O. Loftsgaarden, C. P. Quesenberry, "A nonparametric estimate of a multivariate
       density function", Ann. Math. Statist. 36 (1965) 1049-1051.
    .. [2] J. L. Bentley, "Multidimensional binary search trees used for associative searching",
       Commun. ACM 18 (1975) 509-517.

    Examples
    --------
    ::

        from dask.distributed import Client, LocalCluster
        client = Client(LocalCluster(n_workers=2, threads_per_worker=1))
        radius = knn_radius_distributed("catalogue.npy", k=15, client=client)
    """
    described, cloud_metric = describe_source(source, _FN)
    k = check_int(k, "k", _FN, low=1, high=described.n_rows - 1, note="neighbours, fewer than the points")
    chosen_metric = resolve_metric(metric, box, p, cloud_metric, described.n_cols, _FN)
    if n_cells is not None:
        n_cells = check_int(n_cells, "n_cells", _FN, low=1, note="spatial cells")
    client = get_client(client, _FN)
    outputs = _radius_file(per_point, described.n_rows)  # after the client: a refused call leaves no file
    workers = Workers(client, described, chosen_metric, 1, chunk_rows, _FN)
    try:
        compute_radii(workers, k, n_cells)
        parts = [part for reply in workers.call("density_radius", outputs) for part in reply]
    finally:
        workers.close()
    if outputs is not None:
        return np.load(outputs["radius"], mmap_mode="r")
    radius = np.empty(described.n_rows)
    for offset, values in parts:
        radius[offset:offset + values.size] = values
    return radius


def _radius_file(per_point, n_rows: int) -> dict | None:
    from tdakit.distributed.landmarks import GATHER_LIMIT_BYTES

    return per_point_outputs(per_point, n_rows, {"radius": ("knn_radius.npy", np.float64)}, "kNN radius",
                             GATHER_LIMIT_BYTES, _FN)


def compute_radii(workers: Workers, k: int, n_cells: int | None) -> dict:
    """Every row's kNN radius and first-occurrence flag, kept by the actor holding the row (see the Notes above).

    Returns what the run cost: per partition (offset, rows, first occurrences, smallest positive radius)
    under ``"partitions"``, the cells, the bytes of each pass, seconds.
    """
    began = time.perf_counter()
    plan = _Plan(workers, k, n_cells)
    first, pass_one = plan.first_pass()
    halo, targets = plan.halo(first)
    merged = plan.merge(first, plan.second_pass(first, halo, targets))
    partitions = sorted(part for reply in workers.client.gather(plan.keep(merged)) for part in reply)
    halo_rows = sum(rows for reached in targets.values() for rows, _ in reached.values())
    crossing = [(rows, size) for c, reached in targets.items() for other, (rows, size) in reached.items()
                if plan.home[c] != plan.home[other]]  # balls (and their answers) that change worker
    pass_two = sum(size + rows * (8 * k + 8) for rows, size in crossing)
    return {"partitions": partitions, "cells": plan.n_cells, "pass_one_bytes": int(pass_one),
            "pass_two_bytes": int(pass_two), "halo_rows": int(halo_rows), "seconds": time.perf_counter() - began}


class _Plan:
    """The tasks of one radius computation: where each cell lives, and how pieces reach the tasks that need them.

    A piece travels as its own small task's result (``item``) only when it changes worker; on the same
    worker the consumer takes it from the producer's mapping, so no copy and no extra task.
    """

    def __init__(self, workers: Workers, k: int, n_cells: int | None):
        self.client, self.metric, self.k = workers.client, workers.metric, k
        where = self.client.who_has(workers._futures)
        self.keys = [future.key for future in workers._futures]
        self.addresses = [sorted(where[key])[0] for key in self.keys]
        samples = [s for s in workers.call("density_sample", max(1, SAMPLE_ROWS // len(self.keys))) if s.size]
        if n_cells is None:
            n_cells = max(1, min(CELLS_PER_WORKER * len(self.keys), workers.source.n_rows // MIN_CELL_ROWS))
        n_cells = min(n_cells, max(FEW_CELLS, workers.source.n_rows // (k + 1)), MAX_CELLS_PER_WORKER * len(self.keys))
        self.spec = build_cells(np.concatenate(samples), n_cells)
        self.n_cells = int(self.spec["n_cells"])
        self.home = [self.addresses[c % len(self.addresses)] for c in range(self.n_cells)]
        self.dims = 3 if self.metric.name == "angular" else workers.source.n_cols
        self.owners = _owners(workers)

    def on(self, address: str, function, *args):
        return self.client.submit(function, *args, workers=[address], allow_other_workers=False, pure=False)

    def send(self, pieces: list, to: str, function, *args):
        """``function(*args, picks, *sources)`` on ``to``, for ``pieces`` = [(mapping future, key, its worker)]."""
        picks, sources = [], []
        for mapping, key, at in pieces:
            picks.append(key if at == to else None)
            sources.append(mapping if at == to else self.on(at, tasks.item, mapping, key))
        return self.on(to, function, *args, picks, *sources)

    def first_pass(self) -> tuple[dict, int]:
        cut = [self.on(a, tasks.cut_rows, key, self.spec) for a, key in zip(self.addresses, self.keys)]
        sizes = self.client.gather([self.on(a, tasks.piece_sizes, c) for a, c in zip(self.addresses, cut)])
        first = {}
        for c in range(self.n_cells):
            pieces = [(cut[w], c, a) for w, a in enumerate(self.addresses) if c in sizes[w]]
            if pieces:
                first[c] = self.send(pieces, self.home[c], tasks.first_pass, self.k, self.metric)
        moved = sum(size[c][1] for w, size in enumerate(sizes) for c in size if self.home[c] != self.addresses[w])
        return first, moved

    def halo(self, first: dict) -> tuple[dict, dict]:
        boxes = self.client.gather([self.on(self.home[c], tasks.box_of, first[c]) for c in first])
        lows = np.full((self.n_cells, self.dims), np.inf)
        highs = np.full_like(lows, -np.inf)
        for c, (low, high, _, _) in zip(first, boxes):
            lows[c], highs[c] = low, high
        halo = {c: self.on(self.home[c], tasks.halo_out, first[c], c, lows, highs, self.metric) for c in first}
        targets = self.client.gather([self.on(self.home[c], tasks.piece_sizes, halo[c]) for c in halo])
        return halo, dict(zip(halo, targets))

    def second_pass(self, first: dict, halo: dict, targets: dict) -> dict:
        incoming: dict[int, list] = {}
        for c, reached in targets.items():
            for other in reached:
                incoming.setdefault(other, []).append((halo[c], other, self.home[c], c))
        answers: dict[int, list] = {}
        for other, pieces in incoming.items():
            cells = [c for *_, c in pieces]
            found = self.send([piece[:3] for piece in pieces], self.home[other], tasks.second_pass, first[other],
                              self.k, self.metric, cells)
            for c in cells:
                answers.setdefault(c, []).append((found, c, self.home[other]))
        return answers

    def merge(self, first: dict, answers: dict) -> dict:
        return {c: self.send(answers.get(c, []), self.home[c], tasks.merge, first[c], self.k, self.metric,
                             self.owners) for c in first}

    def keep(self, merged: dict) -> list:
        return [self.send([(merged[c], w, self.home[c]) for c in merged], address, tasks.keep, key)
                for w, (address, key) in enumerate(zip(self.addresses, self.keys))]


def _owners(workers: Workers) -> tuple[list[int], list[int]]:
    """(first row of every partition, sorted; the index of the worker holding it)."""
    parts = sorted((offset, w) for w, reply in enumerate(workers.call("density_offsets")) for offset in reply)
    return [offset for offset, _ in parts], [w for _, w in parts]


def density_landmarks(workers: Workers, n_landmarks: int, power: float, neighbors: int,
                      generator: np.random.Generator, function: str) -> tuple[np.ndarray, dict]:
    """Density-weighted landmarks, as ``tdakit.select_landmarks(method="density")`` draws them; and the radii's cost.

    The in-memory routine races the distinct points (first occurrences, in row order) with one exponential
    each from ``generator``. Here the driver walks the generator once: before each partition's first
    candidate it records the state, then draws and discards that partition's count; each worker restores
    the states of its partitions and draws the same numbers. Only the race's winners come back.
    """
    if not isinstance(getattr(np.random, type(generator.bit_generator).__name__, None), type):
        raise fail("rng", function, "a Generator over one of numpy's bit generators (PCG64, Philox, SFC64, ...), which "
                   "the workers rebuild from its state", generator)
    cost = compute_radii(workers, neighbors, None)
    parts = cost["partitions"]
    _check_distinct(parts, n_landmarks, function)
    clamp = min(p[3] for p in parts)
    if not np.isfinite(clamp):
        raise InvalidDataError(f"Every point has {neighbors} exact copies, so kNN densities are undefined; "
                               f"reduce 'density_neighbors' or remove repeats.", parameter="density_neighbors")
    top = max(workers.call("density_log_weight_max", power, clamp))
    states = {}
    for offset, _, count, _ in parts:
        if count:
            states[offset] = generator.bit_generator.state
            skip_exponentials(generator, count)
    replies = workers.call("density_race", power, clamp, top, states, n_landmarks)
    _, rows = tasks.smallest(np.concatenate([r[0] for r in replies]), np.concatenate([r[1] for r in replies]),
                             n_landmarks)
    return np.sort(rows).astype(np.intp), cost


def skip_exponentials(generator: np.random.Generator, count: int) -> None:
    """Advance ``generator`` past ``count`` standard exponentials, drawn (and dropped) a block at a time."""
    for start in range(0, count, tasks.QUERY_ROWS * 16):
        generator.exponential(size=min(tasks.QUERY_ROWS * 16, count - start))


def core_landmarks(workers: Workers, n_landmarks: int, keep_fraction: float, neighbors: int, start: int | None,
                   generator: np.random.Generator, function: str, progress=None) -> tuple[np.ndarray, dict]:
    """Maxmin among the ``keep_fraction`` densest rows, as ``tdakit.select_landmarks(method="core_maxmin")``.

    The kept rows are the ``ceil(keep_fraction n)`` smallest (radius, row) pairs: the driver finds the
    threshold radius by bisection over the bits of the (non-negative) radii, counting on the workers, and
    hands out the rows tied at it lowest first. The workers then hold only their kept rows (ranked by
    global row, so ties break as in memory) while the usual distributed maxmin runs.
    """
    from tdakit.distributed.landmarks import _maxmin

    cost = compute_radii(workers, neighbors, None)
    _check_distinct(cost["partitions"], n_landmarks, function)
    n_rows = sum(p[1] for p in cost["partitions"])
    kept = _select_core(workers, max(1, int(np.ceil(keep_fraction * n_rows))))
    total = sum(count for _, count in kept)
    if total < n_landmarks:
        raise fail("n_landmarks", function, f"at most the {total} kept points (keep_fraction={keep_fraction})",
                   n_landmarks)
    first = start if start is not None else _core_row(workers, kept, int(generator.integers(total)))
    coordinates = workers.coordinates([first])
    found = [1]

    def counted(step: str, done: int, total: int) -> None:
        found[0] = done
        if progress is not None:
            progress(step, done, total)

    holding = workers.call("core_begin")
    try:
        indices, _ = _maxmin(_CoreWorkers(workers, holding, coordinates), n_landmarks, first, workers.metric,
                             counted)
    except InvalidParameterError:  # the kept rows ran out of distinct points: the in-memory wording
        raise InvalidParameterError(
            f"The 'n_landmarks' parameter of {function} must be at most the number of distinct points among the "
            f"candidates, {found[0]}. Got {n_landmarks} instead.", parameter="n_landmarks") from None
    finally:
        workers.call("core_end")
    return indices, cost


def _check_distinct(partitions: list, n_landmarks: int, function: str) -> None:
    n_rows, n_distinct = sum(p[1] for p in partitions), sum(p[2] for p in partitions)
    if n_landmarks > n_distinct:
        raise InvalidParameterError(
            f"The 'n_landmarks' parameter of {function} must be at most the number of distinct points, {n_distinct} "
            f"(the cloud has {n_rows} points, {n_rows - n_distinct} of them repeats). Got {n_landmarks} instead.",
            parameter="n_landmarks")


def _select_core(workers: Workers, keep: int) -> list:
    """Mark the ``keep`` smallest (radius, row) pairs on the workers; (first row, kept rows) per partition."""
    low, high = 0, int(np.array(np.inf).view(np.int64))  # radii >= 0: their bits ascend with their values
    while low < high:  # the smallest radius with at least ``keep`` rows at or below it
        middle = (low + high) // 2
        if sum(workers.call("core_count", float(np.int64(middle).view(np.float64)))) >= keep:
            high = middle
        else:
            low = middle + 1
    threshold = float(np.int64(low).view(np.float64))
    below = sum(workers.call("core_count", float(np.nextafter(threshold, -1.0)))) if threshold > 0 else 0
    quotas, left = {}, keep - below
    for offset, tied in sorted(t for reply in workers.call("core_ties", threshold) for t in reply):
        quotas[offset], left = min(tied, left), left - min(tied, left)
    return sorted(part for reply in workers.call("core_select", threshold, quotas) for part in reply)


def _core_row(workers: Workers, kept: list, position: int) -> int:
    """The global row of the ``position``-th kept row (kept rows in row order)."""
    for offset, count in kept:
        if position < count:
            holder = next(a for a, rows in zip(workers.actors, workers.call("density_offsets")) if offset in rows)
            return holder.core_row_at(offset, position).result()
        position -= count
    raise AssertionError("position beyond the kept rows")  # unreachable: position < the total kept


class _CoreWorkers:
    """``Workers`` as the maxmin loop sees them while the workers hold only their kept rows.

    Only the workers holding kept rows take part; ``start_maxmin`` is followed by ``core_ranks`` (global
    rows as ranks); the first landmark's coordinates were read before the rows were narrowed.
    """

    def __init__(self, workers: Workers, holding: list, first_coordinates: np.ndarray):
        self.workers, self.first = workers, first_coordinates
        self.actors = [actor for actor, rows in zip(workers.actors, holding) if rows]

    def call(self, method: str, *args) -> list:
        replies = [item.result() for item in [getattr(actor, method)(*args) for actor in self.actors]]
        if method == "start_maxmin":
            for item in [actor.core_ranks() for actor in self.actors]:
                item.result()
        return replies

    def coordinates(self, rows) -> np.ndarray:
        return self.first

    @property
    def bytes_moved(self) -> int:
        return self.workers.bytes_moved

    @bytes_moved.setter
    def bytes_moved(self, value: int) -> None:
        self.workers.bytes_moved = value
