"""Pieces shared by the panels: run controls with progress and cancel, a log pane, figure views that say
when they are out of date.
"""

from __future__ import annotations

import datetime
import html
import threading
import time

import ipywidgets as widgets

from tdakit.plotting import figure_bytes
from tdakit.widgets.worker import BackgroundJob

STATUS_HEIGHT = "4.8em"  # fixed: a long status wraps inside it instead of pushing the figures about
FIGURE_DPI = 200  # a single-column figure (3.5 in) is then 700 px wide: sharp at the view's 720 px


def label(text: str, tip: str = "") -> widgets.HTML:
    """A plain label; ``tip`` is shown on hover (the trade's words for a term)."""
    title = f' title="{html.escape(tip)}"' if tip else ""
    return widgets.HTML(f"<span{title}>{text}</span>", layout=widgets.Layout(margin="0 4px"))


def note(text: str) -> widgets.HTML:
    """A short help line under a control, in small grey type, wrapping rather than cut."""
    return widgets.HTML(f'<div style="font-size:85%;color:#555;line-height:1.25;white-space:normal">{text}</div>',
                        layout=widgets.Layout(width="100%"))


class FigureView:
    """An image of a figure, a placeholder while there is none, and a banner when it is out of date.

    An empty view shows the placeholder text, never a broken-image icon: the image widget is
    hidden until it holds a PNG.
    """

    def __init__(self, placeholder: str = "Nothing to show yet: press Run.", max_width: str = "720px"):
        self.image = widgets.Image(format="png", layout=widgets.Layout(width="100%", max_width=max_width,
                                                                        display="none"))
        self.placeholder = widgets.HTML(f'<div style="color:#666;padding:2em 1em">{placeholder}</div>')
        self.banner = widgets.HTML("", layout=widgets.Layout(display="none"))
        self.stale = False
        self.widget = widgets.VBox([self.banner, self.placeholder, self.image],
                                   layout=widgets.Layout(width="100%", min_width="300px", min_height="120px"))

    @property
    def value(self) -> bytes:
        return self.image.value

    def show(self, figure) -> None:
        self.image.value = figure_bytes(figure, dpi=FIGURE_DPI)
        self.image.layout.display, self.placeholder.layout.display = None, "none"
        self.fresh()

    def clear(self, text: str | None = None) -> None:
        self.image.value = b""
        self.image.layout.display, self.placeholder.layout.display = "none", None
        if text is not None:
            self.placeholder.value = f'<div style="color:#666;padding:2em 1em">{text}</div>'
        self.fresh()

    def mark_stale(self, reason: str) -> None:
        """Keep the figure but say, above it, that it no longer matches the settings."""
        if not self.value:
            return
        self.stale = True
        self.banner.value = (f'<div style="background:#fff3cd;border:1px solid #c9a227;color:#5c4400;padding:3px 8px;'
                             f'font-weight:bold">Out of date \u2014 {reason}</div>')
        self.banner.layout.display = None

    def fresh(self) -> None:
        self.stale = False
        self.banner.value, self.banner.layout.display = "", "none"


class LogPane:
    """A visible, read-only log, newest line first: errors and warnings from callbacks and workers land here."""

    def __init__(self, height: str = "200px"):
        self.lines: list[str] = []
        self.widget = widgets.Textarea(value="", disabled=True, placeholder="Messages and warnings appear here.",
                                       layout=widgets.Layout(width="100%", height=height))
        self.box = widgets.VBox([label("<b>Log</b> (newest first)"), self.widget], layout=widgets.Layout(width="100%"))

    def write(self, message: str) -> None:
        stamp = datetime.datetime.now().strftime("%H:%M:%S")
        self.lines.append(f"[{stamp}] {message}")
        self.widget.value = "\n".join(reversed(self.lines[-400:]))

    @property
    def text(self) -> str:
        return "\n".join(self.lines)


def describe_progress(step: str, done: int, total: int, elapsed: float) -> str:
    """``"diagrams 3 of 10, 4 s so far, about 9 s left"``: the step, the count and the remaining time."""
    count = f"{done} of {total}" if total > 1 else ("done" if done >= total else "working")
    text = f"{step}: {count}, {elapsed:.0f} s so far"
    if 0 < done < total:
        text += f", about {elapsed / done * (total - done):.0f} s left"
    return text


class RunControls:
    """Run / Cancel buttons, a progress bar, its step text and a fixed-height status line around one job."""

    def __init__(self, run_label: str, log: LogPane, *, on_stop=None):
        self.run_button = widgets.Button(description=run_label, button_style="primary", icon="play",
                                         layout=widgets.Layout(width="auto", min_width="90px"))
        self.cancel_button = widgets.Button(description="Cancel", icon="stop", disabled=True,
                                            layout=widgets.Layout(width="auto", min_width="90px"))
        self.progress = widgets.IntProgress(value=0, min=0, max=1, layout=widgets.Layout(width="100%"))
        self.step = widgets.HTML("Idle.", layout=widgets.Layout(height="1.6em", overflow="hidden"))
        self.status = widgets.HTML(value="Ready.", layout=widgets.Layout(height=STATUS_HEIGHT, overflow="auto",
                                                                         width="100%"))
        self.log, self.on_stop = log, on_stop
        self.blocked = ""  # why Run is disabled (settings that cannot run), "" when it is not
        self.job: BackgroundJob | None = None
        self._step_name, self._step_start, self._last = "", 0.0, (0, 1)
        self._ticker: threading.Thread | None = None
        self.cancel_button.on_click(lambda _: self.cancel())

    @property
    def box(self) -> widgets.Box:
        buttons = widgets.HBox([self.run_button, self.cancel_button], layout=widgets.Layout(flex_flow="row wrap"))
        return widgets.VBox([buttons, self.progress, self.step, self.status], layout=widgets.Layout(width="100%"))

    def set_status(self, text: str) -> None:
        self.status.value = text

    def guard(self, action) -> None:
        """Run a callback's action; an error goes to the log pane and the status line, never into the void."""
        try:
            action()
        except Exception as exc:
            self.log.write(f"{type(exc).__name__}: {' '.join(str(exc).split())}")
            self.set_status("<b>Failed</b> - see the log below.")

    def start(self, function, *args, on_done, what: str = "Working") -> BackgroundJob:
        self.cancel()
        self.progress.value, self.progress.max, self.progress.bar_style = 0, 1, ""
        self.run_button.disabled, self.cancel_button.disabled = True, False
        self._step_name, self._step_start, self._last = "starting", time.monotonic(), (0, 1)
        self._warnings_seen: set[str] = set()
        self.set_status(f"{what}...")
        self.job = BackgroundJob(function, *args, on_progress=self._progress, on_done=lambda r: self._done(r, on_done),
                                 on_error=self._failed, on_warning=self._warned)
        self.job.start()
        self._ticker = threading.Thread(target=self._tick, args=(self.job,), daemon=True)
        self._ticker.start()
        return self.job

    def _tick(self, job) -> None:
        """Refresh the elapsed time every second, so a long single step still shows life."""
        while job.state == "running":
            self._show_step()
            time.sleep(1.0)

    def _show_step(self) -> None:
        done, total = self._last
        self.step.value = describe_progress(self._step_name, done, total, time.monotonic() - self._step_start)

    def _progress(self, step, done, total) -> None:
        if step != self._step_name:
            self._step_name, self._step_start = step, time.monotonic()
        self._last = (done, max(total, 1))
        self.progress.max, self.progress.value = max(total, 1), min(done, max(total, 1))
        self._show_step()

    def _warned(self, text: str) -> None:
        """Each distinct warning once per run (the status line counts them all)."""
        if text not in self._warnings_seen:
            self._warnings_seen.add(text)
            self.log.write(f"Warning: {text}")

    def block(self, reason: str) -> None:
        """Disable Run while ``reason`` is not empty (explained beside the button by the panel)."""
        self.blocked = reason
        if self.job is None or self.job.state != "running":
            self.run_button.disabled = bool(reason)
            self.run_button.tooltip = reason or None

    def _idle(self) -> None:
        self.run_button.disabled, self.cancel_button.disabled = bool(self.blocked), True

    def _done(self, result, on_done) -> None:
        self._idle()
        self.progress.max, self.progress.value, self.progress.bar_style = 1, 1, "success"
        self.step.value = "Finished."
        try:
            on_done(result)
        except Exception as exc:  # a drawing error goes to the log, not into the void
            self._failed((f"{type(exc).__name__}: {exc}", ""))
            return
        if self.job is not None and self.job.warnings:
            self.set_status(self.status.value + f" <b>{len(self.job.warnings)} warning(s)</b>: see the log.")

    def _failed(self, error) -> None:
        self._idle()
        self.progress.bar_style = "danger"
        self.step.value = "Stopped by an error."
        self.set_status("<b>Failed</b> - see the log below; the figures shown are from an earlier run.")
        self.log.write(error[0])
        if self.on_stop is not None:
            self.on_stop("the last run failed")

    def cancel(self) -> None:
        if self.job is not None and self.job.state == "running":
            self.job.cancel()
            self.log.write("Cancelled; the worker process was stopped.")
            self.set_status("Cancelled; the figures shown are from an earlier run.")
            self.step.value, self.progress.bar_style = "Cancelled.", "warning"
            if self.on_stop is not None:
                self.on_stop("the last run was cancelled")
        self._idle()

    def close(self) -> None:
        """Stop the worker (the page or the panel went away)."""
        if self.job is not None and self.job.state == "running":
            self.job.cancel()


def attach_close(root: widgets.Widget, close) -> None:
    """Call ``close()`` when the front end closes ``root`` (the page went away): the panel stops its workers."""
    comm = getattr(root, "comm", None)
    if comm is not None and hasattr(comm, "on_close"):
        comm.on_close(lambda _message: close())
