"""One maxmin round on one partition, compiled: the box-pruned pass of the in-memory kernel, a landmark at a time.

The in-memory kernel (``tdakit/core/geometry/_maxmin_kernels.py``) runs every round in one call.
Here a worker keeps the same state (its points cut into boxes, every point's nearest landmark
and distance, each box's farthest point) between calls, and each call adds one landmark the
driver chose and returns the partition's farthest point. The distances are the same compiled
``dist`` in coordinate order, so values and exact ties match the in-memory routine bit for bit;
``rank`` holds global row numbers, so ties go to the lowest row as there.
"""

from __future__ import annotations

import numpy as np
from numba import njit

from tdakit.core.geometry._maxmin_kernels import box_gap, build_leaves, farthest, leaf_boxes, scan_leaf


@njit(cache=True)
def prepare(points, rank, leaf_size, group):
    """Cut the points (in place) into boxes; the boxes and the per-box/per-group state."""
    starts = build_leaves(points, rank, leaf_size)
    low, high, group_low, group_high = leaf_boxes(points, starts, group)
    n_leaves, n_groups = starts.size - 1, group_low.shape[0]
    leaf_r, leaf_f = np.full(n_leaves, -1.0), np.full(n_leaves, -1, dtype=np.int64)
    group_r, group_f = np.full(n_groups, -1.0), np.full(n_groups, -1, dtype=np.int64)
    return starts, low, high, group_low, group_high, leaf_r, leaf_f, group_r, group_f


@njit(cache=True)
def add_landmark(points, rank, starts, boxes, state, to_mark, owner, marks, new, half, stamp, group, mode, p, box,
                 slack):
    """Give every point nearer to landmark ``new`` (row ``new`` of ``marks``) to it; the farthest slot after.

    ``boxes`` = (low, high, group_low, group_high); ``state`` = (leaf_r, leaf_f, group_r, group_f).
    Returns (distance, slot) of the partition's farthest point, ties to the lowest rank.
    """
    low, high, group_low, group_high = boxes
    leaf_r, leaf_f, group_r, group_f = state
    n_leaves, n_groups = starts.size - 1, group_low.shape[0]
    for g in range(n_groups):
        if new > 0 and box_gap(group_low, group_high, g, marks, new, mode, p, box) >= group_r[g] * slack:
            continue
        best, pick = -1.0, -1
        for leaf in range(g * group, min(n_leaves, (g + 1) * group)):
            if new == 0 or box_gap(low, high, leaf, marks, new, mode, p, box) < leaf_r[leaf] * slack:
                leaf_r[leaf], leaf_f[leaf] = scan_leaf(points, rank, to_mark, owner, starts[leaf], starts[leaf + 1],
                                                       marks, new, half, stamp, mode, p, box, slack)
            if leaf_r[leaf] > best or (leaf_r[leaf] == best and rank[leaf_f[leaf]] < rank[pick]):
                best, pick = leaf_r[leaf], leaf_f[leaf]
        group_r[g], group_f[g] = best, pick
    return farthest(group_r, group_f, rank, n_groups)
