"""Common checks over the public API: bad input raises tdakit's error naming the parameter,
options are keyword-only, and stochastic functions repeat exactly for the same ``rng``."""

import inspect
import warnings

import numpy as np
import pytest

import tdakit
from tdakit import shapes
from tdakit.errors import TdakitError

GOOD = np.random.default_rng(0).normal(size=(30, 2))


def cloud():
    return tdakit.load_cloud(GOOD)


def ragged():
    return [[1.0, 2.0], [3.0]]


LOAD_CLOUD_BAD = [
    ("nan", dict(source=np.array([[0.0, 1.0], [np.nan, 2.0]])), "points", "NaN at row 1"),
    ("plus inf", dict(source=np.array([[0.0, 1.0], [1.0, 2.0], [np.inf, 2.0]])), "points", "infinity at row 2"),
    ("minus inf", dict(source=np.array([[-np.inf, 1.0], [1.0, 2.0]])), "points", "infinity at row 0"),
    ("zero points", dict(source=np.zeros((0, 3))), "points", "0 point"),
    ("one point", dict(source=np.zeros((1, 3))), "points", "1 point"),
    ("zero columns", dict(source=np.zeros((4, 0))), "points", "0 column"),
    ("1-D", dict(source=np.arange(5.0)), "points", "2-D array"),
    ("3-D", dict(source=np.zeros((2, 2, 2))), "points", "3-D input"),
    ("ragged", dict(source=ragged()), "points", "different lengths"),
    ("complex", dict(source=np.ones((3, 2), dtype=complex)), "points", "complex"),
    ("strings", dict(source=np.array([["a", "b"], ["c", "d"]])), "points", "real numbers"),
    ("objects", dict(source=np.array([[1, None], [2, 3]], dtype=object)), "points", "real numbers"),
    ("booleans", dict(source=np.ones((3, 2), dtype=bool)), "points", "boolean"),
    ("overflow", dict(source=np.array([[0.0, 0.0], [1e200, 0.0]])), "points", "overflow"),
    ("underflow", dict(source=np.array([[0.0, 0.0], [1e-200, 0.0]])), "points", "underflow"),
    ("unknown metric", dict(source=GOOD, metric="manhatan"), "metric", "'angular'"),
    ("unknown column", dict(source=GOOD, columns=[5]), "columns", "positions in"),
    ("box without periodic", dict(source=GOOD, box=3.0), "box", "periodic"),
    ("periodic without box", dict(source=np.abs(GOOD), metric="periodic"), "box", "side length"),
    ("negative box", dict(source=np.abs(GOOD), metric="periodic", box=-1.0), "box", "real number"),
    ("minkowski p below 1", dict(source=GOOD, metric="minkowski", p=0.5), "p", "not a metric"),
    ("standardize not bool", dict(source=GOOD, standardize="yes"), "standardize", "True or False"),
    ("delimiter for an array", dict(source=GOOD, delimiter=","), "delimiter", "file"),
]


@pytest.mark.parametrize(("case", "kwargs", "parameter", "message"), LOAD_CLOUD_BAD, ids=[c[0] for c in LOAD_CLOUD_BAD])
def test_load_cloud_bad_input(case, kwargs, parameter, message):
    source = kwargs.pop("source")
    with pytest.raises(TdakitError, match=message) as info:
        tdakit.load_cloud(source, **kwargs)
    assert info.value.parameter == parameter
    assert f"'{parameter}'" in str(info.value) or parameter == "points"


def test_load_cloud_bad_files(tmp_path):
    (tmp_path / "bad.csv").write_text("1,2\n3,x\n")
    (tmp_path / "empty.csv").write_text("# nothing\n")
    (tmp_path / "a.bin").write_bytes(b"\0\1")
    (tmp_path / "broken.npy").write_bytes(b"not numpy")
    cases = [(tmp_path / "missing.npy", "does not exist"), (tmp_path / "bad.csv", "line 2, column 2"),
             (tmp_path / "empty.csv", "no data lines"), (tmp_path / "a.bin", "ending in"),
             (tmp_path / "broken.npy", "numpy file")]
    for path, message in cases:
        with pytest.raises(TdakitError, match=message) as info:
            tdakit.load_cloud(path)
        assert info.value.parameter == "source"


def _landmarks_cases():
    return [
        (dict(n_landmarks=0), "n_landmarks"), (dict(n_landmarks=31), "n_landmarks"),
        (dict(n_landmarks=2.5), "n_landmarks"), (dict(n_landmarks=True), "n_landmarks"),
        (dict(n_landmarks=3, method="farthest"), "method"), (dict(n_landmarks=3, rng="seed"), "rng"),
        (dict(n_landmarks=3, rng=-1), "rng"), (dict(n_landmarks=3, start=30), "start"),
        (dict(n_landmarks=3, method="density", density_power=np.nan), "density_power"),
        (dict(n_landmarks=3, method="density", density_neighbors=0), "density_neighbors"),
        (dict(n_landmarks=3, method="core_maxmin", keep_fraction=0.0), "keep_fraction"),
        (dict(n_landmarks=29, method="core_maxmin", keep_fraction=0.5), "n_landmarks"),
    ]


@pytest.mark.parametrize(("kwargs", "parameter"), _landmarks_cases())
def test_select_landmarks_bad_input(kwargs, parameter):
    with pytest.raises(TdakitError) as info:
        tdakit.select_landmarks(cloud(), **kwargs)
    assert info.value.parameter == parameter and f"'{parameter}'" in str(info.value)


def test_select_landmarks_rejects_non_cloud_and_counts_distinct_points():
    with pytest.raises(TdakitError) as info:
        tdakit.select_landmarks(GOOD, 3)
    assert info.value.parameter == "cloud"
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        doubled = tdakit.load_cloud(np.vstack([GOOD[:5], GOOD[:5]]))
    with pytest.raises(TdakitError, match="distinct points, 5"):
        tdakit.select_landmarks(doubled, 6, method="random")


def _diagram_cases():
    periodic = tdakit.load_cloud(np.abs(GOOD), metric="periodic", box=10)
    return [
        (cloud(), dict(filtration="cech"), "filtration"), (cloud(), dict(max_dim=-1), "max_dim"),
        (cloud(), dict(max_scale=-1.0), "max_scale"), (cloud(), dict(max_scale=np.nan), "max_scale"),
        (cloud(), dict(coefficient_field=4), "coefficient_field"),
        (cloud(), dict(filtration="dtm", sparse=0.5), "sparse"), (cloud(), dict(sparse=1.0), "sparse"),
        (cloud(), dict(landmarks=np.array([0, 99])), "landmarks"),
        (cloud(), dict(landmarks=np.array([0, 0, 1])), "landmarks"),
        (cloud(), dict(filtration="witness"), "landmarks"),
        (periodic, dict(filtration="alpha"), "filtration"),
        (cloud(), dict(witness="lazy", witness_nu=3, filtration="witness", landmarks=np.arange(3)), "witness_nu"),
        (cloud(), dict(memory_budget=0), "memory_budget"), (cloud(), dict(collapse=1), "collapse"),
        (cloud(), dict(filtration="dtm", dtm_neighbors=31), "dtm_neighbors"),
    ]


@pytest.mark.parametrize(("data", "kwargs", "parameter"), _diagram_cases())
def test_compute_diagrams_bad_input(data, kwargs, parameter):
    with pytest.raises(TdakitError) as info:
        tdakit.compute_diagrams(data, **kwargs)
    assert info.value.parameter == parameter


DIAGRAM_BAD = [
    (dict(a=[[0, 1], [2]]), "a"), (dict(a=np.zeros((2, 3))), "a"), (dict(a=[[0, np.nan]]), "a"),
    (dict(a=[[2, 1]]), "a"), (dict(a=[[np.inf, np.inf]]), "a"), (dict(b=[["x", "y"]]), "b"),
    (dict(kind="energy"), "kind"), (dict(kind="wasserstein", order=0.5), "order"), (dict(ground="l1"), "ground"),
]


@pytest.mark.parametrize(("kwargs", "parameter"), DIAGRAM_BAD)
def test_diagram_distance_bad_input(kwargs, parameter):
    args = {"a": [[0, 1]], "b": [[0, 2]], **kwargs}
    with pytest.raises(TdakitError) as info:
        tdakit.diagram_distance(args.pop("a"), args.pop("b"), **args)
    assert info.value.parameter == parameter


@pytest.mark.parametrize(("function", "kwargs", "parameter"), [
    (tdakit.knn_density, dict(k=0), "k"), (tdakit.knn_density, dict(k=30), "k"),
    (tdakit.knn_radius, dict(k=1.5), "k"), (tdakit.densest_points, dict(fraction=0.0), "fraction"),
    (tdakit.witness_edge_values, dict(landmarks=np.arange(3), nu=5), "nu"),
    (tdakit.witness_edge_values, dict(landmarks=np.arange(3), max_scale=0), "max_scale"),
])
def test_density_and_witness_bad_input(function, kwargs, parameter):
    with pytest.raises(TdakitError) as info:
        function(cloud(), **kwargs)
    assert info.value.parameter == parameter


@pytest.mark.parametrize(("function", "kwargs", "parameter"), [
    (shapes.circle, dict(n_points=0), "n_points"), (shapes.circle, dict(n_points=5, noise=-1), "noise"),
    (shapes.sphere, dict(n_points=5, dim=0), "dim"), (shapes.torus, dict(n_points=5, minor=3), "minor"),
    (shapes.klein_bottle, dict(n_points=5, rng=1.5), "rng"),
])
def test_shapes_bad_input(function, kwargs, parameter):
    with pytest.raises(TdakitError) as info:
        function(**kwargs)
    assert info.value.parameter == parameter


PUBLIC_WITH_DATA = [
    (tdakit.load_cloud, 1), (tdakit.select_landmarks, 2), (tdakit.compute_diagrams, 1),
    (tdakit.diagram_distance, 2), (tdakit.knn_density, 2), (tdakit.knn_radius, 2),
    (tdakit.densest_points, 2), (tdakit.witness_edge_values, 2), (shapes.circle, 1), (shapes.torus, 1),
    (tdakit.analyze, 2), (tdakit.subsampling_study, 2), (tdakit.rerun, 2), (tdakit.save_run, 2),
]


@pytest.mark.parametrize(("function", "n_positional"), PUBLIC_WITH_DATA, ids=lambda f: getattr(f, "__name__", ""))
def test_options_are_keyword_only(function, n_positional):
    params = list(inspect.signature(function).parameters.values())
    assert all(p.kind is p.POSITIONAL_OR_KEYWORD for p in params[:n_positional])
    assert all(p.kind is p.KEYWORD_ONLY for p in params[n_positional:])


@pytest.mark.parametrize("method", ["maxmin", "random", "density", "core_maxmin"])
def test_stochastic_functions_repeat_for_the_same_rng(method, global_seed):
    first = tdakit.select_landmarks(cloud(), 8, method=method, rng=global_seed)
    again = tdakit.select_landmarks(cloud(), 8, method=method, rng=global_seed)
    np.testing.assert_array_equal(first.indices, again.indices)
    np.testing.assert_array_equal(shapes.torus(50, rng=global_seed), shapes.torus(50, rng=global_seed))


def _band_cases():
    return [
        (dict(level=1.0), "level"), (dict(level=0.0), "level"), (dict(level=1.5), "level"),
        (dict(n_boot=0), "n_boot"), (dict(method="jackknife"), "method"),
        (dict(method="subsample", subsample_size=30), "subsample_size"),
        (dict(method="subsample", subsample_size=0), "subsample_size"),
        (dict(method="subsample", filtration="witness", landmarks=tdakit.select_landmarks(cloud(), 3)), "method"),
        (dict(landmarks=np.arange(3)), "landmarks"), (dict(n_jobs=0), "n_jobs"), (dict(executor=object()), "executor"),
        (dict(rng=-3), "rng"), (dict(diagram_options={"max_dim": 2}), "diagram_options"),
        (dict(method="density", bandwidth=-1.0), "bandwidth"),
        (dict(method="landscape", n_subsamples=1), "n_subsamples"),
    ]


@pytest.mark.parametrize(("kwargs", "parameter"), _band_cases())
def test_confidence_band_bad_input(kwargs, parameter):
    with pytest.raises(TdakitError) as info:
        tdakit.confidence_band(cloud(), **{"n_boot": 5, **kwargs})
    assert info.value.parameter == parameter


def test_density_band_refuses_high_dimensional_clouds():
    data = tdakit.load_cloud(np.random.default_rng(1).normal(size=(40, 5)))
    with pytest.raises(TdakitError, match="1 to 3") as info:
        tdakit.confidence_band(data, method="density", n_boot=5)
    assert info.value.parameter == "method"


def test_band_significance_rejects_non_diagrams():
    band = tdakit.confidence_band(cloud(), n_boot=5, rng=0)
    with pytest.raises(TdakitError) as info:
        band.significant(np.zeros((3, 2)), 1)
    assert info.value.parameter == "diagrams"
    with pytest.raises(TdakitError) as info:
        band.radius(5)
    assert info.value.parameter == "k"


@pytest.mark.parametrize(("kwargs", "parameter"), [
    (dict(group_a=[[[0, 1]]], group_b=[[[0, 1]], [[0, 2]]]), "group_a"),
    (dict(group_a=[[[0, 1]], [[0, 2]]], group_b=[[[0, 1]], [[1, 0]]]), "group_b"),
    (dict(group_a=[[[0, 1]], [[0, 2]]], group_b=[[[0, 1]], [[0, 2]]], kind="energy"), "kind"),
    (dict(group_a=[[[0, 1]], [[0, 2]]], group_b=[[[0, 1]], [[0, 2]]], power=0), "power"),
])
def test_permutation_test_bad_input(kwargs, parameter):
    with pytest.raises(TdakitError) as info:
        tdakit.permutation_test(kwargs.pop("group_a"), kwargs.pop("group_b"), **kwargs)
    assert info.value.parameter == parameter


def test_analyze_repeats_for_the_same_rng_and_survives_a_save_load_round_trip(tmp_path, global_seed):
    from tests.helpers import assert_same

    options = {"sampling": {"n_landmarks": 10}, "band": {"n_boot": 10}}
    first = tdakit.analyze(cloud(), options, rng=global_seed)
    again = tdakit.analyze(cloud(), options, rng=global_seed)
    assert_same(first.diagrams.pairs, again.diagrams.pairs)
    assert first.band.radii == again.band.radii
    assert_same(first, tdakit.load_run(tdakit.save_run(first, tmp_path / "r")))


@pytest.mark.parametrize(("function", "kwargs", "parameter"), [
    (tdakit.analyze, dict(cloud=GOOD), "cloud"),
    (tdakit.analyze, dict(cloud=None), "cloud"),
    (tdakit.subsampling_study, dict(cloud=GOOD), "cloud"),
    (tdakit.rerun, dict(run=GOOD), "run"),
    (tdakit.save_run, dict(run=None, path="x"), "run"),
    (tdakit.load_run, dict(path=3), "path"),
])
def test_pipeline_bad_input(function, kwargs, parameter):
    with pytest.raises(TdakitError) as info:
        function(**kwargs)
    assert info.value.parameter == parameter and f"'{parameter}'" in str(info.value)
