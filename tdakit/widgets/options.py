"""The option form: one control per field of the pipeline's option dataclasses, built from the fields.

A field added to :class:`~tdakit.config.SamplingOptions`, :class:`~tdakit.config.ComplexOptions`
or :class:`~tdakit.config.BandOptions` gets a control here without any edit (typed from its
annotation and default); a label and a help line in the trade's words can be added to ``HELP``.
"""

from __future__ import annotations

import dataclasses
import html
import math
import os

import ipywidgets as widgets
import traitlets

from tdakit.config import AnalysisOptions, BandOptions, ComplexOptions, SamplingOptions

SECTIONS = {"sampling": SamplingOptions, "complex": ComplexOptions, "band": BandOptions}
SECTION_TITLES = {"sampling": "Sampling (landmarks)", "complex": "Complex (filtration)", "band": "Noise band"}

SAMPLING_CHOICES = [("maxmin (spread out)", "maxmin"), ("uniform random", "random"),
                    ("density-weighted", "density"), ("maxmin on the dense core", "core_maxmin")]
COMPLEX_CHOICES = [("DTM-weighted Rips", "dtm"), ("Vietoris-Rips", "rips"), ("witness", "witness"),
                   ("alpha (Euclidean only)", "alpha")]
BAND_CHOICES = [("auto: calibrated choice", "auto"), ("DTM: proven", "dtm"),
                ("density: proven, 1-3 coords", "density"),
                ("subsampling: proven, wide", "subsample"), ("bootstrap: heuristic", "bootstrap"),
                ("landscape: mean curve only", "landscape"), ("no band", "none")]
CHOICES = {
    ("sampling", "method"): SAMPLING_CHOICES,
    ("complex", "filtration"): COMPLEX_CHOICES,
    ("complex", "witness"): [("lazy", "lazy"), ("strong", "strong"), ("weak", "weak")],
    ("complex", "dtm_power"): [("p = \u221e (the larger weight)", math.inf), ("p = 1 (sum of weights)", 1.0)],
    ("band", "method"): BAND_CHOICES,
}

# (label, help in the trade's words, text of the "automatic" box for optional values)
HELP = {
    ("sampling", "method"): ("Landmark choice", "How the vertices of the complex are picked from the catalogue."),
    ("sampling", "n_landmarks"): ("Landmarks", "How many catalogue points become vertices of the complex; more "
                                 "resolve smaller features and cost more time.", "every point"),
    ("sampling", "keep_fraction"): ("Dense-core fraction", "For 'maxmin on the dense core': the share of the "
                                    "catalogue, densest first, that landmarks are drawn from (0.9 keeps all but the "
                                    "sparsest tenth; 0.3 keeps the clusters and filaments only)."),
    ("sampling", "density_power"): ("Density power", "For 'density-weighted': landmarks are drawn with probability "
                                    "proportional to the local density to this power (0 = uniform)."),
    ("sampling", "density_neighbors"): ("Density neighbours", "How many nearest neighbours measure the local "
                                        "density of each point.", "automatic"),
    ("complex", "filtration"): ("Complex", "The family of shapes grown on the landmarks as the scale increases."),
    ("complex", "max_dim"): ("Highest dimension", "0 = clumps (components), 1 = loops, 2 = voids (cavities). "
                             "Each step up costs much more."),
    ("complex", "max_scale"): ("Scale cap", "Stop growing the complex at this scale (in the data's units); "
                               "features still alive there are marked 'alive at the cap'. Speeds up large runs.",
                               "no cap"),
    ("complex", "coefficient_field"): ("Coefficient field (prime)", "Homology is counted modulo this prime; 2 is "
                                       "the usual choice and only matters for twisted shapes."),
    ("complex", "collapse"): ("Collapse edges first", "Remove edges that cannot change the result before "
                              "computing (same numbers, faster)."),
    ("complex", "sparse"): ("Sparse Rips (\u03b5)", "Approximate Rips with fewer edges: diagrams within a factor "
                            "1/(1-\u03b5) of the exact ones.", "exact"),
    ("complex", "witness"): ("Witness rule", "How catalogue points (witnesses) admit a shape between landmarks; "
                             "'lazy' is the usual one."),
    ("complex", "witness_nu"): ("Witness relaxation \u03bd", "\u03bd=1: a witness may see an edge through its "
                                "nearest landmark plus one more (the usual lazy witness); \u03bd=0 is stricter, "
                                "\u03bd=2 looser."),
    ("complex", "dtm_neighbors"): ("DTM neighbours", "Distance to measure: each landmark's weight is its mean "
                                   "distance to this many nearest catalogue points; more neighbours smooth out "
                                   "more shot noise.", "automatic"),
    ("complex", "dtm_power"): ("DTM power", "How the weights of two landmarks combine into an edge length."),
    ("complex", "memory_budget"): ("Memory budget", "Refuse a complex larger than this before building it, e.g. "
                                   "8GB or 512MiB; the default is a quarter of the machine's memory.", "default"),
    ("band", "method"): ("Noise band", "How the band separating real features from noise is computed."),
    ("band", "level"): ("Confidence level", "Chance that the band covers the noise of a repeat survey; 0.95 is "
                        "the usual choice."),
    ("band", "n_boot"): ("Replicates", "Resampled catalogues behind the band; more give a steadier band and "
                         "cost more time."),
    ("band", "subsample_size"): ("Subsample size", "Points per resampled catalogue for the subsampling and "
                                 "landscape bands.", "automatic"),
    ("band", "account_for_landmarks"): ("Widen for the landmark spacing", "Add what the spacing of the landmarks "
                                        "alone can create to the band (its 'margin'); without it no feature is "
                                        "called."),
    ("band", "bandwidth"): ("Density bandwidth", "Smoothing length of the kernel-density band, in the data's "
                            "units.", "automatic (Scott)"),
    ("band", "resolution"): ("Density grid cells per side", "Grid of the kernel-density band.", "automatic"),
    ("band", "n_subsamples"): ("Landscape subsamples", "Subsamples averaged by the landscape band."),
    ("band", "n_levels"): ("Landscape levels", "How many landscape curves (first, second, ... most persistent) "
                           "are kept."),
}

# Shown beside results: the jargon of bands and comparisons, in the trade's words.
GLOSSARY = {
    "certificate": "the subsampling study's stability bound: the landmark constant (2 for Rips) x (this setting's "
                   "coverage radius + the reference's); no diagram may lie farther (bottleneck) from the reference's",
    "margin": "persistence minus the height of the noise strip: positive means the feature clears the band and is "
              "called real, negative means it lies inside the strip",
    "Hausdorff level c": "the subsample band's radius source: the distance within which a subsample matches the whole "
                         "catalogue (Hausdorff distance) at the chosen confidence; the strip is twice a multiple of it",
    "loss": "how spread out the diagrams are within each group; a real difference makes the true split tighter "
            "than random splits",
    "nu=1": "the witness relaxation: each catalogue point vouches for an edge at its distance to the edge's far "
            "landmark minus its distance to its nearest landmark (nu=0: nothing subtracted; nu=2: its second nearest)",
    "p-value": "the share of random splits of the pieces that look at least as different as the true split",
}

MAIN_FIELDS = (("sampling", "method"), ("sampling", "n_landmarks"), ("complex", "filtration"),
               ("complex", "max_dim"), ("band", "method"), ("band", "level"), ("band", "n_boot"))
ROW = widgets.Layout(width="100%", align_items="center", flex_flow="row wrap")
LABEL_WIDTH, CONTROL_WIDTH, OPTIONAL_WIDTH = "11em", "19em", "19em"
# Where a number starts when its "automatic" box is unticked (a plausible value, not 1 byte of memory).
STARTS = {("complex", "max_scale"): 1.0, ("complex", "sparse"): 0.5, ("complex", "memory_budget"): "4GB",
          ("complex", "dtm_neighbors"): 50, ("sampling", "density_neighbors"): 15, ("band", "resolution"): 64,
          ("band", "bandwidth"): 1.0, ("band", "subsample_size"): 500}


def glossary_html(terms=None) -> str:
    """The help lines for ``terms`` (default: all), as a small definition list."""
    items = "".join(f"<li><b>{html.escape(term)}</b>: {html.escape(text)}</li>" for term, text in GLOSSARY.items()
                    if terms is None or term in terms)
    return f'<ul style="font-size:85%;color:#444;margin:2px 0 2px 1em;padding:0">{items}</ul>'


class OptionalValue(widgets.HBox):
    """A number, or "automatic" (``empty``: None or another fixed value) when its box is ticked."""

    value = traitlets.Any(None)

    def __init__(self, inner: widgets.ValueWidget, empty_label: str, value=None, empty=None, **kwargs):
        self.empty, self.inner = empty, inner
        self.automatic = widgets.Checkbox(value=True, description=empty_label, indent=False,
                                          layout=widgets.Layout(width="auto", min_width="5em"))
        inner.layout.width = "15em" if isinstance(inner, widgets.IntSlider) else "8em"
        super().__init__([inner, self.automatic], layout=widgets.Layout(width=OPTIONAL_WIDTH, flex_flow="row wrap",
                                                                         align_items="center"), **kwargs)
        self.automatic.observe(lambda _: self._sync(), names="value")
        inner.observe(lambda _: self._sync(), names="value")
        self.set(value)

    def set(self, value) -> None:
        automatic = value is None or value == self.empty
        with self.hold_trait_notifications():
            if not automatic:
                if isinstance(self.inner, widgets.IntSlider) and value > self.inner.max:
                    self.inner.max = value
                self.inner.value = f"{value:g}" if isinstance(self.inner, widgets.Text) else value
            self.automatic.value = automatic
        self._sync()

    def _sync(self) -> None:
        self.inner.layout.display = "none" if self.automatic.value else None  # no meaningless number shown
        value = self.inner.value.strip() if isinstance(self.inner, widgets.Text) else self.inner.value
        self.value = self.empty if self.automatic.value else value


def _kind(cls, field) -> str:
    return str(field.type).replace(" ", "")


def _control(section: str, field, default, top: int) -> widgets.Widget:
    key, kind = (section, field.name), _kind(SECTIONS[section], field)
    tip = HELP.get(key, ("", ""))[1]
    if key in CHOICES:
        return widgets.Dropdown(options=CHOICES[key], value=default, layout=widgets.Layout(width=CONTROL_WIDTH),
                                tooltip=tip)
    if key == ("sampling", "n_landmarks"):
        slider = widgets.IntSlider(value=min(default or top, top), min=min(10, top), max=top, continuous_update=False)
        return OptionalValue(slider, HELP[key][2], value=default)
    if key == ("band", "level"):
        return widgets.FloatSlider(value=default, min=0.5, max=0.99, step=0.01, continuous_update=False,
                                   layout=widgets.Layout(width=CONTROL_WIDTH))
    if kind == "bool":
        return widgets.Checkbox(value=default, indent=False, layout=widgets.Layout(width=CONTROL_WIDTH))
    number = {"int": widgets.IntText, "float": widgets.FloatText}
    parts = kind.split("|")
    base = "str" if "str" in parts else parts[0]  # a field that also takes text (e.g. "8GB") gets a text box
    if "None" in parts:
        label = HELP[key][2] if len(HELP.get(key, ())) > 2 else "automatic"
        start = STARTS.get(key, 1)
        inner = (widgets.Text(value=str(start)) if base not in number else
                 number[base](value=int(start) if base == "int" else float(start)))
        return OptionalValue(inner, label, value=default)
    if base in number:
        return number[base](value=default, layout=widgets.Layout(width=CONTROL_WIDTH))
    return widgets.Text(value="" if default is None else str(default), layout=widgets.Layout(width=CONTROL_WIDTH))


def labelled(title: str, tip: str, control: widgets.Widget) -> widgets.HBox:
    words = f'<span title="{html.escape(tip)}" style="white-space:normal;line-height:1.2">{title}</span>'
    return widgets.HBox([widgets.HTML(words, layout=widgets.Layout(width=LABEL_WIDTH, min_width=LABEL_WIDTH)),
                         control], layout=ROW)


class OptionsForm:
    """Controls for every field of :class:`AnalysisOptions`, plus the run's seed and worker count.

    ``controls`` maps ``"section.field"`` (e.g. ``"complex.max_scale"``) to its widget, and
    ``"seed"``, ``"n_jobs"`` to theirs; ``main`` and ``advanced`` are the boxes to lay out.
    """

    def __init__(self, options: AnalysisOptions, *, top: int, seed: int = 0, n_jobs: int = 1):
        self.controls: dict[str, widgets.Widget] = {}
        rows: dict[tuple[str, str], widgets.HBox] = {}
        for section, cls in SECTIONS.items():
            current = getattr(options, section)
            for field in dataclasses.fields(cls):
                control = _control(section, field, getattr(current, field.name), top)
                title, tip = HELP.get((section, field.name), (field.name.replace("_", " "), ""))[:2]
                self.controls[f"{section}.{field.name}"] = control
                rows[(section, field.name)] = labelled(title, tip, control)
        cores = os.cpu_count() or 1
        self.controls["seed"] = widgets.IntText(value=seed, layout=widgets.Layout(width=CONTROL_WIDTH))
        self.controls["n_jobs"] = widgets.BoundedIntText(value=min(max(n_jobs, 1), cores), min=1, max=cores,
                                                         layout=widgets.Layout(width=CONTROL_WIDTH))
        seed_row = labelled("Seed", "The run's root randomness: the same seed and settings give the same numbers.",
                        self.controls["seed"])
        jobs_row = labelled("Worker processes", "Replicates of the band computed in parallel (same numbers for any "
                            "count).", self.controls["n_jobs"])
        self.controls["scheduler"] = widgets.Text(value="", placeholder="none (this machine)",
                                                  layout=widgets.Layout(width=CONTROL_WIDTH))
        self.controls["checkpoint"] = widgets.Text(value="", placeholder="none",
                                                   layout=widgets.Layout(width=CONTROL_WIDTH))
        cluster_row = labelled("Dask scheduler", "Address of a Dask cluster (or 'local') to run the landmarks and the "
                               "replicates on; same numbers as on this machine.", self.controls["scheduler"])
        checkpoint_row = labelled("Checkpoint file", "Finished replicates are kept in this file; a run stopped and "
                                  "started again with the same settings resumes from it.", self.controls["checkpoint"])
        main = []
        for section in SECTIONS:
            main.append(widgets.HTML(f"<b>{SECTION_TITLES[section]}</b>"))
            main += [rows[key] for key in MAIN_FIELDS if key[0] == section]
        self.main = widgets.VBox(main + [seed_row], layout=widgets.Layout(width="100%"))
        advanced = []
        for section in SECTIONS:
            extra = [row for key, row in rows.items() if key[0] == section and key not in MAIN_FIELDS]
            advanced += [widgets.HTML(f"<i>{SECTION_TITLES[section]}</i>")] + extra
        run = [widgets.HTML("<i>Running</i>"), jobs_row, cluster_row, checkpoint_row]
        self.advanced_box = widgets.VBox(advanced + run, layout=widgets.Layout(width="100%"))
        self.advanced = widgets.Accordion(children=[self.advanced_box], selected_index=None,
                                          layout=widgets.Layout(width="100%"))
        self.advanced.set_title(0, "Advanced: every other setting of the pipeline")

    def run_settings(self) -> dict:
        """The keyword arguments of :func:`tdakit.analyze` besides the options: workers, cluster, checkpoint."""
        c = self.controls
        return {"n_jobs": c["n_jobs"].value, "scheduler": c["scheduler"].value.strip() or None,
                "checkpoint": c["checkpoint"].value.strip() or None}

    def field_controls(self) -> dict[str, widgets.Widget]:
        return {k: v for k, v in self.controls.items() if "." in k}

    def options(self) -> AnalysisOptions:
        """The options the controls describe (the dataclasses check every value and name a wrong one)."""
        sections = {section: {} for section in SECTIONS}
        for key, control in self.field_controls().items():
            section, name = key.split(".")
            value = control.value
            if isinstance(control, widgets.Text) and not isinstance(control, OptionalValue):
                value = value.strip() or None
            sections[section][name] = value
        return AnalysisOptions.from_dict(sections)

    def set_options(self, options: AnalysisOptions) -> None:
        """Put ``options`` into the controls (a loaded run file or options file)."""
        for key, control in self.field_controls().items():
            section, name = key.split(".")
            value = getattr(getattr(options, section), name)
            if isinstance(control, OptionalValue):
                control.set(value)
            elif isinstance(control, widgets.Text):
                control.value = "" if value is None else str(value)
            else:
                if isinstance(control, widgets.IntSlider) and value > control.max:
                    control.max = value
                control.value = value

    def observe(self, callback) -> None:
        for control in self.controls.values():
            control.observe(lambda change: callback(), names="value")


def options_from_toml(text: str) -> AnalysisOptions:
    """The [sampling], [complex] and [band] sections of an options file (the command line's --config format)."""
    import tomllib

    from tdakit.errors import InvalidDataError

    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise InvalidDataError(f"The options file is not valid TOML: {exc}.", parameter="options file") from None
    return AnalysisOptions.from_dict({key: data.get(key, {}) for key in SECTIONS})
