"""Reading numeric tables from text files: strict about encoding, field counts and line lengths.

Every problem names the file and its 1-based line (header, comments and blank lines counted),
so the message points at the line an editor shows. Lines are bounded before they are split,
so a line of a million columns is refused at once instead of being parsed.
"""

from __future__ import annotations

import csv
import io
import re
from pathlib import Path

import numpy as np

from tdakit._validation import check_bool, fail
from tdakit.errors import InvalidDataError

__all__ = ["MAX_COLUMNS", "MAX_LINE_CHARS", "TextTable", "read_text_table"]

MAX_LINE_CHARS = 1_000_000
MAX_COLUMNS = 10_000
_DELIMITERS = (",", ";", "\t", "|")
_CHUNK = 65_536
_SIGNATURES = ((b"\x1f\x8b", "compressed with gzip; decompress it first (gunzip)"),
               (b"PK\x03\x04", "a ZIP archive; extract the table first"),
               (b"PK\x05\x06", "an empty ZIP archive"),
               (b"\x93NUMPY", "a NumPy .npy array; give it a .npy suffix"),
               (b"\xff\xfe\x00\x00", "UTF-32 text; save it as UTF-8"),
               (b"\x00\x00\xfe\xff", "UTF-32 text; save it as UTF-8"),
               (b"\xff\xfe", "UTF-16 text; save it as UTF-8"),
               (b"\xfe\xff", "UTF-16 text; save it as UTF-8"),
               (b"\x89HDF", "an HDF5 file; give it a .h5 suffix"),
               (b"SIMPLE  =", "a FITS file; give it a .fits suffix"),
               (b"PAR1", "a Parquet file; give it a .parquet suffix"))
_DECIMAL_COMMA = ("numbers written with decimal commas (1,5) are not read: tdakit reads '.' as the decimal mark; "
                  "export the table with decimal points (or with ';' between fields and convert the commas)")
_LEADING_ZERO = re.compile(r"0\d")


class TextTable:
    """Numbers read from a text file with the names of the chosen columns and each row's file line."""

    def __init__(self, values: np.ndarray, names: tuple[str, ...] | None, lines: np.ndarray,
                 positions: list[int]) -> None:
        self.values, self.names, self.lines, self.positions = values, names, lines, positions


def _label(path: Path) -> str:
    return f"The file {str(path)!r}"


def _refuse(path: Path, text: str) -> InvalidDataError:
    return InvalidDataError(f"{_label(path)} {text}", parameter="source")


def _line_at(data: bytes, offset: int) -> int:
    return data.count(b"\n", 0, offset) + 1


def check_encoding(data: bytes, path: Path) -> None:
    """Refuse ``data`` unless it is UTF-8 text (a byte-order mark allowed), saying what the bytes are instead."""
    for signature, what in _SIGNATURES:
        if data.startswith(signature):
            raise _refuse(path, f"is {what}.")
    if data.startswith(b"\xef\xbb\xbf"):
        data = data[3:]
    nul = data.find(b"\x00")
    if nul >= 0:
        odd = data[1::2][:200]
        if len(odd) > 4 and odd.count(0) > 0.9 * len(odd):
            raise _refuse(path, "is UTF-16 text without a byte-order mark; save it as UTF-8.")
        raise _refuse(path, f"holds binary data, not text (a NUL byte at line {_line_at(data, nul)}). Give a "
                            f".csv/.tsv/.txt/.dat text table, or a .npy/.npz array.")
    try:
        data.decode("utf-8")
    except UnicodeDecodeError as exc:
        byte = data[exc.start]
        raise _refuse(path, f"is not UTF-8 text: byte 0x{byte:02X} at line {_line_at(data, exc.start)} is not "
                            f"valid UTF-8 (a Latin-1 or other legacy encoding?). Save the file as UTF-8.") from None


def check_line_lengths(data: bytes, path: Path) -> None:
    """Refuse a line longer than ``MAX_LINE_CHARS`` before any line is split (bytes counted)."""
    if len(data) <= MAX_LINE_CHARS:
        return
    raw = np.frombuffer(data, dtype=np.uint8)
    breaks = np.flatnonzero((raw == 10) | (raw == 13))
    bounds = np.concatenate(([-1], breaks, [raw.size]))
    lengths = np.diff(bounds) - 1
    longest = int(np.argmax(lengths))
    if lengths[longest] > MAX_LINE_CHARS:
        line = _line_at(data, int(bounds[longest]) + 1)
        raise _refuse(path, f"has a line of {int(lengths[longest]):,} characters at line {line}, more than the "
                            f"{MAX_LINE_CHARS:,} tdakit reads on one line (and at most {MAX_COLUMNS:,} columns). "
                            f"Save very wide tables as .npy.")


def _body(line: str) -> str:
    if "#" in line:
        line = line[: line.index("#")]
    return line.strip()


def _numeric(token: str) -> bool:
    try:
        float(token)
    except ValueError:
        return False
    return True


class _Splitter:
    """Splits a line into fields with a fixed delimiter (``None``: white space); quotes are honoured."""

    def __init__(self, delimiter: str | None) -> None:
        self.delimiter = delimiter

    def __call__(self, body: str, number: int, path: Path) -> list[str]:
        if '"' not in body:
            return body.split(self.delimiter) if self.delimiter else body.split()
        if self.delimiter is None:
            return [token.strip('"') for token in body.split()]
        try:
            return next(csv.reader([body], delimiter=self.delimiter, strict=True, skipinitialspace=True))
        except csv.Error as exc:
            raise _refuse(path, f"has unbalanced quotes at line {number} ({exc}).") from None


def _first_line(stream, path: Path):
    for number, line in enumerate(stream, start=1):
        body = _body(line)
        if body:
            return number, body
    raise _refuse(path, "holds no data lines (it is empty, or only blank and comment lines).")


def _check_options(delimiter, header):
    if delimiter is not None and (not isinstance(delimiter, str) or not delimiter or "\n" in delimiter
                                  or "\r" in delimiter or '"' in delimiter or "#" in delimiter):
        raise fail("delimiter", "load_cloud", "a non-empty string without quotes, '#' or line breaks", delimiter)
    return None if header is None else check_bool(header, "header", "load_cloud")


def read_text_table(data: bytes, path: Path, *, delimiter, header, select) -> TextTable:
    """Parse a text table; ``select(names, n_fields)`` returns the column positions to keep.

    Parameters
    ----------
    data : bytes
        The whole file.
    path : Path
        For messages.
    delimiter, header
        As given to ``load_cloud`` (None: detect).
    select : callable
        ``select(names_or_None, n_fields) -> list[int]``; raises for unknown columns.
    """
    header = _check_options(delimiter, header)
    check_line_lengths(data, path)
    check_encoding(data, path)
    stream = io.TextIOWrapper(io.BytesIO(data), encoding="utf-8-sig", newline=None)
    number, first = _first_line(stream, path)
    given = delimiter
    if delimiter is None:
        delimiter = ";" if ("," in first and ";" in first) else next((d for d in _DELIMITERS if d in first), None)
    split = _Splitter(delimiter)
    fields = split(first, number, path)
    if len(fields) > MAX_COLUMNS:
        raise _refuse(path, f"has {len(fields):,} columns at line {number}, more than the {MAX_COLUMNS:,} tdakit "
                            f"reads from text. Save very wide tables as .npy.")
    if header is None:
        header = not all(_numeric(token) for token in fields)
    names = tuple(token.strip() for token in fields) if header else None
    positions = select(names, len(fields))
    reader = _Rows(path, split, len(fields), positions, names, number if header else None, delimiter)
    if not header:
        reader.add(fields, number)
    for line_number, line in enumerate(stream, start=number + 1):
        body = _body(line)
        if body:
            reader.add(split(body, line_number, path), line_number)
    table = reader.finish()
    if given is None and delimiter == ",":
        reader.check_decimal_commas()
    return table


class _Rows:
    """Collects the chosen fields of each row, converting them to floats in chunks."""

    def __init__(self, path, split, n_fields, positions, names, header_line, delimiter):
        self.path, self.split, self.n_fields, self.positions = path, split, n_fields, list(positions)
        self.names, self.header_line, self.delimiter = names, header_line, delimiter
        self.all_columns = self.positions == list(range(n_fields))
        self.tokens: list[str] = []
        self.row_lines: list[int] = []
        self.blocks: list[np.ndarray] = []
        self.lines: list[int] = []
        self.sample: list[list[str]] = []

    def add(self, fields: list[str], number: int) -> None:
        if len(fields) != self.n_fields:
            self._wrong_count(len(fields), number)
        if len(self.sample) < 1000:
            self.sample.append(fields)
        self.tokens.extend(fields if self.all_columns else [fields[i] for i in self.positions])
        self.row_lines.append(number)
        if len(self.row_lines) >= _CHUNK:
            self._convert()

    def _wrong_count(self, count: int, number: int):
        where = f"the header (line {self.header_line})" if self.header_line else "the first data line"
        plural = "" if count == 1 else "s"
        hint = f" If the file uses decimal commas: {_DECIMAL_COMMA}." if self.delimiter == "," else ""
        raise _refuse(self.path, f"has {count} field{plural} at line {number} where {where} has {self.n_fields}; "
                                 f"every line must have the same number of fields (tdakit never shifts or drops "
                                 f"columns).{hint} Fix or remove that line.")

    def _column(self, j: int) -> str:
        position = self.positions[j]
        name = f" ({self.names[position]!r})" if self.names else ""
        return f"column {position + 1}{name}"

    def _convert(self) -> None:
        if not self.row_lines:
            return
        width = len(self.positions)
        try:
            block = np.fromiter(map(float, self.tokens), dtype=np.float64, count=len(self.tokens))
        except ValueError:
            self._bad_cell(width)
        block = block.reshape(len(self.row_lines), width)
        bad = ~np.isfinite(block)
        if bad.any():
            row, j = (int(v) for v in np.argwhere(bad)[0])
            self._non_finite(block[row, j], self.tokens[row * width + j].strip(), self.row_lines[row], j)
        self.blocks.append(block)
        self.lines.extend(self.row_lines)
        self.tokens, self.row_lines = [], []

    def _bad_cell(self, width: int):
        for index, token in enumerate(self.tokens):
            if not _numeric(token):
                row, j = divmod(index, width)
                cell = token.strip()
                what = "an empty cell" if not cell else f"a non-numeric cell {cell!r}"
                hint = ""
                if "," in cell and _numeric(cell.replace(",", ".", 1)):
                    hint = f" It looks like a decimal comma: {_DECIMAL_COMMA}."
                raise _refuse(self.path, f"has {what} at line {self.row_lines[row]}, {self._column(j)}.{hint} "
                                         f"Fix or remove that line.")
        raise AssertionError("a cell failed to convert but every cell is numeric")  # pragma: no cover

    def _non_finite(self, value: float, cell: str, line: int, j: int):
        if np.isnan(value):
            what = f"NaN ({cell!r})"
        elif "inf" in cell.lower():
            what = f"infinity ({cell!r})"
        else:
            what = f"a value too large for float64 ({cell!r})"
        raise _refuse(self.path, f"has {what} at line {line}, {self._column(j)}; coordinates must be finite and "
                                 f"tdakit does not drop or fill values. Remove or fix that line.")

    def finish(self) -> TextTable:
        self._convert()
        if not self.blocks:
            raise _refuse(self.path, "holds no data rows, only a header line "
                                     f"(line {self.header_line}).")
        values = np.concatenate(self.blocks) if len(self.blocks) > 1 else self.blocks[0]
        names = tuple(self.names[i] for i in self.positions) if self.names else None
        return TextTable(values, names, np.asarray(self.lines, dtype=np.int64), self.positions)

    def check_decimal_commas(self) -> None:
        """Refuse integer-only comma tables that read as decimal-comma numbers split in two."""
        if self.n_fields % 2 or not self.sample:
            return
        if not all(token.strip().lstrip("-+").isdigit() for row in self.sample for token in row):
            return
        if any(_LEADING_ZERO.match(row[i].strip()) for row in self.sample for i in range(1, self.n_fields, 2)):
            raise _refuse(self.path, f"looks like numbers with decimal commas separated by commas: every field is "
                                     f"an integer and fields in even positions have leading zeros (such as "
                                     f"'{self._leading_zero_example()}'). {_DECIMAL_COMMA[0].upper()}"
                                     f"{_DECIMAL_COMMA[1:]}. If the fields really are separate integers, pass "
                                     f"delimiter=','.")

    def _leading_zero_example(self) -> str:
        for row in self.sample:
            for i in range(1, self.n_fields, 2):
                if _LEADING_ZERO.match(row[i].strip()):
                    return row[i].strip()
        return ""
