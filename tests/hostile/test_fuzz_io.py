"""Fuzzing the readers and run files: random bytes and random JSON may only give tdakit's errors or a valid result.

A valid result must then be usable: a cloud has finite float64 points; a run prints its summary and table.
"""

from __future__ import annotations

import copy
import hashlib
import io
import json
import tempfile
import warnings
import zipfile
from pathlib import Path

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

import tdakit
from tdakit.errors import TdakitError
from tdakit.io import load_run
from tdakit.pipeline import analyze
from tdakit.shapes import circle

FUZZ = settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@pytest.fixture(scope="module")
def folder():
    with tempfile.TemporaryDirectory(prefix="tdakit-fuzz-") as name:
        yield Path(name)


@pytest.fixture(scope="module")
def valid_run(folder):
    cloud = tdakit.load_cloud(circle(150, noise=0.03, rng=1))
    options = {"sampling": {"n_landmarks": 20}, "complex": {"filtration": "rips", "max_scale": 1.5},
               "band": {"method": "bootstrap", "n_boot": 10}}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        path = analyze(cloud, options, rng=3).save(folder / "valid")
    with zipfile.ZipFile(path) as archive:
        record = json.loads(archive.read("run.json"))
        arrays = {name: np.load(io.BytesIO(archive.read(f"arrays/{name}.npy"))) for name in record["arrays"]}
    return path.read_bytes(), record, arrays


def cloud_or_tdakit_error(path, **options):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            cloud = tdakit.load_cloud(path, **options)
        except TdakitError as exc:
            assert path.name in str(exc) or exc.parameter in ("key", "columns", "delimiter", "header"), str(exc)
            return None
    assert cloud.points.dtype == np.float64 and np.isfinite(cloud.points).all()
    return cloud


def run_or_tdakit_error(path):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        try:
            run = load_run(path)
        except TdakitError as exc:
            assert path.name in str(exc), str(exc)
            return None
        assert run.summary()
        assert len(run.table) == sum(len(run.diagrams[k]) for k in range(len(run.diagrams)))  # a row per class
    return run


# -- readers ------------------------------------------------------------------------------------
@pytest.mark.entry("load_cloud")
@FUZZ
@given(data=st.binary(max_size=2048), suffix=st.sampled_from([".csv", ".txt", ".tsv", ".dat", ".npy", ".npz"]))
def test_random_bytes_as_a_data_file(folder, data, suffix):
    path = folder / f"random{suffix}"
    path.write_bytes(data)
    cloud_or_tdakit_error(path)


_TOKENS = ["1", "-2.5", "3e2", "1e400", "nan", "inf", "", " ", ",", ";", "\t", "|", "\n", "\r\n", '"', "#",
           "x", "y", "\ufeff", "0,5", "é", "\x00", "1_0", "--", "+", ".", "9" * 30]


@pytest.mark.entry("load_cloud")
@FUZZ
@given(tokens=st.lists(st.sampled_from(_TOKENS), max_size=80),
       options=st.fixed_dictionaries({}, optional={"header": st.booleans(), "delimiter": st.sampled_from([",", ";"]),
                                                   "columns": st.lists(st.integers(-1, 3), min_size=1, max_size=3)}))
def test_text_like_tables(folder, tokens, options):
    path = folder / "table.csv"
    path.write_text("".join(tokens), encoding="utf-8")
    cloud_or_tdakit_error(path, **options)


def overwritten(original: bytes, data: bytes, position: int, path):
    """``original`` with ``data`` written over it at ``position`` (modulo its length), saved at ``path``."""
    damaged = bytearray(original)
    start = position % len(damaged)
    damaged[start:start + len(data)] = data
    path.write_bytes(bytes(damaged))
    return path


@pytest.mark.entry("load_cloud")
@FUZZ
@given(data=st.binary(min_size=1, max_size=64), position=st.integers(0, 10_000))
def test_damaged_npz(folder, data, position):
    buffer = io.BytesIO()
    np.savez(buffer, points=np.arange(40.0).reshape(20, 2))
    cloud_or_tdakit_error(overwritten(buffer.getvalue(), data, position, folder / "damaged.npz"))


@pytest.mark.entry("load_cloud")
@FUZZ
@given(data=st.binary(min_size=1, max_size=32), position=st.integers(0, 400))
def test_damaged_npy(folder, data, position):
    buffer = io.BytesIO()
    np.save(buffer, np.arange(60.0).reshape(20, 3))
    cloud_or_tdakit_error(overwritten(buffer.getvalue(), data, position, folder / "damaged.npy"))


# -- run files ----------------------------------------------------------------------------------
@pytest.mark.entry("load_run")
@FUZZ
@given(data=st.binary(max_size=4096))
def test_random_bytes_as_a_run_file(folder, data):
    path = folder / "random.tdkrun"
    path.write_bytes(data)
    run_or_tdakit_error(path)


@pytest.mark.entry("load_run")
@FUZZ
@given(data=st.binary(min_size=1, max_size=16), position=st.integers(0, 10**6))
def test_damaged_run_file(folder, valid_run, data, position):
    original = bytearray(valid_run[0])
    start = position % len(original)
    original[start:start + len(data)] = data
    path = folder / "damaged.tdkrun"
    path.write_bytes(bytes(original))
    run_or_tdakit_error(path)


_JSON = st.recursive(
    st.none() | st.booleans() | st.integers(-10**6, 10**6) | st.floats(allow_nan=True, allow_infinity=True)
    | st.text(max_size=12),
    lambda children: st.lists(children, max_size=4) | st.dictionaries(st.text(max_size=8), children, max_size=4),
    max_leaves=20)


def _write(path, record, arrays, raw=None):
    with zipfile.ZipFile(path, "w") as archive:
        archive.writestr("run.json", raw if raw is not None else json.dumps(record))
        for name, array in arrays.items():
            buffer = io.BytesIO()
            np.save(buffer, array)
            archive.writestr(f"arrays/{name}.npy", buffer.getvalue())


@pytest.mark.entry("load_run")
@FUZZ
@given(value=_JSON)
def test_random_json_as_run_record(folder, valid_run, value):
    path = folder / "shape.tdkrun"
    _write(path, None, valid_run[2], raw=json.dumps(value))
    run_or_tdakit_error(path)


def _paths(value, prefix=()):
    """Every (path, value) inside a JSON value."""
    yield prefix
    if isinstance(value, dict):
        for key, item in value.items():
            yield from _paths(item, (*prefix, key))
    elif isinstance(value, list):
        for i, item in enumerate(value):
            yield from _paths(item, (*prefix, i))


@pytest.mark.entry("load_run")
@FUZZ
@given(choice=st.integers(0, 10**6), value=_JSON, delete=st.booleans())
def test_one_field_of_a_valid_record_replaced(folder, valid_run, choice, value, delete):
    record = copy.deepcopy(valid_run[1])
    paths = [p for p in _paths(record) if p]
    where = paths[choice % len(paths)]
    parent = record
    for key in where[:-1]:
        parent = parent[key]
    if delete and isinstance(parent, dict):
        del parent[where[-1]]
    else:
        parent[where[-1]] = value
    path = folder / "field.tdkrun"
    _write(path, record, valid_run[2])
    run_or_tdakit_error(path)


_ARRAYS = st.sampled_from(["f8", "i8", "b1", "f4", "u1"]).flatmap(
    lambda dtype: st.lists(st.integers(0, 4), min_size=0, max_size=3).map(
        lambda shape: np.arange(int(np.prod(shape)) if shape else 1).reshape(shape or ()).astype(dtype)))


@pytest.mark.entry("load_run")
@FUZZ
@given(choice=st.integers(0, 10**6), array=_ARRAYS)
def test_one_array_replaced_with_matching_checksum(folder, valid_run, choice, array):
    record = copy.deepcopy(valid_run[1])
    arrays = dict(valid_run[2])
    name = sorted(arrays)[choice % len(arrays)]
    arrays[name] = array
    record["arrays"][name] = {"shape": list(array.shape), "dtype": array.dtype.str,
                              "sha256": hashlib.sha256(np.ascontiguousarray(array).tobytes()).hexdigest()}
    path = folder / "array.tdkrun"
    _write(path, record, arrays)
    run_or_tdakit_error(path)
