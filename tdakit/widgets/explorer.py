"""The explorer: one cloud, every option of the pipeline as a control, the results as figures."""

from __future__ import annotations

import json
import os
import stat
import tempfile
import threading
import warnings
from pathlib import Path

import ipywidgets as widgets

from tdakit._validation import fail
from tdakit.config import AnalysisOptions, BandOptions
from tdakit.core.geometry.cloud import Cloud, make_cloud
from tdakit.core.geometry.metrics import METRICS, make_metric
from tdakit.errors import InvalidDataError
from tdakit.pipeline import check_options
from tdakit.plotting import plot_barcode, plot_cloud, plot_diagram, write_run_figures
from tdakit.widgets.common import FigureView, LogPane, RunControls, attach_close, label, note
from tdakit.widgets.features import locate, numbered, table_html
from tdakit.widgets.jobs import run_analysis
from tdakit.widgets.options import (
    BAND_CHOICES,
    COMPLEX_CHOICES,
    CONTROL_WIDTH,
    SAMPLING_CHOICES,
    OptionsForm,
    glossary_html,
    labelled,
    options_from_toml,
)

__all__ = ["Explorer", "BAND_CHOICES", "COMPLEX_CHOICES", "SAMPLING_CHOICES"]

DIM_NAMES = {0: "H0 (components)", 1: "H1 (loops)", 2: "H2 (voids)"}
VIEWS = ("cloud", "diagram", "barcode")


class Explorer:
    """Interactive explorer of one cloud.

    Parameters
    ----------
    cloud : Cloud
    options : AnalysisOptions, optional
        Starting values of the controls (every option of the pipeline has one).
    seed : int, default=0
    export_folder : path, default="tdakit-export"
        Each export writes new, numbered files here (``explorer-001_*``, ``explorer-002_*``, ...);
        earlier exports are never overwritten.

    Attributes
    ----------
    controls : dict
        Every control by name, for scripts and tests: ``"section.field"`` for each field of the
        option dataclasses (e.g. ``"complex.max_scale"``), ``"seed"``, ``"n_jobs"``,
        ``"scheduler"``, ``"checkpoint"``, ``"metric"``, ``"box"``, ``"view_dim"``, ``"feature"``,
        ``"export"``, ``"load_path"``, ``"load"``, ``"upload"``, ``"run"``, ``"cancel"``.
    views : dict of FigureView
        ``"cloud"``, ``"diagram"``, ``"barcode"``; each says when it is out of date.
    run : RunResult or None
        What the views show.
    export_formats : tuple of str
        Figure formats written by an export (default PDF, SVG and PNG).

    Notes
    -----
    Options that cannot go together are refused before Run by :func:`tdakit.pipeline.check_options`
    (the pipeline's own check); the reason is shown above the Run button, which is disabled.
    """

    def __init__(self, cloud: Cloud, options: AnalysisOptions | None = None, *, seed: int = 0,
                 export_folder="tdakit-export"):
        if not isinstance(cloud, Cloud):
            raise fail("cloud", "Explorer", "a Cloud from tdakit.load_cloud", cloud)
        if options is not None and not isinstance(options, AnalysisOptions):
            raise fail("options", "Explorer", "None or an AnalysisOptions", options)
        self.cloud = cloud
        self.export_folder = Path(export_folder)
        self.export_formats = ("pdf", "svg", "png")
        self.cache: dict[str, object] = {}
        self.run, self.shown_key, self.problem, self.location = None, None, "", None
        self.highlighted: list[int] = []  # table rows the cloud view marks
        self._clouds: dict[tuple, Cloud] = {}
        self._export_thread: threading.Thread | None = None
        self._quiet = False
        self.log = LogPane()
        self.actions = RunControls("Run", self.log, on_stop=self._mark_stale)
        self.form = OptionsForm(options or AnalysisOptions(band=BandOptions(n_boot=100)),
                                top=max(10, min(2000, cloud.n_distinct)), seed=seed)
        self.controls = dict(self.form.controls)
        self.controls.update(self._catalogue_controls())
        self.controls.update(self._view_controls())
        self.controls.update(run=self.actions.run_button, cancel=self.actions.cancel_button)
        self.views = {name: FigureView() for name in VIEWS}
        self.table, self.location_text = widgets.HTML(), widgets.HTML()
        self.problems, self.band_note = widgets.HTML(), widgets.HTML()
        self.export_status = widgets.HTML("", layout=widgets.Layout(min_height="1.4em"))
        self._wire()
        self.root = self._layout()
        attach_close(self.root, self.close)
        self._settings_changed()

    # -- controls ----------------------------------------------------------------------------------
    def _catalogue_controls(self) -> dict:
        metric = self.cloud.metric
        box = "" if metric.box is None else ", ".join(f"{side:g}" for side in metric.box)
        fixed = self.cloud.metric.name == "precomputed" or self.cloud.shift is not None
        names = [m for m in METRICS if m != "precomputed"] if not fixed else [metric.name]
        return {"metric": widgets.Dropdown(options=names, value=metric.name, disabled=fixed,
                                           layout=widgets.Layout(width=CONTROL_WIDTH)),
                "box": widgets.Text(value=box, placeholder="e.g. 100 or 100, 100, 50",
                                    disabled=fixed, layout=widgets.Layout(width=CONTROL_WIDTH))}

    def _view_controls(self) -> dict:
        return {
            "view_dim": widgets.Dropdown(options=[], disabled=True, layout=widgets.Layout(width=CONTROL_WIDTH)),
            "feature": widgets.Select(options=[], rows=5, layout=widgets.Layout(width="100%")),
            "export": widgets.Button(description="Export figures and run file", icon="download", disabled=True,
                                     layout=widgets.Layout(width="auto")),
            "load_path": widgets.Text(placeholder="path to a .tdkrun run file or a .toml options file",
                                      layout=widgets.Layout(flex="1 1 auto", width="auto")),
            "load": widgets.Button(description="Load", icon="folder-open",
                                   layout=widgets.Layout(width="auto", min_width="80px")),
            "upload": widgets.FileUpload(accept=".tdkrun,.toml", multiple=False, description="Upload",
                                         layout=widgets.Layout(width="auto")),
        }

    def current_cloud(self) -> Cloud:
        """The cloud measured with the chosen metric (the given cloud when unchanged)."""
        name, box = self.controls["metric"].value, self.controls["box"].value.strip()
        metric = self.cloud.metric
        current_box = "" if metric.box is None else ", ".join(f"{side:g}" for side in metric.box)
        if name == metric.name and (name != "periodic" or box == current_box):
            return self.cloud
        key = (name, box)
        if key not in self._clouds:
            sides = None
            if box:
                try:
                    sides = [float(v) for v in box.replace(";", ",").split(",") if v.strip()]
                except ValueError:
                    raise fail("box", "Explorer", "side lengths separated by commas", box) from None
            c = self.cloud
            with warnings.catch_warnings(record=True) as caught:  # to the log pane, not the server's stderr
                warnings.simplefilter("always")
                self._clouds[key] = make_cloud(c.points, make_metric(name, box=sides if name == "periodic" else None,
                                                                     function="Explorer"),
                                               columns=c.columns, source=c.source, source_checksum=c.source_checksum,
                                               read_options=c.read_options, unit=c.unit)
            for item in caught:
                self.log.write(f"Warning: {item.category.__name__}: {' '.join(str(item.message).split())}")
        return self._clouds[key]

    def current_options(self) -> AnalysisOptions:
        return self.form.options()

    @staticmethod
    def _key(options: AnalysisOptions, seed: int, cloud: Cloud) -> str:
        """Cache key: everything that changes the replicates (the level does not)."""
        data = options.to_dict()
        data["band"].pop("level")
        return json.dumps([data, seed, cloud.fingerprint], sort_keys=True, default=str)

    def _wire(self) -> None:
        c = self.controls
        c["run"].on_click(lambda _: self.actions.guard(self.start))
        c["export"].on_click(lambda _: self.actions.guard(self._export_in_background))
        c["load"].on_click(lambda _: self.actions.guard(lambda: self.load(c["load_path"].value.strip())))
        c["upload"].observe(lambda _: self.actions.guard(self._uploaded), names="value")
        c["view_dim"].observe(lambda _: self.actions.guard(self._dim_changed), names="value")
        c["feature"].observe(lambda _: self.actions.guard(self._redraw), names="value")
        self.form.observe(self._settings_changed)
        for name in ("metric", "box"):
            c[name].observe(lambda _: self._settings_changed(), names="value")

    # -- checks before Run ---------------------------------------------------------------------------
    def check(self) -> AnalysisOptions | None:
        """The options the pipeline would run with, or None with the reason in the panel (Run disabled)."""
        try:
            resolved = check_options(self.current_cloud(), self.current_options())
        except (ValueError, TypeError) as exc:
            self.problem = " ".join(str(exc).split())
            self.problems.value = (f'<div style="background:#fdecea;border:1px solid #b3261e;padding:4px 8px;'
                                   f'white-space:normal"><b>Cannot run these settings:</b> {self.problem}</div>')
            self.actions.block(self.problem)
            return None
        self.problem = ""
        self.actions.block("")
        chosen = self.current_options().band.method
        if chosen == "auto":
            self.problems.value = note(f"The 'auto' band will use the <b>{resolved.band.method}</b> band for this "
                                       "catalogue and these settings.").value
        else:
            self.problems.value = ""
        if resolved.band.method == "density":
            self.problems.value += note("The kernel-density band estimates the density from every point: the "
                                        "landmark and complex settings are not used by it.").value
        return resolved

    def _settings_changed(self) -> None:
        self.check()
        if self.run is None:
            return
        options = self.current_options_or_none()
        same = options is not None and self.shown_key == self._key(options, self.controls["seed"].value,
                                                                     self._cloud_or_none())
        if same and self.run.band is not None and options.band.level != self.run.band.level:
            self.actions.guard(lambda: self._show(self.run.at_level(options.band.level),
                                                  "level changed, no recomputation"))
        elif same:
            for view in self.views.values():
                view.fresh()
            self.actions.set_status(f"Showing {self._describe(self.run)}.")
        else:
            self._mark_stale("settings changed; press Run")
            self.actions.set_status("Settings changed - press <b>Run</b> to update the views.")

    def current_options_or_none(self) -> AnalysisOptions | None:
        try:
            return self.current_options()
        except (ValueError, TypeError):
            return None

    def _cloud_or_none(self):
        try:
            return self.current_cloud()
        except (ValueError, TypeError):
            return self.cloud

    def _mark_stale(self, reason: str) -> None:
        for view in self.views.values():
            view.mark_stale(reason)
        self.location_text.value = ""

    # -- actions -----------------------------------------------------------------------------------
    def start(self) -> None:
        """Run the pipeline with the current controls (from the cache when only the level changed)."""
        if self.check() is None:
            raise InvalidDataError(f"These settings cannot run: {self.problem}", parameter="options")
        options, seed, cloud = self.current_options(), self.controls["seed"].value, self.current_cloud()
        cached = self.cache.get(self._key(options, seed, cloud))
        if cached is not None:
            self._show(cached.at_level(options.band.level) if cached.band is not None else cached, "from cache")
            return
        self.actions.start(run_analysis, cloud, options, seed, self.form.run_settings(), on_done=self._finished,
                           what="Running the pipeline")

    def _finished(self, run) -> None:
        self.cache[self._key(run.options, run.seed, self.current_cloud())] = run
        self._show(run, f"computed in {sum(run.timings.values()):.1f} s")

    def wait(self, timeout: float = 300) -> str:
        """Wait for the running job (scripts and tests); returns its state."""
        return self.actions.job.wait(timeout) if self.actions.job is not None else "ready"

    def load(self, path) -> None:
        """Load a run file (its settings, and its figures when it was made on this cloud) or an options file."""
        from tdakit.io.runfiles import RUN_SUFFIX, load_run

        path = Path(path)
        if path.suffix == ".toml":
            if not path.is_file():
                raise InvalidDataError(f"No options file at {str(path)!r}.", parameter="path")
            self.form.set_options(options_from_toml(path.read_text()))
            self.log.write(f"Loaded the options of {path.name}; press Run.")
            return
        if path.suffix != RUN_SUFFIX:
            raise fail("path", "Explorer.load", f"a run file ({RUN_SUFFIX}) or an options file (.toml)", str(path))
        self.show_run(load_run(path), f"loaded from {path.name}")

    def show_run(self, run, how: str = "loaded") -> None:
        """Put a run's settings into the controls; show it when it was made on this cloud."""
        self.form.set_options(run.options)
        self.controls["seed"].value = run.seed
        if run.provenance.get("input", {}).get("fingerprint") != self.cloud.fingerprint:
            self.log.write("The run was made on other data (or another metric); its settings are loaded - press "
                           "Run to compute them on this catalogue.")
            return
        self.cache[self._key(run.options, run.seed, self.cloud)] = run
        self._show(run, how)

    def _uploaded(self) -> None:
        files = self.controls["upload"].value
        if not files:
            return
        item = files[0]
        suffix = Path(item["name"]).suffix
        with tempfile.TemporaryDirectory() as folder:
            path = Path(folder) / f"upload{suffix}"
            path.write_bytes(bytes(item["content"]))
            self.load(path)

    # -- export ------------------------------------------------------------------------------------
    def _next_stem(self) -> str:
        taken = {p.name.split("_")[0].split(".")[0] for p in self.export_folder.glob("explorer-*")}
        number = 1
        while f"explorer-{number:03d}" in taken:
            number += 1
        return f"explorer-{number:03d}"

    def export(self) -> list[Path]:
        """Write the figures, the run file and the feature table under new numbered names; returns the paths."""
        if self.run is None:
            raise InvalidDataError("Nothing to export yet: press Run first.", parameter="run")
        self.export_folder.mkdir(parents=True, exist_ok=True)
        stem = self._next_stem()
        paths = write_run_figures(self.run, self.export_folder, stem=stem, formats=self.export_formats)
        run_file = self.run.save(self.export_folder / stem)
        os.chmod(run_file, stat.S_IMODE(paths[0].stat().st_mode))  # the figures' permissions
        table = self.export_folder / f"{stem}_features.csv"
        self.run.table.to_csv(table, index=False)
        os.chmod(table, stat.S_IMODE(paths[0].stat().st_mode))
        paths += [run_file, table]
        self.log.write(f"Exported {len(paths)} files to {self.export_folder} as {stem}_*.")
        return paths

    def _export_in_background(self) -> None:
        if self.run is None:
            raise InvalidDataError("Nothing to export yet: press Run first.", parameter="run")
        button = self.controls["export"]
        button.disabled, button.description = True, "Exporting..."
        self.export_status.value = "Writing the figures and the run file..."

        def work():
            try:
                paths = self.export()
                self.export_status.value = f"Exported {len(paths)} files as <code>{paths[-1].name.split('_')[0]}_*"\
                                           f"</code> in {self.export_folder}."
            except Exception as exc:
                self.log.write(f"{type(exc).__name__}: {' '.join(str(exc).split())}")
                self.export_status.value = "<b>Export failed</b> - see the log."
            finally:
                button.disabled, button.description = False, "Export figures and run file"

        self._export_thread = threading.Thread(target=work, daemon=True)
        self._export_thread.start()

    def wait_export(self, timeout: float = 120) -> None:
        if self._export_thread is not None:
            self._export_thread.join(timeout)

    # -- views -------------------------------------------------------------------------------------
    def _show(self, run, how: str) -> None:
        self.run = run
        self.shown_key = self._key(run.options, run.seed, self.cloud if how.startswith("loaded") else
                                   self._cloud_or_none())
        dims = [(DIM_NAMES.get(k, f"H{k}"), k) for k in range(len(run.diagrams))]
        view = self.controls["view_dim"]
        wanted = view.value if view.value is not None else min(1, len(dims) - 1)
        self._quiet = True  # one redraw below, not one per changed trait
        try:
            view.options, view.disabled = dims, False
            view.value = min(wanted, len(dims) - 1)
        finally:
            self._quiet = False
        self.controls["export"].disabled = False
        self._dim_changed()
        self.band_note.value = self._band_text(run)
        self.actions.set_status(f"Showing {self._describe(run)} ({how}).")

    def _describe(self, run) -> str:
        marks = f"{run.landmarks.n_landmarks} {run.landmarks.method} landmarks" if run.landmarks else "all points"
        if run.band is None:
            return f"{marks}, {run.diagrams.filtration}, no band"
        counts = ", ".join(f"H{k}: {int(run.band.significant(run.diagrams, k).sum())}"
                           for k in range(len(run.diagrams))) if run.band.calls else "no verdict"
        band = f"{run.band.method} band at {run.band.level:g}"
        return f"{marks}, {run.diagrams.filtration}, {band}; significant {counts}"

    @staticmethod
    def _band_text(run) -> str:
        if run.band is None:
            return note("No noise band: every class is shown, none is called real or noise.").value
        text = run.band.statement if isinstance(run.band.statement, str) else ""
        return note(f"<b>What the band says:</b> {text}").value + glossary_html(
            ("certificate", "margin", "Hausdorff level c", "nu=1"))

    def _dim_changed(self) -> None:
        """New dimension in view: list its significant features, numbered as in the figures, and redraw."""
        if self.run is None or self.controls["view_dim"].value is None or self._quiet:
            return
        dim = self.controls["view_dim"].value
        numbers = numbered(self.run, dim)
        table = self.run.table
        self._quiet = True
        try:
            self.controls["feature"].options = [
                (f"{n}: H{dim} born {table.loc[label].birth:.3g}, dies {table.loc[label].death:.3g}", label)
                for label, n in numbers.items()]
            self.controls["feature"].value = None
        finally:
            self._quiet = False
        self._redraw()

    def _redraw(self) -> None:
        if self.run is None or self.controls["view_dim"].value is None or self._quiet:
            return
        dim = self.controls["view_dim"].value
        numbers = self._numbers(dim)
        drawn = plot_cloud(self.run, dim=dim, numbers=numbers)
        self.highlighted = [int(row.Index) for row, _ in drawn["features"]]
        self._locate(drawn["ax"], dim)
        self.views["cloud"].show(drawn["ax"].figure)
        unit = self.run.unit
        self.views["diagram"].show(plot_diagram(self.run.diagrams, self.run.band, unit=unit,
                                                numbers=numbers)["ax"].figure)
        self.views["barcode"].show(plot_barcode(self.run.diagrams, self.run.band, dim=dim, unit=unit,
                                                numbers=numbers)["ax"].figure)
        self.table.value = table_html(self.run, dim)[0]

    def _numbers(self, dim: int) -> dict[int, int]:
        """The features the figures number: the highlighted one with its table number, else the first three."""
        everything = numbered(self.run, dim)
        chosen = self.controls["feature"].value
        if chosen is not None and chosen in everything:
            return {chosen: everything[chosen]}
        return {label: n for label, n in everything.items() if n <= 3}

    def _locate(self, ax, dim: int) -> None:
        """Say where the highlighted feature is, and mark its own catalogue points on the cloud view."""
        chosen = self.controls["feature"].value
        if chosen is None:
            self.location = None
            self.location_text.value = note("Pick a feature under <b>Highlight</b> to see its own catalogue points "
                                            "and its extent.").value if numbered(self.run, dim) else ""
            return
        number = numbered(self.run, dim).get(chosen)
        self.location = locate(self.run, self.cloud, chosen)
        if self.location is None:
            self.location_text.value = note(f"Feature {number} cannot be located on the catalogue.").value
            return
        marked = self._mark_points(ax, self.location, dim)
        shown = " Its catalogue points are the small dots in the feature's colour." if marked else ""
        self.location_text.value = note(f"<b>Feature {number}</b>: {self.location.describe(self.run.unit)}"
                                        f"{shown}").value

    def _mark_points(self, ax, location, dim: int) -> bool:
        """The feature's own catalogue points over the cloud view (coordinates drawn as they are only)."""
        from tdakit.plotting.style import dimension_style

        n_dims = self.cloud.n_dims
        if n_dims not in (2, 3) or self.cloud.metric.name == "angular" or location.points.size == 0:
            return False
        points = self.cloud.points[location.points[:3000]]
        ax.scatter(*points.T, s=5.0, c=dimension_style(dim).color, lw=0, zorder=3)
        return True

    def _layout(self) -> widgets.Box:
        c = self.controls
        catalogue = [widgets.HTML("<i>Catalogue (how distances are measured)</i>"),
                     labelled("Metric", "How the distance between two catalogue points is measured; 'periodic' wraps "
                          "around a simulation box.", c["metric"]),
                     labelled("Periodic box side(s)", "Side length(s) of the periodic simulation box, in the data's "
                          "units.", c["box"])]
        self.form.advanced_box.children = tuple(catalogue) + self.form.advanced_box.children
        loading = widgets.VBox([label("<b>Load</b> a run file or an options file"),
                                widgets.HBox([c["load_path"], c["load"]], layout=widgets.Layout(width="100%")),
                                c["upload"]], layout=widgets.Layout(width="100%"))
        view = widgets.VBox([widgets.HTML("<b>View</b>"), labelled("Show dimension", "Only computed dimensions are "
                                                               "offered.", c["view_dim"]),
                             label("Highlight a feature (numbers as in the figures)"), c["feature"],
                             c["export"], self.export_status], layout=widgets.Layout(width="100%"))
        settings = widgets.VBox([self.form.main, self.form.advanced, self.problems, self.actions.box, view, loading],
                                layout=widgets.Layout(width="450px", min_width="450px"))
        cloud_tab = widgets.VBox([self.views["cloud"].widget, self.location_text])
        table_tab = widgets.VBox([self.table], layout=widgets.Layout(overflow="auto"))
        tabs = widgets.Tab(children=[cloud_tab, self.views["diagram"].widget, self.views["barcode"].widget,
                                     table_tab], layout=widgets.Layout(width="100%"))
        for i, title in enumerate(("Cloud", "Diagram", "Barcode", "Feature table")):
            tabs.set_title(i, title)
        self.tabs = tabs
        right = widgets.VBox([tabs, self.band_note], layout=widgets.Layout(flex="1 1 0%", min_width="560px"))
        return widgets.VBox([widgets.HBox([settings, right], layout=widgets.Layout(flex_flow="row wrap",
                                                                                   align_items="flex-start")),
                             self.log.box])

    # -- life cycle --------------------------------------------------------------------------------
    def close(self) -> None:
        """Stop the worker and close the widgets (also called when the page closes the panel)."""
        self.actions.close()
        self.root.close()

    def _repr_mimebundle_(self, **kwargs):
        return self.root._repr_mimebundle_(**kwargs)
