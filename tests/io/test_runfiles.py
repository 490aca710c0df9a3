"""Run files: every field round-trips; writes are atomic; damaged or newer files are refused clearly."""

import json
import os
import stat
import subprocess
import zipfile

import numpy as np
import pandas as pd
import pytest

import tdakit
from tdakit.errors import DataFileNotFoundError, InvalidDataError, InvalidParameterError, OutputWriteError
from tdakit.io import atomic_output, load_run, runfiles, save_run, write_table
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


# -- atomic outputs ------------------------------------------------------------------------------
def _normal_mode(folder):
    probe = folder / "probe.txt"
    probe.write_text("x")
    mode = stat.S_IMODE(probe.stat().st_mode)
    probe.unlink()
    return mode


def test_write_table_is_atomic_and_has_normal_permissions(run, tmp_path):
    path = write_table(run.table, tmp_path / "features.csv")
    assert path == tmp_path / "features.csv"
    assert len(pd.read_csv(path)) == len(run.table)
    mode = _normal_mode(tmp_path)
    assert stat.S_IMODE(path.stat().st_mode) == mode
    assert stat.S_IMODE(run.save(tmp_path / "r").stat().st_mode) == mode  # run files and tables alike
    assert sorted(p.name for p in tmp_path.iterdir()) == ["features.csv", "r.tdkrun"]


def test_permissions_follow_the_umask(run, tmp_path):
    old = os.umask(0o077)
    try:
        path = write_table(run.table, tmp_path / "private.csv")
    finally:
        os.umask(old)
    assert stat.S_IMODE(path.stat().st_mode) == 0o600


def test_interrupted_write_keeps_the_old_file_and_no_temporary(tmp_path):
    path = tmp_path / "features.csv"
    path.write_text("old complete content\n")
    with pytest.raises(KeyboardInterrupt):
        with atomic_output(path) as temporary:
            assert temporary.parent == tmp_path and temporary.suffix == ".csv"  # writers can infer the format
            temporary.write_text("half of the new")
            raise KeyboardInterrupt
    assert path.read_text() == "old complete content\n"
    assert [p.name for p in tmp_path.iterdir()] == ["features.csv"]


def test_leftovers_of_a_killed_writer_are_listed(tmp_path):
    from tdakit.io._atomic import leftover_temporaries

    path = tmp_path / "features.csv"
    with pytest.raises(KeyboardInterrupt), atomic_output(path) as temporary:
        kept = temporary.read_bytes()  # exists while writing
        raise KeyboardInterrupt
    assert kept == b"" and leftover_temporaries(path) == []
    stale = tmp_path / ".features.csv.abc123.partial.csv"  # what a kill -9 mid-write leaves
    stale.write_text("half")
    (tmp_path / ".other.csv.x.partial.csv").write_text("not ours")
    assert leftover_temporaries(path) == [stale]


def test_a_figure_can_be_written_through_the_helper(tmp_path):
    from matplotlib.figure import Figure

    figure = Figure()
    figure.add_subplot().plot([0, 1], [1, 0])
    with atomic_output(tmp_path / "plot.pdf", what="figure") as temporary:
        figure.savefig(temporary)
    assert (tmp_path / "plot.pdf").read_bytes().startswith(b"%PDF")
    assert [p.name for p in tmp_path.iterdir()] == ["plot.pdf"]


def test_write_errors_name_the_file(run, tmp_path):
    with pytest.raises(DataFileNotFoundError, match="no_folder"):
        write_table(run.table, tmp_path / "no_folder" / "f.csv")
    (tmp_path / "taken.csv").mkdir()
    with pytest.raises(OutputWriteError, match="taken.csv"):
        write_table(run.table, tmp_path / "taken.csv")
    with pytest.raises(InvalidParameterError, match="'table'"):
        write_table(run.table.to_numpy(), tmp_path / "f.csv")


@pytest.fixture
def full_disk(tmp_path):
    """A 64 kB tmpfs (needs root and mount); skipped where it cannot be mounted."""
    mount = tmp_path / "small"
    mount.mkdir()
    done = subprocess.run(["mount", "-t", "tmpfs", "-o", "size=64k", "tmpfs", str(mount)], capture_output=True)
    if done.returncode != 0:
        pytest.skip(f"cannot mount a small tmpfs here ({done.stderr.decode(errors='replace').strip()})")
    try:
        yield mount
    finally:
        subprocess.run(["umount", str(mount)], check=False)


def test_full_disk_leaves_the_old_table_and_no_partial_file(run, full_disk):
    path = full_disk / "features.csv"
    write_table(run.table.head(3), path)
    before = path.read_bytes()
    big = pd.DataFrame({"x": np.arange(20_000, dtype=float), "label": ["a long label to fill the disk"] * 20_000})
    with pytest.raises(OutputWriteError, match=r"features\.csv.*no space left"):
        write_table(big, path)
    assert path.read_bytes() == before
    assert [p.name for p in full_disk.iterdir()] == ["features.csv"]


def test_full_disk_while_saving_a_run(run, full_disk, tmp_path):
    filler = full_disk / "filler.bin"
    filler.write_bytes(bytes(60_000))
    with pytest.raises(OutputWriteError, match=r"run\.tdkrun.*no space left"):
        run.save(full_disk / "run")
    assert sorted(p.name for p in full_disk.iterdir()) == ["filler.bin"]
