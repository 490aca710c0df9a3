"""Index-based distance queries on a cloud, the same for every metric.

All core steps (landmarks, densities, complexes) ask for distances through
these functions, so a metric is implemented once. Distances come back in the
metric's own units unless a name says ``working``.
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np
from numpy.typing import NDArray

from tdakit.core.geometry.cloud import Cloud

# Blocked brute force beyond this many working dimensions: KD-trees lose to it there
# (common practice; scikit-learn switches similarly).
TREE_MAX_DIMS = 12
BLOCK_BYTES = 64 * 2**20


@lru_cache(maxsize=2)
def working_points(cloud: Cloud) -> NDArray[np.float64]:
    """Working-space coordinates of the cloud (cached per cloud object)."""
    work = cloud.metric.embed(cloud.points)
    work.setflags(write=False)
    return work


def pairwise(cloud: Cloud, rows: NDArray[np.intp], cols: NDArray[np.intp]) -> NDArray[np.float64]:
    """Metric distances between the points ``rows`` and ``cols`` (shape (len(rows), len(cols)))."""
    if cloud.distance_matrix is not None:
        return cloud.distance_matrix[np.ix_(rows, cols)]
    work = working_points(cloud)
    return cloud.metric.to_metric(cloud.metric.working_pairwise(work[rows], work[cols]))


def block_rows(n_cols: int, n_rows: int) -> int:
    """How many rows of an (rows x n_cols) float64 block fit the block budget."""
    return int(max(1, min(n_rows, BLOCK_BYTES // (8 * max(n_cols, 1)))))


def working_to_point(cloud: Cloud, index: int, rows: NDArray[np.intp] | None = None) -> NDArray[np.float64]:
    """Working-space distances from point ``index`` to every point (or to ``rows``)."""
    if cloud.distance_matrix is not None:
        column = cloud.distance_matrix[:, index]
        return column if rows is None else column[rows]
    work = working_points(cloud)
    target = work if rows is None else work[rows]
    return cloud.metric.working_to_point(target, work[index])


def to_metric(cloud: Cloud, value):
    """Working-space value(s) expressed in the metric's units (identity for precomputed)."""
    return np.asarray(value, dtype=np.float64) if cloud.distance_matrix is not None else cloud.metric.to_metric(value)


def nearest_among(cloud: Cloud, targets: NDArray[np.intp]) -> tuple[NDArray[np.intp], NDArray[np.float64]]:
    """For every point, the position in ``targets`` of its nearest target and the metric distance."""
    targets = np.asarray(targets, dtype=np.intp)
    if cloud.distance_matrix is None and _use_tree(cloud):
        tree = _tree(cloud, targets)
        dist, pos = tree.query(working_points(cloud), k=1, p=cloud.metric.p, workers=-1)
        return pos.astype(np.intp), to_metric(cloud, dist)
    pos = np.empty(cloud.n_points, dtype=np.intp)
    dist = np.empty(cloud.n_points)
    step = block_rows(targets.size, cloud.n_points)
    for start in range(0, cloud.n_points, step):
        rows = np.arange(start, min(start + step, cloud.n_points))
        block = pairwise(cloud, rows, targets)
        pos[rows] = np.argmin(block, axis=1)
        dist[rows] = block[np.arange(rows.size), pos[rows]]
    return pos, dist


def knn_distances(
    cloud: Cloud, k: int, *, include_self: bool, rows: NDArray[np.intp] | None = None
) -> NDArray[np.float64]:
    """Metric distance from every point (or from ``rows``) to its k nearest points, ascending.

    With ``include_self=False`` the point itself is excluded (duplicates of it are not);
    with ``include_self=True`` the point counts as its own first neighbour at distance 0.
    """
    extra = 0 if include_self else 1
    queries = np.arange(cloud.n_points) if rows is None else np.asarray(rows, dtype=np.intp)
    if cloud.distance_matrix is None and _use_tree(cloud):
        tree = _tree(cloud, None)
        dist, _ = tree.query(working_points(cloud)[queries], k=k + extra, p=cloud.metric.p, workers=-1)
        return to_metric(cloud, np.asarray(dist).reshape(queries.size, k + extra)[:, extra:])
    out = np.empty((queries.size, k))
    everyone = np.arange(cloud.n_points)
    step = block_rows(cloud.n_points, queries.size)
    for start in range(0, queries.size, step):
        block_queries = queries[start:start + step]
        block = pairwise(cloud, block_queries, everyone)
        if not include_self:
            block[np.arange(block_queries.size), block_queries] = np.inf
        out[start:start + step] = np.sort(np.partition(block, k - 1, axis=1)[:, :k], axis=1)
    return out


# Query points per block in :func:`kth_neighbor_distance` (bounds its (block x k) result arrays).
KNN_BLOCK_ROWS = 1 << 16


def kth_neighbor_distance(cloud: Cloud, k: int) -> NDArray[np.float64]:
    """Metric distance from every point to its k-th nearest other point (copies at 0), one block of queries at a time.

    The values of ``knn_distances(cloud, k, include_self=False)[:, -1]``; memory 8 bytes a point plus a block.
    """
    if not (cloud.distance_matrix is None and _use_tree(cloud)):
        return knn_distances(cloud, k, include_self=False)[:, -1]
    tree, points = _tree(cloud, None), working_points(cloud)
    out = np.empty(cloud.n_points)
    for start in range(0, cloud.n_points, KNN_BLOCK_ROWS):
        dist, _ = tree.query(points[start:start + KNN_BLOCK_ROWS], k=k + 1, p=cloud.metric.p, workers=-1)
        out[start:start + KNN_BLOCK_ROWS] = np.asarray(dist).reshape(-1, k + 1)[:, -1]
    return to_metric(cloud, out)


def knn_table(
    cloud: Cloud, k: int, rows: NDArray[np.intp]
) -> tuple[NDArray[np.float64], NDArray[np.intp]]:
    """The k nearest points of each point in ``rows`` (itself included, first): metric distances and indices.

    Sorted by distance, ties by index. Memory: two (len(rows), k) arrays, plus one block of
    distances at a time for metrics without a tree.
    """
    queries = np.asarray(rows, dtype=np.intp)
    if cloud.distance_matrix is None and _use_tree(cloud):
        dist, idx = _tree(cloud, None).query(working_points(cloud)[queries], k=k, p=cloud.metric.p, workers=-1)
        dist, idx = np.asarray(dist).reshape(queries.size, k), np.asarray(idx, dtype=np.intp).reshape(queries.size, k)
        return to_metric(cloud, dist), idx
    dist, idx = np.empty((queries.size, k)), np.empty((queries.size, k), dtype=np.intp)
    everyone = np.arange(cloud.n_points)
    step = block_rows(cloud.n_points, queries.size)
    for start in range(0, queries.size, step):
        block = pairwise(cloud, queries[start:start + step], everyone)
        near = (np.argpartition(block, k - 1, axis=1)[:, :k] if k < cloud.n_points
                else np.tile(everyone, (len(block), 1)))
        values = np.take_along_axis(block, near, axis=1)
        order = np.lexsort((near, values), axis=1)
        idx[start:start + step] = np.take_along_axis(near, order, axis=1)
        dist[start:start + step] = np.take_along_axis(values, order, axis=1)
    return dist, idx


def _use_tree(cloud: Cloud) -> bool:
    dims = 3 if cloud.metric.name == "angular" else cloud.n_dims
    return dims <= TREE_MAX_DIMS


def _tree(cloud: Cloud, subset: NDArray[np.intp] | None):
    from scipy.spatial import cKDTree

    work = working_points(cloud)
    data = work if subset is None else work[subset]
    return cKDTree(data, boxsize=cloud.metric.working_boxsize(), balanced_tree=False, compact_nodes=False)
