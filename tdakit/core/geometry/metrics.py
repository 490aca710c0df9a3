"""The distances a cloud can carry, and how each maps onto a space where trees work.

Every metric except ``"precomputed"`` is evaluated through a *working space*:
the coordinates are first embedded (sky positions become unit vectors,
cosine vectors are normalised), distances are measured there with a Minkowski
norm (with minimum-image wrapping in a periodic box), and a monotone map turns
working distances into the metric's own units. Because the map is monotone,
nearest neighbours, farthest points and the order of edges are the same in
both spaces, so KD-trees and maxmin run in the working space unchanged.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import NDArray

from tdakit._validation import check_choice, check_float, fail

__all__ = ["Metric", "METRICS", "make_metric"]

METRICS = (
    "euclidean",
    "manhattan",
    "chebyshev",
    "minkowski",
    "periodic",
    "angular",
    "cosine",
    "precomputed",
)

_UNITS = {
    "euclidean": "length (Euclidean)",
    "manhattan": "length (Manhattan, L1)",
    "chebyshev": "length (Chebyshev, L-infinity)",
    "minkowski": "length (Minkowski)",
    "periodic": "length (Euclidean, minimum image in a periodic box)",
    "angular": "angle on the sky (degrees of great circle)",
    "cosine": "cosine dissimilarity (1 - cos; not a metric)",
    "precomputed": "given distance",
}


@dataclass(frozen=True)
class Metric:
    """How distances between the points of a cloud are measured.

    Parameters
    ----------
    name : str
        One of ``METRICS``.
    p : float, default=2.0
        Order of the Minkowski norm in the working space.
    box : tuple of float or None
        Side lengths of the periodic box (``name="periodic"`` only).
    """

    name: str = "euclidean"
    p: float = 2.0
    box: tuple[float, ...] | None = None

    @property
    def units(self) -> str:
        """Plain-words unit of every distance and filtration value under this metric."""
        if self.name == "minkowski":
            return f"length (Minkowski, p={self.p:g})"
        return _UNITS[self.name]

    @property
    def is_metric(self) -> bool:
        """False for the cosine dissimilarity, which breaks the triangle inequality."""
        return self.name != "cosine"

    def to_dict(self) -> dict:
        return {"name": self.name, "p": self.p, "box": None if self.box is None else list(self.box)}

    @classmethod
    def from_dict(cls, data: dict) -> Metric:
        box = data.get("box")
        return make_metric(data["name"], p=data.get("p", 2.0), box=box)

    # -- working space -------------------------------------------------------------
    def embed(self, points: NDArray[np.float64]) -> NDArray[np.float64]:
        """Working coordinates of validated ``points`` (a new C-contiguous float64 array)."""
        if self.name == "angular":
            lon, lat = np.radians(points[:, 0]), np.radians(points[:, 1])
            return np.column_stack((np.cos(lat) * np.cos(lon), np.cos(lat) * np.sin(lon), np.sin(lat)))
        if self.name == "cosine":
            return np.ascontiguousarray(points / np.linalg.norm(points, axis=1, keepdims=True))
        if self.name == "periodic":
            box = np.asarray(self.box)
            return np.ascontiguousarray(np.where(points >= box, points - box, points))
        return np.ascontiguousarray(points, dtype=np.float64)

    def to_metric(self, working: NDArray[np.float64] | float) -> NDArray[np.float64]:
        """Map working-space distances to this metric's units (monotone increasing)."""
        working = np.asarray(working, dtype=np.float64)
        if self.name == "angular":
            return np.degrees(2.0 * np.arcsin(np.clip(working / 2.0, 0.0, 1.0)))
        if self.name == "cosine":
            return working * working / 2.0
        return working

    def working_boxsize(self) -> NDArray[np.float64] | None:
        return None if self.box is None else np.asarray(self.box, dtype=np.float64)

    def working_pairwise(self, a: NDArray[np.float64], b: NDArray[np.float64]) -> NDArray[np.float64]:
        """Working-space distances between the rows of ``a`` and of ``b`` (shape (len(a), len(b)))."""
        if self.name == "periodic":
            box = np.asarray(self.box)
            total = np.zeros((a.shape[0], b.shape[0]))
            for axis in range(a.shape[1]):
                diff = np.abs(a[:, axis, None] - b[None, :, axis])
                total += np.minimum(diff, box[axis] - diff) ** 2
            return np.sqrt(total)
        from scipy.spatial.distance import cdist

        if self.p == 2.0:
            return cdist(a, b, "euclidean")
        if self.p == 1.0:
            return cdist(a, b, "cityblock")
        if np.isinf(self.p):
            return cdist(a, b, "chebyshev")
        return cdist(a, b, "minkowski", p=self.p)

    def working_to_point(self, a: NDArray[np.float64], x: NDArray[np.float64]) -> NDArray[np.float64]:
        """Working-space distances from every row of ``a`` to the single point ``x``.

        Terms are added in coordinate order, so every value is bit-identical to the compiled
        landmark kernels' (exact ties then break the same way everywhere).
        """
        if np.isinf(self.p) and self.name != "periodic":
            return np.abs(a - x).max(axis=1)
        total = np.zeros(a.shape[0])
        for axis in range(a.shape[1]):
            gap = np.abs(a[:, axis] - x[axis])
            if self.name == "periodic":
                gap = np.minimum(gap, self.box[axis] - gap)
            if self.p == 2.0:
                total += gap * gap
            elif self.p == 1.0:
                total += gap
            else:
                total += gap**self.p
        if self.p == 2.0:
            return np.sqrt(total)
        return total if self.p == 1.0 else total ** (1.0 / self.p)


def make_metric(name: str = "euclidean", *, p: float | None = None, box=None, function: str = "load_cloud") -> Metric:
    """Validate a metric specification and return the :class:`Metric`.

    Parameters
    ----------
    name : str, default="euclidean"
        One of ``METRICS``.
    p : float, optional
        Order of the norm for ``"minkowski"`` (``>= 1``; below 1 it is not a metric).
    box : float or sequence of float, optional
        Periodic box side length(s) for ``"periodic"``.
    function : str
        Name of the public function, used in error messages.
    """
    name = check_choice(name, "metric", function, METRICS)
    fixed_p = {"manhattan": 1.0, "chebyshev": np.inf}
    if name == "minkowski":
        order = check_float(2.0 if p is None else p, "p", function, low=1.0, allow_inf=True,
                            note="the Minkowski order; below 1 it is not a metric")
    else:
        if p is not None:
            raise fail("p", function, "None unless metric='minkowski'", p)
        order = fixed_p.get(name, 2.0)
    if name != "periodic":
        if box is not None:
            raise fail("box", function, "None unless metric='periodic'", box)
        return Metric(name=name, p=order, box=None)
    return Metric(name=name, p=order, box=_check_box(box, function))


def _check_box(box, function: str) -> tuple[float, ...]:
    if box is None:
        raise fail("box", function, "the side length(s) of the periodic box when metric='periodic'", box)
    values = np.atleast_1d(np.asarray(box, dtype=object))
    if values.ndim != 1 or values.size == 0:
        raise fail("box", function, "a positive number or a 1-D sequence of positive numbers", box)
    sides = tuple(check_float(v, "box", function, low=0.0, low_open=True, high=1e150) for v in values)
    return sides
