"""Subsampling-study plots: distance to the reference and significant counts against landmark count."""

from __future__ import annotations

import numpy as np

from tdakit._validation import fail
from tdakit.plotting.style import axis_units, color, house_style, new_figure, styled

_METHOD_STYLES = ("-", "--", "-.", ":")
_METHOD_MARKERS = ("o", "s", "^", "D")


@styled
def plot_study(study, *, figure=None, preset: str = "double") -> dict:
    """Two panels: worst bottleneck distance to the reference (seed range shaded, certificate dashed)
    and the number of significant features, one line per sampling method.

    Returns
    -------
    dict
        ``figure``, ``distance_ax``, ``count_ax``, ``lines`` keyed by (panel, method, dim).
    """
    from tdakit.study import StudyResult

    if not isinstance(study, StudyResult):
        raise fail("study", "plot_study", "a StudyResult from subsampling_study", study)
    figure = figure or new_figure(preset, aspect=0.42)
    left, right = figure.subplots(1, 2)
    dims = range(study.options.complex.max_dim + 1)
    lines = {}
    with house_style():
        for i, method in enumerate(study.options.methods):
            cells = study.cells[study.cells["method"] == method]
            grouped = cells.groupby("n_landmarks")
            counts = np.array(sorted(cells["n_landmarks"].unique()))
            for k in dims:
                column = grouped[f"bottleneck_H{k}"]
                style = {"color": color(k), "ls": _METHOD_STYLES[i % 4], "marker": _METHOD_MARKERS[i % 4], "ms": 3}
                lines[("distance", method, k)] = left.plot(counts, column.max(), label=f"{method} H{k}", **style)[0]
                left.fill_between(counts, column.min(), column.max(), color=color(k), alpha=0.15, lw=0)
                significant = grouped[f"significant_H{k}"]
                lines[("count", method, k)] = right.plot(counts, significant.median(), label=f"{method} H{k}",
                                                         **style)[0]
                right.fill_between(counts, significant.min(), significant.max(), color=color(k), alpha=0.15, lw=0)
            certificate = grouped["certificate"].max()
            if certificate.notna().any():
                lines[("certificate", method, None)] = left.plot(
                    counts, certificate, color="#444444", ls=_METHOD_STYLES[i % 4], lw=0.8,
                    label=f"{method} certificate")[0]
        _labels(left, right, study)
    return {"figure": figure, "distance_ax": left, "count_ax": right, "lines": lines}


def _labels(left, right, study):
    from matplotlib.ticker import FixedLocator, MaxNLocator, NullLocator

    units = axis_units(study.reference_diagrams)
    counts = list(study.options.counts)
    for ax in (left, right):
        ax.set_xscale("log")
        ax.xaxis.set_major_locator(FixedLocator(counts))
        ax.xaxis.set_minor_locator(NullLocator())
        ax.set_xticklabels([str(c) for c in counts])
        ax.set_xlabel("landmarks")
    left.set_yscale("log")
    left.set_ylabel(f"bottleneck to reference\n({units})")
    left.set_title(f"Distance to the {study.reference['kind']}", fontsize=7.5)
    right.yaxis.set_major_locator(MaxNLocator(integer=True))
    right.set_ylabel("significant features")
    right.set_title("Significant features (line: median, shade: seed range)", fontsize=7.5)
    left.legend(frameon=False, fontsize=6)
    right.legend(frameon=False, fontsize=6)
