"""The cloud itself: a preview of the points, the landmarks, and the located features."""

from __future__ import annotations

import numpy as np

from tdakit._validation import fail
from tdakit.plotting.style import CLOUD_COLOR, FEATURE_COLOR, LANDMARK_COLOR, _axes, house_style, new_figure, styled


def projection(points: np.ndarray, n_components: int = 2) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Principal axes of ``points``: returns (centre, axes (n_components, d), explained variance fractions)."""
    centre = points.mean(axis=0)
    _, values, axes = np.linalg.svd(points - centre, full_matrices=False)
    # Fix each axis's sign so the projection is deterministic.
    signs = np.sign(axes[np.arange(len(axes)), np.abs(axes).argmax(axis=1)])
    axes = axes * signs[:, None]
    variance = values**2 / max((values**2).sum(), 1e-300)
    return centre, axes[:n_components], variance[:n_components]


def significant_features(run, dim: int):
    """Rows of ``run.table`` for the significant, located, mortal classes of dimension ``dim``."""
    if run.band is None or run.landmarks is None or dim >= len(run.diagrams):
        return run.table.iloc[0:0]
    table = run.table
    rows = table[(table.dimension == dim) & table.significant.fillna(False).astype(bool)
                 & (table.status != "essential")]
    located = [len(b) + len(d) > 0 for b, d in zip(rows.birth_vertices, rows.death_vertices)]
    return rows[located]


def _feature_rows(run, dim, max_features, features):
    if features is None:
        return list(significant_features(run, dim).head(max_features).itertuples())
    table = run.table
    return [row for row in table.loc[list(features)].itertuples() if len(row.birth_vertices) > 0]


@styled
def plot_cloud(run, *, dim: int = 1, max_features: int = 3, features=None, ax=None, preset: str = "single") -> dict:
    """Draw the run's preview of the cloud, its landmarks and the vertices of the significant features.

    Two or three coordinates are drawn as they are (3-D on a 3-D axes); more are projected on
    their first two principal axes (the explained variance is in the axis labels). A feature is
    located by the vertices of its birth and death simplices (landmark indices). ``features``:
    row labels of ``run.table`` to mark (default: the ``max_features`` most persistent
    significant classes of dimension ``dim``).

    Returns
    -------
    dict
        ``ax``, ``points``, ``landmarks`` (artists), ``features`` (list of (row, artist)).
    """
    from tdakit.pipeline import RunResult

    if not isinstance(run, RunResult):
        raise fail("run", "plot_cloud", "a RunResult from analyze or load_run", run)
    points, marks = run.preview_points, run.landmark_points
    n_dims = points.shape[1]
    if n_dims == 0:
        ax = _axes(ax, preset, aspect=0.9)
        ax.text(0.5, 0.5, "no coordinates\n(the input was a distance matrix)", ha="center", va="center")
        ax.set_axis_off()
        return {"ax": ax, "points": None, "landmarks": None, "features": []}
    three = n_dims == 3
    if ax is None:
        ax = new_figure(preset, aspect=0.9).add_subplot(projection="3d" if three else None)
    transform, labels = _coordinates(run, points, three)
    with house_style():
        drawn = {"ax": ax, "points": ax.scatter(*transform(points).T, s=1.5, c=CLOUD_COLOR, alpha=0.45, lw=0,
                                                label=f"points ({len(points)} shown)")}
        drawn["landmarks"] = ax.scatter(*transform(marks).T, s=7, c=LANDMARK_COLOR, marker="o", lw=0,
                                        label=f"landmarks ({len(marks)})") if len(marks) else None
        drawn["features"] = _features(ax, _feature_rows(run, dim, max_features, features), run, transform)
        for axis, label in zip(("x", "y", "z"), labels):
            getattr(ax, f"set_{axis}label")(label)
        ax.legend(frameon=False, loc="upper right")
        ax.set_title(f"cloud, landmarks and located H{dim} features")
    return drawn


def _coordinates(run, points, three):
    names = list(run.provenance.get("input", {}).get("columns") or [])
    n_dims = points.shape[1]
    if n_dims <= 3:
        labels = names if len(names) == n_dims else [f"coordinate {i}" for i in range(n_dims)]
        return (lambda a: a), labels
    centre, axes, variance = projection(points)
    labels = [f"principal axis {i + 1} ({100 * v:.0f}% of variance)" for i, v in enumerate(variance)]
    return (lambda a: (a - centre) @ axes.T), labels


def _features(ax, rows, run, transform):
    drawn = []
    for number, row in enumerate(rows, start=1):
        vertices = sorted(set(row.birth_vertices) | set(row.death_vertices))
        where = transform(run.landmark_coordinates(vertices))
        artist = ax.scatter(*where.T, s=40, facecolors="none", edgecolors=FEATURE_COLOR, linewidths=1.2,
                            marker="o", label="feature vertices" if number == 1 else None)
        if where.shape[1] == 2:
            ax.annotate(f"{number}", where.mean(axis=0), color=FEATURE_COLOR, fontsize=7, fontweight="bold")
        else:
            ax.text(*where.mean(axis=0), f"{number}", color=FEATURE_COLOR, fontsize=7)
        drawn.append((row, artist))
    return drawn
