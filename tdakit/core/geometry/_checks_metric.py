"""Checks that coordinates make sense for the metric that will measure them."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
from numpy.typing import NDArray

from tdakit.core.geometry.metrics import Metric
from tdakit.errors import InvalidDataError, InvalidParameterError

# Powers |x|^p stay within float64 (about 1e-308 to 1e308) below these, with room for the sum over axes.
_POWER_LIMIT = 300.0


def check_points_for_metric(points: NDArray[np.float64], metric: Metric, name: str = "points",
                            first_row: int = 0) -> Metric:
    """Raise InvalidDataError when ``points`` cannot be measured by ``metric``; return the metric.

    A periodic metric given one side length comes back with one side per column. ``first_row``: the
    points are rows [first_row, ...) of a larger source (the row numbers in the errors count from there).
    """
    if metric.name == "periodic":
        return replace(metric, box=_check_in_box(points, metric, name, first_row))
    elif metric.name == "minkowski" and metric.p not in (1.0, 2.0) and np.isfinite(metric.p):
        _check_minkowski_range(points, metric.p)
    elif metric.name == "angular":
        _check_sky(points, name, first_row)
    elif metric.name == "cosine":
        norms = np.linalg.norm(points, axis=1)
        zero = np.flatnonzero(norms == 0)
        if zero.size:
            raise InvalidDataError(
                f"Input '{name}' has an all-zero row at row {first_row + int(zero[0])}; the cosine dissimilarity is "
                f"undefined for zero vectors. Drop those rows first.", parameter=name)
    return metric


def _check_in_box(points, metric, name, first_row=0):
    box = np.asarray(metric.box, dtype=np.float64)
    if box.size == 1:
        box = np.full(points.shape[1], box[0])
    elif box.size != points.shape[1]:
        raise InvalidDataError(
            f"The 'box' parameter has {box.size} side length(s) but the points have {points.shape[1]} "
            f"column(s); give one side per column or a single number.", parameter="box")
    outside = (points < 0) | (points > box)
    if outside.any():
        row, col = np.argwhere(outside)[0]
        raise InvalidDataError(
            f"Input '{name}' has a point outside the periodic box at row {first_row + row}: column {col} is "
            f"{float(points[row, col])!r}, expected within [0, {float(box[col])!r}]. tdakit does not wrap points "
            f"silently; apply `np.mod(points, box)` yourself if wrapping is intended.", parameter=name)
    return tuple(float(b) for b in box)


def _check_sky(points, name, first_row=0):
    if points.shape[1] != 2:
        raise InvalidDataError(
            f"metric='angular' needs exactly 2 columns (longitude, latitude in degrees); input '{name}' "
            f"has {points.shape[1]}.", parameter=name)
    lon = points[:, 0]
    far = np.flatnonzero(np.abs(lon) > 720)
    if far.size:
        row = int(far[0])
        at = first_row + row
        raise InvalidDataError(
            f"Input '{name}' has longitude {float(lon[row])!r} at row {at}; longitudes must lie in [-720, 720] "
            f"degrees (column 0 is the longitude; values far outside lose precision in the sine and cosine).",
            parameter=name)
    lat = points[:, 1]
    bad = np.flatnonzero((lat < -90) | (lat > 90))
    if bad.size:
        row = int(bad[0])
        at = first_row + row
        raise InvalidDataError(
            f"Input '{name}' has latitude {float(lat[row])!r} at row {at}; latitudes must lie in [-90, 90] degrees "
            f"(column 1 is the latitude).", parameter=name)


def _check_minkowski_range(points, p):
    """Refuse an order p whose powers of these coordinates' differences leave float64.

    Every Minkowski distance sums |x_i - y_i|^p over the axes: the largest difference (the widest span) must
    not overflow, and the smallest non-zero one must not underflow, or close points would merge (distance 0)
    and far ones become inf (coverage radius inf, infinite deaths).
    """
    spans = points.max(axis=0) - points.min(axis=0)
    widest = float(spans.max())
    gaps = np.diff(np.sort(points, axis=0), axis=0)
    positive = gaps[gaps > 0]
    if widest == 0 or positive.size == 0:
        return
    closest = float(positive.min())
    room = _POWER_LIMIT - np.log10(points.shape[1])
    limits = []
    if widest > 1:
        limits.append(room / np.log10(widest))
    if closest < 1:
        limits.append(room / -np.log10(closest))
    largest = min(limits, default=np.inf)
    if p > largest:
        raise InvalidParameterError(
            f"The 'p' parameter of load_cloud must keep the Minkowski powers in float64 range: with p={p:g}, "
            f"differences of these coordinates (widest span {widest:.3g}, closest non-zero gap {closest:.3g}) "
            f"raised to the power p would overflow to inf or underflow to 0, making far points infinitely "
            f"distant and close points coincide. The largest order these coordinates allow is about "
            f"{np.floor(largest):g}; for larger orders use metric='chebyshev' (the limit p -> inf, within a factor "
            f"n_dims^(1/p) of the Minkowski distance: {points.shape[1] ** (1 / p):.4g} here).", parameter="p")
