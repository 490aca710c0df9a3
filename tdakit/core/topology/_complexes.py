"""Building gudhi simplex trees for each filtration on the landmarks.

Every builder returns ``(tree, squared)``: the simplex tree, whose vertex v is
landmark number v, and whether its filtration values are squared lengths
(then the diagram is mapped through sqrt, which is monotone).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from tdakit.core.geometry import _geometry
from tdakit.core.geometry.cloud import Cloud
from tdakit.core.topology import _witness
from tdakit.core.topology.preflight import (
    SizeEstimate,
    alpha_estimate,
    check_budget,
    check_dense_matrix,
    estimate_flag_complex,
    estimate_from_samples,
    settings_that_fit,
)

# Above this many edges, collapsing just to re-check the budget takes longer than a user
# expects from a refusal (measured: 0.5 M edges ~4 s, 4.5 M edges ~100 s, gudhi 3.13).
COLLAPSE_RECHECK_EDGES = 1_000_000
_ADVICE = "Lower 'max_scale', 'max_dim' or the number of landmarks."
# From this many vertices on, the complex is estimated from sampled rows before the n x n matrix exists
# (3,000 vertices: a 72 MB matrix; 20,000 with max_dim 2 had grown the process to 9.6 GB before refusing).
SAMPLED_PREFLIGHT_VERTICES = 3000


def flag_tree(matrix: NDArray[np.float64], cap: float, max_dim: int, *, collapse: bool, budget: float, what: str):
    """Flag complex of ``matrix`` (diagonal = vertex values) up to dimension max_dim + 1, after a pre-flight."""
    import gudhi

    estimate = estimate_flag_complex(matrix, cap, max_dim + 1, budget=budget)
    suggest = _suggester(lambda rows, cols: matrix[np.ix_(rows, cols)], matrix.shape[0], cap, max_dim, budget)
    over = _refuse_flag(estimate, budget, collapse=collapse, max_dim=max_dim, what=what, suggest=suggest)
    # inf marks a missing edge: never insert it, even when the filtration has no cap
    tree = gudhi.SimplexTree.create_from_array(matrix, max_filtration=min(cap, np.finfo(np.float64).max))
    if collapse and max_dim >= 1:
        _collapse(tree)
        if over:
            collapsed = _collapsed_matrix(tree, matrix.shape[0])
            check_budget(estimate_flag_complex(collapsed, cap, max_dim + 1, budget=budget), budget,
                         what=f"{what} after edge collapse", advice=_ADVICE)
    tree.expansion(max_dim + 1)
    return tree


def _suggester(values, n, cap, max_dim, budget):
    return lambda: settings_that_fit(values, n, cap, max_dim + 1, budget)


def _refuse_flag(estimate, budget, *, collapse, max_dim, what, suggest) -> bool:
    """Refuse a flag complex whose graph, or whose whole complex when collapse cannot be re-checked, is over budget.

    Returns whether the complex is over budget (to be re-checked after edge collapse).
    """
    graph = SizeEstimate(estimate.counts[:2], estimate.errors[:2])
    check_budget(graph, budget, what=f"{what} graph", advice=_ADVICE, suggest=suggest)
    over = estimate.bytes > budget
    if over and not (collapse and max_dim >= 1 and graph.counts[1] <= COLLAPSE_RECHECK_EDGES):
        check_budget(estimate, budget, what=what, advice=_ADVICE + " Edge collapse is applied before expansion "
                     f"and often shrinks the complex a hundredfold, but with over {COLLAPSE_RECHECK_EDGES:,} edges "
                     "tdakit does not collapse just to find out.", suggest=suggest)
    return over


def sampled_preflight(values, n, cap, max_dim, *, collapse, budget, what) -> None:
    """Refuse, before the n x n matrix is built, a complex whose estimate from sampled rows is over budget.

    Runs from ``SAMPLED_PREFLIGHT_VERTICES`` vertices on (its advice then covers the complex and the matrix),
    then refuses a matrix over budget; the exact pre-flight on the matrix follows.
    """
    if n < SAMPLED_PREFLIGHT_VERTICES:
        check_dense_matrix(n, budget)
        return
    estimate = estimate_from_samples(values, n, cap, max_dim + 1)
    # refuse on the lower end of the sampled estimate (2 standard errors): the exact check follows anyway
    low = SizeEstimate(tuple(max(c - 2 * e, 0.0) for c, e in zip(estimate.counts, estimate.errors)), estimate.errors)
    _refuse_flag(low, budget, collapse=collapse, max_dim=max_dim, what=what,
                 suggest=_suggester(values, n, cap, max_dim, budget))
    check_dense_matrix(n, budget)


def _collapse(tree) -> None:
    """Collapse edges while a pass still removes at least 5% of them (every pass is exact).

    Measured with gudhi 3.13: on 300 Gaussian points in R^3 the passes remove 95%, 22%, 8%, 3% of
    the edges; on a plane circle 9%, then 1.6% per pass at a third of the first pass's cost each.
    """
    before = tree.num_simplices()
    for _ in range(10):
        tree.collapse_edges()
        after = tree.num_simplices()
        if after > 0.95 * before:
            return
        before = after


def _collapsed_matrix(tree, n):
    matrix = np.full((n, n), np.inf)
    for simplex, value in tree.get_skeleton(1):
        if len(simplex) == 2:
            matrix[simplex[0], simplex[1]] = matrix[simplex[1], simplex[0]] = value
        else:
            matrix[simplex[0], simplex[0]] = value
    return matrix


def _landmark_matrix(cloud: Cloud, landmarks, budget) -> NDArray[np.float64]:
    """The dense landmark-to-landmark distance matrix, refused before it is built when over budget."""
    check_dense_matrix(landmarks.size, budget)
    return _geometry.pairwise(cloud, landmarks, landmarks)


def rips_tree(cloud: Cloud, landmarks, max_dim, cap, *, collapse, budget):
    sampled_preflight(lambda rows, cols: _geometry.pairwise(cloud, landmarks[rows], landmarks[cols]), landmarks.size,
                      cap, max_dim, collapse=collapse, budget=budget, what="Rips complex")
    matrix = _landmark_matrix(cloud, landmarks, budget)
    return flag_tree(matrix, cap, max_dim, collapse=collapse, budget=budget, what="Rips complex"), False


def sparse_rips_tree(cloud: Cloud, landmarks, max_dim, cap, *, sparse, seed, budget):
    import gudhi
    import gudhi.random

    matrix = _landmark_matrix(cloud, landmarks, budget)
    check_budget(estimate_flag_complex(matrix, cap, 1), budget, what="sparse Rips input graph", advice=_ADVICE)
    gudhi.random.set_seed(seed)
    complex_ = gudhi.RipsComplex(distance_matrix=matrix, max_edge_length=cap, sparse=sparse)
    return complex_.create_simplex_tree(max_dimension=max_dim + 1), False


def dtm_weights(cloud: Cloud, landmarks, k: int) -> NDArray[np.float64]:
    """Distance to measure of each landmark w.r.t. the whole cloud, q = 2, the point itself counted."""
    near = _geometry.knn_distances(cloud, k, include_self=True, rows=landmarks)
    return np.sqrt(np.mean(near**2, axis=1))


def weighted_rips_matrix(distances: NDArray[np.float64], weights: NDArray[np.float64],
                         power: float) -> NDArray[np.float64]:
    """Edge values of the DTM-weighted Rips filtration on gudhi's doubled scale (diagonal: vertex values).

    power 1: max(d + w_a + w_b, 2 w_a, 2 w_b) (gudhi's DTM-Rips); power inf: max(d, 2 w_a, 2 w_b).
    Either way every value moves by at most 2 max|w - w'| when the weights change to w'.
    """
    larger = 2 * np.maximum(weights[:, None], weights[None, :])
    matrix = distances + weights[:, None] + weights[None, :] if power == 1 else distances.copy()
    matrix = np.maximum(matrix, larger)
    np.fill_diagonal(matrix, 2 * weights)
    return matrix


def _weighted_block(distances, row_weights, col_weights, power, rows, cols):
    """``weighted_rips_matrix`` for a block of rows and columns (vertex values where a row meets its column)."""
    larger = 2 * np.maximum(row_weights[:, None], col_weights[None, :])
    block = distances + row_weights[:, None] + col_weights[None, :] if power == 1 else distances.copy()
    block = np.maximum(block, larger)
    same = rows[:, None] == cols[None, :]
    block[same] = (2 * np.broadcast_to(row_weights[:, None], block.shape))[same]
    return block


def dtm_tree(cloud: Cloud, landmarks, max_dim, cap, *, k, power, collapse, budget):
    weights = dtm_weights(cloud, landmarks, k)

    def values(rows, cols):
        distances = _geometry.pairwise(cloud, landmarks[rows], landmarks[cols])
        return _weighted_block(distances, weights[rows], weights[cols], power, rows, cols)

    sampled_preflight(values, landmarks.size, cap, max_dim, collapse=collapse, budget=budget, what="DTM-Rips complex")
    matrix = weighted_rips_matrix(_landmark_matrix(cloud, landmarks, budget), weights, power)
    return flag_tree(matrix, cap, max_dim, collapse=collapse, budget=budget, what="DTM-Rips complex"), False


def lazy_witness_tree(cloud: Cloud, landmarks, max_dim, cap, *, nu, collapse, budget):
    check_dense_matrix(landmarks.size, budget, needed=_witness.lazy_witness_bytes(cloud.n_points, landmarks.size))
    matrix = _witness.lazy_witness_edges(cloud, landmarks, nu, cap)
    return flag_tree(matrix, cap, max_dim, collapse=collapse, budget=budget, what="lazy witness complex"), False


def gudhi_witness_tree(cloud: Cloud, landmarks, max_dim, cap, *, strong):
    import gudhi

    table = _witness.nearest_landmark_table(cloud, landmarks, cap, max_dim + 2)
    kind = gudhi.StrongWitnessComplex if strong else gudhi.WitnessComplex
    tree = kind(nearest_landmark_table=table).create_simplex_tree(
        max_alpha_square=cap * cap, limit_dimension=max_dim + 1)
    return tree, True


def alpha_tree(cloud: Cloud, landmarks, max_dim, cap, *, budget):
    import gudhi

    check_budget(alpha_estimate(landmarks.size, cloud.n_dims), budget, what="alpha complex",
                 advice="Use fewer points (landmarks) or a Rips or witness filtration.")

    complex_ = gudhi.AlphaComplex(points=np.asarray(cloud.points[landmarks]))
    return complex_.create_simplex_tree(max_alpha_square=cap * cap), True
