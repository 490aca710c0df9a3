"""Universal-law p-values: the formula by hand, Holm and Bonferroni, refusals, calibration and power."""

import math

import numpy as np
import pytest
from hypothesis import assume, given
from hypothesis import strategies as st
from scipy.stats import binom

import tdakit
from tdakit import shapes
from tdakit.core.inference.universal import (
    MIN_BARS,
    UniversalPValues,
    adjust_pvalues,
    universal_pvalue_support,
    universal_pvalues,
)
from tdakit.errors import InvalidDataError, InvalidParameterError

GAMMA = 0.5772156649015329  # Euler-Mascheroni constant (common practice: any table of constants)
# pi = death / birth chosen as exp(exp(t)) so that log log pi = t exactly (up to rounding).
T_VALUES = np.array([1.0, 0.0, -1.0, -2.0])
BIRTHS = np.array([0.5, 1.0, 2.0, 0.25])


def make_diagrams(h1, *, filtration="rips", method="all points", cutoff=None, max_scale=np.inf, **params):
    """Hand-made Diagrams with one H0 class and the given H1 pairs."""
    h1 = np.asarray(h1, dtype=float).reshape(-1, 2)
    pairs = (np.array([[0.0, np.inf]]), h1)
    flags = (np.zeros(1, bool), np.zeros(len(h1), bool) if cutoff is None else np.asarray(cutoff, bool))
    births = (np.zeros((1, 1), np.intp), np.zeros((len(h1), 2), np.intp))
    deaths = (np.full((1, 2), -1, np.intp), np.zeros((len(h1), 3), np.intp))
    info = {"metric": {"name": "euclidean", "p": 2.0, "box": None}, "sparse": None}
    if method is not None:
        info["landmark_method"] = method
    info.update(params)
    return tdakit.Diagrams(pairs, flags, births, deaths, filtration=filtration, max_scale=max_scale, params=info)


def known_h1():
    """Four testable bars with log log pi = T_VALUES, then birth 0 and an essential class (both untested)."""
    tested = np.column_stack((BIRTHS, BIRTHS * np.exp(np.exp(T_VALUES))))
    return np.vstack((tested, [[0.0, 1.0], [1.0, np.inf]]))


# ---------------------------------------------------------------- the formula, by hand


@pytest.mark.parametrize("filtration, slope", [("rips", 1.0), ("alpha", 0.5)])
def test_known_answer_by_hand(filtration, slope):
    # Bobrowski & Skraba, Sci. Rep. 13:12274 (2023), the normalization and the p-value of its testing section
    # (equation numbers not re-read): l = A log log pi + B, B = -gamma - A mean(log log pi), p = exp(-exp(l))
    # (left-skewed Gumbel); A = 1 Rips, A = 1/2 Cech/alpha (from memory; fitted A measured 0.95-1.05 for Rips and
    # 0.50-0.54 for alpha, module docstring). Here mean(log log pi) = -0.5.
    result = universal_pvalues(make_diagrams(known_h1(), filtration=filtration), 1)
    intercept = -GAMMA - slope * (-0.5)
    expected_l = [slope * t + intercept for t in T_VALUES]
    expected_p = [math.exp(-math.exp(v)) for v in expected_l]
    assert result.slope == slope and result.n_tested == 4
    assert result.intercept == pytest.approx(intercept, abs=1e-12)
    np.testing.assert_allclose(result.statistic[:4], expected_l, rtol=0, atol=1e-12)
    np.testing.assert_allclose(result.p_value[:4], expected_p, rtol=1e-12)
    assert np.isnan(result.p_value[4:]).all() and np.isnan(result.p_adjusted[4:]).all()
    # Holm over the 4 tested bars, by hand (Holm 1979): sorted p times 4, 3, 2, 1, running maximum, cap 1.
    order = np.argsort(expected_p)
    steps = np.minimum(1.0, np.array(expected_p)[order] * [4, 3, 2, 1])
    holm = np.empty(4)
    holm[order] = np.maximum.accumulate(steps)
    np.testing.assert_allclose(result.p_adjusted[:4], holm, rtol=1e-12)
    assert result.adjust == "holm" and result.supported and "2 bar(s) untested" in result.note


def test_statistic_has_the_gumbel_mean_by_construction():
    # B is chosen so that mean(l) = -gamma, the left-skewed Gumbel's mean (Bobrowski & Skraba 2023).
    result = universal_pvalues(make_diagrams(known_h1()), 1)
    assert np.nanmean(result.statistic) == pytest.approx(-GAMMA, abs=1e-12)


def test_bonferroni_by_hand():
    # Bonferroni: min(1, m p) with m = 4 tested bars (common practice).
    result = universal_pvalues(make_diagrams(known_h1()), 1, adjust="bonferroni")
    np.testing.assert_allclose(result.p_adjusted[:4], np.minimum(1.0, 4 * result.p_value[:4]), rtol=1e-12)


def test_too_few_bars_give_nan_and_say_why():
    # B is a mean over the diagram's bars: fewer than MIN_BARS = 3 give no estimate (module's rule).
    result = universal_pvalues(make_diagrams(known_h1()[2:]), 1)
    assert result.n_tested == 0 and np.isnan(result.p_value).all() and np.isnan(result.intercept)
    assert f"at least {MIN_BARS}" in result.note


def test_significant_mask():
    result = universal_pvalues(make_diagrams(known_h1()), 1)
    assert np.array_equal(result.significant(0.5), np.nan_to_num(result.p_adjusted, nan=1.0) < 0.5)
    with pytest.raises(InvalidParameterError, match="'level'"):
        result.significant(1.5)


# ---------------------------------------------------------------- Holm and Bonferroni


def test_holm_and_bonferroni_by_hand():
    # Holm (1979): sorted 0.005, 0.01, 0.03, 0.04 times 4, 3, 2, 1 = 0.02, 0.03, 0.06, 0.04 -> running max.
    p = [0.01, 0.04, 0.03, 0.005]
    np.testing.assert_allclose(adjust_pvalues(p), [0.03, 0.06, 0.06, 0.02], rtol=1e-12)
    np.testing.assert_allclose(adjust_pvalues(p, method="bonferroni"), [0.04, 0.16, 0.12, 0.02], rtol=1e-12)
    # NaN entries are not tests: m counts the others (here m = 2).
    np.testing.assert_allclose(adjust_pvalues([0.01, np.nan, 0.04]), [0.02, np.nan, 0.04], rtol=1e-12)
    assert adjust_pvalues([]).shape == (0,)


def holm_rejections(p, level):
    """Holm's sequentially rejective test as defined (Holm 1979): reject while p_(i) <= level / (m - i + 1)."""
    order = np.argsort(p, kind="stable")
    reject = np.zeros(len(p), bool)
    for i, index in enumerate(order):
        if p[index] > level / (len(p) - i):
            break
        reject[index] = True
    return reject


p_lists = st.lists(st.floats(0.0, 1.0, allow_nan=False), min_size=1, max_size=40)


@given(p_lists)
def test_holm_is_between_raw_and_bonferroni_monotone_and_capped(p):
    # Properties of both adjustments (Holm 1979; common practice).
    p = np.array(p)
    holm, bonferroni = adjust_pvalues(p), adjust_pvalues(p, method="bonferroni")
    assert np.all(p <= holm + 1e-15) and np.all(holm <= bonferroni + 1e-15)
    assert np.all(holm <= 1.0) and np.all(bonferroni <= 1.0)
    order = np.argsort(p, kind="stable")
    assert np.all(np.diff(holm[order]) >= 0) and np.all(np.diff(bonferroni[order]) >= 0)
    assert holm[order[0]] == pytest.approx(min(1.0, len(p) * p[order[0]]))  # smallest: same as Bonferroni


@given(p_lists, st.sampled_from([0.01, 0.05, 0.1, 0.2]))
def test_holm_adjusted_values_reproduce_the_sequential_test(p, level):
    # Two routes that agree by Holm's definition: adjusted p <= level  <=>  rejected by the step-down test.
    # (statsmodels is not installed here, so the reference is this hand-written definition.)
    p = np.array(p)
    thresholds = level / (len(p) - np.arange(len(p)))
    assume(np.min(np.abs(np.sort(p)[:, None] - thresholds[None, :])) > 1e-12)  # no float ties at a boundary
    assert np.array_equal(adjust_pvalues(p) <= level, holm_rejections(p, level))


bar = st.tuples(st.sampled_from([0.0, 5e-324, 1e-300, 0.1, 1.0, 2.5]),
                st.sampled_from([0.0, 0.1, 1.0, 1.0000000000000002, 1.5, 10.0, 1e300, np.inf]))


@given(st.lists(bar, max_size=12), st.sampled_from(["rips", "alpha"]), st.sampled_from(["holm", "bonferroni"]))
def test_never_crashes_on_odd_bars(bars, filtration, adjust):
    # Zero and subnormal births, zero-length bars, bars one float long, infinite deaths, duplicates: NaN or a
    # probability, never a warning (pyproject turns tdakit's RuntimeWarnings into errors).
    pairs = np.array(bars, dtype=float).reshape(-1, 2)
    pairs[:, 1] = np.maximum(pairs[:, 0], pairs[:, 1])
    result = universal_pvalues(make_diagrams(pairs, filtration=filtration), 1, adjust=adjust)
    for values in (result.p_value, result.p_adjusted):
        assert values.shape == (len(pairs),)
        assert np.all(np.isnan(values) | ((values >= 0) & (values <= 1)))
    assert np.array_equal(np.isnan(result.p_value), np.isnan(result.p_adjusted))
    assert result.n_tested == int(np.isfinite(result.p_value).sum())


# ---------------------------------------------------------------- support and refusals


def test_refuses_density_landmarks_with_the_measured_reason():
    # Measured 6/100 runs with a false H2 feature on clumped noise (module docstring): above 5 %, refused.
    cloud = tdakit.load_cloud(np.random.default_rng(0).uniform(size=(400, 3)))
    marks = tdakit.select_landmarks(cloud, 60, method="density", rng=0)
    diagrams = tdakit.compute_diagrams(cloud, landmarks=marks, filtration="rips", max_dim=1)
    supported, reason = universal_pvalue_support(diagrams)
    assert not supported and "density" in reason and "measured" in reason
    with pytest.raises(InvalidDataError, match="density") as caught:
        universal_pvalues(diagrams, 1)
    assert caught.value.parameter == "diagrams"
    result = universal_pvalues(diagrams, 1, allow_unsupported=True)
    assert not result.supported and "NOT supported" in result.note and result.n_tested > 0


def test_maxmin_is_offered_as_conservative():
    # Measured 0/200 false-feature runs on uniform noise, fitted slope 1.08-1.28 > 1 (module docstring).
    supported, reason = universal_pvalue_support(make_diagrams(known_h1(), method="maxmin"))
    assert supported and "conservative" in reason and "not an iid sample" in reason


def test_dimensions_above_two_were_not_measured():
    pairs = tuple(np.array([[0.0, np.inf]]) if k == 0 else known_h1() for k in range(4))
    flags = tuple(np.zeros(len(p), bool) for p in pairs)
    vertices = tuple(np.zeros((len(p), 1), np.intp) for p in pairs)
    diagrams = tdakit.Diagrams(pairs, flags, vertices, vertices, params={"landmark_method": "random"})
    assert universal_pvalue_support(diagrams, dim=2)[0]
    supported, reason = universal_pvalue_support(diagrams, dim=3)
    assert not supported and "H3" in reason
    with pytest.raises(InvalidDataError, match="H3"):
        universal_pvalues(diagrams, 3)


@pytest.mark.parametrize("changes, words", [
    ({"filtration": "witness"}, "witness"),
    ({"filtration": "dtm"}, "dtm"),
    ({"method": "density"}, "density"),
    ({"filtration": "alpha", "method": "maxmin"}, "not measured"),
    ({"method": None}, "landmark_method"),
    ({"sparse": 0.3}, "sparse"),
    ({"metric": {"name": "angular", "p": 2.0, "box": None}}, "angular"),
    ({"cutoff": [False, False, False, False, False, True], "max_scale": 3.0}, "cap"),
])
def test_unsupported_settings_are_refused(changes, words):
    diagrams = make_diagrams(known_h1(), **changes)
    supported, reason = universal_pvalue_support(diagrams)
    assert not supported and words in reason
    with pytest.raises(InvalidDataError, match="not offered"):
        universal_pvalues(diagrams, 1)


@pytest.mark.parametrize("filtration, method", [("rips", "all points"), ("rips", "random"), ("rips", "maxmin"),
                                                ("rips", "core_maxmin"), ("alpha", "all points"),
                                                ("alpha", "random")])
def test_supported_settings(filtration, method):
    # Measured family-wise false-feature rate <= 5 % in every null cloud tried (module docstring).
    supported, reason = universal_pvalue_support(make_diagrams(known_h1(), filtration=filtration, method=method))
    assert supported and "measured" in reason


# ---------------------------------------------------------------- input checks


@pytest.mark.parametrize("call, parameter", [
    (lambda d: universal_pvalues(d[1], 1), "diagrams"),
    (lambda d: universal_pvalues(d, 0), "dim"),
    (lambda d: universal_pvalues(d, 2), "dim"),
    (lambda d: universal_pvalues(d, 1.0), "dim"),
    (lambda d: universal_pvalues(d, 1, adjust="fdr"), "adjust"),
    (lambda d: universal_pvalues(d, 1, allow_unsupported="yes"), "allow_unsupported"),
    (lambda d: universal_pvalue_support(d[1]), "diagrams"),
    (lambda d: universal_pvalue_support(d, dim=5), "dim"),
    (lambda d: adjust_pvalues([[0.1, 0.2]]), "p_values"),
    (lambda d: adjust_pvalues([0.1, 1.2]), "p_values"),
    (lambda d: adjust_pvalues([-0.1]), "p_values"),
    (lambda d: adjust_pvalues(["a"]), "p_values"),
    (lambda d: adjust_pvalues([0.1], method="sidak"), "method"),
])
def test_bad_inputs_name_the_parameter(call, parameter):
    with pytest.raises(InvalidParameterError, match=f"'{parameter}' parameter") as caught:
        call(make_diagrams(known_h1()))
    assert caught.value.parameter == parameter and "Got" in str(caught.value)


def test_options_are_keyword_only():
    with pytest.raises(TypeError):
        universal_pvalues(make_diagrams(known_h1()), 1, "bonferroni")


# ---------------------------------------------------------------- calibration and power (Monte Carlo)


def test_false_feature_rate_on_uniform_noise_with_random_landmarks():
    # Null: 1,000 uniform points in the unit cube, 150 random landmarks (an iid sample), Rips H1, 40 seeds.
    # Family-wise level 0.05 -> at most binom.ppf(0.999, 40, 0.05) = 7 runs with a false feature (binomial
    # bound); measured 0/40 here and 0/200 at 300 landmarks (module docstring).
    runs, false_runs, p_all, l_all = 40, 0, [], []
    for seed in range(runs):
        cloud = tdakit.load_cloud(np.random.default_rng(seed).uniform(size=(1000, 3)))
        marks = tdakit.select_landmarks(cloud, 150, method="random", rng=seed)
        result = universal_pvalues(tdakit.compute_diagrams(cloud, landmarks=marks, max_dim=1), 1)
        false_runs += bool(result.significant(0.05).any())
        p_all.extend(result.p_value[np.isfinite(result.p_value)])
        l_all.extend(result.statistic[np.isfinite(result.statistic)])
    assert false_runs <= binom.ppf(0.999, runs, 0.05)
    # The law itself (Bobrowski & Skraba 2023): per-bar p uniform (mean 1/2; measured 0.501 over 2,260 bars) and
    # l with the left-skewed Gumbel's variance pi^2/6 = 1.645 (measured 1.46; a slope A = 1/2 would give ~0.37).
    assert np.mean(p_all) == pytest.approx(0.5, abs=0.05)
    assert 0.75 * np.pi**2 / 6 < np.var(l_all) < 1.25 * np.pi**2 / 6


def test_power_on_a_noisy_circle():
    # Unit circle, 3,000 points, noise s.d. 0.05, 150 random landmarks: exactly one H1 bar below 0.05 after
    # Holm in every one of 10 seeds (measured 10/10; 100/100 at 300 landmarks, module docstring).
    hits = 0
    for seed in range(10):
        cloud = tdakit.load_cloud(shapes.circle(3000, noise=0.05, rng=seed))
        marks = tdakit.select_landmarks(cloud, 150, method="random", rng=seed)
        result = universal_pvalues(tdakit.compute_diagrams(cloud, landmarks=marks, max_dim=1), 1)
        assert isinstance(result, UniversalPValues)
        hits += int(result.significant(0.05).sum()) == 1
    assert hits >= 9


def test_feature_table_carries_the_p_values_where_offered_and_says_why_not_elsewhere():
    # Contract columns p_value / p_adjusted: Holm-adjusted universal-law p-values (Bobrowski & Skraba 2023) where
    # tdakit measured them calibrated (Rips on maxmin landmarks: conservative), NaN and a stated reason elsewhere.
    cloud = tdakit.load_cloud(shapes.circle(3000, noise=0.05, rng=1))
    marks = tdakit.select_landmarks(cloud, 200, rng=1)
    rips = tdakit.significance_table(tdakit.compute_diagrams(cloud, landmarks=marks, filtration="rips"))
    loops = rips[rips.dimension == 1]
    assert (loops.p_adjusted < 0.05).sum() == 1 and loops.p_adjusted.iloc[0] < 0.05  # the planted loop alone
    assert rips.loc[rips.dimension == 0, "p_value"].isna().all()
    dtm = tdakit.significance_table(tdakit.compute_diagrams(cloud, landmarks=marks, filtration="dtm"))
    assert dtm[["p_value", "p_adjusted"]].isna().all().all() and "dtm" in dtm.attrs["p_values"]
