"""Opening input files safely: regular files only, never a blocking open, every failure in tdakit's words."""

from __future__ import annotations

import errno
import hashlib
import os
import stat
from pathlib import Path

from tdakit.errors import DataFileNotFoundError, InvalidDataError

__all__ = ["as_path", "describe_size", "open_regular", "sha256_of"]

_KINDS = ((stat.S_ISFIFO, "a named pipe (FIFO)"), (stat.S_ISCHR, "a character device"),
          (stat.S_ISBLK, "a block device"), (stat.S_ISSOCK, "a socket"))


def as_path(value) -> Path:
    """A ``Path`` from str, bytes or os.PathLike (bytes are decoded with the file system's encoding)."""
    if isinstance(value, bytes):
        value = os.fsdecode(value)
    return Path(value)


def describe_size(n_bytes: int) -> str:
    """``n_bytes`` in decimal units with one decimal (``2.4 GB``)."""
    size = float(n_bytes)
    for unit in ("bytes", "kB", "MB", "GB", "TB"):
        if size < 1000 or unit == "TB":
            return f"{int(size)} bytes" if unit == "bytes" else f"{size:.1f} {unit}"
        size /= 1000
    return f"{size:.1f} TB"  # pragma: no cover - loop always returns


def _kind(mode: int) -> str:
    if stat.S_ISDIR(mode):
        return "a folder"
    return next((name for test, name in _KINDS if test(mode)), "not a regular file")


def _refuse_kind(path: Path, mode: int, what: str, parameter: str) -> InvalidDataError:
    kind = _kind(mode)
    if kind == "a folder":
        return InvalidDataError(f"The {what} {str(path)!r} is a folder, not a file; name a file inside it.",
                                parameter=parameter)
    return InvalidDataError(
        f"The {what} {str(path)!r} is {kind}, not a regular file; tdakit reads only regular files (it never "
        f"waits on a pipe or device). Save the data to a file first.", parameter=parameter)


def _os_error(path: Path, exc: OSError, what: str, parameter: str) -> Exception:
    if exc.errno == errno.ENOENT:
        return DataFileNotFoundError(
            f"The {what} {str(path)!r} does not exist (working directory {os.getcwd()!r}).", parameter=parameter)
    if exc.errno == errno.ELOOP:
        reason = "its symbolic links form a loop"
    elif exc.errno in (errno.EACCES, errno.EPERM):
        reason = "permission denied"
    elif exc.errno == errno.ENAMETOOLONG:
        reason = "the name is too long"
    else:
        reason = exc.strerror or type(exc).__name__
    return InvalidDataError(f"The {what} {str(path)!r} cannot be opened: {reason}.", parameter=parameter)


def open_regular(path: Path, what: str = "file", parameter: str = "source"):
    """Open ``path`` for binary reading if (and only if) it is a regular file.

    The type is checked with ``os.stat`` before opening and again with ``os.fstat`` on the
    descriptor, which is opened non-blocking, so a FIFO swapped in between cannot block.
    """
    try:
        info = os.stat(path)
    except (OSError, ValueError) as exc:
        if isinstance(exc, ValueError):  # e.g. an embedded NUL character
            raise InvalidDataError(f"The {what} name {str(path)!r} is not a valid path ({exc}).",
                                   parameter=parameter) from None
        raise _os_error(path, exc, what, parameter) from None
    if not stat.S_ISREG(info.st_mode):
        raise _refuse_kind(path, info.st_mode, what, parameter)
    flags = os.O_RDONLY | getattr(os, "O_NONBLOCK", 0) | getattr(os, "O_CLOEXEC", 0) | getattr(os, "O_BINARY", 0)
    try:
        fd = os.open(path, flags)
    except OSError as exc:
        raise _os_error(path, exc, what, parameter) from None
    try:
        mode = os.fstat(fd).st_mode
        if not stat.S_ISREG(mode):
            raise _refuse_kind(path, mode, what, parameter)
        return os.fdopen(fd, "rb")
    except BaseException:
        os.close(fd)
        raise


def sha256_of(handle) -> str:
    """SHA-256 of an open binary file, read in 1 MiB chunks; the position is restored to the start."""
    digest = hashlib.sha256()
    handle.seek(0)
    for chunk in iter(lambda: handle.read(1 << 20), b""):
        digest.update(chunk)
    handle.seek(0)
    return digest.hexdigest()
