"""Finding repeated points: the hashed search against a plain reference, on clouds with planted repeats."""

import numpy as np
from hypothesis import given, settings
from hypothesis import strategies as st

from tdakit.core.geometry import cloud as cloud_module
from tdakit.core.geometry.cloud import count_duplicates, first_occurrences
from tdakit.core.geometry.metrics import Metric


def reference_first(array, metric):
    """The plain rule: the first row of every group of equal keys (np.unique over the full keys)."""
    _, first = np.unique(cloud_module._duplicate_keys(array, metric), return_index=True)
    return np.sort(first)


METRICS = [None, Metric("euclidean"), Metric("periodic", box=(4.0, 4.0)), Metric("angular"), Metric("cosine")]


@settings(max_examples=60, deadline=None)
@given(n=st.integers(1, 300), dims=st.integers(2, 3), repeats=st.integers(0, 50), which=st.integers(0, 4),
       seed=st.integers(0, 2**31 - 1))
def test_hashed_search_matches_reference(n, dims, repeats, which, seed):
    rng = np.random.default_rng(seed)
    metric = METRICS[which]
    if metric is not None and metric.name in ("angular", "periodic"):
        dims = 2
    points = np.round(rng.uniform(0.0, 4.0, size=(n, dims)), 1)  # coarse grid: chance repeats too
    if metric is not None and metric.name == "angular":
        points = np.column_stack([rng.uniform(0, 360, n), rng.uniform(-90, 90, n)])
    copies = rng.integers(0, n, size=repeats)
    points = np.concatenate([points, points[copies]])[rng.permutation(n + repeats)]
    np.testing.assert_array_equal(first_occurrences(points, metric), reference_first(points, metric))


def test_equivalent_keys_are_repeats():
    """Longitude 0 and 360, the pole at any longitude, -0.0 and 0.0, a periodic coordinate and the box side."""
    sky = np.array([[0.0, 10.0], [360.0, 10.0], [15.0, 90.0], [200.0, 90.0], [1.0, 2.0]])
    assert first_occurrences(sky, Metric("angular")).tolist() == [0, 2, 4]
    plain = np.array([[0.0, 1.0], [-0.0, 1.0], [0.0, 1.0 + 1e-15]])
    assert count_duplicates(plain) == 1
    box = np.array([[0.0, 1.0], [4.0, 1.0], [2.0, 2.0]])
    assert first_occurrences(box, Metric("periodic", box=(4.0, 4.0))).tolist() == [0, 2]


def test_blocks_do_not_change_the_answer(monkeypatch):
    """Rows hashed in many small blocks give the same repeats as one block."""
    rng = np.random.default_rng(3)
    points = rng.integers(0, 6, size=(500, 3)).astype(float)
    expected = reference_first(points, None)
    monkeypatch.setattr(cloud_module, "_HASH_ROWS", 7)
    np.testing.assert_array_equal(first_occurrences(points, None), expected)


def test_hash_collisions_are_resolved_exactly(monkeypatch):
    """Even if every row hashed alike, only truly equal rows would count as repeats."""
    points = np.array([[1.0, 2.0], [3.0, 4.0], [1.0, 2.0], [5.0, 6.0], [3.0, 4.0]])
    monkeypatch.setattr(cloud_module, "_row_hashes",
                        lambda array, metric, embedded=False: np.zeros(array.shape[0], np.uint64))
    assert first_occurrences(points, None).tolist() == [0, 1, 3]
