"""Maxmin (farthest point) selection, exact and fast, compiled with numba.

Every candidate keeps its nearest landmark and the distance to it; the next landmark is
the farthest candidate, ties to the lowest candidate position, exactly as in the plain
loop (which adds coordinates in the same order, so even exact ties break the same way).
Distances are in the metric's working space, where every metric tdakit embeds obeys the
triangle inequality.

Few coordinates (boxes): a private copy of the points is cut in place into boxes of at
most 64 points by halving the widest side, and consecutive boxes are grouped. Every box
and group keeps the largest distance of its points to their landmarks. When landmark y
joins, a box whose gap to y is at least that distance cannot lose a point
(d(x, y) >= gap >= D(x)) and is skipped unread; inside a scanned box, a point within half
the distance from its landmark l to y cannot move either (d(x, y) >= d(l, y) - d(x, l)
>= d(x, l)) and costs no distance. The next landmark is the best of the group maxima.

Many coordinates (streaming): boxes stop pruning, so each new landmark makes one pass
over all points. For the Euclidean metric the pass reads an int16 fixed-point copy in
blocks of points, vectorised within each block and split over threads, and only the
points whose rough distance is within its proven error bound of their current distance
get the exact float64 distance (see ``_stream_euclidean``).
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray

from tdakit.core.geometry import _geometry
from tdakit.core.geometry.cloud import Cloud

_SLACK = 1.0 + 1e-12  # prune only with a margin over rounding
STREAM_ABOVE_DIMS = 4
_LEAF_SIZE, _GROUP = 64, 32  # points per box, boxes per group
_CHUNK = 256  # points per int16 block: each coordinate's row of a block is one vector loop
_EUCLIDEAN, _MANHATTAN, _CHEBYSHEV, _MINKOWSKI, _PERIODIC = range(5)


def distance_mode(cloud: Cloud) -> tuple[int, float, NDArray[np.float64]]:
    """Kernel code, Minkowski order and box for the cloud's working space."""
    metric = cloud.metric
    box = np.asarray(metric.box if metric.box is not None else [0.0], dtype=np.float64)
    if metric.name == "periodic":
        return _PERIODIC, 2.0, box
    if metric.p == 2.0:
        return _EUCLIDEAN, 2.0, box
    if metric.p == 1.0:
        return _MANHATTAN, 1.0, box
    if np.isinf(metric.p):
        return _CHEBYSHEV, np.inf, box
    return _MINKOWSKI, float(metric.p), box


@lru_cache(maxsize=1)
def _kernel():
    """The compiled routines (compiled or loaded from numba's cache once), or None without numba."""
    try:
        from tdakit.core.geometry import _maxmin_kernels
    except ImportError:
        return None
    return _maxmin_kernels


def compiled_maxmin(cloud: Cloud, n_landmarks: int, rows: NDArray[np.intp] | None, first: int):
    """Pruned maxmin among ``rows`` (every point when None); None when numba is unavailable.

    Returns (landmarks, owner, distance): the chosen cloud indices (fewer when the candidates
    run out of distinct points), and for each row the position of its nearest landmark and the
    working-space distance to it. Ties go to the lowest position among ``rows``, as in the
    plain loop.
    """
    kernel = _kernel()
    if kernel is None or cloud.distance_matrix is not None:
        return None
    work = _geometry.working_points(cloud)
    if rows is None:  # the whole cloud: no index arrays at all
        candidates, count, first_pos = None, work.shape[0], int(first)
    else:
        rows = np.asarray(rows, dtype=np.int64)
        candidates = rows if np.isin(first, rows) else np.concatenate((rows, [first]))
        count, first_pos = rows.size, int(np.flatnonzero(candidates == first)[0])
    # Boxes prune most points in few coordinates; in many, every point is streamed (measured crossover).
    if work.shape[1] <= STREAM_ABOVE_DIMS:
        chosen, owner, distance = _by_boxes(kernel, cloud, work, candidates, first_pos, n_landmarks)
    else:
        points = work if candidates is None else work[candidates]
        chosen, owner, distance = _by_stream(kernel, cloud, points, first_pos, n_landmarks)
    landmarks = chosen if candidates is None else candidates[chosen]
    return landmarks, owner[:count], distance[:count]


def _by_boxes(kernel, cloud, work, candidates, first_pos, n_landmarks):
    mode, p, box = distance_mode(cloud)
    points = work.copy() if candidates is None else work[candidates]  # private: the boxes reorder it
    rank = np.arange(points.shape[0], dtype=np.int32 if points.shape[0] < 2**31 else np.int64)
    chosen, owner, to_mark = kernel.maxmin_tree(points, rank, first_pos, int(n_landmarks), _LEAF_SIZE, _GROUP,
                                                mode, p, box, _SLACK)
    del points  # the reordered copy goes before the outputs are allocated
    owner, distance = kernel.unshuffle(owner, to_mark, rank)
    return chosen, owner, distance


def _by_stream(kernel, cloud, points, first_pos, n_landmarks):
    mode, p, box = distance_mode(cloud)
    if mode == _EUCLIDEAN and np.isfinite(np.ptp(points, axis=0)).all():
        return _stream_euclidean(kernel, points, first_pos, n_landmarks)
    return kernel.maxmin_stream(points, first_pos, int(n_landmarks), mode, p, box, _SLACK)


def _stream_euclidean(kernel, points, first_pos, n_landmarks):
    """Maxmin with a fixed-point screen, split over threads: one pass over int16 blocks per landmark.

    Each coordinate is stored as q = round((x - c) / s), with s the widest side over 65,000,
    so the stored point x^ = c + s q lies within sqrt(dims) s / 2 of x, and
    |x - y| >= s sqrt(S) - A with S the sum of squared step differences and A = sqrt(dims) s.
    The differences are exact in float32 (integers below 2^17); the squares and their sum
    err by at most (dims + 2) 2^-24 of the result (N. J. Higham, "Accuracy and Stability of
    Numerical Algorithms", 2nd ed., SIAM 2002, sec. 3.1). A is doubled and the relative
    bound taken as 2 (dims + 4) 2^-24 for margin. A point whose float32 S reaches
    ((d slack + A) / (s (1 - relative)))^2 cannot be nearer to the new landmark than its
    distance d; every other point gets the exact float64 distance, so the choices are those
    of the float64 loop whatever the thread count.
    """
    n, dims = points.shape
    low, high = points.min(axis=0), points.max(axis=0)
    center, widest = 0.5 * (low + high), float(np.max(high - low))
    step = widest / 65000.0 if widest > 0.0 else 1.0
    packed = kernel.pack_fixed(points, center, step)
    scale = (_SLACK, 2.0 * np.sqrt(dims) * step, 2.0 * (dims + 4) * 2.0**-24, step)
    to_mark = np.full(n, np.inf)
    bound = np.full(n, np.inf, dtype=np.float32)  # no distance yet: every point gets one from the first landmark
    owner = np.zeros(n, dtype=np.int32)
    block_best, block_pick = np.full(packed.shape[0], -1.0), np.full(packed.shape[0], -1, dtype=np.int64)
    marks = np.empty((n_landmarks, dims))
    edges = np.linspace(0, packed.shape[0], worker_threads(n * dims) + 1).astype(np.int64)
    chosen, pick = [], first_pos
    with ThreadPoolExecutor(max_workers=edges.size - 1) as pool:
        run = map if edges.size == 2 else pool.map  # one thread: no hand-over per landmark
        while len(chosen) < n_landmarks:
            new = len(chosen)
            chosen.append(pick)
            marks[new] = points[pick]
            target = np.rint((points[pick] - center) / step).astype(np.int16)
            shared = (to_mark, owner, bound, block_best, block_pick, marks, new, scale)
            results = list(run(kernel.stream_blocks, *zip(*[
                (points, packed, target, edges[t], edges[t + 1], *shared) for t in range(edges.size - 1)])))
            best, pick = max(results, key=lambda r: (r[0], -r[1]))  # the farthest; ties to the lowest position
            if best <= 0.0:
                break
    return np.asarray(chosen, dtype=np.int64), owner.astype(np.intp), to_mark


def worker_threads(size: int) -> int:
    """Threads for a compiled pass over ``size`` numbers.

    One below a million numbers; else up to four of the cores this process may use, and no more
    than ``OMP_NUM_THREADS`` when that is set (Dask's workers set it to 1, so cluster jobs are not
    oversubscribed).
    """
    if size < 2**20:
        return 1
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    limit = os.environ.get("OMP_NUM_THREADS", "")
    if limit.strip().isdigit() and int(limit) > 0:
        cores = min(cores, int(limit))
    return max(1, min(4, cores))
