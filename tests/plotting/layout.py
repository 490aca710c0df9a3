"""An automatic layout check: no text outside the figure, no two texts overlapping, no legend over data.

``layout_problems(figure)`` lays the figure out as a save would, then measures every drawn text
(titles, axis labels, visible tick labels, legend entries, annotations) in display space. Numbers
placed with ``Axes3D.text`` are skipped: their 2-D place exists only while the 3-D axes draws.
"""

from __future__ import annotations

import numpy as np
from matplotlib.collections import PathCollection
from matplotlib.legend import Legend
from matplotlib.lines import Line2D
from matplotlib.patches import Rectangle
from matplotlib.text import Text
from matplotlib.transforms import Bbox
from mpl_toolkits.mplot3d.art3d import Text3D

from tdakit.plotting.style import _freeze_layout


def _tick_labels(ax):
    """(every tick label, the tick labels actually drawn) of one axes."""
    every, drawn = set(), []
    for axis in ax._axis_map.values():
        for tick in axis.majorTicks + axis.minorTicks:
            every.update((id(tick.label1), id(tick.label2)))
        if ax.axison:
            for tick in axis._update_ticks():
                drawn += [label for label in (tick.label1, tick.label2) if label.get_visible()]
    return every, drawn


def _every_axes(figure):
    found, stack = [], list(figure.get_axes())
    while stack:
        ax = stack.pop()
        found.append(ax)
        stack += list(ax.child_axes)
    return found


def _axis_texts(ax):
    return {id(getattr(axis, name)) for axis in ax._axis_map.values() for name in ("label", "offsetText")}


def drawn_texts(figure) -> list[Text]:
    """Every text the figure draws (tick labels only where a tick is drawn)."""
    skip, texts = set(), []
    for ax in _every_axes(figure):
        every, drawn = _tick_labels(ax)
        skip |= every
        if not ax.axison or not ax.get_visible():
            skip |= _axis_texts(ax)
        texts += drawn
    for text in figure.findobj(Text):
        if id(text) in skip or isinstance(text, Text3D) or not text.get_visible():
            continue
        if text.axes is not None and not text.axes.get_visible():
            continue
        texts.append(text)
    return [t for t in texts if t.get_text().strip()]


def _densify(xy, steps=40):
    """Points along each segment, so a straight line crossing a legend is caught between its ends."""
    if len(xy) < 2:
        return xy
    t = np.linspace(0, 1, steps)[:, None]
    return np.concatenate([a + t * (b - a) for a, b in zip(xy[:-1], xy[1:])])


def data_boxes(ax, renderer) -> list[Bbox]:
    """Display-space boxes of the data in one axes: scatter points, line vertices, histogram bars."""
    boxes = []
    for artist in ax.get_children():
        if not artist.get_visible() or isinstance(artist, Legend):
            continue
        if isinstance(artist, PathCollection) and artist.get_offset_transform() is ax.transData:
            points = ax.transData.transform(np.asarray(artist.get_offsets(), dtype=float).reshape(-1, 2))
            boxes += [Bbox.from_bounds(x - 2, y - 2, 4, 4) for x, y in points if np.isfinite([x, y]).all()]
        elif isinstance(artist, Line2D) and artist.get_transform() is ax.transData:
            xy = np.asarray(artist.get_xydata(), dtype=float)
            path = ax.transData.transform(_densify(xy)) if len(xy) else np.zeros((0, 2))
            boxes += [Bbox.from_bounds(x - 1, y - 1, 2, 2) for x, y in path if np.isfinite([x, y]).all()]
        elif isinstance(artist, Rectangle) and artist is not ax.patch and artist.get_height() > 0:
            boxes.append(artist.get_window_extent(renderer))
    return [box for box in boxes if box.overlaps(ax.bbox)]


def _overlap(a, b, slack=0.5):
    return (min(a.x1, b.x1) - max(a.x0, b.x0) > slack) and (min(a.y1, b.y1) - max(a.y0, b.y0) > slack)


def layout_problems(figure) -> list[str]:
    """What would spoil the figure in print: clipped text, overprinted text, a legend over data."""
    _freeze_layout(figure)
    figure.draw_without_rendering()
    renderer = figure._get_renderer()
    frame = figure.bbox.padded(0.5)
    problems = []
    boxes = [(text, text.get_window_extent(renderer)) for text in drawn_texts(figure)]
    for text, box in boxes:
        if not (frame.contains(box.x0, box.y0) and frame.contains(box.x1, box.y1)):
            problems.append(f"text {text.get_text()!r} leaves the figure ({box.bounds} in {figure.bbox.bounds})")
    for i, (a, box_a) in enumerate(boxes):
        problems += [f"texts {a.get_text()!r} and {b.get_text()!r} overlap"
                     for b, box_b in boxes[i + 1:] if _overlap(box_a, box_b)]
    for legend in figure.findobj(Legend):
        box = legend.get_window_extent(renderer)
        for ax in [legend.axes] if legend.axes is not None else _every_axes(figure):
            if any(_overlap(box, data, slack=0.0) for data in data_boxes(ax, renderer)):
                problems.append(f"a legend covers data in the axes titled {ax.get_title()!r}")
    return problems
