"""Replicates: refusals before any work (progress, checkpoint paths), worker count capped at the cores."""

import os
import warnings

import numpy as np
import pytest

import tdakit
from tdakit import shapes
from tdakit.errors import InvalidDataError, InvalidParameterError, TdakitWarning


@pytest.fixture(scope="module")
def small():
    cloud = tdakit.load_cloud(shapes.circle(300, noise=0.05, rng=1))
    marks = tdakit.select_landmarks(cloud, 30, rng=1)
    return cloud, marks, tdakit.compute_diagrams(cloud, landmarks=marks, filtration="dtm")


@pytest.mark.parametrize(("kwargs", "parameter"), [
    (dict(progress="yes"), "progress"),
    (dict(checkpoint="/no/such/folder/run.npz"), "checkpoint"),
    (dict(checkpoint=12), "checkpoint"),
])
def test_bad_replicate_options_are_refused_before_any_work(small, kwargs, parameter):
    cloud, marks, diagrams = small
    with pytest.raises(InvalidParameterError, match=parameter):
        tdakit.confidence_band(cloud, diagrams, landmarks=marks, n_boot=5, rng=1, **kwargs)


def test_a_folder_or_a_plain_array_is_not_a_checkpoint(small, tmp_path):
    cloud, marks, diagrams = small
    with pytest.raises(InvalidParameterError, match="checkpoint"):
        tdakit.confidence_band(cloud, diagrams, landmarks=marks, n_boot=5, rng=1, checkpoint=tmp_path)
    array = tmp_path / "values.npy"
    np.save(array, np.arange(3))
    with pytest.raises(InvalidDataError, match="single array"):
        tdakit.confidence_band(cloud, diagrams, landmarks=marks, n_boot=5, rng=1, checkpoint=array)


def test_more_workers_than_cores_are_capped_with_a_warning_and_change_nothing(small):
    cloud, marks, diagrams = small
    serial = tdakit.confidence_band(cloud, diagrams, landmarks=marks, n_boot=12, rng=3)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        many = tdakit.confidence_band(cloud, diagrams, landmarks=marks, n_boot=12, rng=3,
                                      n_jobs=(os.cpu_count() or 1) + 3)
    assert any(issubclass(w.category, TdakitWarning) and "cores" in str(w.message) for w in caught)
    np.testing.assert_array_equal(serial.replicates, many.replicates)
