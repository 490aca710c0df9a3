"""Run files: every field round-trips; writes are atomic; damaged or newer files are refused clearly."""

import json
import zipfile

import numpy as np
import pytest

import tdakit
from tdakit.errors import DataFileNotFoundError, InvalidDataError
from tdakit.io import load_run, runfiles, save_run
from tdakit.pipeline import analyze, rerun
from tdakit.shapes import circle
from tests.helpers import assert_same


@pytest.fixture(scope="module")
def data_file(tmp_path_factory):
    path = tmp_path_factory.mktemp("data") / "ring.csv"
    np.savetxt(path, circle(300, noise=0.03, rng=4), delimiter=",", header="x,y", comments="")
    return path


@pytest.fixture(scope="module", params=["subsample", "landscape", "none"])
def run(request, data_file):
    options = {"sampling": {"n_landmarks": 30}, "complex": {"max_scale": 1.5, "filtration": "rips"},
               "band": {"method": request.param, "n_boot": 20, "n_subsamples": 4, "subsample_size": 60}}
    return analyze(tdakit.load_cloud(data_file), options, rng=2)


def test_every_field_survives_a_round_trip(run, tmp_path):
    path = save_run(run, tmp_path / "ring")
    assert path.name == "ring.tdkrun"
    assert_same(run, load_run(path), "run")


def test_metadata_is_readable_json(run, tmp_path):
    path = run.save(tmp_path / "ring.tdkrun")
    with zipfile.ZipFile(path) as archive:
        record = json.loads(archive.read("run.json"))
    assert record["format"] == "tdakit run" and record["format_version"] == runfiles.RUN_FORMAT_VERSION
    assert record["seed"] == run.seed and record["diagrams"]["filtration"] == "rips"
    assert all(meta["sha256"] for meta in record["arrays"].values())


def test_loaded_run_gives_its_table_without_recomputing(run, tmp_path, monkeypatch):
    path = run.save(tmp_path / "r")
    import tdakit.core.topology.filtrations as filtrations

    monkeypatch.setattr(filtrations, "compute_diagrams", lambda *a, **k: pytest.fail("recomputed"))
    loaded = load_run(path)
    assert loaded.table.equals(run.table)


def test_rerun_of_a_loaded_run_gives_the_same_numbers(run, tmp_path):
    loaded = load_run(run.save(tmp_path / "r"))
    again = rerun(loaded)
    assert_same(again.diagrams.pairs, run.diagrams.pairs)
    assert_same(again.band.radii if again.band else None, run.band.radii if run.band else None)


def test_a_crash_mid_write_leaves_the_old_file_intact(run, tmp_path, monkeypatch):
    path = run.save(tmp_path / "r")
    before = path.read_bytes()
    calls = []

    def crash(*args, **kwargs):
        calls.append(1)
        if len(calls) == 3:
            raise KeyboardInterrupt("simulated crash")
        return np.lib.format.write_array(args[0], args[1])

    monkeypatch.setattr(runfiles.np, "save", crash)
    with pytest.raises(KeyboardInterrupt):
        run.save(path)
    assert len(calls) == 3 and path.read_bytes() == before
    assert [p.name for p in tmp_path.iterdir()] == [path.name]  # no partial file left behind


def test_truncated_file_is_refused(run, tmp_path):
    path = run.save(tmp_path / "r")
    path.write_bytes(path.read_bytes()[: path.stat().st_size // 2])
    with pytest.raises(InvalidDataError, match="truncated"):
        load_run(path)


def test_flipped_byte_is_caught(run, tmp_path):
    path = run.save(tmp_path / "r")
    with zipfile.ZipFile(path) as archive:
        member = archive.getinfo("arrays/landmark_points.npy" if run.landmarks is not None else "run.json")
        start = member.header_offset + 30 + len(member.filename) + len(member.extra)
    data = bytearray(path.read_bytes())
    data[start + member.file_size - 3] ^= 0xFF
    path.write_bytes(bytes(data))
    with pytest.raises(InvalidDataError, match="damaged"):
        load_run(path)


def _rewrite_record(path, change):
    with zipfile.ZipFile(path) as archive:
        members = {name: archive.read(name) for name in archive.namelist()}
    record = json.loads(members["run.json"])
    change(record)
    members["run.json"] = json.dumps(record).encode()
    with zipfile.ZipFile(path, "w") as archive:
        for name, content in members.items():
            archive.writestr(name, content)


def test_newer_format_version_is_refused(run, tmp_path):
    path = run.save(tmp_path / "r")
    _rewrite_record(path, lambda record: record.update(format_version=runfiles.RUN_FORMAT_VERSION + 1))
    with pytest.raises(InvalidDataError, match="Upgrade tdakit"):
        load_run(path)


def test_missing_part_is_refused(run, tmp_path):
    path = run.save(tmp_path / "r")
    _rewrite_record(path, lambda record: record.pop("diagrams"))
    with pytest.raises(InvalidDataError, match="damaged"):
        load_run(path)


def test_other_files_are_refused(tmp_path, data_file):
    with pytest.raises(InvalidDataError, match="truncated|not a tdakit"):
        load_run(data_file)
    with pytest.raises(DataFileNotFoundError):
        load_run(tmp_path / "nothing.tdkrun")
    with pytest.raises(DataFileNotFoundError):
        save_run(analyze(tdakit.load_cloud(data_file), {"sampling": {"n_landmarks": 10}, "band": {"method": "none"}}),
                 tmp_path / "no" / "such" / "folder")
