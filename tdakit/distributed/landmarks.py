"""Landmarks and their coverage radius for a cloud spread over the workers of a Dask cluster."""

from __future__ import annotations

import time
from collections.abc import Callable
from pathlib import Path

import numpy as np

from tdakit._validation import check_choice, check_float, check_int, check_rng, fail
from tdakit.core.geometry.landmarks import Landmarks
from tdakit.distributed._cluster import Workers, describe_source, get_client, per_point_outputs, resolve_metric
from tdakit.distributed._worker import KEEP_ROWS
from tdakit.distributed.density import core_landmarks, density_landmarks
from tdakit.errors import InvalidParameterError

__all__ = ["select_landmarks_distributed", "DISTRIBUTED_METHODS", "GATHER_LIMIT_BYTES"]

DISTRIBUTED_METHODS = ("maxmin", "random", "density", "core_maxmin")
# Per-point results (nearest landmark and distance, 16 bytes a point) come back to this process up to this size;
# above it they go to files (``per_point=<folder>``) or the call is refused before it starts.
GATHER_LIMIT_BYTES = 2 * 2**30
# Farthest boxes each worker sends per round, and at most how many landmarks one round settles.
BOXES_PER_ROUND = 32
MAX_PER_ROUND = 64
_FN = "select_landmarks_distributed"


def select_landmarks_distributed(
    source,
    n_landmarks: int,
    *,
    method: str = "maxmin",
    client=None,
    metric=None,
    box=None,
    p: float | None = None,
    rng: int | np.random.Generator | None = None,
    start: int | None = None,
    density_power: float = 1.0,
    density_neighbors: int | None = None,
    keep_fraction: float = 0.9,
    chunk_rows: int | None = None,
    per_point: str | Path | None = None,
    progress: Callable[[str, int, int], None] | None = None,
    keep_rows: str = "auto",
) -> Landmarks:
    r"""Landmarks of a cloud held by the workers of a Dask cluster, identical to :func:`tdakit.select_landmarks`.

    Each worker reads and keeps its own rows (and, for maxmin, every point's distance to its
    nearest landmark); per landmark the driver sends the new landmark's coordinates and each
    worker answers with its farthest point (distance, row, coordinates): one small reduction
    per landmark. The coverage radius is computed exactly, over every point.

    Parameters
    ----------
    source : str or path, numpy array or memmap, dask array, or Cloud
        The points, shape (n_points, n_dims). A ``.npy`` path (or a memmap) is mapped by each
        worker itself, so the rows never pass through this process; a dask array is computed on
        the cluster and each worker keeps the blocks it computed; a numpy array or a Cloud in
        this process is sent to the workers once.
    n_landmarks : int
        How many landmarks, at least 1 and at most the number of distinct points.
    method : {"maxmin", "random", "density", "core_maxmin"}, default="maxmin"
        As in :func:`tdakit.select_landmarks`: sequential farthest point, ties to the lowest
        row; uniform without replacement; density-weighted without replacement among the
        distinct points; or maxmin among the ``keep_fraction`` densest points. All give the
        in-memory routine's landmarks for the same ``rng`` and ``start``, whatever the number of
        workers and partitions. Maxmin refuses more landmarks than distinct points when it runs
        out of them; ``"random"`` does not count distinct points (that needs every row in one
        place), so on a cloud with repeats it may pick copies of one point where the in-memory
        routine would refuse. ``"density"`` and ``"core_maxmin"`` first compute every point's
        exact kNN radius and first occurrence on the cluster
        (:func:`~tdakit.distributed.knn_radius_distributed`, whose Notes give the cost);
        ``"density"`` then replays the in-memory random
        stream partition by partition (the driver draws and discards one exponential per distinct
        point, no per-point data moves); ``"core_maxmin"`` finds the densest rows' threshold by
        bisection and runs the maxmin above on them (each worker holds a copy of its kept rows
        meanwhile).
    client : dask.distributed.Client, optional
        The cluster (default: the current client). A ``LocalCluster`` on one machine, or a
        cluster from dask-jobqueue on SLURM/PBS (see Examples).
    metric : str or Metric, optional
        Any coordinate metric (default ``"euclidean"``; with a Cloud, the Cloud's own and this
        must be None). ``"precomputed"`` is refused.
    box, p : optional
        Periodic box side(s) and Minkowski order, as in :func:`tdakit.load_cloud`.
    rng : int, Generator or None
        Randomness for the first maxmin landmark (when ``start`` is omitted; among the kept
        points for ``"core_maxmin"``) and for ``"random"`` and ``"density"``; the same seed gives
        the in-memory routine's landmarks.
    start : int, optional
        Row of the first maxmin landmark.
    density_power : float, default=1.0
        Exponent of the density weight (``"density"`` only), in [-10, 10].
    density_neighbors : int, optional
        k of the kNN density (``"density"``, ``"core_maxmin"``), in [1, n_points - 1]; default
        ``min(15, n_points - 1)``.
    keep_fraction : float, default=0.9
        Fraction of densest points kept by ``"core_maxmin"``, in (0, 1].
    chunk_rows : int, optional
        Rows per partition (default: one partition per worker; for a dask array, its own
        row chunks). The landmarks do not depend on it.
    per_point : str or path, optional
        A folder (on a file system every worker can write, e.g. the cluster's shared scratch)
        where each worker writes its rows' nearest landmark and distance into
        ``nearest.npy`` and ``distance_to_nearest.npy``; the result then holds them memory-mapped
        read-only. Default: gathered into this process, refused with
        :class:`~tdakit.errors.MemoryBudgetError` above ``GATHER_LIMIT_BYTES`` (16 bytes a point).
    progress : callable, optional
        ``progress("landmarks", done, total)`` after each landmark.
    keep_rows : {"auto", "memory", "disk"}, default="auto"
        Where each worker keeps its rows' working coordinates (cut into boxes) and their order for
        the whole call. ``"memory"``: in the worker's own memory (8 n_dims + 16 bytes a point).
        ``"disk"``: in a scratch file in the worker's local directory (Dask's ``local_directory``),
        memory-mapped, so that they sit in the kernel's page cache (reclaimable) and only each point's
        nearest landmark and distance stay in the worker's memory (12 bytes a point); the file needs
        8 n_dims + 4 bytes a point of free local disk (not a tmpfs, where mapped pages are memory), is
        written once while loading and removed when the call ends or fails (or the worker dies).
        ``"auto"``: each worker chooses disk when its rows and state would exceed half its memory limit
        (the machine's memory without one) and its local directory is not on a tmpfs or ramfs. The
        landmarks and results are identical in every mode; ``params["cluster"]["keep_rows"]`` says
        which was used ("mixed" when the workers chose differently). A local directory that cannot
        hold the file raises :class:`~tdakit.errors.OutputWriteError` naming ``keep_rows``.

    Returns
    -------
    Landmarks
        The same fields as :func:`tdakit.select_landmarks`; ``params["cluster"]`` adds the
        number of workers and partitions, rounds, seconds spent loading and selecting, and the
        bytes the selection rounds exchanged.

    Notes
    -----
    Exact maxmin: every worker keeps its points cut into boxes, as the in-memory compiled
    routine does, and updates only the boxes a new landmark can reach. Per round each worker
    sends its ``BOXES_PER_ROUND`` farthest boxes (farthest point, its row and coordinates, and the
    box); the driver settles the next landmark (the farthest, ties to the lowest row) and then
    every further one it can prove from those boxes alone: the best listed point must beat
    strictly an upper bound on every point it has not seen (see ``_settle``). The workers then
    add the settled landmarks in order. Distances are computed by the same compiled code in the
    same coordinate order, so even exact ties break as in memory; the rounds only change how
    many landmarks travel together (about 12 a round for 1,000 landmarks of 10^7 points).
    Cost: rounds x (round-trip latency + the slowest worker's pass) plus each worker reading its
    rows once; a round moves about 8 (2 + 3 n_dims) ``BOXES_PER_ROUND`` bytes per worker. Memory
    per worker: its rows (8 n_dims bytes a point) and 16 bytes a point of state with
    ``keep_rows="memory"``; 12 bytes a point of private memory with ``"disk"`` (the rest mapped from
    its scratch file). See "Beyond one
    machine" in ``benchmarks/README.md`` for measured numbers and a cost model.

    References
    ----------
    .. [1] T. F. Gonzalez, "Clustering to minimize the maximum intercluster distance",
       Theoret. Comput. Sci. 38 (1985) 293-306.

    Examples
    --------
    On one machine::

        from dask.distributed import Client, LocalCluster
        client = Client(LocalCluster(n_workers=2, threads_per_worker=1))
        marks = select_landmarks_distributed("catalogue.npy", 1000, rng=0, client=client)

    On a SLURM cluster with dask-jobqueue (install it separately; the queue, account and sizes
    below are placeholders for your site's)::

        from dask.distributed import Client
        from dask_jobqueue import SLURMCluster
        cluster = SLURMCluster(cores=1, processes=1, memory="4GB", walltime="01:00:00",
                               queue="normal", account="my-project")
        cluster.scale(jobs=32)              # 32 workers, one per job
        client = Client(cluster)
        client.wait_for_workers(32)
        marks = select_landmarks_distributed("/scratch/catalogue.npy", 1000, rng=0, client=client,
                                             per_point="/scratch/marks")
    """
    method = check_choice(method, "method", _FN, DISTRIBUTED_METHODS)
    described, cloud_metric = describe_source(source, _FN)
    n_landmarks = check_int(n_landmarks, "n_landmarks", _FN, low=1, high=described.n_rows,
                            note="at most the number of points")
    chosen_metric = resolve_metric(metric, box, p, cloud_metric, described.n_cols, _FN)
    generator = check_rng(rng, _FN)
    if start is not None:
        start = check_int(start, "start", _FN, low=0, high=described.n_rows - 1, note="a point index")
    density = _density_options(method, density_power, density_neighbors, keep_fraction, described)
    if progress is not None and not callable(progress):
        raise fail("progress", _FN, "None or a callable progress(step, done, total)", progress)
    keep_rows = check_choice(keep_rows, "keep_rows", _FN, KEEP_ROWS)
    client = get_client(client, _FN)
    outputs = _per_point_files(per_point, described.n_rows)
    params = {"start": start, "seed": int(rng) if isinstance(rng, (int, np.integer)) and
              not isinstance(rng, bool) else None}
    began = time.perf_counter()
    workers = Workers(client, described, chosen_metric, n_landmarks, chunk_rows, _FN, keep_rows=keep_rows)
    try:
        loaded = time.perf_counter()
        if method == "maxmin":
            first = start if start is not None else int(generator.integers(described.n_rows))
            indices, rounds = _maxmin(workers, n_landmarks, first, chosen_metric, progress)
            per_row = workers.call("maxmin_per_point", outputs)
        elif method == "density":
            indices, _ = density_landmarks(workers, n_landmarks, *density, generator, _FN)
            params.update(density_power=density[0], density_neighbors=density[1])
            rounds = 1
            per_row = workers.call("nearest_landmarks", workers.coordinates(indices), indices.tolist(), outputs)
            if progress is not None:
                progress("landmarks", n_landmarks, n_landmarks)
        elif method == "core_maxmin":
            indices, _ = core_landmarks(workers, n_landmarks, *density, start, generator, _FN, progress)
            params.update(keep_fraction=density[0], density_neighbors=density[1])
            rounds = 1
            per_row = workers.call("nearest_landmarks", workers.coordinates(indices), indices.tolist(), outputs)
        else:
            indices = np.sort(generator.choice(described.n_rows, size=n_landmarks, replace=False)).astype(np.intp)
            rounds = 1
            per_row = workers.call("nearest_landmarks", workers.coordinates(indices), indices.tolist(), outputs)
            if progress is not None:
                progress("landmarks", n_landmarks, n_landmarks)
        finished = time.perf_counter()
        params["cluster"] = {"workers": len(workers.actors), "partitions": workers.n_partitions, "rounds": rounds,
                             "load_seconds": loaded - began, "select_seconds": finished - loaded,
                             "bytes_moved": workers.bytes_moved, "keep_rows": workers.keep_rows}
    finally:
        workers.close()
    nearest, distance, radius = _assemble(per_row, outputs, described.n_rows)
    return _wrap(indices, radius, nearest, distance, method, params)


def _density_options(method: str, power, neighbors, keep_fraction, described) -> tuple | None:
    """("density") the weight's power and neighbours, or ("core_maxmin") the kept fraction and neighbours,
    checked as in memory; None for the other methods.
    """
    if method not in ("density", "core_maxmin"):
        return None
    n_rows = described.n_rows
    if method == "density":
        first = check_float(power, "density_power", _FN, low=-10.0, high=10.0)
    else:
        first = check_float(keep_fraction, "keep_fraction", _FN, low=0.0, high=1.0, low_open=True)
    neighbors = check_int(min(15, n_rows - 1) if neighbors is None else neighbors, "density_neighbors", _FN, low=1,
                          high=n_rows - 1)
    return first, neighbors


def _maxmin(workers: Workers, n_landmarks: int, first: int, metric, progress) -> tuple[np.ndarray, int]:
    """The selection loop: per round, the workers add the landmarks chosen since the last one and send their
    farthest boxes; from those the driver settles as many next landmarks as it can prove (see ``_settle``).
    """
    from tdakit.core.geometry._maxmin import _GROUP, _LEAF_SIZE, _SLACK

    workers.call("start_maxmin", _LEAF_SIZE, _GROUP)
    chosen: list[int] = []
    pending, coordinates = [first], workers.coordinates([first])
    rounds = 0
    while True:
        replies = workers.call("add_landmarks", len(chosen), coordinates, _SLACK, BOXES_PER_ROUND)
        rounds += 1
        workers.bytes_moved += len(replies) * (np.asarray(coordinates).nbytes + 64) + sum(
            sum(v.nbytes for v in reply.values() if isinstance(v, np.ndarray)) + 64 for reply in replies)
        chosen.extend(pending)
        if progress is not None:
            progress("landmarks", len(chosen), n_landmarks)
        if len(chosen) == n_landmarks:
            return np.asarray(chosen, dtype=np.intp), rounds
        pending, coordinates = _settle(replies, n_landmarks - len(chosen), metric)
        if not pending:
            raise InvalidParameterError(
                f"The 'n_landmarks' parameter of {_FN} must be at most the number of distinct points, "
                f"{len(chosen)}. Got {n_landmarks} instead.", parameter="n_landmarks")


def _settle(replies: list[dict], wanted: int, metric) -> tuple[list[int], np.ndarray]:
    """The next landmarks that the workers' farthest boxes prove, in order (at least one unless all are at 0).

    The farthest point of the farthest boxes is the next landmark. After it joins, each listed point's
    distance is known exactly (the same arithmetic as the workers'); the other points of a box are at
    most its value, and at most their farthest distance from each new landmark; a box whose listed point
    has not moved keeps that point first (its others are no farther, and tie at higher rows); every
    unlisted box is at most the workers' ``bound``. The best listed point is the next landmark too when
    it beats strictly every bound of the unlisted boxes and of the boxes whose listed point moved; else
    the round ends.
    """
    value = np.concatenate([r["value"] for r in replies])
    row = np.concatenate([r["row"] for r in replies])
    coords = np.concatenate([r["coordinates"] for r in replies])
    low, high = np.concatenate([r["low"] for r in replies]), np.concatenate([r["high"] for r in replies])
    unlisted = max(r["bound"] for r in replies)
    current = value.copy()  # each listed point's distance to the landmarks so far (exact)
    limit = value.copy()  # at least the distance of every point of the box
    moved = np.zeros(value.size, dtype=bool)  # listed points nearer to a new landmark: their boxes' others unknown
    picked: list[int] = []
    while len(picked) < min(wanted, MAX_PER_ROUND):
        best = _first_best(current, row)
        if best < 0 or current[best] <= 0.0:
            break
        if picked and current[best] <= max(unlisted, float(limit[moved].max(initial=-1.0))):
            break
        picked.append(best)
        target = coords[best]
        current = np.minimum(current, metric.working_to_point(coords, target))
        moved |= current < value
        limit = np.minimum(limit, _farthest_corner(low, high, target, metric))
    return [int(row[i]) for i in picked], coords[picked]


def _first_best(current: np.ndarray, row: np.ndarray) -> int:
    if current.size == 0:
        return -1
    top = current.max()
    tied = np.flatnonzero(current == top)
    return int(tied[np.argmin(row[tied])])


def _farthest_corner(low: np.ndarray, high: np.ndarray, target: np.ndarray, metric) -> np.ndarray:
    """An upper bound on the working distance from ``target`` to any point of each box (rounding allowed for)."""
    gap = np.maximum(np.abs(target - low), np.abs(high - target))
    if metric.name == "periodic":
        gap = np.minimum(gap, np.asarray(metric.box) / 2.0)
    if np.isinf(metric.p):
        far = gap.max(axis=1)
    elif metric.p == 1.0:
        far = gap.sum(axis=1)
    else:
        far = (gap**metric.p).sum(axis=1) ** (1.0 / metric.p)
    return far * (1.0 + 1e-9)


def _per_point_files(per_point, n_rows: int) -> dict | None:
    """Create the two output files in ``per_point`` (a folder), or check that gathering fits."""
    return per_point_outputs(per_point, n_rows, {"nearest": ("nearest.npy", np.intp),
                                                 "distance": ("distance_to_nearest.npy", np.float64)},
                             "nearest landmark and distance", GATHER_LIMIT_BYTES, _FN)


def _assemble(per_row: list, outputs: dict | None, n_rows: int):
    """Every point's nearest landmark and distance (arrays or read-only memmaps), and the coverage radius."""
    parts = [part for worker_rows in per_row for part in worker_rows]
    radius = max(part[3] for part in parts)
    if outputs is not None:
        return np.load(outputs["nearest"], mmap_mode="r"), np.load(outputs["distance"], mmap_mode="r"), radius
    nearest, distance = np.empty(n_rows, dtype=np.intp), np.empty(n_rows)
    for offset, near, dist, _ in parts:
        nearest[offset:offset + near.size], distance[offset:offset + dist.size] = near, dist
    return nearest, distance, radius


def _wrap(indices, radius, nearest, distance, method, params) -> Landmarks:
    for array in (indices, nearest, distance):
        if isinstance(array, np.ndarray) and not isinstance(array, np.memmap):
            array.setflags(write=False)
    return Landmarks(indices, float(radius), nearest, distance, method, params)
