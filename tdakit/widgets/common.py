"""Pieces shared by the panels: run controls with progress and cancel, a log pane, figure images."""

from __future__ import annotations

import datetime

import ipywidgets as widgets

from tdakit.plotting import figure_bytes
from tdakit.widgets.worker import BackgroundJob


def image(figure=None) -> widgets.Image:
    view = widgets.Image(format="png", layout=widgets.Layout(width="100%", max_width="720px"))
    if figure is not None:
        view.value = figure_bytes(figure)
    return view


def show(view: widgets.Image, figure) -> None:
    view.value = figure_bytes(figure)


class LogPane:
    """A visible, read-only log: errors from callbacks and workers land here, never swallowed."""

    def __init__(self):
        self.widget = widgets.Textarea(value="", disabled=True, description="Log",
                                       layout=widgets.Layout(width="100%", height="90px"))

    def write(self, message: str) -> None:
        stamp = datetime.datetime.now().strftime("%H:%M:%S")
        self.widget.value = (self.widget.value + f"[{stamp}] {message}\n")[-20_000:]

    @property
    def text(self) -> str:
        return self.widget.value


class RunControls:
    """Run / Cancel buttons, a progress bar and a status line around one background job at a time."""

    def __init__(self, run_label: str, log: LogPane):
        self.run_button = widgets.Button(description=run_label, button_style="primary", icon="play")
        self.cancel_button = widgets.Button(description="Cancel", icon="stop", disabled=True)
        self.progress = widgets.IntProgress(value=0, min=0, max=1, description="", layout=widgets.Layout(width="220px"))
        self.status = widgets.HTML(value="Ready.")
        self.log = log
        self.job: BackgroundJob | None = None
        self.cancel_button.on_click(lambda _: self.cancel())

    @property
    def box(self) -> widgets.Box:
        return widgets.VBox([widgets.HBox([self.run_button, self.cancel_button, self.progress]), self.status])

    def set_status(self, text: str) -> None:
        self.status.value = text

    def guard(self, action) -> None:
        """Run a callback's action; an error goes to the log pane and the status line, never into the void."""
        try:
            action()
        except Exception as exc:
            self.log.write(f"{type(exc).__name__}: {' '.join(str(exc).split())}")
            self.set_status("<b>Failed</b> - see the log below.")

    def start(self, function, *args, on_done) -> BackgroundJob:
        self.cancel()
        self.progress.value, self.progress.max = 0, 1
        self.run_button.disabled, self.cancel_button.disabled = True, False
        self.set_status("Working...")
        self.job = BackgroundJob(function, *args, on_progress=self._progress, on_done=lambda r: self._done(r, on_done),
                                 on_error=self._failed)
        return self.job.start()

    def _progress(self, step, done, total) -> None:
        self.progress.max, self.progress.value = max(total, 1), min(done, max(total, 1))
        self.progress.description = step

    def _idle(self) -> None:
        self.run_button.disabled, self.cancel_button.disabled = False, True

    def _done(self, result, on_done) -> None:
        self._idle()
        try:
            on_done(result)
        except Exception as exc:  # a drawing error goes to the log, not into the void
            self._failed((f"{type(exc).__name__}: {exc}", ""))

    def _failed(self, error) -> None:
        self._idle()
        self.set_status("<b>Failed</b> - see the log below.")
        self.log.write(error[0])

    def cancel(self) -> None:
        if self.job is not None and self.job.state == "running":
            self.job.cancel()
            self.log.write("Cancelled; the worker process was stopped.")
            self.set_status("Cancelled.")
        self._idle()
