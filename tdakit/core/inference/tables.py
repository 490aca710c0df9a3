"""Tidy tables of features and their significance."""

from __future__ import annotations

import numpy as np

from tdakit._validation import fail
from tdakit.core.inference.universal import universal_pvalue_support, universal_pvalues
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
        minus the band's strip height), ``p_value`` and ``p_adjusted`` (universal-law
        p-values [1]_, Holm-adjusted within each dimension >= 1, filled only for the
        filtrations and landmark methods where tdakit measured them calibrated, see
        :func:`universal_pvalue_support`; NaN elsewhere, and ``table.attrs["p_values"]`` says
        why), ``birth_vertices``, ``death_vertices`` (cloud indices, as tuples), sorted by
        dimension then decreasing persistence.

    References
    ----------
    .. [1] O. Bobrowski, P. Skraba, "A universal null-distribution for topological data
       analysis", Sci. Rep. 13, 12274 (2023).
    """
    import pandas as pd

    if not isinstance(diagrams, Diagrams):
        raise fail("diagrams", "significance_table", "a Diagrams object", diagrams)
    frames = [_rows(diagrams, band, k) for k in range(len(diagrams))]
    table = pd.concat(frames, ignore_index=True) if frames else pd.DataFrame()
    table.attrs["p_values"] = universal_pvalue_support(diagrams)[1] if len(diagrams) > 1 else "no dimension >= 1"
    return table


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
    frame["p_value"], frame["p_adjusted"] = _pvalues(diagrams, k)
    frame["birth_vertices"] = [tuple(int(v) for v in row if v >= 0) for row in diagrams.birth_vertices[k]]
    frame["death_vertices"] = [tuple(int(v) for v in row if v >= 0) for row in diagrams.death_vertices[k]]
    return frame


def _pvalues(diagrams, k):
    empty = np.full(len(diagrams[k]), np.nan)
    if k == 0 or not universal_pvalue_support(diagrams, dim=k)[0]:
        return empty, empty
    result = universal_pvalues(diagrams, k)
    return result.p_value, result.p_adjusted

