"""Betti curves and persistence landscapes, each with what the band guarantees about them."""

from __future__ import annotations

import numpy as np

from tdakit.core.topology.landscapes import persistence_landscape
from tdakit.plotting.diagrams import _check, _dims, _extent
from tdakit.plotting.style import _axes, axis_units, color, house_style, styled


def _finite_pairs(diagrams, k, right):
    pairs = diagrams[k].copy()
    pairs[diagrams.alive_at_cutoff(k), 1] = diagrams.max_scale
    pairs[np.isinf(pairs[:, 1]), 1] = right
    return pairs


def betti_curve(pairs: np.ndarray, grid: np.ndarray, shrink: float = 0.0) -> np.ndarray:
    """Number of bars alive at each grid value, each bar shortened by ``shrink`` at both ends."""
    births, deaths = pairs[:, 0] + shrink, pairs[:, 1] - shrink
    return ((births[None, :] <= grid[:, None]) & (grid[:, None] < deaths[None, :])).sum(axis=1)


@styled
def plot_betti_curves(diagrams, band=None, *, dims=None, ax=None, n_grid: int = 400, preset: str = "single") -> dict:
    """Betti numbers against scale, with the count the band guarantees.

    With a band of radius r that covers the true diagram (bottleneck distance <= r),
    every bar [b, d) with d - b > 2r is matched to a true bar that is alive on
    [b + r, d - r): the shaded lower curve counts those, a lower bound on the true Betti
    number at each scale (common practice: the matching argument behind bottleneck
    stability). No upper bound follows, since the true diagram may hold any number of
    bars shorter than 2r; none is drawn.

    Returns
    -------
    dict
        ``ax``, ``grid``, ``curves[k]`` (Betti numbers), ``guaranteed[k]`` (lower bounds or None).
    """
    _check(diagrams, band, "plot_betti_curves")
    dims = _dims(diagrams, dims, "plot_betti_curves")
    ax = _axes(ax, preset, aspect=0.6)
    low, high = _extent(diagrams, band, dims)
    grid = np.linspace(low, high, n_grid)
    drawn = {"ax": ax, "grid": grid, "curves": {}, "guaranteed": {}}
    with house_style():
        for k in dims:
            pairs = _finite_pairs(diagrams, k, high)
            curve = betti_curve(pairs, grid)
            ax.step(grid, curve, where="post", color=color(k), label=f"H{k}")
            drawn["curves"][k] = curve
            drawn["guaranteed"][k] = None
            if band is not None:
                lower = betti_curve(pairs, grid, band.radius(k))
                ax.fill_between(grid, 0, lower, step="post", color=color(k), alpha=0.25, lw=0,
                                label=f"H{k} guaranteed by the band")
                drawn["guaranteed"][k] = lower
        ax.set_yscale("symlog", linthresh=10)
        ax.set_xlabel(f"scale ({axis_units(diagrams)})")
        ax.set_ylabel("Betti number")
        ax.set_title("Betti curves" + (f" ({band.method} band, level {band.level:g})" if band is not None else ""))
        ax.legend(frameon=False)
    return drawn


@styled
def plot_landscape(diagrams, band=None, *, dim: int = 1, ax=None, n_levels: int = 3, preset: str = "single") -> dict:
    """Persistence landscapes of one dimension with a confidence band.

    A ``"landscape"`` band shows its own target: the mean first landscape of the
    subsamples with its multiplier-bootstrap half-width [1]_. Any other band of radius r
    gives lambda_1 +- r, since landscapes move by at most the bottleneck distance in
    sup norm [2]_.

    References
    ----------
    .. [1] F. Chazal, B. T. Fasy, F. Lecci, A. Rinaldo, L. Wasserman, "Stochastic
       convergence of persistence landscapes and silhouettes", J. Comput. Geom. 6(2) (2015).
    .. [2] P. Bubenik, "Statistical topological data analysis using persistence
       landscapes", J. Mach. Learn. Res. 16 (2015) 77-102.
    """
    _check(diagrams, band, "plot_landscape")
    dim = _dims(diagrams, dim, "plot_landscape")[0]
    ax = _axes(ax, preset, aspect=0.6)
    with house_style():
        if band is not None and band.method == "landscape":
            drawn = _mean_landscape(ax, band, dim)
        else:
            drawn = _diagram_landscape(ax, diagrams, band, dim, n_levels)
        ax.set_xlabel(f"scale ({axis_units(diagrams)})")
        ax.set_ylabel("landscape height")
        ax.legend(frameon=False)
    return drawn


def _mean_landscape(ax, band, dim):
    grid, mean = np.asarray(band.curves["grid"]), np.asarray(band.curves["mean"])[dim, 0]
    width = band.radius(dim)
    ax.plot(grid, mean, color=color(dim), label=f"mean first landscape H{dim}")
    ax.fill_between(grid, np.maximum(mean - width, 0), mean + width, color=color(dim), alpha=0.25, lw=0,
                    label=f"{band.level:g} band (mean landscape)")
    ax.set_title(f"H{dim} mean landscape of subsamples (band on the curve, not a feature test)")
    return {"ax": ax, "grid": grid, "landscape": mean, "lower": np.maximum(mean - width, 0), "upper": mean + width}


def _diagram_landscape(ax, diagrams, band, dim, n_levels):
    low, high = _extent(diagrams, band, [dim])
    grid = np.linspace(low, high, 400)
    pairs = _finite_pairs(diagrams, dim, high)
    levels = persistence_landscape(pairs, grid, n_levels=n_levels)
    for i, level in enumerate(levels):
        ax.plot(grid, level, color=color(dim), lw=1.2 if i == 0 else 0.7, alpha=1.0 if i == 0 else 0.6,
                label=f"lambda_{i + 1}" if i < 2 else None)
    drawn = {"ax": ax, "grid": grid, "landscape": levels[0], "lower": None, "upper": None}
    if band is not None:
        r = band.radius(dim)
        drawn["lower"], drawn["upper"] = np.maximum(levels[0] - r, 0), levels[0] + r
        ax.fill_between(grid, drawn["lower"], drawn["upper"], color=color(dim), alpha=0.2, lw=0,
                        label=f"lambda_1 +- band radius {r:.3g}")
    ax.set_title(f"H{dim} persistence landscape")
    return drawn
