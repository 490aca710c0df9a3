"""The output folder of a command: checked before any work, one writer at a time, every file complete.

How a run's files reach ``--out``:

1. Before the computation the folder is made (or refused: an existing file, a folder that cannot be written)
   and a lock is taken (``.<stem>.lock``): a second tdakit writing the same outputs into the same folder is
   refused at once, and a killed process releases the lock with its death.
2. Every output is written into a private staging folder ``.tdakit-partial-<stem>-<pid>`` inside ``--out``;
   a failure there (a full disk, a figure that cannot be written) leaves the previous run's files untouched
   and names the file, and the staging folder is removed.
3. Publishing: the previous run file is removed first, then every other file is moved into place (each move
   is atomic: a file is the old complete one or the new complete one), and the run file comes last. A kill
   during this short step leaves a folder without its run file - visibly unfinished, never the previous
   run's run file beside the new figures - and rerunning the same command completes it.

Staging folders of processes that no longer run are removed on the next run into the same folder.
"""

from __future__ import annotations

import os
import shutil
import tempfile
from pathlib import Path

from tdakit.errors import TdakitError
from tdakit.io._atomic import _sync_folder, write_table  # noqa: F401  (write_table: the CLI's table writer)

STAGING_PREFIX = ".tdakit-partial-"


class OutputError(TdakitError):
    """An output folder or file that cannot be used or written (named in the message)."""


def prepare_folder(out: Path, option: str = "--out") -> Path:
    """Make ``out`` (with parents) and check that files can be written there; refuse with the option's name."""
    out = Path(out)
    if out.exists() and not out.is_dir():
        raise OutputError(f"The {option} folder {str(out)!r} is an existing file, not a folder; choose a folder "
                          f"name (it is made if missing).", parameter="out")
    try:
        out.mkdir(parents=True, exist_ok=True)
        with tempfile.TemporaryFile(dir=out):
            pass
    except OSError as exc:
        raise OutputError(f"The {option} folder {str(out)!r} cannot be written ({exc.strerror or exc}); choose "
                          f"another folder.", parameter="out") from None
    return out


class FolderLock:
    """An exclusive lock on one run's outputs in a folder (released when the process ends, however it ends)."""

    def __init__(self, out: Path, stem: str):
        self.path = Path(out) / f".{stem}.lock"
        self.stream = None

    def __enter__(self):
        import fcntl

        self.stream = open(self.path, "a+")
        try:
            fcntl.flock(self.stream, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except OSError:
            self.stream.seek(0)
            owner = self.stream.read().strip() or "?"
            self.stream.close()
            raise OutputError(f"Another tdakit process (pid {owner}) is writing the same outputs into "
                              f"{str(self.path.parent)!r}; wait for it to finish or choose another --out.",
                              parameter="out") from None
        self.stream.seek(0)
        self.stream.truncate()
        self.stream.write(str(os.getpid()))
        self.stream.flush()
        return self

    def __exit__(self, *exc):
        # The file stays (removing it would let a third process lock a new file while a second holds the old).
        self.stream.truncate(0)
        self.stream.close()
        return False


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


def remove_stale_staging(out: Path, stem: str) -> list[Path]:
    """Remove what killed runs of ``stem`` left: staging folders and half-written checkpoint files.

    Called with the folder's lock held, so no other process of this stem is writing them.
    """
    removed = []
    for folder in Path(out).glob(f"{STAGING_PREFIX}{stem}-*"):
        pid = folder.name.rsplit("-", 1)[-1]
        if pid.isdigit() and not _alive(int(pid)):
            shutil.rmtree(folder, ignore_errors=True)
            removed.append(folder)
    for pattern in (f"{stem}.checkpoint.npz*.tmp", f".{stem}.checkpoint.json.*.partial"):
        for path in Path(out).glob(pattern):
            path.unlink(missing_ok=True)
            removed.append(path)
    return removed


class Staging:
    """Write a run's files into a private folder, then publish them with the run file last."""

    def __init__(self, out: Path, stem: str):
        self.out, self.stem = Path(out), stem
        self.folder = self.out / f"{STAGING_PREFIX}{stem}-{os.getpid()}"

    def __enter__(self):
        shutil.rmtree(self.folder, ignore_errors=True)
        try:
            self.folder.mkdir()
        except OSError as exc:
            raise OutputError(f"Cannot make the folder {str(self.folder)!r} for this run's outputs "
                              f"({exc.strerror or exc}).", parameter="out") from None
        return self

    def __exit__(self, *exc):
        shutil.rmtree(self.folder, ignore_errors=True)
        return False

    def write(self, name: str, writer) -> Path:
        """``writer(path)`` writes one file in the staging folder; an error names the file it was writing."""
        path = self.folder / name
        try:
            writer(path)
        except OSError as exc:  # tdakit's OutputWriteError included: it names the staging path
            raise self.failure(self.out / name, exc) from None
        return path

    def failure(self, final: Path, exc: BaseException) -> OutputError:
        """The error naming the file in ``out`` (not its staging copy), and that the previous outputs stay."""
        if isinstance(exc, TdakitError):
            detail = " ".join(str(exc).replace(str(self.folder), str(self.out)).split())
            return OutputError(f"{detail} The previous outputs in {str(self.out)!r} are unchanged.", parameter="out")
        detail = getattr(exc, "strerror", None) or str(exc) or type(exc).__name__
        return OutputError(f"Could not write {str(final)!r} ({detail}); the previous outputs in "
                           f"{str(self.out)!r} are unchanged.", parameter="out")

    def newest(self) -> Path | None:
        """The file written last in the staging folder (the one being written when a writer failed)."""
        files = [p for p in self.folder.iterdir() if p.is_file()]
        return max(files, key=lambda p: p.stat().st_mtime_ns) if files else None

    def publish(self, last: str | None = None) -> list[Path]:
        """Move every staged file into ``out``; ``last`` (the run file) is removed first and moved last."""
        names = sorted(p.name for p in self.folder.iterdir() if p.is_file())
        order = [n for n in names if n != last] + ([last] if last in names else [])
        if last is not None:
            (self.out / last).unlink(missing_ok=True)
        from tdakit.io._atomic import created_file_mode

        mode = created_file_mode()
        published = []
        for name in order:
            os.chmod(self.folder / name, mode)  # temporary files are private; outputs follow the umask
            os.replace(self.folder / name, self.out / name)
            published.append(self.out / name)
        _sync_folder(self.out)
        return published


FIGURE_ERRORS = (OSError, ValueError, RuntimeError, AttributeError, TypeError, MemoryError)


def write_figures(staging: Staging, writer, formats) -> list[Path]:
    """Write figures into the staging folder with ``writer(folder, formats)``; any failure names the file."""
    try:
        return writer(staging.folder, formats)
    except FIGURE_ERRORS as exc:
        if isinstance(exc, TdakitError) and not isinstance(exc, OSError):
            raise
        newest = Path(exc.filename) if getattr(exc, "filename", None) else staging.newest()
        name = newest.name if newest is not None else f"the figures ({', '.join(formats)})"
        raise staging.failure(staging.out / name, exc) from exc
