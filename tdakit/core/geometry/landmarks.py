"""Choosing landmarks: maxmin, uniform, density-weighted and density-filtered maxmin."""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from tdakit._validation import check_choice, check_float, check_int, check_rng, fail
from tdakit.core.geometry import _geometry
from tdakit.core.geometry._maxmin import compiled_maxmin
from tdakit.core.geometry.cloud import Cloud, first_occurrences
from tdakit.core.geometry.density import densest_points, knn_radius
from tdakit.errors import InvalidDataError, InvalidParameterError

__all__ = ["Landmarks", "select_landmarks", "LANDMARK_METHODS", "landmarks_from_indices"]

LANDMARK_METHODS = ("core_maxmin", "density", "maxmin", "random")
_FN = "select_landmarks"


@dataclass(frozen=True, eq=False)
class Landmarks:
    r"""A chosen subset of a cloud and how well it covers the cloud.

    Attributes
    ----------
    indices : ndarray of int
        Cloud indices of the landmarks, in selection order.
    coverage_radius : float
        :math:`\\varepsilon = \\max_x d(x, L)`, the Hausdorff distance from the
        cloud to the landmarks, in the metric's units.
    nearest : ndarray of int, shape (n_points,)
        For every cloud point, the position (in ``indices``) of its nearest landmark.
    distance_to_nearest : ndarray of float, shape (n_points,)
        The distance from every cloud point to its nearest landmark.
    method : str
        The selection method.
    params : dict
        The options used (start, density power, neighbours, kept fraction, seed).
    """

    indices: NDArray[np.intp]
    coverage_radius: float
    nearest: NDArray[np.intp] = field(repr=False)
    distance_to_nearest: NDArray[np.float64] = field(repr=False)
    method: str = "given"
    params: dict = field(default_factory=dict)

    @property
    def n_landmarks(self) -> int:
        return int(self.indices.size)

    @property
    def witnesses_per_landmark(self) -> float:
        return self.nearest.size / self.indices.size

    def __repr__(self) -> str:
        return (f"Landmarks(n_landmarks={self.n_landmarks}, method={self.method!r}, "
                f"coverage_radius={self.coverage_radius:.6g})")


def select_landmarks(
    cloud: Cloud,
    n_landmarks: int,
    *,
    method: str = "maxmin",
    rng: int | np.random.Generator | None = None,
    start: int | None = None,
    density_power: float = 1.0,
    density_neighbors: int | None = None,
    keep_fraction: float = 0.9,
) -> Landmarks:
    r"""Choose ``n_landmarks`` points of the cloud to build complexes on.

    Parameters
    ----------
    cloud : Cloud
        The cloud; every distance uses its metric.
    n_landmarks : int
        How many landmarks, at most the number of distinct points.
    method : {"maxmin", "random", "density", "core_maxmin"}, default="maxmin"
        ``"maxmin"``: sequential farthest point; each new landmark is the point
        farthest from those chosen, ties to the lowest index.
        ``"random"``: uniform without replacement among the distinct points (one
        representative of every repeated point, its first row, so no point is chosen twice).
        ``"density"``: without replacement among the distinct points, with probability proportional to
        (kNN density)**``density_power`` (a tdakit design choice with no published
        source: ``density_power < 0`` evens out coverage, ``> 0`` favours dense regions).
        ``"core_maxmin"``: maxmin on the ``keep_fraction`` densest points, so that
        outliers, which maxmin picks first, are left out.
    rng : int, Generator or None
        Randomness for the start point and the random methods.
    start : int, optional
        Cloud index of the first maxmin landmark; drawn from ``rng`` when omitted
        (from the kept points for ``"core_maxmin"``).
    density_power : float, default=1.0
        Exponent of the density weight (``"density"`` only).
    density_neighbors : int, optional
        k of the kNN density (``"density"``, ``"core_maxmin"``); default
        ``min(15, n_points - 1)``.
    keep_fraction : float, default=0.9
        Fraction of densest points kept by ``"core_maxmin"``.

    Returns
    -------
    Landmarks

    Notes
    -----
    Maxmin gives landmarks pairwise at least :math:`\\varepsilon` apart and a
    covering radius within a factor 2 of the optimal k-centre [2]_. For any
    :math:`L \\subset X`, :math:`d_B(\\mathrm{Dgm\\,Rips}(X), \\mathrm{Dgm\\,Rips}(L)) \\le 2\\varepsilon`
    in gudhi's edge-length convention [3]_.

    References
    ----------
    .. [1] V. de Silva, G. Carlsson, "Topological estimation using witness complexes",
       Eurographics Symposium on Point-Based Graphics (2004).
    .. [2] T. F. Gonzalez, "Clustering to minimize the maximum intercluster distance",
       Theoret. Comput. Sci. 38 (1985) 293-306.
    .. [3] F. Chazal, V. de Silva, S. Oudot, "Persistence stability for geometric
       complexes", Geom. Dedicata 173 (2014) 193-214.
    """
    if not isinstance(cloud, Cloud):
        raise fail("cloud", _FN, "a Cloud from tdakit.load_cloud", cloud)
    method = check_choice(method, "method", _FN, LANDMARK_METHODS)
    n_landmarks = check_int(n_landmarks, "n_landmarks", _FN, low=1, high=cloud.n_points,
                            note="at most the number of points")
    _check_distinct(cloud, n_landmarks)
    generator = check_rng(rng, _FN)
    if start is not None:
        start = check_int(start, "start", _FN, low=0, high=cloud.n_points - 1, note="a point index")
    params = {"start": start, "seed": _seed_of(rng)}
    if density_neighbors is None:
        density_neighbors = min(15, cloud.n_points - 1)
    if method == "maxmin":
        indices, cover = _maxmin(cloud, n_landmarks, None, start, generator)
        if cover is not None:  # the compiled kernel already knows every point's nearest landmark
            return _wrap(indices, cover[0], _geometry.to_metric(cloud, cover[1]), method, params)
    elif method == "random":
        candidates = distinct_points(cloud)
        indices = np.sort(candidates[generator.choice(candidates.size, size=n_landmarks, replace=False)])
    elif method == "density":
        indices = _density_sample(cloud, n_landmarks, density_power, density_neighbors, generator, params)
    else:
        indices = _core_maxmin(cloud, n_landmarks, keep_fraction, density_neighbors, start, generator, params)
    return landmarks_from_indices(cloud, indices, method=method, params=params)


def landmarks_from_indices(cloud: Cloud, indices, *, method: str = "given", params: dict | None = None) -> Landmarks:
    """Wrap given cloud indices as :class:`Landmarks`, computing coverage and nearest landmarks."""
    if not isinstance(cloud, Cloud):
        raise fail("cloud", "landmarks_from_indices", "a Cloud from tdakit.load_cloud", cloud)
    try:
        indices = np.asarray(indices)
    except ValueError:  # ragged nested lists
        raise fail("landmarks", "landmarks_from_indices", "a non-empty 1-D array of point indices", indices) from None
    if indices.ndim != 1 or indices.size == 0 or indices.dtype.kind not in "iu":
        raise fail("landmarks", "landmarks_from_indices", "a non-empty 1-D array of point indices", indices)
    if indices.min() < 0 or indices.max() >= cloud.n_points:
        raise fail("landmarks", "landmarks_from_indices", f"indices in [0, {cloud.n_points - 1}]", indices)
    if np.unique(indices).size != indices.size:
        raise fail("landmarks", "landmarks_from_indices", "indices without repeats", indices)
    indices = indices.astype(np.intp)
    nearest, dist = _geometry.nearest_among(cloud, indices)
    dist[indices] = 0.0
    nearest[indices] = np.arange(indices.size)
    return _wrap(indices, nearest, dist, method, params)


def _wrap(indices, nearest, dist, method, params) -> Landmarks:
    for array in (indices, nearest, dist):
        array.setflags(write=False)
    return Landmarks(indices, float(dist.max()), nearest, dist, method, dict(params or {}))


def _seed_of(rng) -> int | None:
    return int(rng) if isinstance(rng, (int, np.integer)) and not isinstance(rng, bool) else None


def distinct_points(cloud: Cloud) -> NDArray[np.intp]:
    """Indices of one representative (the first row) of every distinct point of the cloud."""
    if cloud.n_duplicates == 0:
        return np.arange(cloud.n_points, dtype=np.intp)
    if cloud.distance_matrix is not None:
        return np.flatnonzero(~np.triu(cloud.distance_matrix == 0.0, k=1).any(axis=0)).astype(np.intp)
    return first_occurrences(cloud.points, cloud.metric)


def _check_distinct(cloud: Cloud, n_landmarks: int) -> None:
    if n_landmarks > cloud.n_distinct:
        raise InvalidParameterError(
            f"The 'n_landmarks' parameter of {_FN} must be at most the number of distinct points, "
            f"{cloud.n_distinct} (the cloud has {cloud.n_points} points, {cloud.n_duplicates} of them "
            f"repeats). Got {n_landmarks} instead.", parameter="n_landmarks")


def _maxmin(cloud, n_landmarks, rows, start, generator):
    """Sequential farthest-point selection among ``rows`` (every point when None).

    Returns the cloud indices, and (nearest, working distance) for every row when the compiled
    kernel ran (None otherwise).
    """
    first = start
    if start is None:
        pick = int(generator.integers(cloud.n_points if rows is None else rows.size))
        first = pick if rows is None else int(rows[pick])
    compiled = compiled_maxmin(cloud, n_landmarks, rows, first)
    if compiled is None and rows is None:
        rows = np.arange(cloud.n_points)
    # Without numba, or for a given matrix (which need not obey the triangle inequality): stream.
    chosen = reference_maxmin(cloud, n_landmarks, rows, first) if compiled is None else compiled[0].tolist()
    if len(chosen) < n_landmarks:
        raise InvalidParameterError(
            f"The 'n_landmarks' parameter of {_FN} must be at most the number of distinct points among "
            f"the candidates, {len(chosen)}. Got {n_landmarks} instead.", parameter="n_landmarks")
    cover = None if compiled is None else (compiled[1].astype(np.intp, copy=False), compiled[2])
    return np.asarray(chosen, dtype=np.intp), cover


def reference_maxmin(cloud, n_landmarks, rows, first) -> list[int]:
    """The plain maxmin loop: stream every candidate once per landmark (stops at the distinct points)."""
    nearest_dist = np.full(rows.size, np.inf)
    chosen = [first]
    for _ in range(1, n_landmarks):
        np.minimum(nearest_dist, _geometry.working_to_point(cloud, chosen[-1], rows), out=nearest_dist)
        best = int(np.argmax(nearest_dist))
        if nearest_dist[best] == 0.0:
            break
        chosen.append(int(rows[best]))
    return chosen


def _positive_radius(cloud, k):
    radius = knn_radius(cloud, k)
    positive = radius[radius > 0]
    if positive.size == 0:
        raise InvalidDataError(f"Every point has {k} exact copies, so kNN densities are undefined; "
                               f"reduce 'density_neighbors' or remove repeats.", parameter="density_neighbors")
    return np.maximum(radius, positive.min())


def _density_sample(cloud, n_landmarks, power, neighbors, generator, params) -> NDArray[np.intp]:
    power = check_float(power, "density_power", _FN, low=-10.0, high=10.0)
    neighbors = check_int(neighbors, "density_neighbors", _FN, low=1, high=cloud.n_points - 1)
    params.update(density_power=power, density_neighbors=neighbors)
    # Probability proportional to density**power = radius**(-power); weighted sampling without
    # replacement by exponential races (Efraimidis & Spirakis, Inf. Process. Lett. 97 (2006) 181-185).
    # Only one copy of a repeated point may be drawn: the race runs among the distinct points, each
    # weighted by its density in the whole cloud (copies count as mass there).
    candidates = distinct_points(cloud)
    log_weight = -power * np.log(_positive_radius(cloud, neighbors))[candidates]
    keys = np.log(generator.exponential(size=candidates.size)) - (log_weight - log_weight.max())
    return np.sort(candidates[np.argpartition(keys, n_landmarks - 1)[:n_landmarks]])


def _core_maxmin(cloud, n_landmarks, keep_fraction, neighbors, start, generator, params) -> NDArray[np.intp]:
    keep_fraction = check_float(keep_fraction, "keep_fraction", _FN, low=0.0, high=1.0, low_open=True)
    neighbors = check_int(neighbors, "density_neighbors", _FN, low=1, high=cloud.n_points - 1)
    params.update(keep_fraction=keep_fraction, density_neighbors=neighbors)
    core = np.sort(densest_points(cloud, keep_fraction, k=neighbors))
    if core.size < n_landmarks:
        raise fail("n_landmarks", _FN, f"at most the {core.size} kept points (keep_fraction={keep_fraction})",
                   n_landmarks)
    return _maxmin(cloud, n_landmarks, core, start, generator)[0]
