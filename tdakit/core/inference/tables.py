"""Tidy tables of features and their significance."""

from __future__ import annotations

import numpy as np

from tdakit._validation import fail
from tdakit.core.topology.diagrams import Diagrams

__all__ = ["significance_table"]


def significance_table(diagrams: Diagrams, band=None):
    """One row per class: dimension, birth, death, persistence, status, significance and location.

    Parameters
    ----------
    diagrams : Diagrams
    band : Band, optional
        Without a band the ``significant`` and ``margin`` columns are left empty (NA); a band
        that does not call features (``band.calls`` False) leaves ``significant`` empty.

    Returns
    -------
    pandas.DataFrame
        Columns ``dimension, birth, death, persistence, status`` (``"finite"``,
        ``"essential"``, ``"alive at cutoff"``), ``significant``, ``margin`` (persistence
        minus the band's strip height), ``birth_vertices``, ``death_vertices`` (cloud
        indices, as tuples), sorted by dimension then decreasing persistence.
    """
    import pandas as pd

    if not isinstance(diagrams, Diagrams):
        raise fail("diagrams", "significance_table", "a Diagrams object", diagrams)
    frames = [_rows(diagrams, band, k) for k in range(len(diagrams))]
    return pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()


def _rows(diagrams, band, k):
    import pandas as pd

    pairs = diagrams[k]
    status = np.where(diagrams.essential(k), "essential",
                      np.where(diagrams.alive_at_cutoff(k), "alive at cutoff", "finite"))
    frame = pd.DataFrame({"dimension": k, "birth": pairs[:, 0], "death": pairs[:, 1],
                          "persistence": pairs[:, 1] - pairs[:, 0], "status": status})
    if band is None or not band.calls:
        frame["significant"] = pd.array([pd.NA] * len(pairs), dtype="boolean")
        frame["margin"] = np.nan if band is None else band.margin(diagrams, k)
    else:
        frame["significant"] = band.significant(diagrams, k)
        frame["margin"] = band.margin(diagrams, k)
    frame["birth_vertices"] = [tuple(int(v) for v in row if v >= 0) for row in diagrams.birth_vertices[k]]
    frame["death_vertices"] = [tuple(int(v) for v in row if v >= 0) for row in diagrams.death_vertices[k]]
    return frame
