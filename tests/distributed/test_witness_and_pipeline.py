"""Witness edge values over partitions, and the pipeline's scheduler option."""

import numpy as np
import pytest

import tdakit
from tdakit.distributed import select_landmarks_distributed, witness_edge_values_distributed
from tdakit.distributed._cluster import worker_addresses
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
    assert set(run.provenance["scheduler"]["workers"]) == set(worker_addresses(client, "test"))
    assert run.provenance["scheduler"]["steps"] == {"landmarks": "cluster", "witness": "not used",
                                                    "diagrams": "driver", "replicates": "not used"}
    local = tdakit.analyze(tdakit.load_cloud(tmp_path / "blob.csv"), run.options, rng=run.seed)
    np.testing.assert_array_equal(run.landmarks.indices, local.landmarks.indices)
    assert main(["summary", str(tmp_path / "out" / "blob.tdkrun")]) == 0
    said = capsys.readouterr().out
    assert (f"Cluster: {client.scheduler.address} (2 workers); landmarks on the cluster, witness not used, diagrams "
            "here, replicates not used.") in said


# -- the witness step on the cluster ---------------------------------------------------------------------------
WITNESS = {"sampling": {"n_landmarks": 30}, "complex": {"filtration": "witness"},
           "band": {"method": "bootstrap", "n_boot": 4}}


def _spy(monkeypatch):
    """Count the calls of the distributed witness routine (the pipeline reaches it at call time)."""
    from tdakit.distributed import witness

    calls = []
    original = witness.witness_edge_values_distributed

    def counted(*args, **kwargs):
        calls.append(kwargs)
        return original(*args, **kwargs)

    monkeypatch.setattr(witness, "witness_edge_values_distributed", counted)
    return calls


@pytest.mark.parametrize("metric, points, complex_", [
    ("euclidean", np.random.default_rng(3).normal(size=(600, 2)), {}),
    ("periodic", np.random.default_rng(4).uniform(0, 3, size=(600, 2)), {"witness_nu": 2, "max_scale": 0.9}),
], ids=["euclidean nu=1", "periodic nu=2 capped"])
def test_lazy_witness_on_a_scheduler_gives_the_same_diagrams_and_band(client, monkeypatch, metric, points, complex_):
    from tests.helpers import assert_same

    cloud = tdakit.load_cloud(points, metric=metric, box=3.0 if metric == "periodic" else None)
    options = {**WITNESS, "complex": {**WITNESS["complex"], **complex_}}
    local = tdakit.analyze(cloud, options, rng=5)
    calls = _spy(monkeypatch)
    remote = tdakit.analyze(cloud, options, rng=5, scheduler=client.scheduler.address)
    assert len(calls) == 1 and calls[0]["nu"] == complex_.get("witness_nu", 1)
    assert calls[0]["max_scale"] == complex_.get("max_scale", np.inf)
    assert_same(remote.diagrams, local.diagrams, "diagrams")
    assert_same(remote.band, local.band, "band")
    assert remote.provenance["scheduler"]["steps"] == {"landmarks": "cluster", "witness": "cluster",
                                                       "diagrams": "driver", "replicates": "cluster"}


def test_gudhi_witness_complexes_stay_in_this_process_and_the_run_says_so(client, monkeypatch):
    cloud = tdakit.load_cloud(np.random.default_rng(5).normal(size=(400, 2)))
    options = {**WITNESS, "complex": {"filtration": "witness", "witness": "weak", "max_scale": 1.0},
               "band": {"method": "none"}}
    local = tdakit.analyze(cloud, options, rng=2)
    calls = _spy(monkeypatch)
    remote = tdakit.analyze(cloud, options, rng=2, scheduler=client.scheduler.address)
    assert calls == []
    for mine, theirs in zip(remote.diagrams.pairs, local.diagrams.pairs):
        np.testing.assert_array_equal(mine, theirs)
    assert remote.provenance["scheduler"]["steps"] == {"landmarks": "cluster", "witness": "driver",
                                                       "diagrams": "driver", "replicates": "not used"}


def test_landmark_options_reach_the_method_wherever_it_runs(client):
    """Methods in DISTRIBUTED_METHODS (read when called) run on the cluster with their options, the others here."""
    from tdakit.distributed.landmarks import DISTRIBUTED_METHODS
    from tdakit.distributed.scheduler import landmark_function

    cloud = tdakit.load_cloud(np.random.default_rng(6).normal(size=(500, 2)))
    select = landmark_function(client)
    for method, options in (("density", {"density_power": 2.0, "density_neighbors": 12}),
                            ("core_maxmin", {"keep_fraction": 0.7, "density_neighbors": 12})):
        expected = tdakit.select_landmarks(cloud, 20, method=method, rng=3, **options)
        got = select(cloud, 20, method=method, rng=3, **options)
        np.testing.assert_array_equal(got.indices, expected.indices)
        assert ("cluster" in got.params) == (method in DISTRIBUTED_METHODS)
    assert landmark_function() is tdakit.select_landmarks


def test_a_precomputed_metric_keeps_landmarks_and_witnesses_here(client):
    points = np.random.default_rng(7).normal(size=(200, 2))
    distances = np.sqrt(((points[:, None] - points[None]) ** 2).sum(-1))
    cloud = tdakit.load_cloud(distances, metric="precomputed")
    options = {**WITNESS, "sampling": {"n_landmarks": 15}, "band": {"method": "none"}}
    local = tdakit.analyze(cloud, options, rng=1)
    remote = tdakit.analyze(cloud, options, rng=1, scheduler=client.scheduler.address)
    np.testing.assert_array_equal(remote.diagrams.pairs[1], local.diagrams.pairs[1])
    assert remote.provenance["scheduler"]["steps"]["landmarks"] == "driver"
    assert remote.provenance["scheduler"]["steps"]["witness"] == "driver"


@pytest.mark.filterwarnings("ignore::tdakit.errors.BlindBandWarning")
def test_command_line_config_key_runs_the_witness_step_on_the_cluster(client, tmp_path, capsys):
    from tdakit.cli.main import main
    from tests.helpers import assert_same

    points = np.random.default_rng(8).normal(size=(500, 2))
    np.savetxt(tmp_path / "blob.csv", points, delimiter=",", header="x,y", comments="")
    (tmp_path / "run.toml").write_text(f'[run]\nscheduler = "{client.scheduler.address}"\n[complex]\n'
                                       'filtration = "witness"\n')
    code = main(["analyze", str(tmp_path / "blob.csv"), "--config", str(tmp_path / "run.toml"), "--landmarks", "25",
                 "--band", "bootstrap", "--n-boot", "4", "--seed", "3", "--no-figures", "--quiet",
                 "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 0, err
    run = tdakit.load_run(tmp_path / "out" / "blob.tdkrun")
    record = run.provenance["scheduler"]
    assert record["address"] == client.scheduler.address
    assert set(record["workers"]) == set(worker_addresses(client, "test"))
    assert all(v["tdakit"] == tdakit.__version__ for v in record["workers"].values())
    assert record["steps"] == {"landmarks": "cluster", "witness": "cluster", "diagrams": "driver",
                               "replicates": "cluster"}
    local = tdakit.analyze(tdakit.load_cloud(tmp_path / "blob.csv"), run.options, rng=run.seed)
    assert_same(run.diagrams.pairs, local.diagrams.pairs, "diagrams")
    assert_same(run.band.replicates, local.band.replicates, "replicates")
