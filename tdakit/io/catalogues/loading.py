"""``load_cloud`` for catalogue files (FITS, HDF5, Parquet), row filters and sky coordinates."""

from __future__ import annotations

import os
import warnings
from pathlib import Path

import numpy as np

from tdakit._validation import check_bool, fail
from tdakit.core.geometry.cloud import Cloud, make_cloud
from tdakit.errors import InvalidDataError, TdakitWarning
from tdakit.io.catalogues.reading import catalogue_format, read_catalogue
from tdakit.io.coordinates import SkyConversion

__all__ = ["MixedUnitsWarning", "is_catalogue_request", "load_catalogue"]


class MixedUnitsWarning(TdakitWarning):
    """The chosen columns do not share one unit, so the cloud's unit is left unnamed."""


def is_catalogue_request(source, *, file_format=None, where=None, dataset=None, drop_missing=False,
                         sky=None) -> bool:
    """Whether ``load_cloud`` hands ``source`` to the catalogue reader: a catalogue suffix or an option of it."""
    if any(value is not None for value in (file_format, where, dataset, sky)) or drop_missing is not False:
        return True
    return isinstance(source, (str, os.PathLike)) and catalogue_format(source) is not None


def load_catalogue(source, *, columns, metric, standardize: bool, unit, where=None, dataset=None, file_format=None,
                   drop_missing: bool = False, sky=None, **text_options) -> Cloud:
    """Read a catalogue file (or convert sky coordinates of any source) into a :class:`Cloud`.

    Called by :func:`tdakit.load_cloud`, whose docstring describes the parameters; ``metric`` is a built
    :class:`~tdakit.core.geometry.metrics.Metric` and ``text_options`` are ``delimiter``, ``header`` and ``key``
    (for sky conversion of text and NumPy files).
    """
    conversion = None if sky is None else SkyConversion.from_value(sky)
    drop_missing = check_bool(drop_missing, "drop_missing", "load_cloud")
    is_file = isinstance(source, (str, os.PathLike))
    fmt = catalogue_format(source, file_format) if is_file else None
    if fmt is None:
        for name, value in (("where", where), ("dataset", dataset), ("drop_missing", drop_missing or None),
                            ("file_format", file_format)):
            if value is not None:
                raise fail(name, "load_cloud", f"{'False' if name == 'drop_missing' else 'None'} unless 'source' is "
                                               f"a FITS, HDF5 or Parquet file (read in chunks; filter and clean "
                                               f"other tables before loading them)", value)
        return _convert_plain(source, conversion, columns=columns, metric=metric, standardize=standardize, unit=unit,
                              **text_options)
    _no_text_options(text_options)
    from tdakit.io.readers import _sha256  # one checksum for every input file (and its regular-file checks)

    path = Path(source)
    checksum = _sha256(path)
    table = read_catalogue(source, columns=columns, where=where, dataset=dataset, file_format=file_format,
                           drop_missing=drop_missing)
    _enough_rows(table, path, where)
    if conversion is not None:
        values, names, unit = _convert(table.values, conversion, table.units, unit)
    else:
        values, names, unit = table.values, table.columns, _unit(unit, table.columns, table.units)
    given = (("file_format", file_format), ("dataset", dataset), ("where", where), ("columns", list(table.columns)),
             ("drop_missing", drop_missing or None), ("sky", None if conversion is None else conversion.to_dict()))
    return make_cloud(values, metric, columns=names, source=str(path.resolve()), standardize=standardize,
                      source_checksum=checksum, unit=unit,
                      read_options=tuple((name, value) for name, value in given if value is not None))


def _enough_rows(table, path: Path, where) -> None:
    """Refuse fewer than two rows naming the file, and the filter or the rows dropped that left so few."""
    kept = table.values.shape[0]
    if kept >= 2:
        return
    causes = []
    if where is not None:
        causes.append(f"after the filter where={where!r} (command line: --where)")
    if table.n_dropped_missing:
        causes.append(f"after drop_missing=True dropped {table.n_dropped_missing} row(s) with missing values")
    because = "".join(" " + cause for cause in causes)
    raise InvalidDataError(
        f"The table of {str(path)!r} gives {kept} row(s) of its {table.n_rows}{because}; a cloud needs at least 2 "
        f"points.", parameter="where" if where is not None else "source")


def _no_text_options(text_options: dict) -> None:
    for name, value in text_options.items():
        if value is not None:
            raise fail(name, "load_cloud", "None for FITS, HDF5 and Parquet files", value)


def _convert(values, conversion: SkyConversion, units, unit):
    if unit is not None and unit != conversion.unit:
        raise fail("unit", "load_cloud", f"None or {conversion.unit!r} (the unit of sky={conversion.distance!r} "
                                         f"positions)", unit)
    return conversion.convert(values, units), ("x", "y", "z"), conversion.unit


def _convert_plain(source, conversion, *, columns, metric, standardize, unit, **text_options) -> Cloud:
    """Sky conversion of an array, DataFrame, text or NumPy file: read it plainly, convert, build the cloud."""
    from tdakit.io.readers import load_cloud

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", TdakitWarning)  # repeats are reported once, on the converted cloud
        raw = load_cloud(source, columns=columns, **text_options)
    values, names, unit = _convert(np.array(raw.points), conversion, (None, None, None), unit)
    options = dict(raw.read_options)
    options["sky"] = conversion.to_dict()
    return make_cloud(values, metric, columns=names, source=raw.source, standardize=standardize,
                      source_checksum=raw.source_checksum, read_options=tuple(options.items()), unit=unit)


def _unit(explicit, names, units):
    """The cloud's unit: the explicit one, else the one unit every chosen column names, else None (warned)."""
    if explicit is not None or all(u is None for u in units):
        return explicit
    named = set(units)
    if len(named) == 1:
        return units[0]
    shown = ", ".join(f"{name!r}: {u!r}" for name, u in zip(names, units))
    warnings.warn(
        f"The chosen columns do not share one unit ({shown}); the cloud's unit is left unnamed. Pass unit=... "
        f"(command line: --unit) to name it, or standardize=True for columns in different units.",
        MixedUnitsWarning, stacklevel=4)
    return None
