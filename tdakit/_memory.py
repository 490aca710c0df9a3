"""Peak resident memory of a block of work, from the operating system's high-water mark."""

from __future__ import annotations

import resource
import sys
from pathlib import Path

_STATUS = Path("/proc/self/status")
_CLEAR = Path("/proc/self/clear_refs")


def _status_bytes(field: str) -> int | None:
    """A memory line of /proc/self/status (``VmHWM``, ``VmRSS``) in bytes; None where there is none."""
    if _STATUS.exists():
        for line in _STATUS.read_text().splitlines():
            if line.startswith(field + ":"):
                return int(line.split()[1]) * 1024
    return None


def _high_water_mark() -> int:
    """The process's peak resident set in bytes."""
    peak = _status_bytes("VmHWM")
    if peak is not None:
        return peak
    peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    return int(peak) if sys.platform == "darwin" else int(peak) * 1024


def _reset_high_water_mark() -> bool:
    """Reset the peak to the current resident set (Linux); False where the system does not allow it."""
    try:
        _CLEAR.write_text("5")
        return True
    except OSError:
        return False


class PeakMemory:
    """Context manager measuring the peak resident memory of this process during a block.

    ``peak_bytes`` is the high-water mark at exit and ``scope`` says what it covers:
    ``"this step"`` when the mark could be reset at entry (Linux), else
    ``"process lifetime"`` (an upper bound on the block's peak). ``growth_bytes`` is the
    peak less the memory resident at entry (read where the system reports it, else 0).
    Worker processes are not included.
    """

    def __enter__(self) -> PeakMemory:
        self.start_bytes = _status_bytes("VmRSS") or 0
        self.scope = "this step" if _reset_high_water_mark() else "process lifetime"
        self.peak_bytes = 0
        return self

    def __exit__(self, *exc) -> None:
        self.peak_bytes = _high_water_mark()

    @property
    def growth_bytes(self) -> int:
        """The peak less the memory resident at entry: what the block itself added at most."""
        return max(0, self.peak_bytes - self.start_bytes)
