"""Every option of the pipeline has a control, built from the option dataclasses' fields."""

import dataclasses
import inspect
import math

import pytest

from tdakit.config import AnalysisOptions, BandOptions, ComplexOptions, SamplingOptions
from tdakit.errors import TdakitError
from tdakit.pipeline import analyze
from tdakit.widgets import Explorer
from tdakit.widgets.options import GLOSSARY, HELP, SECTIONS, OptionalValue, OptionsForm, options_from_toml

from .conftest import descendants

# A valid value other than the default for every field known today (a new field still gets its
# control, which test_every_field_of_every_options_dataclass_has_a_control checks on its own).
OTHER = {
    ("sampling", "method"): "core_maxmin", ("sampling", "n_landmarks"): 70, ("sampling", "keep_fraction"): 0.3,
    ("sampling", "density_power"): 2.0, ("sampling", "density_neighbors"): 12,
    ("complex", "filtration"): "rips", ("complex", "max_dim"): 2, ("complex", "max_scale"): 0.8,
    ("complex", "coefficient_field"): 3, ("complex", "collapse"): False, ("complex", "sparse"): 0.4,
    ("complex", "witness"): "strong", ("complex", "witness_nu"): 2, ("complex", "dtm_neighbors"): 9,
    ("complex", "dtm_power"): 1.0, ("complex", "memory_budget"): 2.5e9,
    ("band", "method"): "subsample", ("band", "level"): 0.9, ("band", "n_boot"): 37, ("band", "subsample_size"): 120,
    ("band", "account_for_landmarks"): False, ("band", "bandwidth"): 0.25, ("band", "resolution"): 32,
    ("band", "n_subsamples"): 12, ("band", "n_levels"): 2,
}


def test_every_field_of_every_options_dataclass_has_a_control(ring):
    app = Explorer(ring)
    shown = {id(w) for w in descendants(app.root)}
    for section, cls in (("sampling", SamplingOptions), ("complex", ComplexOptions), ("band", BandOptions)):
        for field in dataclasses.fields(cls):
            control = app.controls.get(f"{section}.{field.name}")
            assert control is not None, f"no control for {section}.{field.name}"
            assert id(control) in shown, f"the control of {section}.{field.name} is not in the panel"
    assert set(SECTIONS) == {f.name for f in dataclasses.fields(AnalysisOptions)}
    for name in ("seed", "n_jobs", "metric", "box"):  # the run's other settings
        assert id(app.controls[name]) in shown


# analyze's keyword arguments that are not settings a scientist chooses, with the reason
NOT_SETTINGS = {"progress": "the progress bar and step line show it", "executor": "a Python object; n_jobs and the "
                "Dask scheduler choose where replicates run"}


def test_every_keyword_of_analyze_has_a_control_or_a_reason(ring):
    app = Explorer(ring)
    shown = {id(w) for w in descendants(app.root)}
    names = {"rng": "seed"}
    for name, parameter in inspect.signature(analyze).parameters.items():
        if parameter.kind is not inspect.Parameter.KEYWORD_ONLY or name in NOT_SETTINGS:
            continue
        control = app.controls.get(names.get(name, name))
        assert control is not None and id(control) in shown, f"analyze's {name!r} has no control in the explorer"
    app.controls["checkpoint"].value = " /tmp/x.ckpt "
    app.controls["n_jobs"].value = 2
    assert app.form.run_settings() == {"n_jobs": 2, "scheduler": None, "checkpoint": "/tmp/x.ckpt"}


def test_every_known_field_has_a_label_and_a_help_line():
    for section, cls in SECTIONS.items():
        for field in dataclasses.fields(cls):
            title, tip = HELP[(section, field.name)][:2]
            assert title and len(tip) > 20, (section, field.name)


def test_each_control_changes_exactly_its_option(ring):
    for (section, name), value in OTHER.items():
        form = OptionsForm(AnalysisOptions(), top=500)
        control = form.controls[f"{section}.{name}"]
        if isinstance(control, OptionalValue):
            control.set(value)
        else:
            control.value = value
        options = form.options()
        expected = dataclasses.replace(AnalysisOptions(), **{section: dataclasses.replace(
            getattr(AnalysisOptions(), section), **{name: value})})
        assert options == expected, (section, name)


def test_options_go_into_the_controls_and_back_unchanged():
    fields = {section: {} for section in SECTIONS}
    for (section, name), value in OTHER.items():
        fields[section][name] = value
    options = AnalysisOptions.from_dict(fields)
    form = OptionsForm(AnalysisOptions(), top=50)  # a count above the slider's range widens it
    form.set_options(options)
    assert form.options() == options
    form.set_options(AnalysisOptions(SamplingOptions(n_landmarks=None), ComplexOptions(dtm_power=math.inf)))
    assert form.options().sampling.n_landmarks is None and form.options().complex.dtm_power == math.inf


def test_an_invalid_value_is_refused_by_the_options_themselves():
    form = OptionsForm(AnalysisOptions(), top=500)
    form.controls["sampling.keep_fraction"].value = 1.5
    with pytest.raises(TdakitError, match="keep_fraction"):
        form.options()


def test_options_file_in_the_command_line_format():
    text = '[input]\nfile = "x.csv"\n[sampling]\nn_landmarks = 80\n[complex]\nmax_scale = 2.0\ndtm_neighbors = 15\n' \
           '[band]\nmethod = "subsample"\nn_boot = 40\n'
    options = options_from_toml(text)
    assert (options.sampling.n_landmarks, options.complex.max_scale, options.complex.dtm_neighbors) == (80, 2.0, 15)
    assert (options.band.method, options.band.n_boot) == ("subsample", 40)
    with pytest.raises(TdakitError, match="not valid TOML"):
        options_from_toml("[band\n")
    with pytest.raises(TdakitError, match="n_bot"):
        options_from_toml("[band]\nn_bot = 3\n")


def test_the_glossary_covers_the_jargon_the_panels_show():
    for term in ("certificate", "margin", "Hausdorff level c", "loss", "nu=1"):
        assert len(GLOSSARY[term].split()) >= 8
