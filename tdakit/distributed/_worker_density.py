"""The workers' side of the distributed k-nearest-neighbour radius (see :mod:`tdakit.distributed.density`).

:class:`DensityMixin` adds to each worker's actor the calls the driver makes (a sample of cell
coordinates, the radii and first occurrences kept per partition, the density-weighted race, the
densest rows for maxmin among them). The
plain functions below run as ordinary Dask tasks pinned to one worker: ``cut_rows`` reads the actor
on its own worker directly (no message) and cuts its rows by cell; the cell tasks build one kd-tree
per cell, query it, and pass pieces on as task results, which Dask moves from worker to worker.
Every distance is computed as the in-memory :func:`tdakit.core.geometry._geometry.knn_distances` does,
so values agree bit for bit: by scipy's cKDTree with the metric's working coordinates, box and order, or
beyond ``TREE_MAX_DIMS`` working coordinates by the metric's own pairwise distances (:class:`BruteCell`).
"""

from __future__ import annotations

import numpy as np

from tdakit.core.geometry.cloud import duplicate_coordinates
from tdakit.core.geometry.metrics import Metric
from tdakit.distributed._cells import assign_cells, reach_bound, reached_cells

# Rows queried (or drawn) at a time: bounds the (rows x k) result arrays of one query.
QUERY_ROWS = 1 << 16
# Search groups of the second pass: balls sorted by radius, each group searched with its largest radius.
BOUND_GROUPS = 8


class DensityMixin:
    """Calls for the kNN radius, density-weighted landmarks and maxmin among the densest rows.

    Mixed into the worker's ``PartitionSet`` actor (which provides ``parts`` and ``metric``).
    """

    def _density(self) -> dict:
        """Per partition offset: [radius (metric units), first occurrence flags], filled by ``keep_radii``."""
        if getattr(self, "density_state", None) is None:
            self.density_state = {}
        return self.density_state

    def density_offsets(self) -> list[int]:
        """The first global row of each partition here."""
        return [part.offset for part in self.parts]

    def density_sample(self, per_worker: int) -> np.ndarray:
        """About ``per_worker`` rows' cell coordinates, evenly spread over this worker's rows."""
        total = sum(part.n for part in self.parts)
        step = max(1, total // max(int(per_worker), 1))
        picked = [duplicate_coordinates(part.work[(-part.offset) % step::step], self.metric) for part in self.parts]
        picked = [p for p in picked if p.shape[0]]
        return np.concatenate(picked) if picked else np.empty((0, 0))

    def keep_radii(self, pieces: list) -> list:
        """Store (rows, radius, first) pieces; per partition (offset, rows, candidates, smallest positive radius)."""
        state = self._density()
        parts = sorted(self.parts, key=lambda part: part.offset)
        offsets = np.array([part.offset for part in parts], dtype=np.int64)
        for part in parts:
            state[part.offset] = [np.empty(part.n), np.zeros(part.n, dtype=bool)]
        for rows, radius, first in pieces:
            which = np.searchsorted(offsets, rows, side="right") - 1
            for index in np.unique(which):
                part, mine = parts[index], which == index
                kept = state[part.offset]
                kept[0][rows[mine] - part.offset] = radius[mine]
                kept[1][rows[mine] - part.offset] = first[mine]
        summary = []
        for part in self.parts:
            radius, first = state[part.offset]
            positive = radius[radius > 0]
            summary.append((part.offset, part.n, int(first.sum()), float(positive.min()) if positive.size else np.inf))
        return summary

    def density_radius(self, outputs) -> list:
        """(first row, radii or None) per partition, the radii written to ``outputs["radius"]`` when given."""
        from tdakit.distributed._worker import _write

        state = self._density()
        return [(part.offset, _write(outputs, "radius", part.offset, state[part.offset][0])) for part in self.parts]

    def density_log_weight_max(self, power: float, clamp: float) -> float:
        """The largest log weight ``-power * log(max(radius, clamp))`` among this worker's first occurrences."""
        state, best = self._density(), -np.inf
        for part in self.parts:
            radius, first = state[part.offset]
            if first.any():
                best = max(best, float((-power * np.log(np.maximum(radius, clamp)))[first].max()))
        return best

    def density_race(self, power: float, clamp: float, top: float, states: dict, n_keep: int) -> tuple:
        """The ``n_keep`` smallest race keys here and their rows (keys ascending, ties to the lower row).

        ``states[offset]`` is the generator's state when the in-memory draw reaches this partition's first
        candidate; the partition draws its own exponentials from there, in row order.
        """
        state = self._density()
        keys, rows = np.empty(0), np.empty(0, dtype=np.int64)
        for part in self.parts:
            radius, first = state[part.offset]
            if not first.any():
                continue
            generator = restore_generator(states[part.offset])
            candidates = np.flatnonzero(first)
            for start in range(0, candidates.size, QUERY_ROWS):
                chosen = candidates[start:start + QUERY_ROWS]
                log_weight = -power * np.log(np.maximum(radius[chosen], clamp))
                key = np.log(generator.exponential(size=chosen.size)) - (log_weight - top)
                keys, rows = smallest(np.concatenate((keys, key)), np.concatenate((rows, chosen + part.offset)),
                                      n_keep)
        return keys, rows


    # -- maxmin among the densest rows ("core_maxmin") ------------------------------------------------
    def core_count(self, threshold: float) -> int:
        """Rows here whose radius is at most ``threshold``."""
        return int(sum(np.count_nonzero(state[0] <= threshold) for state in self._density().values()))

    def core_ties(self, threshold: float) -> list:
        """(first row, rows with radius exactly ``threshold``) per partition."""
        state = self._density()
        return [(part.offset, int(np.count_nonzero(state[part.offset][0] == threshold))) for part in self.parts]

    def core_select(self, threshold: float, quotas: dict) -> list:
        """Keep the rows below ``threshold`` and, per partition, the first ``quotas[offset]`` rows at it.

        Returns (first row, kept rows) per partition.
        """
        state, self.core_rows = self._density(), {}
        for part in self.parts:
            radius = state[part.offset][0]
            tied = np.flatnonzero(radius == threshold)[:quotas.get(part.offset, 0)]
            self.core_rows[part.offset] = np.union1d(np.flatnonzero(radius < threshold), tied)
        return [(offset, int(rows.size)) for offset, rows in self.core_rows.items()]

    def core_row_at(self, offset: int, index: int) -> int:
        """The global row of the ``index``-th kept row of the partition starting at ``offset``."""
        return int(offset + self.core_rows[offset][index])

    def core_begin(self) -> int:
        """Hold only the kept rows (each partition's, in row order) until ``core_end``, for maxmin among them.

        Returns how many rows are kept here (a worker without any sits the maxmin out).
        """
        from tdakit.distributed._worker import Part

        self.all_parts, self.core_global = self.parts, []
        self.parts = []
        for part in self.all_parts:
            rows = self.core_rows[part.offset]
            if rows.size:
                self.parts.append(Part(0, np.ascontiguousarray(part.work[rows])))
                self.core_global.append(rows.astype(np.int64) + part.offset)
        return sum(part.n for part in self.parts)

    def core_ranks(self) -> None:
        """After ``start_maxmin``: each slot's rank becomes its global row (the same order, so the same ties)."""
        for part, rows in zip(self.parts, self.core_global):
            part.rank = rows[part.rank]

    def core_end(self) -> None:
        """Hold every row again."""
        self.parts, self.all_parts, self.core_global = self.all_parts, None, None


def smallest(keys: np.ndarray, rows: np.ndarray, count: int) -> tuple[np.ndarray, np.ndarray]:
    """The ``count`` smallest keys (ties to the lower row) and their rows, in that order."""
    if keys.size > count:
        cut = np.partition(keys, count - 1)[count - 1]
        keep = keys <= cut
        keys, rows = keys[keep], rows[keep]
    order = np.lexsort((rows, keys))[:count]
    return keys[order], rows[order]


def restore_generator(state: dict) -> np.random.Generator:
    """A Generator whose bit generator is in ``state`` (as recorded from ``bit_generator.state``)."""
    bit_generator = getattr(np.random, state["bit_generator"])()
    bit_generator.state = state
    return np.random.Generator(bit_generator)


# -- tasks (each pinned to one worker by the driver) ---------------------------------------------------
def _actor(key: str):
    from distributed import get_worker

    return get_worker().state.actors[key]


def cut_rows(actor_key: str, spec: dict) -> dict:
    """The rows of the worker running this task, by cell: cell -> (working coordinates, global rows)."""
    actor = _actor(actor_key)
    found: dict[int, list] = {}
    for part in actor.parts:
        work = part.work
        cells = assign_cells(duplicate_coordinates(work, actor.metric), spec)
        order = np.argsort(cells, kind="stable")
        bounds = np.searchsorted(cells[order], np.arange(spec["n_cells"] + 1))
        for cell in range(spec["n_cells"]):
            here = order[bounds[cell]:bounds[cell + 1]]
            if here.size:
                found.setdefault(cell, []).append((work[here], here.astype(np.int64) + part.offset))
    return {cell: (np.concatenate([w for w, _ in pieces]), np.concatenate([r for _, r in pieces]))
            for cell, pieces in found.items()}


def piece_sizes(mapping: dict) -> dict:
    """Rows and bytes of each piece of a mapping of pieces (to plan the next tasks)."""
    return {key: (int(value[0].shape[0]), int(sum(np.asarray(v).nbytes for v in value)))
            for key, value in mapping.items()}


def item(mapping: dict, key):
    """One piece of a mapping (a task of its own, so that only that piece moves to the next worker)."""
    return mapping.get(key)


def taken(picks: list, sources: tuple) -> list:
    """The pieces: ``source`` itself where its pick is None (moved by ``item``), else ``source[pick]``
    (a mapping already on this worker); missing pieces dropped.
    """
    found = [source if pick is None else source.get(pick) for pick, source in zip(picks, sources)]
    return [piece for piece in found if piece is not None]


def first_pass(k: int, metric: Metric, picks: list, *sources) -> dict:
    """The cell's kd-tree and, per point, the (k+1)-th smallest distance within the cell (itself included).

    That is an upper bound on the point's k-th neighbour distance in the whole cloud; the box is the
    cell's bounding box in working coordinates.
    """
    pieces = taken(picks, sources)
    rows = np.concatenate([p[1] for p in pieces])
    tree = _searcher(np.concatenate([p[0] for p in pieces]), metric)
    bound = np.empty(rows.size)
    for start in range(0, rows.size, QUERY_ROWS):
        bound[start:start + QUERY_ROWS] = _query(tree, tree.data[start:start + QUERY_ROWS], k + 1, metric)[:, -1]
    return {"tree": tree, "rows": rows, "bound": bound, "low": tree.data.min(axis=0), "high": tree.data.max(axis=0),
            "received": int(sum(p[0].nbytes + p[1].nbytes for p in pieces))}


def _searcher(work: np.ndarray, metric: Metric):
    """A kd-tree over the cell's points, as in memory, or (beyond ``TREE_MAX_DIMS``) a :class:`BruteCell`."""
    from scipy.spatial import cKDTree

    from tdakit.core.geometry._geometry import TREE_MAX_DIMS

    if work.shape[1] > TREE_MAX_DIMS:
        return BruteCell(work, metric)
    return cKDTree(work, boxsize=metric.working_boxsize(), balanced_tree=False, compact_nodes=False)


class BruteCell:
    """A cell's points searched by blocks of the metric's pairwise distances (the in-memory routine's way
    beyond ``TREE_MAX_DIMS`` working coordinates: each pair's value does not depend on the blocks).
    """

    def __init__(self, data: np.ndarray, metric: Metric):
        self.data, self.metric = np.ascontiguousarray(data), metric

    def query(self, points: np.ndarray, k: int, p: float, distance_upper_bound: float = np.inf):
        """The k smallest working distances to the cell's points (inf beyond the bound or the points); no indices."""
        from tdakit.core.geometry._geometry import block_rows

        out = np.full((points.shape[0], k), np.inf)
        found = min(k, self.data.shape[0])
        step = block_rows(self.data.shape[0], points.shape[0])
        for start in range(0, points.shape[0], step):
            block = self.metric.working_pairwise(points[start:start + step], self.data)
            block[block > distance_upper_bound] = np.inf
            if found < block.shape[1]:
                block = np.partition(block, found - 1, axis=1)[:, :found]
            out[start:start + step, :found] = np.sort(block, axis=1)
        return out, None


def _query(tree, points: np.ndarray, k: int, metric: Metric, upper: float = np.inf) -> np.ndarray:
    dist, _ = tree.query(points, k=k, p=metric.p, distance_upper_bound=upper)
    return np.asarray(dist).reshape(points.shape[0], k)


def box_of(state: dict) -> tuple:
    return state["low"], state["high"], int(state["rows"].size), state["received"]


def halo_out(state: dict, own: int, lows: np.ndarray, highs: np.ndarray, metric: Metric) -> dict:
    """Other cell -> (positions here, working coordinates, search bound) of the balls that reach its box."""
    bound = state["bound"]
    moving = np.flatnonzero(bound > 0)  # a radius of 0 is already exact (k copies here)
    points = state["tree"].data[moving]
    reach = reach_bound(bound[moving], metric)
    return {cell: (moving[near], points[near], reach[near])
            for cell, near in reached_cells(points, reach, lows, highs, own, metric).items()}


def second_pass(state: dict, k: int, metric: Metric, cells: list, picks: list, *sources) -> dict:
    """For balls from other cells: the k smallest distances to this cell's points within each ball's bound.

    Returns source cell -> (positions in the source cell, distances (n, k), inf where fewer).
    """
    tree, pieces = state["tree"], taken(picks, sources)
    points = np.concatenate([p[1] for p in pieces])
    bound = np.concatenate([p[2] for p in pieces])
    out = np.full((points.shape[0], k), np.inf)
    order = np.argsort(bound, kind="stable")
    for group in np.array_split(order, min(BOUND_GROUPS, order.size)):
        upper = float(bound[group].max())
        for start in range(0, group.size, QUERY_ROWS):
            chosen = group[start:start + QUERY_ROWS]
            out[chosen] = _query(tree, points[chosen], k, metric, upper)
    edges = np.cumsum([0] + [p[0].size for p in pieces])
    return {cell: (piece[0], out[edges[i]:edges[i + 1]]) for i, (cell, piece) in enumerate(zip(cells, pieces))}


def merge(state: dict, k: int, metric: Metric, owners: tuple, picks: list, *sources) -> dict:
    """Exact radii (metric units) and first-occurrence flags of the cell's rows, by owning worker.

    A point's k+1 smallest distances in its own cell are merged with the k smallest from every other
    cell its ball reaches; the (k+1)-th smallest of all is its k-th neighbour distance (the smallest is
    the point itself, at 0). ``owners`` = (first rows of the partitions, sorted; their workers).
    """
    tree, rows, answers = state["tree"], state["rows"], taken(picks, sources)
    radius = state["bound"].copy()
    touched = np.unique(np.concatenate([a[0] for a in answers])) if answers else np.empty(0, dtype=np.int64)
    if touched.size:
        best = _query(tree, tree.data[touched], k + 1, metric)
        for positions, dist in answers:
            at = np.searchsorted(touched, positions)
            best[at] = np.partition(np.concatenate((best[at], dist), axis=1), k, axis=1)[:, :k + 1]
        radius[touched] = best.max(axis=1)
    radius = metric.to_metric(radius)
    first = _first_occurrences(tree.data, rows, metric)
    worker = np.asarray(owners[1])[np.searchsorted(np.asarray(owners[0]), rows, side="right") - 1]
    return {int(w): (rows[worker == w], radius[worker == w], first[worker == w]) for w in np.unique(worker)}


def _first_occurrences(work: np.ndarray, rows: np.ndarray, metric: Metric) -> np.ndarray:
    """Flags of the rows that repeat no lower row (every copy of a point lives in this cell)."""
    from tdakit.core.geometry.cloud import first_occurrences

    order = np.argsort(rows, kind="stable")
    flags = np.zeros(rows.size, dtype=bool)
    flags[order[first_occurrences(work[order], metric, embedded=True)]] = True
    return flags


def keep(actor_key: str, picks: list, *sources) -> list:
    """Hand the pieces for this worker's rows to its actor (see ``DensityMixin.keep_radii``)."""
    return _actor(actor_key).keep_radii(taken(picks, sources))
