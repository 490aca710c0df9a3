"""Heavy work in a separate process that can be cancelled (gudhi's C++ calls cannot be interrupted)."""

from __future__ import annotations

import multiprocessing
import queue
import threading
import traceback
from collections.abc import Callable

_CONTEXT = None


def _context():
    """A forkserver context (safe beside the kernel's threads) with tdakit preloaded; spawn elsewhere."""
    global _CONTEXT
    if _CONTEXT is None:
        methods = multiprocessing.get_all_start_methods()
        _CONTEXT = multiprocessing.get_context("forkserver" if "forkserver" in methods else "spawn")
        if "forkserver" in methods:
            _CONTEXT.set_forkserver_preload(["tdakit.widgets.jobs"])
    return _CONTEXT


def _child(channel, function, args) -> None:
    def progress(step, done, total):
        channel.put(("progress", (step, done, total)))

    try:
        channel.put(("done", function(*args, progress=progress)))
    except BaseException as exc:  # reported to the parent's log pane, never swallowed
        message = " ".join(str(exc).split()) or type(exc).__name__
        channel.put(("error", (f"{type(exc).__name__}: {message}", traceback.format_exc())))


class BackgroundJob:
    """Run ``function(*args, progress=...)`` in a worker process; report back through callbacks.

    ``state`` goes ``"ready"`` -> ``"running"`` -> ``"done"``, ``"failed"`` or ``"cancelled"``.
    Callbacks run on a watcher thread of this process.
    """

    def __init__(self, function: Callable, *args, on_progress=None, on_done=None, on_error=None):
        self.function, self.args = function, args
        self.on_progress, self.on_done, self.on_error = on_progress, on_done, on_error
        self.state, self.result, self.error, self.process = "ready", None, None, None
        self._thread = None
        self._stop = threading.Event()

    def start(self) -> BackgroundJob:
        context = _context()
        self._channel = context.Queue()
        self.process = context.Process(target=_child, args=(self._channel, self.function, self.args), daemon=True)
        self.process.start()
        self.state = "running"
        self._thread = threading.Thread(target=self._watch, daemon=True)
        self._thread.start()
        return self

    def _watch(self) -> None:
        while not self._stop.is_set():
            try:
                kind, payload = self._channel.get(timeout=0.1)
            except queue.Empty:
                if not self.process.is_alive() and not self._stop.is_set():
                    self._finish("failed", error=(f"the worker process stopped unexpectedly (exit code "
                                                  f"{self.process.exitcode})", ""))
                    return
                continue
            if kind == "progress" and self.on_progress is not None:
                self.on_progress(*payload)
            elif kind == "done":
                self._finish("done", result=payload)
                return
            elif kind == "error":
                self._finish("failed", error=payload)
                return

    def _finish(self, state, result=None, error=None) -> None:
        self.process.join(timeout=10)
        self.state, self.result, self.error = state, result, error
        callback = self.on_done if state == "done" else self.on_error
        if callback is not None:
            callback(result if state == "done" else error)

    def cancel(self) -> None:
        """Stop the worker process (terminate, then kill) and wait until it is gone."""
        if self.state != "running":
            return
        self._stop.set()
        self.process.terminate()
        self.process.join(timeout=5)
        if self.process.is_alive():
            self.process.kill()
            self.process.join(timeout=5)
        self.state = "cancelled"

    def wait(self, timeout: float | None = None) -> str:
        """Block until the job ends (for scripts and tests); returns the state."""
        if self._thread is not None:
            self._thread.join(timeout)
        return self.state
