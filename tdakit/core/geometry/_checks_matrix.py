"""Checks for a precomputed distance matrix: every violation names its first offending entry."""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike, NDArray

from tdakit.core.geometry.cloud import MAX_EXTENT, _check_finite, _to_numeric_array
from tdakit.errors import InvalidDataError


def check_distance_matrix(matrix: ArrayLike, name: str = "points") -> NDArray[np.float64]:
    """Return ``matrix`` as float64 if square, finite, non-negative, symmetric with zero diagonal."""
    array = _to_numeric_array(matrix, name)
    if array.ndim != 2 or array.shape[0] != array.shape[1]:
        raise InvalidDataError(
            f"A precomputed distance matrix must be square, of shape (n_points, n_points). Got shape="
            f"{array.shape} instead.", parameter=name)
    if array.shape[0] < 2:
        raise InvalidDataError(
            f"Found a distance matrix for {array.shape[0]} point(s) while a minimum of 2 is required.",
            parameter=name)
    array = np.array(array, dtype=np.float64, order="C")
    _check_finite(array, name)
    _first_violation(array < 0, array, name, "is negative; distances must be >= 0")
    _first_violation(array > MAX_EXTENT, array, name, f"exceeds {MAX_EXTENT:g}; rescale the distances")
    diag = np.diag(array)
    _first_violation(np.diag(diag != 0), array, name, "is on the diagonal and not 0")
    tolerance = 1e-12 * max(float(array.max()), 1e-300)
    _first_violation(np.abs(array - array.T) > tolerance, array, name,
                     "differs from its mirror entry; the matrix must be symmetric")
    return array


def _first_violation(mask, array, name, what):
    if mask.any():
        i, j = np.argwhere(mask)[0]
        raise InvalidDataError(
            f"Input '{name}' is not a valid distance matrix: entry [{i}, {j}] = {float(array[i, j])!r} {what}.",
            parameter=name)
