"""Predicting the size of a flag complex before building it, and refusing what will not fit."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.special import gammaln

from tdakit.errors import MemoryBudgetError

__all__ = ["SizeEstimate", "estimate_flag_complex", "default_memory_budget", "check_budget",
           "check_dense_matrix", "alpha_estimate", "BYTES_PER_SIMPLEX"]

# Peak bytes per simplex while gudhi computes persistence: 64-72 measured with gudhi 3.13
# (build ~35-45 B, persistence peak 64-72 B per simplex).
BYTES_PER_SIMPLEX = 72
SECONDS_PER_SIMPLEX = 2.5e-6  # measured: ~2-3 us per simplex for persistence with gudhi 3.13
_SAMPLES = 4000
# Simplices per point of a full alpha complex of random points, by dimension (measured with gudhi 3.13 on
# uniform and Gaussian clouds: 6.0, 28.7-28.9, 176-179, 1081-1086).
ALPHA_SIMPLICES_PER_POINT = {1: 2.0, 2: 6.0, 3: 29.0, 4: 180.0, 5: 1090.0}


@dataclass(frozen=True)
class SizeEstimate:
    """Predicted number of simplices per dimension of a flag complex.

    ``counts[j]`` is the number of j-simplices (exact for j <= 1; for j >= 2 an
    unbiased Monte Carlo estimate, with its standard error in ``errors[j]``).
    """

    counts: tuple[float, ...]
    errors: tuple[float, ...]

    @property
    def total(self) -> float:
        return float(sum(self.counts))

    @property
    def bytes(self) -> float:
        return self.total * BYTES_PER_SIMPLEX

    @property
    def seconds(self) -> float:
        return self.total * SECONDS_PER_SIMPLEX


def default_memory_budget() -> int:
    """A quarter of the machine's memory, or of the container's limit when lower, in bytes (a tdakit default).

    Stable: the same command passes or fails the pre-flight whatever else is running (half of the memory
    available at the moment varied 3.6-10.5 GiB between runs here), and two workers each holding a
    complex at the budget still leave half the machine free.
    """
    import psutil

    return int(min(psutil.virtual_memory().total, _container_limit()) // 4)


def _container_limit() -> float:
    """The cgroup memory limit of this process (v2 or v1), or inf when there is none."""
    for path in ("/sys/fs/cgroup/memory.max", "/sys/fs/cgroup/memory/memory.limit_in_bytes"):
        try:
            with open(path) as stream:
                text = stream.read().strip()
        except OSError:
            continue
        if text.isdigit():
            return float(text)
    return float("inf")


def _log_comb(n: NDArray[np.float64], k: int) -> NDArray[np.float64]:
    with np.errstate(divide="ignore", invalid="ignore"):
        out = gammaln(n + 1) - gammaln(k + 1) - gammaln(n - k + 1)
    return np.where(n >= k, out, -np.inf)


def estimate_flag_complex(
    matrix: NDArray[np.float64], cap: float, max_simplex_dim: int, *, seed: int = 0, budget: float | None = None
) -> SizeEstimate:
    """Estimate the simplices of the flag complex of ``{(i, j): matrix[i, j] <= cap}``.

    Every j-simplex is counted once, at its lowest vertex v, as a j-clique among the
    upper neighbours of v. Drawing (v, j-subset) pairs uniformly from all
    candidates (v with weight C(s_v, j), then a uniform j-subset of its s_v upper
    neighbours) and counting the fraction that are cliques gives an unbiased
    estimate of the number of j-simplices. With a ``budget``, sampling is skipped when the
    exact upper bound sum_v C(s_v, j) already fits it (the counts are then that bound).
    """
    n = matrix.shape[0]
    adjacency = (matrix <= cap) & np.isfinite(matrix)  # inf marks a missing edge
    np.fill_diagonal(adjacency, False)
    upper = np.triu(adjacency, k=1)
    degree = upper.sum(axis=1).astype(np.float64)
    counts, errors = [float(n), float(degree.sum())], [0.0, 0.0]
    if budget is not None:
        bounds = [float(np.exp(_log_comb(degree, j)).sum()) for j in range(2, max_simplex_dim + 1)]
        bound = SizeEstimate(tuple(counts + bounds)[: max_simplex_dim + 1], (0.0,) * (max_simplex_dim + 1))
        if bound.bytes <= budget:
            return bound
    rng = np.random.default_rng(seed)
    for j in range(2, max_simplex_dim + 1):
        count, error = _estimate_cliques(adjacency, upper, degree, j, rng)
        counts.append(count)
        errors.append(error)
    return SizeEstimate(tuple(counts[: max_simplex_dim + 1]), tuple(errors[: max_simplex_dim + 1]))


def _estimate_cliques(adjacency, upper, degree, j, rng):
    log_weights = _log_comb(degree, j)
    if not np.isfinite(log_weights).any():
        return 0.0, 0.0
    log_total = np.logaddexp.reduce(log_weights[np.isfinite(log_weights)])
    weights = np.exp(log_weights - log_total)
    vertices = rng.choice(degree.size, size=_SAMPLES, p=weights / weights.sum())
    hits = 0
    for v, count in zip(*np.unique(vertices, return_counts=True)):
        neighbours = np.flatnonzero(upper[v])
        picks = np.stack([rng.choice(neighbours, size=j, replace=False) for _ in range(count)])
        ok = np.ones(count, dtype=bool)
        for a in range(j):
            for b in range(a + 1, j):
                ok &= adjacency[picks[:, a], picks[:, b]]
        hits += int(ok.sum())
    fraction = hits / _SAMPLES
    total = float(np.exp(log_total))
    return total * fraction, total * np.sqrt(max(fraction * (1 - fraction), 1.0 / _SAMPLES) / _SAMPLES)


def check_dense_matrix(n_vertices: int, budget: float) -> None:
    """Refuse a dense vertex-by-vertex matrix (8-byte values plus two boolean masks) beyond the budget."""
    needed = float(n_vertices) ** 2 * 10
    if needed > budget:
        raise MemoryBudgetError(
            f"Refused before building: {n_vertices} vertices need a {n_vertices} x {n_vertices} distance matrix of "
            f"about {needed / 2**30:.3g} GiB, over the memory budget of {budget / 2**30:.3g} GiB. Choose fewer "
            f"landmarks with select_landmarks (a few hundred to a few thousand is usual), or raise 'memory_budget'.",
            parameter="landmarks")


def alpha_estimate(n_points: int, n_dims: int) -> SizeEstimate:
    """Expected size of a full alpha complex (measured simplices per point; exact counts vary with the data)."""
    return SizeEstimate((n_points * ALPHA_SIMPLICES_PER_POINT[n_dims],), (0.0,))


def check_budget(estimate: SizeEstimate, budget: float, *, what: str, advice: str) -> None:
    """Raise MemoryBudgetError when the estimate's peak memory exceeds ``budget`` bytes."""
    if estimate.bytes <= budget:
        return
    per_dim = ", ".join(f"{c:.3g}" for c in estimate.counts)
    raise MemoryBudgetError(
        f"Refused before building: the {what} would hold about {estimate.total:.3g} simplices "
        f"(per dimension: {per_dim}), about {estimate.bytes / 2**30:.3g} GiB at the persistence peak "
        f"and roughly {estimate.seconds:.3g} s of work, over the memory budget of {budget / 2**30:.3g} GiB. "
        f"{advice} Or raise 'memory_budget' (bytes) if the machine really has that much memory.",
        parameter="memory_budget")
