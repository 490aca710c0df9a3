"""Predicting the size of a flag complex before building it, and refusing what will not fit."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray
from scipy.special import gammaln

from tdakit.errors import MemoryBudgetError

__all__ = ["SizeEstimate", "estimate_flag_complex", "default_memory_budget", "check_budget",
           "check_dense_matrix", "alpha_estimate", "BYTES_PER_SIMPLEX", "estimate_from_samples", "settings_that_fit"]

# Peak bytes per simplex while gudhi computes persistence: 64-72 measured with gudhi 3.13
# (build ~35-45 B, persistence peak 64-72 B per simplex).
BYTES_PER_SIMPLEX = 72
SECONDS_PER_SIMPLEX = 2.5e-6  # measured: ~2-3 us per simplex for persistence with gudhi 3.13
_SAMPLES = 4000
_BLOCK_CELLS = 2**23  # cells of the n x n matrix examined at once by the estimate (8 MiB of booleans)
DENSE_BYTES_PER_CELL = 16
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
    Memory: blocks of rows of the matrix at a time, never a second n x n array.
    """
    n = matrix.shape[0]
    degree = _upper_degrees(matrix, cap)
    counts, errors = [float(n), float(degree.sum())], [0.0, 0.0]
    if budget is not None:
        bounds = [float(np.exp(_log_comb(degree, j)).sum()) for j in range(2, max_simplex_dim + 1)]
        bound = SizeEstimate(tuple(counts + bounds)[: max_simplex_dim + 1], (0.0,) * (max_simplex_dim + 1))
        if bound.bytes <= budget:
            return bound
    rng = np.random.default_rng(seed)
    for j in range(2, max_simplex_dim + 1):
        count, error = _estimate_cliques(matrix, cap, degree, j, rng)
        counts.append(count)
        errors.append(error)
    return SizeEstimate(tuple(counts[: max_simplex_dim + 1]), tuple(errors[: max_simplex_dim + 1]))


def _is_edge(values, cap):
    return (values <= cap) & np.isfinite(values)  # inf marks a missing edge


def _upper_degrees(matrix, cap) -> NDArray[np.float64]:
    """Per vertex, its neighbours of higher index, counted a block of rows at a time."""
    n = matrix.shape[0]
    degree = np.zeros(n)
    step = max(1, min(n, _BLOCK_CELLS // max(n, 1)))
    columns = np.arange(n)
    for start in range(0, n, step):
        rows = np.arange(start, min(start + step, n))
        edge = _is_edge(matrix[start:start + rows.size], cap) & (columns[None, :] > rows[:, None])
        degree[rows] = edge.sum(axis=1)
    return degree


def _estimate_cliques(matrix, cap, degree, j, rng):
    log_weights = _log_comb(degree, j)
    if not np.isfinite(log_weights).any():
        return 0.0, 0.0
    log_total = np.logaddexp.reduce(log_weights[np.isfinite(log_weights)])
    weights = np.exp(log_weights - log_total)
    vertices = rng.choice(degree.size, size=_SAMPLES, p=weights / weights.sum())
    hits = 0
    for v, count in zip(*np.unique(vertices, return_counts=True)):
        row = matrix[v]
        neighbours = np.flatnonzero(_is_edge(row, cap) & (np.arange(row.size) > v))
        picks = np.stack([rng.choice(neighbours, size=j, replace=False) for _ in range(count)])
        ok = np.ones(count, dtype=bool)
        for a in range(j):
            for b in range(a + 1, j):
                ok &= _is_edge(matrix[picks[:, a], picks[:, b]], cap)
        hits += int(ok.sum())
    fraction = hits / _SAMPLES
    total = float(np.exp(log_total))
    return total * fraction, total * np.sqrt(max(fraction * (1 - fraction), 1.0 / _SAMPLES) / _SAMPLES)


def estimate_from_samples(values, n: int, cap: float, max_simplex_dim: int, *, samples: int = 400,
                          subsets: int = 24, seed: int = 0) -> SizeEstimate:
    """Estimate a flag complex's simplices from a sample of vertices, without its n x n matrix.

    ``values(rows, cols)`` returns the edge values between vertex sets (the complex's own rule). For
    ``samples`` vertices v drawn uniformly, the full row gives v's neighbours N(v); ``subsets`` uniform
    j-subsets of N(v) give the fraction f_v that are cliques, so v lies in about C(|N(v)|, j) f_v
    j-simplices of j + 1 vertices; scaling by n / samples / (j + 1) counts each simplex once
    (unbiased). Memory: one (samples, n) block of values. Without a cap every pair is an edge and the
    counts are exact binomials.
    """
    if not np.isfinite(cap):
        counts = tuple(float(np.exp(_log_comb(np.array([float(n)]), j + 1))[0]) for j in range(max_simplex_dim + 1))
        return SizeEstimate(counts, (0.0,) * len(counts))
    rng = np.random.default_rng(seed)
    rows = np.sort(rng.choice(n, size=min(samples, n), replace=False))
    scale = n / rows.size
    block = values(rows, np.arange(n))
    edge = _is_edge(block, cap)
    edge[np.arange(rows.size), rows] = False
    neighbours = [np.flatnonzero(line) for line in edge]
    degree = np.array([len(x) for x in neighbours], dtype=np.float64)
    counts, errors = [float(n), scale * degree.sum() / 2], [0.0, scale * degree.std() * np.sqrt(rows.size) / 2]
    for j in range(2, max_simplex_dim + 1):
        per_vertex = np.zeros(rows.size)
        for i, near in enumerate(neighbours):
            if near.size < j:
                continue
            picks = np.stack([rng.choice(near, size=j, replace=False) for _ in range(subsets)])
            flat = picks.ravel()
            inner = values(flat, flat)
            ok = np.ones(subsets, dtype=bool)
            for a in range(j):
                for b in range(a + 1, j):
                    ok &= _is_edge(inner[np.arange(subsets) * j + a, np.arange(subsets) * j + b], cap)
            per_vertex[i] = np.exp(_log_comb(np.array([float(near.size)]), j)[0]) * ok.mean()
        counts.append(scale * per_vertex.sum() / (j + 1))
        errors.append(scale * per_vertex.std() * np.sqrt(rows.size) / (j + 1))
    return SizeEstimate(tuple(counts), tuple(errors))


def settings_that_fit(values, n: int, cap: float, max_simplex_dim: int, budget: float) -> str:
    """Concrete settings whose estimated complex fits ``budget``: a scale cap with these vertices, a vertex count.

    In parameter words (``max_scale=...``, ``n_landmarks=...``); front ends translate them.
    The vertex count assumes the same cap and that j-simplices grow like n^(j+1) (denser landmarks
    at a fixed scale), and the dense matrix of 8 bytes per cell.
    """
    rng = np.random.default_rng(1)
    sample = np.sort(rng.choice(n, size=min(200, n), replace=False))
    found = values(sample, sample)
    found = np.sort(found[np.triu_indices(sample.size, 1)])
    found = found[np.isfinite(found) & (found > 0) & (found < cap)]
    advice = []
    if found.size:
        candidates = np.unique(np.quantile(found, np.geomspace(1e-3, 1.0, 14)))
        fitting = None
        for candidate in candidates:
            estimate = estimate_from_samples(values, n, float(candidate), max_simplex_dim, samples=150, subsets=12)
            if estimate.bytes + 16.0 * n * n > budget:
                break
            fitting = float(candidate)
        if fitting is not None:
            advice.append(f"max_scale={fitting:.4g} (with these {n} landmarks)")
    estimate = estimate_from_samples(values, n, cap, max_simplex_dim, samples=150, subsets=12)
    low, high = 2, n
    while low < high:
        mid = (low + high + 1) // 2
        ratio = mid / n
        size = sum(c * ratio ** (j + 1) for j, c in enumerate(estimate.counts)) * BYTES_PER_SIMPLEX + 16.0 * mid**2
        low, high = (mid, high) if size <= budget else (low, mid - 1)
    if low < n:
        cap_words = "no max_scale" if not np.isfinite(cap) else f"max_scale={cap:.4g}"
        advice.append(f"n_landmarks={low} (with {cap_words})")
    return ("Settings estimated to fit: " + " or ".join(advice) + ".") if advice else ""


def check_dense_matrix(n_vertices: int, budget: float, *, needed: float | None = None) -> None:
    """Refuse dense vertex-by-vertex matrices beyond the budget, before any is allocated.

    By default 16 bytes per cell: the float64 edge matrix, and a second one when edge collapse is
    re-checked (``flag_tree``); the estimate's boolean masks (about 5 per cell) cover one block of
    ``_BLOCK_CELLS`` cells at a time. Measured with tracemalloc (Rips matrix and its estimate, no cap and
    cap 1, 2,000 and 4,000 vertices): peaks of 10.0 and 9.5 bytes per cell, i.e. the 8-byte matrix plus
    the masks of one block (the masks had cost another full 10 bytes per cell before they were blocked).
    """
    cells = float(n_vertices) ** 2
    if needed is None:
        needed = cells * DENSE_BYTES_PER_CELL + 5 * min(cells, _BLOCK_CELLS)
    if needed > budget:
        per_cell = needed / cells  # the block's masks included: a slight overestimate for smaller counts
        fits = int(np.sqrt(budget / per_cell))
        advice = (f"Settings estimated to fit: n_landmarks={fits} or fewer (select_landmarks; a few hundred to a "
                  f"few thousand is usual), or raise 'memory_budget'." if fits >= 2 else
                  "No landmark count fits so small a budget: raise 'memory_budget'.")
        raise MemoryBudgetError(
            f"Refused before building: {n_vertices} vertices need a {n_vertices} x {n_vertices} distance matrix "
            f"(with its working copies about {needed / 2**30:.3g} GiB), over the memory budget of "
            f"{budget / 2**30:.3g} GiB. {advice}", parameter="landmarks")


def alpha_estimate(n_points: int, n_dims: int) -> SizeEstimate:
    """Expected size of a full alpha complex (measured simplices per point; exact counts vary with the data)."""
    return SizeEstimate((n_points * ALPHA_SIMPLICES_PER_POINT[n_dims],), (0.0,))


def check_budget(estimate: SizeEstimate, budget: float, *, what: str, advice: str, suggest=None) -> None:
    """Raise MemoryBudgetError when the estimate's peak memory exceeds ``budget`` bytes.

    ``suggest()``, called only when refusing, returns settings that would fit (see ``settings_that_fit``).
    """
    if estimate.bytes <= budget:
        return
    if suggest is not None:
        advice = f"{suggest()} {advice}".strip()
    per_dim = ", ".join(f"{c:.3g}" for c in estimate.counts)
    raise MemoryBudgetError(
        f"Refused before building: the {what} would hold about {estimate.total:.3g} simplices "
        f"(per dimension: {per_dim}), about {estimate.bytes / 2**30:.3g} GiB at the persistence peak "
        f"and roughly {estimate.seconds:.3g} s of work, over the memory budget of {budget / 2**30:.3g} GiB. "
        f"{advice} Or raise 'memory_budget' (bytes) if the machine really has that much memory.",
        parameter="memory_budget")
