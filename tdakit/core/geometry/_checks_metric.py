"""Checks that coordinates make sense for the metric that will measure them."""

from __future__ import annotations

from dataclasses import replace

import numpy as np
from numpy.typing import NDArray

from tdakit.core.geometry.metrics import Metric
from tdakit.errors import InvalidDataError


def check_points_for_metric(points: NDArray[np.float64], metric: Metric, name: str = "points") -> Metric:
    """Raise InvalidDataError when ``points`` cannot be measured by ``metric``; return the metric.

    A periodic metric given one side length comes back with one side per column.
    """
    if metric.name == "periodic":
        return replace(metric, box=_check_in_box(points, metric, name))
    elif metric.name == "angular":
        _check_sky(points, name)
    elif metric.name == "cosine":
        norms = np.linalg.norm(points, axis=1)
        zero = np.flatnonzero(norms == 0)
        if zero.size:
            raise InvalidDataError(
                f"Input '{name}' has an all-zero row at row {int(zero[0])}; the cosine dissimilarity is "
                f"undefined for zero vectors. Drop those rows first.", parameter=name)
    return metric


def _check_in_box(points, metric, name):
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
            f"Input '{name}' has a point outside the periodic box at row {row}: column {col} is "
            f"{float(points[row, col])!r}, expected within [0, {float(box[col])!r}]. tdakit does not wrap points "
            f"silently; apply `np.mod(points, box)` yourself if wrapping is intended.", parameter=name)
    return tuple(float(b) for b in box)


def _check_sky(points, name):
    if points.shape[1] != 2:
        raise InvalidDataError(
            f"metric='angular' needs exactly 2 columns (longitude, latitude in degrees); input '{name}' "
            f"has {points.shape[1]}.", parameter=name)
    lat = points[:, 1]
    bad = np.flatnonzero((lat < -90) | (lat > 90))
    if bad.size:
        row = int(bad[0])
        raise InvalidDataError(
            f"Input '{name}' has latitude {float(lat[row])!r} at row {row}; latitudes must lie in [-90, 90] degrees "
            f"(column 1 is the latitude).", parameter=name)
