"""The cloud itself: a preview of the points, the landmarks, and the located, numbered features."""

from __future__ import annotations

import numpy as np
from matplotlib.lines import Line2D
from matplotlib.ticker import MaxNLocator

from tdakit._validation import fail
from tdakit.plotting.features import feature_numbers, label_feature, significant_features
from tdakit.plotting.style import (
    CLOUD_COLOR,
    FEATURE_LABEL,
    INK,
    LANDMARK_COLOR,
    _axes,
    dimension_style,
    legend_side,
    new_figure,
    outside_legend,
    styled,
    tidy_scale_axis,
)

__all__ = ["cloud_projection", "plot_cloud", "projection", "significant_features"]


def projection(points: np.ndarray, n_components: int = 2) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Principal axes of ``points``: returns (centre, axes (n_components, d), explained variance fractions)."""
    centre = points.mean(axis=0)
    _, values, axes = np.linalg.svd(points - centre, full_matrices=False)
    # Fix each axis's sign so the projection is deterministic.
    signs = np.sign(axes[np.arange(len(axes)), np.abs(axes).argmax(axis=1)])
    axes = axes * signs[:, None]
    variance = values**2 / max((values**2).sum(), 1e-300)
    return centre, axes[:n_components], variance[:n_components]


def _kind(run) -> str:
    n_dims = run.preview_points.shape[1]
    metric = run.provenance.get("input", {}).get("metric", {}).get("name")
    if n_dims == 0:
        return "none"
    if metric == "angular" and n_dims == 2:
        return "sky"
    return {1: "line", 2: "plane", 3: "space"}.get(n_dims, "projected")


def cloud_projection(run) -> str | None:
    """The matplotlib projection :func:`plot_cloud` needs for this run's cloud.

    ``"mollweide"`` (equal-area sky) for angular clouds, ``"3d"`` for three coordinates, None otherwise;
    pass it to ``figure.add_subplot(projection=...)`` when giving :func:`plot_cloud` an ``ax``.
    """
    return {"sky": "mollweide", "space": "3d"}.get(_kind(run))


@styled
def plot_cloud(run, *, dim: int = 1, max_features: int = 3, features=None, ax=None, preset: str = "single",
               numbers: dict | None = None) -> dict:
    """Draw the run's preview of the cloud, its landmarks and the vertices of the numbered features.

    Two coordinates are drawn with equal scales, three on a 3-D axes, one as a histogram with the
    landmarks and features on a rug; more are projected on their first two principal axes (the
    explained variance is in the axis labels). Angular clouds (longitude, latitude in degrees)
    are drawn on the equal-area Mollweide projection of the sky. A feature is located by the
    vertices of its birth and death simplices (landmark indices) and carries its number from
    :func:`feature_numbers` (the same number as in the diagram, the barcode and the table).

    Parameters
    ----------
    features : sequence of int, optional
        Row labels of ``run.table`` to mark (default: the ``max_features`` most persistent
        significant classes of dimension ``dim``).
    ax : Axes, optional
        Its projection must be :func:`cloud_projection` (run).
    numbers : dict, optional
        ``{row label: number}`` from :func:`feature_numbers`; overrides ``features``.

    Returns
    -------
    dict
        ``ax``, ``points``, ``landmarks`` (artists), ``features`` (list of (row, artist)), ``labels``.
    """
    from tdakit.pipeline import RunResult

    if not isinstance(run, RunResult):
        raise fail("run", "plot_cloud", "a RunResult from analyze or load_run", run)
    kind = _kind(run)
    if kind == "none":
        ax = _axes(ax, preset, aspect=0.5)
        ax.text(0.5, 0.5, "no coordinates\n(the input was a distance matrix)", ha="center", va="center")
        ax.set_axis_off()
        return {"ax": ax, "points": None, "landmarks": None, "features": [], "labels": []}
    ax = _cloud_axes(run, ax, preset, kind)
    if numbers is None:
        numbers = feature_numbers(run, dim=dim, max_features=max_features, features=features)
    drawer = _draw_line if kind == "line" else _draw_points
    drawn = drawer(ax, run, kind, numbers)
    ax.set_title(f"sky in {run.unit or 'deg'} (Mollweide equal-area)" if kind == "sky" else
                 "cloud and located features", loc="left")
    return drawn


def _cloud_axes(run, ax, preset, kind):
    needed = cloud_projection(run)
    if ax is None:
        aspect = {"sky": 0.85, "space": 0.95, "line": 0.85}.get(kind, 1.08)
        if preset == "double":
            aspect = {"sky": 0.4, "space": 0.5, "line": 0.38}.get(kind, 0.5)
        return new_figure(preset, aspect).add_subplot(projection=needed)
    name = getattr(ax, "name", "rectilinear")
    if name != (needed or "rectilinear"):
        raise fail("ax", "plot_cloud", f"an axes with projection {needed or 'rectilinear'!r} for this cloud "
                   "(see cloud_projection)", f"an axes with projection {name!r}")
    return ax


def _placed(run, kind):
    """A function taking cloud coordinates to drawing coordinates, and the axis labels."""
    names = list(run.provenance.get("input", {}).get("columns") or [])
    unit = f" ({run.unit})" if run.unit else ""
    n_dims = run.preview_points.shape[1]
    if kind == "sky":
        def to_sky(a):
            return np.c_[np.radians((a[:, 0] + 180.0) % 360.0 - 180.0), np.radians(a[:, 1])]
        return to_sky, [f"{n} ({run.unit or 'deg'})" for n in (names if len(names) == 2 else ["longitude",
                                                                                            "latitude"])]
    if kind != "projected":
        labels = names if len(names) == n_dims else [f"coordinate {i}" for i in range(n_dims)]
        return (lambda a: a), [f"{label}{unit}" for label in labels]
    centre, axes, variance = projection(run.preview_points)
    labels = [f"principal axis {i + 1}{unit}, {100 * v:.0f}% of variance" for i, v in enumerate(variance)]
    return (lambda a: (a - centre) @ axes.T), labels


def _feature_sets(run, numbers):
    """(row, number, vertex indices) of every numbered feature that can be located on the cloud."""
    if run.landmarks is None:
        return []
    table = run.table
    found = []
    for row_label, number in numbers.items():
        row = next(table.loc[[row_label]].itertuples())
        vertices = sorted(set(row.birth_vertices) | set(row.death_vertices))
        if vertices:
            found.append((row, number, vertices))
    return found


def _draw_points(ax, run, kind, numbers):
    transform, labels = _placed(run, kind)
    points, marks = run.preview_points, run.landmark_points
    drawn = {"ax": ax, "labels": []}
    drawn["points"] = ax.scatter(*transform(points).T, s=1.5, c=CLOUD_COLOR, lw=0)
    drawn["landmarks"] = ax.scatter(*transform(marks).T, s=4, c=LANDMARK_COLOR, lw=0) if len(marks) else None
    drawn["features"] = []
    for row, number, vertices in _feature_sets(run, numbers):
        where = transform(run.landmark_coordinates(vertices))
        style = dimension_style(int(row.dimension))
        artist = ax.scatter(*where.T, marker=style.marker, s=34, facecolors="none", edgecolors=style.edge,
                            linewidths=1.0, zorder=4)
        drawn["features"].append((row, artist))
        if kind == "space":
            drawn["labels"].append(ax.text(*where.mean(axis=0), str(number), **FEATURE_LABEL, zorder=5))
        elif kind == "sky":  # on the sky a loop's centre may lie anywhere: label its northernmost vertex
            drawn["labels"].append(label_feature(ax, *where[where[:, 1].argmax()], number, offset=(0, 8), zorder=5))
        else:
            drawn["labels"].append(label_feature(ax, *where.mean(axis=0), number, offset=(0, 0), zorder=5))
    _cloud_axes_labels(ax, kind, labels)
    _cloud_legend(ax, run, drawn)
    return drawn


def _cloud_axes_labels(ax, kind, labels):
    if kind == "sky":
        ax.set_xticks(np.radians([-120, -60, 0, 60, 120]))
        ax.set_yticks(np.radians([-60, -30, 0, 30, 60]))
        ax.tick_params(labelsize=5.5)
        ax.grid(True, lw=0.3, color=CLOUD_COLOR)
        ax.set_anchor("W")
        return
    elif kind == "space":
        ax.set_box_aspect(None, zoom=1.1)
        for axis in (ax.xaxis, ax.yaxis, ax.zaxis):
            axis.set_major_locator(MaxNLocator(3))
        ax.tick_params(labelsize=5.5, pad=0)
    else:
        ax.set_aspect("equal", adjustable="box")
        for axis, label in zip((ax.xaxis, ax.yaxis), labels):
            tidy_scale_axis(axis, 5, label)
        return
    for axis, label in zip(("x", "y", "z"), labels):
        getattr(ax, f"set_{axis}label")(label, **({"labelpad": -2} if kind == "space" else {}))


def _cloud_legend(ax, run, drawn):
    handles = [Line2D([], [], ls="", marker="o", ms=2.5, mfc=CLOUD_COLOR, mec="none",
                      label=f"points ({len(run.preview_points)} shown)")]
    if drawn["landmarks"] is not None:
        handles.append(Line2D([], [], ls="", marker="o", ms=3, mfc=LANDMARK_COLOR, mec="none",
                              label=f"landmarks ({len(run.landmark_points)})"))
    for k in sorted({int(row.dimension) for row, _ in drawn["features"]}):
        style = dimension_style(k)
        handles.append(Line2D([], [], ls="", marker=style.marker, ms=5, mfc="none", mec=style.edge,
                              label=f"H{k} feature vertices\n(boxed number = feature)"))
    return outside_legend(ax, handles, where="below" if ax.name == "3d" else "auto",
                          ncols=2 if ax.name == "3d" or legend_side(ax) == "below" else 1)


def _draw_line(ax, run, kind, numbers):
    """One coordinate: a histogram of the preview, the landmarks and the features' vertices on a rug below it."""
    points, marks = run.preview_points[:, 0], run.landmark_points[:, 0]
    _, labels = _placed(run, kind)
    drawn = {"ax": ax, "labels": [], "features": []}
    counts, _, drawn["points"] = ax.hist(points, bins=min(40, max(8, len(points) // 10)), color=CLOUD_COLOR,
                                         edgecolor="white", linewidth=0.3)
    rug = -0.06 * max(counts.max(), 1)
    drawn["landmarks"] = ax.scatter(marks, np.full(marks.size, rug), marker="|", s=30, c=LANDMARK_COLOR, lw=0.6,
                                    clip_on=False) if marks.size else None
    for row, number, vertices in _feature_sets(run, numbers):
        where = run.landmark_coordinates(vertices)[:, 0]
        style = dimension_style(int(row.dimension))
        artist = ax.scatter(where, np.full(where.size, 2 * rug), marker=style.marker, s=30, facecolors="none",
                            edgecolors=style.edge, linewidths=1.0, clip_on=False)
        drawn["features"].append((row, artist))
        drawn["labels"].append(label_feature(ax, float(where.mean()), 2 * rug, number, offset=(0, -9)))
    ax.set_ylim(3.2 * rug, counts.max() * 1.08 + 1)
    ax.yaxis.set_major_locator(MaxNLocator(nbins=4, integer=True))
    ax.set_yticks([t for t in ax.get_yticks() if 0 <= t <= counts.max() * 1.08 + 1])
    ax.axhline(0, color=INK, lw=0.5)
    tidy_scale_axis(ax.xaxis, 5, labels[0])
    ax.set_ylabel("points (preview)")
    _cloud_legend(ax, run, drawn)
    return drawn
