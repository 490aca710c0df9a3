"""Heavy work in a separate process that can be cancelled (gudhi's C++ calls cannot be interrupted).

A worker never outlives the session that started it: it stops when its job is cancelled, when the
widget that owns it is closed (the page went away), when the kernel exits (``atexit``), and, should
the kernel be killed outright, when a watchdog thread in the worker sees the kernel's process gone.
"""

from __future__ import annotations

import atexit
import multiprocessing
import multiprocessing.util  # its exit handler joins workers: imported first, so stop_all runs before it
import os
import queue
import threading
import time
import traceback
import warnings
import weakref
from collections.abc import Callable

_CONTEXT = None
_RUNNING: weakref.WeakSet = weakref.WeakSet()  # every job still running in this process
WATCHDOG_INTERVAL = 0.5  # seconds between the worker's checks that its kernel is alive


def _context():
    """A forkserver context (safe beside the kernel's threads) with tdakit preloaded; spawn elsewhere."""
    global _CONTEXT
    if _CONTEXT is None:
        methods = multiprocessing.get_all_start_methods()
        _CONTEXT = multiprocessing.get_context("forkserver" if "forkserver" in methods else "spawn")
        if "forkserver" in methods:
            _CONTEXT.set_forkserver_preload(["tdakit.widgets.jobs"])
    return _CONTEXT


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:  # exists, owned by someone else
        return True
    return True


def _stop_children(pid: int) -> None:
    """Kill the processes a worker started (e.g. the pool of ``n_jobs`` replicate workers)."""
    import psutil

    try:
        children = psutil.Process(pid).children(recursive=True)
    except psutil.Error:
        return
    for child in children:
        try:
            child.kill()
        except psutil.Error:
            pass
    psutil.wait_procs(children, timeout=5)


def _watch_parent(pid: int) -> None:
    """In the worker: exit at once when the kernel that started it is gone (killed, crashed)."""
    def watch():
        while _alive(pid):
            time.sleep(WATCHDOG_INTERVAL)
        _stop_children(os.getpid())
        os._exit(3)

    threading.Thread(target=watch, daemon=True, name="tdakit-parent-watchdog").start()


def _child(channel, function, args, parent_pid) -> None:
    _watch_parent(parent_pid)

    def progress(step, done, total):
        channel.put(("progress", (step, done, total)))

    def forward(message, category, filename, lineno, file=None, line=None):
        text = " ".join(str(message).split())
        channel.put(("warning", f"{category.__name__}: {text}"))

    warnings.simplefilter("always")  # each warning of the run reaches the log pane, not only the first
    warnings.showwarning = forward
    try:
        channel.put(("done", function(*args, progress=progress)))
    except BaseException as exc:  # reported to the parent's log pane, never swallowed
        message = " ".join(str(exc).split()) or type(exc).__name__
        channel.put(("error", (f"{type(exc).__name__}: {message}", traceback.format_exc())))


class BackgroundJob:
    """Run ``function(*args, progress=...)`` in a worker process; report back through callbacks.

    ``state`` goes ``"ready"`` -> ``"running"`` -> ``"done"``, ``"failed"`` or ``"cancelled"``.
    Callbacks run on a watcher thread of this process; ``on_warning(text)`` receives every
    warning the work raised, as it is raised.
    """

    def __init__(self, function: Callable, *args, on_progress=None, on_done=None, on_error=None, on_warning=None):
        self.function, self.args = function, args
        self.on_progress, self.on_done, self.on_error, self.on_warning = on_progress, on_done, on_error, on_warning
        self.state, self.result, self.error, self.process = "ready", None, None, None
        self.warnings: list[str] = []
        self._thread = None
        self._stop = threading.Event()

    def start(self) -> BackgroundJob:
        context = _context()
        self._channel = context.Queue()
        self.process = context.Process(target=_child, args=(self._channel, self.function, self.args, os.getpid()),
                                       daemon=False)  # it may start its own pool for n_jobs > 1
        self.process.start()
        self.state = "running"
        _RUNNING.add(self)
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
            except (EOFError, OSError):  # the channel went away: cancelled meanwhile
                return
            if self._stop.is_set():
                return
            if kind == "progress" and self.on_progress is not None:
                self.on_progress(*payload)
            elif kind == "warning":
                self.warnings.append(payload)
                if self.on_warning is not None:
                    self.on_warning(payload)
            elif kind == "done":
                self._finish("done", result=payload)
                return
            elif kind == "error":
                self._finish("failed", error=payload)
                return

    def _finish(self, state, result=None, error=None) -> None:
        self.process.join(timeout=10)
        self.state, self.result, self.error = state, result, error
        _RUNNING.discard(self)
        callback = self.on_done if state == "done" else self.on_error
        if callback is not None:
            callback(result if state == "done" else error)

    def cancel(self) -> None:
        """Stop the worker process (terminate, then kill) and wait until it is gone."""
        if self.state != "running":
            return
        self._stop.set()
        _stop_children(self.process.pid)
        self.process.terminate()
        self.process.join(timeout=5)
        if self.process.is_alive():
            self.process.kill()
            self.process.join(timeout=5)
        self.state = "cancelled"
        _RUNNING.discard(self)

    def wait(self, timeout: float | None = None) -> str:
        """Block until the job ends (for scripts and tests); returns the state."""
        if self._thread is not None:
            self._thread.join(timeout)
        return self.state


def stop_all() -> int:
    """Cancel every job still running in this process; returns how many were stopped."""
    jobs = [job for job in list(_RUNNING) if job.state == "running"]
    for job in jobs:
        job.cancel()
    return len(jobs)


atexit.register(stop_all)
