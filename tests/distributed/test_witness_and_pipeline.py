"""Witness edge values over partitions, and the pipeline's scheduler option."""

import numpy as np
import pytest

import tdakit
from tdakit.distributed import select_landmarks_distributed, witness_edge_values_distributed
from tdakit.errors import InvalidParameterError


def test_witness_edges_identical_to_in_memory(client):
    points = np.random.default_rng(2).normal(size=(3000, 3))
    cloud = tdakit.load_cloud(points)
    marks = tdakit.select_landmarks(cloud, 40, rng=1)
    for nu, cap in ((0, None), (1, None), (2, 0.8)):
        expected = tdakit.witness_edge_values(cloud, marks, nu=nu, max_scale=cap)
        got = witness_edge_values_distributed(points, marks, nu=nu, max_scale=cap, client=client, chunk_rows=700)
        np.testing.assert_array_equal(got, expected)
    with pytest.raises(InvalidParameterError) as caught:
        witness_edge_values_distributed(points, [0, 0, 1], client=client)
    assert caught.value.parameter == "landmarks"


@pytest.mark.filterwarnings("ignore::tdakit.errors.BlindBandWarning")  # a small cloud: the band sees little
def test_analyze_on_a_scheduler_gives_the_same_run_and_records_the_workers(client):
    cloud = tdakit.load_cloud(np.random.default_rng(3).normal(size=(400, 2)))
    options = {"sampling": {"n_landmarks": 30}, "complex": {"filtration": "rips"},
               "band": {"method": "subsample", "n_boot": 8}}
    local = tdakit.analyze(cloud, options, rng=5)
    remote = tdakit.analyze(cloud, options, rng=5, scheduler=client.scheduler.address)
    np.testing.assert_array_equal(remote.landmarks.indices, local.landmarks.indices)
    assert remote.landmarks.params["cluster"]["workers"] == 2
    np.testing.assert_array_equal(remote.band.replicates, local.band.replicates)
    record = remote.provenance["scheduler"]
    assert record["address"] == client.scheduler.address and record["n_workers"] == 2
    assert all(v["tdakit"] == tdakit.__version__ for v in record["workers"].values())
    assert "scheduler" not in local.provenance


def test_scheduler_option_is_checked(client, monkeypatch):
    from tdakit.distributed import scheduler

    monkeypatch.setattr(scheduler, "CONNECT_TIMEOUT", "1s")
    cloud = tdakit.load_cloud(np.random.default_rng(3).normal(size=(50, 2)))
    for bad in ("", 5, "tcp://127.0.0.1:1"):
        with pytest.raises(InvalidParameterError) as caught:
            tdakit.analyze(cloud, {"band": {"method": "none"}}, scheduler=bad)
        assert caught.value.parameter == "scheduler"
    with pytest.raises(InvalidParameterError) as caught:
        tdakit.analyze(cloud, {"band": {"method": "none"}}, scheduler=client.scheduler.address, executor=client)
    assert caught.value.parameter == "executor"


def test_select_then_witness_on_the_same_file(client, tmp_path):
    points = np.random.default_rng(4).uniform(0, 3, size=(2000, 2))
    np.save(tmp_path / "c.npy", points)
    marks = select_landmarks_distributed(tmp_path / "c.npy", 25, rng=0, client=client, metric="periodic", box=3.0)
    cloud = tdakit.load_cloud(points, metric="periodic", box=3.0)
    np.testing.assert_array_equal(
        witness_edge_values_distributed(tmp_path / "c.npy", marks, client=client, metric="periodic", box=3.0),
        tdakit.witness_edge_values(cloud, marks))


def test_command_line_scheduler_is_recorded_in_the_run_file(client, tmp_path, capsys):
    from tdakit.cli.main import main

    points = np.random.default_rng(6).normal(size=(300, 2))
    np.savetxt(tmp_path / "blob.csv", points, delimiter=",", header="x,y", comments="")
    code = main(["analyze", str(tmp_path / "blob.csv"), "--landmarks", "20", "--band", "none", "--complex", "rips",
                 "--no-figures", "--out", str(tmp_path / "out"), "--scheduler", client.scheduler.address])
    capsys.readouterr()
    assert code == 0
    run = tdakit.load_run(tmp_path / "out" / "blob.tdkrun")
    assert run.provenance["scheduler"]["address"] == client.scheduler.address
    assert set(run.provenance["scheduler"]["workers"]) == set(client.scheduler_info()["workers"])
    local = tdakit.analyze(tdakit.load_cloud(tmp_path / "blob.csv"), run.options, rng=run.seed)
    np.testing.assert_array_equal(run.landmarks.indices, local.landmarks.indices)
