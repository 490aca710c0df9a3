"""The distance-to-measure band: a sup-norm bootstrap of the vertex weights, no diagram per replicate.

The diagram is that of the DTM-weighted Rips filtration on the landmarks (gudhi's doubled
scale). Its vertex weights are the empirical distance to measure of the whole cloud, with
mass m = k / n, evaluated at the landmarks. A bootstrap sample is the same points with
multinomial counts, so a replicate's weights are partial sums over each landmark's nearest
neighbours, listed once before the replicates start.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tdakit.core.geometry import _geometry
from tdakit.core.geometry.cloud import Cloud

__all__ = ["NeighbourTable", "neighbour_table", "weighted_dtm", "dtm_sup_task", "spare_neighbours"]


def spare_neighbours(k: int, n_points: int) -> int:
    """How many neighbours to list so that a bootstrap sample reaches mass k among them.

    Under resampling the listed neighbours' total count is about Poisson(K); K = k + 6 sqrt(k) + 10
    falls short of k with probability below 1e-9 per landmark and replicate (normal tail at
    6 standard deviations; common practice), and a shortfall is counted, never hidden.
    """
    return int(min(n_points, k + np.ceil(6.0 * np.sqrt(k)) + 10))


@dataclass(frozen=True, eq=False)
class NeighbourTable:
    """Each landmark's nearest cloud points (itself first): squared distances and indices, mass k of n."""

    squared: NDArray[np.float64]
    indices: NDArray[np.intp]
    k: int
    n_points: int


def neighbour_table(cloud: Cloud, landmarks: NDArray[np.intp], k: int) -> NeighbourTable:
    """List the ``spare_neighbours(k)`` nearest points of every landmark, once."""
    distances, indices = _geometry.knn_table(cloud, spare_neighbours(k, cloud.n_points), landmarks)
    return NeighbourTable(distances**2, indices, k, cloud.n_points)


def weighted_dtm(table: NeighbourTable, counts: NDArray[np.int64] | None = None) -> tuple[NDArray[np.float64], int]:
    """Distance to measure at the landmarks for a sample given as counts per cloud point.

    d(x)^2 = (1/k) sum_j c_j d_j^2 over x's neighbours in order, the last one taking only the
    mass that remains to reach k (q = 2, the point itself counted). ``counts=None`` is the
    cloud itself (every count 1). Returns the weights and the number of landmarks whose
    listed neighbours held less than mass k (their missing mass is put at the last listed
    distance, a lower bound).
    """
    k = table.k
    if counts is None:
        return np.sqrt(table.squared[:, :k].mean(axis=1)), 0
    weight = counts[table.indices]
    before = np.cumsum(weight, axis=1) - weight
    take = np.clip(k - before, 0, weight)
    mass = take.sum(axis=1)
    total = (take * table.squared).sum(axis=1)
    short = mass < k
    total[short] += (k - mass[short]) * table.squared[short, -1]
    return np.sqrt(total / k), int(short.sum())


def dtm_sup_task(payload, rng) -> NDArray[np.float64]:
    """One bootstrap replicate: (sup over landmarks of |d*_m - d_m|, landmarks short of mass)."""
    table, weights = payload
    counts = np.bincount(rng.integers(table.n_points, size=table.n_points), minlength=table.n_points)
    boot, short = weighted_dtm(table, counts)
    return np.array([np.abs(boot - weights).max(), short], dtype=np.float64)
