"""Atomic outputs: a file is either the old complete one or the new complete one, never half written.

:func:`atomic_output` is the one helper every writer uses (run files, feature tables, figures)::

    with atomic_output(path) as temporary:
        figure.savefig(temporary, format="pdf")   # or anything that writes to a path

The content goes to a hidden temporary file in the target's folder (same file system, so the
final ``os.replace`` is atomic), is flushed to disk (``fsync``), given the permissions a newly
created file gets (``0o666`` minus the umask) and renamed over the target. On any failure,
KeyboardInterrupt included, the temporary file is removed and the old target is untouched; an
OS failure (full disk, no permission) becomes :class:`~tdakit.errors.OutputWriteError` naming the file.
"""

from __future__ import annotations

import contextlib
import errno
import os
import tempfile
from collections.abc import Iterator
from pathlib import Path

from tdakit._validation import fail
from tdakit.errors import DataFileNotFoundError, OutputWriteError, TdakitError

__all__ = ["PARTIAL_SUFFIX", "atomic_output", "created_file_mode", "leftover_temporaries", "write_table"]

PARTIAL_SUFFIX = ".partial"


def created_file_mode() -> int:
    """The mode a newly created file gets here: ``0o666`` minus the process umask."""
    mask = None
    try:
        with open("/proc/self/status", encoding="ascii") as status:
            for line in status:
                if line.startswith("Umask:"):
                    mask = int(line.split()[1], 8)
                    break
    except (OSError, ValueError):
        mask = None
    if mask is None:  # no /proc: read it the classic way (set and restore at once)
        mask = os.umask(0o022)
        os.umask(mask)
    return 0o666 & ~mask


def _reason(exc: OSError) -> str:
    if exc.errno == errno.ENOSPC:
        return "no space left on the device"
    if exc.errno == errno.EDQUOT:
        return "the disk quota is exceeded"
    if exc.errno in (errno.EACCES, errno.EPERM):
        return "permission denied"
    if exc.errno == errno.EROFS:
        return "the file system is read-only"
    return exc.strerror or str(exc) or type(exc).__name__


def _write_error(path: Path, exc: OSError, what: str) -> OutputWriteError:
    return OutputWriteError(
        f"Could not write the {what} {str(path)!r}: {_reason(exc)}. Nothing was written: any earlier file at that "
        f"path is unchanged and no partial file is left.", parameter="path")


def _target(path, what: str) -> Path:
    if isinstance(path, bytes):
        path = os.fsdecode(path)
    if not isinstance(path, (str, os.PathLike)):
        raise fail("path", "atomic_output", "a file path", path)
    path = Path(path)
    if not path.parent.is_dir():
        raise DataFileNotFoundError(f"The folder {str(path.parent)!r} for the {what} {str(path)!r} does not exist.",
                                    parameter="path")
    if path.is_dir():
        raise OutputWriteError(f"Could not write the {what} {str(path)!r}: a folder of that name is in the way.",
                               parameter="path")
    return path


def _sync_folder(folder: Path) -> None:
    """Make the rename itself durable (best effort: not every system can open a folder)."""
    with contextlib.suppress(OSError):
        fd = os.open(folder, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)


@contextlib.contextmanager
def atomic_output(path, *, what: str = "output file") -> Iterator[Path]:
    """Write ``path`` atomically: yield a temporary path in the same folder, then rename it over ``path``.

    Parameters
    ----------
    path : str, bytes or path
        The final file. Its folder must exist.
    what : str, default="output file"
        What the file is, in words, for error messages ("run file", "feature table", "figure").

    Yields
    ------
    Path
        A temporary path with the same suffix as ``path`` (so writers that infer the format from
        the suffix work); write the complete content there.

    Raises
    ------
    DataFileNotFoundError
        The folder does not exist.
    OutputWriteError
        Writing, syncing or renaming failed (full disk, no permission); the message names ``path``.
    """
    path = _target(path, what)
    try:
        handle, name = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=PARTIAL_SUFFIX + path.suffix)
        os.close(handle)
    except OSError as exc:
        raise _write_error(path, exc, what) from None
    temporary = Path(name)
    try:
        yield temporary
        fd = os.open(temporary, os.O_RDONLY)
        try:
            os.fsync(fd)
        finally:
            os.close(fd)
        os.chmod(temporary, created_file_mode())
        os.replace(temporary, path)
    except OSError as exc:
        temporary.unlink(missing_ok=True)
        if isinstance(exc, TdakitError):  # already in tdakit's words (e.g. from the writer itself)
            raise
        raise _write_error(path, exc, what) from None
    except BaseException:
        temporary.unlink(missing_ok=True)
        raise
    _sync_folder(path.parent)


def leftover_temporaries(path) -> list[Path]:
    """Temporary files that :func:`atomic_output` left for ``path`` when its process was killed (``kill -9``).

    A caller that knows no other process writes ``path`` (e.g. a command line holding its output
    folder) may delete them; this function only lists them.
    """
    path = Path(os.fsdecode(path) if isinstance(path, bytes) else path)
    if not path.parent.is_dir():
        return []
    return sorted(path.parent.glob(f".{glob_escape(path.name)}.*{PARTIAL_SUFFIX}{glob_escape(path.suffix)}"))


def glob_escape(text: str) -> str:
    """``text`` with the glob wildcards ``*``, ``?`` and ``[`` escaped."""
    return "".join(f"[{c}]" if c in "*?[" else c for c in text)


def write_table(table, path) -> Path:
    """Write a feature table (a pandas DataFrame) as CSV, atomically; return the path written.

    Parameters
    ----------
    table : pandas.DataFrame
        For example ``run.table``.
    path : str or path
        The CSV file (its folder must exist).

    Returns
    -------
    Path

    Raises
    ------
    InvalidParameterError
        ``table`` is not a DataFrame or ``path`` not a path.
    DataFileNotFoundError
        The folder does not exist.
    OutputWriteError
        The disk is full or the file cannot be written; any earlier file at ``path`` is unchanged.
    """
    if type(table).__name__ != "DataFrame" or not hasattr(table, "to_csv"):
        raise fail("table", "write_table", "a pandas DataFrame (such as run.table)", table)
    target = _target(path, "feature table")
    with atomic_output(target, what="feature table") as temporary:
        table.to_csv(temporary, index=False)
    return target
