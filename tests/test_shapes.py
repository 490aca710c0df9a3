import numpy as np
import pytest

import tdakit
from tdakit import scenarios, shapes


@pytest.mark.parametrize(("sampler", "dims", "radius_check"), [
    (shapes.circle, 2, lambda p: np.linalg.norm(p, axis=1)),
    (shapes.sphere, 3, lambda p: np.linalg.norm(p, axis=1)),
    # torus of revolution R=2, r=1: distance from the core circle is the tube radius 1
    (shapes.torus, 3, lambda p: np.hypot(np.hypot(p[:, 0], p[:, 1]) - 2, p[:, 2])),
])
def test_samples_lie_on_their_shape(sampler, dims, radius_check, global_seed):
    points = sampler(500, rng=global_seed)
    assert points.shape == (500, dims) and points.dtype == np.float64
    np.testing.assert_allclose(radius_check(points), 1.0, atol=1e-12)


def test_klein_bottle_embedding_is_consistent():
    # (u, v) and (u + 2 pi, -v) give the same point: the defining identification of this Klein bottle.
    points = shapes.klein_bottle(300, rng=0)
    ring = np.hypot(points[:, 0], points[:, 1])
    np.testing.assert_allclose(np.hypot(ring - 2, np.hypot(points[:, 2], points[:, 3])), 1.0, atol=1e-12)


def test_noise_has_the_requested_spread():
    points = shapes.circle(20_000, noise=0.05, rng=1)
    assert np.std(np.linalg.norm(points, axis=1) - 1) == pytest.approx(0.05, rel=0.05)


def test_tidewater_loop_is_recovered_despite_glitches():
    readings, is_glitch = scenarios.tidewater_readings(2000, rng=7)
    assert readings.shape == (2000, 12) and 0.01 < is_glitch.mean() < 0.06
    cloud = tdakit.load_cloud(readings)
    marks = tdakit.select_landmarks(cloud, 80, method="core_maxmin", keep_fraction=0.9, rng=7)
    diagrams = tdakit.compute_diagrams(cloud, landmarks=marks, filtration="dtm", dtm_neighbors=20, dtm_power=1)
    persistence = np.sort(diagrams.persistence(1))[::-1]
    assert persistence[0] > 3 * persistence[1]  # one planted loop stands far above the rest


def test_marrowfield_ring_is_recovered():
    positions, masses = scenarios.marrowfield_halos(6000, rng=3)
    assert positions.min() >= 0 and positions.max() < scenarios.MARROWFIELD_BOX and (masses > 0).all()
    cloud = tdakit.load_cloud(positions, metric="periodic", box=scenarios.MARROWFIELD_BOX)
    marks = tdakit.select_landmarks(cloud, 150, method="core_maxmin", keep_fraction=0.6, rng=3)
    diagrams = tdakit.compute_diagrams(cloud, landmarks=marks, filtration="dtm", dtm_neighbors=30,
                                       max_scale=scenarios.MARROWFIELD_BOX / 2)
    persistence = np.sort(diagrams.persistence(1))[::-1]
    assert persistence[0] > 3 * persistence[1]
