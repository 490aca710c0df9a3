"""Warnings for data that load but probably not as the user meant (issue: silent wrong answers).

Three checks, each warned once with its reason and how to silence it:

- the angular metric (degrees) given data that look like radians;
- a column that looks like a row identifier, used as a coordinate because ``columns`` was not given;
- column spreads that differ by more than ``SCALE_RATIO`` under a coordinate metric without standardisation.
"""

from __future__ import annotations

import warnings

import numpy as np

from tdakit.errors import SuspiciousDataWarning

__all__ = ["MIN_POINTS_IDENTIFIER", "MIN_POINTS_RADIANS", "SCALE_RATIO", "warn_if_suspicious"]

# Thresholds (common practice, chosen here): a sample this large whose longitudes fill a good part of
# [0, 2 pi] and latitudes of [-pi/2, pi/2] is far more likely radians than a tiny patch at (0, 0) in degrees.
MIN_POINTS_RADIANS = 20
MIN_LON_SPAN, MIN_LAT_SPAN = 1.0, 0.5
MIN_POINTS_IDENTIFIER = 10
SCALE_RATIO = 1000.0
_COORDINATE_METRICS = ("euclidean", "manhattan", "chebyshev", "minkowski")


def _warn(message: str) -> None:
    warnings.warn(message, SuspiciousDataWarning, stacklevel=5)  # _warn, its check, warn_if_suspicious, load_cloud


def warn_if_suspicious(table, cloud, *, columns_chosen: bool, unit_named: bool, standardized: bool) -> None:
    """Warn (:class:`~tdakit.errors.SuspiciousDataWarning`) about data that look misread; see the module."""
    if cloud.metric.name == "precomputed" or cloud.n_points < 2:
        return
    raw = np.asarray(table, dtype=np.float64)
    if raw.ndim != 2 or raw.shape != cloud.points.shape:
        raw = cloud.points
    names = cloud.columns
    if cloud.metric.name == "angular" and not unit_named:
        _radians(raw)
    if not columns_chosen:
        _identifier(raw, names)
    if cloud.metric.name in _COORDINATE_METRICS and not standardized:
        _scales(raw, names)


def _radians(raw) -> None:
    lon, lat = raw[:, 0], raw[:, 1]
    if raw.shape[0] < MIN_POINTS_RADIANS:
        return
    inside = lon.min() >= -np.pi and lon.max() <= 2 * np.pi and np.abs(lat).max() <= np.pi / 2
    spread = np.ptp(lon) >= MIN_LON_SPAN or np.ptp(lat) >= MIN_LAT_SPAN
    if inside and spread:
        _warn(f"The angular metric reads (longitude, latitude) in degrees, but all {raw.shape[0]} longitudes lie "
              f"in [{lon.min():.3g}, {lon.max():.3g}] and all latitudes in [{lat.min():.3g}, {lat.max():.3g}], "
              f"within [-pi, 2 pi] x [-pi/2, pi/2]: these look like radians. Convert them with numpy.degrees, or "
              f"pass unit='deg' if they really are degrees.")


def _identifier(raw, names) -> None:
    n_points, n_dims = raw.shape
    if n_points < MIN_POINTS_IDENTIFIER or n_dims < 2:
        return
    for j in range(n_dims):
        column = raw[:, j]
        if np.all(column == np.round(column)) and np.all(np.diff(column) > 0):
            _warn(f"Column {j} ({names[j]!r}) holds integers that increase strictly from row to row "
                  f"({column[0]:.0f}, {column[1]:.0f}, ..., {column[-1]:.0f}), like a row identifier; it is used as "
                  f"a coordinate because columns= was not given. Choose the coordinate columns with columns=[...] "
                  f"(command line: --columns).")
            return


def _scales(raw, names) -> None:
    if raw.shape[1] < 2:
        return
    spreads = raw.std(axis=0)
    positive = np.flatnonzero(spreads > 0)
    if positive.size < 2:
        return
    wide = positive[np.argmax(spreads[positive])]
    narrow = positive[np.argmin(spreads[positive])]
    ratio = spreads[wide] / spreads[narrow]
    if ratio > SCALE_RATIO:
        _warn(f"Column {narrow} ({names[narrow]!r}) spreads over {spreads[narrow]:.3g} (standard deviation) while "
              f"column {wide} ({names[wide]!r}) spreads over {spreads[wide]:.3g}, {ratio:.3g} times more; the "
              f"distances hardly see the narrow column. If the columns are in different units, pass "
              f"standardize=True (command line: --standardize) or choose the columns with columns=[...].")
