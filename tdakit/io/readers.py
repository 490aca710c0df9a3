"""Reading point clouds from arrays, DataFrames and files into validated :class:`Cloud` objects."""

from __future__ import annotations

import hashlib
import os
from pathlib import Path

import numpy as np
from numpy.typing import ArrayLike

from tdakit._validation import check_bool, fail
from tdakit.core.geometry.cloud import Cloud, make_cloud
from tdakit.core.geometry.metrics import make_metric
from tdakit.errors import DataFileNotFoundError, InvalidDataError

__all__ = ["load_cloud", "FILE_TYPES"]

FILE_TYPES = (".csv", ".dat", ".npy", ".npz", ".tsv", ".txt")
_DELIMITERS = (",", ";", "\t", "|")


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
) -> Cloud:
    """Read a point cloud and the metric that measures it.

    Parameters
    ----------
    source : array-like, pandas.DataFrame, str or path
        An array of shape (n_points, n_dims); a DataFrame; or a ``.npy``, ``.npz``,
        ``.csv``, ``.tsv``, ``.txt`` or ``.dat`` file. With ``metric="precomputed"``
        the array (or file) is the square distance matrix.
    columns : sequence of str or int, optional
        Columns to use, by name (DataFrame, text file with a header) or by position.
        Default: all columns.
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
        axis and table of the run. Default: none named (``"deg"`` for the angular metric).

    Returns
    -------
    Cloud
        The validated cloud; repeated points are kept and reported with a
        :class:`~tdakit.errors.DuplicatePointsWarning`.

    Raises
    ------
    InvalidDataError
        NaN or infinite values (first row named), too few points or columns,
        non-numeric data (line and column for text files), points outside the
        periodic box, coordinates whose squared distances would overflow.
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
    checksum, read_options = None, ()
    if isinstance(source, (str, os.PathLike)):
        path = Path(source)
        table, names, checksum = _read_file(path, delimiter=delimiter, header=header, key=key)
        label = str(path.resolve())
        given = (("key", key), ("delimiter", delimiter), ("header", header),
                 ("columns", None if columns is None else list(columns)))
        read_options = tuple((name, value) for name, value in given if value is not None)
    elif _is_dataframe(source):
        names = tuple(str(c) for c in source.columns)
        positions = _positions(columns, names, len(names))
        source, columns = source.iloc[:, positions], None
        table, names = _from_dataframe(source), tuple(names[i] for i in positions)
        label = "DataFrame"
    else:
        _no_file_options(delimiter, header, key)
        table, names, label = source, None, "array"
    table, names = _select_columns(table, names, columns)
    if unit is None and metric_obj.name == "angular":
        unit = "deg"
    return make_cloud(table, metric_obj, columns=names, source=label, standardize=standardize,
                      source_checksum=checksum, read_options=read_options, unit=unit)


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
    return frame.to_numpy(dtype=np.float64) if len(kinds) else np.zeros((len(frame), 0))


def _positions(columns, names, n_columns) -> list[int]:
    """Column positions for ``columns`` (names or ints); all columns when None."""
    if columns is None:
        return list(range(n_columns))
    if isinstance(columns, (str, int)) or not hasattr(columns, "__iter__"):
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
    if isinstance(column, (int, np.integer)) and not isinstance(column, bool):
        if not 0 <= column < n_columns:
            raise fail("columns", "load_cloud", f"positions in [0, {n_columns - 1}]", column)
        return int(column)
    if names is None or column not in names:
        valid = ", ".join(repr(n) for n in sorted(names)) if names else "none (the input has no column names)"
        raise fail("columns", "load_cloud", f"names of existing columns; valid names: {valid}", column)
    return names.index(column)


# -- files ------------------------------------------------------------------------------
def _read_file(path: Path, *, delimiter, header, key):
    if not path.exists():
        raise DataFileNotFoundError(
            f"The 'source' file {str(path)!r} does not exist (working directory {os.getcwd()!r}).",
            parameter="source")
    suffix = path.suffix.lower()
    if suffix not in FILE_TYPES:
        raise fail("source", "load_cloud", f"a file ending in one of {', '.join(FILE_TYPES)}", str(path))
    checksum = _sha256(path)
    if suffix in (".npy", ".npz"):
        for name, value in (("delimiter", delimiter), ("header", header)):
            if value is not None:
                raise fail(name, "load_cloud", "None for .npy / .npz files", value)
        return _read_numpy(path, key), None, checksum
    if key is not None:
        raise fail("key", "load_cloud", "None unless the file is .npz", key)
    table, names = _read_text(path, delimiter=delimiter, header=header)
    return table, names, checksum


def _sha256(path: Path) -> str:
    digest = hashlib.sha256()
    with open(path, "rb") as handle:
        for chunk in iter(lambda: handle.read(1 << 20), b""):
            digest.update(chunk)
    return digest.hexdigest()


def _read_numpy(path: Path, key):
    try:
        loaded = np.load(path, allow_pickle=False)
    except (ValueError, OSError, EOFError) as exc:
        raise InvalidDataError(f"Could not read {str(path)!r} as a numpy file: {exc}", parameter="source") from None
    if path.suffix.lower() == ".npy":
        if key is not None:
            raise fail("key", "load_cloud", "None for .npy files", key)
        return loaded
    with loaded:
        names = list(loaded.files)
        if key is None:
            key = names[0] if len(names) == 1 else "points"
        if key not in names:
            valid = ", ".join(repr(n) for n in sorted(names))
            raise fail("key", "load_cloud", f"the name of an array in the file; valid names: {valid}", key)
        return loaded[key]


def _read_text(path: Path, *, delimiter, header):
    import pandas as pd

    first = _first_data_line(path)
    if delimiter is None:
        delimiter = next((d for d in _DELIMITERS if d in first), None)
    elif not isinstance(delimiter, str) or not delimiter:
        raise fail("delimiter", "load_cloud", "a non-empty string", delimiter)
    if header is None:
        header = not all(_is_number(tok) for tok in _split(first, delimiter))
    else:
        header = check_bool(header, "header", "load_cloud")
    sep = r"\s+" if delimiter is None else delimiter
    frame = pd.read_csv(path, sep=sep, header=0 if header else None, comment="#", skip_blank_lines=True,
                        dtype=str, engine="c", keep_default_na=False)
    names = tuple(str(c).strip() for c in frame.columns) if header else None
    return _text_to_numbers(frame, path, header, names), names


def _first_data_line(path: Path) -> str:
    with open(path, encoding="utf-8", errors="replace") as handle:
        for line in handle:
            stripped = line.strip()
            if stripped and not stripped.startswith("#"):
                return stripped
    raise InvalidDataError(f"The file {str(path)!r} holds no data lines.", parameter="source")


def _split(line: str, delimiter: str | None) -> list[str]:
    return [tok.strip() for tok in (line.split(delimiter) if delimiter else line.split())]


def _is_number(token: str) -> bool:
    try:
        float(token)
    except ValueError:
        return False
    return True


def _text_to_numbers(frame, path, header, names):
    import pandas as pd

    values = np.empty(frame.shape, dtype=np.float64)
    for j, column in enumerate(frame.columns):
        text = frame[column].str.strip()
        numbers = pd.to_numeric(text, errors="coerce")
        bad = numbers.isna().to_numpy() & ~text.str.lower().isin(["nan", "inf", "-inf", "+inf"]).to_numpy()
        if bad.any():
            row = int(np.flatnonzero(bad)[0])
            label = f"column {j + 1}" + (f" ({names[j]!r})" if names else "")
            raise InvalidDataError(
                f"The file {str(path)!r} has a non-numeric cell {frame.iat[row, j]!r} at line "
                f"{_line_of_row(path, row, header)}, {label}. Fix or remove that line.", parameter="source")
        values[:, j] = numbers.to_numpy(dtype=np.float64)
    return values


def _line_of_row(path: Path, row: int, header: bool) -> int:
    """Physical (1-based) line number of data row ``row``, skipping blanks, comments and the header."""
    seen = -1 if header else 0
    with open(path, encoding="utf-8", errors="replace") as handle:
        for number, line in enumerate(handle, start=1):
            stripped = line.strip()
            if not stripped or stripped.startswith("#"):
                continue
            if seen == row:
                return number
            seen += 1
    return -1
