"""The subsampling panel: the study for chosen counts, its recommendation, two settings side by side."""

from __future__ import annotations

import dataclasses

import ipywidgets as widgets

from tdakit._validation import fail
from tdakit.config import AnalysisOptions, BandOptions, StudyOptions
from tdakit.core.geometry.cloud import Cloud
from tdakit.plotting import plot_run_pair, plot_study
from tdakit.widgets.common import LogPane, RunControls, image, show
from tdakit.widgets.explorer import SAMPLING_CHOICES
from tdakit.widgets.jobs import run_pair, run_study


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
        self.actions = RunControls("Run study", self.log)
        self.pair_actions = RunControls("Compare the two settings", self.log)
        wide = {"style": {"description_width": "130px"}, "layout": widgets.Layout(width="380px")}
        self.controls = {
            "methods": widgets.SelectMultiple(options=SAMPLING_CHOICES, value=self.base.methods,
                                              description="Methods", rows=4, **wide),
            "counts": widgets.Text(value=", ".join(str(c) for c in self.base.counts), description="Landmark counts",
                                   **wide),
            "seeds": widgets.IntSlider(value=self.base.n_seeds, min=1, max=10, description="Seeds per setting", **wide),
            "seed": widgets.IntText(value=seed, description="Seed", **wide),
            "first": widgets.Dropdown(options=[], description="Setting A", **wide),
            "second": widgets.Dropdown(options=[], description="Setting B", **wide),
            "run": self.actions.run_button, "cancel": self.actions.cancel_button,
            "compare": self.pair_actions.run_button,
        }
        self.views = {"study": image(), "pair": image()}
        self.recommendation = widgets.HTML()
        self.controls["run"].on_click(lambda _: self.actions.guard(self.start))
        self.controls["compare"].on_click(lambda _: self.actions.guard(self.compare))
        self.root = self._layout()

    def current_options(self) -> StudyOptions:
        c = self.controls
        return dataclasses.replace(self.base, methods=tuple(c["methods"].value),
                                   counts=_parse_counts(c["counts"].value), n_seeds=c["seeds"].value)


    def start(self) -> None:
        self.actions.start(run_study, self.cloud, self.current_options(), self.controls["seed"].value,
                           on_done=self._finished)

    def _finished(self, study) -> None:
        self.study = study
        show(self.views["study"], plot_study(study)["figure"])
        items = "".join(f"<li><b>{r.method}</b>: {r.evidence}</li>" for r in study.recommendations)
        self.recommendation.value = f"<p>Significance: {study.band_note}</p><ul>{items}</ul>"
        settings = [(f"{m}, {c} landmarks", (m, c)) for m in study.options.methods for c in study.options.counts]
        self.controls["first"].options, self.controls["second"].options = settings, settings
        self.controls["first"].value, self.controls["second"].value = settings[0][1], settings[-1][1]
        self.actions.set_status(f"Study done: {len(study.cells)} settings.")

    def _analysis(self, method, count) -> AnalysisOptions:
        base = self.current_options()
        return AnalysisOptions(dataclasses.replace(base.sampling, method=method, n_landmarks=count), base.complex,
                               base.band)

    def compare(self) -> None:
        first, second = self.controls["first"].value, self.controls["second"].value
        if first is None or second is None:
            raise fail("first", "SubsamplingPanel.compare", "two settings chosen after a study has run", first)
        self.pair_actions.start(run_pair, self.cloud, self._analysis(*first), self._analysis(*second),
                                self.controls["seed"].value, on_done=self._compared)

    def _compared(self, pair) -> None:
        self.pair = pair
        titles = [f"{run.landmarks.method}, {run.landmarks.n_landmarks} landmarks" for run in pair]
        show(self.views["pair"], plot_run_pair(*pair, titles=titles)["figure"])
        self.pair_actions.set_status("Side by side: " + " | ".join(titles) + ".")

    def wait(self, timeout: float = 300) -> str:
        jobs = [a.job for a in (self.actions, self.pair_actions) if a.job is not None]
        return [job.wait(timeout) for job in jobs][-1] if jobs else "ready"

    def _layout(self) -> widgets.Box:
        c = self.controls
        left = widgets.VBox([c["methods"], c["counts"], c["seeds"], c["seed"], self.actions.box])
        pair = widgets.VBox([c["first"], c["second"], self.pair_actions.box])
        return widgets.VBox([widgets.HBox([left, widgets.VBox([self.views["study"], self.recommendation])]),
                             widgets.HBox([pair, self.views["pair"]]), self.log.widget])

    def _repr_mimebundle_(self, **kwargs):
        return self.root._repr_mimebundle_(**kwargs)
