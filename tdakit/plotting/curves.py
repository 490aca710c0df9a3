"""Betti curves and persistence landscapes, each with what the band guarantees about them."""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import MaxNLocator

from tdakit.core.topology.landscapes import persistence_landscape
from tdakit.plotting.diagrams import _check, _dims, _extent
from tdakit.plotting.style import (
    INK,
    _axes,
    dimension_style,
    legend_side,
    outside_legend,
    scale_label,
    styled,
    tidy_scale_axis,
)


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
def plot_betti_curves(diagrams, band=None, *, dims=None, ax=None, n_grid: int = 400, preset: str = "single",
                      unit: str | None = None) -> dict:
    """Betti numbers against scale, one row per dimension, with the count the band guarantees.

    With a band of radius r that covers the true diagram (bottleneck distance <= r),
    every bar [b, d) with d - b > 2r is matched to a true bar that is alive on
    [b + r, d - r): the hatched lower curve counts those, a lower bound on the true Betti
    number at each scale (common practice: the matching argument behind bottleneck
    stability). No upper bound follows, since the true diagram may hold any number of
    bars shorter than 2r; none is drawn. Each dimension has its own row with integer ticks,
    so one loop against two stays readable beside hundreds of components.

    Returns
    -------
    dict
        ``ax`` (the frame holding the rows), ``axes[k]`` (the row of dimension k), ``grid``,
        ``curves[k]`` (Betti numbers), ``guaranteed[k]`` (lower bounds or None).
    """
    _check(diagrams, band, "plot_betti_curves")
    dims = _dims(diagrams, dims, "plot_betti_curves")
    ax = _axes(ax, preset, aspect=0.42 + 0.2 * len(dims) if preset == "single" else 0.14 + 0.09 * len(dims))
    low, high = _extent(diagrams, band, dims)
    grid = np.linspace(low, high, n_grid)
    rows = _rows(ax, len(dims))
    drawn = {"ax": ax, "axes": {}, "grid": grid, "curves": {}, "guaranteed": {}}
    for k, row in zip(dims, rows):
        style = dimension_style(k)
        pairs = _finite_pairs(diagrams, k, high)
        curve = betti_curve(pairs, grid)
        row.step(grid, curve, where="post", color=style.line, ls=style.linestyle, lw=1.1, label=f"H{k}")
        drawn["axes"][k], drawn["curves"][k], drawn["guaranteed"][k] = row, curve, None
        if band is not None:
            lower = betti_curve(pairs, grid, band.radius(k))
            row.fill_between(grid, 0, lower, step="post", facecolor="none", edgecolor=style.line, hatch=style.hatch,
                             alpha=0.5, lw=0)
            drawn["guaranteed"][k] = lower
        row.set_ylim(0, max(1, int(curve.max())) * 1.15 + 0.2)
        row.yaxis.set_major_locator(MaxNLocator(integer=True, nbins=3, min_n_ticks=2))
        row.set_ylabel(f"\u03b2{k}".translate(_SUBSCRIPTS), rotation=0, ha="right", va="center")
        row.set_xlim(low, high)
    for row in rows[:-1]:
        row.tick_params(labelbottom=False)
    tidy_scale_axis(rows[-1].xaxis, 5, scale_label("scale", diagrams, unit))
    ax.set_title("Betti numbers" + (f" ({band.method} band {band.level:g})" if band is not None else ""), loc="left")
    handles = [Line2D([], [], color=dimension_style(k).line, ls=dimension_style(k).linestyle, label=f"H{k}")
               for k in dims]
    if band is not None:
        handles.append(Patch(facecolor="none", edgecolor=INK, hatch="////", lw=0, label="guaranteed\nby the band"))
    below = legend_side(ax) == "below"
    outside_legend(rows[-1] if below else rows[0], handles, ncols=3 if below else 1)
    return drawn


_SUBSCRIPTS = str.maketrans("0123456789", "\u2080\u2081\u2082\u2083\u2084\u2085\u2086\u2087\u2088\u2089")


def _rows(ax, n):
    """Split ``ax`` into ``n`` stacked rows sharing the scale axis (the frame itself is hidden)."""
    ax.set_axis_off()
    gap = 0.06
    height = (1.0 - gap * (n - 1)) / n
    rows = []
    for i in range(n):
        rows.append(ax.inset_axes([0.0, 1.0 - (i + 1) * height - i * gap, 1.0, height],
                                  sharex=rows[0] if rows else None))
    return rows


@styled
def plot_landscape(diagrams, band=None, *, dim: int = 1, ax=None, n_levels: int = 3, preset: str = "single",
                   unit: str | None = None) -> dict:
    """Persistence landscapes of one dimension with a confidence band.

    A ``"landscape"`` band shows its own target: the mean first landscape of the
    subsamples with its multiplier-bootstrap half-width [1]_. Any other band of radius r
    gives lambda_1 \u00b1 r, since landscapes move by at most the bottleneck distance in
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
    ax = _axes(ax, preset, aspect=0.82 if preset == "single" else 0.36)
    if band is not None and band.method == "landscape":
        drawn = _mean_landscape(ax, band, dim)
    else:
        drawn = _diagram_landscape(ax, diagrams, band, dim, n_levels)
    ax.set_ylim(bottom=0)
    tidy_scale_axis(ax.xaxis, 5, scale_label("scale", diagrams, unit))
    tidy_scale_axis(ax.yaxis, 4, scale_label("landscape height", diagrams if diagrams.filtration == "density" else None,
                                             unit))
    outside_legend(ax)
    return drawn


def _mean_landscape(ax, band, dim):
    style = dimension_style(dim)
    grid, mean = np.asarray(band.curves["grid"]), np.asarray(band.curves["mean"])[dim, 0]
    width = band.radius(dim)
    ax.plot(grid, mean, color=style.line, ls=style.linestyle, label="mean $\\lambda_1$\nof subsamples")
    ax.fill_between(grid, np.maximum(mean - width, 0), mean + width, facecolor="none", edgecolor=style.line,
                    hatch=style.hatch, alpha=0.5, lw=0, label=f"{band.level:g} band\n(\u00b1 {width:.3g})")
    ax.set_title(f"H{dim} mean landscape of subsamples", loc="left")
    return {"ax": ax, "grid": grid, "landscape": mean, "lower": np.maximum(mean - width, 0), "upper": mean + width}


def _diagram_landscape(ax, diagrams, band, dim, n_levels):
    style = dimension_style(dim)
    low, high = _extent(diagrams, band, [dim])
    grid = np.linspace(low, high, 400)
    pairs = _finite_pairs(diagrams, dim, high)
    levels = persistence_landscape(pairs, grid, n_levels=n_levels)
    for i, level in enumerate(levels):
        ax.plot(grid, level, color=style.line if i == 0 else INK, ls=style.linestyle if i == 0 else ":",
                lw=1.2 if i == 0 else 0.6, label=f"$\\lambda_{i + 1}$" if i < 2 else None)
    drawn = {"ax": ax, "grid": grid, "landscape": levels[0], "lower": None, "upper": None}
    if band is not None:
        r = band.radius(dim)
        drawn["lower"], drawn["upper"] = np.maximum(levels[0] - r, 0), levels[0] + r
        ax.fill_between(grid, drawn["lower"], drawn["upper"], facecolor="none", edgecolor=style.line,
                        hatch=style.hatch, alpha=0.5, lw=0, label=f"$\\lambda_1$ \u00b1 {r:.3g}\n(band radius)")
    ax.set_xlim(low, high)
    ax.set_title(f"H{dim} persistence landscape", loc="left")
    return drawn
