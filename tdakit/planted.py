"""Clouds with a planted answer: how many features of each dimension a correct test should report.

Each generator draws a cloud and returns a :class:`PlantedCloud` with the points and the true
number of features per homology dimension (``betti``), counting the one essential component of
H0 (a connected shape has ``betti[0] == 1``). The truths are the Betti numbers of the shapes the
points are drawn from (common practice: circle (1, 1), 2-sphere (1, 0, 1), torus (1, 2, 1),
a contractible blob or cube (1, 0, 0), k well separated clumps (k, 0)).

*Nulls* plant nothing beyond their components: a test that calls a loop there calls noise.
*Signals* plant loops or cavities: a test that misses them lacks power.

The scenarios are invented for tdakit's evaluation harness (``benchmarks/significance.py``):

============================  =========  ========================  =====================
name                          kind       truth (H0, H1, H2)        coordinates
============================  =========  ========================  =====================
``uniform_cube``              null       (1, 0, 0)                 3
``gaussian_blob``             null       (1, 0, 0)                 ``n_dims`` (3)
``gaussian_clumps``           null       (n_clumps, 0, 0)          ``n_dims`` (3)
``uniform_sphere``            null in H1 (1, 0, 1)                 3
``noisy_circle``              signal     (1, 1)                    2
``two_circles``               signal     (2, 2)                    2
``torus``                     signal     (1, 2, 1)                 3
``noisy_sphere``              signal     (1, 0, 1)                 3
``loop_with_outliers``        signal     (-, 1)                    ``n_coords`` (12)
``marrowfield``               signal     (-, 4, 5), periodic box   3
============================  =========  ========================  =====================

A dash marks a dimension the scenario does not score (``PlantedCloud.evaluate_dims``): its
count depends on a convention, explained in the scenario's notes.
"""

from __future__ import annotations

import inspect
from collections.abc import Callable
from dataclasses import dataclass, field

import numpy as np
from numpy.typing import NDArray

from tdakit import scenarios, shapes
from tdakit._validation import check_choice, check_float, check_int, check_rng, fail

__all__ = [
    "PlantedCloud",
    "SCENARIOS",
    "NULL_SCENARIOS",
    "SIGNAL_SCENARIOS",
    "planted_cloud",
    "uniform_cube",
    "gaussian_blob",
    "gaussian_clumps",
    "uniform_sphere",
    "noisy_circle",
    "two_circles",
    "torus",
    "noisy_sphere",
    "loop_with_outliers",
    "marrowfield",
]

_MAX_POINTS = 10**8


@dataclass(frozen=True, eq=False)
class PlantedCloud:
    """A cloud and the number of features a correct test should find in it.

    Attributes
    ----------
    points : ndarray of shape (n_points, n_dims)
        Float64 coordinates (read-only).
    betti : dict of int to int
        True number of features per homology dimension, the essential H0 component included
        (a connected shape has ``betti[0] == 1``). Dimensions not listed are not claimed.
    name : str
        Key of the scenario in :data:`SCENARIOS`.
    description : str
        One sentence: what was drawn, and where the truth comes from.
    metric : {"euclidean", "periodic"}, default="euclidean"
        The metric the cloud must be read with (:func:`tdakit.load_cloud`).
    box : float, optional
        Side of the periodic box (``metric="periodic"`` only).
    evaluate_dims : tuple of int, optional
        The dimensions whose truth an evaluation should score; default every dimension of
        ``betti``. A scenario narrows it where part of the truth depends on a convention
        (``loop_with_outliers`` scores H1 only, ``marrowfield`` leaves out H0).
    params : dict
        The scenario's parameters, for records.
    """

    points: NDArray[np.float64] = field(repr=False)
    betti: dict[int, int]
    name: str
    description: str
    metric: str = "euclidean"
    box: float | None = None
    evaluate_dims: tuple[int, ...] | None = None
    params: dict = field(default_factory=dict)

    def __post_init__(self):
        function = "PlantedCloud"
        points = np.array(self.points, dtype=np.float64)
        if points.ndim != 2 or points.shape[0] < 1 or not np.isfinite(points).all():
            raise fail("points", function, "a finite 2-D array with at least one row", self.points)
        points.setflags(write=False)
        object.__setattr__(self, "points", points)
        if not isinstance(self.betti, dict) or not self.betti:
            raise fail("betti", function, "a non-empty dict of dimension to feature count", self.betti)
        betti = {check_int(k, "betti", function, low=0, note="dimensions as keys"):
                 check_int(v, "betti", function, low=0, note="feature counts as values") for k, v in self.betti.items()}
        object.__setattr__(self, "betti", dict(sorted(betti.items())))
        check_choice(self.metric, "metric", function, ("euclidean", "periodic"))
        if (self.metric == "periodic") != (self.box is not None):
            raise fail("box", function, "a positive side length exactly when metric='periodic'", self.box)
        if self.box is not None:
            object.__setattr__(self, "box", check_float(self.box, "box", function, low=0.0, low_open=True))
        if self.evaluate_dims is not None:
            dims = tuple(self.evaluate_dims) if isinstance(self.evaluate_dims, (list, tuple)) else None
            if not dims or any(not isinstance(k, (int, np.integer)) or int(k) not in betti for k in dims):
                raise fail("evaluate_dims", function, f"None or a non-empty tuple of dimensions of betti "
                           f"{sorted(betti)}", self.evaluate_dims)
            object.__setattr__(self, "evaluate_dims", tuple(sorted(int(k) for k in dims)))

    @property
    def n_points(self) -> int:
        """Number of points."""
        return int(self.points.shape[0])

    @property
    def n_dims(self) -> int:
        """Number of coordinates."""
        return int(self.points.shape[1])

    def truth(self, k: int) -> int:
        """The true number of features in homology dimension ``k`` (H0 counts the essential one)."""
        k = check_int(k, "k", "PlantedCloud.truth", low=0, high=max(self.betti),
                      note=f"a dimension of betti {sorted(self.betti)}")
        if k not in self.betti:
            raise fail("k", "PlantedCloud.truth", f"a dimension of betti {sorted(self.betti)}", k)
        return self.betti[k]

    def scored_dims(self, max_dim: int) -> tuple[int, ...]:
        """Dimensions to score for diagrams computed up to ``max_dim``: claimed, evaluable and at most max_dim."""
        max_dim = check_int(max_dim, "max_dim", "PlantedCloud.scored_dims", low=0, high=8)
        dims = self.evaluate_dims if self.evaluate_dims is not None else tuple(self.betti)
        return tuple(k for k in dims if k <= max_dim)

    def to_cloud(self):
        """The points as a :class:`tdakit.Cloud`, read with the scenario's metric."""
        from tdakit.io import load_cloud

        return load_cloud(np.array(self.points), metric=self.metric, box=self.box)


def _count(n_points, function: str, low: int = 10) -> int:
    return check_int(n_points, "n_points", function, low=low, high=_MAX_POINTS)


def _noise(noise, function: str) -> float:
    return check_float(noise, "noise", function, low=0.0)


def _positive(value, name: str, function: str) -> float:
    return check_float(value, name, function, low=0.0, low_open=True)


# -- nulls --------------------------------------------------------------------------------------------
def uniform_cube(n_points: int, *, side: float = 1.0, rng=None) -> PlantedCloud:
    """Uniform points in a solid cube: a null with truth (1, 0, 0).

    Parameters
    ----------
    n_points : int
        At least 10.
    side : float, default=1.0
        Side length of the cube ``[0, side]^3``.
    rng : int, Generator or None

    Returns
    -------
    PlantedCloud
        Betti ``{0: 1, 1: 0, 2: 0}``: the cube is contractible, so any loop or cavity called
        significant is noise (common practice).
    """
    n_points = _count(n_points, "uniform_cube")
    side = _positive(side, "side", "uniform_cube")
    generator = check_rng(rng, "uniform_cube")
    points = generator.uniform(0.0, side, (n_points, 3))
    return PlantedCloud(points, {0: 1, 1: 0, 2: 0}, "uniform_cube",
                        f"{n_points} uniform points in a cube of side {side:g}; contractible, truth (1, 0, 0).",
                        params={"side": side})


def gaussian_blob(n_points: int, *, n_dims: int = 3, scale: float = 1.0, rng=None) -> PlantedCloud:
    """Isotropic Gaussian points: a null with one component and nothing else.

    Parameters
    ----------
    n_points : int
        At least 10.
    n_dims : int, default=3
        Coordinates, 1 to 100.
    scale : float, default=1.0
        Standard deviation per coordinate.
    rng : int, Generator or None

    Returns
    -------
    PlantedCloud
        Betti ``{0: 1, 1: 0}`` and ``2: 0`` with three or more coordinates: the support is all of
        R^n_dims, contractible (common practice). Sparse tail points are the usual source of
        false components.
    """
    n_points = _count(n_points, "gaussian_blob")
    n_dims = check_int(n_dims, "n_dims", "gaussian_blob", low=1, high=100)
    scale = _positive(scale, "scale", "gaussian_blob")
    generator = check_rng(rng, "gaussian_blob")
    points = generator.normal(scale=scale, size=(n_points, n_dims))
    betti = {k: int(k == 0) for k in range(max(2, min(n_dims, 3)))}
    return PlantedCloud(points, betti, "gaussian_blob",
                        f"{n_points} Gaussian points in R^{n_dims} (s.d. {scale:g}); contractible, one component.",
                        params={"n_dims": n_dims, "scale": scale})


def gaussian_clumps(n_points: int, *, n_clumps: int = 5, n_dims: int = 3, separation: float = 20.0,
                    scale: float = 1.0, rng=None) -> PlantedCloud:
    """Well separated Gaussian clumps: a null for loops with ``n_clumps`` true components.

    The centres lie on a line, ``separation`` apart. A line of centres plants no loop: a Rips
    complex of collinear points has no H1, whereas a square of centres would plant an H1
    class of persistence (sqrt(2) - 1) x spacing, which a test would rightly call real.

    Parameters
    ----------
    n_points : int
        At least 10 and at least 3 per clump; split as evenly as possible.
    n_clumps : int, default=5
        Number of clumps, 1 to 1000.
    n_dims : int, default=3
        Coordinates, 1 to 100.
    separation : float, default=20.0
        Distance between neighbouring centres; at least 10 x ``scale``, so the gaps between
        clumps stay far above the gaps among a clump's sparse tail points.
    scale : float, default=1.0
        Standard deviation of each clump per coordinate.
    rng : int, Generator or None

    Returns
    -------
    PlantedCloud
        Betti ``{0: n_clumps, 1: 0}`` (and ``2: 0`` with three or more coordinates): each clump is
        contractible and they are disjoint at the scales of their own points (common practice).
        Rips H0 then shows ``n_clumps - 1`` finite deaths near the gaps, far above the rest.
    """
    function = "gaussian_clumps"
    n_clumps = check_int(n_clumps, "n_clumps", function, low=1, high=1000)
    n_points = _count(n_points, function, low=max(10, 3 * n_clumps))
    n_dims = check_int(n_dims, "n_dims", function, low=1, high=100)
    scale = _positive(scale, "scale", function)
    separation = check_float(separation, "separation", function, low=10.0 * scale,
                             note="at least 10 x scale, for well separated clumps")
    generator = check_rng(rng, function)
    labels = np.arange(n_points) % n_clumps
    centres = np.zeros((n_clumps, n_dims))
    centres[:, 0] = separation * np.arange(n_clumps)
    points = centres[labels] + generator.normal(scale=scale, size=(n_points, n_dims))
    betti = {k: (n_clumps if k == 0 else 0) for k in range(max(2, min(n_dims, 3)))}
    return PlantedCloud(points[generator.permutation(n_points)], betti, function,
                        f"{n_clumps} Gaussian clumps (s.d. {scale:g}) of {n_points} points in R^{n_dims}, centres on "
                        f"a line {separation:g} apart; {n_clumps} components, no loop.",
                        params={"n_clumps": n_clumps, "n_dims": n_dims, "separation": separation, "scale": scale})


def uniform_sphere(n_points: int, *, radius: float = 1.0, rng=None) -> PlantedCloud:
    """Uniform points on the 2-sphere's surface: a null for loops, with one cavity.

    Parameters
    ----------
    n_points : int
        At least 10.
    radius : float, default=1.0
    rng : int, Generator or None

    Returns
    -------
    PlantedCloud
        Betti ``{0: 1, 1: 0, 2: 1}`` (common practice). The small holes between landmarks on a
        surface are the classic false loops, so this is the null for H1 on surfaces.

    See Also
    --------
    noisy_sphere : the same shape with noise, scored as a signal in H2.
    """
    n_points = _count(n_points, "uniform_sphere")
    radius = _positive(radius, "radius", "uniform_sphere")
    points = shapes.sphere(n_points, radius=radius, rng=check_rng(rng, "uniform_sphere"))
    return PlantedCloud(points, {0: 1, 1: 0, 2: 1}, "uniform_sphere",
                        f"{n_points} uniform points on the 2-sphere of radius {radius:g}; truth (1, 0, 1).",
                        params={"radius": radius})


# -- signals ------------------------------------------------------------------------------------------
def noisy_circle(n_points: int, *, noise: float = 0.05, radius: float = 1.0, rng=None) -> PlantedCloud:
    """Uniform points on a circle plus Gaussian noise: one loop.

    Parameters
    ----------
    n_points : int
        At least 10.
    noise : float, default=0.05
        Standard deviation of isotropic Gaussian noise (absolute units).
    radius : float, default=1.0
    rng : int, Generator or None

    Returns
    -------
    PlantedCloud
        Betti ``{0: 1, 1: 1}`` (common practice). The planted loop's Rips bar is near
        (0, sqrt(3) radius) for a dense sample; noise shortens it, and at noise near the
        radius it is gone while the truth still claims it.
    """
    n_points = _count(n_points, "noisy_circle")
    noise = _noise(noise, "noisy_circle")
    radius = _positive(radius, "radius", "noisy_circle")
    points = shapes.circle(n_points, radius=radius, noise=noise, rng=check_rng(rng, "noisy_circle"))
    return PlantedCloud(points, {0: 1, 1: 1}, "noisy_circle",
                        f"{n_points} points on a circle of radius {radius:g} with Gaussian noise s.d. {noise:g}; "
                        "one loop.", params={"noise": noise, "radius": radius})


def two_circles(n_points: int, *, noise: float = 0.05, gap: float = 3.0, rng=None) -> PlantedCloud:
    """Two disjoint unit circles side by side in the plane: two components, two loops.

    Parameters
    ----------
    n_points : int
        At least 10; the first circle takes the odd point.
    noise : float, default=0.05
        Gaussian noise s.d.
    gap : float, default=3.0
        Distance between the circles (centres ``2 + gap`` apart). With the default the circles
        join (near ``gap``) only after both loops have filled (near sqrt(3)) in a Rips filtration.
    rng : int, Generator or None

    Returns
    -------
    PlantedCloud
        Betti ``{0: 2, 1: 2}`` (common practice).
    """
    n_points = _count(n_points, "two_circles")
    noise = _noise(noise, "two_circles")
    gap = _positive(gap, "gap", "two_circles")
    generator = check_rng(rng, "two_circles")
    first = shapes.circle(n_points - n_points // 2, noise=noise, rng=generator)
    second = shapes.circle(n_points // 2, noise=noise, rng=generator) + np.array([2.0 + gap, 0.0])
    points = np.vstack((first, second))[generator.permutation(n_points)]
    return PlantedCloud(points, {0: 2, 1: 2}, "two_circles",
                        f"{n_points} points on two unit circles {gap:g} apart, Gaussian noise s.d. {noise:g}; two "
                        "components, two loops.", params={"noise": noise, "gap": gap})


def torus(n_points: int, *, noise: float = 0.05, major: float = 2.0, minor: float = 1.0, rng=None) -> PlantedCloud:
    """Points uniform in area on a torus of revolution in R^3, plus noise.

    Parameters
    ----------
    n_points : int
        At least 10.
    noise : float, default=0.05
    major, minor : float, default=2.0, 1.0
        Radii of the core circle and of the tube (``minor < major``).
    rng : int, Generator or None

    Returns
    -------
    PlantedCloud
        Betti ``{0: 1, 1: 2, 2: 1}`` (common practice): the loop around the tube, the loop
        around the hole, and the enclosed cavity.
    """
    n_points = _count(n_points, "torus")
    noise = _noise(noise, "torus")
    major = _positive(major, "major", "torus")
    minor = check_float(minor, "minor", "torus", low=0.0, high=major, low_open=True, high_open=True,
                        note="below major")
    points = shapes.torus(n_points, major=major, minor=minor, noise=noise, rng=check_rng(rng, "torus"))
    return PlantedCloud(points, {0: 1, 1: 2, 2: 1}, "torus",
                        f"{n_points} points on a torus (radii {major:g}, {minor:g}) with noise s.d. {noise:g}; truth "
                        "(1, 2, 1).", params={"noise": noise, "major": major, "minor": minor})


def noisy_sphere(n_points: int, *, noise: float = 0.05, radius: float = 1.0, rng=None) -> PlantedCloud:
    """Uniform points on the 2-sphere plus Gaussian noise: a cavity to find, no loop.

    Parameters
    ----------
    n_points : int
        At least 10.
    noise : float, default=0.05
    radius : float, default=1.0
    rng : int, Generator or None

    Returns
    -------
    PlantedCloud
        Betti ``{0: 1, 1: 0, 2: 1}`` (common practice).

    See Also
    --------
    uniform_sphere : the noiseless null for loops on a surface.
    """
    n_points = _count(n_points, "noisy_sphere")
    noise = _noise(noise, "noisy_sphere")
    radius = _positive(radius, "radius", "noisy_sphere")
    points = shapes.sphere(n_points, radius=radius, noise=noise, rng=check_rng(rng, "noisy_sphere"))
    return PlantedCloud(points, {0: 1, 1: 0, 2: 1}, "noisy_sphere",
                        f"{n_points} points on the 2-sphere of radius {radius:g} with noise s.d. {noise:g}; truth "
                        "(1, 0, 1).", params={"noise": noise, "radius": radius})


def loop_with_outliers(n_points: int, *, n_coords: int = 12, noise: float = 0.08, outlier_fraction: float = 0.03,
                       rng=None) -> PlantedCloud:
    """A closed loop in many coordinates, with uniform outliers in its bounding box.

    The readings of :func:`tdakit.scenarios.tidewater_readings`: coordinate j is
    ``cos(phase - 2 pi j / n_coords) * gain_j + offset_j`` plus Gaussian noise, and each point is
    replaced, with probability ``outlier_fraction``, by a uniform draw in the bounding box.

    Parameters
    ----------
    n_points : int
        At least 10.
    n_coords : int, default=12
        Coordinates, 2 to 1000.
    noise : float, default=0.08
    outlier_fraction : float, default=0.03
        Expected share of outliers, in [0, 0.5].
    rng : int, Generator or None

    Returns
    -------
    PlantedCloud
        Betti ``{0: 1, 1: 1}``, the topology of the loop; ``evaluate_dims=(1,)`` when there are
        outliers.

    Notes
    -----
    The truth describes the loop, not the contamination. Each outlier in a 12-coordinate box
    is far from every other point, so it stays a component of its own over most scales and a
    test may rightly call it one; and taken literally the sampling distribution's support is
    the whole box, which has no loop at all. Neither reading is the question the scenario asks
    (is the loop found despite the outliers, and is nothing else called a loop?), so the
    truth's H0 is the loop's single component and an evaluation should score H1 only, which
    ``evaluate_dims`` says. Without outliers every dimension is scored.
    """
    function = "loop_with_outliers"
    n_points = _count(n_points, function)
    n_coords = check_int(n_coords, "n_coords", function, low=2, high=1000)
    noise = _noise(noise, function)
    outlier_fraction = check_float(outlier_fraction, "outlier_fraction", function, low=0.0, high=0.5)
    points, is_outlier = scenarios.tidewater_readings(n_points, n_channels=n_coords, noise=noise,
                                                      outlier_fraction=outlier_fraction, rng=check_rng(rng, function))
    return PlantedCloud(points, {0: 1, 1: 1}, function,
                        f"{n_points} points on a loop in R^{n_coords} (noise s.d. {noise:g}) of which "
                        f"{int(is_outlier.sum())} are uniform outliers in the bounding box; one loop (H1 scored).",
                        evaluate_dims=(1,) if outlier_fraction > 0 else None,
                        params={"n_coords": n_coords, "noise": noise, "outlier_fraction": outlier_fraction})


def marrowfield(n_points: int, *, rng=None) -> PlantedCloud:
    """The Marrowfield demo catalogue (periodic box of side 100), redrawn with ``rng``.

    See :func:`tdakit.scenarios.marrowfield_halos`: a uniform background with two spherical
    voids, six filaments joining six nodes on a ring, and clusters at the nodes.

    Parameters
    ----------
    n_points : int
        At least 100.
    rng : int, Generator or None

    Returns
    -------
    PlantedCloud
        ``metric="periodic"``, ``box=100``, Betti ``{0: 1, 1: 4, 2: 5, 3: 1}`` and
        ``evaluate_dims=(1, 2, 3)``.

    Notes
    -----
    The periodic box is a 3-torus, with Betti numbers (1, 3, 3, 1) (common practice). With
    landmarks that span the box (maxmin over all points: the background fills the box) its
    three loops and three 2-cycles are features of the data like the planted ones, so the truth
    adds them: H1 = 1 ring + 3 box loops = 4; H2 = 2 voids + 3 box cycles = 5; H3 = 1. With
    landmarks only from the dense core (ring, nodes) the box cycles need not appear and the
    truth of interest is the ring alone (H1 = 1); evaluate that setting separately. Rips on
    landmarks over the whole box sees the ring only faintly (the background fills it in), so
    low power in H1 here is a finding, not a fault of the truth. Filtrations on this box
    should stop at half the side (``max_scale=50``), where the box loops have died.

    H0 is not scored: the six node clusters are compact, dense clumps, so filtrations that
    follow the density (kernel density, distance to measure) rightly see each as a component
    over a range of levels, while Rips on landmarks spread over the box does not. The count
    of components thus depends on the filtration, the loops and cavities do not.
    """
    n_points = _count(n_points, "marrowfield", low=100)
    positions, _ = scenarios.marrowfield_halos(n_points, rng=check_rng(rng, "marrowfield"))
    box = float(scenarios.MARROWFIELD_BOX)
    return PlantedCloud(positions, {0: 1, 1: 4, 2: 5, 3: 1}, "marrowfield",
                        f"{n_points} mock halos in a periodic box of side {box:g}: two voids, a ring of filaments; "
                        "truth includes the box's three loops (H1 4) and 2-cycles (H2 5).",
                        metric="periodic", box=box, evaluate_dims=(1, 2, 3), params={})


SCENARIOS: dict[str, Callable[..., PlantedCloud]] = {
    "uniform_cube": uniform_cube,
    "gaussian_blob": gaussian_blob,
    "gaussian_clumps": gaussian_clumps,
    "uniform_sphere": uniform_sphere,
    "noisy_circle": noisy_circle,
    "two_circles": two_circles,
    "torus": torus,
    "noisy_sphere": noisy_sphere,
    "loop_with_outliers": loop_with_outliers,
    "marrowfield": marrowfield,
}
NULL_SCENARIOS = ("uniform_cube", "gaussian_blob", "gaussian_clumps", "uniform_sphere")
SIGNAL_SCENARIOS = ("noisy_circle", "two_circles", "torus", "noisy_sphere", "loop_with_outliers", "marrowfield")


def planted_cloud(name: str, n_points: int, *, rng=None, **params) -> PlantedCloud:
    """Draw the scenario ``name`` of :data:`SCENARIOS` with its own parameters.

    Parameters
    ----------
    name : str
        A key of :data:`SCENARIOS`.
    n_points : int
    rng : int, Generator or None
    **params
        Keyword parameters of that scenario (``noise=0.1``, ``n_clumps=3``, ...).

    Returns
    -------
    PlantedCloud

    Raises
    ------
    InvalidParameterError
        For an unknown name or a parameter the scenario does not take, naming it and listing
        the accepted ones.

    Examples
    --------
    >>> cloud = planted_cloud("noisy_circle", 200, rng=0, noise=0.1)
    >>> cloud.points.shape, cloud.betti
    ((200, 2), {0: 1, 1: 1})
    """
    name = check_choice(name, "name", "planted_cloud", SCENARIOS)
    generator = SCENARIOS[name]
    accepted = sorted(p.name for p in inspect.signature(generator).parameters.values()
                      if p.kind is inspect.Parameter.KEYWORD_ONLY and p.name != "rng")
    for key in sorted(params):
        if key not in accepted:
            raise fail(key, "planted_cloud", f"a parameter of scenario {name!r}, one of {accepted} (unknown key)",
                       params[key])
    return generator(n_points, rng=rng, **params)
