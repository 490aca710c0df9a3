"""The two-catalogue panel: the permutation test between two clouds, with its null distribution."""

from __future__ import annotations

import ipywidgets as widgets

from tdakit._validation import fail
from tdakit.core.geometry.cloud import Cloud
from tdakit.plotting import plot_permutation_null
from tdakit.widgets.common import LogPane, RunControls, image, show
from tdakit.widgets.jobs import run_comparison


class ComparisonPanel:
    """Do two catalogues differ in their topology more than random relabelings of their pieces?"""

    def __init__(self, cloud_a: Cloud, cloud_b: Cloud, *, names=("catalogue A", "catalogue B"), seed: int = 0):
        for name, cloud in (("cloud_a", cloud_a), ("cloud_b", cloud_b)):
            if not isinstance(cloud, Cloud):
                raise fail(name, "ComparisonPanel", "a Cloud from tdakit.load_cloud", cloud)
        self.clouds, self.names, self.result = (cloud_a, cloud_b), names, None
        self.log = LogPane()
        self.actions = RunControls("Run test", self.log)
        smallest = min(cloud_a.n_points, cloud_b.n_points)
        wide = {"style": {"description_width": "130px"}, "layout": widgets.Layout(width="360px")}
        self.controls = {
            "pieces": widgets.IntSlider(value=4, min=2, max=10, description="Pieces each", **wide),
            "piece_size": widgets.IntSlider(value=min(1000, smallest // 10), min=20, max=max(20, smallest // 2),
                                            description="Points per piece", **wide),
            "landmarks": widgets.IntSlider(value=60, min=10, max=500, description="Landmarks per piece", **wide),
            "dim": widgets.Dropdown(options=[("H0 (components)", 0), ("H1 (loops)", 1)], value=1,
                                    description="Dimension", **wide),
            "seed": widgets.IntText(value=seed, description="Seed", **wide),
            "run": self.actions.run_button, "cancel": self.actions.cancel_button,
        }
        self.view = image()
        self.verdict = widgets.HTML()
        self.controls["run"].on_click(lambda _: self.actions.guard(self.start))
        self.root = widgets.VBox([widgets.HBox([
            widgets.VBox([widgets.HTML(f"<b>{names[0]}</b> ({cloud_a.n_points} points) against <b>{names[1]}</b> "
                                       f"({cloud_b.n_points} points)"), self.controls["pieces"],
                          self.controls["piece_size"], self.controls["landmarks"], self.controls["dim"],
                          self.controls["seed"], self.actions.box]),
            widgets.VBox([self.view, self.verdict])]), self.log.widget])


    def start(self) -> None:
        c = self.controls
        settings = {"n_pieces": c["pieces"].value, "piece_size": c["piece_size"].value,
                    "n_landmarks": min(c["landmarks"].value, c["piece_size"].value), "dim": c["dim"].value}
        self.actions.start(run_comparison, *self.clouds, settings, c["seed"].value, on_done=self._finished)

    def _finished(self, result) -> None:
        self.result = result
        show(self.view, plot_permutation_null(result.test)["ax"].figure)
        self.verdict.value = f"<p>{result.summary()}</p>"
        self.actions.set_status(f"Test done: p = {result.test.p_value:.3g}.")

    def wait(self, timeout: float = 300) -> str:
        return self.actions.job.wait(timeout) if self.actions.job is not None else "ready"

    def _repr_mimebundle_(self, **kwargs):
        return self.root._repr_mimebundle_(**kwargs)
