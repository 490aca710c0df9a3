"""Numbered features: one number per feature, shown beside its marker in every view and in the tables."""

from __future__ import annotations

import numpy as np

from tdakit._validation import fail
from tdakit.plotting.style import FEATURE_LABEL

__all__ = ["feature_numbers", "significant_features"]


def significant_features(run, dim: int):
    """Rows of ``run.table`` for the significant, located, mortal classes of dimension ``dim``."""
    if run.band is None or run.landmarks is None or dim >= len(run.diagrams):
        return run.table.iloc[0:0]
    table = run.table
    rows = table[(table.dimension == dim) & table.significant.fillna(False).astype(bool)
                 & (table.status != "essential")]
    located = [len(b) + len(d) > 0 for b, d in zip(rows.birth_vertices, rows.death_vertices)]
    return rows[located]


def feature_numbers(run, *, dim: int = 1, max_features: int = 3, features=None) -> dict[int, int]:
    """The figure number of each marked feature: ``{row label of run.table: number}``, numbered from 1.

    The same mapping, passed as ``numbers=`` to :func:`plot_diagram`, :func:`plot_barcode` and
    :func:`plot_cloud`, puts the same number beside the same feature in every view; tables show it in a
    ``feature`` column (``run.table.loc[list(numbers)]``).

    Parameters
    ----------
    run : RunResult
    dim : int, default=1
        Homology dimension whose features are numbered (when ``features`` is None).
    max_features : int, default=3
        How many of the most persistent significant, located, mortal classes to number.
    features : sequence of int, optional
        Row labels of ``run.table`` to number instead, in this order.
    """
    from tdakit.pipeline import RunResult

    if not isinstance(run, RunResult):
        raise fail("run", "feature_numbers", "a RunResult from analyze or load_run", run)
    if features is None:
        rows = list(significant_features(run, dim).head(max_features).index)
    else:
        rows = list(features)
        missing = [r for r in rows if r not in run.table.index]
        if missing:
            raise fail("features", "feature_numbers", f"row labels of run.table (0 to {len(run.table) - 1})",
                       missing)
    return {int(row): number for number, row in enumerate(rows, start=1)}


def numbered_positions(numbers, diagrams, dim: int) -> list[tuple[int, int]]:
    """(position in ``diagrams[dim]``, number) for the numbered rows that belong to dimension ``dim``."""
    if not numbers:
        return []
    offsets = np.cumsum([0] + [len(p) for p in diagrams])
    low, high = offsets[dim], offsets[dim + 1]
    return [(int(row) - low, number) for row, number in numbers.items() if low <= int(row) < high]


def label_feature(ax, x, y, number, *, offset=(5, 5), **kwargs):
    """The boxed feature number beside a marker (``offset`` in points)."""
    return ax.annotate(str(number), (x, y), xytext=offset, textcoords="offset points",
                       **{**FEATURE_LABEL, **kwargs})
