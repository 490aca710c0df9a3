"""Exact bottleneck and Wasserstein distances between persistence diagrams.

gudhi's bottleneck distance is too large on about 1% of small inputs, persim's
drops classes that never die, and hera's Wasserstein can hang on them; this
module computes both distances exactly with scipy's matching routines, and
checks itself against brute force in the tests.
"""

from __future__ import annotations

import numpy as np
import scipy.sparse as sp
from numpy.typing import ArrayLike, NDArray
from scipy.sparse.csgraph import maximum_bipartite_matching, min_weight_full_bipartite_matching
from scipy.spatial import cKDTree

from tdakit._validation import check_choice, check_float, fail
from tdakit.core.topology.preflight import default_memory_budget
from tdakit.errors import InvalidDataError, MemoryBudgetError

__all__ = ["diagram_distance", "as_diagram"]
_FN = "diagram_distance"
# Above this many useful point pairs the sparse matching loses to a dense network simplex
# (measured: 4.3 M pairs for 3,000 points far from the diagonal).
DENSE_ASSIGNMENT_LIMIT = 2000  # points in both diagrams: solve densely up to here (32 MB, about a second)
SPARSE_PAIR_LIMIT = 2_000_000
DENSE_CELL_LIMIT = 2.6e8  # about 16,000 x 16,000: ~2 GiB of cost matrix and plan
# Up to here (about 5,000 x 5,000, 400 MB) mid-sized diagrams take the network simplex, which always terminates,
# rather than scipy's sparse matching, which can cycle forever on tied inputs (scipy gh-17269): 3-4x slower on
# generic diagrams (13 s against 4 s at 5,000 + 5,000 points), 2x faster on tied H0 diagrams (measured).
TERMINATING_CELL_LIMIT = 2.5e7
# The dense transport problem holds the cost matrix, one temporary, POT's copy and its plan (counted from the
# code: about 4 float64 per cell); refused beyond the memory budget.
TRANSPORT_BYTES_PER_CELL = 32
BOTTLENECK_PAIR_LIMIT = 50_000_000


def as_diagram(points: ArrayLike, name: str = "a", function: str = _FN) -> NDArray[np.float64]:
    """Validate one diagram: shape (m, 2), finite births, deaths >= births (inf allowed)."""
    try:
        array = np.asarray(points, dtype=np.float64)
    except (ValueError, TypeError):
        raise fail(name, function, "an array of shape (m, 2) of real (birth, death) pairs", points) from None
    if array.size == 0:
        return np.zeros((0, 2))
    if array.ndim != 2 or array.shape[1] != 2:
        raise fail(name, function, "an array of shape (m, 2) of (birth, death) pairs", f"shape {array.shape}")
    bad = np.flatnonzero(~np.isfinite(array[:, 0]) | np.isnan(array[:, 1]) | (array[:, 1] < array[:, 0]))
    if bad.size:
        row = int(bad[0])
        raise InvalidDataError(
            f"Input '{name}' of {function} has an invalid pair at row {row}: {array[row].tolist()}; births must be "
            f"finite and deaths at least the birth (inf allowed).", parameter=name)
    return array


def diagram_distance(
    a: ArrayLike, b: ArrayLike, *, kind: str = "bottleneck", order: float = 1.0, ground: str = "sup"
) -> float:
    """Bottleneck or Wasserstein distance between two persistence diagrams, computed exactly.

    Parameters
    ----------
    a, b : array-like of shape (m, 2)
        (birth, death) pairs of one homology dimension; ``death = inf`` marks
        classes that never die.
    kind : {"bottleneck", "wasserstein"}, default="bottleneck"
    order : float, default=1.0
        Wasserstein order q >= 1 (ignored for the bottleneck distance).
    ground : {"sup", "euclidean"}, default="sup"
        Norm between two points (Wasserstein only; the bottleneck distance always
        uses the sup norm). A point's distance to the diagonal is
        (death - birth) / 2 under "sup" and (death - birth) / sqrt(2) under "euclidean".

    Returns
    -------
    float
        Classes that never die are matched among themselves by sorted births;
        when their counts differ the distance is inf.

    Notes
    -----
    Bottleneck: the smallest r admitting a matching in which every point farther
    than r from the diagonal is matched within r. By the Mendelsohn-Dulmage
    theorem such a matching exists iff one saturates the far points of ``a`` and
    another those of ``b``; the optimum is one of the candidate values (pair
    distances and distances to the diagonal), found by bisection with
    Hopcroft-Karp matchings. Wasserstein: a min-cost perfect matching on the
    usual graph with diagonal copies [1]_, keeping only point pairs cheaper than
    sending both to the diagonal.

    References
    ----------
    .. [1] D. Cohen-Steiner, H. Edelsbrunner, J. Harer, Y. Mileyko, "Lipschitz
       functions have L_p-stable persistence", Found. Comput. Math. 10 (2010) 127-139.
    .. [2] M. Kerber, D. Morozov, A. Nigmetov, "Geometry helps to compare persistence
       diagrams", ACM J. Exp. Algorithmics 22 (2017).
    """
    kind = check_choice(kind, "kind", _FN, ("bottleneck", "wasserstein"))
    order = check_float(order, "order", _FN, low=1.0)
    ground = check_choice(ground, "ground", _FN, ("euclidean", "sup"))
    a, b = as_diagram(a, "a"), as_diagram(b, "b")
    # Both distances are homogeneous (d(s a, s b) = s d(a, b)): measured in units of a power of two above the
    # largest finite value (an exact division), persistences such as 1e308 - (-1e308) stay finite.
    unit = _unit_of(a, b)
    return unit * _distance(a / unit, b / unit, kind, order, ground)


def _unit_of(a, b) -> float:
    values = np.abs(np.concatenate((a.ravel(), b.ravel())))
    values = values[np.isfinite(values)]
    return _power_of_two_above(float(values.max())) if values.size and values.max() > 0 else 1.0


def _distance(a, b, kind, order, ground) -> float:
    ess_a, ess_b = np.sort(a[np.isinf(a[:, 1]), 0]), np.sort(b[np.isinf(b[:, 1]), 0])
    if ess_a.size != ess_b.size:
        return float("inf")
    fin_a, fin_b = a[np.isfinite(a[:, 1])], b[np.isfinite(b[:, 1])]
    gap = np.abs(ess_a - ess_b)
    if kind == "bottleneck":
        return float(max(gap.max(initial=0.0), _bottleneck(fin_a, fin_b)))
    return _wasserstein(fin_a, fin_b, gap, order, ground)


# -- bottleneck ----------------------------------------------------------------------------
def _sup(a, b):
    return np.maximum(np.abs(a[:, 0] - b[:, 0]), np.abs(a[:, 1] - b[:, 1]))


def _edges(points, others, radius):
    """Pairs (i, j) with sup-distance(points[i], others[j]) <= radius, and their exact distances."""
    if points.shape[0] == 0 or others.shape[0] == 0:
        return np.zeros(0, np.intp), np.zeros(0, np.intp), np.zeros(0)
    near, far = cKDTree(points), cKDTree(others)
    reach = radius * (1 + 1e-9) + 1e-300
    count = int(near.count_neighbors(far, reach, p=np.inf))  # counted before listed: 24 bytes per listed pair
    if count > BOTTLENECK_PAIR_LIMIT:
        raise MemoryBudgetError(
            f"The bottleneck distance between diagrams of {points.shape[0]} and {others.shape[0]} points would list "
            f"{count:.3g} candidate pairs within {radius:.4g} of each other (limit {BOTTLENECK_PAIR_LIMIT:.3g}, "
            f"{24 * BOTTLENECK_PAIR_LIMIT / 2**30:.3g} GiB): the diagrams hold many tied points. Compare fewer "
            f"points, for example the classes with the largest persistence.", parameter="a")
    found = near.sparse_distance_matrix(far, reach, p=np.inf, output_type="ndarray")
    rows, cols = found["i"].astype(np.intp), found["j"].astype(np.intp)
    dist = _sup(points[rows], others[cols])
    keep = dist <= radius
    return rows[keep], cols[keep], dist[keep]


def _saturates(rows, cols, dist, r, n_rows, n_cols):
    """True when the graph of edges with dist <= r matches every one of the n_rows rows."""
    if n_rows == 0:
        return True
    keep = dist <= r
    if np.unique(rows[keep]).size < n_rows:
        return False
    graph = sp.csr_matrix((np.ones(int(keep.sum())), (rows[keep], cols[keep])), shape=(n_rows, n_cols))
    return bool((maximum_bipartite_matching(graph, perm_type="column") >= 0).sum() == n_rows)


def _far_graph(a, b, diag_a, diag_b, far, radius):
    """Edges within ``radius`` from the points of a and of b that are at least ``far`` from the diagonal."""
    big_a, big_b = np.flatnonzero(diag_a >= far), np.flatnonzero(diag_b >= far)
    return big_a, big_b, _edges(a[big_a], b, radius), _edges(b[big_b], a, radius)


def _feasible(a, b, diag_a, diag_b, r) -> bool:
    """Is there a matching of cost <= r (every point farther than r from the diagonal matched within r)?"""
    big_a, big_b, ea, eb = _far_graph(a, b, diag_a, diag_b, np.nextafter(r, np.inf), r)
    return _saturates(*ea, r, big_a.size, len(b)) and _saturates(*eb, r, big_b.size, len(a))


def _lower_bound(a, b, diag_a, diag_b) -> float:
    """Max over points of min(distance to diagonal, distance to the nearest point opposite): r* >= it."""
    if len(a) == 0 or len(b) == 0:
        return float(max(diag_a.max(initial=0.0), diag_b.max(initial=0.0)))
    near_a = cKDTree(b).query(a, p=np.inf)[0]
    near_b = cKDTree(a).query(b, p=np.inf)[0]
    return float(max(np.minimum(diag_a, near_a).max(), np.minimum(diag_b, near_b).max()))


def _bottleneck(a, b) -> float:
    diag_a, diag_b = (a[:, 1] - a[:, 0]) / 2, (b[:, 1] - b[:, 0]) / 2
    top = float(max(diag_a.max(initial=0.0), diag_b.max(initial=0.0)))  # all to the diagonal: feasible
    lo = hi = _lower_bound(a, b, diag_a, diag_b)
    if _feasible(a, b, diag_a, diag_b, hi):
        return hi  # the lower bound is itself a candidate value
    while True:  # gallop: no test ever uses a radius above twice the answer
        lo, hi = hi, min(top, 2 * hi if hi > 0 else top)
        if hi >= top or _feasible(a, b, diag_a, diag_b, hi):
            break
    levels = np.unique(np.concatenate((diag_a, diag_b, [hi])))
    levels = levels[(levels > lo) & (levels <= hi)]
    k = _first_true(lambda i: _feasible(a, b, diag_a, diag_b, levels[i]), levels.size - 1)
    lo, hi = (levels[k - 1] if k > 0 else lo), levels[k]
    # Between lo and hi the far points are fixed (no diagonal distance lies strictly between),
    # so the optimum is hi or one of the pair distances in (lo, hi) incident to a far point.
    big_a, big_b, ea, eb = _far_graph(a, b, diag_a, diag_b, hi, hi)
    candidates = np.unique(np.concatenate((ea[2], eb[2])))
    candidates = candidates[(candidates > lo) & (candidates < hi)]

    def feasible_fixed(i):
        r = candidates[i]
        return _saturates(*ea, r, big_a.size, len(b)) and _saturates(*eb, r, big_b.size, len(a))

    j = _first_true(feasible_fixed, candidates.size)
    return float(candidates[j]) if j < candidates.size else float(hi)


def _first_true(predicate, n: int) -> int:
    """Smallest i in [0, n) with predicate(i) true, for a monotone predicate (n if none)."""
    lo, hi = 0, n
    while lo < hi:
        mid = (lo + hi) // 2
        if predicate(mid):
            hi = mid
        else:
            lo = mid + 1
    return lo


# -- Wasserstein ---------------------------------------------------------------------------
def _power_of_two_above(value: float) -> float:
    """The smallest power of two at least ``value`` (> 0; at most 2^1023): dividing by it is exact."""
    return float(np.ldexp(1.0, int(min(np.ceil(np.log2(value)), 1023))))


def _wasserstein(a, b, gap, order, ground) -> float:
    """W_q of the finite parts ``a``, ``b`` and the essential births' gaps, scaled so that no power leaves float64.

    W_q is homogeneous (W_q(s a, s b) = s W_q(a, b)); the diagrams come divided by a power of two above
    their largest finite value (``diagram_distance``) and are divided here by the largest cost-relevant
    length (a point's distance to the diagonal, an essential gap), before raising to the power q; the
    result is scaled back. Without this, order 2 on values near 1e300 gave inf, near 1e-300 gave 0, and
    order 1000 on values near 10 gave inf. When the scaled optimum is so small that its terms may have
    underflowed, it is recomputed in units of the bottleneck distance B (B <= W_q <= N^(1/q) B, so the
    optimal terms are then near 1).
    """
    divisor = 2.0 if ground == "sup" else np.sqrt(2.0)
    reach = max(gap.max(initial=0.0), ((a[:, 1] - a[:, 0]) / divisor).max(initial=0.0),
                ((b[:, 1] - b[:, 0]) / divisor).max(initial=0.0))
    if reach == 0:
        return 0.0
    value = _scaled_wasserstein(a, b, gap, order, ground, _power_of_two_above(reach))
    if value < reach * 10.0 ** (-250.0 / order):
        floor = float(max(gap.max(initial=0.0), _bottleneck(a, b)))
        if 0 < floor < reach:
            value = _scaled_wasserstein(a, b, gap, order, ground, _power_of_two_above(floor))
    return float(value)


def _scaled_wasserstein(a, b, gap, order, ground, scale) -> float:
    """W_q computed on the diagrams divided by ``scale``, multiplied back by ``scale``."""
    cap = _cost_cap(len(a) + len(b) + gap.size)
    with np.errstate(over="ignore", under="ignore"):
        total = float(np.minimum((gap / scale) ** order, cap).sum())
        total += _wasserstein_power(a / scale, b / scale, order, ground)
    return total ** (1.0 / order) * scale


def _cost_cap(count: int) -> float:
    """Largest value a single powered cost may take so that sums of ``count`` of them stay finite.

    A cost this large is never part of an optimum once the diagrams are scaled (the optimal terms are at
    most about the number of points), so clipping changes no optimal matching.
    """
    return 1e300 / (count + 1)


def _wasserstein_power(a, b, order, ground) -> float:
    """Sum of matched costs (already raised to ``order``) between finite diagrams (scaled: see ``_wasserstein``)."""
    scale = 2.0 if ground == "sup" else np.sqrt(2.0)
    cap = _cost_cap(len(a) + len(b))
    diag_a, diag_b = (a[:, 1] - a[:, 0]) / scale, (b[:, 1] - b[:, 0]) / scale
    cost_a, cost_b = np.minimum(diag_a**order, cap), np.minimum(diag_b**order, cap)
    n, m = len(a), len(b)
    if n == 0 or m == 0:
        return float(cost_a.sum() + cost_b.sum())
    pairs = _useful_pairs(a, b, cost_a, cost_b, order, ground)
    if pairs is None:  # too many candidate pairs to list (tied diagrams): the dense problem, or a refusal
        return _dense_transport(a, b, cost_a, cost_b, order, ground)
    rows, cols, cost = pairs
    if rows.size == 0:
        return float(cost_a.sum() + cost_b.sum())
    if rows.size > SPARSE_PAIR_LIMIT:
        return _dense_transport(a, b, cost_a, cost_b, order, ground)
    # Left: a_0..a_{n-1}, then diagonal copies of b. Right: b_0..b_{m-1}, then diagonal copies of a.
    # A diagonal copy pair (b'_j, a'_i) is needed only where (a_i, b_j) may be matched.
    left = np.concatenate((rows, np.arange(n), n + np.arange(m), n + cols))
    right = np.concatenate((cols, m + np.arange(n), np.arange(m), m + rows))
    weight = np.concatenate((cost, cost_a, cost_b, np.zeros(rows.size)))
    if n + m <= DENSE_ASSIGNMENT_LIMIT:
        return _dense_assignment(n, m, rows, cols, cost, cost_a, cost_b)
    if (n + 1) * (m + 1) <= TERMINATING_CELL_LIMIT:
        return _dense_transport(a, b, cost_a, cost_b, order, ground)
    # Only very large diagrams reach scipy's sparse matching (see TERMINATING_CELL_LIMIT). scipy drops zero
    # weights, so shift all by the same amount (every perfect matching has n + m edges, same optimum);
    # shifting by max(weight) made its LAPJVsp cycle forever on tied H0 diagrams, a tiny shift did not.
    offset = 1e-300
    graph = sp.csr_matrix((weight + offset, (left, right)), shape=(n + m, n + m))
    row_ind, col_ind = min_weight_full_bipartite_matching(graph)
    chosen = np.asarray(graph[row_ind, col_ind]).ravel() - offset
    return float(np.maximum(chosen, 0.0).sum())


def _dense_assignment(n, m, rows, cols, cost, cost_a, cost_b) -> float:
    """The augmented (n+m) x (n+m) assignment problem solved densely (scipy's shortest augmenting path).

    Pairs outside the useful ones, and off-diagonal projections, cost more than sending every
    point to the diagonal, so no optimum uses them; diagonal copies match each other for free.
    """
    from scipy.optimize import linear_sum_assignment

    forbidden = float(cost_a.sum() + cost_b.sum()) + 1.0
    matrix = np.full((n + m, n + m), forbidden)
    matrix[rows, cols] = cost
    matrix[np.arange(n), m + np.arange(n)] = cost_a
    matrix[n + np.arange(m), np.arange(m)] = cost_b
    matrix[n:, m:] = 0.0
    row_ind, col_ind = linear_sum_assignment(matrix)
    return float(matrix[row_ind, col_ind].sum())


def _dense_transport(a, b, cost_a, cost_b, order, ground) -> float:
    """Exact optimum by network simplex (POT) with one diagonal node carrying the other side's mass.

    The transport polytope has integral vertices, so the optimal plan is a matching.
    """
    import ot

    n, m = len(a), len(b)
    cells = float(n + 1) * (m + 1)
    budget = default_memory_budget()
    if cells > DENSE_CELL_LIMIT or cells * TRANSPORT_BYTES_PER_CELL > budget:
        raise MemoryBudgetError(
            f"Diagrams of {n} and {m} points, most of them close to each other or far from the diagonal, need a "
            f"dense {n + 1} x {m + 1} transport problem (about {cells * TRANSPORT_BYTES_PER_CELL / 2**30:.3g} GiB; "
            f"limits {DENSE_CELL_LIMIT:.3g} cells and the memory budget of {budget / 2**30:.3g} GiB). Compare fewer "
            f"points, for example the classes with the largest persistence.", parameter="a")
    costs = np.zeros((n + 1, m + 1))
    block = costs[:n, :m]
    np.abs(a[:, None, 0] - b[None, :, 0], out=block)  # one n x m temporary at a time, not an n x m x 2 array
    other = np.abs(a[:, None, 1] - b[None, :, 1])
    if ground == "sup":
        np.maximum(block, other, out=block)
    else:
        np.hypot(block, other, out=block)
    del other
    np.power(block, order, out=block)
    # a pair dearer than sending both points to the diagonal is never needed: the diagonal node carries it
    np.minimum(costs[:n, :m], cost_a[:, None] + cost_b[None, :], out=costs[:n, :m])
    costs[:n, m], costs[n, :m] = cost_a, cost_b
    mass_a = np.concatenate((np.ones(n), [m]))
    mass_b = np.concatenate((np.ones(m), [n]))
    return float(ot.emd2(mass_a, mass_b, costs, numItermax=10**9))


def _useful_pairs(a, b, cost_a, cost_b, order, ground, limit=SPARSE_PAIR_LIMIT):
    """Pairs (i, j) whose matching cost is below sending both to the diagonal, with that cost.

    None when more than ``limit`` candidate pairs would be listed (they are counted first).
    """
    radius = (cost_a + cost_b.max()) ** (1.0 / order)  # sup-distance bound for any useful partner
    tree = cKDTree(b)
    # Count before listing: tied diagrams (12,000 x 17,000 points) had built 2e8 pairs as Python lists (15 GB).
    if int(tree.query_ball_point(a, radius * (1 + 1e-9), p=np.inf, return_length=True).sum()) > limit:
        return None
    lists = tree.query_ball_point(a, radius * (1 + 1e-9), p=np.inf)
    rows = np.repeat(np.arange(len(a)), [len(x) for x in lists])
    cols = np.fromiter((j for x in lists for j in x), dtype=np.intp, count=rows.size)
    diff = np.abs(a[rows] - b[cols])
    dist = diff.max(axis=1) if ground == "sup" else np.hypot(diff[:, 0], diff[:, 1])
    cost = np.minimum(dist**order, _cost_cap(len(a) + len(b)))
    keep = cost < cost_a[rows] + cost_b[cols]
    return rows[keep], cols[keep], cost[keep]
