"""A catalogue's chosen columns written to a memory-mappable ``.npy`` file, chunk by chunk.

For clouds larger than one process's memory: every worker of a cluster then maps its own rows of the
``.npy`` file (:func:`tdakit.distributed.select_landmarks_distributed`), so no process reads the whole table.
"""

from __future__ import annotations

import json
import os
from pathlib import Path

import numpy as np

from tdakit._validation import fail
from tdakit.core.geometry.cloud import check_unit
from tdakit.errors import DataFileNotFoundError, InvalidDataError, TdakitError
from tdakit.io._atomic import PARTIAL_SUFFIX, atomic_output
from tdakit.io._files import as_path
from tdakit.io.catalogues.loading import _enough_rows, _unit
from tdakit.io.catalogues.reading import DEFAULT_CHUNK_ROWS, read_table
from tdakit.io.coordinates import SkyConversion

__all__ = ["catalogue_to_npy"]

_FN = "catalogue_to_npy"
# Longest file name (bytes) the destination's folder takes: the limit of common Linux, macOS and Windows file systems.
_NAME_MAX = 255


def catalogue_to_npy(
    source: str | os.PathLike,
    destination: str | os.PathLike,
    *,
    columns: list | tuple | None = None,
    where: str | None = None,
    dataset: str | int | None = None,
    file_format: str | None = None,
    drop_missing: bool = False,
    sky=None,
    unit: str | None = None,
    chunk_rows: int = DEFAULT_CHUNK_ROWS,
) -> dict:
    """Write chosen columns of a FITS, HDF5 or Parquet table to a float64 ``.npy`` file without holding the table.

    The rows are read in chunks (as by :func:`tdakit.load_cloud`) straight into a memory-mapped
    ``.npy`` file; sky positions are converted in place. The file holds exactly the points
    ``load_cloud(source, columns=..., where=..., sky=...)`` would hold, in the same order, so its row
    numbers are the cloud's. A description (source checksum, columns, filter, units, conversion) is
    written beside it as ``<destination>.json``. Each file appears complete or not at all (the ``.npy`` first).

    Parameters
    ----------
    source : str or path
        The catalogue (see :func:`tdakit.io.read_catalogue` for the formats).
    destination : str or path
        The ``.npy`` file to write (its folder must exist; an existing file is replaced).
    columns, where, dataset, file_format, drop_missing
        As in :func:`tdakit.load_cloud`.
    sky : str, mapping or SkyConversion, optional
        Convert (RA, Dec, parallax or redshift) columns to x, y, z, as in :func:`tdakit.load_cloud`.
    unit : str, optional
        The coordinates' unit for the description (default: the file's, when every column names the
        same; with ``sky``, the conversion's, which a different ``unit`` may not contradict).
    chunk_rows : int, default=65536
        Rows read at a time.

    Returns
    -------
    dict
        The description written to ``<destination>.json``: ``source``, ``source_sha256``, ``columns``
        (of the file written), ``read_columns``, ``where``, ``dataset``, ``drop_missing``, ``n_rows``
        (rows written), ``n_rows_in_file``, ``units``, ``unit``, ``sky`` (the conversion's record).

    Notes
    -----
    Memory: a few chunks of rows in this process; the output's pages belong to the operating
    system's file cache. With a filter or ``drop_missing`` the table is read twice (a first pass
    counts the rows kept). Redshift conversion evaluates the distance spline over the kept rows'
    whole redshift range, as :func:`tdakit.load_cloud` does, so the positions are identical to its.
    """
    from tdakit.io.readers import _sha256

    path = _path_or_none(source)
    if path is None:
        raise fail("source", _FN, "a path to a FITS, HDF5 or Parquet file", source)
    target = _destination(destination)
    _check_not_source(path, target)
    conversion = None if sky is None else SkyConversion.from_value(sky)
    unit = check_unit(unit, _FN)
    if unit is not None and conversion is not None and unit != conversion.unit:
        raise fail("unit", _FN, f"None or the conversion's unit, {conversion.unit!r}", unit)
    checksum = _sha256(path)
    allocated: list[tuple[int, int]] = []

    def allocate(n_rows: int, n_columns: int) -> np.memmap:
        if conversion is not None and n_columns != 3:
            raise fail("columns", _FN, "three columns (RA, Dec, parallax or redshift) with sky=...", columns)
        allocated.append((n_rows, n_columns))
        return np.lib.format.open_memmap(temporary, mode="w+", dtype=np.float64, shape=(n_rows, n_columns))

    with atomic_output(target, what="converted catalogue") as temporary:
        table = read_table(path, columns=columns, where=where, dataset=dataset, file_format=file_format,
                           drop_missing=drop_missing, chunk_rows=chunk_rows, function=_FN, allocate=allocate)
        values = table.values
        if values.shape != allocated[0]:
            raise InvalidDataError(f"The file {str(path)!r} changed while it was read; convert it again.",
                                   parameter="source")
        _enough_rows(table, path, where)
        if conversion is not None:
            conversion.convert(values, table.units, chunk_rows=chunk_rows)
        values.flush()
        del values
    record = _record(path, checksum, table, where, dataset, drop_missing, conversion, unit)
    description = target.with_name(target.name + ".json")
    with atomic_output(description, what="description of the converted catalogue") as temporary:
        temporary.write_text(json.dumps(record, indent=2), encoding="utf-8")
    return record


def _path_or_none(value) -> Path | None:
    """``value`` as a Path; None for anything else (an ``os.PathLike`` whose ``__fspath__`` gives a number, too)."""
    if not isinstance(value, (str, bytes, os.PathLike)):
        return None
    try:
        return as_path(value)
    except TypeError:
        return None


def _destination(destination) -> Path:
    """The checked target: everything that would fail after the ``.npy`` is written fails here, before it."""
    target = _path_or_none(destination)
    if target is None or target.suffix.lower() != ".npy":
        raise fail("destination", _FN, "a path ending in .npy", destination)
    if "\0" in str(target):
        raise fail("destination", _FN, "a path without a NUL character", str(target))
    try:
        longest = _NAME_MAX - len(os.fsencode(f".{target.name}.json.12345678{PARTIAL_SUFFIX}.json"))
        if longest < 0:  # the description's temporary file is the longest name written
            raise fail("destination", _FN, f"a file name at most {len(os.fsencode(target.name)) + longest} bytes "
                       f"long (the usual file-name limit, {_NAME_MAX} bytes, less room for the description's "
                       f"temporary file)", target.name)
        if target.is_dir():
            raise fail("destination", _FN, "a file path, not a folder", str(target))
        if target.with_name(target.name + ".json").is_dir():
            raise fail("destination", _FN, "a file path whose description, <destination>.json, is not a folder",
                       str(target))
        if not target.parent.is_dir():
            raise DataFileNotFoundError(f"The 'destination' parameter of {_FN} names a file in a folder that does "
                                        f"not exist: {str(target.parent)!r}.", parameter="destination")
    except TdakitError:
        raise
    except OSError as exc:  # e.g. a folder on the way that cannot be searched
        raise fail("destination", _FN, f"a path that can be examined ({exc.strerror or exc})", str(target)) from None
    return target


def _check_not_source(path: Path, target: Path) -> None:
    """Refuse to write over the catalogue being read (the same file by any name, e.g. a Parquet file named .npy)."""
    try:
        same = target.exists() and path.exists() and os.path.samefile(path, target)
    except (OSError, ValueError):  # unreadable or invalid names: the reader and the writer report them
        same = False
    if same:
        raise fail("destination", _FN, "a file other than the source catalogue (it would be overwritten)",
                   str(target))


def _record(path, checksum, table, where, dataset, drop_missing, conversion, unit) -> dict:
    unit = conversion.unit if conversion is not None else _unit(unit, table.columns, table.units)
    return {"source": str(path.resolve()), "source_sha256": checksum, "file_format": table.file_format,
            "columns": ["x", "y", "z"] if conversion is not None else list(table.columns),
            "read_columns": list(table.columns), "where": where, "dataset": dataset,
            "drop_missing": bool(drop_missing), "n_rows": int(table.values.shape[0]),
            "n_rows_in_file": int(table.n_rows), "n_dropped_missing": int(table.n_dropped_missing),
            "units": list(table.units), "unit": unit, "sky": None if conversion is None else conversion.to_dict()}
