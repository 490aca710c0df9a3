"""Reading chosen columns of a FITS, HDF5 or Parquet catalogue in row chunks, with a row filter.

Memory: the output (rows kept x columns chosen, float64) is allocated once; the file is read in chunks of
``chunk_rows`` rows. Without a filter the row count is known from the file's header, so one pass fills the output.
With a filter, a first pass reads only the filter's columns and counts the rows that pass; the second pass reads
the filter's and the chosen columns again chunk by chunk and fills the output. Peak memory is the output plus a few
chunks and the format library's buffers, a few MB per column read (measured in tests/io/test_catalogues.py: at
most 1.2x the output for a table of 3 million rows). Gzip-compressed FITS files cannot be memory-mapped: astropy
decompresses the whole table first (announced with a :class:`LargeReadWarning`).
"""

from __future__ import annotations

import os
import warnings
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from tdakit._validation import check_bool, check_int, fail
from tdakit.errors import (
    DataFileNotFoundError,
    InvalidDataError,
    InvalidParameterError,
    MemoryBudgetError,
    TdakitError,
    TdakitWarning,
)
from tdakit.io.catalogues._formats import FORMAT_SUFFIXES, SOURCES, listed
from tdakit.io.catalogues.where import RowFilter, parse_where

__all__ = ["CATALOGUE_FORMATS", "CatalogueTable", "LargeReadWarning", "catalogue_format", "read_catalogue"]

CATALOGUE_FORMATS = dict(FORMAT_SUFFIXES)
DEFAULT_CHUNK_ROWS = 1 << 16
GZIP_WARNING_BYTES = 16 * 2**20  # a gzip FITS table larger than this (and than 1.2x the columns read) is warned
_FN = "load_cloud"


class LargeReadWarning(TdakitWarning):
    """A compressed file must be decompressed whole into memory before its columns can be read."""


@dataclass(frozen=True, eq=False)
class CatalogueTable:
    """Columns read from a catalogue file.

    Attributes
    ----------
    values : ndarray of shape (n_kept, n_columns)
        Float64 values of the chosen columns in the rows that passed the filter (and had no missing values when
        ``drop_missing`` was set), in file order.
    columns : tuple of str
        The chosen column names.
    units : tuple of (str or None)
        Each column's unit as the file names it (FITS ``TUNITn``, HDF5 attribute ``unit``/``units``, Parquet
        field metadata ``unit``), None where it names none.
    file_format : str
        ``"fits"``, ``"hdf5"`` or ``"parquet"``.
    n_rows : int
        Rows in the file's table.
    n_dropped_missing : int
        Rows dropped for a missing value (``drop_missing=True`` only).
    """

    values: NDArray[np.float64]
    columns: tuple[str, ...]
    units: tuple[str | None, ...]
    file_format: str
    n_rows: int
    n_dropped_missing: int = 0


def catalogue_format(path: str | os.PathLike, file_format: str | None = None) -> str | None:
    """The catalogue format of ``path``: ``file_format`` if given (checked), else from the suffix; None if neither.

    Parameters
    ----------
    path : str or path
        The file.
    file_format : {"fits", "hdf5", "parquet"}, optional
        An explicit format, for files whose suffix does not say.

    Returns
    -------
    str or None
    """
    if file_format is not None:
        if not isinstance(file_format, str) or file_format.lower() not in CATALOGUE_FORMATS:
            raise fail("file_format", _FN, f"None or one of {', '.join(repr(k) for k in sorted(CATALOGUE_FORMATS))}",
                       file_format)
        return file_format.lower()
    name = Path(path).name.lower()
    for fmt, suffixes in CATALOGUE_FORMATS.items():
        if name.endswith(suffixes):
            return fmt
    return None


def read_catalogue(
    path: str | os.PathLike,
    *,
    columns: list | tuple | None = None,
    where: str | None = None,
    dataset: str | int | None = None,
    file_format: str | None = None,
    drop_missing: bool = False,
    chunk_rows: int = DEFAULT_CHUNK_ROWS,
) -> CatalogueTable:
    """Read chosen columns of a FITS, HDF5 or Parquet table chunk by chunk, keeping the rows that pass a filter.

    Parameters
    ----------
    path : str or path
        The file: ``.fits``/``.fit``/``.fts`` (optionally ``.gz``), ``.h5``/``.hdf5``, ``.parquet``/``.pq``,
        or any name with ``file_format``.
    columns : sequence of str or int, optional
        Columns by name or position. Default: every column (each must be numeric).
    where : str, optional
        Row filter, e.g. ``"parallax > 2"`` or ``"z < 0.1 and mag_r < 19"`` (see :func:`parse_where`).
    dataset : str or int, optional
        HDF5: path of the compound dataset, group of 1-D datasets or 2-D array (default: the only table in the
        file). FITS: name or number of the table extension (default: the first). Parquet: must be None.
    file_format : {"fits", "hdf5", "parquet"}, optional
        Overrides the suffix.
    drop_missing : bool, default=False
        Drop rows with a missing value (NaN, FITS TNULL, Parquet NULL) in a column the read uses (the filter's
        columns in every row, the chosen columns in rows that pass). By default such a value is an error.
    chunk_rows : int, default=65536
        Rows read at a time.

    Returns
    -------
    CatalogueTable

    Raises
    ------
    MissingExtraError
        The format's library is not installed (``pip install tdakit[formats]``).
    InvalidDataError
        A missing value (column and 0-based row named), a non-numeric column, an unreadable file.
    InvalidParameterError
        An unknown column, a filter outside the filter language, a bad option.
    DataFileNotFoundError
        No such file.
    MemoryBudgetError
        The rows to keep would take more than half of the machine's (or container's) memory as float64.
    """
    return read_table(path, columns=columns, where=where, dataset=dataset, file_format=file_format,
                      drop_missing=drop_missing, chunk_rows=chunk_rows)


def read_table(path, *, columns, where, dataset, file_format, drop_missing, chunk_rows, allocate=None,
               function: str = _FN) -> CatalogueTable:
    """:func:`read_catalogue` into the array ``allocate(n_rows, n_columns)`` gives (default: memory)."""
    path = Path(path)
    fmt = catalogue_format(path, file_format)
    if fmt is None:
        raise fail("source", function, f"a FITS, HDF5 or Parquet file (suffixes {_suffixes()}) or file_format= given",
                   str(path))
    if not path.is_file():
        raise DataFileNotFoundError(
            f"The 'source' file {str(path)!r} does not exist (working directory {os.getcwd()!r}).", parameter="source")
    drop_missing = check_bool(drop_missing, "drop_missing", function)
    chunk_rows = check_int(chunk_rows, "chunk_rows", function, low=1)
    row_filter = None if where is None else parse_where(where, function=function)
    with SOURCES[fmt](path, dataset) as source:
        chosen = _choose_columns(source, columns, function)
        _check_filter_columns(source, row_filter, function)
        if hasattr(source, "check_lengths"):
            source.check_lengths(list(dict.fromkeys(chosen + (row_filter.columns if row_filter else ()))))
        _warn_if_decompressing(source, path, len(chosen))
        try:
            values, dropped = _fill(source, chosen, row_filter, drop_missing, chunk_rows, allocate)
        except (OSError, ValueError, RuntimeError) as exc:  # h5py, astropy; pyarrow's errors subclass these
            if isinstance(exc, TdakitError):
                raise
            raise InvalidDataError(f"Could not read the rows of {str(path)!r} ({source.label}); the file may be "
                                   f"damaged: {exc}", parameter="source") from None
        units = tuple(source.unit(name) for name in chosen)
        n_rows = source.n_rows
    return CatalogueTable(values, chosen, units, fmt, n_rows, dropped)


def _suffixes() -> str:
    return ", ".join(s for group in CATALOGUE_FORMATS.values() for s in group)


def _choose_columns(source, columns, function: str = _FN) -> tuple[str, ...]:
    names = source.names
    if columns is None:
        chosen = names
    elif isinstance(columns, (str, int)) or not hasattr(columns, "__iter__") or not list(columns):
        raise fail("columns", function, "a non-empty list of column names or positions", columns)
    else:
        chosen = tuple(_column_name(c, names, source, function) for c in columns)
    if not chosen:
        raise InvalidDataError(f"The table ({source.label}) of {str(source.path)!r} has no columns.",
                               parameter="source")
    for name in chosen:
        _check_numeric(source, name, "columns", "iuf")
    return chosen


def _column_name(column, names, source, function: str = _FN) -> str:
    if isinstance(column, (int, np.integer)) and not isinstance(column, bool):
        if not 0 <= column < len(names):
            raise fail("columns", function, f"positions in [0, {len(names) - 1}]", column)
        return names[int(column)]
    if column not in names:
        raise fail("columns", function, f"names of columns of {source.label} in the file; valid names: {listed(names)}",
                   column)
    return column


def _check_numeric(source, name: str, parameter: str, kinds: str) -> None:
    dtype = source.dtype(name)
    if dtype.shape:
        raise InvalidDataError(
            f"Column {name!r} of {str(source.path)!r} holds an array of shape {dtype.shape} in each row; choose "
            f"columns with one number per row.", parameter=parameter)
    if dtype.kind not in kinds:
        what = "numbers" if kinds == "iuf" else "numbers or booleans"
        raise InvalidDataError(
            f"Column {name!r} of {str(source.path)!r} does not hold {what} (dtype {dtype}); choose numeric columns "
            f"with columns=[...].", parameter=parameter)


def _check_filter_columns(source, row_filter: RowFilter | None, function: str = _FN) -> None:
    if row_filter is None:
        return
    for name in row_filter.columns:
        if name not in source.names:
            raise InvalidParameterError(
                f"The 'where' parameter of {function} names column {name!r}, which {source.label} of "
                f"{str(source.path)!r} does not have; valid names: {listed(source.names)}.", parameter="where")
        _check_numeric(source, name, "where", "iufb")


def _warn_if_decompressing(source, path: Path, n_columns: int) -> None:
    if not path.name.lower().endswith(".gz") or not hasattr(source, "full_table_bytes"):
        return
    whole, wanted = source.full_table_bytes(), 8 * n_columns * source.n_rows
    if whole > 1.2 * wanted and whole > GZIP_WARNING_BYTES:
        warnings.warn(
            f"{str(path)!r} is gzip-compressed, so its whole table ({whole / 2**20:.0f} MiB) is decompressed into "
            f"memory before the chosen columns ({wanted / 2**20:.0f} MiB as float64) are read. Decompress it "
            f"first to read it in chunks.", LargeReadWarning, stacklevel=4)


def _fill(source, chosen, row_filter, drop_missing, chunk_rows, allocate=None):
    """Allocate the output once and fill it chunk by chunk; return it and the rows dropped.

    ``allocate(n_rows, n_columns)`` gives the output (default: an array in memory, refused above half the
    memory); the rows are counted first when a filter or ``drop_missing`` may remove some.
    """
    filter_columns = list(row_filter.columns) if row_filter else []
    if row_filter is None and not drop_missing:
        n_out = source.n_rows
    else:
        counted = list(dict.fromkeys(filter_columns + (list(chosen) if drop_missing else [])))
        passes = _passing(source, counted, row_filter, drop_missing, chunk_rows, chosen if drop_missing else ())
        n_out = sum(int(keep.sum()) for _, keep, _, _ in passes)
    out = (allocate or (lambda n, m: _allocate(source, n, m, row_filter)))(n_out, len(chosen))
    position = dropped = 0
    wanted = list(dict.fromkeys(filter_columns + list(chosen)))
    for _, keep, chunk, lost in _passing(source, wanted, row_filter, drop_missing, chunk_rows, chosen):
        count = int(keep.sum())
        if position + count > n_out:
            raise InvalidDataError(f"The file {str(source.path)!r} changed while it was read; read it again.",
                                   parameter="source")
        for j, name in enumerate(chosen):
            out[position:position + count, j] = chunk[name][0][keep]
        position += count
        dropped += lost
    return (out if position == n_out else out[:position]), dropped


def _allocate(source, n_rows: int, n_columns: int, row_filter) -> np.ndarray:
    """The output array, refused before allocating when it would take more than half of the memory."""
    from tdakit.core.topology.preflight import default_memory_budget

    need, limit = 8 * n_rows * n_columns, 2 * default_memory_budget()  # half the machine's or container's memory
    if need > limit:
        kept = "rows that pass the filter" if row_filter is not None else "rows the file declares"
        raise MemoryBudgetError(
            f"Reading {n_columns} column(s) of {str(source.path)!r} ({source.label}) would take {need / 2**30:.3g} "
            f"GiB as float64 for its {n_rows:,} {kept}, more than half of this machine's memory "
            f"({limit / 2**30:.3g} GiB). Read fewer rows with where=... (command line: --where), or check the "
            f"file: its declared size may be wrong.", parameter="source")
    try:
        return np.empty((n_rows, n_columns), dtype=np.float64)
    except MemoryError:
        raise MemoryBudgetError(f"Could not allocate {need / 2**30:.3g} GiB for the {n_rows:,} rows of "
                                f"{str(source.path)!r}; read fewer rows with where=...", parameter="source") from None


def _passing(source, names, row_filter, drop_missing, chunk_rows, chosen=()):
    """Yield (start, keep mask, chunk, rows dropped) per chunk, checking missing values in the columns the read uses."""
    filter_columns = row_filter.columns if row_filter else ()
    for start, chunk in source.chunks(names, chunk_rows):
        n = len(next(iter(chunk.values()))[0])
        keep = np.ones(n, dtype=bool)
        dropped = _apply_missing(source, chunk, filter_columns, keep, start, drop_missing)
        if row_filter is not None:
            keep &= row_filter.evaluate({name: chunk[name][0] for name in filter_columns})
        dropped += _apply_missing(source, chunk, chosen, keep, start, drop_missing)
        yield start, keep, chunk, dropped


def _apply_missing(source, chunk, names, keep, start, drop_missing) -> int:
    """Clear ``keep`` where a kept row misses a value in ``names`` (drop_missing) or raise naming the first."""
    before = int(keep.sum())
    for name in names:
        missing = chunk[name][1]
        if missing is None:
            continue
        hit = missing & keep
        if not hit.any():
            continue
        if not drop_missing:
            row = start + int(np.flatnonzero(hit)[0])
            raise InvalidDataError(
                f"Column {name!r} of {str(source.path)!r} has a missing value (NaN or NULL) at row {row} (counting "
                f"from 0; {int(hit.sum())} in rows {start}-{start + len(keep) - 1}). Pass drop_missing=True "
                f"(command line: --drop-missing) to drop such rows, or a where filter that excludes them.",
                parameter="source")
        keep &= ~missing
    return before - int(keep.sum())
