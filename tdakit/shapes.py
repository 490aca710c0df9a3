"""Samplers of shapes with known topology, for tests, demos and calibration.

Each returns a float64 array of shape (n_points, n_dims) and takes ``rng``.
Betti numbers (over Z/2 unless stated): circle (1, 1), sphere S^2 (1, 0, 1),
torus (1, 2, 1), Klein bottle (1, 2, 1) over Z/2 and (1, 1, 0) over Z/3
(common practice).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from tdakit._validation import check_float, check_int, check_rng, fail

__all__ = ["circle", "sphere", "torus", "klein_bottle", "add_noise", "evenly_spaced_circle"]


def _n(n_points, function):
    return check_int(n_points, "n_points", function, low=1, high=10**8)


def evenly_spaced_circle(n_points: int, *, radius: float = 1.0) -> NDArray[np.float64]:
    """``n_points`` points at equal angles on a circle of the given radius (deterministic)."""
    n_points = _n(n_points, "evenly_spaced_circle")
    radius = check_float(radius, "radius", "evenly_spaced_circle", low=0.0, low_open=True)
    angles = 2 * np.pi * np.arange(n_points) / n_points
    return radius * np.column_stack((np.cos(angles), np.sin(angles)))


def circle(n_points: int, *, radius: float = 1.0, noise: float = 0.0, rng=None) -> NDArray[np.float64]:
    """Uniform points on a circle in the plane, plus isotropic Gaussian noise of s.d. ``noise``."""
    n_points = _n(n_points, "circle")
    radius = check_float(radius, "radius", "circle", low=0.0, low_open=True)
    generator = check_rng(rng, "circle")
    angles = generator.uniform(0, 2 * np.pi, n_points)
    points = radius * np.column_stack((np.cos(angles), np.sin(angles)))
    return add_noise(points, noise, rng=generator)


def sphere(n_points: int, *, dim: int = 2, radius: float = 1.0, noise: float = 0.0, rng=None) -> NDArray[np.float64]:
    """Uniform points on the ``dim``-sphere in R^(dim+1) (normalised Gaussians), plus noise."""
    n_points = _n(n_points, "sphere")
    dim = check_int(dim, "dim", "sphere", low=1, high=100)
    radius = check_float(radius, "radius", "sphere", low=0.0, low_open=True)
    generator = check_rng(rng, "sphere")
    points = generator.normal(size=(n_points, dim + 1))
    points *= radius / np.linalg.norm(points, axis=1, keepdims=True)
    return add_noise(points, noise, rng=generator)


def torus(n_points: int, *, major: float = 2.0, minor: float = 1.0, noise: float = 0.0,
          rng=None) -> NDArray[np.float64]:
    """Points on a torus of revolution in R^3, uniform in area (rejection on the tube angle)."""
    n_points = _n(n_points, "torus")
    major = check_float(major, "major", "torus", low=0.0, low_open=True)
    minor = check_float(minor, "minor", "torus", low=0.0, low_open=True, high=major, high_open=True)
    generator = check_rng(rng, "torus")
    tube = np.empty(0)
    while tube.size < n_points:  # area element is proportional to major + minor cos(tube)
        proposal = generator.uniform(0, 2 * np.pi, 2 * n_points)
        accept = generator.uniform(0, major + minor, proposal.size) < major + minor * np.cos(proposal)
        tube = np.concatenate((tube, proposal[accept]))
    tube = tube[:n_points]
    around = generator.uniform(0, 2 * np.pi, n_points)
    ring = major + minor * np.cos(tube)
    points = np.column_stack((ring * np.cos(around), ring * np.sin(around), minor * np.sin(tube)))
    return add_noise(points, noise, rng=generator)


def klein_bottle(n_points: int, *, major: float = 2.0, minor: float = 1.0, noise: float = 0.0,
                 rng=None) -> NDArray[np.float64]:
    """Points on the flat-torus embedding of the Klein bottle in R^4, uniform in parameters.

    (u, v) -> ((R + r cos v) cos u, (R + r cos v) sin u, r sin v cos(u/2), r sin v sin(u/2)).
    """
    n_points = _n(n_points, "klein_bottle")
    major = check_float(major, "major", "klein_bottle", low=0.0, low_open=True)
    minor = check_float(minor, "minor", "klein_bottle", low=0.0, low_open=True, high=major, high_open=True)
    generator = check_rng(rng, "klein_bottle")
    u, v = generator.uniform(0, 2 * np.pi, (2, n_points))
    ring = major + minor * np.cos(v)
    points = np.column_stack((ring * np.cos(u), ring * np.sin(u), minor * np.sin(v) * np.cos(u / 2),
                              minor * np.sin(v) * np.sin(u / 2)))
    return add_noise(points, noise, rng=generator)


def add_noise(points, noise: float, *, rng=None) -> NDArray[np.float64]:
    """``points`` plus isotropic Gaussian noise of standard deviation ``noise`` (a new array)."""
    noise = check_float(noise, "noise", "add_noise", low=0.0)
    generator = check_rng(rng, "add_noise")
    try:
        points = np.asarray(points, dtype=np.float64)
    except (TypeError, ValueError):
        raise fail("points", "add_noise", "an array of real coordinates", points) from None
    return points + generator.normal(scale=noise, size=points.shape) if noise > 0 else points.copy()
