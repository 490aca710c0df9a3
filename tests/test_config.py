"""Option objects: checked on creation, plain-dict round trips, unknown keys named."""

import pytest
from hypothesis import given
from hypothesis import strategies as st

from tdakit.config import AnalysisOptions, BandOptions, ComplexOptions, RunOptions, SamplingOptions, StudyOptions
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
    (lambda: RunOptions(scheduler=""), "scheduler"),
    (lambda: RunOptions(scheduler=8786), "scheduler"),
    (lambda: RunOptions.from_dict({"schedulers": "local"}), "schedulers"),
])
def test_bad_options_name_the_parameter(build, name):
    with pytest.raises(InvalidParameterError) as info:
        build()
    assert info.value.parameter == name and f"'{name}'" in str(info.value)


@pytest.mark.parametrize("text, expected", [
    # SI prefixes are powers of ten, IEC binary prefixes (Ki, Mi, Gi, Ti) powers of two (IEC 80000-13, from
    # memory); a bare K/M/G/T is binary as in job schedulers' memory requests (common practice).
    ("8GB", 8e9), ("512MiB", 512 * 2**20), ("0.5TB", 5e11), ("16G", 16 * 2**30), ("1 kB", 1e3), ("2048", 2048.0),
    ("1.5e3MB", 1.5e9), ("inf", float("inf")), (4e9, 4e9)])
def test_memory_sizes(text, expected):
    from tdakit.config import parse_memory_size

    assert parse_memory_size(text) == expected
    assert ComplexOptions(memory_budget=text).memory_budget == expected


@pytest.mark.parametrize("text", ["8XB", "GB", "-1GB", "0", "eight GB", "", True])
def test_bad_memory_sizes_name_the_key(text):
    with pytest.raises(InvalidParameterError) as info:
        ComplexOptions(memory_budget=text)
    assert info.value.parameter == "memory_budget"


def test_an_unlimited_budget_survives_plain_dicts():
    options = ComplexOptions(memory_budget="inf")
    assert options.to_dict()["memory_budget"] == "inf" and options.diagram_options()["memory_budget"] == float("inf")
    assert ComplexOptions.from_dict(options.to_dict()) == options


@pytest.mark.parametrize("given, kept", [(None, None), ("none", None), (" None ", None), ("local", "local"),
                                         (" tcp://10.0.0.5:8786 ", "tcp://10.0.0.5:8786")])
def test_the_run_section_holds_the_scheduler_apart_from_the_numbers(given, kept):
    options = RunOptions.from_dict({"scheduler": given})
    assert options.scheduler == kept and RunOptions.from_dict(options.to_dict()) == options
    # where a run computes does not change its numbers: not an AnalysisOptions field (run files, checkpoints,
    # the explorer's generated controls)
    assert "scheduler" not in str(AnalysisOptions().to_dict())
