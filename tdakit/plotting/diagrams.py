"""Persistence diagrams with their noise strip, and barcodes with the band's threshold."""

from __future__ import annotations

import numpy as np
from matplotlib import patheffects
from matplotlib.collections import LineCollection
from matplotlib.lines import Line2D
from matplotlib.patches import Patch, Polygon

from tdakit._validation import fail
from tdakit.core.inference.bands import Band
from tdakit.core.topology.diagrams import Diagrams
from tdakit.plotting.features import label_feature, numbered_positions
from tdakit.plotting.style import (
    BAND_COLOR,
    FEATURE_LABEL,
    INK,
    NEVER_DIES_COLOR,
    _axes,
    dimension_style,
    outside_legend,
    scale_label,
    styled,
    tidy_scale_axis,
)


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
    """The finite scale range of the data (and of the cap); the band's strip is drawn, not fitted."""
    values = [0.0] if diagrams.filtration != "density" else []
    for k in dims:
        pairs = diagrams[k]
        values += list(pairs[:, 0]) + list(pairs[np.isfinite(pairs[:, 1]), 1])
    if np.isfinite(diagrams.max_scale):
        values.append(diagrams.max_scale)
    if not values:
        return 0.0, 1.0
    low, high = min(values), max(values)
    return low, high if high > low else low + 1.0


def _break_marks(ax, places):
    """Short slashes at both ends of the cut between an axes and its "never dies" band ((xs, ys) in axes units)."""
    mark = [(-1, -0.6), (1, 0.6)]
    for xs, ys in places:
        ax.plot(xs, ys, transform=ax.transAxes, ls="none", marker=mark, ms=5, mew=0.6, color=INK, mec=INK,
                clip_on=False)


@styled
def plot_diagram(diagrams: Diagrams, band: Band | None = None, *, dims=None, ax=None, title: str | None = None,
                 preset: str = "single", unit: str | None = None, numbers: dict | None = None,
                 legend: bool = True) -> dict:
    """Draw persistence diagrams with the band's noise strip above the diagonal.

    Shape, lightness and colour give the homology dimension (``DIMENSION_STYLE``); filled
    markers are real (above the strip), hollow smaller ones noise. Classes that never die are
    upward arrows in the "never dies" band above the axes, cut from the scale by a break mark;
    classes still alive where the filtration was capped sit on the dashed cap line at
    ``max_scale``. Each dimension's strip is a hatched outline (one grey strip when every
    dimension has the same height).

    Parameters
    ----------
    unit : str, optional
        The coordinates' unit, for the axis labels (``RunResult.unit``).
    numbers : dict, optional
        ``{row label of the significance table: number}`` (see :func:`feature_numbers`): the
        number is drawn beside the feature's marker.
    legend : bool, default=True
        Draw the legend (to the right of the axes).

    Returns
    -------
    dict
        ``ax``; ``strips[k]`` (the strip polygon of dimension k, height 2 x radius);
        ``significant[k]`` and ``noise[k]`` (the finite points' scatter artists);
        ``never_dies[k]`` (markers in the ``never_dies_ax`` band) and ``at_cap[k]``; ``labels``.
    """
    _check(diagrams, band, "plot_diagram")
    dims = _dims(diagrams, dims, "plot_diagram")
    ax = _axes(ax, preset, aspect=1.3 if preset == "single" else 0.5)
    low, high = _extent(diagrams, band, dims)
    top = high + 0.04 * (high - low)
    drawn = {"ax": ax, "strips": {}, "significant": {}, "noise": {}, "never_dies": {}, "at_cap": {}, "labels": []}
    ax.plot([low, top], [low, top], color=INK, lw=0.6, zorder=1)
    shared = band is not None and len({band.strip_height(k) for k in dims}) == 1
    handles = []
    for k in dims:
        if band is not None and (not shared or k == dims[0]):
            drawn["strips"][k], handle = _strip(ax, low, top, band.strip_height(k), k, shared)
            handles.append(handle)
        _points(ax, diagrams, band, k, drawn)
    for k in dims[1:] if shared else []:
        drawn["strips"][k] = drawn["strips"][dims[0]]
    drawn["never_dies_ax"] = _never_dies_band(ax, diagrams, dims, drawn)
    _label_numbers(ax, diagrams, dims, numbers, drawn)
    _decorate(ax, diagrams, band, dims, low, top, title, unit, handles if legend else None)
    return drawn


def _strip(ax, low, top, height, k, shared):
    corners = [(low, low), (top, top), (top, top + height), (low, low + height)]
    style = dimension_style(k)
    if shared:
        patch = Polygon(corners, closed=True, facecolor=BAND_COLOR, alpha=0.3, edgecolor="none", zorder=0)
        edge = ax.plot([low, top], [low + height, top + height], color=BAND_COLOR, lw=0.8, zorder=0.5)[0]
        label = f"noise strip, every H (2r = {height:.3g})"
        handle = Patch(facecolor=BAND_COLOR, alpha=0.45, edgecolor=BAND_COLOR, label=label)
    else:
        patch = Polygon(corners, closed=True, fill=False, hatch=style.hatch, edgecolor=style.line, alpha=0.35,
                        lw=0, zorder=0)
        edge = ax.plot([low, top], [low + height, top + height], color=style.line, ls=style.linestyle, lw=0.9,
                       zorder=0.5)[0]
        label = f"H{k} noise strip (2r = {height:.3g})"
        handle = Patch(fill=False, hatch=style.hatch, edgecolor=style.line, ls=style.linestyle, lw=0.9, label=label)
    patch.set_label(label)
    edge.set_label("_strip edge")
    ax.add_patch(patch)
    return patch, handle


def _points(ax, diagrams, band, k, drawn):
    pairs, style = diagrams[k], dimension_style(k)
    keep = _significant(diagrams, band, k)
    finite = np.isfinite(pairs[:, 1])
    for name, mask, real in (("significant", keep & finite, True), ("noise", ~keep & finite, False)):
        drawn[name][k] = ax.scatter(pairs[mask, 0], pairs[mask, 1], zorder=3, **style.scatter(real))
    cut = diagrams.alive_at_cutoff(k)
    faces = [style.color if s else "white" for s in keep[cut]]
    drawn["at_cap"][k] = ax.scatter(pairs[cut, 0], np.full(cut.sum(), diagrams.max_scale), zorder=3,
                                    **{**style.scatter(True), "facecolors": faces})


def _never_dies_band(ax, diagrams, dims, drawn):
    """Essential classes as upward arrows in a labelled band above the axes, one lane per dimension."""
    lanes = [k for k in dims if diagrams.essential(k).any()]
    if not lanes:
        for k in dims:
            drawn["never_dies"][k] = ax.scatter([], [])
        return None
    height = 0.08 * len(lanes)
    band = ax.inset_axes([0.0, 1.045, 1.0, height], sharex=ax)
    band.set_facecolor(NEVER_DIES_COLOR)
    band.set_ylim(-0.62, len(lanes) - 0.38)
    band.set_yticks([])
    band.tick_params(axis="x", which="both", bottom=False, labelbottom=False)
    band.yaxis.set_label_position("right")  # at the right, clear of a long "death (...)" label on the left
    band.set_ylabel("never\ndies", rotation=0, ha="left", va="center", fontsize=6.5, labelpad=3)
    for lane, k in enumerate(lanes):
        births = diagrams[k][diagrams.essential(k), 0]
        style = dimension_style(k)
        band.add_collection(LineCollection([[(b, lane - 0.2), (b, lane + 0.3)] for b in births], colors=style.edge,
                                           linewidths=1.0))
        band.scatter(births, np.full(births.size, lane + 0.3), marker="^", s=14, c=style.edge, lw=0, zorder=3)
    for k in dims:
        births = diagrams[k][diagrams.essential(k), 0]
        lane = lanes.index(k) if k in lanes else 0
        drawn["never_dies"][k] = band.scatter(births, np.full(births.size, lane - 0.2), zorder=4,
                                              **dimension_style(k).scatter(True, size=12))
    _break_marks(ax, [((0.0, 1.0), (1.0, 1.0)), ((0.0, 1.0), (1.045, 1.045))])
    return band


def _label_numbers(ax, diagrams, dims, numbers, drawn):
    band = drawn.get("never_dies_ax")
    lanes = [k for k in dims if diagrams.essential(k).any()]
    for k in dims:
        pairs = diagrams[k]
        for position, number in numbered_positions(numbers, diagrams, k):
            birth, death = pairs[position]
            if diagrams.essential(k)[position] and band is not None:
                drawn["labels"].append(label_feature(band, birth, lanes.index(k) - 0.2, number, offset=(8, 0)))
            elif diagrams.alive_at_cutoff(k)[position]:
                drawn["labels"].append(label_feature(ax, birth, diagrams.max_scale, number, offset=(6, -7)))
            else:
                drawn["labels"].append(label_feature(ax, birth, death, number, offset=(8, 3)))


def _decorate(ax, diagrams, band, dims, low, top, title, unit, strip_handles):
    handles = [dimension_style(k).handle(True, label=f"H{k}") for k in dims]
    if band is not None:
        handles += [Line2D([], [], ls="", marker="o", mfc=INK, mec=INK, ms=4.5, label="filled: real"),
                    Line2D([], [], ls="", marker="o", mfc="white", mec=INK, ms=3.5, label="hollow: noise")]
    if np.isfinite(diagrams.max_scale):
        ax.axhline(diagrams.max_scale, color=INK, lw=0.6, ls=(0, (4, 2)), zorder=1)
        handles.append(Line2D([], [], color=INK, lw=0.6, ls=(0, (4, 2)), label="scale cap (still alive)"))
    margin = 0.03 * (top - low)
    ax.set_xlim(low - margin, top + margin)
    ax.set_ylim(low - margin, top + margin)
    ax.set_aspect("equal", adjustable="box")
    tidy_scale_axis(ax.xaxis, 4, scale_label("birth", diagrams, unit))
    tidy_scale_axis(ax.yaxis, 4, scale_label("death", diagrams, unit))
    if strip_handles is not None:
        outside_legend(ax, handles + strip_handles)
    heading = title or f"{diagrams.filtration} diagram"
    if band is not None and title is None:
        heading += f", {band.method} band {band.level:g}" + ("" if band.calls else " (no verdict)")
    ax.set_title(heading, loc="left")


@styled
def plot_barcode(diagrams: Diagrams, band: Band | None = None, *, dim: int = 1, ax=None, max_bars: int = 100,
                 preset: str = "single", unit: str | None = None, numbers: dict | None = None) -> dict:
    """Draw the ``max_bars`` longest bars of one dimension; bars shorter than the strip height are noise.

    Real bars are thick (in the dimension's colour), noise bars thin and grey. The band's
    threshold is a reference bar of length 2 x radius in its own row above the bars (with an
    arrow when it is longer than the axis); bars of classes that never die run into the
    "never dies" band at the right, cut from the scale by a break mark.

    Returns
    -------
    dict
        ``ax``, ``bars`` (LineCollection, one segment per bar, longest first),
        ``significant`` (mask over the drawn bars), ``threshold`` (the reference bar or None),
        ``never_dies_ax`` (the band at the right, or None), ``labels``.
    """
    _check(diagrams, band, "plot_barcode")
    dim = _dims(diagrams, dim, "plot_barcode")[0]
    ax = _axes(ax, preset, aspect=0.95 if preset == "single" else 0.45)
    pairs, style = diagrams[dim], dimension_style(dim)
    low, high = _extent(diagrams, band, [dim])
    essential = diagrams.essential(dim)
    ends = np.where(diagrams.alive_at_cutoff(dim), diagrams.max_scale, pairs[:, 1])
    ends = np.where(essential, high + 0.03 * (high - low), ends)
    order = np.argsort(-(ends - pairs[:, 0]), kind="stable")[:max_bars]
    keep = _significant(diagrams, band, dim)[order]
    rows = np.arange(order.size)[::-1] + 1.0
    segments = [[(pairs[i, 0], y), (ends[i], y)] for i, y in zip(order, rows)]
    width = float(np.clip(110.0 * ax.get_position().height * ax.figure.get_figheight() / max(order.size, 1),
                          0.5, 2.4))
    bars = LineCollection(segments, colors=[style.line if s else BAND_COLOR for s in keep],
                          linewidths=np.where(keep, width, max(0.45, 0.4 * width)), capstyle="butt")
    if style.line != style.color:
        bars.set_path_effects([patheffects.Stroke(linewidth=width + 0.8, foreground=style.edge), patheffects.Normal()])
        bars.set_colors([style.color if s else BAND_COLOR for s in keep])
    ax.add_collection(bars)
    drawn = {"ax": ax, "bars": bars, "significant": keep, "threshold": None, "labels": []}
    lane = max(1.8, 0.07 * order.size)  # the threshold's own row, a fixed share of the height however many bars
    handles = [Line2D([], [], color=style.line, lw=2.0, label=f"H{dim} bar, real" if band is not None else f"H{dim}"),
               Line2D([], [], color=BAND_COLOR, lw=0.8, label="noise")] if band is not None else []
    if band is not None:
        drawn["threshold"], handle = _threshold(ax, band.strip_height(dim), low, high, order.size + lane, lane)
        handles.append(handle)
    if np.isfinite(diagrams.max_scale):
        ax.axvline(diagrams.max_scale, color=INK, lw=0.6, ls=(0, (4, 2)))
        handles.append(Line2D([], [], color=INK, lw=0.6, ls=(0, (4, 2)), label="scale cap"))
    drawn["never_dies_ax"] = _never_dies_column(ax, rows[essential[order]], style, width)
    drawn["labels"] = _bar_numbers(ax, numbers, diagrams, dim, order, rows)
    span = high - low
    ax.set_xlim(low - 0.02 * span, high + 0.03 * span)
    ax.set_ylim(0.2, order.size + (1.45 * lane if band is not None else 0.8))
    ax.set_yticks([order.size + lane] if band is not None else [], ["2r"] if band is not None else [])
    tidy_scale_axis(ax.xaxis, 5, scale_label("scale", diagrams, unit))
    ax.set_title(f"H{dim} barcode ({order.size} of {len(pairs)} bars)", loc="left")
    if handles:
        outside_legend(ax, handles, pad=0.14 if drawn["never_dies_ax"] is not None else 0.0)
    return drawn


def _bar_numbers(ax, numbers, diagrams, dim, order, rows):
    """Feature numbers beside the y axis, level with their bars (staggered when the rows are close)."""
    spacing = 72.0 * ax.get_position().height * ax.get_figure(root=True).get_figheight() / max(order.size + 3, 1)
    labels = []
    for i, (position, number) in enumerate(sorted(numbered_positions(numbers, diagrams, dim), key=lambda p: p[1])):
        where = np.flatnonzero(order == position)
        if where.size:
            shift = 0 if spacing >= 10 else 11 * (i % 3)
            labels.append(ax.annotate(str(number), (0.0, rows[where[0]]), xycoords=("axes fraction", "data"),
                                      xytext=(-8 - shift, 0), textcoords="offset points", annotation_clip=False,
                                      **FEATURE_LABEL))
    return labels


def _threshold(ax, height, low, high, row, lane):
    """The reference bar of length 2r in its own row, with an arrow when it is longer than the axis."""
    ax.axhline(row - 0.45 * lane, color=INK, lw=0.4)
    span = high - low
    end = low + min(height, span * 1.02)
    line = ax.plot([low, end], [row, row], color=INK, lw=2.2, solid_capstyle="butt")[0]
    beyond = height > span * 1.02
    if beyond:
        ax.plot([end], [row], marker=">", ms=4, color=INK, clip_on=False)
    label = f"noise threshold 2r = {height:.3g}" + (" (longer than the axis)" if beyond else "")
    return line, Line2D([], [], color=INK, lw=2.2, label=label)


def _never_dies_column(ax, rows, style, width):
    """Bars of classes that never die continue as arrows into a labelled band at the right of the axes."""
    if rows.size == 0:
        return None
    band = ax.inset_axes([1.035, 0.0, 0.07, 1.0], sharey=ax)
    band.set_facecolor(NEVER_DIES_COLOR)
    band.set_xlim(0, 1)
    band.set_xticks([])
    band.tick_params(axis="y", which="both", left=False, labelleft=False)
    band.yaxis.set_label_position("right")
    band.set_ylabel("never dies", fontsize=6.5, labelpad=2)
    band.add_collection(LineCollection([[(0.0, y), (0.62, y)] for y in rows], colors=style.line,
                                       linewidths=width, capstyle="butt"))
    band.scatter(np.full(rows.size, 0.72), rows, marker=">", s=max(6.0, 3 * width**2), c=style.edge, lw=0,
                 clip_on=False)
    _break_marks(ax, [((1.0, 1.0), (0.0, 1.0)), ((1.035, 1.035), (0.0, 1.0))])
    return band
