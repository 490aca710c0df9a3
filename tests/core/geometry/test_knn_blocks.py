"""The k-th neighbour distance queried a block at a time equals the whole query's last column, for every metric."""

import warnings

import numpy as np
import pytest

import tdakit
from tdakit.core.geometry import _geometry
from tdakit.core.geometry.density import knn_radius


def clouds():
    rng = np.random.default_rng(8)
    yield tdakit.load_cloud(rng.normal(size=(500, 3)))
    yield tdakit.load_cloud(rng.uniform(0, 5, (500, 2)), metric="periodic", box=5)
    yield tdakit.load_cloud(np.c_[rng.uniform(0, 360, 500), rng.uniform(-90, 90, 500)], metric="angular")
    yield tdakit.load_cloud(rng.normal(size=(500, 4)), metric="chebyshev")
    grid = np.round(rng.normal(size=(500, 2)), 1)  # many ties and exact copies
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        yield tdakit.load_cloud(grid, metric="manhattan")
    yield tdakit.load_cloud(rng.normal(size=(300, 14)))  # beyond the tree: the blockwise pairwise path


@pytest.mark.parametrize("k", [1, 7, 40])
def test_blocks_give_the_whole_query(monkeypatch, k):
    monkeypatch.setattr(_geometry, "KNN_BLOCK_ROWS", 37)
    for cloud in clouds():
        expected = _geometry.knn_distances(cloud, k, include_self=False)[:, -1]
        np.testing.assert_array_equal(knn_radius(cloud, k), expected)
