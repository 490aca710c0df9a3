"""Binned Gaussian kernel density estimates on a grid and their superlevel-set diagrams."""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tdakit.core.geometry.cloud import Cloud

__all__ = ["DensityGrid", "make_density_grid", "smooth_counts", "grid_diagrams", "scott_bandwidth"]

# Grid cells per axis by dimension (a tdakit default: cells well below the bandwidth).
DEFAULT_RESOLUTION = {1: 512, 2: 128, 3: 48}


@dataclass(frozen=True, eq=False)
class DensityGrid:
    """Where and how the density is evaluated: bin edges, the points' bin counts, the kernel width."""

    lower: NDArray[np.float64]
    cell: NDArray[np.float64]
    shape: tuple[int, ...]
    counts: NDArray[np.float64]
    bandwidth: float
    periodic: bool

    @property
    def cell_volume(self) -> float:
        return float(np.prod(self.cell))


def scott_bandwidth(points: NDArray[np.float64]) -> float:
    """Scott's rule: mean standard deviation times n^(-1/(d+4)) (Scott 1992, Multivariate Density Estimation)."""
    n, d = points.shape
    return float(points.std(axis=0).mean() * n ** (-1.0 / (d + 4)))


def make_density_grid(cloud: Cloud, bandwidth: float, resolution: int | None) -> DensityGrid:
    """Bin the cloud on a regular grid padded by 4 bandwidths (none in a periodic box)."""
    d = cloud.n_dims
    periodic = cloud.metric.name == "periodic"
    per_axis = resolution or DEFAULT_RESOLUTION[d]
    if periodic:
        lower, upper = np.zeros(d), np.asarray(cloud.metric.box, dtype=np.float64)
    else:
        lower = cloud.points.min(axis=0) - 4 * bandwidth
        upper = cloud.points.max(axis=0) + 4 * bandwidth
    cell = (upper - lower) / per_axis
    shape = (per_axis,) * d
    index = np.clip(((cloud.points - lower) / cell).astype(np.int64), 0, per_axis - 1)
    counts = np.bincount(np.ravel_multi_index(index.T, shape), minlength=per_axis**d).astype(np.float64)
    return DensityGrid(lower, cell, shape, counts.reshape(shape), float(bandwidth), periodic)


def smooth_counts(grid: DensityGrid, counts: NDArray[np.float64], n_points: int) -> NDArray[np.float64]:
    """Gaussian KDE on the grid from bin counts: (1/n) sum_i K_h(x - x_i), points at their bin."""
    from scipy.ndimage import gaussian_filter

    sigma = grid.bandwidth / grid.cell
    mode = "wrap" if grid.periodic else "constant"
    return gaussian_filter(counts, sigma=sigma, mode=mode, truncate=4.0) / (n_points * grid.cell_volume)


def grid_diagrams(density: NDArray[np.float64], max_dim: int, periodic: bool) -> list[NDArray[np.float64]]:
    """Superlevel-set diagrams of ``density`` as sublevel sets of its negative (cubical complex)."""
    import gudhi

    values = -density
    if periodic:
        cubical = gudhi.PeriodicCubicalComplex(top_dimensional_cells=values,
                                               periodic_dimensions=[True] * values.ndim)
    else:
        cubical = gudhi.CubicalComplex(top_dimensional_cells=values)
    cubical.compute_persistence(homology_coeff_field=2, min_persistence=0.0)
    out = []
    for k in range(max_dim + 1):
        pairs = cubical.persistence_intervals_in_dimension(k).reshape(-1, 2)
        out.append(pairs[pairs[:, 1] > pairs[:, 0]])
    return out
