"""Chunked column readers for FITS binary tables, HDF5 datasets/groups and Parquet files.

Each reader opens the file lazily with the field's own library, exposes the column names, their dtypes and units
and the number of rows, and yields row chunks of chosen columns as ``{name: (values, missing)}`` where ``missing``
is a boolean mask or None. Missing means NaN in a float column, the TNULL value in a FITS integer column, or NULL
in a Parquet column.
"""

from __future__ import annotations

import contextlib
import importlib
from collections.abc import Iterator
from pathlib import Path

import numpy as np

from tdakit.errors import InvalidDataError, InvalidParameterError, TdakitError

FORMAT_SUFFIXES = {"fits": (".fits", ".fit", ".fts", ".fits.gz", ".fit.gz"), "hdf5": (".h5", ".hdf5", ".he5"),
                   "parquet": (".parquet", ".pq")}
_PACKAGES = {"fits": ("astropy.io.fits", "astropy"), "hdf5": ("h5py", "h5py"),
             "parquet": ("pyarrow.parquet", "pyarrow")}
_MAX_LISTED = 30


class MissingExtraError(TdakitError, ImportError):
    """An optional package needed to read a file format is not installed (``pip install tdakit[formats]``)."""


def require(file_format: str):
    """Import the library that reads ``file_format``, or fail naming the extra to install."""
    module, package = _PACKAGES[file_format]
    try:
        return importlib.import_module(module)
    except ImportError as exc:
        raise MissingExtraError(
            f"Reading {file_format.upper()} files needs the optional package {package!r}, which could not be "
            f"imported ({exc}). Install the catalogue readers with: pip install tdakit[formats]",
            parameter="source") from None


def listed(names) -> str:
    """Names for an error message, sorted, at most a few dozen."""
    names = sorted(str(n) for n in names)
    shown = ", ".join(repr(n) for n in names[:_MAX_LISTED])
    return shown + (f" ... ({len(names) - _MAX_LISTED} more)" if len(names) > _MAX_LISTED else "") or "none"


def missing_mask(values: np.ndarray, null_value=None, nulls: np.ndarray | None = None) -> np.ndarray | None:
    """Rows whose value is missing: NaN (floats), the null sentinel (integers) or an explicit null mask."""
    mask = nulls
    if values.dtype.kind == "f":
        nan = np.isnan(values)
        mask = nan if mask is None else mask | nan
    elif null_value is not None and values.dtype.kind in "iu":
        hit = values == null_value
        mask = hit if mask is None else mask | hit
    return mask if mask is not None and mask.any() else None


class Source:
    """The common face of the three readers (a context manager)."""

    file_format = ""

    def __init__(self, path: Path) -> None:
        self.path = path
        self.names: tuple[str, ...] = ()
        self.n_rows = 0
        self.label = ""

    def dtype(self, name: str) -> np.dtype:
        raise NotImplementedError

    def unit(self, name: str) -> str | None:
        raise NotImplementedError

    def chunks(self, names: list[str], chunk_rows: int) -> Iterator[tuple[int, dict]]:
        raise NotImplementedError

    def close(self) -> None:
        raise NotImplementedError

    def __enter__(self):
        return self

    def __exit__(self, *exc) -> None:
        self.close()


def _text(value) -> str | None:
    if isinstance(value, bytes):
        value = value.decode("utf-8", errors="replace")
    if isinstance(value, np.ndarray) and value.shape == ():
        value = value.item()
        return _text(value)
    if isinstance(value, str) and value.strip():
        return value.strip()
    return None


# -- FITS ------------------------------------------------------------------------------------------------
class FitsSource(Source):
    """A FITS binary (or ASCII) table extension, memory-mapped; chunks are row slices of the mapped table."""

    file_format = "fits"

    def __init__(self, path: Path, dataset) -> None:
        super().__init__(path)
        fits = require("fits")
        try:
            self.hdul = fits.open(path, memmap=True, mode="readonly")
            tables = [i for i, hdu in enumerate(self.hdul) if isinstance(hdu, (fits.BinTableHDU, fits.TableHDU))]
        except (OSError, ValueError, TypeError) as exc:
            raise InvalidDataError(f"Could not read {str(path)!r} as a FITS file: {exc}", parameter="source") from None
        self.hdu = self._choose(tables, dataset)
        self.label = f"extension {self.hdu.name or tables[0]!s}"
        self.names = tuple(self.hdu.columns.names)
        self.n_rows = int(self.hdu.header.get("NAXIS2", 0))
        try:
            self.data = self.hdu.data
            self._sample = self.data[:1] if self.n_rows else None
        except (OSError, ValueError, TypeError) as exc:
            self.hdul.close()
            raise InvalidDataError(f"Could not read the table of {str(path)!r}: {exc}", parameter="source") from None

    def _choose(self, tables, dataset):
        if not tables:
            self.hdul.close()
            size = self.path.stat().st_size
            damage = (f" Its size, {size} bytes, is not a multiple of the 2880-byte FITS block: the file is "
                      f"truncated or damaged." if size % 2880 else "")
            raise InvalidDataError(f"The FITS file {str(self.path)!r} holds no table extension.{damage}",
                                   parameter="source")
        if dataset is None:
            return self.hdul[tables[0]]
        if isinstance(dataset, str) and dataset.strip().isdigit():  # "--dataset 2" on the command line
            dataset = int(dataset)
        try:
            hdu = None if isinstance(dataset, bool) else self.hdul[dataset]  # True would be read as HDU 1
        except (KeyError, IndexError):
            hdu = None
        if hdu is None or self.hdul.index_of(hdu) not in tables:
            names = [f"{i} ({self.hdul[i].name})" for i in tables]
            self.hdul.close()
            raise InvalidParameterError(
                f"The 'dataset' parameter of load_cloud must name a table extension of the FITS file, by name or "
                f"number; tables: {', '.join(names)}. Got {dataset!r} instead.", parameter="dataset")
        return hdu

    def dtype(self, name: str) -> np.dtype:
        if self._sample is None:
            return np.dtype(float)
        field = self._sample.field(name)
        return np.dtype((field.dtype, field.shape[1:])) if field.ndim > 1 else field.dtype

    def unit(self, name: str) -> str | None:
        return _text(self.hdu.columns[name].unit)

    def chunks(self, names, chunk_rows):
        nulls = {name: self.hdu.columns[name].null for name in names}
        for start in range(0, self.n_rows, chunk_rows):
            block = self.data[start:start + chunk_rows]
            out = {}
            for name in names:
                values = np.asarray(block.field(name))
                null = nulls[name] if isinstance(nulls[name], (int, np.integer)) else None
                out[name] = (values, missing_mask(values, null))
            yield start, out

    def close(self) -> None:
        # On closing a memory-mapped file, astropy copies every column still referenced by a Column object into
        # memory (so the Column stays usable): the whole table. Unhook the columns from the mapped data first.
        for column in self.hdu.columns:
            with contextlib.suppress(AttributeError):  # the property's deleter; never read .array (it converts)
                del column.array
        self.data = self._sample = None
        self.hdul.close()

    def full_table_bytes(self) -> int:
        return int(self.hdu.header.get("NAXIS1", 0)) * self.n_rows


# -- HDF5 -------------------------------------------------------------------------------------------------
class Hdf5Source(Source):
    """An HDF5 table: a compound dataset (one field per column), a group of equal-length 1-D datasets (one per
    column), a 2-D numeric dataset (columns ``x0``, ``x1``, ...) or a 1-D dataset (one column).
    """

    file_format = "hdf5"

    def __init__(self, path: Path, dataset) -> None:
        super().__init__(path)
        self.h5py = require("hdf5")
        try:
            self.file = self.h5py.File(path, "r")
        except OSError as exc:
            raise InvalidDataError(f"Could not read {str(path)!r} as an HDF5 file: {exc}", parameter="source") from None
        try:
            self.node = self._choose(dataset)
            self._describe()
        except BaseException:
            self.file.close()
            raise

    def _candidates(self) -> list[str]:
        found = []

        def visit(name, obj):
            if self._table_like(obj):
                found.append("/" + name)

        if self._table_like(self.file):
            found.append("/")
        self.file.visititems(visit)
        return found

    def _table_like(self, obj) -> bool:
        if isinstance(obj, self.h5py.Dataset):
            return obj.dtype.names is not None or obj.ndim == 2  # a 1-D dataset is a column, chosen only by path
        return any(self._column_like(child) for child in obj.values())

    def _column_like(self, obj) -> bool:
        return isinstance(obj, self.h5py.Dataset) and obj.ndim == 1 and obj.dtype.names is None

    def _choose(self, dataset):
        if dataset is None:
            found = self._candidates()
            if len(found) == 1:
                return self.file[found[0]]
            what = f"several tables ({listed(found)})" if found else "no dataset"
            raise InvalidParameterError(
                f"The 'dataset' parameter of load_cloud must name the table to read: the HDF5 file "
                f"{str(self.path)!r} holds {what}. Got None instead.", parameter="dataset")
        if not isinstance(dataset, str) or dataset not in self.file:
            raise InvalidParameterError(
                f"The 'dataset' parameter of load_cloud must be the path of a dataset or group in the HDF5 file "
                f"(e.g. 'survey/galaxies'); tables in the file: {listed(self._candidates())}. Got {dataset!r} "
                f"instead.", parameter="dataset")
        try:
            return self.file[dataset]
        except (KeyError, OSError, ValueError) as exc:  # a soft or external link whose target is missing
            raise InvalidParameterError(
                f"The 'dataset' parameter of load_cloud names {dataset!r} in the HDF5 file {str(self.path)!r}, a "
                f"link whose target cannot be opened ({exc}); tables in the file: {listed(self._candidates())}.",
                parameter="dataset") from None

    def _describe(self) -> None:
        node = self.node
        self.label = f"dataset {node.name}"
        self.columns: dict[str, object] = {}
        if isinstance(node, self.h5py.Group):
            self.layout = "group"
            for name, child in node.items():
                if self._column_like(child):
                    self.columns[name] = child
            lengths = {child.shape[0] for child in self.columns.values()}
            self.n_rows = max(lengths) if lengths else 0
        elif node.dtype.names is not None:
            self.layout = "compound"
            self.columns = dict.fromkeys(node.dtype.names, node)
            self.n_rows = self._rows_of(node)
        elif node.ndim in (1, 2):
            self.layout = "array"
            names = [node.name.rsplit("/", 1)[-1]] if node.ndim == 1 else [f"x{j}" for j in range(node.shape[1])]
            self.columns = dict.fromkeys(names, node)
            self.n_rows = int(node.shape[0])
        else:
            raise InvalidDataError(
                f"The HDF5 dataset {node.name!r} has shape {node.shape}; tdakit reads a compound dataset, a group "
                f"of 1-D datasets, or a 1-D or 2-D numeric dataset.", parameter="dataset")
        self.names = tuple(self.columns)
        for child in dict.fromkeys(self.columns.values()):
            self._check_storage(child)

    def _check_storage(self, node) -> None:
        """Refuse a dataset that declares more data than it stores: the rows never written would be read as its
        fill value (and a declared size of 10^12 rows would be scanned for hours). Compressed datasets may store
        less, so only one storing nothing at all is refused.
        """
        declared = int(node.size) * node.dtype.itemsize
        stored = int(node.id.get_storage_size())
        filtered = any((node.compression, node.shuffle, node.fletcher32, node.scaleoffset is not None))
        if declared and (stored == 0 or (not filtered and stored < declared)):
            raise InvalidDataError(
                f"The HDF5 dataset {node.name!r} of {str(self.path)!r} declares shape {node.shape} ({declared:,} "
                f"bytes) but stores {stored:,} bytes: the rows never written would be read as its fill value "
                f"{node.fillvalue!r}. The file is incomplete; write every row, or choose another dataset.",
                parameter="dataset")

    def _rows_of(self, node) -> int:
        if node.ndim != 1:
            raise InvalidDataError(
                f"The HDF5 compound dataset {node.name!r} has shape {node.shape}; a table of rows must be 1-D.",
                parameter="dataset")
        return int(node.shape[0])

    def check_lengths(self, names) -> None:
        if self.layout != "group":
            return
        lengths = {name: self.columns[name].shape[0] for name in names}
        if len(set(lengths.values())) > 1:
            shown = ", ".join(f"{k!r}: {v}" for k, v in lengths.items())
            raise InvalidDataError(
                f"The columns of HDF5 group {self.node.name!r} have different lengths ({shown}); a table needs "
                f"one length.", parameter="columns")
        self.n_rows = next(iter(lengths.values()), 0)

    def dtype(self, name: str) -> np.dtype:
        node = self.columns[name]
        if self.layout == "compound":
            return node.dtype.fields[name][0]
        return node.dtype

    def unit(self, name: str) -> str | None:
        node = self.columns[name]
        for key in ("unit", "units"):
            if key in node.attrs:
                value = node.attrs[key]
                if self.layout == "compound" and isinstance(value, np.ndarray) and value.shape == (len(self.names),):
                    return _text(value[self.names.index(name)])
                return _text(value)
        return None

    def chunks(self, names, chunk_rows):
        step = self._aligned(chunk_rows)
        for start in range(0, self.n_rows, step):
            stop = min(start + step, self.n_rows)
            values = self._read(names, start, stop)
            yield start, {name: (values[name], missing_mask(values[name])) for name in names}

    def _aligned(self, chunk_rows: int) -> int:
        chunks = self.node.chunks if isinstance(self.node, self.h5py.Dataset) else None
        if chunks:
            return max(chunks[0], (chunk_rows // chunks[0]) * chunks[0])
        return chunk_rows

    def _read(self, names, start, stop) -> dict:
        if self.layout == "group":
            return {name: self.columns[name][start:stop] for name in names}
        if self.layout == "compound":
            block = self.node.fields(list(names))[start:stop]
            return {name: block[name] for name in names}
        if self.node.ndim == 1:
            return {names[0]: self.node[start:stop]}
        block = self.node[start:stop]
        return {name: block[:, int(name[1:])] for name in names}

    def close(self) -> None:
        self.file.close()


# -- Parquet ------------------------------------------------------------------------------------------------
class ParquetSource(Source):
    """A Parquet file, read in record batches of the chosen columns across its row groups."""

    file_format = "parquet"

    def __init__(self, path: Path, dataset) -> None:
        super().__init__(path)
        if dataset is not None:
            raise InvalidParameterError(
                f"The 'dataset' parameter of load_cloud must be None for Parquet files (a Parquet file holds one "
                f"table). Got {dataset!r} instead.", parameter="dataset")
        self.pq = require("parquet")
        import pyarrow as pa

        self.pa = pa
        try:
            self.file = self.pq.ParquetFile(path, buffer_size=1 << 16, pre_buffer=False,  # stream, not whole groups
                                            page_checksum_verification=True)  # where the writer stored checksums
        except (OSError, pa.ArrowException) as exc:
            raise InvalidDataError(f"Could not read {str(path)!r} as a Parquet file: {exc}",
                                   parameter="source") from None
        self.schema = self.file.schema_arrow
        self.names = tuple(self.schema.names)
        self.n_rows = int(self.file.metadata.num_rows)
        self.label = f"{self.file.metadata.num_row_groups} row group(s)"

    def dtype(self, name: str) -> np.dtype:
        if self.names.count(name) > 1:  # pyarrow cannot pick one of several same-named columns
            raise InvalidDataError(
                f"The Parquet file {str(self.path)!r} holds {self.names.count(name)} columns named {name!r}; tdakit "
                f"cannot tell them apart. Rename them, or use other columns.", parameter="columns")
        kind = self.schema.field(name).type
        types = self.pa.types
        if types.is_integer(kind) or types.is_floating(kind) or types.is_boolean(kind):
            return self.pa.array([], type=kind).to_numpy(zero_copy_only=False).dtype
        return np.dtype(object)

    def unit(self, name: str) -> str | None:
        metadata = self.schema.field(name).metadata or {}
        for key in (b"unit", b"units"):
            if key in metadata:
                return _text(metadata[key])
        return None

    def chunks(self, names, chunk_rows):
        start = 0
        # Small batches: pyarrow holds about one page, one dictionary page and one batch per column (~2.5 MB).
        batch_rows = min(chunk_rows, 1 << 14)
        for batch in self.file.iter_batches(batch_size=batch_rows, columns=list(names), use_threads=False):
            out = {}
            for name in names:
                array = batch.column(name)
                nulls = array.is_null().to_numpy(zero_copy_only=False) if array.null_count else None
                if nulls is not None:
                    array = array.fill_null(False if self.pa.types.is_boolean(array.type) else 0)
                values = array.to_numpy(zero_copy_only=False)
                out[name] = (values, missing_mask(values, nulls=nulls))
            yield start, out
            start += batch.num_rows

    def close(self) -> None:
        self.file.close()


SOURCES = {"fits": FitsSource, "hdf5": Hdf5Source, "parquet": ParquetSource}
