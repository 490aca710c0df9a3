"""Reading point clouds from arrays, DataFrames and files into validated :class:`Cloud` objects."""

from __future__ import annotations

import os
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
from numpy.typing import ArrayLike

from tdakit._validation import check_bool, fail
from tdakit.core.geometry.cloud import Cloud, make_cloud
from tdakit.core.geometry.metrics import make_metric
from tdakit.errors import InvalidDataError
from tdakit.io._binary import ZIP_ERRORS, check_member, npy_from_bytes, open_zip, read_member
from tdakit.io._datawarnings import warn_if_suspicious
from tdakit.io._files import as_path, open_regular, sha256_of
from tdakit.io._text import read_text_table

__all__ = ["load_cloud", "FILE_TYPES"]

FILE_TYPES = (".csv", ".dat", ".npy", ".npz", ".tsv", ".txt")
_RADIANS = ("rad", "radian", "radians")


def load_cloud(
    source: ArrayLike | str | os.PathLike,
    *,
    columns: list | tuple | None = None,
    metric: str = "euclidean",
    box: float | ArrayLike | None = None,
    p: float | None = None,
    standardize: bool = False,
    delimiter: str | None = None,
    header: bool | None = None,
    key: str | None = None,
    unit: str | None = None,
    where: str | None = None,
    dataset: str | int | None = None,
    file_format: str | None = None,
    drop_missing: bool = False,
    sky=None,
) -> Cloud:
    """Read a point cloud and the metric that measures it.

    Parameters
    ----------
    source : array-like, pandas.DataFrame, str, bytes or path
        An array of shape (n_points, n_dims); a DataFrame; or a ``.npy``, ``.npz``,
        ``.csv``, ``.tsv``, ``.txt`` or ``.dat`` file. With ``metric="precomputed"``
        the array (or file) is the square distance matrix. A masked array is read only
        when nothing is masked: masked entries are refused (tdakit never guesses how to
        drop or fill them). Only regular files are read (never a pipe or device). Text
        files must be UTF-8 (a byte-order mark is allowed), with the same number of fields
        on every line and at most 1,000,000 characters per line; ``.npy``/``.npz`` arrays
        holding Python objects (pickles) are refused.
    columns : sequence of str or int, optional
        Columns to use, by name (DataFrame, text file with a header) or by 0-based
        position. Default: all columns. In text files only the chosen columns must be
        numeric.
    metric : str, default="euclidean"
        ``"euclidean"``, ``"manhattan"``, ``"chebyshev"``, ``"minkowski"`` (order ``p``),
        ``"periodic"`` (minimum-image Euclidean distance in a box of side(s) ``box``;
        points must lie in ``[0, box]``), ``"angular"`` (two columns, longitude and
        latitude in degrees; great-circle distance in degrees), ``"cosine"``
        (``1 - cos``, which is not a metric) or ``"precomputed"``.
    box : float or sequence of float, optional
        Periodic box side length, one for all axes or one per axis.
    p : float, optional
        Minkowski order (``metric="minkowski"`` only), ``>= 1``.
    standardize : bool, default=False
        Rescale every column to zero mean and unit standard deviation, for columns
        in mixed units. The shift and scale are kept on the cloud.
    delimiter : str, optional
        Text files only: the field separator; detected from the first data line
        when omitted (``,``, ``;``, tab, ``|``, else white space).
    header : bool, optional
        Text files only: whether the first line holds column names; detected
        when omitted (a first line with a non-numeric field is a header).
    key : str, optional
        ``.npz`` only: the array to read; default the only array, or ``"points"``.
    unit : str, optional
        The unit of the coordinates (``"Mpc/h"``, ``"pc"``, ``"deg"``, ...), used on every
        axis and table of the run. Default: none named (``"deg"`` for the angular metric); for
        FITS/HDF5/Parquet files, the unit the file names for every chosen column.
    where, dataset, file_format, drop_missing
        FITS (``.fits``, ``.fit``, ``.fts``, ``.fits.gz``), HDF5 (``.h5``, ``.hdf5``) and Parquet (``.parquet``,
        ``.pq``) files only, read in row chunks: a row filter such as ``"z < 0.1 and mag_r < 19"``; the HDF5
        dataset or group path (FITS: extension name or number); the format when the suffix does not say
        (``"fits"``, ``"hdf5"``, ``"parquet"``); drop rows with missing values instead of failing. See
        :func:`tdakit.io.catalogues.read_catalogue`.
    sky : {"parallax", "redshift"}, dict or SkyConversion, optional
        Convert the three chosen columns (RA, Dec, parallax in mas or redshift) to Cartesian positions in pc
        or comoving Mpc; see :class:`tdakit.io.coordinates.SkyConversion` (angle unit, cosmology).

    Returns
    -------
    Cloud
        The validated cloud; repeated points are kept and reported with a
        :class:`~tdakit.errors.DuplicatePointsWarning`.

    Warns
    -----
    SuspiciousDataWarning
        With its reason, when the data load but look misread: angular input that looks like
        radians (silence with ``unit="deg"``), a column of strictly increasing integers used
        as a coordinate because ``columns`` was not given (a row identifier), or column spreads
        more than 1000 times apart under a coordinate metric without ``standardize``.

    Raises
    ------
    InvalidDataError
        NaN or infinite values, too few points or columns, non-numeric data,
        points outside the periodic box, coordinates whose squared distances would
        overflow; for text files every such message names the file and the 1-based
        line (header, comments and blank lines counted). Damaged, compressed,
        binary, non-UTF-8, decimal-comma or ragged files, folders, pipes and devices.
    InvalidParameterError
        An unknown metric, column name or option.
    DataFileNotFoundError
        ``source`` names a file that does not exist.

    Examples
    --------
    >>> import numpy as np, tdakit
    >>> cloud = tdakit.load_cloud(np.array([[0.0, 0.0], [3.0, 4.0]]))
    >>> cloud.n_points, cloud.metric.name
    (2, 'euclidean')
    """
    standardize = check_bool(standardize, "standardize", "load_cloud")
    metric_obj = make_metric(metric, p=p, box=box)
    if isinstance(source, Cloud):
        raise fail("source", "load_cloud", "an array, a DataFrame or a file path (it is already a Cloud)",
                   source)
    if isinstance(source, bytes):
        source = os.fsdecode(source)  # a path given as bytes
    if metric_obj.name == "angular" and isinstance(unit, str) and unit.strip().lower() in _RADIANS:
        raise fail("unit", "load_cloud", "None or 'deg': the angular metric reads (longitude, latitude) in degrees; "
                   "convert radians with numpy.degrees first", unit)
    from tdakit.io.catalogues import is_catalogue_request, load_catalogue  # catalogue formats, sky positions

    if is_catalogue_request(source, file_format=file_format, where=where, dataset=dataset,
                            drop_missing=drop_missing, sky=sky):
        cloud = load_catalogue(source, columns=columns, metric=metric_obj, standardize=standardize, unit=unit,
                               where=where, dataset=dataset, file_format=file_format, drop_missing=drop_missing,
                               sky=sky, delimiter=delimiter, header=header, key=key)
        warn_if_suspicious(cloud.points, cloud, columns_chosen=columns is not None, unit_named=unit is not None,
                           standardized=standardize)
        return cloud
    read = _read_source(source, columns, delimiter=delimiter, header=header, key=key)
    try:
        cloud = make_cloud(read.table, metric_obj, columns=read.names, source=read.label, standardize=standardize,
                           source_checksum=read.checksum, read_options=read.options, unit=unit)
    except InvalidDataError as exc:
        if not read.from_file:
            raise
        raise _with_file_lines(exc, read.lines, read.label) from None
    warn_if_suspicious(read.table, cloud, columns_chosen=columns is not None, unit_named=unit is not None,
                       standardized=standardize)
    return cloud


@dataclass
class _Read:
    """What a source gave: the chosen columns' values, their names and where they came from."""

    table: object
    names: tuple | None
    label: str
    checksum: str | None = None
    options: tuple = ()
    lines: np.ndarray | None = None  # file line of every row (text files)
    from_file: bool = False


def _read_source(source, columns, *, delimiter, header, key) -> _Read:
    if isinstance(source, (str, os.PathLike)):
        path = as_path(source)
        table, names, checksum, lines, left = _read_file(path, delimiter=delimiter, header=header, key=key,
                                                         columns=columns)
        table, names = _select_columns(table, names, left)
        given = (("key", key), ("delimiter", delimiter), ("header", header),
                 ("columns", None if columns is None else list(columns)))
        options = tuple((name, value) for name, value in given if value is not None)
        return _Read(table, names, str(path.resolve()), checksum, options, lines, True)
    if _is_dataframe(source):
        names = tuple(str(c) for c in source.columns)
        positions = _positions(columns, names, len(names))
        return _Read(_from_dataframe(source.iloc[:, positions]), tuple(names[i] for i in positions), "DataFrame")
    _no_file_options(delimiter, header, key)
    table, names = _select_columns(_unmasked(source), None, columns)
    return _Read(table, names, "array")


def _with_file_lines(exc: InvalidDataError, lines: np.ndarray | None, label: str) -> InvalidDataError:
    """The same error naming the file and, for text files, each 0-based data row's 1-based line in the file."""
    def line_of(match):
        row = int(match.group(1))
        return f"{match.group(0)} (line {int(lines[row])} of the file)" if 0 <= row < lines.size else match.group(0)

    message = str(exc) if lines is None else re.sub(r"\brow (\d+)", line_of, str(exc))
    if label not in message:
        message = f"{message} (file {label!r})"
    return type(exc)(message, parameter=exc.parameter)


def _unmasked(source):
    """A masked array's data when nothing is masked; refused otherwise (tdakit never guesses fill values)."""
    from tdakit.core.geometry.cloud import _unmask

    return _unmask(source, "source") if isinstance(source, np.ma.MaskedArray) else source


def _no_file_options(delimiter, header, key):
    for name, value in (("delimiter", delimiter), ("header", header), ("key", key)):
        if value is not None:
            raise fail(name, "load_cloud", "None unless 'source' is a file", value)


def _is_dataframe(source) -> bool:
    return type(source).__name__ == "DataFrame" and hasattr(source, "columns")


def _from_dataframe(frame):
    kinds = [(str(name), dtype.kind) for name, dtype in frame.dtypes.items()]
    for name, kind in kinds:
        if kind not in "iuf":
            raise InvalidDataError(
                f"Column {name!r} of the DataFrame is not numeric (dtype {frame[name].dtype}); choose numeric "
                f"columns with columns=[...] or convert it first.", parameter="source")
    if not kinds:
        return np.zeros((len(frame), 0))
    return frame.to_numpy(dtype=np.float64, na_value=np.nan)  # nullable columns: missing values become NaN


def _positions(columns, names, n_columns) -> list[int]:
    """Column positions for ``columns`` (names or ints); all columns when None."""
    if columns is None:
        return list(range(n_columns))
    if isinstance(columns, (str, bytes, int, np.integer)) or not hasattr(columns, "__iter__"):
        raise fail("columns", "load_cloud", "a list of column names or positions", columns)
    wanted = list(columns)
    if not wanted:
        raise fail("columns", "load_cloud", "a non-empty list of column names or positions", columns)
    return [_column_position(c, names, n_columns) for c in wanted]


def _select_columns(table, names, columns):
    if columns is None:
        return table, names
    array = np.asarray(table)
    if array.ndim != 2:
        raise fail("columns", "load_cloud", "None for input that is not a 2-D table", columns)
    positions = _positions(columns, names, array.shape[1])
    chosen = tuple(names[i] for i in positions) if names else tuple(f"x{i}" for i in positions)
    return array[:, positions], chosen


def _column_position(column, names, n_columns):
    if isinstance(column, (int, np.integer)) and not isinstance(column, (bool, np.bool_)):
        if not 0 <= column < n_columns:
            raise fail("columns", "load_cloud", f"positions in [0, {n_columns - 1}] (0-based)", column)
        return int(column)
    if not isinstance(column, str) or names is None or column not in names:
        valid = ", ".join(repr(n) for n in sorted(names)) if names else "none (the input has no column names)"
        raise fail("columns", "load_cloud", f"names of existing columns or 0-based positions; valid names: {valid}",
                   column)
    found = [i for i, name in enumerate(names) if name == column]
    if len(found) > 1:
        raise fail("columns", "load_cloud", f"names that appear once in the header; {column!r} appears "
                   f"{'twice' if len(found) == 2 else f'{len(found)} times'} (positions "
                   f"{', '.join(map(str, found))}), so choose by position", column)
    return found[0]


# -- files ------------------------------------------------------------------------------
def _read_file(path: Path, *, delimiter, header, key, columns):
    """Read a file: (table, names, checksum, file lines of the rows or None, columns still to select)."""
    suffix = path.suffix.lower()
    if suffix not in FILE_TYPES:
        from tdakit.io.catalogues._formats import FORMAT_SUFFIXES

        catalogue = ", ".join(s for suffixes in FORMAT_SUFFIXES.values() for s in suffixes)
        raise fail("source", "load_cloud", f"a file ending in one of {', '.join(FILE_TYPES)} or, with the formats "
                   f"extra, {catalogue} (or file_format= to name the format)", str(path))
    with open_regular(path, "'source' file") as handle:
        checksum = sha256_of(handle)
        if suffix in (".npy", ".npz"):
            for name, value in (("delimiter", delimiter), ("header", header)):
                if value is not None:
                    raise fail(name, "load_cloud", "None for .npy / .npz files", value)
            table = _read_npy(handle, path, key) if suffix == ".npy" else _read_npz(handle, path, key)
            return table, None, checksum, None, columns
        if key is not None:
            raise fail("key", "load_cloud", "None unless the file is .npz", key)
        data = _read_all(handle, path)
    text = read_text_table(data, path, delimiter=delimiter, header=header,
                           select=lambda names, n: _positions(columns, names, n))
    names = text.names
    if names is None and columns is not None:
        names = tuple(f"x{i}" for i in text.positions)
    return text.values, names, checksum, text.lines, None


def _read_all(handle, path: Path) -> bytes:
    try:
        return handle.read()
    except OSError as exc:
        raise InvalidDataError(f"The 'source' file {str(path)!r} cannot be read: {exc.strerror or exc}.",
                               parameter="source") from None


def _sha256(path: Path) -> str:
    """SHA-256 of a regular file (refusing folders, pipes and devices); used by every reader."""
    with open_regular(as_path(path), "'source' file") as handle:
        return sha256_of(handle)


def _read_npy(handle, path: Path, key):
    if key is not None:
        raise fail("key", "load_cloud", "None for .npy files", key)
    return npy_from_bytes(_read_all(handle, path), f"The file {str(path)!r}")


def _read_npz(handle, path: Path, key):
    label = f"The file {str(path)!r}"
    size = os.fstat(handle.fileno()).st_size
    with open_zip(handle, label) as archive:
        try:
            members = {info.filename[:-4]: info for info in archive.infolist() if info.filename.endswith(".npy")}
        except ZIP_ERRORS as exc:  # pragma: no cover - infolist is read when the archive opens
            raise InvalidDataError(f"{label} has a damaged ZIP directory ({exc}).", parameter="source") from None
        if not members:
            raise InvalidDataError(f"{label} holds no arrays (an .npz file with no .npy members).",
                                   parameter="source")
        if key is None:
            key = next(iter(members)) if len(members) == 1 else "points"
        if not isinstance(key, str) or key not in members:
            valid = ", ".join(repr(n) for n in sorted(members))
            raise fail("key", "load_cloud", f"the name of an array in the file; valid names: {valid}", key)
        info = members[key]
        check_member(info, size, label)
        return npy_from_bytes(read_member(archive, info, label), f"{label}, array {key!r},")
