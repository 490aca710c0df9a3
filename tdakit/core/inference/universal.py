"""Per-feature p-values from the universal null law of persistence ratios (Bobrowski and Skraba 2023).

For the finite bars of one homology dimension k >= 1 of one diagram, with pi = death / birth,

    l = A log log pi + B,    B = -gamma - A mean(log log pi)    (mean over the diagram's bars),

follows under the null (an iid sample, no topology of that dimension) the left-skewed Gumbel law,
P(l' >= l) = exp(-exp(l)), so a bar's p-value is exp(-exp(l)); gamma is the Euler-Mascheroni
constant; A = 1 for Rips and 1/2 for Cech (alpha) filtrations. The p-values of one dimension are then
adjusted for their number (Holm or Bonferroni).

The law is an empirical finding for iid samples. tdakit offers it only where its own measurement
showed a family-wise false-feature rate of at most 5 % at alpha = 0.05 in every null cloud and
dimension tried (``universal_pvalue_support``).

Calibration [measured] (tdakit 0.1.0, gudhi 3.13; 300 landmarks unless 'all points'; H1 and H2;
Holm within each dimension). Entries: runs with any bar at p_adjusted < 0.05 / runs, H1 then H2.
Null clouds: cube = uniform in [0, 1]^3, 2,000-5,000 points; gauss = N(0, I_3), 3,000 points;
sphere = uniform on S^2, 3,000 points (H1 only); clumps = 3,000 points in 30 Gaussian clumps
(s.d. 0.03, uniform centres in the unit cube). Power: unit circle, 3,000 points, noise s.d. 0.05,
runs with exactly one H1 bar at p_adjusted < 0.05.

==========================  =============  ============  ======  ============  =======  =========
filtration, vertices        cube           gauss         sphere  clumps        power    offered
==========================  =============  ============  ======  ============  =======  =========
rips, random                0/200, 3/200   0/100, 2/100  0/100   3/100, 2/100  100/100  yes
rips, all points (a)        0/100, 1/100                                                 yes
rips, maxmin                0/200, 0/200   0/100, 0/100  0/100   0/100, 3/100  100/100  yes (b)
rips, core_maxmin           0/200, 0/200   0/100, 0/100  0/100   1/100, 3/100  100/100  yes (b)
rips, density               0/200, 8/200   0/100, 4/100  0/100   4/100, 6/100  100/100  no
alpha, all points           0/200, 0/200   0/100, 0/100  0/100   0/100, 0/100  0/100    yes (c)
alpha, random               0/200, 0/200   0/100, 0/100  0/100   0/100, 2/100  21/100   yes (c)
dtm (k=10), random          0/200, 8/200   0/100, 6/100  0/100   38/100, 5/100 100/100  no
dtm (k=10), maxmin          0/200, 0/200   0/100, 0/100  0/100   21/100, 8/100 100/100  no
==========================  =============  ============  ======  ============  =======  =========

(a) 400 uniform points in the unit cube, every point a vertex.
(b) Maxmin landmarks are not an iid sample and do not follow the law: the fitted slope
    A = sqrt(pi^2/6 / var(log log pi)) is 1.08-1.28 instead of 1 (ratios less spread), so the test is
    conservative there; also 0/60 with 100 and with 1,000 maxmin landmarks of 3,000 uniform points.
(c) Valid but weak on a noisy loop: alpha diagrams hold many more bars than Rips on the same vertices
    (about 2,700 on all 3,000 circle points, 180 on 300 landmarks, against 34 for Rips) and A = 1/2
    halves the statistic, so the loop rarely clears Holm's threshold.
DTM rows: DTM-weighted Rips (tdakit's weights over the whole cloud, k = 10, p = 1, gudhi's doubled scale), A = 1.

Power needs noise bars: B is the mean over the diagram's own bars, so when few bars exist the loop
itself enters the mean and lowers B. Noisy circle (noise s.d. 0.05), random landmarks, runs with exactly one H1 bar at
p_adjusted < 0.05: 50 landmarks 4/30, 100 landmarks 20/30 (1,000 points; 0.4 and 3.8 testable bars on
average), 150 and 200 landmarks 30/30 (3,000 points) [measured].

Fitted slopes on iid vertices [measured]: Rips 0.95-1.05 (paper: 1), alpha 0.50-0.54 (paper: 1/2).
Witness complexes, sparse Rips, non-Euclidean metrics, capped filtrations with classes alive at the cap
and dimensions above 2 were not measured and are not offered.

References
----------
.. [1] O. Bobrowski, P. Skraba, "A universal null-distribution for topological data analysis",
   Sci. Rep. 13, 12274 (2023).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from numpy.typing import ArrayLike, NDArray

from tdakit._validation import check_bool, check_choice, check_float, check_int, fail
from tdakit.core.topology.diagrams import Diagrams
from tdakit.errors import InvalidDataError

__all__ = ["UniversalPValues", "universal_pvalues", "universal_pvalue_support", "adjust_pvalues",
           "ADJUSTMENTS", "MEASURED_SETTINGS", "MIN_BARS", "UNIVERSAL_SLOPES"]

ADJUSTMENTS = ("bonferroni", "holm")
# A of the normalization per filtration, from memory of [1] (the paper's body could not be retrieved to re-read):
# A = 1 for Rips (flag) filtrations and A = 1/2 for Cech; alpha gives Cech's diagram (same nerve, radius units).
# Checked by measurement: under the null var(l) must be pi^2/6 (left-skewed Gumbel), and the fitted
# A = sqrt(pi^2/6 / var(log log pi)) was 0.95-1.05 for Rips and 0.50-0.54 for alpha on iid vertices [measured].
UNIVERSAL_SLOPES = {"alpha": 0.5, "rips": 1.0}
# B is the mean over the diagram's own bars: too few bars give no estimate.
MIN_BARS = 3
# Highest homology dimension whose calibration was measured.
MAX_MEASURED_DIM = 2
SUPPORTED_METRICS = ("euclidean",)
# (filtration, landmark method) -> (offered, evidence). Numbers: runs with a false feature / runs, family-wise
# per dimension (Holm, alpha = 0.05), 300 landmarks; see the module docstring for the clouds [measured].
MEASURED_SETTINGS = {
    ("rips", "random"): (True, "random landmarks are an iid sample; measured false-feature rate at most 3 % "
                               "per dimension on uniform, Gaussian, spherical and clumped noise (3/200, 3/100), "
                               "power 100/100 on a noisy circle [measured]."),
    ("rips", "all points"): (True, "every point a vertex (an iid sample if the cloud is one); measured "
                                   "false-feature rate 0/100 (H1), 1/100 (H2) on 400 uniform points [measured]."),
    ("rips", "maxmin"): (True, "maxmin landmarks are not an iid sample and do not follow the law (fitted slope "
                               "1.08-1.28 instead of 1), but the test was conservative there: measured "
                               "false-feature rate 0/200 on uniform noise and at most 3/100 on Gaussian, "
                               "spherical and clumped noise, power 100/100 on a noisy circle; read the "
                               "p-values as upper bounds [measured]."),
    ("rips", "core_maxmin"): (True, "density-filtered maxmin landmarks are not an iid sample, but the test was "
                                    "conservative: measured false-feature rate 0/200 on uniform noise and at "
                                    "most 3/100 on Gaussian, spherical and clumped noise, power 100/100 on a "
                                    "noisy circle [measured]."),
    ("rips", "density"): (False, "density-weighted landmarks are not an iid sample of the cloud: measured "
                                 "false-feature rate 6/100 (H2) on clumped noise, 8/200 on uniform noise, above "
                                 "the 5 % allowed. Use 'random' or 'maxmin' landmarks [measured]."),
    ("alpha", "all points"): (True, "measured false-feature rate 0 in 700 null runs (H1 and H2), but low power: "
                                    "0/100 on a noisy circle (thousands of bars, A = 1/2); prefer Rips on "
                                    "landmarks to find loops [measured]."),
    ("alpha", "random"): (True, "random landmarks are an iid sample; measured false-feature rate at most 2/100 "
                                "per dimension, but low power: 21/100 on a noisy circle; prefer Rips on "
                                "landmarks [measured]."),
}
FILTRATION_REFUSALS = {
    "dtm": "the law is stated for Rips and Cech filtrations; on DTM-Rips the measured false-feature rate was "
           "38/100 (random landmarks) and 21/100 (maxmin) in H1 on clumped noise [measured].",
    "witness": "the law is stated for Rips and Cech filtrations; witness complexes were not measured and have no "
               "known slope A.",
}
_FN = "universal_pvalues"


@dataclass(frozen=True, eq=False)
class UniversalPValues:
    """Per-bar p-values of one homology dimension under the universal null law.

    Attributes
    ----------
    p_value : ndarray of shape (n_bars,)
        exp(-exp(l)) per bar, aligned with the rows of ``diagrams[dim]``; NaN for bars not
        tested (birth <= 0, death infinite or alive at the cap, death <= birth) and for all bars
        when fewer than ``MIN_BARS`` could be tested.
    p_adjusted : ndarray of shape (n_bars,)
        ``p_value`` adjusted for the ``n_tested`` bars of this dimension (``adjust``); NaN where
        ``p_value`` is NaN.
    statistic : ndarray of shape (n_bars,)
        l = A log log(death / birth) + B per bar (NaN where untested).
    dim : int
        The homology dimension.
    n_tested : int
        Number of bars with a p-value.
    slope : float
        A of the normalization (1 for Rips, 1/2 for alpha).
    intercept : float
        B = -gamma - A mean(log log pi) over the tested bars (NaN when too few).
    adjust : str
        ``"holm"`` or ``"bonferroni"``.
    supported : bool
        Whether tdakit's calibration measurement covers these diagrams.
    note : str
        Why bars were left out, and the support verdict.
    """

    p_value: NDArray[np.float64]
    p_adjusted: NDArray[np.float64]
    statistic: NDArray[np.float64]
    dim: int
    n_tested: int
    slope: float
    intercept: float
    adjust: str
    supported: bool
    note: str

    def significant(self, level: float = 0.05) -> NDArray[np.bool_]:
        """Mask of bars whose adjusted p-value is below ``level`` (False where untested)."""
        level = check_float(level, "level", "UniversalPValues.significant", low=0.0, high=1.0, low_open=True,
                            high_open=True)
        return np.nan_to_num(self.p_adjusted, nan=1.0) < level


def universal_pvalue_support(diagrams: Diagrams, *, dim: int | None = None) -> tuple[bool, str]:
    """Whether tdakit offers universal-law p-values for these diagrams, and why or why not.

    Parameters
    ----------
    diagrams : Diagrams
        Diagrams from :func:`tdakit.compute_diagrams`.
    dim : int, optional
        Also check this homology dimension (calibration was measured for H1 and H2).

    Returns
    -------
    supported : bool
        True only for the settings whose family-wise false-feature rate tdakit measured at
        <= 5 % for alpha = 0.05 in every null cloud tried (table in the module docstring).
    reason : str
        The measured evidence, or what rules the setting out and what to do instead.

    Raises
    ------
    InvalidParameterError
        ``diagrams`` is not a Diagrams.

    See Also
    --------
    universal_pvalues
    """
    function = "universal_pvalue_support"
    if not isinstance(diagrams, Diagrams):
        raise fail("diagrams", function, "a Diagrams from tdakit.compute_diagrams", diagrams)
    if dim is not None:
        dim = _check_dim(dim, diagrams, function)
    return _support(diagrams, dim)


def universal_pvalues(
    diagrams: Diagrams, dim: int, *, adjust: str = "holm", allow_unsupported: bool = False
) -> UniversalPValues:
    r"""Per-bar p-values of one homology dimension under the universal null law.

    Parameters
    ----------
    diagrams : Diagrams
        Diagrams from :func:`tdakit.compute_diagrams`.
    dim : int
        Homology dimension, at least 1 (H0 bars of these filtrations are born at 0).
    adjust : {"holm", "bonferroni"}, default="holm"
        Family-wise adjustment over the tested bars of this dimension. Holm's step-down
        adjustment is uniformly at least as powerful as Bonferroni's, with the same guarantee.
    allow_unsupported : bool, default=False
        Compute even where :func:`universal_pvalue_support` says no (for calibration studies);
        the result then says so in ``supported`` and ``note``.

    Returns
    -------
    UniversalPValues
        ``p_value`` and ``p_adjusted`` aligned with the rows of ``diagrams[dim]``.

    Raises
    ------
    InvalidParameterError
        A parameter has the wrong type or value.
    InvalidDataError
        The diagrams' setting is not supported and ``allow_unsupported`` is False.

    See Also
    --------
    universal_pvalue_support, adjust_pvalues

    Notes
    -----
    For a bar with birth :math:`b > 0` and finite death :math:`d > b`, let :math:`\pi = d / b`
    and

    .. math:: \ell = A \log\log \pi + B, \qquad B = -\gamma - A\,\overline{\log\log\pi},

    the mean taken over the tested bars of the dimension, :math:`\gamma` the Euler-Mascheroni
    constant, :math:`A = 1` for Rips and :math:`A = 1/2` for Cech (alpha) filtrations [1]_.
    Under the null :math:`\ell` follows the left-skewed Gumbel law,
    :math:`P(\ell' \ge \ell) = e^{-e^{\ell}}`, which is the p-value [1]_. The law is an empirical
    finding for iid samples; a proof of the universality of the limiting ratio law is in [2]_.
    Holm's adjustment [3]_ of the sorted p-values :math:`p_{(1)} \le \dots \le p_{(m)}` is
    :math:`\tilde p_{(i)} = \max_{j \le i} \min(1, (m - j + 1) p_{(j)})`.

    References
    ----------
    .. [1] O. Bobrowski, P. Skraba, "A universal null-distribution for topological data
       analysis", Sci. Rep. 13, 12274 (2023).
    .. [2] O. Bobrowski, P. Skraba, "Universality in random persistent homology and
       scale-invariant functionals", arXiv:2406.05553 (2024).
    .. [3] S. Holm, "A simple sequentially rejective multiple test procedure",
       Scand. J. Statist. 6 (1979) 65-70.

    Examples
    --------
    >>> import tdakit
    >>> from tdakit.shapes import circle
    >>> from tdakit.core.inference.universal import universal_pvalues
    >>> cloud = tdakit.load_cloud(circle(2000, noise=0.05, rng=0))
    >>> marks = tdakit.select_landmarks(cloud, 200, method="random", rng=0)
    >>> result = universal_pvalues(tdakit.compute_diagrams(cloud, landmarks=marks), 1)
    >>> int(result.significant(0.05).sum())
    1
    """
    if not isinstance(diagrams, Diagrams):
        raise fail("diagrams", _FN, "a Diagrams from tdakit.compute_diagrams", diagrams)
    dim = _check_dim(dim, diagrams, _FN)
    adjust = check_choice(adjust, "adjust", _FN, ADJUSTMENTS)
    allow_unsupported = check_bool(allow_unsupported, "allow_unsupported", _FN)
    supported, reason = _support(diagrams, dim)
    if not supported and not allow_unsupported:
        raise InvalidDataError(f"Universal-law p-values are not offered for these diagrams: {reason} "
                               "Pass allow_unsupported=True to compute them anyway.", parameter="diagrams")
    slope = UNIVERSAL_SLOPES.get(diagrams.filtration, 1.0)
    pairs = diagrams[dim]
    tested = _testable(pairs) & ~diagrams.alive_at_cutoff(dim)
    statistic, intercept, notes = _statistic(pairs, tested, slope)
    p_value = np.full(len(pairs), np.nan)
    done = np.isfinite(statistic)
    p_value[done] = np.exp(-np.exp(statistic[done]))
    notes.append(("supported: " if supported else "NOT supported: ") + reason)
    if diagrams.filtration not in UNIVERSAL_SLOPES:
        notes.append(f"no slope A is known for {diagrams.filtration!r}; A = 1 used.")
    return UniversalPValues(p_value=p_value, p_adjusted=adjust_pvalues(p_value, method=adjust),
                            statistic=statistic, dim=dim, n_tested=int(done.sum()), slope=slope,
                            intercept=intercept, adjust=adjust, supported=supported, note=" ".join(notes))


def adjust_pvalues(p_values: ArrayLike, *, method: str = "holm") -> NDArray[np.float64]:
    """Family-wise adjusted p-values (NaN entries are not tests and stay NaN).

    Parameters
    ----------
    p_values : array-like of shape (n,)
        p-values in [0, 1]; NaN marks an untested entry.
    method : {"holm", "bonferroni"}, default="holm"
        Bonferroni: min(1, m p). Holm: step-down, max_{j<=i} min(1, (m - j + 1) p_(j)) over the
        sorted p-values. m is the number of non-NaN entries.

    Returns
    -------
    ndarray of shape (n,)
        Adjusted p-values in the order of the input.

    Raises
    ------
    InvalidParameterError
        ``p_values`` is not a 1-D array of numbers in [0, 1] or NaN, or ``method`` is unknown.

    References
    ----------
    .. [1] S. Holm, "A simple sequentially rejective multiple test procedure",
       Scand. J. Statist. 6 (1979) 65-70.
    """
    method = check_choice(method, "method", "adjust_pvalues", ADJUSTMENTS)
    values = _as_pvalues(p_values)
    adjusted = np.full(values.shape, np.nan)
    tested = np.flatnonzero(~np.isnan(values))
    count = tested.size
    if count == 0:
        return adjusted
    p = values[tested]
    if method == "bonferroni":
        adjusted[tested] = np.minimum(1.0, count * p)
        return adjusted
    order = np.argsort(p, kind="stable")
    steps = np.minimum(1.0, (count - np.arange(count)) * p[order])
    adjusted[tested[order]] = np.maximum.accumulate(steps)
    return adjusted


def _check_dim(dim, diagrams: Diagrams, function: str) -> int:
    note = f"a homology dimension >= 1 that the diagrams hold, max_dim={diagrams.max_dim}; H0 bars are born at 0"
    return check_int(dim, "dim", function, low=1, high=diagrams.max_dim, note=note)


def _as_pvalues(p_values) -> NDArray[np.float64]:
    requirement = "a 1-D array of p-values in [0, 1] (NaN for untested entries)"
    try:
        values = np.asarray(p_values, dtype=np.float64)
    except (TypeError, ValueError):
        raise fail("p_values", "adjust_pvalues", requirement, p_values) from None
    if values.ndim != 1:
        raise fail("p_values", "adjust_pvalues", requirement, p_values)
    bad = ~np.isnan(values) & ~((values >= 0.0) & (values <= 1.0))
    if bad.any():
        raise fail("p_values", "adjust_pvalues", f"{requirement}; entry {int(np.argmax(bad))} is out of range",
                   p_values)
    return values


def _excess(pairs: NDArray[np.float64]) -> NDArray[np.float64]:
    """The ratio minus one, (death - birth) / birth, exact for nearby floats (inf where it overflows)."""
    with np.errstate(over="ignore", divide="ignore", invalid="ignore"):
        return (pairs[:, 1] - pairs[:, 0]) / pairs[:, 0]


def _testable(pairs: NDArray[np.float64]) -> NDArray[np.bool_]:
    birth, death = pairs[:, 0], pairs[:, 1]
    return (birth > 0) & np.isfinite(death) & (death > birth) & np.isfinite(_excess(pairs))


def _statistic(pairs, tested, slope):
    """L per tested bar, the intercept B and notes on what was left out."""
    notes = []
    untested = int((~tested).sum())
    if untested:
        notes.append(f"{untested} bar(s) untested (birth <= 0, infinite death, alive at the cap or death <= "
                     "birth).")
    statistic = np.full(len(pairs), np.nan)
    if tested.sum() < MIN_BARS:
        notes.append(f"only {int(tested.sum())} testable bar(s); at least {MIN_BARS} are needed to estimate B.")
        return statistic, float("nan"), notes
    loglog = np.log(np.log1p(_excess(pairs[tested])))  # log1p: pi near 1 keeps its digits
    intercept = float(-np.euler_gamma - slope * loglog.mean())
    statistic[tested] = slope * loglog + intercept
    return statistic, intercept, notes


def _support(diagrams: Diagrams, dim: int | None) -> tuple[bool, str]:
    kind, params = diagrams.filtration, diagrams.params
    if kind not in UNIVERSAL_SLOPES:
        return False, f"{kind} filtration: " + FILTRATION_REFUSALS.get(kind, "no slope A is known for it.")
    if params.get("sparse") is not None:
        return False, "sparse Rips changes the ratios death/birth; the law was measured on exact Rips only."
    metric = (params.get("metric") or {}).get("name", "euclidean")
    if metric not in SUPPORTED_METRICS:
        return False, f"calibration was measured for Euclidean clouds only, not the {metric!r} metric."
    cut = sum(int(diagrams.alive_at_cutoff(k).sum()) for k in range(1, len(diagrams)))
    if cut:
        return False, (f"{cut} class(es) are alive at the cap max_scale={diagrams.max_scale:g}; their ratios are "
                       "unknown, which biases B. Recompute without max_scale or with a larger one.")
    if dim is not None and dim > MAX_MEASURED_DIM:
        return False, f"calibration was measured for H1 and H2 only, not H{dim}."
    method = params.get("landmark_method")
    if method is None:
        return False, "the diagrams do not record how their vertices were chosen (params['landmark_method'])."
    offered, evidence = MEASURED_SETTINGS.get(
        (kind, method), (False, f"{kind} on {method!r} vertices was not measured; use 'random' landmarks."))
    return offered, f"{kind} on {method!r} vertices: {evidence}"
