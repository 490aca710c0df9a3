"""The feature table and a feature's location, as the explorer shows them (numbers shared with the figures)."""

from __future__ import annotations

import html
from dataclasses import dataclass

import numpy as np

from tdakit.plotting import feature_numbers, significant_features

TABLE_ROWS = 15
PAD = "padding:2px 10px;text-align:right"
COLUMN_HELP = {
    "#": "the number of the feature's marker in the cloud view, diagram and barcode",
    "birth": "scale at which the feature appears",
    "death": "scale at which it is filled in (inf: never, or not before the scale cap)",
    "persistence": "death minus birth: how long the feature lives",
    "status": "finite; essential (never dies); or alive at the scale cap",
    "significant": "above the noise band at the chosen confidence level",
    "margin": "how far the feature stands above (positive) or inside (negative) the noise band, in scale units",
}


def numbered(run, dim: int) -> dict[int, int]:
    """Table row label -> the feature's number (1, 2, ...) in the figures: significant located classes of ``dim``."""
    return feature_numbers(run, dim=dim, max_features=len(significant_features(run, dim)))


def table_html(run, dim: int, rows: int = TABLE_ROWS) -> tuple[str, int]:
    """The first ``rows`` classes of dimension ``dim``, most persistent first, with the figures' numbers."""
    table = run.table
    chosen = table[table.dimension == dim]
    numbers = numbered(run, dim)
    shown = chosen.head(rows)
    columns = [c for c in ("birth", "death", "persistence", "status", "significant", "margin") if c in shown.columns]
    head = "".join(f'<th style="{PAD}" title="{html.escape(COLUMN_HELP.get(c, ""))}">{c}</th>'
                   for c in ["#"] + columns)
    body = []
    for label, row in shown.iterrows():
        cells = [str(numbers.get(int(label), ""))] + [_cell(row[c]) for c in columns]
        body.append("<tr>" + "".join(f'<td style="{PAD}">{cell}</td>' for cell in cells) + "</tr>")
    caption = (f"<p><b>H{dim}: showing {len(shown)} of {len(chosen)}</b> classes, most persistent first "
               f"(hover a column title for its meaning).</p>")
    style = "border-collapse:collapse;font-size:90%"
    return caption + f'<table style="{style}"><tr>{head}</tr>{"".join(body)}</table>', len(chosen)


def _cell(value) -> str:
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, (float, np.floating)):
        return "" if np.isnan(value) else f"{value:.4g}"
    return html.escape(str(value)) if value is not None else ""


@dataclass(frozen=True)
class Location:
    """Where a feature sits: its vertices, the catalogue points nearest them, their extent."""

    vertices: np.ndarray  # cloud indices of the birth and death simplices' vertices (landmarks)
    points: np.ndarray  # cloud indices of the points whose nearest landmark is one of the vertices
    centre: np.ndarray
    diameter: float  # largest distance between two of the vertices, in the cloud's metric
    low: np.ndarray  # bounding box of the points
    high: np.ndarray

    def describe(self, unit: str | None) -> str:
        unit = f" {unit}" if unit else ""
        box = ", ".join(f"{a:.3g} to {b:.3g}" for a, b in zip(self.low, self.high))
        return (f"{self.vertices.size} vertices; {self.points.size} catalogue points nearest them; extent "
                f"(largest distance between vertices) {self.diameter:.3g}{unit}; points within [{box}].")


def locate(run, cloud, label: int) -> Location | None:
    """The location of table row ``label`` of ``run`` on ``cloud`` (None without landmarks or coordinates)."""
    marks = run.landmarks
    row = run.table.loc[label]
    vertices = np.unique(np.concatenate([np.asarray(row.birth_vertices, dtype=np.intp),
                                         np.asarray(row.death_vertices, dtype=np.intp)]))
    vertices = vertices[vertices >= 0]
    if marks is None or vertices.size == 0 or cloud.n_dims == 0 or marks.nearest.size != cloud.n_points:
        return None
    own = np.flatnonzero(np.isin(marks.indices[marks.nearest], vertices))
    corners = cloud.points[vertices]
    working = cloud.metric.embed(corners)
    diameter = float(cloud.metric.to_metric(cloud.metric.working_pairwise(working, working)).max())
    points = cloud.points[own] if own.size else corners
    return Location(vertices, own, corners.mean(axis=0), diameter, points.min(axis=0), points.max(axis=0))
