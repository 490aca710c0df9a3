"""The subsampling panel: the study for chosen counts, its recommendation, two settings side by side."""

from __future__ import annotations

import dataclasses

import ipywidgets as widgets

from tdakit._validation import fail
from tdakit.config import AnalysisOptions, BandOptions, StudyOptions
from tdakit.core.geometry.cloud import Cloud
from tdakit.plotting import plot_run_pair, plot_study
from tdakit.widgets.common import FigureView, LogPane, RunControls, attach_close
from tdakit.widgets.jobs import run_pair, run_study
from tdakit.widgets.options import CONTROL_WIDTH, SAMPLING_CHOICES, glossary_html, labelled


def _parse_counts(text: str) -> list[int]:
    try:
        return [int(v) for v in text.replace(";", ",").split(",") if v.strip()]
    except ValueError:
        raise fail("counts", "SubsamplingPanel", "landmark counts separated by commas, e.g. 25, 50, 100",
                   text) from None


class SubsamplingPanel:
    """Does the subsampling choice change the topology? The study, its plots and its recommendation."""

    def __init__(self, cloud: Cloud, options: StudyOptions | None = None, *, seed: int = 0):
        if not isinstance(cloud, Cloud):
            raise fail("cloud", "SubsamplingPanel", "a Cloud from tdakit.load_cloud", cloud)
        self.cloud, self.base = cloud, options or StudyOptions(band=BandOptions(n_boot=100))
        self.study, self.pair = None, None
        self.log = LogPane()
        self.actions = RunControls("Run study", self.log, on_stop=lambda r: self.views["study"].mark_stale(r))
        self.pair_actions = RunControls("Compare the two settings", self.log,
                                        on_stop=lambda r: self.views["pair"].mark_stale(r))
        width = widgets.Layout(width=CONTROL_WIDTH)
        self.controls = {
            "methods": widgets.SelectMultiple(options=SAMPLING_CHOICES, value=self.base.methods, rows=4, layout=width),
            "counts": widgets.Text(value=", ".join(str(c) for c in self.base.counts), layout=width),
            "seeds": widgets.IntSlider(value=self.base.n_seeds, min=1, max=10, continuous_update=False, layout=width),
            "seed": widgets.IntText(value=seed, layout=width),
            "first": widgets.Dropdown(options=[], layout=width),
            "second": widgets.Dropdown(options=[], layout=width),
            "run": self.actions.run_button, "cancel": self.actions.cancel_button,
            "compare": self.pair_actions.run_button,
        }
        self.pair_actions.block("run the study first")
        self.views = {"study": FigureView("No study yet: press Run study."),
                      "pair": FigureView("Pick two settings of a finished study and compare them.")}
        self.recommendation = widgets.HTML()
        self.controls["run"].on_click(lambda _: self.actions.guard(self.start))
        self.controls["compare"].on_click(lambda _: self.pair_actions.guard(self.compare))
        for name in ("methods", "counts", "seeds", "seed"):
            self.controls[name].observe(lambda _: self.views["study"].mark_stale("settings changed; press Run study"),
                                        names="value")
        for name in ("first", "second"):
            self.controls[name].observe(lambda _: self.views["pair"].mark_stale("other settings chosen; press "
                                                                                "Compare"), names="value")
        self.root = self._layout()
        attach_close(self.root, self.close)

    def current_options(self) -> StudyOptions:
        c = self.controls
        return dataclasses.replace(self.base, methods=tuple(c["methods"].value),
                                   counts=_parse_counts(c["counts"].value), n_seeds=c["seeds"].value)

    def start(self) -> None:
        options = self.current_options()
        self._forget_pair()
        self.study, self.recommendation.value = None, ""
        self.views["study"].clear("Running the study...")
        self.actions.start(run_study, self.cloud, options, self.controls["seed"].value, on_done=self._finished,
                           what="Running every setting of the study")

    def _forget_pair(self) -> None:
        """A new study: the previous side-by-side plot and its choices no longer apply."""
        self.pair_actions.cancel()
        self.pair = None
        self.views["pair"].clear("Pick two settings of the new study and compare them.")
        with self.controls["first"].hold_trait_notifications(), self.controls["second"].hold_trait_notifications():
            self.controls["first"].options, self.controls["second"].options = [], []
        self.pair_actions.block("run the study first")
        self.pair_actions.set_status("Ready.")

    def _finished(self, study) -> None:
        self.study = study
        self.views["study"].show(plot_study(study)["figure"])
        items = "".join(f"<li><b>{r.method}</b>: {r.evidence}</li>" for r in study.recommendations)
        self.recommendation.value = (f'<div style="white-space:normal"><p>Significance: {study.band_note}</p>'
                                     f"<ul>{items}</ul></div>" + glossary_html(("certificate", "margin",
                                                                                 "Hausdorff level c")))
        settings = [(f"{m}, {c} landmarks", (m, c)) for m in study.options.methods for c in study.options.counts]
        self.controls["first"].options, self.controls["second"].options = settings, settings
        self.controls["first"].value, self.controls["second"].value = settings[0][1], settings[-1][1]
        self.views["pair"].clear("Pick two settings of this study and compare them.")
        self.pair_actions.block("")
        self.actions.set_status(f"Study done: {len(study.cells)} settings.")

    def _analysis(self, method, count) -> AnalysisOptions:
        base = self.study.options if self.study is not None else self.current_options()
        return AnalysisOptions(dataclasses.replace(base.sampling, method=method, n_landmarks=count), base.complex,
                               base.band)

    def compare(self) -> None:
        first, second = self.controls["first"].value, self.controls["second"].value
        if first is None or second is None:
            raise fail("first", "SubsamplingPanel.compare", "two settings chosen after a study has run", first)
        self.views["pair"].clear("Computing the two settings...")
        self.pair_actions.start(run_pair, self.cloud, self._analysis(*first), self._analysis(*second),
                                self.controls["seed"].value, on_done=self._compared, what="Running both settings")

    def _compared(self, pair) -> None:
        self.pair = pair
        titles = [f"{run.landmarks.method}, {run.landmarks.n_landmarks} landmarks" for run in pair]
        self.views["pair"].show(plot_run_pair(*pair, titles=titles)["figure"])
        self.pair_actions.set_status("Side by side: " + " | ".join(titles) + ".")

    def wait(self, timeout: float = 300) -> str:
        jobs = [a.job for a in (self.actions, self.pair_actions) if a.job is not None]
        return [job.wait(timeout) for job in jobs][-1] if jobs else "ready"

    def _layout(self) -> widgets.Box:
        c = self.controls
        left = widgets.VBox([
            widgets.HTML("<b>Study</b>: every method x count x seed"),
            labelled("Methods", "Landmark choices to compare (ctrl-click for several).", c["methods"]),
            labelled("Landmark counts", "Comma-separated, e.g. 50, 100, 200.", c["counts"]),
            labelled("Seeds per setting", "Repeats of each setting with other random draws.", c["seeds"]),
            labelled("Seed", "The root randomness of the whole study.", c["seed"]), self.actions.box],
            layout=widgets.Layout(width="450px", min_width="450px"))
        pair = widgets.VBox([widgets.HTML("<b>Two settings side by side</b>"),
                             labelled("Setting A", "", c["first"]), labelled("Setting B", "", c["second"]),
                             self.pair_actions.box], layout=widgets.Layout(width="450px", min_width="450px"))
        study = widgets.VBox([self.views["study"].widget, self.recommendation],
                             layout=widgets.Layout(flex="1 1 0%", min_width="480px"))
        row = widgets.Layout(flex_flow="row wrap", align_items="flex-start")
        return widgets.VBox([widgets.HBox([left, study], layout=row),
                             widgets.HBox([pair, widgets.VBox([self.views["pair"].widget], layout=widgets.Layout(
                                 flex="1 1 0%", min_width="480px"))], layout=row), self.log.box])

    def close(self) -> None:
        for actions in (self.actions, self.pair_actions):
            actions.close()
        self.root.close()

    def _repr_mimebundle_(self, **kwargs):
        return self.root._repr_mimebundle_(**kwargs)
