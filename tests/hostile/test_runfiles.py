"""Hostile run files: every damaged or forged ``.tdkrun`` ends in tdakit's own error naming the file and field.

The run file is validated against its schema (``tdakit/io/_runschema.py``) before anything is built, and
ZIP members are bounded from the archive's directory before they are read.
"""

from __future__ import annotations

import hashlib
import io
import json
import os
import struct
import zipfile

import numpy as np
import pytest

import tdakit
from tdakit.errors import DataFileNotFoundError, InvalidDataError, TdakitError
from tdakit.io import load_run, runfiles
from tdakit.pipeline import analyze
from tdakit.shapes import circle
from tests.helpers import assert_same

pytestmark = pytest.mark.entry("load_run")


@pytest.fixture(scope="module")
def saved(tmp_path_factory):
    """Bytes of a small valid run file (subsample band, landmarks)."""
    cloud = tdakit.load_cloud(circle(200, noise=0.03, rng=4))
    options = {"sampling": {"n_landmarks": 25}, "complex": {"max_scale": 1.5, "filtration": "rips"},
               "band": {"method": "subsample", "n_subsamples": 4, "subsample_size": 60}}
    path = analyze(cloud, options, rng=2).save(tmp_path_factory.mktemp("runs") / "ring")
    return path.read_bytes()


def members_of(data: bytes):
    with zipfile.ZipFile(io.BytesIO(data)) as archive:
        record = json.loads(archive.read("run.json"))
        arrays = {name: np.load(io.BytesIO(archive.read(f"arrays/{name}.npy"))) for name in record["arrays"]}
    return record, arrays


def write_run(path, record, arrays, *, fix_meta=True, raw_json=None, extra=None):
    """Write a run file from a record and arrays (checksums recomputed unless ``fix_meta`` is False)."""
    if fix_meta and isinstance(record, dict) and isinstance(record.get("arrays"), dict):
        record["arrays"] = {name: {"shape": list(a.shape), "dtype": a.dtype.str,
                                   "sha256": hashlib.sha256(np.ascontiguousarray(a).tobytes()).hexdigest()}
                            for name, a in arrays.items()}
    with zipfile.ZipFile(path, "w") as archive:
        archive.writestr("run.json", raw_json if raw_json is not None else json.dumps(record))
        for name, array in arrays.items():
            buffer = io.BytesIO()
            np.save(buffer, array, allow_pickle=isinstance(array, np.ndarray) and array.dtype.hasobject)
            archive.writestr(f"arrays/{name}.npy", buffer.getvalue())
        for name, content in (extra or {}).items():
            archive.writestr(name, content)
    return path


def forged(tmp_path, saved, change=None, arrays_change=None, **options):
    record, arrays = members_of(saved)
    if change is not None:
        change(record)
    if arrays_change is not None:
        arrays_change(arrays)
    return write_run(tmp_path / "forged.tdkrun", record, arrays, **options)


def refused(path, *fragments, error=InvalidDataError):
    with pytest.raises(error) as caught:
        load_run(path)
    message = str(caught.value)
    assert os.path.basename(str(path)) in message, message
    for fragment in fragments:
        assert fragment.lower() in message.lower(), (fragment, message)
    return message


# -- the cases of issue 17 -------------------------------------------------------------------
def test_valid_file_still_loads(tmp_path, saved):
    path = forged(tmp_path, saved)
    run = load_run(path)
    assert run.diagrams.max_dim == 1 and run.band is not None
    assert run.summary() and len(run.table) > 0


@pytest.mark.hang
def test_run_json_nested_100000_deep(tmp_path, saved):
    deep = '{"format": "tdakit run", "format_version": 1, "x": ' + "[" * 100_000 + "]" * 100_000 + "}"
    refused(forged(tmp_path, saved, raw_json=deep), "nested", "run.json")


@pytest.mark.silent
def test_band_level_outside_0_1(tmp_path, saved):
    refused(forged(tmp_path, saved, lambda r: r["band"].update(level=7)), "band.level", "(0, 1)")


def test_band_radii_strings(tmp_path, saved):
    refused(forged(tmp_path, saved, lambda r: r["band"].update(radii=["a", "b"])), "band.radii")


@pytest.mark.silent
def test_band_radii_shorter_than_the_dimensions(tmp_path, saved):
    refused(forged(tmp_path, saved, lambda r: r["band"].update(radii=r["band"]["radii"][:1])), "band.radii")


@pytest.mark.silent
def test_pairs_with_birth_after_death(tmp_path, saved):
    def swap(arrays):
        pairs = arrays["diagrams.pairs.0"].copy()
        pairs[0] = [2.0, 1.0]
        arrays["diagrams.pairs.0"] = pairs

    refused(forged(tmp_path, saved, arrays_change=swap), "diagrams.pairs.0", "birth")


@pytest.mark.silent
def test_pairs_with_nan(tmp_path, saved):
    def poison(arrays):
        pairs = arrays["diagrams.pairs.1"].copy()
        pairs[0, 1] = np.nan
        arrays["diagrams.pairs.1"] = pairs

    refused(forged(tmp_path, saved, arrays_change=poison), "diagrams.pairs.1", "NaN")


def test_pairs_one_dimensional(tmp_path, saved):
    def flatten(arrays):
        arrays["diagrams.pairs.0"] = arrays["diagrams.pairs.0"].ravel()

    refused(forged(tmp_path, saved, arrays_change=flatten), "diagrams.pairs.0", "shape")


def test_pairs_of_strings(tmp_path, saved):
    def text(arrays):
        arrays["diagrams.pairs.0"] = arrays["diagrams.pairs.0"].astype(str)

    refused(forged(tmp_path, saved, arrays_change=text), "diagrams.pairs.0")


@pytest.mark.silent
def test_landmark_indices_out_of_range(tmp_path, saved):
    def shift(arrays):
        arrays["landmarks.indices"] = arrays["landmarks.indices"] + 10_000

    refused(forged(tmp_path, saved, arrays_change=shift), "landmarks.indices", "range")


def test_non_numeric_timings(tmp_path, saved):
    refused(forged(tmp_path, saved, lambda r: r["timings"].update(band="fast")), "timings")


@pytest.mark.parametrize("value", [None, [], ["a"], "arrays", {"x": "y"}, {"x": {"shape": "y"}}])
def test_arrays_missing_a_list_or_holding_strings(tmp_path, saved, value):
    def change(record):
        if value is None:
            del record["arrays"]
        else:
            record["arrays"] = value

    refused(forged(tmp_path, saved, change, fix_meta=False), "arrays")


@pytest.mark.hang
def test_run_json_inflating_to_400_mb_is_refused_before_reading(tmp_path, saved):
    path = tmp_path / "bomb.tdkrun"
    with zipfile.ZipFile(path, "w", compression=zipfile.ZIP_DEFLATED, compresslevel=9) as archive:
        with archive.open("run.json", "w", force_zip64=True) as member:
            member.write(b'{"format": "tdakit run", "format_version": 1, "pad": "')
            block = b" " * (1 << 20)
            for _ in range(400):
                member.write(block)
            member.write(b'"}')
    assert path.stat().st_size < 1_000_000
    refused(path, "run.json", "inflate")


@pytest.mark.hang
def test_declared_2_4_gb_array_in_a_small_file(tmp_path, saved):
    record, arrays = members_of(saved)
    header = {"descr": "<f8", "fortran_order": False, "shape": (300_000_000, 1)}
    buffer = io.BytesIO()
    np.lib.format.write_array_header_1_0(buffer, header)
    buffer.write(bytes(2_300_000))
    record["arrays"]["preview_points"]["shape"] = [300_000_000, 1]
    path = write_run(tmp_path / "big.tdkrun", record, {k: v for k, v in arrays.items() if k != "preview_points"},
                     fix_meta=False, extra={"arrays/preview_points.npy": buffer.getvalue()})
    refused(path, "preview_points", "2.4 GB")


def test_flipped_compression_method_byte(tmp_path, saved):
    # Byte 10 of the first central-directory entry is the compression method: 0x63 (99) makes the ZIP layer
    # raise NotImplementedError.
    data = bytearray(saved)
    data[data.find(b"PK\x01\x02") + 10] = 0x63
    (tmp_path / "flip.tdkrun").write_bytes(bytes(data))
    refused(tmp_path / "flip.tdkrun")


def test_encrypted_flag(tmp_path, saved):
    data = bytearray(saved)
    with zipfile.ZipFile(io.BytesIO(saved)) as archive:
        info = archive.getinfo("run.json")
    central = data.find(b"PK\x01\x02")
    data[central + 8] |= 0x01  # general-purpose flag: encrypted
    data[info.header_offset + 6] |= 0x01
    (tmp_path / "locked.tdkrun").write_bytes(bytes(data))
    refused(tmp_path / "locked.tdkrun")


@pytest.mark.slow
def test_single_byte_flips_only_give_tdakit_errors(tmp_path, saved):
    positions = np.unique(np.concatenate([
        np.arange(0, 120), np.arange(len(saved) - 600, len(saved)),
        np.random.default_rng(3).integers(0, len(saved), 300)]))
    path = tmp_path / "flip.tdkrun"
    outcomes = {"refused": 0, "loaded": 0}
    for position in positions:
        data = bytearray(saved)
        data[int(position)] ^= 0xFF
        path.write_bytes(bytes(data))
        try:
            run = load_run(path)
        except TdakitError as exc:
            assert path.name in str(exc), (position, str(exc))
            outcomes["refused"] += 1
        else:
            run.summary()
            assert len(run.table) == sum(len(run.diagrams[k]) for k in range(len(run.diagrams)))  # a row per class
            outcomes["loaded"] += 1
    assert outcomes["refused"] > 0, outcomes  # flips in fields the ZIP layer ignores may still load


# -- more cases ------------------------------------------------------------------------------
def test_zero_byte_file(tmp_path):
    (tmp_path / "empty.tdkrun").write_bytes(b"")
    refused(tmp_path / "empty.tdkrun", "ZIP")


def test_future_version(tmp_path, saved):
    newer = runfiles.RUN_FORMAT_VERSION + 1
    refused(forged(tmp_path, saved, lambda r: r.update(format_version=newer)), "Upgrade tdakit")


@pytest.mark.parametrize("version", ["1", 0, -1, 1.5, None, True])
def test_invalid_version(tmp_path, saved, version):
    refused(forged(tmp_path, saved, lambda r: r.update(format_version=version)), "format_version")


def test_extra_member_is_ignored(tmp_path, saved):
    path = forged(tmp_path, saved, extra={"notes.txt": b"hello", "arrays/unlisted.npy": b"junk"})
    assert_same(load_run(path).diagrams.pairs, load_run(forged(tmp_path, saved)).diagrams.pairs)


def test_path_as_bytes_and_as_folder(tmp_path, saved):
    path = forged(tmp_path, saved)
    assert load_run(os.fsencode(path)).seed == 2
    (tmp_path / "dir.tdkrun").mkdir()
    refused(tmp_path / "dir.tdkrun", "folder")
    with pytest.raises(DataFileNotFoundError, match="nothing.tdkrun"):
        load_run(tmp_path / "nothing.tdkrun")


@pytest.mark.hang
def test_fifo_is_refused_without_blocking(tmp_path):
    os.mkfifo(tmp_path / "pipe.tdkrun")
    refused(tmp_path / "pipe.tdkrun", "regular file")


@pytest.mark.parametrize("content", [b"not json", b"\xff\xfe\x00", b"[1, 2]", b"null", b'"text"', b"{}"])
def test_run_json_that_is_not_a_record(tmp_path, saved, content):
    refused(forged(tmp_path, saved, raw_json=content), "run.json")


def test_seed_overflowing_to_infinity(tmp_path, saved):
    raw = json.dumps(members_of(saved)[0]).replace('"seed": 2,', '"seed": 1e999999,', 1)
    refused(forged(tmp_path, saved, raw_json=raw), "seed")


def test_huge_integer_literal(tmp_path, saved):
    raw = json.dumps(members_of(saved)[0]).replace('"seed": 2,', '"seed": ' + "9" * 5000 + ",", 1)
    refused(forged(tmp_path, saved, raw_json=raw), "run.json")


@pytest.mark.parametrize(("field", "value"), [("seed", "two"), ("seed", -1), ("seed", 2.5), ("seed", None)])
def test_bad_seed(tmp_path, saved, field, value):
    refused(forged(tmp_path, saved, lambda r: r.update({field: value})), field)


def test_unknown_option(tmp_path, saved):
    refused(forged(tmp_path, saved, lambda r: r["options"]["band"].update(colour="red")), "options", "colour")


def test_options_not_a_dict(tmp_path, saved):
    refused(forged(tmp_path, saved, lambda r: r.update(options=[1, 2])), "options")


def test_reference_to_a_missing_array(tmp_path, saved):
    refused(forged(tmp_path, saved, lambda r: r.update(preview_points={"array": "nowhere"})), "preview_points",
            "nowhere")


def test_member_missing_from_the_archive(tmp_path, saved):
    record, arrays = members_of(saved)
    meta = dict(record["arrays"])
    path = write_run(tmp_path / "gap.tdkrun", record, {k: v for k, v in arrays.items() if k != "band.replicates"},
                     fix_meta=False)
    assert "band.replicates" in meta
    refused(path, "band.replicates")


def test_pickled_array_member(tmp_path, saved):
    def objects(arrays):
        arrays["band.replicates"] = np.array([[1, "a"]], dtype=object)

    refused(forged(tmp_path, saved, arrays_change=objects), "band.replicates", "pickle")


def test_checksum_mismatch(tmp_path, saved):
    record, arrays = members_of(saved)
    record["arrays"]["landmark_points"]["sha256"] = "0" * 64
    refused(write_run(tmp_path / "sum.tdkrun", record, arrays, fix_meta=False), "landmark_points", "checksum")


def test_declared_shape_differs_from_the_array(tmp_path, saved):
    record, arrays = members_of(saved)
    record["arrays"]["landmark_points"]["shape"] = [3, 3]
    refused(write_run(tmp_path / "shape.tdkrun", record, arrays, fix_meta=False), "landmark_points", "shape")


@pytest.mark.parametrize(("where", "value"), [
    ("landmarks.coverage_radius", "far"), ("landmarks.coverage_radius", -1.0), ("diagrams.max_scale", None),
    ("diagrams.max_scale", -3.0), ("diagrams.coefficient_field", 0), ("diagrams.filtration", 5),
    ("band.calls", "yes"), ("band.same_diagrams", 1), ("band.seed", "x"), ("band.method", None),
    ("peak_memory.bytes", "lots"), ("provenance.input.n_points", "many"), ("landmarks.method", []),
    ("diagrams.params", [1]), ("band.statement", 3), ("written_by", {}),
])
def test_scalar_fields(tmp_path, saved, where, value):
    def change(record):
        *parents, last = where.split(".")
        target = record
        for name in parents:
            target = target[name]
        target[last] = value

    refused(forged(tmp_path, saved, change), where)


def test_band_without_its_own_diagrams(tmp_path, saved):
    refused(forged(tmp_path, saved, lambda r: r["band"].update(same_diagrams=False, diagrams=None)),
            "band.diagrams")


def test_cutoff_flags_of_the_wrong_length(tmp_path, saved):
    def cut(arrays):
        arrays["diagrams.cutoff_flags.0"] = arrays["diagrams.cutoff_flags.0"][:-1]

    refused(forged(tmp_path, saved, arrays_change=cut), "diagrams.cutoff_flags.0")


def test_preview_points_and_indices_disagree(tmp_path, saved):
    def cut(arrays):
        arrays["preview_points"] = arrays["preview_points"][:-1]

    refused(forged(tmp_path, saved, arrays_change=cut), "preview_points")


def test_nearest_landmark_out_of_range(tmp_path, saved):
    def shift(arrays):
        arrays["landmarks.nearest"] = arrays["landmarks.nearest"] + 1000

    refused(forged(tmp_path, saved, arrays_change=shift), "landmarks.nearest")


def test_diagram_lists_of_different_lengths(tmp_path, saved):
    refused(forged(tmp_path, saved, lambda r: r["diagrams"]["cutoff_flags"].pop()), "diagrams.cutoff_flags")


def test_too_many_members(tmp_path, saved):
    record, arrays = members_of(saved)
    extra = {f"junk/{i}": b"" for i in range(20_001)}
    refused(write_run(tmp_path / "many.tdkrun", record, arrays, extra=extra), "members")


def test_stored_member_declaring_more_than_it_holds(tmp_path, saved):
    # Patch the central directory: run.json claims 400 MB uncompressed while stored (ratio 1 by definition).
    data = bytearray(saved)
    central = data.find(b"PK\x01\x02")
    struct.pack_into("<I", data, central + 24, 400_000_000)
    (tmp_path / "liar.tdkrun").write_bytes(bytes(data))
    refused(tmp_path / "liar.tdkrun", "run.json")
