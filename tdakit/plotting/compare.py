"""Comparison figures: a permutation test's null distribution, and two runs' diagrams side by side."""

from __future__ import annotations

import numpy as np

from tdakit._validation import fail
from tdakit.core.inference.compare import PermutationResult
from tdakit.plotting.diagrams import plot_diagram
from tdakit.plotting.style import FEATURE_COLOR, _axes, new_figure, styled


@styled
def plot_permutation_null(result: PermutationResult, *, ax=None, preset: str = "single") -> dict:
    """Histogram of the loss over relabelings, with the observed labeling's loss marked.

    Small losses mean tight groups: the p-value is the share of labelings whose loss is at
    most the observed one (left tail).
    """
    if not isinstance(result, PermutationResult):
        raise fail("result", "plot_permutation_null", "a PermutationResult", result)
    ax = _axes(ax, preset, aspect=0.6)
    null = np.asarray(result.null)
    counts, edges, bars = ax.hist(null, bins=min(40, max(5, len(null) // 5)), color="#9aa3ad", edgecolor="white",
                                  linewidth=0.4, label="relabelings")
    line = ax.axvline(result.statistic, color=FEATURE_COLOR, lw=1.4, label=f"observed (p = {result.p_value:.3g})")
    ax.set_xlabel("loss (within-group spread of diagram distances)")
    ax.set_ylabel("labelings")
    ax.set_title("Permutation test: observed split against random splits")
    ax.legend(frameon=False)
    return {"ax": ax, "bars": bars, "observed": line}


@styled
def plot_run_pair(first, second, *, titles=("setting A", "setting B"), preset: str = "double") -> dict:
    """Two runs' diagrams with their bands, side by side on shared axes limits."""
    figure = new_figure(preset, aspect=0.5)
    axes = figure.subplots(1, 2, sharex=True, sharey=True)
    drawn = [plot_diagram(run.diagrams, run.band, ax=ax, title=title) for run, ax, title in
             zip((first, second), axes, titles)]
    return {"figure": figure, "left": drawn[0], "right": drawn[1]}
