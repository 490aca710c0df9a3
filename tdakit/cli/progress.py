"""Progress bars (tqdm) for the long steps of the pipeline and the study."""

from __future__ import annotations

import sys
from contextlib import contextmanager


@contextmanager
def step_bars(enabled: bool = True):
    """Yield ``report(step, done, total)`` that keeps one tqdm bar per step name."""
    from tqdm import tqdm

    bars: dict = {}

    def report(step: str, done: int, total: int) -> None:
        if not enabled:
            return
        bar = bars.get(step)
        if bar is None:
            # disable=None: bars only on an interactive terminal, so logs and error lines stay clean.
            bar = bars[step] = tqdm(total=total, desc=f"{step:>10}", unit="task", file=sys.stderr, disable=None)
        bar.update(done - bar.n)

    try:
        yield report
    except BaseException:
        for bar in bars.values():
            bar.leave = False  # an error line follows: remove the unfinished bars
            bar.close()
        raise
    for bar in bars.values():
        bar.close()
