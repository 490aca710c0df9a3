"""Maxmin (farthest point) selection with triangle-inequality pruning, compiled with numba.

Every candidate keeps its nearest landmark (its cell) and the distance to it;
cells are singly linked lists in flat arrays, so memory is O(n). When landmark
l joins, a cell j with radius r_j (its farthest member) and d(l_j, l) >= 2 r_j
cannot lose a point to l, because for x in it
d(x, l) >= d(l_j, l) - d(x, l_j) >= r_j >= d(x, l_j); only the other cells are
scanned, and inside a scanned cell only the members farther than
d(l_j, l) / 2 from l_j need a distance. The next landmark is the farthest cell member,
ties to the lowest position, exactly as in the plain loop. Distances are in the metric's working
space, where every metric tdakit embeds obeys the triangle inequality.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from numpy.typing import NDArray

from tdakit.core import _geometry
from tdakit.core.cloud import Cloud

_SLACK = 1.0 + 1e-12
STREAM_ABOVE_DIMS = 4  # prune only with a margin over rounding
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
    """Compile (once) and return the numba kernel, or None when numba is not installed."""
    try:
        from numba import njit
    except ImportError:
        return None

    @njit(cache=True, fastmath=False)
    def dist(work, a, b, mode, p, box):
        total = 0.0
        for k in range(work.shape[1]):
            gap = abs(work[a, k] - work[b, k])
            if mode == _PERIODIC:
                gap = min(gap, box[k] - gap)
            if mode == _EUCLIDEAN or mode == _PERIODIC:
                total += gap * gap
            elif mode == _MANHATTAN:
                total += gap
            elif mode == _CHEBYSHEV:
                total = max(total, gap)
            else:
                total += gap**p
        if mode == _EUCLIDEAN or mode == _PERIODIC:
            return np.sqrt(total)
        if mode == _MINKOWSKI:
            return total ** (1.0 / p)
        return total

    @njit(cache=True)
    def scan(nxt, dist_to, rows, start):
        """Radius and farthest member (lowest cloud index on ties) of the list starting at ``start``."""
        radius, far, i = -1.0, -1, start
        while i != -1:
            if dist_to[i] > radius or (dist_to[i] == radius and rows[i] < rows[far]):
                radius, far = dist_to[i], i
            i = nxt[i]
        return radius, far

    @njit(cache=True)
    def farthest(radius, far, rows, count):
        """The farthest point over all cells (the next landmark), ties to the lowest cloud index."""
        best, pick = -1.0, -1
        for j in range(count):
            if radius[j] > best or (radius[j] == best and rows[far[j]] < rows[pick]):
                best, pick = radius[j], far[j]
        return best, pick

    @njit(cache=True)
    def split(work, rows, dist_to, nxt, owner, head, j, new, target, half, mode, p, box):
        """Move the members of cell j that are nearer to landmark ``new`` into its cell.

        A member within ``half`` (half the landmarks' distance, less a rounding margin) of
        its landmark cannot be nearer to the new one: d(x, new) >= d(l_j, new) - d(x, l_j)
        >= d(x, l_j). Only the others cost a distance. Returns the cell's new radius and
        farthest member.
        """
        prev, i, kept_radius, kept_far = -1, head[j], -1.0, -1
        while i != -1:
            following = nxt[i]
            moves = False
            if dist_to[i] > half:
                d = dist(work, i, target, mode, p, box)
                moves = d < dist_to[i]
            if moves:
                if prev == -1:
                    head[j] = following
                else:
                    nxt[prev] = following
                nxt[i] = head[new]
                head[new] = i
                dist_to[i] = d
                owner[i] = new
            else:
                prev = i
                if dist_to[i] > kept_radius or (dist_to[i] == kept_radius and rows[i] < rows[kept_far]):
                    kept_radius, kept_far = dist_to[i], i
            i = following
        return kept_radius, kept_far

    @njit(cache=True)
    def maxmin(work, rows, first_pos, n_landmarks, mode, p, box, slack):
        n = rows.size
        dist_to = np.empty(n)
        nxt = np.empty(n, dtype=np.int64)
        owner = np.zeros(n, dtype=np.int64)
        head = np.full(n_landmarks, -1, dtype=np.int64)
        radius = np.full(n_landmarks, -1.0)
        far = np.full(n_landmarks, -1, dtype=np.int64)
        chosen = np.empty(n_landmarks, dtype=np.int64)  # positions in work
        chosen[0] = first_pos
        for i in range(n):
            dist_to[i] = dist(work, i, first_pos, mode, p, box)
            nxt[i] = i + 1 if i + 1 < n else -1
        head[0] = 0 if n > 0 else -1
        radius[0], far[0] = scan(nxt, dist_to, rows, head[0])
        count = 1
        while count < n_landmarks:
            best, pick = farthest(radius, far, rows, count)
            if best <= 0.0:
                break
            new = count
            chosen[new] = pick
            for j in range(count):
                if radius[j] <= 0.0:
                    continue
                between = dist(work, chosen[j], chosen[new], mode, p, box)
                if between < 2.0 * radius[j] * slack:
                    radius[j], far[j] = split(work, rows, dist_to, nxt, owner, head, j, new, chosen[new],
                                              0.5 * between / slack, mode, p, box)
            radius[new], far[new] = scan(nxt, dist_to, rows, head[new])
            count += 1
        return chosen[:count], owner, dist_to

    @njit(cache=True)
    def maxmin_stream(work, rows, first_pos, n_landmarks, mode, p, box, slack):
        """The same selection with cells as labels instead of lists: one sequential pass per landmark.

        In many dimensions the cell test rarely prunes, and following the lists costs more than
        streaming; the members ruled out by the half-distance test still need no distance.
        """
        n = rows.size
        dist_to = np.empty(n)
        owner = np.zeros(n, dtype=np.int64)
        radius = np.full(n_landmarks, -1.0)
        far = np.full(n_landmarks, -1, dtype=np.int64)
        half = np.empty(n_landmarks)
        chosen = np.empty(n_landmarks, dtype=np.int64)
        chosen[0] = first_pos
        for i in range(n):
            dist_to[i] = dist(work, i, first_pos, mode, p, box)
            if dist_to[i] > radius[0] or (dist_to[i] == radius[0] and rows[i] < rows[far[0]]):
                radius[0], far[0] = dist_to[i], i
        count = 1
        while count < n_landmarks:
            best, pick = farthest(radius, far, rows, count)
            if best <= 0.0:
                break
            new = count
            chosen[new] = pick
            for j in range(count):  # half < 0 marks a cell the new landmark cannot touch
                between = dist(work, chosen[j], pick, mode, p, box)
                touched = radius[j] > 0.0 and between < 2.0 * radius[j] * slack
                half[j] = 0.5 * between / slack if touched else -1.0
                if touched:
                    radius[j], far[j] = -1.0, -1
            for i in range(n):
                j = owner[i]
                if half[j] < 0.0:
                    continue
                if dist_to[i] > half[j]:
                    d = dist(work, i, pick, mode, p, box)
                    if d < dist_to[i]:
                        dist_to[i], owner[i] = d, new
                        if d > radius[new] or (d == radius[new] and rows[i] < rows[far[new]]):
                            radius[new], far[new] = d, i
                        continue
                if dist_to[i] > radius[j] or (dist_to[i] == radius[j] and rows[i] < rows[far[j]]):
                    radius[j], far[j] = dist_to[i], i
            count += 1
        return chosen[:count], owner, dist_to

    return maxmin, maxmin_stream


@lru_cache(maxsize=1)
def _curve_kernel():
    """Compile (once) the Z-order layout: 30-bit codes and a two-pass radix sort, O(n)."""
    from numba import njit

    @njit(cache=True)
    def order(work, low, scale, dims):
        n = work.shape[0]
        code = np.zeros(n, dtype=np.uint32)
        for i in range(n):
            value = 0
            for axis in range(dims):
                cell = int((work[i, axis] - low[axis]) * scale[axis])
                for bit in range(10):
                    value |= ((cell >> bit) & 1) << (bit * dims + axis)
            code[i] = value
        ranked = np.arange(n)
        spare = np.empty(n, dtype=np.int64)
        for shift in (0, 15):  # stable counting sort on 15 bits at a time
            counts = np.zeros(32769, dtype=np.int64)
            for i in range(n):
                counts[((code[ranked[i]] >> shift) & 32767) + 1] += 1
            for b in range(32768):
                counts[b + 1] += counts[b]
            for i in range(n):
                key = (code[ranked[i]] >> shift) & 32767
                spare[counts[key]] = ranked[i]
                counts[key] += 1
            ranked, spare = spare, ranked
        return ranked

    return order


def _morton_order(work: NDArray[np.float64]) -> NDArray[np.intp]:
    """Order of the points along a Z-order curve of their first three coordinates (memory locality)."""
    dims = min(3, work.shape[1])
    low = work[:, :dims].min(axis=0)
    span = work[:, :dims].max(axis=0) - low
    scale = np.where(span > 0, 1023.0 / np.where(span > 0, span, 1.0), 0.0)
    return _curve_kernel()(work, low, scale, dims)


def compiled_maxmin(cloud: Cloud, n_landmarks: int, rows: NDArray[np.intp], first: int):
    """Pruned maxmin among ``rows``; None when numba is unavailable (the caller then streams).

    Returns (landmarks, owner, distance): the chosen cloud indices (fewer when the candidates
    run out of distinct points), and for each row the position of its nearest landmark and the
    working-space distance to it. The points are first laid out along a Z-order curve so that
    each cell's members sit close in memory; ties still go to the lowest cloud index.
    """
    kernel = _kernel()
    if kernel is None or cloud.distance_matrix is not None:
        return None
    mode, p, box = distance_mode(cloud)
    rows = np.asarray(rows, dtype=np.int64)
    candidates = rows if np.isin(first, rows) else np.concatenate((rows, [first]))
    work = _geometry.working_points(cloud)
    whole = candidates.size == work.shape[0] and np.array_equal(candidates, np.arange(work.shape[0]))
    order = _morton_order(work if whole else work[candidates])
    keys = candidates[order]
    first_pos = int(np.flatnonzero(keys == first)[0])
    laid_out = work[keys]  # the one copy of the coordinates, in curve order
    # Lists win while the cell test prunes (few coordinates); streaming wins beyond (measured crossover).
    routine = kernel[0] if work.shape[1] <= STREAM_ABOVE_DIMS else kernel[1]
    chosen, owner, distance = routine(laid_out, keys, first_pos, int(n_landmarks), mode, p, box, _SLACK)
    del laid_out
    back = np.empty_like(order)
    back[order] = np.arange(order.size)
    keep = back[: rows.size]  # the rows come first among the candidates
    return keys[chosen], owner[keep], distance[keep]
