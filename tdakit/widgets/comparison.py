"""The two-catalogue panel: the permutation test between two clouds, with its null distribution."""

from __future__ import annotations

from math import comb

import ipywidgets as widgets

from tdakit._validation import fail
from tdakit.core.geometry.cloud import Cloud
from tdakit.core.inference.compare import EXACT_LIMIT
from tdakit.plotting import plot_permutation_null
from tdakit.widgets.common import FigureView, LogPane, RunControls, attach_close, note
from tdakit.widgets.jobs import run_comparison
from tdakit.widgets.options import CONTROL_WIDTH, glossary_html, labelled

SIGNIFICANCE = 0.05
MONTE_CARLO_LABELINGS = 9_999  # what permutation_test draws when it cannot enumerate every labeling


def smallest_p_value(n_pieces: int) -> float:
    """The smallest p-value the test can reach with ``n_pieces`` pieces per catalogue.

    Exact test: the observed split and its mirror (the groups swapped) have the same loss, so at
    best 2 of the C(2n, n) labelings are at most the observed one: p >= 2 / C(2n, n). Monte Carlo
    (more than ``EXACT_LIMIT`` labelings): p >= 1 / (N + 1). Loss and p-value as in Robinson and
    Turner, J. Appl. Comput. Topol. 1 (2017) 241-261, Section 3.
    """
    labelings = comb(2 * n_pieces, n_pieces)
    if labelings <= EXACT_LIMIT:
        return 2 / labelings
    return 1 / (MONTE_CARLO_LABELINGS + 1)


class ComparisonPanel:
    """Do two catalogues differ in their topology more than random relabelings of their pieces?"""

    def __init__(self, cloud_a: Cloud, cloud_b: Cloud, *, names=("catalogue A", "catalogue B"), seed: int = 0):
        for name, cloud in (("cloud_a", cloud_a), ("cloud_b", cloud_b)):
            if not isinstance(cloud, Cloud):
                raise fail(name, "ComparisonPanel", "a Cloud from tdakit.load_cloud", cloud)
        self.clouds, self.names, self.result = (cloud_a, cloud_b), names, None
        self.smallest = min(cloud_a.n_points, cloud_b.n_points)
        if self.smallest < 6:
            raise fail("cloud_a", "ComparisonPanel", "catalogues of at least 6 points each (two pieces of 3)",
                       self.smallest)
        self.log = LogPane()
        self.actions = RunControls("Run test", self.log, on_stop=lambda reason: self._stale(reason))
        width = widgets.Layout(width=CONTROL_WIDTH)
        pieces = min(4, self.smallest // 3)
        self.controls = {
            "pieces": widgets.IntSlider(value=pieces, min=2, max=max(2, min(10, self.smallest // 3)),
                                        continuous_update=False, layout=width),
            "piece_size": widgets.IntSlider(value=3, min=3, max=3, continuous_update=False, layout=width),
            "landmarks": widgets.IntSlider(value=60, min=2, max=500, continuous_update=False, layout=width),
            "dim": widgets.Dropdown(options=[("H0 (components)", 0), ("H1 (loops)", 1)], value=1, layout=width),
            "seed": widgets.IntText(value=seed, layout=width),
            "run": self.actions.run_button, "cancel": self.actions.cancel_button,
        }
        self._fit_piece_size(min(1000, self.smallest // 10))
        self._fit_landmarks()
        self.view = FigureView("No test yet: press Run test.")
        self.verdict, self.reach = widgets.HTML(), widgets.HTML()
        self.controls["run"].on_click(lambda _: self.actions.guard(self.start))
        self.controls["pieces"].observe(lambda _: self._pieces_changed(), names="value")
        self.controls["piece_size"].observe(lambda _: self._fit_landmarks(), names="value")
        for name in ("piece_size", "landmarks", "dim", "seed"):
            self.controls[name].observe(lambda _: self._stale("settings changed; press Run test"), names="value")
        self.root = self._layout()
        attach_close(self.root, self.close)
        self._pieces_changed()

    def _fit_piece_size(self, wanted: int) -> None:
        """Only sizes that work: n_pieces disjoint pieces of at least 3 points must fit in the smaller catalogue."""
        slider, top = self.controls["piece_size"], self.smallest // self.controls["pieces"].value
        with slider.hold_trait_notifications():
            slider.max = max(3, top)
            slider.min = min(20, top)
            slider.value = max(slider.min, min(wanted, slider.max))

    def _fit_landmarks(self) -> None:
        """At most as many landmarks as points in a piece."""
        slider = self.controls["landmarks"]
        slider.max = max(2, min(500, self.controls["piece_size"].value))

    def _pieces_changed(self) -> None:
        self._fit_piece_size(self.controls["piece_size"].value)
        n = self.controls["pieces"].value
        best = smallest_p_value(n)
        if best > SIGNIFICANCE:
            self.reach.value = (f'<div style="background:#fff3cd;border:1px solid #c9a227;padding:3px 8px;'
                                f'white-space:normal">With {n} pieces per catalogue the smallest p-value the test '
                                f'can reach is {best:.3g}: no outcome can be significant at {SIGNIFICANCE:g}. Use '
                                f'at least 4 pieces each.</div>')
        else:
            self.reach.value = note(f"With {n} pieces per catalogue the smallest reachable p-value is "
                                    f"{best:.3g}.").value
        self._stale("settings changed; press Run test")

    def _stale(self, reason: str) -> None:
        self.view.mark_stale(reason)
        if self.result is not None:
            self.verdict.value = f'<p style="color:#777"><s>{self.result.summary()}</s> (out of date: {reason})</p>'

    def start(self) -> None:
        c = self.controls
        settings = {"n_pieces": c["pieces"].value, "piece_size": c["piece_size"].value,
                    "n_landmarks": min(c["landmarks"].value, c["piece_size"].value), "dim": c["dim"].value}
        self.result, self.verdict.value = None, ""
        self.view.clear("Running the test...")
        self.actions.start(run_comparison, *self.clouds, settings, c["seed"].value, on_done=self._finished,
                           what="Building the pieces' diagrams")

    def _finished(self, result) -> None:
        self.result = result
        self.view.show(plot_permutation_null(result.test)["ax"].figure)
        self.verdict.value = f"<p>{result.summary()}</p>"
        self.actions.set_status(f"Test done: p = {result.test.p_value:.3g}.")

    def wait(self, timeout: float = 300) -> str:
        return self.actions.job.wait(timeout) if self.actions.job is not None else "ready"

    def _layout(self) -> widgets.Box:
        c = self.controls
        rows = [labelled("Pieces per catalogue", "Each catalogue is cut into this many disjoint random pieces; the "
                         "test shuffles pieces between the two catalogues.", c["pieces"]),
                labelled("Points per piece", "Only sizes for which every piece fits in the smaller catalogue are "
                         "offered.", c["piece_size"]),
                labelled("Landmarks per piece", "Vertices of each piece's complex (at most the points per piece).",
                         c["landmarks"]),
                labelled("Dimension", "Which features are compared: clumps (H0) or loops (H1).", c["dim"]),
                labelled("Seed", "The same seed gives the same pieces and the same p-value.", c["seed"])]
        names = self.names
        left = widgets.VBox([widgets.HTML(f"<b>{names[0]}</b> ({self.clouds[0].n_points} points) against "
                                          f"<b>{names[1]}</b> ({self.clouds[1].n_points} points)"), *rows, self.reach,
                             self.actions.box], layout=widgets.Layout(width="450px", min_width="450px"))
        right = widgets.VBox([self.view.widget, self.verdict, widgets.HTML(glossary_html(("loss", "p-value")))],
                             layout=widgets.Layout(flex="1 1 0%", min_width="480px"))
        return widgets.VBox([widgets.HBox([left, right], layout=widgets.Layout(flex_flow="row wrap")), self.log.box])

    def close(self) -> None:
        self.actions.close()
        self.root.close()

    def _repr_mimebundle_(self, **kwargs):
        return self.root._repr_mimebundle_(**kwargs)
