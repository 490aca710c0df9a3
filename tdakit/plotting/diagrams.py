"""Persistence diagrams with their noise strip, and barcodes with the band's threshold."""

from __future__ import annotations

import numpy as np
from matplotlib.collections import LineCollection
from matplotlib.lines import Line2D
from matplotlib.patches import Polygon

from tdakit._validation import fail
from tdakit.core.inference.bands import Band
from tdakit.core.topology.diagrams import Diagrams
from tdakit.plotting.style import BAND_COLOR, _axes, axis_units, color, house_style, marker, styled


def _check(diagrams, band, function):
    if not isinstance(diagrams, Diagrams):
        raise fail("diagrams", function, "a Diagrams object", diagrams)
    if band is not None and not isinstance(band, Band):
        raise fail("band", function, "None or a Band from confidence_band", band)


def _dims(diagrams, dims, function) -> list[int]:
    if dims is None:
        return list(range(len(diagrams)))
    dims = [dims] if isinstance(dims, (int, np.integer)) else list(dims)
    for k in dims:
        if not isinstance(k, (int, np.integer)) or not 0 <= k < len(diagrams):
            raise fail("dims", function, f"homology dimensions in [0, {len(diagrams) - 1}]", dims)
    return [int(k) for k in dims]


def _significant(diagrams, band, k):
    if band is None:
        return np.ones(len(diagrams[k]), dtype=bool)
    if not band.calls:  # a band without a verdict on single bars: every point drawn hollow
        return np.zeros(len(diagrams[k]), dtype=bool)
    return band.significant(diagrams, k)


def _extent(diagrams, band, dims) -> tuple[float, float]:
    values = [0.0]
    for k in dims:
        pairs = diagrams[k]
        values += list(pairs[:, 0]) + list(pairs[np.isfinite(pairs[:, 1]), 1])
        if band is not None:
            values.append(band.strip_height(k))
    if np.isfinite(diagrams.max_scale):
        values.append(diagrams.max_scale)
    low, high = min(values), max(values)
    return low, high if high > low else low + 1.0


@styled
def plot_diagram(diagrams: Diagrams, band: Band | None = None, *, dims=None, ax=None, title: str | None = None,
                 preset: str = "single") -> dict:
    """Draw persistence diagrams with the band's noise strip above the diagonal.

    Shape and colour give the homology dimension; filled markers are significant
    (above the strip), hollow ones noise. Classes that never die sit on the top row
    ("never dies"); classes still alive where the filtration was capped sit on the
    dashed cap line at ``max_scale``.

    Returns
    -------
    dict
        ``ax``; ``strips[k]`` (the strip polygon of dimension k, height 2 x radius);
        ``significant[k]`` and ``noise[k]`` (the finite points' scatter artists);
        ``never_dies[k]`` and ``at_cap[k]``.
    """
    _check(diagrams, band, "plot_diagram")
    dims = _dims(diagrams, dims, "plot_diagram")
    ax = _axes(ax, preset, aspect=1.0)
    low, high = _extent(diagrams, band, dims)
    span = high - low
    top = high + 0.12 * span
    drawn = {"ax": ax, "strips": {}, "significant": {}, "noise": {}, "never_dies": {}, "at_cap": {}}
    with house_style():
        ax.plot([low, top], [low, top], color="#444444", lw=0.7, zorder=1)
        distinct = band is not None and len({band.strip_height(k) for k in dims}) > 1
        for k in dims:
            if band is not None:
                drawn["strips"][k] = _strip(ax, low, top, band.strip_height(k), k, distinct)
            _points(ax, diagrams, band, k, top, drawn)
        _decorate(ax, diagrams, band, dims, low, top, title)
    return drawn


def _strip(ax, low, top, height, k, per_dimension):
    corners = [(low, low), (top, top), (top, top + height), (low, low + height)]
    patch = Polygon(corners, closed=True, facecolor=color(k) if per_dimension else BAND_COLOR,
                    alpha=0.18 if per_dimension else 0.6, edgecolor="none", zorder=0,
                    label=f"noise strip H{k} (height {height:.3g})")
    ax.add_patch(patch)
    return patch


def _points(ax, diagrams, band, k, top, drawn):
    pairs = diagrams[k]
    keep = _significant(diagrams, band, k)
    finite = np.isfinite(pairs[:, 1])
    style = {"marker": marker(k), "s": 16, "linewidths": 0.8, "zorder": 3}
    for name, mask, face in (("significant", keep & finite, color(k)), ("noise", ~keep & finite, "none")):
        drawn[name][k] = ax.scatter(pairs[mask, 0], pairs[mask, 1], facecolors=face, edgecolors=color(k), **style)
    essential, cut = diagrams.essential(k), diagrams.alive_at_cutoff(k)
    drawn["never_dies"][k] = ax.scatter(pairs[essential, 0], np.full(essential.sum(), top),
                                        facecolors=color(k), edgecolors=color(k), clip_on=False, **style)
    faces = np.where(keep[cut], color(k), "none") if band is not None else color(k)
    drawn["at_cap"][k] = ax.scatter(pairs[cut, 0], np.full(cut.sum(), diagrams.max_scale), facecolors=faces,
                                    edgecolors=color(k), **style)


def _decorate(ax, diagrams, band, dims, low, top, title):
    ax.axhline(top, color="#444444", lw=0.5, ls=":")
    ax.text(low, top, " never dies", va="bottom", ha="left", fontsize=6.5, color="#444444")
    if np.isfinite(diagrams.max_scale):
        ax.axhline(diagrams.max_scale, color="#444444", lw=0.6, ls="--")
        ax.text(low, diagrams.max_scale, " alive at cap", va="bottom", ha="left", fontsize=6.5, color="#444444")
    margin = 0.04 * (top - low)
    ax.set_xlim(low - margin, top + margin)
    ax.set_ylim(low - margin, top + 2.5 * margin)
    ax.set_aspect("equal", adjustable="box")
    ax.set_xlabel(f"birth ({axis_units(diagrams)})")
    ax.set_ylabel(f"death ({axis_units(diagrams)})")
    handles = [Line2D([], [], ls="", marker=marker(k), color=color(k), label=f"H{k}") for k in dims]
    handles += [Line2D([], [], ls="", marker="o", mfc="#444444", mec="#444444", label="above band (real)"),
                Line2D([], [], ls="", marker="o", mfc="none", mec="#444444", label="inside band (noise)")]
    ax.legend(handles=handles, loc="lower right", frameon=False, handletextpad=0.3, borderaxespad=0.2)
    heading = title or f"{diagrams.filtration} diagram"
    if band is not None:
        heading += f", {band.method} band ({band.level:g})" + ("" if band.calls else ", no verdict")
    ax.set_title(heading)


@styled
def plot_barcode(diagrams: Diagrams, band: Band | None = None, *, dim: int = 1, ax=None, max_bars: int = 100,
                 preset: str = "single") -> dict:
    """Draw the ``max_bars`` longest bars of one dimension; bars shorter than the strip height are noise.

    The band's threshold is marked by a reference bar of length 2 x radius on the top row.

    Returns
    -------
    dict
        ``ax``, ``bars`` (LineCollection, one segment per bar, longest first),
        ``significant`` (mask over the drawn bars), ``threshold`` (the reference bar or None).
    """
    _check(diagrams, band, "plot_barcode")
    dim = _dims(diagrams, dim, "plot_barcode")[0]
    ax = _axes(ax, preset, aspect=0.7)
    pairs = diagrams[dim]
    ends = np.where(diagrams.alive_at_cutoff(dim), diagrams.max_scale, pairs[:, 1])
    low, high = _extent(diagrams, band, [dim])
    right = high + 0.08 * (high - low)
    ends = np.where(np.isinf(ends), right, ends)
    order = np.argsort(-(ends - pairs[:, 0]), kind="stable")[:max_bars]
    keep = _significant(diagrams, band, dim)[order]
    rows = np.arange(order.size)[::-1] + 1.0
    segments = [[(pairs[i, 0], y), (ends[i], y)] for i, y in zip(order, rows)]
    with house_style():
        bars = LineCollection(segments, colors=[color(dim) if s else BAND_COLOR for s in keep],
                              linewidths=np.where(keep, 2.0, 1.0))
        ax.add_collection(bars)
        threshold = None
        if band is not None:
            height = band.strip_height(dim)
            threshold = ax.plot([low, low + height], [order.size + 2.0] * 2, color="#444444", lw=2.4,
                                solid_capstyle="butt")[0]
            ax.text(low + height, order.size + 2.0, f"  band: bars shorter than {height:.3g} are noise",
                    va="center", fontsize=6.5)
        ax.axvline(right, color="#444444", lw=0.5, ls=":")
        ax.set_xlim(low - 0.02 * (right - low), right + 0.02 * (right - low))
        ax.set_ylim(0, order.size + 3.0)
        ax.set_yticks([])
        ax.set_xlabel(f"scale ({axis_units(diagrams)})")
        ax.set_title(f"H{dim} barcode ({order.size} of {len(pairs)} bars; dotted line = never dies)")
    return {"ax": ax, "bars": bars, "significant": keep, "threshold": threshold}
