"""Maxmin (farthest point) selection with triangle-inequality pruning, compiled with numba.

Every candidate keeps its nearest landmark (its cell) and the distance to it. When
landmark l joins, a cell j with radius r_j (its farthest member) and
d(l_j, l) >= 2 r_j cannot lose a point to l, because for x in it
d(x, l) >= d(l_j, l) - d(x, l_j) >= r_j >= d(x, l_j); inside a cell that can, only
the members farther than d(l_j, l) / 2 from l_j need a distance. The next landmark is
the farthest point, ties to the lowest candidate position, exactly as in the plain
loop. Distances are in the metric's working space, where every metric tdakit embeds
obeys the triangle inequality.

Two layouts. With few coordinates (where the cell test prunes most of the cloud)
each cell's members sit in a few contiguous runs of a private copy of the
coordinates, so a scanned cell is read sequentially and a run whose farthest member
is within the half distance is skipped unread. With many coordinates almost every
cell is touched, and each new landmark makes one sequential pass over all points;
for the Euclidean metric that pass reads a float32 copy laid out in blocks of
points, and only points whose float32 distance is within its proven rounding bound
of their current distance get the exact float64 distance, so the choices stay those
of the float64 loop.
"""

from __future__ import annotations

import os
from concurrent.futures import ThreadPoolExecutor
from functools import lru_cache

import numpy as np
from numpy.typing import NDArray

from tdakit.core import _geometry
from tdakit.core.cloud import Cloud

_SLACK = 1.0 + 1e-12  # prune only with a margin over rounding
STREAM_ABOVE_DIMS = 4
_LEAF_SIZE, _GROUP = 64, 32  # points per box, boxes per group
_CHUNK = 256  # points per float32 block: each coordinate's row of a block is one vector loop
_FLOAT32_SPREAD_LIMIT = 1e15  # beyond this, float32 squares could overflow: stream in float64
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
        from tdakit.core import _maxmin_kernels
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
    if mode == _EUCLIDEAN and np.max(np.ptp(points, axis=0)) <= _FLOAT32_SPREAD_LIMIT:
        return _stream_euclidean(kernel, points, first_pos, n_landmarks)
    return kernel.maxmin_stream(points, first_pos, int(n_landmarks), mode, p, box, _SLACK)


def _stream_euclidean(kernel, points, first_pos, n_landmarks):
    """Maxmin with a float32 screen, split over threads: one pass over float32 blocks per landmark.

    With x~, y~ the float32 roundings of x - c and y - c, each rounding moves a point by at
    most 2^-24 R (R the largest norm of x - c), so |x - y| >= |x~ - y~| - A with A = 2^-23 R;
    the float32 sum of dims squared differences errs by at most (dims + 2) 2^-24 of itself
    (N. J. Higham, "Accuracy and Stability of Numerical Algorithms", 2nd ed., SIAM 2002,
    sec. 3.1). A is doubled and the relative bound taken as 2 (dims + 4) 2^-24 for margin.
    A point whose float32 value reaches ((d slack + A) / (1 - relative))^2 cannot be nearer
    to the new landmark than its distance d; every other point gets the exact float64
    distance, so the choices are those of the float64 loop whatever the thread count.
    """
    n, dims = points.shape
    center = 0.5 * (points.min(axis=0) + points.max(axis=0))
    packed, spread = kernel.pack_single(points, center)
    unit = 2.0**-24
    slack, absolute, relative = _SLACK, 4.0 * unit * spread, 2.0 * (dims + 4) * unit
    to_mark = np.full(n, np.inf)
    bound = np.full(n, np.inf, dtype=np.float32)  # no distance yet: every point gets one from the first landmark
    owner = np.zeros(n, dtype=np.int32)
    marks = np.empty((n_landmarks, dims))
    edges = np.linspace(0, packed.shape[0], worker_threads(n * dims) + 1).astype(np.int64)
    chosen, pick = [], first_pos
    with ThreadPoolExecutor(max_workers=edges.size - 1) as pool:
        while len(chosen) < n_landmarks:
            new = len(chosen)
            chosen.append(pick)
            marks[new] = points[pick]
            target = (points[pick] - center).astype(np.float32)
            shared = (to_mark, owner, bound, marks, new, slack, absolute, relative)
            results = list(pool.map(kernel.stream_blocks, *zip(*[
                (points, packed, target, edges[t], edges[t + 1], *shared) for t in range(edges.size - 1)])))
            best, pick = max(results, key=lambda r: (r[0], -r[1]))  # the farthest; ties to the lowest position
            if best <= 0.0:
                break
    return np.asarray(chosen, dtype=np.int64), owner.astype(np.intp), to_mark


def worker_threads(size: int) -> int:
    """Threads for a compiled pass over ``size`` numbers: one below a million, else up to four cores."""
    if size < 2**20:
        return 1
    cores = len(os.sched_getaffinity(0)) if hasattr(os, "sched_getaffinity") else (os.cpu_count() or 1)
    return max(1, min(4, cores))
