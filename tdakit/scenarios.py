"""Invented demo scenarios: clouds with planted topology that stand in for real catalogues.

* The **Marrowfield simulation** is a fictional cosmological box (side 100 length
  units, periodic) whose halo catalogue has planted empty voids and a ring of
  filaments joining dense nodes.
* The **Tidewater array** is a fictional 12-channel sensor bank on a rotating
  machine: its readings trace a noisy loop (the rotation phase) in R^12, with a
  few per cent of glitch readings.

Both are generated here with a fixed seed; ``datasets/make_demo_data.py`` writes
the bundled files. Nothing in them comes from real data.
"""

from __future__ import annotations

import numpy as np
from numpy.typing import NDArray

from tdakit._validation import check_float, check_int, check_rng

__all__ = ["marrowfield_halos", "tidewater_readings", "MARROWFIELD_BOX"]

MARROWFIELD_BOX = 100.0
# Planted voids: centres and radii (box units). Planted filament ring: six nodes on a circle.
VOID_CENTRES = np.array([[25.0, 25.0, 70.0], [70.0, 65.0, 30.0]])
VOID_RADIUS = 14.0
RING_CENTRE, RING_RADIUS = np.array([50.0, 50.0, 50.0]), 30.0


def marrowfield_halos(n_points: int = 12_000, *, rng=2026) -> tuple[NDArray[np.float64], NDArray[np.float64]]:
    """Mock halo positions in the periodic Marrowfield box, and a mock mass per halo.

    About 40% of halos are a uniform background with two spherical voids carved
    out (each an H2 feature), 45% lie along six filaments joining six nodes on a
    ring (an H1 feature), and 15% sit in compact clusters at the nodes.

    Returns
    -------
    positions : ndarray of shape (n_points, 3), in [0, 100)
    masses : ndarray of shape (n_points,), log-normal, heavier at the nodes
    """
    n_points = check_int(n_points, "n_points", "marrowfield_halos", low=100, high=10**7)
    generator = check_rng(rng, "marrowfield_halos")
    n_fil, n_node = int(0.45 * n_points), int(0.15 * n_points)
    background = _uniform_outside_voids(n_points - n_fil - n_node, generator)
    nodes = RING_CENTRE + RING_RADIUS * np.column_stack(
        (np.cos(np.arange(6) * np.pi / 3), np.sin(np.arange(6) * np.pi / 3), 0.15 * np.sin(np.arange(6) * 2.0)))
    start = generator.integers(0, 6, n_fil)
    t = generator.uniform(0, 1, (n_fil, 1))
    filaments = nodes[start] + t * (nodes[(start + 1) % 6] - nodes[start])
    filaments += generator.normal(scale=1.2, size=(n_fil, 3))
    clusters = nodes[generator.integers(0, 6, n_node)] + generator.normal(scale=1.5, size=(n_node, 3))
    positions = np.mod(np.vstack((background, filaments, clusters)), MARROWFIELD_BOX)
    masses = np.concatenate((generator.lognormal(0.0, 0.5, background.shape[0] + n_fil),
                             generator.lognormal(1.5, 0.5, n_node)))
    order = generator.permutation(n_points)
    return positions[order], masses[order]


def _uniform_outside_voids(count: int, generator) -> NDArray[np.float64]:
    kept = np.zeros((0, 3))
    while kept.shape[0] < count:
        draw = generator.uniform(0, MARROWFIELD_BOX, (2 * count, 3))
        offsets = draw[:, None, :] - VOID_CENTRES[None, :, :]
        offsets -= MARROWFIELD_BOX * np.round(offsets / MARROWFIELD_BOX)  # minimum image
        outside = (np.linalg.norm(offsets, axis=2) > VOID_RADIUS).all(axis=1)
        kept = np.vstack((kept, draw[outside]))
    return kept[:count]


def tidewater_readings(n_points: int = 4_000, *, n_channels: int = 12, noise: float = 0.08,
                       outlier_fraction: float = 0.03, rng=2026) -> tuple[NDArray[np.float64], NDArray[np.bool_]]:
    """Mock Tidewater sensor readings: a loop in R^n_channels, noise, and glitch outliers.

    Channel j reads ``cos(phase - 2 pi j / n_channels) * gain_j + offset_j``, so
    the readings trace an ellipse-like closed curve (one planted H1 class).
    Glitches are uniform in the readings' bounding box.

    Returns
    -------
    readings : ndarray of shape (n_points, n_channels)
    is_glitch : ndarray of bool, True for the planted outliers
    """
    n_points = check_int(n_points, "n_points", "tidewater_readings", low=10, high=10**7)
    n_channels = check_int(n_channels, "n_channels", "tidewater_readings", low=2, high=1000)
    noise = check_float(noise, "noise", "tidewater_readings", low=0.0)
    outlier_fraction = check_float(outlier_fraction, "outlier_fraction", "tidewater_readings", low=0.0, high=0.5)
    generator = check_rng(rng, "tidewater_readings")
    phase = generator.uniform(0, 2 * np.pi, n_points)
    lags = 2 * np.pi * np.arange(n_channels) / n_channels
    gains = generator.uniform(0.8, 1.2, n_channels)
    offsets = generator.normal(scale=0.5, size=n_channels)
    readings = np.cos(phase[:, None] - lags[None, :]) * gains + offsets
    readings += generator.normal(scale=noise, size=readings.shape)
    is_glitch = generator.uniform(size=n_points) < outlier_fraction
    low, high = readings.min(axis=0), readings.max(axis=0)
    readings[is_glitch] = generator.uniform(low, high, (int(is_glitch.sum()), n_channels))
    return readings, is_glitch
