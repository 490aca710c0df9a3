"""Persistence landscapes on a grid (Bubenik's convention)."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from tdakit._validation import check_int, fail
from tdakit.core.topology.distances import as_diagram
from tdakit.core.topology.preflight import default_memory_budget
from tdakit.errors import MemoryBudgetError

__all__ = ["persistence_landscape"]
MAX_GRID = 10_000_000


def persistence_landscape(diagram: ArrayLike, grid: ArrayLike, *, n_levels: int = 3) -> NDArray[np.float64]:
    """The first ``n_levels`` landscape functions of one diagram, evaluated on ``grid``.

    Parameters
    ----------
    diagram : array-like of shape (m, 2)
        (birth, death) pairs; classes that never die are left out (common practice:
        landscapes describe the finite part of a diagram).
    grid : array-like of shape (n_grid,)
        Increasing evaluation points.
    n_levels : int, default=3

    Returns
    -------
    ndarray of shape (n_levels, n_grid)
        ``lambda_k(t)`` = k-th largest of the tents ``max(0, min(t - b, d - t))``.

    Notes
    -----
    Bubenik's tents have height (d - b)/2; gudhi's ``Landscape`` returns sqrt(2)
    times these values.

    References
    ----------
    .. [1] P. Bubenik, "Statistical topological data analysis using persistence
       landscapes", J. Mach. Learn. Res. 16 (2015) 77-102.
    """
    pairs = as_diagram(diagram, "diagram", "persistence_landscape")
    try:
        grid = np.asarray(grid, dtype=np.float64)
    except (TypeError, ValueError):
        raise fail("grid", "persistence_landscape", "an increasing 1-D array of at least 2 real values", grid) from None
    if grid.size > MAX_GRID:
        raise fail("grid", "persistence_landscape", f"at most {MAX_GRID:,} evaluation points (the tents of every "
                   "class are evaluated at each)", f"{grid.size:,} points")
    if grid.ndim != 1 or grid.size < 2 or not np.all(np.isfinite(grid)) or not np.all(np.diff(grid) > 0):
        raise fail("grid", "persistence_landscape", "an increasing 1-D array of at least 2 values", grid)
    n_levels = check_int(n_levels, "n_levels", "persistence_landscape", low=1, high=1000)
    out = np.zeros((n_levels, grid.size))
    pairs = pairs[np.isfinite(pairs[:, 1])]
    if pairs.shape[0] == 0:
        return out
    needed = 24.0 * pairs.shape[0] * grid.size  # the tents, one temporary and the sorted copy
    budget = default_memory_budget()
    if needed > budget:
        raise MemoryBudgetError(
            f"Refused before building: {pairs.shape[0]} classes evaluated at {grid.size} grid points need about "
            f"{needed / 2**30:.3g} GiB (memory budget {budget / 2**30:.3g} GiB). Use a coarser 'grid' (at most "
            f"{int(budget / (24.0 * pairs.shape[0])):,} points) or fewer classes.", parameter="grid")
    births, deaths = pairs[:, 0:1], pairs[:, 1:2]
    tents = np.maximum(0.0, np.minimum(grid[None, :] - births, deaths - grid[None, :]))
    top = min(n_levels, tents.shape[0])
    out[:top] = -np.sort(-tents, axis=0)[:top] if tents.shape[0] <= 4 * n_levels else \
        -np.sort(-np.partition(tents, tents.shape[0] - top, axis=0)[-top:], axis=0)
    return out
