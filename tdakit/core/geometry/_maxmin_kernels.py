"""The compiled maxmin routines (numba), imported on first use by ``tdakit.core.geometry._maxmin``.

They live at module level so that numba's on-disk cache serves every process: a routine
defined inside a function, calling other such routines, misses the cache and would be
compiled again (seconds) in every new worker process.
"""

import numpy as np
from numba import njit

from tdakit.core.geometry._maxmin import _CHEBYSHEV, _CHUNK, _EUCLIDEAN, _MANHATTAN, _MINKOWSKI, _PERIODIC


@njit(cache=True, inline="always")
def add_gap(total, gap, mode, p):
    """Fold one coordinate's gap into a running working-space distance."""
    if mode == _EUCLIDEAN or mode == _PERIODIC:
        return total + gap * gap
    if mode == _MANHATTAN:
        return total + gap
    if mode == _CHEBYSHEV:
        return max(total, gap)
    return total + gap**p


@njit(cache=True, inline="always")
def finish(total, mode, p):
    """The distance from its running total (root of the sum where the metric has one)."""
    if mode == _EUCLIDEAN or mode == _PERIODIC:
        return np.sqrt(total)
    if mode == _MINKOWSKI:
        return total ** (1.0 / p)
    return total


@njit(cache=True, fastmath=False, inline="always")
def dist(a, i, b, j, mode, p, box):
    """Working-space distance between row i of ``a`` and row j of ``b``, summed in coordinate order."""
    total = 0.0
    for k in range(a.shape[1]):
        gap = abs(a[i, k] - b[j, k])
        if mode == _PERIODIC:
            gap = min(gap, box[k] - gap)
        total = add_gap(total, gap, mode, p)
    return finish(total, mode, p)


@njit(cache=True)
def farthest(radius, far, rank, count):
    """The farthest point over all cells (the next landmark), ties to the lowest rank."""
    best, pick = -1.0, -1
    for j in range(count):
        if radius[j] > best or (radius[j] == best and rank[far[j]] < rank[pick]):
            best, pick = radius[j], far[j]
    return best, pick


@njit(cache=True)
def farthest_position(radius, far, count):
    """``farthest`` when ranks are the positions themselves."""
    best, pick = -1.0, -1
    for j in range(count):
        if radius[j] > best or (radius[j] == best and far[j] < pick):
            best, pick = radius[j], far[j]
    return best, pick


@njit(cache=True, inline="always")
def swap(points, rank, a, b):
    """Exchange two slots (coordinates and rank)."""
    for k in range(points.shape[1]):
        points[a, k], points[b, k] = points[b, k], points[a, k]
    rank[a], rank[b] = rank[b], rank[a]


@njit(cache=True)
def bounds(points, lo, hi, low, high):
    """Bounding box of the slots [lo, hi) into ``low`` and ``high``."""
    for k in range(points.shape[1]):
        low[k], high[k] = points[lo, k], points[lo, k]
    for i in range(lo + 1, hi):
        for k in range(points.shape[1]):
            low[k] = min(low[k], points[i, k])
            high[k] = max(high[k], points[i, k])


@njit(cache=True)
def split(points, rank, lo, hi, axis, cut):
    """Reorder the slots [lo, hi) so that coordinates below ``cut`` on ``axis`` come first
    (two pointers, swapping only misplaced pairs). Returns the first slot of the upper side.
    """
    i, j = lo, hi - 1
    while True:
        while i <= j and points[i, axis] < cut:
            i += 1
        while i <= j and points[j, axis] >= cut:
            j -= 1
        if i >= j:
            return i
        swap(points, rank, i, j)
        i += 1
        j -= 1


@njit(cache=True)
def build_leaves(points, rank, leaf_size):
    """Cut the points (in place) into boxes of at most ``leaf_size``, halving the widest side.

    The halves inherit their parent's box cut in two; a box is measured again only after
    a lopsided cut (at most 1/16 of its points on one side), so that outliers do not cost
    a level each. Returns the leaves' first slots (plus the end) in slot order; leaves that
    would need more than 48 cuts (points spread over many orders of magnitude) stay larger.
    """
    n, dims = points.shape
    first = [0]  # a typed list of ints for numba, emptied at once
    first.clear()
    depth_cap = 48
    todo = np.empty((depth_cap + 2, 3), dtype=np.int64)  # depth-first: at most one pending node per level
    low, high = np.empty((depth_cap + 2, dims)), np.empty((depth_cap + 2, dims))
    bounds(points, 0, n, low[0], high[0])
    todo[0, 0], todo[0, 1], todo[0, 2] = 0, n, 0
    size = 1
    while size > 0:
        size -= 1
        lo, hi, depth = todo[size, 0], todo[size, 1], todo[size, 2]
        axis = np.argmax(high[size] - low[size])
        cut = 0.5 * (low[size, axis] + high[size, axis])
        if hi - lo <= leaf_size or depth >= depth_cap or not (low[size, axis] < cut <= high[size, axis]):
            first.append(lo)
            continue
        middle = split(points, rank, lo, hi, axis, cut)
        # The upper half waits in this node's row; the lower half, in the next, is handled first.
        low[size + 1], high[size + 1] = low[size], high[size]
        high[size + 1, axis], low[size, axis] = cut, cut
        if 16 * min(middle - lo, hi - middle) <= hi - lo:
            if middle > lo:
                bounds(points, lo, middle, low[size + 1], high[size + 1])
            if hi > middle:
                bounds(points, middle, hi, low[size], high[size])
        if hi > middle:
            todo[size, 0], todo[size, 1], todo[size, 2] = middle, hi, depth + 1
            size += 1
        else:  # no upper half: the lower half's box moves down a row
            low[size], high[size] = low[size + 1], high[size + 1]
        if middle > lo:
            todo[size, 0], todo[size, 1], todo[size, 2] = lo, middle, depth + 1
            size += 1
    first.append(n)
    return np.array(first, dtype=np.int64)


@njit(cache=True, inline="always")
def box_gap(low, high, node, marks, new, mode, p, box):
    """A lower bound on the distance from landmark ``new`` to any point in the node's box."""
    total = 0.0
    for k in range(low.shape[1]):
        y = marks[new, k]
        gap = max(low[node, k] - y, y - high[node, k], 0.0)
        if mode == _PERIODIC and gap > 0.0:
            gap = min(gap, box[k] - max(abs(y - low[node, k]), abs(y - high[node, k])))
        total = add_gap(total, gap, mode, p)
    return finish(total, mode, p)


@njit(cache=True)
def scan_leaf(points, rank, to_mark, owner, lo, hi, marks, new, half, stamp, mode, p, box, slack):
    """Give the leaf's points nearer to landmark ``new`` to it; the leaf's radius and farthest slot.

    A point within half the distance from its landmark j to the new one cannot be nearer to
    the new one (d(x, new) >= d(l_j, new) - d(x, l_j) >= d(x, l_j)) and costs no distance.
    That half distance is worked out the first time a landmark's point is met in this pass
    (``stamp[j] == new`` after), so a pass costs nothing for landmarks far away.
    """
    best, pick = -1.0, -1
    for i in range(lo, hi):
        j = owner[i]
        if stamp[j] != new:
            stamp[j] = new
            half[j] = 0.5 * dist(marks, j, marks, new, mode, p, box) / slack
        if to_mark[i] > half[j]:
            d = dist(points, i, marks, new, mode, p, box)
            if d < to_mark[i]:
                to_mark[i], owner[i] = d, new
        if to_mark[i] > best or (to_mark[i] == best and rank[i] < rank[pick]):
            best, pick = to_mark[i], i
    return best, pick


@njit(cache=True)
def leaf_boxes(points, first, group):
    """Boxes of the leaves and of groups of ``group`` consecutive leaves."""
    n_leaves, dims = first.size - 1, points.shape[1]
    n_groups = (n_leaves + group - 1) // group
    low, high = np.empty((n_leaves, dims)), np.empty((n_leaves, dims))
    group_low, group_high = np.empty((n_groups, dims)), np.empty((n_groups, dims))
    for leaf in range(n_leaves):
        bounds(points, first[leaf], first[leaf + 1], low[leaf], high[leaf])
    group_low[:], group_high[:] = np.inf, -np.inf
    for leaf in range(n_leaves):
        for k in range(dims):
            group_low[leaf // group, k] = min(group_low[leaf // group, k], low[leaf, k])
            group_high[leaf // group, k] = max(group_high[leaf // group, k], high[leaf, k])
    return low, high, group_low, group_high


@njit(cache=True)
def maxmin_tree(points, rank, first, n_landmarks, leaf_size, group, mode, p, box, slack):
    """Maxmin over ``points`` (a private copy, reordered in place into boxes), from rank ``first``.

    A box whose gap to the new landmark is at least the largest distance of its points
    to their landmarks cannot lose a point; every box keeps that largest distance and
    its point, so the next landmark is the best of the group maxima. Returns the chosen
    ranks, and each slot's landmark and distance.
    """
    n, dims = points.shape
    starts = build_leaves(points, rank, leaf_size)
    low, high, group_low, group_high = leaf_boxes(points, starts, group)
    n_leaves, n_groups = starts.size - 1, group_low.shape[0]
    to_mark = np.empty(n)
    owner = np.zeros(n, dtype=np.int32)
    marks = np.empty((n_landmarks, dims))
    chosen = np.empty(n_landmarks, dtype=np.int64)
    half = np.empty(n_landmarks)
    stamp = np.full(n_landmarks, -1, dtype=np.int64)  # the pass in which half[j] was last worked out
    leaf_r, leaf_f = np.empty(n_leaves), np.empty(n_leaves, dtype=np.int64)
    group_r, group_f = np.full(n_groups, -1.0), np.full(n_groups, -1, dtype=np.int64)
    slot = 0
    for i in range(n):
        to_mark[i] = np.inf
        if rank[i] == first:
            slot = i
    count = 0
    while count < n_landmarks:
        new = count
        marks[new] = points[slot]
        chosen[new] = rank[slot]
        for g in range(n_groups):
            if new > 0 and box_gap(group_low, group_high, g, marks, new, mode, p, box) >= group_r[g] * slack:
                continue
            best, pick = -1.0, -1
            for leaf in range(g * group, min(n_leaves, (g + 1) * group)):
                if new == 0 or box_gap(low, high, leaf, marks, new, mode, p, box) < leaf_r[leaf] * slack:
                    leaf_r[leaf], leaf_f[leaf] = scan_leaf(points, rank, to_mark, owner, starts[leaf],
                                                           starts[leaf + 1], marks, new, half, stamp, mode, p,
                                                           box, slack)
                if leaf_r[leaf] > best or (leaf_r[leaf] == best and rank[leaf_f[leaf]] < rank[pick]):
                    best, pick = leaf_r[leaf], leaf_f[leaf]
            group_r[g], group_f[g] = best, pick
        count += 1
        best, slot = farthest(group_r, group_f, rank, n_groups)
        if best <= 0.0:
            break
    return chosen[:count], owner, to_mark


@njit(cache=True)
def unshuffle(owner, to_mark, rank):
    """Each candidate's landmark and distance, in candidate order (the reordered copy already freed)."""
    nearest = np.empty(rank.size, dtype=np.int64)
    distance = np.empty(rank.size)
    for i in range(rank.size):
        nearest[rank[i]] = owner[i]
        distance[rank[i]] = to_mark[i]
    return nearest, distance


@njit(cache=True)
def half_distances(marks, radius, far, half, count, new, mode, p, box, slack):
    """Half the distance from each cell's landmark to the new one; -1 for cells it cannot touch."""
    for j in range(count):
        between = dist(marks, j, marks, new, mode, p, box)
        touched = radius[j] > 0.0 and between < 2.0 * radius[j] * slack
        half[j] = 0.5 * between / slack if touched else -1.0
        if touched:
            radius[j], far[j] = -1.0, -1


@njit(cache=True)
def maxmin_stream(points, first, n_landmarks, mode, p, box, slack):
    """The selection with cells as labels: one sequential pass per landmark, ties to the lowest position."""
    n = points.shape[0]
    to_mark = np.empty(n)
    owner = np.zeros(n, dtype=np.int64)
    radius = np.full(n_landmarks, -1.0)
    far = np.full(n_landmarks, -1, dtype=np.int64)
    half = np.empty(n_landmarks)
    marks = np.empty((n_landmarks, points.shape[1]))
    chosen = np.empty(n_landmarks, dtype=np.int64)
    chosen[0], marks[0] = first, points[first]
    for i in range(n):
        to_mark[i] = dist(points, i, marks, 0, mode, p, box)
        if to_mark[i] > radius[0]:
            radius[0], far[0] = to_mark[i], i
    count = 1
    while count < n_landmarks:
        best, pick = farthest_position(radius, far, count)
        if best <= 0.0:
            break
        new = count
        chosen[new], marks[new] = pick, points[pick]
        half_distances(marks, radius, far, half, count, new, mode, p, box, slack)
        for i in range(n):
            j = owner[i]
            if half[j] < 0.0:
                continue
            if to_mark[i] > half[j]:
                d = dist(points, i, marks, new, mode, p, box)
                if d < to_mark[i]:
                    to_mark[i], owner[i] = d, new
                    if d > radius[new]:
                        radius[new], far[new] = d, i
                    continue
            if to_mark[i] > radius[j]:
                radius[j], far[j] = to_mark[i], i
        count += 1
    return chosen[:count], owner, to_mark


@njit(cache=True)
def pack_fixed(points, center, step):
    """``round((points - center) / step)`` as int16 in blocks of _CHUNK points: shape (blocks, dims, _CHUNK)."""
    n, dims = points.shape
    packed = np.zeros(((n + _CHUNK - 1) // _CHUNK, dims, _CHUNK), dtype=np.int16)
    for i in range(n):
        for k in range(dims):
            packed[i // _CHUNK, k, i % _CHUNK] = np.int16(np.rint((points[i, k] - center[k]) / step))
    return packed


@njit(cache=True, inline="always")
def screen_bound(d, scale):
    """The float32 squared step count at or above which a point at distance ``d`` cannot move.

    ``scale`` = (slack, absolute, relative, step) of ``_stream_euclidean``.
    """
    slack, absolute, relative, step = scale
    reach = (d * slack + absolute) / (step * (1.0 - relative))
    return np.float32(reach * reach * (1.0 + 2.0**-20))  # rounded up past float32's rounding


@njit(cache=True, nogil=True, fastmath=False)
def stream_blocks(points, packed, target, first_block, last_block, to_mark, owner, bound, block_best, block_pick,
                  marks, new, scale):
    """One landmark's pass over blocks [first_block, last_block): the farthest point after it.

    Float32 squared step counts to the new landmark, vectorised over each block's points,
    screen out every point whose value reaches its ``bound``; the rest get the exact
    float64 distance. A block where nothing moved keeps its farthest point. Ties go to the
    lowest position. Releases the GIL, so blocks can be split between threads.
    """
    n = points.shape[0]
    square = np.empty(_CHUNK, dtype=np.float32)
    listed = np.empty(_CHUNK, dtype=np.int64)
    best, pick = -1.0, -1
    for block in range(first_block, last_block):
        for i in range(_CHUNK):
            square[i] = 0.0
        for k in range(packed.shape[1]):
            row = packed[block, k]
            value = np.float32(target[k])
            for i in range(_CHUNK):
                gap = np.float32(row[i]) - value  # exact: integers below 2^17
                square[i] += gap * gap
        base = block * _CHUNK
        size, hit = min(_CHUNK, n - base), False
        for i in range(size):
            hit |= square[i] < bound[base + i]
        if hit:
            count, moved = 0, False
            for i in range(size):
                listed[count] = base + i
                count += square[i] < bound[base + i]
            for t in range(count):
                i = listed[t]
                d = dist(points, i, marks, new, _EUCLIDEAN, 2.0, marks[new])
                if d < to_mark[i]:
                    to_mark[i], owner[i], moved = d, new, True
                    bound[i] = screen_bound(d, scale)
            if moved:
                block_best[block], block_pick[block] = -1.0, -1
                for i in range(base, base + size):
                    if to_mark[i] > block_best[block]:
                        block_best[block], block_pick[block] = to_mark[i], i
        if block_best[block] > best:
            best, pick = block_best[block], block_pick[block]
    return best, pick
