"""The explorer: one cloud, every choice of the pipeline as a control, the results as figures."""

from __future__ import annotations

import dataclasses
import json
from pathlib import Path

import ipywidgets as widgets

from tdakit._validation import fail
from tdakit.config import AnalysisOptions, BandOptions
from tdakit.core.geometry.cloud import Cloud
from tdakit.errors import InvalidDataError
from tdakit.plotting import plot_barcode, plot_cloud, plot_diagram, significant_features, write_run_figures
from tdakit.widgets.common import LogPane, RunControls, image, show
from tdakit.widgets.jobs import run_analysis

SAMPLING_CHOICES = [("maxmin (spread out)", "maxmin"), ("uniform random", "random"),
                    ("density-weighted", "density"), ("maxmin on the dense core", "core_maxmin")]
COMPLEX_CHOICES = [("DTM-weighted Rips", "dtm"), ("Vietoris-Rips", "rips"), ("witness (lazy)", "witness"),
                   ("alpha", "alpha")]
BAND_CHOICES = [("auto: calibrated choice", "auto"), ("distance to measure: proven", "dtm"),
                ("kernel density: proven, 1-3 coordinates", "density"),
                ("subsampling: proven, conservative", "subsample"), ("bootstrap: heuristic", "bootstrap"),
                ("landscape: band on the mean curve", "landscape"), ("no band", "none")]


def _controls(cloud: Cloud, options: AnalysisOptions, seed: int) -> dict:
    top = max(10, min(2000, cloud.n_distinct))
    wide = {"style": {"description_width": "130px"}, "layout": widgets.Layout(width="360px")}
    return {
        "sampling": widgets.Dropdown(options=SAMPLING_CHOICES, value=options.sampling.method,
                                     description="Landmark choice", **wide),
        "landmarks": widgets.IntSlider(value=min(options.sampling.n_landmarks or top, top), min=min(10, top),
                                       max=top, step=1, description="Landmarks", **wide),
        "complex": widgets.Dropdown(options=COMPLEX_CHOICES, value=options.complex.filtration,
                                    description="Complex", **wide),
        "max_dim": widgets.IntSlider(value=options.complex.max_dim, min=0, max=2, description="Highest dimension",
                                     **wide),
        "band": widgets.Dropdown(options=BAND_CHOICES, value=options.band.method, description="Noise band", **wide),
        "level": widgets.FloatSlider(value=options.band.level, min=0.5, max=0.99, step=0.01, description="Level",
                                     **wide),
        "replicates": widgets.IntSlider(value=options.band.n_boot, min=10, max=1000, step=10,
                                        description="Replicates", **wide),
        "seed": widgets.IntText(value=seed, description="Seed", **wide),
        "view_dim": widgets.Dropdown(options=[("H0 (components)", 0), ("H1 (loops)", 1), ("H2 (voids)", 2)],
                                     value=min(1, options.complex.max_dim), description="Show dimension", **wide),
        "feature": widgets.Select(options=[], description="Highlight", rows=5, **wide),
        "export": widgets.Button(description="Export figures and run file", icon="download",
                                 layout=widgets.Layout(width="360px")),
    }


class Explorer:
    """Interactive explorer of one cloud.

    Parameters
    ----------
    cloud : Cloud
    options : AnalysisOptions, optional
        Starting values; settings without a control (e.g. ``max_scale``) are kept from here.
    seed : int, default=0
    export_folder : path, default="tdakit-export"

    Attributes
    ----------
    controls : dict
        Every control by name (``run`` and ``cancel`` buttons included), for scripts and tests.
    run : RunResult or None
        What the views show.
    """

    def __init__(self, cloud: Cloud, options: AnalysisOptions | None = None, *, seed: int = 0,
                 export_folder="tdakit-export"):
        if not isinstance(cloud, Cloud):
            raise fail("cloud", "Explorer", "a Cloud from tdakit.load_cloud", cloud)
        self.cloud, self.base = cloud, options or AnalysisOptions(band=BandOptions(n_boot=100))
        self.export_folder = Path(export_folder)
        self.cache: dict[str, object] = {}
        self.run = None
        self.highlighted: list[int] = []  # table rows whose vertices the cloud view marks
        self.log = LogPane()
        self.actions = RunControls("Run", self.log)
        self.controls = _controls(cloud, self.base, seed)
        self.controls.update(run=self.actions.run_button, cancel=self.actions.cancel_button)
        self.views = {name: image() for name in ("cloud", "diagram", "barcode")}
        self.table = widgets.HTML()
        self._wire()
        self.root = self._layout()

    # -- state -------------------------------------------------------------------------------------
    def current_options(self) -> AnalysisOptions:
        c = self.controls
        return AnalysisOptions(
            dataclasses.replace(self.base.sampling, method=c["sampling"].value, n_landmarks=c["landmarks"].value),
            dataclasses.replace(self.base.complex, filtration=c["complex"].value, max_dim=c["max_dim"].value),
            dataclasses.replace(self.base.band, method=c["band"].value, level=c["level"].value,
                                n_boot=c["replicates"].value))

    @staticmethod
    def _key(options: AnalysisOptions, seed: int) -> str:
        """Cache key: everything that changes the replicates (the level does not)."""
        data = options.to_dict()
        data["band"].pop("level")
        return json.dumps([data, seed], sort_keys=True)

    def _wire(self) -> None:
        c = self.controls
        c["run"].on_click(lambda _: self.actions.guard(self.start))
        c["export"].on_click(lambda _: self.actions.guard(self.export))
        c["level"].observe(lambda _: self.actions.guard(self._level_changed), names="value")
        c["view_dim"].observe(lambda _: self.actions.guard(self._dim_changed), names="value")
        c["feature"].observe(lambda _: self.actions.guard(self._redraw), names="value")
        for name in ("sampling", "landmarks", "complex", "max_dim", "band", "replicates", "seed"):
            c[name].observe(lambda _: self._settings_changed(), names="value")


    # -- actions -----------------------------------------------------------------------------------
    def start(self) -> None:
        """Run the pipeline with the current controls (from the cache when only the level changed)."""
        options, seed = self.current_options(), self.controls["seed"].value
        cached = self.cache.get(self._key(options, seed))
        if cached is not None:
            self._show(cached.at_level(options.band.level) if cached.band is not None else cached, "from cache")
            return
        self.actions.start(run_analysis, self.cloud, options, seed, on_done=self._finished)

    def _finished(self, run) -> None:
        self.cache[self._key(run.options, run.seed)] = run
        self._show(run, f"computed in {sum(run.timings.values()):.1f} s")

    def _level_changed(self) -> None:
        if self.run is None or self.run.band is None:
            return
        if self._key(self.current_options(), self.controls["seed"].value) == self._key(self.run.options,
                                                                                        self.run.seed):
            self._show(self.run.at_level(self.controls["level"].value), "level changed, no recomputation")

    def _settings_changed(self) -> None:
        if self.run is not None:
            self.actions.set_status("Settings changed - press <b>Run</b> to update the views.")

    def wait(self, timeout: float = 300) -> str:
        """Wait for the running job (scripts and tests); returns its state."""
        return self.actions.job.wait(timeout) if self.actions.job is not None else "ready"

    def export(self) -> list[Path]:
        """Write the publication figures, the run file and the feature table to ``export_folder``."""
        if self.run is None:
            raise InvalidDataError("Nothing to export yet: press Run first.", parameter="run")
        paths = write_run_figures(self.run, self.export_folder, stem="explorer", formats=("pdf", "svg", "png"))
        paths.append(self.run.save(self.export_folder / "explorer"))
        table = self.export_folder / "explorer_features.csv"
        self.run.table.to_csv(table, index=False)
        paths.append(table)
        self.log.write(f"Exported {len(paths)} files to {self.export_folder}.")
        return paths

    # -- views -------------------------------------------------------------------------------------
    def _show(self, run, how: str) -> None:
        self.run = run
        dims = len(run.diagrams)
        self.controls["view_dim"].value = min(self.controls["view_dim"].value, dims - 1)
        self._dim_changed()
        self.actions.set_status(f"Showing {self._describe(run)} ({how}).")

    def _describe(self, run) -> str:
        marks = f"{run.landmarks.n_landmarks} {run.landmarks.method} landmarks" if run.landmarks else "all points"
        if run.band is None:
            return f"{marks}, {run.diagrams.filtration}, no band"
        counts = ", ".join(f"H{k}: {int(run.band.significant(run.diagrams, k).sum())}"
                           for k in range(len(run.diagrams))) if run.band.calls else "no verdict"
        band = f"{run.band.method} band at {run.band.level:g}"
        return f"{marks}, {run.diagrams.filtration}, {band}; significant {counts}"

    def _dim_changed(self) -> None:
        """New dimension in view: list its significant features (none selected) and redraw."""
        if self.run is None:
            return
        rows = significant_features(self.run, self.controls["view_dim"].value)
        with self.controls["feature"].hold_trait_notifications():
            self.controls["feature"].options = [(f"H{r.dimension}: {r.birth:.3g} to {r.death:.3g}", int(label))
                                                for label, r in zip(rows.index, rows.itertuples())]
            self.controls["feature"].value = None
        self._redraw()

    def _redraw(self) -> None:
        if self.run is None:
            return
        dim = min(self.controls["view_dim"].value, len(self.run.diagrams) - 1)
        chosen = self.controls["feature"].value
        features = [chosen] if chosen is not None else None
        drawn = plot_cloud(self.run, dim=dim, features=features)
        self.highlighted = [row.Index for row, _ in drawn["features"]]
        show(self.views["cloud"], drawn["ax"].figure)
        show(self.views["diagram"], plot_diagram(self.run.diagrams, self.run.band)["ax"].figure)
        show(self.views["barcode"], plot_barcode(self.run.diagrams, self.run.band, dim=dim)["ax"].figure)
        self.table.value = self.run.table.head(15).drop(columns=["birth_vertices", "death_vertices"]).to_html(
            index=False, float_format=lambda v: f"{v:.4g}")

    def _layout(self) -> widgets.Box:
        c = self.controls
        settings = widgets.VBox([widgets.HTML("<b>Sampling</b>"), c["sampling"], c["landmarks"],
                                 widgets.HTML("<b>Complex</b>"), c["complex"], c["max_dim"],
                                 widgets.HTML("<b>Noise band</b>"), c["band"], c["level"], c["replicates"], c["seed"],
                                 self.actions.box, widgets.HTML("<b>View</b>"), c["view_dim"], c["feature"],
                                 c["export"]])
        tabs = widgets.Tab(children=[self.views["cloud"], self.views["diagram"], self.views["barcode"], self.table],
                           layout=widgets.Layout(min_width="560px", flex="1 1 auto"))
        for i, title in enumerate(("Cloud and features", "Diagram", "Barcode", "Feature table")):
            tabs.set_title(i, title)
        return widgets.VBox([widgets.HBox([settings, tabs]), self.log.widget])

    def _repr_mimebundle_(self, **kwargs):
        return self.root._repr_mimebundle_(**kwargs)
