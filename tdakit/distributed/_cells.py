"""Spatial cells for the distributed k-nearest-neighbour radius: kd-style median splits, and which cells a ball reaches.

A point's cell is a pure function of its *cell coordinates*, the coordinates the core compares for copies
(:func:`tdakit.core.geometry.cloud.duplicate_coordinates`: working coordinates, unit vectors rounded). Rows
that the core counts as copies of one point therefore always share a cell, and each cell can find first
occurrences on its own.
"""

from __future__ import annotations

import numpy as np

from tdakit.core.geometry.metrics import Metric

# Relative slack on a radius before it is compared with box gaps or given to the tree as a search bound:
# the tree's distances and these gaps are rounded differently (a few units of 1e-16), so a little more is
# searched, never less (common practice).
RELATIVE_SLACK = 1e-9


def build_cells(sample: np.ndarray, n_cells: int) -> dict:
    """A kd split tree with at most ``n_cells`` leaves, each split at a quantile of the widest coordinate.

    Returns ``{"axis", "value", "left", "right"}`` arrays over the internal nodes; a child ``c < 0`` is
    leaf ``-c - 1``. Points with coordinate ``< value`` go left. Without any split the one leaf is cell 0.
    """
    nodes: dict[str, list] = {"axis": [], "value": [], "left": [], "right": []}
    leaves = [0]

    def grow(points: np.ndarray, cells: int) -> int:
        span = points.max(axis=0) - points.min(axis=0) if points.shape[0] else np.zeros(1)
        if cells <= 1 or points.shape[0] < 2 or float(span.max()) <= 0.0:
            leaves[0] += 1
            return -leaves[0]
        axis = int(np.argmax(span))
        values = np.sort(points[:, axis])
        n_left = cells // 2
        cut = values[min(max(int(round(values.size * n_left / cells)), 1), values.size - 1)]
        if cut == values[0]:
            cut = values[values > values[0]][0]
        here = len(nodes["axis"])
        for name, value in (("axis", axis), ("value", float(cut)), ("left", 0), ("right", 0)):
            nodes[name].append(value)
        below = points[:, axis] < cut
        nodes["left"][here] = grow(points[below], n_left)
        nodes["right"][here] = grow(points[~below], cells - n_left)
        return here

    root = grow(np.asarray(sample, dtype=np.float64), int(n_cells))
    spec = {name: np.asarray(values) for name, values in nodes.items()}
    spec["root"], spec["n_cells"] = root, leaves[0]
    return spec


def assign_cells(coordinates: np.ndarray, spec: dict) -> np.ndarray:
    """The cell of every row of cell coordinates (int64)."""
    node = np.full(coordinates.shape[0], spec["root"], dtype=np.int64)
    active = np.flatnonzero(node >= 0)
    while active.size:
        here = node[active]
        go_left = coordinates[active, spec["axis"][here]] < spec["value"][here]
        node[active] = np.where(go_left, spec["left"][here], spec["right"][here])
        active = active[node[active] >= 0]
    return -node - 1


def reach_bound(radius: np.ndarray, metric: Metric) -> np.ndarray:
    """Working radii with slack (see ``RELATIVE_SLACK``), kept above the tree's underflow of ``bound ** p``."""
    bound = radius * (1.0 + RELATIVE_SLACK)
    if metric.box is not None:
        bound = bound + RELATIVE_SLACK * 1e-3 * float(max(metric.box))
    if np.isfinite(metric.p):
        bound = np.maximum(bound, 10.0 ** (-300.0 / metric.p))
    return bound


def axis_gaps(points: np.ndarray, low: np.ndarray, high: np.ndarray, metric: Metric) -> np.ndarray:
    """Per coordinate, the distance from each point to the box [low, high] (minimum image when periodic).

    Each is at most the coordinate difference to any point of the box, and that is at most the distance
    for every Minkowski order p >= 1, so a point farther than r along one axis is farther than r.
    """
    below, above = low - points, points - high
    gap = np.maximum(np.maximum(below, above), 0.0)
    if metric.name == "periodic":
        side = np.asarray(metric.box, dtype=np.float64)
        around = np.where(below > 0, points + side - high, np.where(above > 0, low + side - points, 0.0))
        gap = np.minimum(gap, np.maximum(around, 0.0))
    return gap


def reached_cells(points: np.ndarray, bound: np.ndarray, lows: np.ndarray, highs: np.ndarray, own: int,
                  metric: Metric) -> dict[int, np.ndarray]:
    """For each other cell whose box some ball (``points``, radius ``bound``) reaches: the positions of those balls."""
    found = {}
    for cell in range(lows.shape[0]):
        if cell == own or not np.isfinite(lows[cell]).all():
            continue
        near = (axis_gaps(points, lows[cell], highs[cell], metric) <= bound[:, None]).all(axis=1)
        if near.any():
            found[cell] = np.flatnonzero(near)
    return found
