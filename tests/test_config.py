"""Option objects: checked on creation, plain-dict round trips, unknown keys named."""

import pytest
from hypothesis import given
from hypothesis import strategies as st

from tdakit.config import AnalysisOptions, BandOptions, ComplexOptions, SamplingOptions, StudyOptions
from tdakit.errors import InvalidParameterError


@given(method=st.sampled_from(["maxmin", "random", "density", "core_maxmin"]),
       count=st.one_of(st.none(), st.integers(1, 10**6)),
       filtration=st.sampled_from(["rips", "witness", "alpha", "dtm"]), max_dim=st.integers(0, 3),
       band=st.sampled_from(["subsample", "bootstrap", "landscape", "density", "none"]),
       level=st.floats(0.01, 0.99), scale=st.one_of(st.none(), st.floats(0.1, 100)))
def test_analysis_options_round_trip_through_plain_dicts(method, count, filtration, max_dim, band, level, scale):
    options = AnalysisOptions(SamplingOptions(method=method, n_landmarks=count),
                              ComplexOptions(filtration=filtration, max_dim=max_dim, max_scale=scale),
                              BandOptions(method=band, level=level))
    assert AnalysisOptions.from_dict(options.to_dict()) == options


def test_study_options_round_trip_and_sort_counts():
    options = StudyOptions(methods=["random", "maxmin"], counts=[400, 50, 100], n_seeds=2,
                           complex={"filtration": "alpha"})
    assert options.counts == (50, 100, 400) and options.complex.filtration == "alpha"
    assert StudyOptions.from_dict(options.to_dict()) == options


@pytest.mark.parametrize("build, name", [
    (lambda: SamplingOptions(method="farthest"), "method"),
    (lambda: SamplingOptions(n_landmarks=0), "n_landmarks"),
    (lambda: ComplexOptions(max_dim=-1), "max_dim"),
    (lambda: ComplexOptions(coefficient_field=1), "coefficient_field"),
    (lambda: BandOptions(level=1.0), "level"),
    (lambda: BandOptions(n_boot=2.5), "n_boot"),
    (lambda: StudyOptions(counts=[10, 10]), "counts"),
    (lambda: StudyOptions(methods=[]), "methods"),
    (lambda: AnalysisOptions(sampling="maxmin"), "sampling"),
    (lambda: AnalysisOptions.from_dict({"sampling": {"n_landmark": 5}}), "n_landmark"),
    (lambda: AnalysisOptions.from_dict({"bands": {}}), "bands"),
])
def test_bad_options_name_the_parameter(build, name):
    with pytest.raises(InvalidParameterError) as info:
        build()
    assert info.value.parameter == name and f"'{name}'" in str(info.value)
