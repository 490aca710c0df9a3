"""Hostile inputs to ``load_cloud``: every damaged, odd or misleading file ends in tdakit's own error.

Each case asserts the error class and that the message names the file (or the parameter at fault),
and for text files the 1-based file line (header and comments counted).
"""

from __future__ import annotations

import gzip
import os
import stat
import threading
import zipfile

import numpy as np
import pandas as pd
import pytest

import tdakit
from tdakit.errors import DataFileNotFoundError, InvalidDataError, InvalidParameterError, TdakitError

pytestmark = pytest.mark.entry("load_cloud")


def refused(path, error=InvalidDataError, *fragments, **options):
    """Load ``path``; assert ``error`` whose message names the file and holds every fragment."""
    with pytest.raises(error) as caught:
        tdakit.load_cloud(path, **options)
    message = str(caught.value)
    assert os.path.basename(str(path)) in message, message
    for fragment in fragments:
        assert fragment.lower() in message.lower(), (fragment, message)
    return message


def write(tmp_path, name, content):
    path = tmp_path / name
    if isinstance(content, str):
        content = content.encode()
    path.write_bytes(content)
    return path


# -- the cases of issue 17 -------------------------------------------------------------------
def test_row_with_an_extra_field(tmp_path):
    path = write(tmp_path, "extra.csv", "x,y\n1,2\n3,4,5\n6,7\n")
    refused(path, InvalidDataError, "line 3", "3 fields", "2")


@pytest.mark.silent
def test_row_longer_than_the_header_never_shifts_columns(tmp_path):
    # pandas took the first field as a row label here and shifted every column left.
    path = write(tmp_path, "long.csv", "x,y\n1,2,3\n4,5,6\n")
    refused(path, InvalidDataError, "line 2", "header")


def test_row_shorter_than_the_header(tmp_path):
    path = write(tmp_path, "short.csv", "x,y,z\n1,2,3\n4,5\n")
    refused(path, InvalidDataError, "line 3", "2 fields")


def test_quoted_decimal_comma_cell(tmp_path):
    path = write(tmp_path, "quoted.csv", 'x,y\n"1,5",2\n3,4\n')
    refused(path, InvalidDataError, "'1,5'", "line 2", "decimal")


def test_latin1_text(tmp_path):
    path = write(tmp_path, "latin.csv", "caf\u00e9,y\n1,2\n3,4\n".encode("latin-1"))
    refused(path, InvalidDataError, "UTF-8", "line 1")


def test_utf16_text(tmp_path):
    path = write(tmp_path, "wide.csv", "x,y\n1,2\n3,4\n".encode("utf-16"))
    refused(path, InvalidDataError, "UTF-16")


def test_binary_garbage(tmp_path):
    path = write(tmp_path, "garbage.csv", np.random.default_rng(1).bytes(4096))
    refused(path, InvalidDataError, "not text")


def test_gzip_named_csv(tmp_path):
    path = write(tmp_path, "packed.csv", gzip.compress(b"x,y\n1,2\n3,4\n"))
    refused(path, InvalidDataError, "gzip")


def test_zip_named_csv(tmp_path):
    with zipfile.ZipFile(tmp_path / "packed.csv", "w") as archive:
        archive.writestr("a.csv", "x,y\n1,2\n")
    refused(tmp_path / "packed.csv", InvalidDataError, "ZIP")


def test_folder_named_csv(tmp_path):
    (tmp_path / "x.csv").mkdir()
    refused(tmp_path / "x.csv", InvalidDataError, "folder")


def test_garbage_npz(tmp_path):
    path = write(tmp_path, "garbage.npz", b"PK\x03\x04" + np.random.default_rng(2).bytes(500))
    refused(path, InvalidDataError)


def test_truncated_npz(tmp_path):
    np.savez(tmp_path / "full.npz", points=np.random.default_rng(0).normal(size=(50, 3)))
    data = (tmp_path / "full.npz").read_bytes()
    path = write(tmp_path, "cut.npz", data[: len(data) // 2])
    refused(path, InvalidDataError, "truncated")


def test_npz_with_a_pickled_member_is_refused_in_tdakits_words(tmp_path):
    np.savez(tmp_path / "pickled.npz", points=np.array([[1, 2], [3, 4]], dtype=object))
    message = refused(tmp_path / "pickled.npz", InvalidDataError, "pickle", "'points'")
    assert "allow_pickle" not in message


def test_npy_of_object_dtype(tmp_path):
    np.save(tmp_path / "objects.npy", np.array([[1, "a"], [2, "b"]], dtype=object), allow_pickle=True)
    refused(tmp_path / "objects.npy", InvalidDataError, "pickle")


@pytest.mark.hang
def test_million_column_line_is_refused_before_parsing(tmp_path):
    path = write(tmp_path, "wide.csv", ",".join(["1"] * 1_000_000) + "\n" + ",".join(["2"] * 1_000_000) + "\n")
    refused(path, InvalidDataError, "line 1", "columns")


@pytest.mark.hang
def test_over_long_line_is_refused(tmp_path):
    path = write(tmp_path, "longline.csv", "x,y\n1,2\n" + "3," + "4" * 3_000_000 + "\n")
    refused(path, InvalidDataError, "line 3", "characters")


def _finishes(function, timeout=60.0):
    """Run ``function`` in a daemon thread; return its exception (a blocked open would never return)."""
    outcome = {}

    def target():
        try:
            function()
        except BaseException as exc:  # noqa: BLE001 - handed back to the test
            outcome["error"] = exc

    worker = threading.Thread(target=target, daemon=True)
    worker.start()
    worker.join(timeout)
    assert not worker.is_alive(), "load_cloud blocked (it opened a non-regular file)"
    return outcome.get("error")


@pytest.mark.hang
@pytest.mark.skipif(not hasattr(os, "mkfifo"), reason="no named pipes on this system")
def test_fifo_named_csv_is_refused_without_blocking(tmp_path):
    os.mkfifo(tmp_path / "pipe.csv")
    error = _finishes(lambda: tdakit.load_cloud(tmp_path / "pipe.csv"))
    try:
        assert isinstance(error, InvalidDataError), error
        assert "pipe.csv" in str(error) and "regular file" in str(error)
    finally:
        if error is None or not isinstance(error, TdakitError):  # unblock a reader stuck in open()
            fd = os.open(tmp_path / "pipe.csv", os.O_WRONLY | os.O_NONBLOCK)
            os.close(fd)


@pytest.mark.hang
def test_character_device_named_csv(tmp_path):
    os.symlink("/dev/zero", tmp_path / "zeros.csv")
    error = _finishes(lambda: tdakit.load_cloud(tmp_path / "zeros.csv"))
    assert isinstance(error, InvalidDataError) and "regular file" in str(error), error


@pytest.mark.silent
def test_headerless_csv_with_byte_order_mark_keeps_its_first_row(tmp_path):
    path = write(tmp_path, "bom.csv", b"\xef\xbb\xbf1,2\n3,4\n5,6\n")
    np.testing.assert_array_equal(tdakit.load_cloud(path).points, [[1, 2], [3, 4], [5, 6]])


def test_byte_order_mark_before_a_header(tmp_path):
    path = write(tmp_path, "bomh.csv", b"\xef\xbb\xbfx,y\n3,4\n5,6\n")
    cloud = tdakit.load_cloud(path, columns=["x"])
    assert cloud.columns == ("x",)
    np.testing.assert_array_equal(cloud.points, [[3], [5]])


@pytest.mark.silent
def test_decimal_commas_with_comma_separators_headerless(tmp_path):
    path = write(tmp_path, "comma.csv", "1,25,3,05\n2,50,4,75\n0,75,1,00\n")
    refused(path, InvalidDataError, "decimal comma")


@pytest.mark.silent
def test_decimal_commas_with_comma_separators_and_header(tmp_path):
    path = write(tmp_path, "commah.csv", "x,y\n1,25,3,05\n2,50,4,75\n")
    refused(path, InvalidDataError, "line 2", "decimal comma")


def test_decimal_commas_with_semicolons(tmp_path):
    path = write(tmp_path, "semi.csv", "x;y\n1,25;3,5\n2,5;4,75\n")
    refused(path, InvalidDataError, "'1,25'", "line 2", "decimal comma")


def test_decimal_point_integers_with_explicit_comma_delimiter_are_read(tmp_path):
    # With delimiter="," given, integer columns with leading zeros are the user's stated intent.
    path = write(tmp_path, "ints.csv", "1,25,3,05\n2,50,4,75\n")
    np.testing.assert_array_equal(tdakit.load_cloud(path, delimiter=",").points, [[1, 25, 3, 5], [2, 50, 4, 75]])


@pytest.mark.silent
def test_masked_array_with_masked_entries_is_refused():
    data = np.ma.masked_array([[1.0, 2.0], [3.0, -99.0], [5.0, 6.0]], mask=[[0, 0], [0, 1], [0, 0]])
    with pytest.raises(InvalidDataError, match=r"masked.*row 1"):
        tdakit.load_cloud(data)


def test_masked_array_without_masked_entries_is_read():
    data = np.ma.masked_array([[1.0, 2.0], [3.0, 4.0]], mask=False)
    np.testing.assert_array_equal(tdakit.load_cloud(data).points, [[1, 2], [3, 4]])


def test_nan_row_reports_the_file_line(tmp_path):
    path = write(tmp_path, "nan.csv", "# note\nx,y\n1,2\n\n3,nan\n")
    refused(path, InvalidDataError, "NaN", "line 5", "column 2")


def test_bad_cell_reports_the_file_line(tmp_path):
    path = write(tmp_path, "bad.tsv", "x\ty\n1\t2\n# c\n3\tfour\n")
    refused(path, InvalidDataError, "'four'", "line 4", "column 2 ('y')")


# -- more cases ------------------------------------------------------------------------------
def test_empty_file(tmp_path):
    refused(write(tmp_path, "empty.csv", b""), InvalidDataError, "no data")


def test_header_only(tmp_path):
    refused(write(tmp_path, "head.csv", "x,y,z\n"), InvalidDataError, "no data")


def test_only_whitespace_and_comments(tmp_path):
    refused(write(tmp_path, "blank.txt", "  \n\t\n# nothing\n   \n"), InvalidDataError, "no data")


def test_crlf_line_ends(tmp_path):
    path = write(tmp_path, "crlf.csv", "x,y\r\n1,2\r\n3,4\r\n")
    cloud = tdakit.load_cloud(path)
    np.testing.assert_array_equal(cloud.points, [[1, 2], [3, 4]])
    assert cloud.columns == ("x", "y")


def test_mixed_separators(tmp_path):
    path = write(tmp_path, "mixed.csv", "x,y\n1,2\n3;4\n")
    refused(path, InvalidDataError, "line 3", "1 field")


def test_quoted_numbers_are_read(tmp_path):
    path = write(tmp_path, "q.csv", '"x","y"\n"1.5","2"\n"3",4\n')
    cloud = tdakit.load_cloud(path)
    np.testing.assert_array_equal(cloud.points, [[1.5, 2], [3, 4]])
    assert cloud.columns == ("x", "y")


def test_unclosed_quote(tmp_path):
    refused(write(tmp_path, "open.csv", 'x,y\n"1,2\n3,4\n'), InvalidDataError, "line 2")


@pytest.mark.parametrize(("cell", "fragment"), [
    ("inf", "infinity"), ("-Infinity", "infinity"), ("NaN", "NaN"), ("nan", "NaN"),
    ("NA", "'NA'"), ("null", "'null'"), ("", "empty"), ("1e400", "too large"), ("-1e999", "too large"),
])
def test_non_finite_and_missing_spellings(tmp_path, cell, fragment):
    path = write(tmp_path, "spell.csv", f"x,y\n1,2\n3,{cell}\n")
    refused(path, InvalidDataError, fragment, "line 3")


def test_tiny_exponent_reads_as_zero(tmp_path):
    path = write(tmp_path, "tiny.csv", "x,y\n1,2\n3,1e-400\n")
    np.testing.assert_array_equal(tdakit.load_cloud(path).points, [[1, 2], [3, 0]])


def test_duplicated_header_names_cannot_be_chosen_by_name(tmp_path):
    path = write(tmp_path, "dup.csv", "x,x,y\n1,2,3\n4,5,6\n")
    with pytest.raises(InvalidParameterError, match="columns.*'x'.*twice"):
        tdakit.load_cloud(path, columns=["x", "y"])
    np.testing.assert_array_equal(tdakit.load_cloud(path, columns=[1, 2]).points, [[2, 3], [5, 6]])


def test_columns_naming_a_missing_column(tmp_path):
    path = write(tmp_path, "c.csv", "x,y\n1,2\n3,4\n")
    with pytest.raises(InvalidParameterError, match="'columns'.*valid names: 'x', 'y'"):
        tdakit.load_cloud(path, columns=["x", "z"])


@pytest.mark.parametrize("position", [-1, 2, 1.0, True, None])
def test_bad_column_positions(tmp_path, position):
    path = write(tmp_path, "c.csv", "1,2\n3,4\n")
    with pytest.raises(InvalidParameterError, match="'columns'"):
        tdakit.load_cloud(path, columns=[0, position])


def test_unselected_text_column_is_not_parsed(tmp_path):
    path = write(tmp_path, "labels.csv", "name,x,y\nalpha,1,2\nbeta,3,4\n")
    np.testing.assert_array_equal(tdakit.load_cloud(path, columns=["x", "y"]).points, [[1, 2], [3, 4]])
    refused(path, InvalidDataError, "'alpha'", "line 2", "column 1 ('name')")


def test_npy_three_dimensional(tmp_path):
    np.save(tmp_path / "cube.npy", np.zeros((4, 3, 2)))
    with pytest.raises(InvalidDataError, match="2-D"):
        tdakit.load_cloud(tmp_path / "cube.npy")


def test_npy_truncated(tmp_path):
    np.save(tmp_path / "full.npy", np.arange(300.0).reshape(100, 3))
    data = (tmp_path / "full.npy").read_bytes()
    refused(write(tmp_path, "cut.npy", data[:-100]), InvalidDataError, "declares")


@pytest.mark.hang
def test_npy_declaring_a_huge_array_is_refused_before_allocating(tmp_path):
    header = {"descr": "<f8", "fortran_order": False, "shape": (300_000_000, 1)}
    with open(tmp_path / "huge.npy", "wb") as handle:
        np.lib.format.write_array_header_1_0(handle, header)
        handle.write(np.zeros(1000).tobytes())
    refused(tmp_path / "huge.npy", InvalidDataError, "declares", "2.4 GB")


def test_npy_garbage(tmp_path):
    refused(write(tmp_path, "g.npy", b"\x93NUMPY\x01\x00" + b"\xff" * 50), InvalidDataError)
    refused(write(tmp_path, "h.npy", b"just text\n"), InvalidDataError, "not a numpy file")


def test_npz_with_no_arrays(tmp_path):
    np.savez(tmp_path / "none.npz")
    refused(tmp_path / "none.npz", InvalidDataError, "no arrays")


def test_npz_key_missing(tmp_path):
    np.savez(tmp_path / "k.npz", a=np.zeros((3, 2)), b=np.ones((3, 2)))
    with pytest.raises(InvalidParameterError, match="'key'.*valid names: 'a', 'b'"):
        tdakit.load_cloud(tmp_path / "k.npz")
    with pytest.raises(InvalidParameterError, match="'key'"):
        tdakit.load_cloud(tmp_path / "k.npz", key="c")


def test_npz_compression_bomb_member(tmp_path):
    # 80 MB of zeros deflate to under 100 kB: refused from the ZIP directory, before inflating.
    with zipfile.ZipFile(tmp_path / "bomb.npz", "w", compression=zipfile.ZIP_DEFLATED) as archive:
        with archive.open("points.npy", "w", force_zip64=True) as member:
            np.lib.format.write_array(member, np.zeros((5_000_000, 2)))
    refused(tmp_path / "bomb.npz", InvalidDataError, "'points.npy'", "compress")


def test_symlink_loop(tmp_path):
    os.symlink(tmp_path / "b.csv", tmp_path / "a.csv")
    os.symlink(tmp_path / "a.csv", tmp_path / "b.csv")
    refused(tmp_path / "a.csv", InvalidDataError, "link")


def test_dangling_symlink(tmp_path):
    os.symlink(tmp_path / "gone.csv", tmp_path / "link.csv")
    refused(tmp_path / "link.csv", DataFileNotFoundError, "does not exist")


@pytest.mark.skipif(os.geteuid() == 0, reason="running as root: file permissions do not stop reading")
def test_unreadable_file(tmp_path):
    path = write(tmp_path, "secret.csv", "1,2\n3,4\n")
    path.chmod(0)
    refused(path, InvalidDataError, "permission")


def test_path_given_as_bytes(tmp_path):
    path = write(tmp_path, "b.csv", "x,y\n1,2\n3,4\n")
    np.testing.assert_array_equal(tdakit.load_cloud(os.fsencode(path)).points, [[1, 2], [3, 4]])
    with pytest.raises(DataFileNotFoundError, match="nothing.csv"):
        tdakit.load_cloud(os.fsencode(tmp_path / "nothing.csv"))


def test_upper_case_suffix(tmp_path):
    path = write(tmp_path, "UP.CSV", "1 2\n3 4\n")
    np.testing.assert_array_equal(tdakit.load_cloud(path).points, [[1, 2], [3, 4]])


@pytest.mark.parametrize(("name", "value"), [("delimiter", ""), ("delimiter", 5), ("delimiter", "\n"),
                                             ("header", "yes"), ("key", "points")])
def test_bad_text_options(tmp_path, name, value):
    path = write(tmp_path, "t.csv", "1,2\n3,4\n")
    with pytest.raises(InvalidParameterError, match=f"'{name}'"):
        tdakit.load_cloud(path, **{name: value})


def test_dataframe_with_missing_values_reports_the_row():
    frame = pd.DataFrame({"x": pd.array([1, 2, None, 4], dtype="Int64"), "y": [1.0, 2.0, 3.0, 4.0]})
    with pytest.raises(InvalidDataError, match="NaN at row 2"):
        tdakit.load_cloud(frame)


def test_precomputed_matrix_file_with_nan_names_the_line(tmp_path):
    path = write(tmp_path, "d.csv", "0,1,2\n1,0,nan\n2,1,0\n")
    refused(path, InvalidDataError, "NaN", "line 2", metric="precomputed")


def test_a_radian_unit_is_refused_for_the_angular_metric():
    with pytest.raises(InvalidParameterError, match="'unit'.*degrees"):
        tdakit.load_cloud([[0.1, 0.2], [0.3, 0.4]], metric="angular", unit="rad")


def test_fifo_swapped_in_after_the_check_does_not_block(tmp_path, monkeypatch):
    # os.stat says "regular file", the open finds a FIFO: the non-blocking open and fstat still refuse it.
    path = tmp_path / "swap.csv"
    os.mkfifo(path)
    real_stat = os.stat

    def lying_stat(target, *args, **kwargs):
        result = real_stat(target, *args, **kwargs)
        if str(target) == str(path):
            fields = list(result)
            fields[0] = stat.S_IFREG | 0o644
            return os.stat_result(fields)
        return result

    monkeypatch.setattr(os, "stat", lying_stat)
    error = _finishes(lambda: tdakit.load_cloud(path))
    assert isinstance(error, InvalidDataError) and "regular file" in str(error), error


def test_path_with_a_nul_character(tmp_path):
    with pytest.raises(InvalidDataError, match="not a valid path"):
        tdakit.load_cloud(str(tmp_path / "a\x00b.csv"))


def test_path_with_a_name_too_long(tmp_path):
    refused(tmp_path / ("n" * 300 + ".csv"), InvalidDataError, "too long")


def test_compressed_fortran_and_big_endian_arrays_are_read(tmp_path):
    table = np.random.default_rng(8).normal(size=(30, 3))
    np.savez_compressed(tmp_path / "packed.npz", points=table)
    np.save(tmp_path / "fortran.npy", np.asfortranarray(table))
    np.save(tmp_path / "big.npy", table.astype(">f8"))
    for name in ("packed.npz", "fortran.npy", "big.npy"):
        np.testing.assert_array_equal(tdakit.load_cloud(tmp_path / name).points, table)
