"""Hostile inputs against the core entry points: the findings of issue 17 (each one a failing test first).

Every case names its entry point with ``@pytest.mark.entry`` (read by ``benchmarks/reliability.py``); cases
guarding against a silent wrong answer or a hang carry ``silent`` or ``hang``.
"""

import re
import warnings

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

import tdakit
from tdakit import compute_diagrams, diagram_distance, load_cloud, permutation_test, select_landmarks
from tdakit.core.geometry.cloud import as_point_array, make_cloud
from tdakit.core.geometry.metrics import make_metric
from tdakit.errors import InvalidDataError, InvalidParameterError, MemoryBudgetError

RNG = np.random.default_rng(17)
PLANE = RNG.normal(size=(40, 2))


def _quiet_cloud(points, **kwargs):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return load_cloud(points, **kwargs)


def _names(info, parameter):
    assert info.value.parameter == parameter, info.value
    assert f"'{parameter}'" in str(info.value), info.value


# -- landmarks on repeated points ----------------------------------------------------------------------
@pytest.mark.entry("select_landmarks")
@pytest.mark.silent
@pytest.mark.parametrize("method", ["random", "density", "maxmin", "core_maxmin"])
def test_landmarks_never_repeat_a_point_of_a_cloud_with_five_copies_of_each(method):
    base = RNG.normal(size=(20, 2))
    cloud = _quiet_cloud(np.repeat(base, 5, axis=0))
    for seed in range(5):
        marks = select_landmarks(cloud, 12, method=method, rng=seed, keep_fraction=1.0)
        chosen = cloud.points[marks.indices]
        assert np.unique(chosen, axis=0).shape[0] == marks.n_landmarks


@pytest.mark.entry("select_landmarks")
@pytest.mark.parametrize("method", ["random", "density"])
def test_more_landmarks_than_distinct_points_is_refused_with_the_distinct_count(method):
    cloud = _quiet_cloud(np.repeat(RNG.normal(size=(20, 2)), 5, axis=0))
    with pytest.raises(InvalidParameterError, match="distinct points, 20") as info:
        select_landmarks(cloud, 21, method=method, rng=0)
    _names(info, "n_landmarks")


@pytest.mark.entry("select_landmarks")
@pytest.mark.silent
def test_random_landmarks_on_every_distinct_point_take_each_once():
    cloud = _quiet_cloud(np.repeat(RNG.normal(size=(20, 2)), 5, axis=0))
    marks = select_landmarks(cloud, 20, method="random", rng=3)
    assert marks.coverage_radius == 0.0  # every distinct point is a landmark


# -- Minkowski with a huge order ------------------------------------------------------------------------
@pytest.mark.entry("load_cloud")
@pytest.mark.silent
def test_minkowski_order_1000_on_coordinates_near_10_is_finite_or_refused():
    points = RNG.uniform(0, 10, size=(30, 3))
    try:
        cloud = load_cloud(points, metric="minkowski", p=1000)
    except InvalidParameterError as exc:  # a refusal must say why and propose a way out
        assert exc.parameter == "p" and "overflow" in str(exc) and "chebyshev" in str(exc)
        return
    marks = select_landmarks(cloud, 10, rng=0)
    chebyshev = select_landmarks(load_cloud(points, metric="chebyshev"), 10, rng=0)
    assert np.isfinite(marks.coverage_radius)
    assert marks.coverage_radius == pytest.approx(chebyshev.coverage_radius, rel=0.01)
    diagrams = compute_diagrams(cloud)
    assert int(np.isinf(diagrams[0][:, 1]).sum()) == 1


@pytest.mark.entry("load_cloud")
@pytest.mark.silent
def test_minkowski_order_within_range_keeps_close_points_apart():
    # 3 ** 100 ~ 5e47 and 0.01 ** 100 = 1e-200: p = 100 stays in range here; the answer is the norm itself
    points = np.array([[0.0, 0.0], [3.0, 0.0], [0.0, 1e-2], [1.0, 1.0]])
    cloud = load_cloud(points, metric="minkowski", p=100)
    diagrams = compute_diagrams(cloud, max_dim=0)
    deaths = np.sort(diagrams[0][:, 1])
    assert deaths[0] == pytest.approx(1e-2, rel=1e-9)
    assert deaths[1] == pytest.approx((1 + 0.99**100) ** (1 / 100), rel=1e-9)  # (0, 0.01) to (1, 1)


# -- Wasserstein on extreme values ----------------------------------------------------------------------
WASSERSTEIN_A = np.array([[0.0, 1.0], [0.0, 3.0], [0.5, 0.75]])
WASSERSTEIN_B = np.array([[0.0, 2.0], [0.25, 0.5]])


@pytest.mark.entry("diagram_distance")
@pytest.mark.silent
@pytest.mark.parametrize("factor", [1e300, 1e-300, 1e150, 1.0, 1e-150])
@pytest.mark.parametrize("order", [1.0, 2.0, 7.0])
@pytest.mark.parametrize("ground", ["sup", "euclidean"])
def test_wasserstein_scales_with_the_diagrams(factor, order, ground):
    """W_q(s a, s b) = s W_q(a, b) (homogeneity of the norm; common practice)."""
    unit = diagram_distance(WASSERSTEIN_A, WASSERSTEIN_B, kind="wasserstein", order=order, ground=ground)
    scaled = diagram_distance(WASSERSTEIN_A * factor, WASSERSTEIN_B * factor, kind="wasserstein", order=order,
                              ground=ground)
    assert np.isfinite(scaled) and scaled > 0
    assert scaled == pytest.approx(unit * factor, rel=1e-9)


@pytest.mark.entry("diagram_distance")
@pytest.mark.silent
def test_wasserstein_order_1000_on_values_near_10_is_close_to_the_bottleneck():
    a, b = WASSERSTEIN_A * 10, WASSERSTEIN_B * 10
    big = diagram_distance(a, b, kind="wasserstein", order=1000)
    bottleneck = diagram_distance(a, b)
    # W_q lies between the bottleneck distance and n^(1/q) times it (5 points: within 0.17 %)
    assert bottleneck <= big * (1 + 1e-12) and big <= bottleneck * 5 ** (1 / 1000) * (1 + 1e-12)


@pytest.mark.entry("diagram_distance")
@pytest.mark.silent
def test_wasserstein_huge_order_with_essential_classes_is_finite():
    a = np.array([[0.0, np.inf], [0.0, 30.0], [1.0, 2.0]])
    b = np.array([[5.0, np.inf], [0.0, 20.0]])
    value = diagram_distance(a, b, kind="wasserstein", order=500)
    assert np.isfinite(value) and value >= 5.0


# -- angular duplicates ---------------------------------------------------------------------------------
@pytest.mark.entry("load_cloud")
@pytest.mark.silent
def test_sky_longitude_0_and_360_and_the_pole_at_two_longitudes_are_duplicates():
    points = np.array([[0.0, 10.0], [360.0, 10.0], [10.0, 90.0], [250.0, 90.0], [20.0, -90.0], [80.0, -90.0],
                       [30.0, 5.0]])
    with pytest.warns(tdakit.errors.DuplicatePointsWarning):
        cloud = load_cloud(points, metric="angular")
    assert cloud.n_duplicates == 3
    with pytest.raises(InvalidParameterError, match="distinct points, 4"):
        select_landmarks(cloud, 5, method="random")
    marks = select_landmarks(cloud, 4, method="random", rng=0)
    assert marks.coverage_radius < 1e-5


# -- standardize ------------------------------------------------------------------------------------------
@pytest.mark.entry("load_cloud")
@pytest.mark.silent
@pytest.mark.parametrize("magnitude", [1e200, 1e-200, 1e300])
def test_standardize_on_extreme_coordinates_keeps_the_shape(magnitude):
    raw = RNG.normal(size=(50, 2))
    cloud = load_cloud(raw * magnitude + 3 * magnitude, standardize=True)
    expected = (raw - raw.mean(axis=0)) / raw.std(axis=0)
    np.testing.assert_allclose(cloud.points, expected, rtol=1e-9, atol=1e-9)


@pytest.mark.entry("load_cloud")
def test_large_coordinate_error_advice_works_when_followed():
    points = np.array([[0.0, 0.0], [1e200, 0.0], [0.0, 1e200]])
    with pytest.raises(InvalidDataError, match="standardize=True") as info:
        load_cloud(points)
    _names(info, "points")
    assert load_cloud(points, standardize=True).n_points == 3


@pytest.mark.entry("load_cloud")
def test_standardize_with_a_precomputed_matrix_is_refused():
    matrix = np.array([[0.0, 1.0, 2.0], [1.0, 0.0, 1.5], [2.0, 1.5, 0.0]])
    with pytest.raises(InvalidParameterError, match="precomputed") as info:
        load_cloud(matrix, metric="precomputed", standardize=True)
    _names(info, "standardize")


# -- numpy numbers are numbers ------------------------------------------------------------------------
@pytest.mark.entry("Diagrams")
@pytest.mark.parametrize("scale", [np.int64(1), np.float32(0.5), np.uint8(2), np.float64(0.1), 1, 0.3])
def test_betti_at_accepts_numpy_numbers(scale):
    diagrams = compute_diagrams(load_cloud(PLANE))
    assert diagrams.betti_at(scale) == diagrams.betti_at(float(scale))


@pytest.mark.entry("Diagrams")
@pytest.mark.parametrize("scale", ["1", None, True, np.nan, [1.0], 1j])
def test_betti_at_refuses_what_is_not_a_real_number(scale):
    diagrams = compute_diagrams(load_cloud(PLANE))
    with pytest.raises(InvalidParameterError) as info:
        diagrams.betti_at(scale)
    _names(info, "scale")


@pytest.mark.entry("select_landmarks")
def test_numpy_scalars_and_zero_d_arrays_pass_every_shared_check():
    cloud = load_cloud(PLANE)
    marks = select_landmarks(cloud, np.int32(5), rng=np.uint16(3), start=np.int64(2))
    assert marks.n_landmarks == 5
    marks = select_landmarks(cloud, np.array(6), rng=1)
    assert marks.n_landmarks == 6
    diagrams = compute_diagrams(cloud, max_dim=np.int8(1), max_scale=np.float32(2.0))
    assert diagrams.max_dim == 1


# -- permutation test --------------------------------------------------------------------------------------
def _groups():
    rng = np.random.default_rng(3)
    a = [np.column_stack([np.zeros(5), rng.uniform(1, 2, 5)]) for _ in range(6)]
    b = [np.column_stack([np.zeros(5), rng.uniform(3, 4, 5)]) for _ in range(6)]
    return a, b


@pytest.mark.entry("permutation_test")
@pytest.mark.silent
def test_permutation_test_reads_groups_given_as_generators_once():
    a, b = _groups()
    listed = permutation_test(a, b, n_permutations=300, rng=5)
    generated = permutation_test((x for x in a), (x for x in b), n_permutations=300, rng=5)
    assert generated.p_value == listed.p_value < 0.01


@pytest.mark.entry("permutation_test")
@pytest.mark.silent
@given(seed=st.integers(0, 2**32))
def test_permutation_test_same_p_for_an_int_seed_and_its_generator(seed):
    a, b = _groups()
    a, b = a[:3] + b[3:4], b[:3] + a[3:4]  # mixed groups: p is not at its floor
    by_int = permutation_test(a, b, n_permutations=40, rng=seed)
    by_generator = permutation_test(a, b, n_permutations=40, rng=np.random.default_rng(seed))
    assert by_int.p_value == by_generator.p_value
    np.testing.assert_array_equal(by_int.null, by_generator.null)


@pytest.mark.entry("permutation_test")
@pytest.mark.silent
def test_permutation_test_consumes_a_generator_once():
    a, b = _groups()
    generator = np.random.default_rng(11)
    permutation_test(a, b, n_permutations=25, rng=generator)
    after_one = generator.integers(2**62)
    fresh = np.random.default_rng(11)
    permutation_test(a, b, n_permutations=25, rng=fresh)
    assert fresh.integers(2**62) == after_one


@pytest.mark.entry("permutation_test")
@pytest.mark.hang
@pytest.mark.parametrize("count", [10**9, 10**7 + 1])
def test_permutation_test_refuses_a_huge_number_of_labelings_up_front(count):
    a, b = _groups()
    with pytest.raises(InvalidParameterError, match="at most") as info:
        permutation_test(a, b, n_permutations=count, rng=0)
    _names(info, "n_permutations")
    assert "hour" in str(info.value) or "minute" in str(info.value) or " s " in str(info.value)


# -- density band -------------------------------------------------------------------------------------------
@pytest.mark.entry("confidence_band")
@pytest.mark.silent
@pytest.mark.parametrize("bandwidth", [1e6, 1e12])
def test_density_band_refuses_a_bandwidth_that_smooths_the_cloud_into_one_blob(bandwidth):
    cloud = load_cloud(PLANE)
    with pytest.raises(InvalidParameterError, match="wider than") as info:
        tdakit.confidence_band(cloud, method="density", bandwidth=bandwidth, n_boot=5, rng=0)
    _names(info, "bandwidth")


@pytest.mark.entry("confidence_band")
@pytest.mark.hang
def test_density_band_refuses_a_bandwidth_wider_than_the_periodic_box():
    cloud = load_cloud(np.abs(PLANE) % 4, metric="periodic", box=4.0)
    with pytest.raises(InvalidParameterError) as info:
        tdakit.confidence_band(cloud, method="density", bandwidth=1e6, n_boot=5, rng=0)
    _names(info, "bandwidth")


# -- masked arrays -------------------------------------------------------------------------------------------
@pytest.mark.entry("load_cloud")
@pytest.mark.silent
def test_masked_entries_are_refused_with_their_position():
    data = np.ma.masked_array(PLANE.copy(), mask=np.zeros(PLANE.shape, dtype=bool))
    data[7, 1] = np.ma.masked
    with pytest.raises(InvalidDataError, match="row 7") as info:
        load_cloud(data)
    assert info.value.parameter in ("source", "points") and "masked" in str(info.value)
    with pytest.raises(InvalidDataError, match="row 7") as info:  # the core's own check, under every reader
        make_cloud(data, make_metric("euclidean"))
    assert info.value.parameter == "points" and "masked" in str(info.value)
    with pytest.raises(InvalidDataError, match="masked"):
        as_point_array(np.ma.masked_invalid(np.array([[0.0, 1.0], [np.nan, 2.0]])))


@pytest.mark.entry("load_cloud")
def test_a_masked_array_without_masked_entries_is_read_as_its_data():
    data = np.ma.masked_array(PLANE.copy(), mask=False)
    np.testing.assert_array_equal(load_cloud(data).points, PLANE)


# -- strong witness time guard -----------------------------------------------------------------------------------
@pytest.mark.entry("compute_diagrams")
@pytest.mark.hang
def test_strong_witness_complex_too_slow_is_refused_up_front_with_an_estimate():
    cloud = load_cloud(RNG.normal(size=(200, 3)))
    marks = select_landmarks(cloud, 25, rng=0)
    with pytest.raises(MemoryBudgetError, match="strong witness") as info:
        compute_diagrams(cloud, landmarks=marks, filtration="witness", witness="strong", max_dim=1)
    assert info.value.parameter in ("landmarks", "max_scale", "witness")
    assert " s " in str(info.value) or "hour" in str(info.value) or "minute" in str(info.value)


@pytest.mark.entry("compute_diagrams")
def test_small_strong_witness_complex_still_runs():
    cloud = load_cloud(RNG.normal(size=(200, 2)))
    marks = select_landmarks(cloud, 8, rng=0)
    diagrams = compute_diagrams(cloud, landmarks=marks, filtration="witness", witness="strong", max_dim=1)
    assert diagrams.filtration == "witness" and len(diagrams[0]) >= 1



# -- pre-flight before any n x n allocation ---------------------------------------------------------------------
@pytest.mark.entry("compute_diagrams")
@pytest.mark.parametrize(("filtration", "cap"), [("rips", 1.5), ("rips", None), ("dtm", 3.0)])
def test_preflight_refuses_before_allocating_the_landmark_matrix_and_proposes_settings(filtration, cap):
    import tracemalloc

    n = 4000
    cloud = load_cloud(np.random.default_rng(5).normal(size=(n, 3)))
    tracemalloc.start()
    try:
        with pytest.raises(MemoryBudgetError) as info:
            compute_diagrams(cloud, filtration=filtration, max_dim=2, max_scale=cap, memory_budget=4e8)
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 8 * n * n / 2, f"the refusal allocated {peak / 1e6:.0f} MB, an n x n matrix is {8 * n * n / 1e6:.0f}"
    assert "max_scale=" in str(info.value) or "n_landmarks=" in str(info.value)


@pytest.mark.entry("compute_diagrams")
def test_dense_matrix_refusal_names_a_landmark_count_that_fits():
    cloud = load_cloud(np.random.default_rng(6).normal(size=(3000, 2)))
    with pytest.raises(MemoryBudgetError, match=r"n_landmarks=\d+") as info:
        compute_diagrams(cloud, memory_budget=1e8)
    assert info.value.parameter in ("landmarks", "memory_budget")
    fits = int(re.search(r"n_landmarks=(\d+)", str(info.value)).group(1))
    assert 16 * fits**2 <= 1e8 < 16 * 3000**2


@pytest.mark.entry("diagram_distance")
@pytest.mark.parametrize("kind", ["wasserstein", "bottleneck"])
def test_huge_tied_diagrams_are_refused_before_listing_their_pairs(kind):
    import tracemalloc

    a = np.column_stack((np.zeros(17_000), np.repeat([1.0, 2.0], [8_500, 8_500])))
    b = np.column_stack((np.zeros(17_000), np.repeat([1.0, 2.0], [8_400, 8_600])))
    tracemalloc.start()
    try:
        try:
            value = diagram_distance(a, b, kind=kind)
        except MemoryBudgetError as exc:  # refused: before listing anything, naming the diagram and its size
            assert exc.parameter == "a" and "17000" in str(exc)
            value = None
        peak = tracemalloc.get_traced_memory()[1]
    finally:
        tracemalloc.stop()
    assert peak < 5e8, f"{peak / 1e9:.2f} GB allocated"
    if kind == "wasserstein":
        assert value is None  # 17,001 x 17,001 cells exceed the dense limit: refused, not attempted
    else:  # refused, or by hand: 100 classes of death 2 in b have no equal in a; each is 1.0 from anything
        assert value in (None, 1.0)


@pytest.mark.entry("compute_diagrams")
def test_lazy_witness_preflight_counts_the_matrices_it_allocates():
    cloud = load_cloud(np.random.default_rng(9).normal(size=(6000, 3)))
    marks = select_landmarks(cloud, 3000, rng=0)
    # 3,000 landmarks: 10 bytes per cell (the old count, 9e7) passed this budget; the edges take 16+ per cell
    with pytest.raises(MemoryBudgetError) as info:
        compute_diagrams(cloud, landmarks=marks, filtration="witness", max_scale=0.2, memory_budget=1.2e8)
    assert info.value.parameter == "landmarks" and "n_landmarks=" in str(info.value)
