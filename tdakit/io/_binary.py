"""NumPy ``.npy`` / ``.npz`` reading and ZIP member checks that never trust a declared size.

Every array's header is parsed first and its declared size compared with the bytes actually
present; every ZIP member's size is bounded from the archive's directory before it is inflated.
Objects (pickles) are refused: unpickling can run arbitrary code.
"""

from __future__ import annotations

import io
import math
import os
import struct
import zipfile
import zlib

import numpy as np

from tdakit.errors import InvalidDataError
from tdakit.io._files import describe_size

__all__ = ["MAX_INFLATION", "MAX_MEMBERS", "ZIP_ERRORS", "check_member", "npy_from_bytes", "open_zip", "read_member"]

# A member may inflate at most this many times its compressed size (deflate's ceiling is ~1032; real
# numeric data compress < 10x). Small members (< 1 MiB) are never refused for their ratio. Common practice.
MAX_INFLATION = 100
_SMALL = 1 << 20
# An archive tdakit reads holds a few dozen members; the directory is counted before ``zipfile`` parses it
# (millions of tiny entries would otherwise cost gigabytes of ZipInfo objects).
MAX_MEMBERS = 10_000
_EOCD, _EOCD64_LOCATOR = b"PK\x05\x06", b"PK\x06\x07"

# Everything the ZIP layer raises on damaged input, including what single-byte flips provoke.
ZIP_ERRORS = (zipfile.BadZipFile, zipfile.LargeZipFile, NotImplementedError, RuntimeError, ValueError, EOFError,
              OSError, KeyError, IndexError, OverflowError, UnicodeDecodeError, zlib.error, TypeError)


def _declared_entries(handle) -> int | None:
    """The member count in the end-of-central-directory record (ZIP64 aware); None when not found."""
    size = handle.seek(0, os.SEEK_END)
    start = max(0, size - (65_535 + 22))
    handle.seek(start)
    tail = handle.read()
    handle.seek(0)
    at = tail.rfind(_EOCD)
    if at < 0 or at + 22 > len(tail):
        return None
    entries = struct.unpack_from("<H", tail, at + 10)[0]
    locator = at - 20
    if entries == 0xFFFF and locator >= 0 and tail[locator:locator + 4] == _EOCD64_LOCATOR:
        offset = struct.unpack_from("<Q", tail, locator + 8)[0]
        if 0 <= offset <= size - 56:
            handle.seek(offset)
            record = handle.read(56)
            handle.seek(0)
            if record[:4] == b"PK\x06\x06":
                entries = struct.unpack_from("<Q", record, 32)[0]
    return entries


def open_zip(handle, label: str, parameter: str = "source") -> zipfile.ZipFile:
    """Open a ZIP archive from a binary file object; damaged or over-full archives raise InvalidDataError."""
    try:
        entries = _declared_entries(handle)
    except (OSError, struct.error):
        entries = None
    if entries is not None and entries > MAX_MEMBERS:
        raise InvalidDataError(f"{label}: its ZIP directory lists {entries:,} members, more than the "
                               f"{MAX_MEMBERS:,} tdakit reads; it was not opened.", parameter=parameter)
    try:
        return zipfile.ZipFile(handle)
    except ZIP_ERRORS as exc:
        raise InvalidDataError(f"{label} is not a complete ZIP archive ({_reason(exc)}); it may be truncated or "
                               f"damaged.", parameter=parameter) from None


def _reason(exc: BaseException) -> str:
    text = str(exc) or type(exc).__name__
    return text if len(text) < 160 else text[:157] + "..."


def check_member(info: zipfile.ZipInfo, archive_size: int, label: str, *, limit: int | None = None,
                 parameter: str = "source") -> None:
    """Refuse a member whose directory entry claims more than the archive can hold or inflates too far."""
    name = info.filename
    if info.compress_size > archive_size:
        problem = f"claims {describe_size(info.compress_size)} in a {describe_size(archive_size)} file"
    elif info.compress_type == zipfile.ZIP_STORED and info.file_size != info.compress_size:
        problem = (f"is stored uncompressed but declares {describe_size(info.file_size)} for "
                   f"{describe_size(info.compress_size)} of content")
    elif limit is not None and info.file_size > limit:
        problem = f"would inflate to {describe_size(info.file_size)}, more than the {describe_size(limit)} allowed"
    elif info.file_size > _SMALL and info.file_size > MAX_INFLATION * max(info.compress_size, 1):
        problem = (f"would inflate from {describe_size(info.compress_size)} to {describe_size(info.file_size)} "
                   f"(compression ratio above {MAX_INFLATION}: a decompression bomb or a damaged directory)")
    else:
        return
    raise InvalidDataError(f"{label}: member {name!r} {problem}; it was not read.", parameter=parameter)


def read_member(archive: zipfile.ZipFile, info: zipfile.ZipInfo, label: str, parameter: str = "source") -> bytes:
    """The content of one (already size-checked) member; CRC and ZIP-layer failures become InvalidDataError."""
    try:
        with archive.open(info) as stream:
            data = stream.read(info.file_size + 1)
    except ZIP_ERRORS as exc:
        raise InvalidDataError(f"{label}: member {info.filename!r} cannot be read ({_reason(exc)}); the file is "
                               f"damaged.", parameter=parameter) from None
    if len(data) != info.file_size:
        raise InvalidDataError(f"{label}: member {info.filename!r} holds {len(data)} bytes where its directory "
                               f"entry declares {info.file_size}; the file is damaged.", parameter=parameter)
    return data


def npy_from_bytes(data: bytes, label: str, parameter: str = "source") -> np.ndarray:
    """Parse ``.npy`` bytes: header first, declared size checked against the bytes present, no pickles."""
    stream = io.BytesIO(data)
    try:
        version = np.lib.format.read_magic(stream)
        if version == (1, 0):
            shape, fortran, dtype = np.lib.format.read_array_header_1_0(stream)
        elif version == (2, 0):
            shape, fortran, dtype = np.lib.format.read_array_header_2_0(stream)
        else:
            raise ValueError(f"format version {version} is not one tdakit reads")
    except Exception as exc:  # numpy raises ValueError, SyntaxError, KeyError... on damaged headers
        raise InvalidDataError(f"{label} is not a numpy file (.npy) tdakit can read ({_reason(exc)}).",
                               parameter=parameter) from None
    if dtype.hasobject:
        raise InvalidDataError(
            f"{label} holds Python objects (pickled data), which tdakit never loads because unpickling can run "
            f"arbitrary code. Save plain numeric arrays (np.save(..., array.astype(float))).", parameter=parameter)
    declared = math.prod(shape) * dtype.itemsize
    present = len(data) - stream.tell()
    if declared != present:
        raise InvalidDataError(
            f"{label} declares an array of shape {tuple(shape)} and type {dtype} ({describe_size(declared)}) but "
            f"holds {describe_size(present)} of data; the file is truncated or damaged.", parameter=parameter)
    array = np.frombuffer(data, dtype=dtype, count=math.prod(shape), offset=stream.tell())
    return array.reshape(shape, order="F" if fortran else "C")
