"""k-nearest-neighbour density estimates and the dense core of a cloud."""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray
from scipy.special import gammaln

from tdakit._validation import check_bool, check_float, check_int, fail
from tdakit.core.geometry import _geometry
from tdakit.core.geometry.cloud import Cloud

__all__ = ["knn_radius", "knn_density", "densest_points"]


def _check_k(cloud: Cloud, k: object, function: str) -> int:
    if not isinstance(cloud, Cloud):
        raise fail("cloud", function, "a Cloud from tdakit.load_cloud", cloud)
    return check_int(k, "k", function, low=1, high=cloud.n_points - 1, note="neighbours, fewer than the points")


def knn_radius(cloud: Cloud, k: int = 15) -> NDArray[np.float64]:
    r"""Distance from every point to its k-th nearest neighbour, the point itself excluded.

    Parameters
    ----------
    cloud : Cloud
        The cloud; distances use its metric.
    k : int, default=15
        Neighbour rank, in ``[1, n_points - 1]``. Repeated copies of a point count
        as neighbours at distance 0.

    Returns
    -------
    ndarray of shape (n_points,)
        :math:`\\rho_k(x)` in the metric's units.

    References
    ----------
    .. [1] G. Carlsson, T. Ishkhanov, V. de Silva, A. Zomorodian, "On the local
       behavior of spaces of natural images", Int. J. Comput. Vision 76 (2008) 1-12.
    """
    k = _check_k(cloud, k, "knn_radius")
    return _geometry.kth_neighbor_distance(cloud, k)


def knn_density(cloud: Cloud, k: int = 15, *, calibrated: bool = False) -> NDArray[np.float64]:
    r"""k-nearest-neighbour density of every point.

    Parameters
    ----------
    cloud : Cloud
    k : int, default=15
        Neighbour rank (the point itself excluded).
    calibrated : bool, default=False
        False: the relative density :math:`1/\\rho_k`. True: the estimate
        :math:`\\hat f = k / (n V_d \\rho_k^d)` with :math:`V_d = \\pi^{d/2}/\\Gamma(d/2+1)`,
        which is a probability density only for Euclidean coordinates.

    Returns
    -------
    ndarray of shape (n_points,)
        Points with :math:`\\rho_k = 0` (k or more exact copies) get ``inf``.

    References
    ----------
    .. [1] D. O. Loftsgaarden, C. P. Quesenberry, "A nonparametric estimate of a
       multivariate density function", Ann. Math. Statist. 36 (1965) 1049-1051.
    """
    calibrated = check_bool(calibrated, "calibrated", "knn_density")
    radius = knn_radius(cloud, k)
    with np.errstate(divide="ignore"):
        if not calibrated:
            return 1.0 / radius
        d = cloud.n_dims
        log_volume = (d / 2) * np.log(np.pi) - gammaln(d / 2 + 1)
        return np.exp(np.log(k) - np.log(cloud.n_points) - log_volume - d * np.log(radius))


def densest_points(cloud: Cloud, fraction: float, *, k: int = 15) -> NDArray[np.intp]:
    r"""Indices of the ``fraction`` densest points, densest first.

    Ties in :math:`\\rho_k` are broken by the lower index (stable sort), so the
    result is deterministic. This is the core subset :math:`X(k, p)` with
    ``p = 100 * fraction``.

    References
    ----------
    .. [1] G. Carlsson, T. Ishkhanov, V. de Silva, A. Zomorodian, "On the local
       behavior of spaces of natural images", Int. J. Comput. Vision 76 (2008) 1-12.
    """
    _check_k(cloud, k, "densest_points")
    fraction = check_float(fraction, "fraction", "densest_points", low=0.0, high=1.0, low_open=True)
    radius = knn_radius(cloud, k)
    keep = max(1, int(np.ceil(fraction * cloud.n_points)))
    return np.argsort(radius, kind="stable")[:keep]
