"""The subsampling study on planted data: certificate in every cell, a recommendation that finds the features."""

import numpy as np
import pytest

import tdakit
from tdakit.errors import InvalidDataError, InvalidParameterError
from tdakit.study import subsampling_study
from tests.helpers import assert_same, two_circles

GRID = {"methods": ["maxmin", "random"], "counts": [20, 40, 80, 160, 320], "n_seeds": 3, "band": {"n_boot": 100}}


@pytest.fixture(scope="module")
def planted():
    return tdakit.load_cloud(two_circles(10_000, rng=0))


@pytest.fixture(scope="module")
def study(planted):
    return subsampling_study(planted, GRID, rng=3)


def test_recommendation_finds_the_planted_features(study):
    # Two circles: two components and two loops (common practice). The band is the valid subsampling
    # band (Fasy et al. 2014, Ann. Statist. 42(6), Section 4.1) at its default subsample size.
    maxmin = {r.method: r for r in study.recommendations}["maxmin"]
    assert maxmin.features == (2, 2), maxmin.evidence
    assert maxmin.n_landmarks in GRID["counts"][:-1]
    row = study.summary.set_index(["method", "n_landmarks"]).loc[("maxmin", maxmin.n_landmarks)]
    assert row["stable"] and row["significant_H1"] == 2


def test_certificate_holds_in_every_cell(study):
    # d_B(Dgm Rips X, Dgm Rips L) <= 2 eps (Chazal, de Silva, Oudot 2014, Geom. Dedicata 173:193-214);
    # against the densest setting the triangle inequality gives 2 (eps + eps_ref).
    cells = study.cells
    assert study.reference["kind"].startswith("densest")
    expected = 2.0 * (cells["coverage_radius"] + study.reference["coverage_radius"])
    np.testing.assert_allclose(cells["certificate"], expected)
    assert cells["certificate_holds"].notna().all() and cells["certificate_holds"].all()
    assert (cells[["bottleneck_H0", "bottleneck_H1"]].max(axis=1) <= cells["certificate"] + 1e-12).all()


def test_cells_cover_the_grid_with_time_and_memory(study):
    cells = study.cells
    assert len(cells) == 2 * 5 * 3 and set(cells["method"]) == {"maxmin", "random"}
    assert (cells["n_landmarks_used"] == cells["n_landmarks"]).all()
    assert (cells["seconds"] > 0).all() and (cells["peak_memory_mib"] > 0).all()
    assert (cells["wasserstein_H1"] >= cells["bottleneck_H1"] - 1e-12).all()  # W_1 >= bottleneck (common practice)


def test_full_cloud_reference_certificate(global_seed):
    cloud = tdakit.load_cloud(two_circles(300, rng=global_seed))
    result = subsampling_study(cloud, {"methods": ["maxmin", "random"], "counts": [10, 30], "n_seeds": 2,
                                       "band": {"method": "none"}}, rng=global_seed)
    assert result.reference["kind"] == "full cloud"
    np.testing.assert_allclose(result.cells["certificate"], 2.0 * result.cells["coverage_radius"])
    assert result.cells["certificate_holds"].all()
    assert all(r.n_landmarks is None for r in result.recommendations)  # no band, nothing to recommend


def test_identical_for_any_number_of_workers_and_resumable(planted, tmp_path):
    options = {"methods": ["maxmin"], "counts": [40, 80], "n_seeds": 2, "band": {"n_boot": 20}}
    serial = subsampling_study(planted, options, rng=9, checkpoint=tmp_path / "cells.npz")
    resumed = subsampling_study(planted, options, rng=9, checkpoint=tmp_path / "cells.npz")
    parallel = subsampling_study(planted, options, rng=9, n_jobs=2)
    keep = [c for c in serial.cells.columns if c not in ("seconds", "peak_memory_mib")]
    assert_same(serial.cells[keep].to_dict(), parallel.cells[keep].to_dict())
    assert resumed.cells.equals(serial.cells)  # resumed from the checkpoint, timings included
    with pytest.raises(InvalidDataError, match="another configuration"):
        subsampling_study(planted, {**options, "n_seeds": 3}, rng=9, checkpoint=tmp_path / "cells.npz")


def test_witness_cells_claim_no_certificate(planted):
    result = subsampling_study(planted.subset(np.arange(0, 10_000, 10)),
                               {"methods": ["maxmin"], "counts": [20, 40], "n_seeds": 1,
                                "complex": {"filtration": "witness"}, "band": {"method": "none"}}, rng=1)
    assert result.reference["kind"].startswith("densest")
    assert result.cells["certificate"].isna().all() and result.cells["certificate_holds"].isna().all()


def test_study_rejects_bad_input(planted):
    with pytest.raises(InvalidParameterError, match="'options'"):
        subsampling_study(planted.subset(np.arange(50)), {"counts": [10, 100]})
    with pytest.raises(InvalidParameterError, match="'cloud'"):
        subsampling_study(np.zeros((10, 2)))
    with pytest.raises(InvalidParameterError, match="'counts'"):
        subsampling_study(planted, {"counts": []})


def test_study_writes_its_tables(study, tmp_path):
    paths = study.save(tmp_path / "out")
    assert [p.name for p in paths] == ["study_cells.csv", "study_summary.csv", "study_report.txt"]
    assert "maxmin" in paths[2].read_text() and "certificate held in 30 of 30" in paths[2].read_text()
