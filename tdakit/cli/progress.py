"""Progress of the long steps: bars on a terminal, plain dated lines elsewhere (job logs, CI, ``nohup``).

Both take the pipeline's ``progress(step, done, total)`` calls. Off a terminal every step prints a line when
it starts and when it ends; a step with many units (the band's replicates, the study's settings) prints, after
its first units, how long the whole step should take, then at most one line per tenth of the work or per
``every`` seconds, each with the elapsed time and an estimate of the rest.
"""

from __future__ import annotations

import sys
import time
from contextlib import contextmanager

UNITS = {"band": "replicates", "settings": "settings", "landmarks": "", "diagrams": ""}


def duration(seconds: float) -> str:
    """``'4.2 s'``, ``'3 min 20 s'``, ``'2 h 05 min'``."""
    if seconds < 60:
        return f"{seconds:.1f} s"
    if seconds < 3600:
        return f"{int(seconds // 60)} min {int(seconds % 60):02d} s"
    return f"{int(seconds // 3600)} h {int(seconds % 3600 // 60):02d} min"


class _Step:
    def __init__(self, start: float, base: int, total: int):
        self.start, self.base, self.total = start, base, total
        self.first_unit_seen = False
        self.printed_at = start
        self.tenth = (10 * base) // max(total, 1)
        self.finished = False


class LineProgress:
    """``progress(step, done, total)`` that prints plain lines at a bounded rate.

    Parameters
    ----------
    stream : file
        Where the lines go (standard error by default).
    every : float
        At most one intermediate line per tenth of a step's work, or per ``every`` seconds.
    clock : callable
        Seconds, monotonic (a test passes a fake one).
    """

    def __init__(self, stream=None, *, every: float = 30.0, clock=time.monotonic):
        self.stream = sys.stderr if stream is None else stream
        self.every, self.clock = every, clock
        self.steps: dict[str, _Step] = {}
        self.reused: dict[str, int] = {}
        self.last_event = clock()

    def _print(self, text: str) -> None:
        print(f"[{time.strftime('%H:%M:%S')}] {text}", file=self.stream, flush=True)

    def __call__(self, step: str, done: int, total: int) -> None:
        now = self.clock()
        state = self.steps.get(step)
        if state is None or (state.finished and done < total):
            # a step starts where the previous event ended (its first report may come after its first units)
            start = self.last_event if done > 0 else now
            state = self.steps[step] = _Step(start, min(self.reused.get(step, 0), total), total)
            self._started(step, state, done)
        self.last_event = now
        if state.finished:
            return
        if done >= total:
            state.finished = True
            self._print(f"{step}: done in {duration(now - state.start)}" + self._count(step, total, total))
        elif total > 1 and done > state.base:
            self._update(step, state, done, now)

    def _count(self, step, done, total) -> str:
        unit = UNITS.get(step, "units")
        return f" ({done} of {total} {unit})" if total > 1 else ""

    def _started(self, step, state, done) -> None:
        if state.total <= 1:
            self._print(f"{step}: started")
        elif state.base:
            self._print(f"{step}: {state.base} of {state.total} {UNITS.get(step, 'units')} already done (reused)")
        else:
            self._print(f"{step}: started ({state.total} {UNITS.get(step, 'units')})")

    def _update(self, step, state, done, now) -> None:
        elapsed = now - state.start
        rate = (done - state.base) / max(elapsed, 1e-9)
        left = (state.total - done) / rate
        unit = UNITS.get(step, "units")
        if not state.first_unit_seen:  # the first estimate of the whole step: say it up front
            state.first_unit_seen = True
            state.printed_at, state.tenth = now, (10 * done) // state.total
            self._print(f"{step}: {done - state.base} {unit} in {duration(elapsed)}; the remaining "
                        f"{state.total - done} should take about {duration(left)}")
            return
        tenth = (10 * done) // state.total
        if tenth > state.tenth or now - state.printed_at >= self.every:
            state.printed_at, state.tenth = now, tenth
            self._print(f"{step}: {done} of {state.total} {unit} ({100 * done // state.total} %), "
                        f"{duration(elapsed)} elapsed, about {duration(left)} left")


class _Bars:
    """``progress(step, done, total)`` keeping one tqdm bar per step (interactive terminals)."""

    def __init__(self):
        self.bars: dict = {}
        self.reused: dict[str, int] = {}

    def __call__(self, step: str, done: int, total: int) -> None:
        from tqdm import tqdm

        bar = self.bars.get(step)
        if bar is None:
            bar = self.bars[step] = tqdm(total=total, desc=f"{step:>10}", unit="task", file=sys.stderr,
                                         initial=min(self.reused.get(step, 0), total))
        bar.update(max(0, done - bar.n))

    def close(self, leave: bool) -> None:
        for bar in self.bars.values():
            bar.leave = leave
            bar.close()


def _silent(step: str, done: int, total: int) -> None:
    return None


_silent.reused = {}  # type: ignore[attr-defined]


@contextmanager
def step_bars(enabled: bool = True, *, mode: str = "auto"):
    """Yield ``report(step, done, total)``: tqdm bars on a terminal, plain lines elsewhere, nothing if disabled.

    ``report.reused[step] = k`` tells it that the first k units of a step were reused (a resumed run), so
    its estimates count only the new work.
    """
    if not enabled or mode == "none":
        yield _silent
        return
    bars = mode == "bars" or (mode == "auto" and sys.stderr.isatty())
    if not bars:
        yield LineProgress()
        return
    report = _Bars()
    try:
        yield report
    except BaseException:
        report.close(leave=False)  # an error line follows: remove the unfinished bars
        raise
    report.close(leave=True)
