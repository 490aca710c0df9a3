"""Witness-complex edge values and nearest-landmark tables, computed in blocks of witnesses."""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor

import numpy as np
from numpy.typing import NDArray

from tdakit.core.geometry import _geometry
from tdakit.core.geometry.cloud import Cloud

_PAIR_BLOCK = 4_000_000  # candidate (witness, edge) entries held at once


def _relative_distances(cloud, rows, landmarks, nu):
    block = _geometry.pairwise(cloud, rows, landmarks)
    if nu == 0:
        return block
    return block - np.partition(block, nu - 1, axis=1)[:, nu - 1, None]


def lazy_witness_work(cloud: Cloud, landmarks: NDArray[np.intp], nu: int, cap: float, sample: int = 2000) -> float:
    """Estimated number of (witness, landmark pair) evaluations for the lazy witness edges."""
    rng = np.random.default_rng(0)
    rows = np.sort(rng.choice(cloud.n_points, size=min(sample, cloud.n_points), replace=False))
    relative = _relative_distances(cloud, rows, landmarks, nu)
    per_witness = (relative <= cap).sum(axis=1).astype(np.float64)
    return float((per_witness * (per_witness - 1) / 2).mean() * cloud.n_points)


def lazy_witness_edges(cloud: Cloud, landmarks: NDArray[np.intp], nu: int, cap: float) -> NDArray[np.float64]:
    """Matrix of lazy witness edge values e(a, b) between landmarks (inf above ``cap``).

    e(a, b) = max(0, min_w [max(d(a, w), d(b, w)) - m_nu(w)]), where m_nu(w) is the
    distance from w to its nu-th nearest landmark (0 when nu = 0); every cloud
    point is a witness. Vertices enter at 0.
    """
    m = landmarks.size
    edges = _compiled_edges(cloud, landmarks, nu, cap)
    if edges is None:  # without numba, or for a given matrix: blocks of witnesses in numpy
        edges = np.full((m, m), np.inf)
        step = _geometry.block_rows(m, cloud.n_points)
        for start in range(0, cloud.n_points, step):
            rows = np.arange(start, min(start + step, cloud.n_points))
            _scatter_block(edges, _relative_distances(cloud, rows, landmarks, nu), cap)
    _mirror_upper(edges)
    np.maximum(edges, 0.0, out=edges)
    np.fill_diagonal(edges, 0.0)
    return edges


def _mirror_upper(edges: NDArray[np.float64]) -> None:
    """Edges = min(edges, edges.T) in place, a block of rows at a time (no second m x m array).

    numpy copies the overlapping diagonal block before writing (ufuncs resolve memory overlap), so
    the temporary is one block, not the matrix.
    """
    m = edges.shape[0]
    step = _geometry.block_rows(m, m)
    for start in range(0, m, step):
        stop = min(start + step, m)
        block = edges[start:stop, :]
        np.minimum(block, edges[:, start:stop].T, out=block)


def _compiled_edges(cloud, landmarks, nu, cap):
    """The edge values (upper triangle) from the compiled kernel; None without numba or for a given matrix.

    Witnesses are split over threads, each lowering its own matrix; the minimum over threads
    is exact, so the values do not depend on the thread count.
    """
    if cloud.distance_matrix is not None:
        return None
    try:
        from tdakit.core.topology._witness_kernels import lazy_edges
    except ImportError:
        return None
    from tdakit.core.geometry._maxmin import distance_mode

    mode, p, box = distance_mode(cloud)
    work = _geometry.working_points(cloud)
    marks = np.ascontiguousarray(work[landmarks])
    # One m x m matrix per thread: threads only while those stay small.
    threads = lazy_threads(cloud.n_points, landmarks.size)
    edges = np.full((threads, landmarks.size, landmarks.size), np.inf)
    bounds = np.linspace(0, cloud.n_points, threads + 1).astype(np.int64)
    with ThreadPoolExecutor(max_workers=threads) as pool:
        list(pool.map(lambda t: lazy_edges(work, marks, bounds[t], bounds[t + 1], nu, float(cap), mode, p, box,
                                           edges[t]), range(threads)))
    if threads == 1:
        return edges[0]  # a view: no copy of the m x m matrix
    return edges.min(axis=0)


def lazy_threads(n_points: int, n_landmarks: int) -> int:
    """Threads of the compiled lazy witness pass: one m x m matrix each, so threads only up to 2,000 landmarks."""
    from tdakit.core.geometry._maxmin import worker_threads

    return worker_threads(n_points * n_landmarks) if n_landmarks <= 2000 else 1


def lazy_witness_bytes(n_points: int, n_landmarks: int) -> float:
    """Peak bytes of the lazy witness edge matrix and its flag complex's dense input (before the complex).

    Counted from the code: one float64 m x m matrix per thread of the compiled pass (plus their minimum
    when there are several), one block for mirroring the upper triangle (or the numpy route's blocks of
    witnesses), and one more m x m matrix when edge collapse is re-checked (``flag_tree``). Measured
    (tracemalloc peak of ``lazy_witness_edges``, 6,000 witnesses, cap 0.3): 24.2 bytes per cell at 1,000
    landmarks (2 threads: two matrices and their minimum), 16.0 at 2,500 (1 thread: the matrix and the
    mirrored block, there the whole matrix). Before the in-place assembly the single-thread route held
    four m x m matrices (32 bytes per cell) while the pre-flight counted 10.
    """
    threads = lazy_threads(n_points, n_landmarks)
    matrices = threads + (1 if threads > 1 else 0) + 1
    return 8.0 * matrices * float(n_landmarks) ** 2 + _geometry.BLOCK_BYTES


def _scatter_block(edges, relative, cap):
    n_cand = int((relative <= cap).sum(axis=1).max())
    if n_cand < 2:
        return
    chunk = max(1, _PAIR_BLOCK // (n_cand * (n_cand - 1) // 2))
    first, second = np.triu_indices(n_cand, 1)
    for s in range(0, relative.shape[0], chunk):
        part = relative[s:s + chunk]
        # only the n_cand smallest per witness can be under the cap: partition, then sort those
        order = np.argpartition(part, n_cand - 1, axis=1)[:, :n_cand] if n_cand < part.shape[1] else \
            np.broadcast_to(np.arange(part.shape[1]), part.shape)
        values = np.take_along_axis(part, order, axis=1)
        within = np.argsort(values, axis=1)
        order, values = np.take_along_axis(order, within, axis=1), np.take_along_axis(values, within, axis=1)
        # For a witness with landmarks sorted by relative distance, the pair (i < j) costs values[j].
        pair_values = values[:, second]
        keep = pair_values <= cap
        a, b = order[:, first][keep], order[:, second][keep]
        np.minimum.at(edges, (np.minimum(a, b), np.maximum(a, b)), pair_values[keep])


def table_lengths(cloud: Cloud, landmarks: NDArray[np.intp], cap: float, simplex_size: int,
                  sample: int = 2000) -> tuple[NDArray[np.float64], float]:
    """Lengths of a sample of witnesses' rows in :func:`nearest_landmark_table`, and the weight of each.

    The rows are those of up to ``sample`` witnesses drawn without replacement (seed 0); each stands for
    ``n_points / sample`` witnesses. Memory: one (sample, n_landmarks) block.
    """
    m = landmarks.size
    rank = min(simplex_size, m - 1)
    rng = np.random.default_rng(0)
    rows = np.sort(rng.choice(cloud.n_points, size=min(sample, cloud.n_points), replace=False))
    squared = _geometry.pairwise(cloud, rows, landmarks) ** 2
    limit = np.partition(squared, rank, axis=1)[:, rank] + cap * cap
    return (squared <= limit[:, None]).sum(axis=1).astype(np.float64), cloud.n_points / rows.size


def nearest_landmark_table(
    cloud: Cloud, landmarks: NDArray[np.intp], cap: float, simplex_size: int
) -> list[list[tuple[int, float]]]:
    """Per witness, the landmarks that can take part in a witnessed simplex, as (landmark, squared distance).

    A landmark in a simplex of ``simplex_size`` vertices witnessed at relaxation
    alpha <= cap lies within d_(s+1)^2 + cap^2 of the witness, where d_(s+1) is the
    distance to its (s+1)-th nearest landmark, so farther landmarks are left out.
    """
    m = landmarks.size
    rank = min(simplex_size, m - 1)
    table: list[list[tuple[int, float]]] = []
    step = _geometry.block_rows(m, cloud.n_points)
    for start in range(0, cloud.n_points, step):
        rows = np.arange(start, min(start + step, cloud.n_points))
        squared = _geometry.pairwise(cloud, rows, landmarks) ** 2
        limit = np.partition(squared, rank, axis=1)[:, rank] + cap * cap
        order = np.argsort(squared, axis=1)
        for r in range(rows.size):
            keep = order[r][squared[r, order[r]] <= limit[r]]
            table.append(list(zip(keep.tolist(), squared[r, keep].tolist())))
    return table
