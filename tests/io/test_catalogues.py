"""FITS, HDF5 and Parquet catalogues through load_cloud: round trips, unusual files, row filters, units, memory.

Every file is written here by the format's own library from invented data (the Marrowfield halos and shape
samplers), then read back through tdakit.
"""

import argparse
import json
import re
import subprocess
import sys
import textwrap
import tracemalloc
import warnings

import h5py
import numpy as np
import pyarrow as pa
import pyarrow.parquet as pq
import pytest
from astropy.io import fits
from astropy.table import MaskedColumn, Table
from hypothesis import given
from hypothesis import strategies as st

import tdakit
from tdakit import shapes
from tdakit.cli import options
from tdakit.errors import DataFileNotFoundError, InvalidDataError, InvalidParameterError
from tdakit.io.catalogues import (
    LargeReadWarning,
    MissingExtraError,
    MixedUnitsWarning,
    parse_where,
    read_catalogue,
)
from tdakit.io.catalogues import reading as catalogue_reading
from tdakit.scenarios import marrowfield_halos


@pytest.fixture(scope="module")
def halos():
    positions, masses = marrowfield_halos(600, rng=11)
    return {"x": positions[:, 0], "y": positions[:, 1], "z": positions[:, 2], "mass": masses}


def write_fits(path, columns, units=None, **kwargs):
    units = units or {}
    hdu = fits.BinTableHDU.from_columns(
        [fits.Column(name=name, format="D", array=values, unit=units.get(name)) for name, values in columns.items()],
        **kwargs)
    hdu.writeto(path)
    return path


def write_hdf5_group(path, group, columns, units=None):
    with h5py.File(path, "w") as handle:
        node = handle.create_group(group)
        for name, values in columns.items():
            node.create_dataset(name, data=values)
            if units and name in units:
                node[name].attrs["unit"] = units[name]
    return path


def write_parquet(path, columns, units=None, **kwargs):
    units = units or {}
    fields = [pa.field(name, pa.float64(), metadata={"unit": units[name]} if name in units else None)
              for name in columns]
    pq.write_table(pa.table(dict(columns), schema=pa.schema(fields)), path, **kwargs)
    return path


def as_table(columns, names):
    return np.column_stack([columns[name] for name in names])


# -- round trips ------------------------------------------------------------------------------------------
def test_round_trip_fits_hdf5_parquet_exact(tmp_path, halos):
    names = ["x", "y", "z"]
    expected = as_table(halos, names)
    files = [write_fits(tmp_path / "halos.fits", halos), write_hdf5_group(tmp_path / "halos.h5", "halos", halos),
             write_parquet(tmp_path / "halos.parquet", halos)]
    for path in files:
        cloud = tdakit.load_cloud(path, columns=names)
        np.testing.assert_array_equal(cloud.points, expected)
        assert cloud.columns == tuple(names) and cloud.source_checksum is not None
        assert dict(cloud.read_options)["columns"] == names
        again = tdakit.load_cloud(path, **dict(cloud.read_options))  # what a rerun does with the provenance
        np.testing.assert_array_equal(again.points, cloud.points)


def test_hdf5_compound_and_2d_datasets(tmp_path, halos):
    compound = np.zeros(600, dtype=[("x", "<f8"), ("y", ">f8"), ("z", "<f4"), ("id", "<i8")])
    for name in "xy":
        compound[name] = halos[name]
    compound["z"] = halos["z"].astype(np.float32)
    compound["id"] = np.arange(600)
    with h5py.File(tmp_path / "c.hdf5", "w") as handle:
        handle.create_dataset("snapshot/halos", data=compound, chunks=(128,))
        handle.create_dataset("snapshot/positions", data=as_table(halos, "xyz"))
    cloud = tdakit.load_cloud(tmp_path / "c.hdf5", dataset="snapshot/halos", columns=["id", "x", "y", "z"])
    np.testing.assert_array_equal(cloud.points, np.column_stack(
        [np.arange(600), halos["x"], halos["y"], halos["z"].astype(np.float32)]))
    cloud = tdakit.load_cloud(tmp_path / "c.hdf5", dataset="snapshot/positions", where="x1 > 50")
    np.testing.assert_array_equal(cloud.points, as_table(halos, "xyz")[halos["y"] > 50])
    assert cloud.columns == ("x0", "x1", "x2")
    with pytest.raises(InvalidParameterError, match="several tables.*snapshot/halos.*snapshot/positions"):
        tdakit.load_cloud(tmp_path / "c.hdf5")


def test_fits_gz_and_explicit_format_and_extension_choice(tmp_path, halos):
    table = as_table(halos, "xyz")
    primary = fits.PrimaryHDU()
    first = fits.BinTableHDU.from_columns([fits.Column(name="a", format="D", array=np.arange(5.0))], name="OTHER")
    second = fits.BinTableHDU.from_columns(
        [fits.Column(name=n, format="D", array=halos[n]) for n in "xyz"], name="HALOS")
    fits.HDUList([primary, first, second]).writeto(tmp_path / "two.fits.gz")
    cloud = tdakit.load_cloud(tmp_path / "two.fits.gz", dataset="HALOS")
    np.testing.assert_array_equal(cloud.points, table)
    (tmp_path / "two.fits.gz").rename(tmp_path / "two.bin")
    with pytest.raises(InvalidParameterError, match="table extension.*1 \\(OTHER\\), 2 \\(HALOS\\)"):
        tdakit.load_cloud(tmp_path / "two.bin", file_format="fits", dataset="NOPE")
    np.testing.assert_array_equal(tdakit.load_cloud(tmp_path / "two.bin", file_format="fits", dataset=2).points,
                                  table)


# -- unusual features -------------------------------------------------------------------------------------
def test_big_endian_fits_and_hdf5_columns(tmp_path):
    rng = np.random.default_rng(5)
    raw = {"f8": rng.normal(size=300).astype(">f8"), "f4": rng.normal(size=300).astype(">f4"),
           "i2": rng.integers(-3000, 3000, 300).astype(">i2"), "i8": rng.integers(-2**40, 2**40, 300).astype(">i8")}
    formats = {"f8": "D", "f4": "E", "i2": "I", "i8": "K"}
    fits.BinTableHDU.from_columns([fits.Column(name=k, format=formats[k], array=v) for k, v in raw.items()]).writeto(
        tmp_path / "be.fits")
    with h5py.File(tmp_path / "be.h5", "w") as handle:
        for name, values in raw.items():
            handle.create_dataset(f"t/{name}", data=values, dtype=values.dtype)
        assert handle["t/f8"].dtype.byteorder == ">"
    expected = np.column_stack([v.astype(np.float64) for v in raw.values()])
    for path in (tmp_path / "be.fits", tmp_path / "be.h5"):
        cloud = tdakit.load_cloud(path, columns=list(raw), where="i2 > -1000 and f4 < 1.5")
        keep = (raw["i2"] > -1000) & (raw["f4"] < 1.5)
        np.testing.assert_array_equal(cloud.points, expected[keep])


def test_masked_values_error_names_column_and_row_or_are_dropped(tmp_path):
    rng = np.random.default_rng(6)
    values = rng.normal(size=(50, 2))
    flag = np.zeros(50, dtype=bool)
    flag[[7, 30]] = True
    values[[7, 30], 1] = -1.0  # outside the filter "b > 0" below
    counts = np.arange(50)
    table = Table()
    table["a"] = values[:, 0]
    table["a"][12] = np.nan
    table["b"] = values[:, 1]
    table["n"] = MaskedColumn(counts, mask=flag, fill_value=-99)  # written with TNULL = -99
    table.write(tmp_path / "masked.fits")
    with pytest.raises(InvalidDataError, match=r"Column 'n' of .* missing value .* row 7 .*drop_missing=True"):
        tdakit.load_cloud(tmp_path / "masked.fits", columns=["n", "b"])
    with pytest.raises(InvalidDataError, match=r"Column 'a' .* row 12"):
        tdakit.load_cloud(tmp_path / "masked.fits")
    keep = ~flag
    keep[12] = False
    cloud = tdakit.load_cloud(tmp_path / "masked.fits", drop_missing=True)
    np.testing.assert_array_equal(cloud.points, np.column_stack([values, counts])[keep])
    # A missing value in a chosen column, in a row the filter excludes, is never read: no error. The filter's own
    # columns must be present in every row.
    cloud = tdakit.load_cloud(tmp_path / "masked.fits", columns=["n"], where="b > 0")
    np.testing.assert_array_equal(cloud.points[:, 0], counts[values[:, 1] > 0])
    with pytest.raises(InvalidDataError, match=r"Column 'a' .* row 12"):
        tdakit.load_cloud(tmp_path / "masked.fits", columns=["b"], where="a > 0")


def test_parquet_nulls_and_nan(tmp_path):
    a = pa.array([1.0, 2.0, None, 4.0, 5.0, float("nan"), 7.0, 8.0])
    b = pa.array([1, 2, 3, None, 5, 6, 7, 8], type=pa.int32())
    pq.write_table(pa.table({"a": a, "b": b}), tmp_path / "nulls.pq", row_group_size=3)
    with pytest.raises(InvalidDataError, match=r"Column 'a' .* row 2 \(counting from 0"):
        tdakit.load_cloud(tmp_path / "nulls.pq")
    with pytest.raises(InvalidDataError, match=r"Column 'b' .* row 3"):
        tdakit.load_cloud(tmp_path / "nulls.pq", columns=["b"])
    table = read_catalogue(tmp_path / "nulls.pq", drop_missing=True, chunk_rows=2)
    np.testing.assert_array_equal(table.values, [[1, 1], [2, 2], [5, 5], [7, 7], [8, 8]])
    assert table.n_dropped_missing == 3 and table.n_rows == 8


def test_hdf5_nan_values(tmp_path):
    values = np.arange(20.0).reshape(10, 2)
    values[6, 1] = np.nan
    with h5py.File(tmp_path / "nan.h5", "w") as handle:
        handle["table"] = values
    with pytest.raises(InvalidDataError, match=r"Column 'x1' .* row 6"):
        tdakit.load_cloud(tmp_path / "nan.h5")
    cloud = tdakit.load_cloud(tmp_path / "nan.h5", drop_missing=True)
    np.testing.assert_array_equal(cloud.points, np.delete(values, 6, axis=0))
    assert dict(cloud.read_options)["drop_missing"] is True


def test_nested_hdf5_groups(tmp_path, halos):
    with h5py.File(tmp_path / "nested.h5", "w") as handle:
        for region, sign in (("north", 1.0), ("south", -1.0)):
            group = handle.create_group(f"survey/{region}/halos")
            for name in "xyz":
                group.create_dataset(name, data=sign * halos[name])
            group.create_dataset("mass", data=halos["mass"])
            group["x"].attrs["units"] = b"Mpc/h"
    path = tmp_path / "nested.h5"
    with pytest.warns(MixedUnitsWarning, match="'x': 'Mpc/h', 'y': None"):
        cloud = tdakit.load_cloud(path, dataset="/survey/south/halos", columns=["x", "y"], where="mass > 1")
    np.testing.assert_array_equal(cloud.points, -as_table(halos, "xy")[halos["mass"] > 1])
    with pytest.raises(InvalidParameterError, match="survey/north/halos.*survey/south/halos"):
        tdakit.load_cloud(path, columns=["x", "y"])
    with pytest.raises(InvalidParameterError, match="dataset.*'survey/east'"):
        tdakit.load_cloud(path, dataset="survey/east")


def test_parquet_filter_across_row_groups_and_chunks(tmp_path, halos):
    path = write_parquet(tmp_path / "groups.parquet", halos, row_group_size=97)
    assert pq.ParquetFile(path).metadata.num_row_groups == 7
    expected = as_table(halos, "xyz")[(halos["mass"] > 1.2) | (halos["z"] < 10)]
    for chunk_rows in (1, 50, 97, 1000):
        table = read_catalogue(path, columns=["x", "y", "z"], where="mass > 1.2 or z < 10", chunk_rows=chunk_rows)
        np.testing.assert_array_equal(table.values, expected)


# -- the row filter ---------------------------------------------------------------------------------------
_COLUMNS = ("a", "b", "c_1")
_NUMPY_OPERATORS = {"<": np.less, "<=": np.less_equal, ">": np.greater, ">=": np.greater_equal, "==": np.equal,
                    "!=": np.not_equal}


def _comparison():
    operand = st.one_of(st.sampled_from(_COLUMNS), st.integers(-3, 3), st.floats(-3, 3).map(lambda v: round(v, 2)))
    return st.tuples(st.sampled_from(_COLUMNS), st.sampled_from(sorted(_NUMPY_OPERATORS)), operand,
                     st.booleans())


_expressions = st.recursive(
    _comparison().map(lambda t: ("cmp",) + t),
    lambda inner: st.one_of(st.tuples(st.just("not"), inner), st.tuples(st.sampled_from(["and", "or"]), inner, inner)),
    max_leaves=8)


def _render(tree) -> str:
    """Text of an expression tree, with spacing and keyword case varied."""
    if tree[0] == "cmp":
        _, column, operator, operand, flip = tree
        left, right = (operand, column) if flip and not isinstance(operand, str) else (column, operand)
        return f"{left}{operator} {right}" if flip else f"{left} {operator}{right}"
    if tree[0] == "not":
        return f"NOT ({_render(tree[1])})"
    return f"({_render(tree[1])}) {tree[0]} ({_render(tree[2])})"


def _numpy_value(tree, data):
    """The same expression evaluated directly with numpy operators (the reference)."""
    if tree[0] == "cmp":
        _, column, operator, operand, flip = tree
        other = data[operand] if isinstance(operand, str) else operand
        if flip and not isinstance(operand, str):
            return _NUMPY_OPERATORS[operator](other, data[column])
        return _NUMPY_OPERATORS[operator](data[column], other)
    if tree[0] == "not":
        return ~_numpy_value(tree[1], data)
    combine = np.logical_and if tree[0] == "and" else np.logical_or
    return combine(_numpy_value(tree[1], data), _numpy_value(tree[2], data))


@given(tree=_expressions, seed=st.integers(0, 2**32 - 1))
def test_where_matches_numpy_on_random_data(tree, seed):
    rng = np.random.default_rng(seed)
    data = {name: rng.integers(-3, 4, 40).astype(float) + rng.choice([0.0, 0.5], 40) for name in _COLUMNS}
    row_filter = parse_where(_render(tree))
    np.testing.assert_array_equal(row_filter.evaluate(data), _numpy_value(tree, data))


def test_where_chained_comparisons_and_quoted_names():
    data = {"z": np.array([0.0, 0.05, 0.1, 0.2]), "mag r": np.array([18.0, 20.0, 18.0, 18.0])}
    rows = parse_where("0 < z <= 0.1 and `mag r` < 19.5")
    assert rows.columns == ("z", "mag r")
    np.testing.assert_array_equal(rows.evaluate(data), [False, False, True, False])
    np.testing.assert_array_equal(parse_where("z>-1e-3").evaluate(data), [True] * 4)


@pytest.mark.parametrize("text, problem", [
    ("__import__('os').system('true')", "unexpected \"'\" at character 12"),
    ("a + 1 > 2", "unexpected '+'"),
    ("a > 'x'", "unexpected \"'\""),
    ("a", "expected a comparison operator"),
    ("1 < 2", "two numbers"),
    ("a >", "expected a column name or a number, found the end of the filter"),
    ("(a > 1", "not closed"),
    ("a > 1 or", "found the end of the filter"),
    ("a.b() > 1", "after column 'a.b', found '('"),
    ("a > 1; b < 2", "unexpected ';'"),
    ("a > 1 b < 2", "expected 'and', 'or'"),
    ("a ** 2 > 1", "unexpected '*'"),
    ("lambda: 1", "unexpected ':'"),
    ("not " * 60 + "a > 1", "nested"),
    ("", "non-empty"),
    (3, "non-empty"),
])
def test_where_refuses_everything_else(text, problem):
    with pytest.raises(InvalidParameterError, match=re.escape(problem)) as info:
        parse_where(text)
    assert info.value.parameter == "where"


@given(st.text(max_size=40))
def test_where_never_crashes(text):
    try:
        parse_where(text)
    except InvalidParameterError:
        pass


def test_where_names_unknown_and_non_numeric_columns(tmp_path):
    Table({"a": np.arange(5.0), "name": ["p", "q", "r", "s", "t"]}).write(tmp_path / "t.fits")
    with pytest.raises(InvalidParameterError, match="column 'b'.*valid names: 'a', 'name'"):
        tdakit.load_cloud(tmp_path / "t.fits", columns=["a"], where="b > 1")
    with pytest.raises(InvalidDataError, match="Column 'name' .* does not hold numbers or booleans"):
        tdakit.load_cloud(tmp_path / "t.fits", columns=["a"], where="name > 1")
    with pytest.raises(InvalidDataError, match="Column 'name' .* does not hold numbers"):
        tdakit.load_cloud(tmp_path / "t.fits")
    with pytest.raises(InvalidParameterError, match="'columns'.*valid names: 'a', 'name'"):
        tdakit.load_cloud(tmp_path / "t.fits", columns=["A"])


# -- units ------------------------------------------------------------------------------------------------
def test_units_read_from_each_format(tmp_path, halos):
    units = {"x": "Mpc/h", "y": "Mpc/h", "z": "Mpc/h", "mass": "Msun/h"}
    files = [write_fits(tmp_path / "u.fits", halos, units), write_hdf5_group(tmp_path / "u.h5", "g", halos, units),
             write_parquet(tmp_path / "u.parquet", halos, units)]
    for path in files:
        assert tdakit.load_cloud(path, columns=["x", "y", "z"]).unit == "Mpc/h"
        assert tdakit.load_cloud(path, columns=["x", "y"], unit="kpc").unit == "kpc"  # the explicit unit wins
        with pytest.warns(MixedUnitsWarning, match="'z': 'Mpc/h', 'mass': 'Msun/h'"):
            assert tdakit.load_cloud(path, columns=["z", "mass"]).unit is None
        with warnings.catch_warnings():
            warnings.simplefilter("error")
            assert tdakit.load_cloud(path, columns=["z", "mass"], standardize=True, unit="sigma").unit == "sigma"
    with h5py.File(tmp_path / "compound.h5", "w") as handle:
        data = np.zeros(4, dtype=[("ra", "f8"), ("dec", "f8")])
        data["ra"], data["dec"] = [1, 2, 3, 4], [5, 6, 7, 9]
        handle["t"] = data
        handle["t"].attrs["units"] = ["deg", "deg"]
    assert tdakit.load_cloud(tmp_path / "compound.h5").unit == "deg"


# -- errors -----------------------------------------------------------------------------------------------
def test_missing_extra_names_the_install_command(tmp_path, monkeypatch, halos):
    for module, path in (("h5py", write_hdf5_group(tmp_path / "m.h5", "g", halos)),
                         ("pyarrow.parquet", write_parquet(tmp_path / "m.parquet", halos)),
                         ("astropy.io.fits", write_fits(tmp_path / "m.fits", halos))):
        with monkeypatch.context() as patch:
            patch.setitem(sys.modules, module, None)  # makes `import module` fail
            with pytest.raises(MissingExtraError, match=r"pip install tdakit\[formats\]") as info:
                tdakit.load_cloud(path)
            assert isinstance(info.value, ImportError)


def test_bad_options_are_refused(tmp_path, halos):
    path = write_parquet(tmp_path / "o.parquet", halos)
    with pytest.raises(InvalidParameterError, match="'dataset'.*None for Parquet"):
        tdakit.load_cloud(path, dataset="x")
    with pytest.raises(InvalidParameterError, match="'file_format'.*'fits', 'hdf5', 'parquet'"):
        tdakit.load_cloud(path, file_format="excel")
    with pytest.raises(InvalidParameterError, match="'where'.*unless 'source' is a FITS"):
        tdakit.load_cloud(np.zeros((5, 2)), where="x0 > 1")
    with pytest.raises(InvalidParameterError, match="'delimiter'.*None for FITS"):
        tdakit.load_cloud(path, delimiter=",")
    with pytest.raises(DataFileNotFoundError):
        tdakit.load_cloud(tmp_path / "absent.fits")
    (tmp_path / "junk.h5").write_bytes(b"not an hdf5 file at all")
    with pytest.raises(InvalidDataError, match="as an HDF5 file"):
        tdakit.load_cloud(tmp_path / "junk.h5")


def test_damaged_files_give_a_clear_error(tmp_path):
    values = np.random.default_rng(12).normal(size=(100_000, 3))
    with h5py.File(tmp_path / "damaged.h5", "w") as handle:
        handle.create_dataset("t", data=values, chunks=(1000, 3), compression="gzip")
    content = bytearray((tmp_path / "damaged.h5").read_bytes())
    middle = len(content) // 2
    content[middle:middle + 5000] = bytes(5000)  # zeros over compressed chunks
    (tmp_path / "damaged.h5").write_bytes(bytes(content))
    with pytest.raises(InvalidDataError, match="Could not read .*damaged.h5"):
        tdakit.load_cloud(tmp_path / "damaged.h5")
    fits.BinTableHDU.from_columns([fits.Column(name="a", format="D", array=values[:, 0])]).writeto(tmp_path / "t.fits")
    content = (tmp_path / "t.fits").read_bytes()
    (tmp_path / "t.fits").write_bytes(content[: len(content) // 2])  # truncated
    with pytest.raises(InvalidDataError, match="Could not read the table of .*t.fits"), \
            pytest.warns(UserWarning, match="truncated"):  # astropy's own warning comes first
        tdakit.load_cloud(tmp_path / "t.fits")


def test_gzip_fits_warns_before_decompressing_a_large_table(tmp_path, monkeypatch):
    points = shapes.torus(2000, rng=3)
    columns = {"c0": points[:, 0], "c1": points[:, 1], "c2": points[:, 2], "c3": np.zeros(2000)}
    write_fits(tmp_path / "big.fits.gz", columns)
    monkeypatch.setattr(catalogue_reading, "GZIP_WARNING_BYTES", 1000)  # the shipped limit is 16 MiB
    with pytest.warns(LargeReadWarning, match="gzip-compressed.*Decompress it first"):
        table = read_catalogue(tmp_path / "big.fits.gz", columns=["c0"])
    np.testing.assert_array_equal(table.values[:, 0], points[:, 0])
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # reading 4 of 4 columns decompresses nothing unread: no warning
        read_catalogue(tmp_path / "big.fits.gz")


# -- memory -----------------------------------------------------------------------------------------------
_PARQUET_MEMORY = textwrap.dedent("""
    import json, sys, tracemalloc
    import pyarrow as pa
    from tdakit.io.catalogues import read_catalogue
    import pandas, pyarrow.parquet  # imported first (pyarrow imports pandas on first use): import is not reading
    path, where = sys.argv[1], (sys.argv[2] or None)
    tracemalloc.start()
    table = read_catalogue(path, columns=["x", "y", "z"], where=where)
    peak = tracemalloc.get_traced_memory()[1]
    # pyarrow's buffers live in its own memory pool, outside tracemalloc; its peak covers this process's one read
    print(json.dumps({"traced": peak / table.values.nbytes,
                      "arrow": pa.default_memory_pool().max_memory() / table.values.nbytes}))
""")


@pytest.mark.slow
def test_peak_memory_while_reading_stays_within_1_2x_the_output(tmp_path):
    # 4 million rows, 4 columns: the output (3 chosen float64 columns) is 96 MB (66 MB with the filter). The peak
    # traced by tracemalloc (numpy, h5py and astropy buffers) plus pyarrow's memory pool must stay <= 1.2x it.
    rng = np.random.default_rng(8)
    n = 4_000_000
    columns = {name: rng.normal(size=n) for name in ("x", "y", "z", "w")}
    write_fits(tmp_path / "m.fits", columns)
    with h5py.File(tmp_path / "m.h5", "w") as handle:
        for name, values in columns.items():
            handle.create_dataset(f"t/{name}", data=values, chunks=(1 << 16,))
    write_parquet(tmp_path / "m.parquet", columns)
    del columns
    for name in ("m.fits", "m.h5"):
        read_catalogue(tmp_path / name, columns=["x"], where="x > 1e9")  # the libraries' first-use imports
        for where in (None, "w > -0.5"):
            tracemalloc.start()
            table = read_catalogue(tmp_path / name, columns=["x", "y", "z"], where=where)
            ratio = tracemalloc.get_traced_memory()[1] / table.values.nbytes
            tracemalloc.stop()
            del table
            assert ratio <= 1.2, (name, where, ratio)
    for where in ("", "w > -0.5"):  # a fresh interpreter for each, so that pyarrow's pool peak is this read's
        result = subprocess.run([sys.executable, "-c", _PARQUET_MEMORY, str(tmp_path / "m.parquet"), where],
                                capture_output=True, text=True, check=True)
        ratios = json.loads(result.stdout)
        assert ratios["traced"] + ratios["arrow"] <= 1.2, (where, ratios)


# -- command line -----------------------------------------------------------------------------------------
def test_command_line_flags_and_config_keys_reach_load_cloud(tmp_path, halos):
    path = write_parquet(tmp_path / "halos.data", halos, units={"x": "Mpc", "y": "Mpc", "z": "Mpc"})
    parser = argparse.ArgumentParser()
    options.add_input_arguments(parser)
    args = parser.parse_args(["--columns", "x,y,z", "--where", "mass > 1", "--file-format", "parquet"])
    cloud = options.load(path, options.input_settings(args))
    np.testing.assert_array_equal(cloud.points, as_table(halos, "xyz")[halos["mass"] > 1])
    assert cloud.unit == "Mpc" and dict(cloud.read_options)["where"] == "mass > 1"
    config = {"input": {"columns": ["x", "y", "z"], "file_format": "parquet", "where": "mass > 5", "unit": "kpc"}}
    args = parser.parse_args(["--where", "mass <= 1", "--unit", "Gpc"])  # the command line wins over the config
    cloud = options.load(path, options.input_settings(args, config))
    assert cloud.n_points == int((halos["mass"] <= 1).sum()) and cloud.unit == "Gpc"
    args = parser.parse_args(["--columns", "x,y,z", "--file-format", "parquet", "--angle-unit", "rad"])
    with pytest.raises(InvalidParameterError, match="--angle-unit.*add --sky"):
        options.load(path, options.input_settings(args))
    sky = write_parquet(tmp_path / "sky.pq", {"ra": 3.6 * halos["x"], "dec": 1.8 * halos["y"] - 90,
                                               "redshift": halos["mass"] / 100})
    config = {"input": {"sky": "redshift", "cosmology": "H0=70,Om0=0.3"}}
    args = parser.parse_args(["--columns", "ra,dec,redshift", "--little-h"])
    cloud = options.load(sky, options.input_settings(args, config))
    record = dict(cloud.read_options)["sky"]
    assert cloud.unit == "Mpc/h" and record["cosmology"] == "H0=70,Om0=0.3" and record["little_h"] is True
