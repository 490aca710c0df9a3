"""Comparison figures: a permutation test's null distribution, and two runs' diagrams side by side."""

from __future__ import annotations

import numpy as np

from tdakit._validation import fail
from tdakit.core.inference.compare import PermutationResult
from tdakit.plotting.diagrams import plot_diagram
from tdakit.plotting.style import CLOUD_COLOR, FEATURE_COLOR, _axes, new_figure, outside_legend, styled


@styled
def plot_permutation_null(result: PermutationResult, *, ax=None, preset: str = "single",
                          unit: str | None = None) -> dict:
    """Histogram of the loss over relabelings, with the observed labeling's loss marked.

    Small losses mean tight groups: the p-value is the share of labelings whose loss is at
    most the observed one (left tail). ``unit``: the diagrams' unit (the loss is in its ``power``-th power).
    """
    if not isinstance(result, PermutationResult):
        raise fail("result", "plot_permutation_null", "a PermutationResult", result)
    ax = _axes(ax, preset, aspect=0.75 if preset == "single" else 0.3)
    null = np.asarray(result.null)
    counts, edges, bars = ax.hist(null, bins=min(40, max(5, len(null) // 5)), color=CLOUD_COLOR, edgecolor="white",
                                  linewidth=0.4, label="random splits")
    line = ax.axvline(result.statistic, color=FEATURE_COLOR, lw=1.4, ls="--",
                      label=f"observed split\n(p = {result.p_value:.3g})")
    power = result.params.get("power", 2.0)
    scale = f" ({unit}$^{{{power:g}}}$)" if unit else ""
    ax.set_xlabel(f"loss: within-group spread{scale}")
    ax.set_ylabel("labelings")
    ax.set_title("Permutation test", loc="left")
    outside_legend(ax)
    return {"ax": ax, "bars": bars, "observed": line}


@styled
def plot_run_pair(first, second, *, titles=("setting A", "setting B"), preset: str = "double",
                  unit: str | None = None) -> dict:
    """Two runs' diagrams with their bands, side by side on shared axes limits (one legend, at the right)."""
    figure = new_figure(preset, aspect=0.5 if preset == "double" else 2.1)
    double = preset == "double"  # side by side sharing the death axis; stacked (single column) each fully labelled
    axes = figure.subplots(*((1, 2) if double else (2, 1)), sharex=double, sharey=double)
    units = [unit if unit is not None else run.unit for run in (first, second)]
    drawn = [plot_diagram(run.diagrams, run.band, ax=ax, title=title, unit=u, legend=i == 1) for i, (run, ax, title, u)
             in enumerate(zip((first, second), axes, titles, units))]
    limits = np.array([ax.get_xlim() for ax in axes])
    for ax in axes:
        ax.set_xlim(limits[:, 0].min(), limits[:, 1].max())
        ax.set_ylim(limits[:, 0].min(), limits[:, 1].max())
    return {"figure": figure, "left": drawn[0], "right": drawn[1]}
