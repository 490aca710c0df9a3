"""confidence_band: four ways to tell features from noise, each saying what it covers and how validly."""

from __future__ import annotations

import warnings

import numpy as np

from tdakit._validation import check_bool, check_choice, check_float, check_int, fail
from tdakit.core.geometry import _geometry, kde
from tdakit.core.geometry.cloud import Cloud
from tdakit.core.geometry.landmarks import LANDMARK_METHODS, Landmarks, select_landmarks
from tdakit.core.inference import dtm
from tdakit.core.inference.bands import Band
from tdakit.core.inference.replicates import config_fingerprint, root_seed, run_replicates
from tdakit.core.topology.diagrams import Diagrams
from tdakit.core.topology.distances import diagram_distance
from tdakit.core.topology.filtrations import FILTRATIONS, compute_diagrams, landmark_constant, stability_constant
from tdakit.core.topology.landscapes import persistence_landscape
from tdakit.errors import BlindBandWarning, TdakitWarning

__all__ = ["confidence_band", "band_at_level", "hausdorff_level", "subsample_band", "BAND_METHODS"]

BAND_METHODS = ("bootstrap", "density", "dtm", "landscape", "subsample")
DIAGRAM_OPTIONS = ("max_scale", "coefficient_field", "collapse", "sparse", "witness", "witness_nu", "dtm_neighbors",
                   "dtm_power", "memory_budget")
_FN = "confidence_band"
# Measured with gudhi 3.13: coverage of the bottleneck bootstrap for Rips diagrams of uniform circle samples.
LANDSCAPE_NO_CALL = ("it bounds how precisely the mean landscape curve is known, not single bars; used as a threshold "
                     "on bars it flagged noise (measured: 67 H1 bars of 3,000 Gaussian points on 200 landmarks)")
BOOTSTRAP_RIPS_COVERAGE_NOTE = "measured coverage about 0.43 at nominal 0.95 for Rips diagrams"


def confidence_band(
    cloud: Cloud,
    diagrams: Diagrams | None = None,
    *,
    landmarks: Landmarks | None = None,
    filtration: str | None = None,
    method: str = "dtm",
    level: float = 0.95,
    n_boot: int = 200,
    rng=None,
    n_jobs: int = 1,
    executor=None,
    progress=None,
    checkpoint=None,
    max_dim: int | None = None,
    diagram_options: dict | None = None,
    subsample_size: int | None = None,
    account_for_landmarks: bool = True,
    bandwidth: float | None = None,
    resolution: int | None = None,
    n_subsamples: int = 30,
    n_levels: int = 3,
) -> Band:
    """A band that marks each diagram point as a real feature or as noise.

    Parameters
    ----------
    cloud : Cloud
    diagrams : Diagrams, optional
        The diagrams to judge (from :func:`compute_diagrams` on this cloud and these
        ``landmarks``): the band takes their filtration and options and never recomputes
        them with other defaults. Without them the band computes its own from
        ``filtration``, ``max_dim`` and ``diagram_options``.
    landmarks : Landmarks, optional
        Vertices of the complexes (default: every point, for small clouds); required with
        ``diagrams`` built on landmarks.
    filtration : {"rips", "witness", "alpha", "dtm"}, optional
        Without ``diagrams``: ``"dtm"`` for the ``"dtm"`` method, else ``"rips"``.
        Refused when it contradicts ``diagrams`` or the method.
    method : {"dtm", "subsample", "density", "bootstrap", "landscape"}, default="dtm"
        ``"dtm"`` (the default; see :func:`dtm_band` for the full statement): sup-norm
        bootstrap of the distance to measure at the landmarks [2]_ with the DTM-weighted
        Rips filtration [4]_. Radius = 2 c + lam eps, c the level-quantile of
        sup_landmarks |d*_m - d_m| over replicates, eps the coverage radius and lam the
        landmark constant (2 for p = inf, 4 for p = 1). A confidence set (asymptotic) for
        the DTM-weighted Rips diagram of the whole cloud with the sampled distribution's
        DTM as weights; replicates need no new diagram.
        ``"subsample"``: Hausdorff subsampling [1]_ (Section 4.1): replicates draw
        ``subsample_size`` points without replacement and measure T = d_H(subsample,
        cloud); c = 2 * quantile(T); radius = C * (c + eps), with C the filtration's
        stability constant (2 Rips, 1 alpha) and eps the landmarks' coverage radius when
        ``account_for_landmarks``. A valid but conservative confidence set for the
        diagram of the sampled shape; only for filtrations with a stability constant.
        ``"density"``: sup-norm bootstrap of a Gaussian kernel density estimate [1]_
        (Section 4.4), binned on a grid (clouds of 1 to 3 coordinates, Euclidean or
        periodic); the diagram is that of the estimate's superlevel sets (no landmarks,
        no other filtration: naming one is refused), the target the diagram of the
        smoothed density E p_h.
        ``"bootstrap"``: bottleneck bootstrap [2]_: resample the cloud with replacement,
        re-select landmarks the same way, rebuild the diagrams and take the quantile eta of
        the bottleneck distances to the original; radius = eta + lam eps. Proven only for
        distance-to-measure and kernel-distance sublevel filtrations: for Rips it is a
        resampling heuristic (measured coverage about 0.43 at nominal 0.95).
        ``"landscape"``: multiplier bootstrap band [3]_ for the mean first landscape of
        ``n_subsamples`` subsamples of ``subsample_size`` points; radius = the band's
        half-width. A band on that curve, not a test of single bars: it does not call
        features (``Band.calls`` is False).
    level : float, default=0.95
        Nominal coverage in (0, 1).
    n_boot : int, default=200
        Replicates (for ``"landscape"``: multiplier draws).
    rng : int, Generator or None
        Root randomness; replicate i uses the i-th child of ``SeedSequence(seed)``.
    n_jobs : int, default=1
        Local worker processes (ignored when ``executor`` is given).
    executor : object with ``submit``, optional
        A ``concurrent.futures`` executor or a ``dask.distributed.Client``.
    progress : callable, optional
        ``progress(done, total)`` after each completed chunk of replicates.
    checkpoint : path, optional
        Save completed replicates here and resume from them; the result is identical.
    max_dim : int, optional
        Without ``diagrams``: highest homology dimension (default 1).
    diagram_options : dict, optional
        Without ``diagrams``: further options of :func:`compute_diagrams` (``max_scale``,
        ``witness``, ``dtm_neighbors``, ...).
    subsample_size : int, optional
        ``"subsample"``: b, default floor(n / log n). ``"landscape"``: points per
        subsample, default min(200, n // 2).
    account_for_landmarks : bool, default=True
        ``"subsample"``: add the landmarks' coverage radius eps to the Hausdorff level.
        Without it the band cannot rule out what the landmarks create and does not call
        features.
    bandwidth : float, optional
        ``"density"``: kernel width; default Scott's rule.
    resolution : int, optional
        ``"density"``: grid cells per axis (default 512, 128, 48 for 1, 2, 3 coordinates).
    n_subsamples : int, default=30
        ``"landscape"``: independent subsamples.
    n_levels : int, default=3
        ``"landscape"``: landscape functions kept.

    Returns
    -------
    Band

    Notes
    -----
    Every band that calls features accounts for the landmarks: a bar shorter than twice the
    landmark bound (``diagrams.params["landmark_bound"]``) can be made by the landmark
    choice alone, so it is never called real. False-feature rates and power on planted
    truth are in ``benchmarks/README.md``.

    Replicates are independent of ``level``: the same ``rng`` and checkpoint serve any level.

    References
    ----------
    .. [1] B. T. Fasy, F. Lecci, A. Rinaldo, L. Wasserman, S. Balakrishnan, A. Singh,
       "Confidence sets for persistence diagrams", Ann. Statist. 42(6) (2014) 2301-2339.
    .. [2] F. Chazal, B. T. Fasy, F. Lecci, B. Michel, A. Rinaldo, L. Wasserman, "Robust
       topological inference: distance to a measure and kernel distance", J. Mach. Learn.
       Res. 18(159) (2018) 1-40.
    .. [3] F. Chazal, B. T. Fasy, F. Lecci, A. Rinaldo, L. Wasserman, "Stochastic
       convergence of persistence landscapes and silhouettes", J. Comput. Geom. 6(2) (2015).
    .. [4] H. Anai, F. Chazal, M. Glisse, Y. Ike, H. Inakoshi, R. Tinarrage, Y. Umeda,
       "DTM-based filtrations", Topological Data Analysis (Abel Symposia 15), Springer (2020).
    """
    opts = _check(cloud, diagrams, landmarks, filtration, method, level, n_boot, max_dim, diagram_options,
                  subsample_size, account_for_landmarks, n_subsamples, n_levels)
    opts["seed"] = root_seed(rng, _FN)
    run = {"n_jobs": n_jobs, "executor": executor, "progress": progress, "checkpoint": checkpoint}
    builders = {"subsample": _subsample_band, "bootstrap": _bootstrap_band, "landscape": _landscape_band,
                "density": _density_band, "dtm": _dtm_band}
    band = builders[opts["method"]](cloud, opts, run, bandwidth, resolution)
    if band.method != "density":  # a length scale: record the data's, to say when the strip is taller
        band.params["data_scale"] = 2.0 * float(_geometry.to_metric(cloud, _geometry.working_to_point(cloud, 0).max()))
    blind = band.blind_dimensions()
    if blind and band.calls:
        warnings.warn(f"This {band.method} band cannot see anything in H{', H'.join(map(str, blind))}: its strip "
                      f"({band.strip_height(blind[0]):.4g}) is taller than any bar the diagrams can hold. Try: "
                      f"{band.blind_advice()}.", BlindBandWarning, stacklevel=2)
    return band


def _check(cloud, diagrams, landmarks, filtration, method, level, n_boot, max_dim, diagram_options, subsample_size,
           account, n_subsamples, n_levels):
    if not isinstance(cloud, Cloud):
        raise fail("cloud", _FN, "a Cloud from tdakit.load_cloud", cloud)
    if landmarks is not None and not isinstance(landmarks, Landmarks):
        raise fail("landmarks", _FN, "None or a Landmarks object from select_landmarks", landmarks)
    if landmarks is not None and landmarks.nearest.size != cloud.n_points:
        raise fail("landmarks", _FN, f"landmarks selected from this cloud of {cloud.n_points} points", landmarks)
    opts = {"method": check_choice(method, "method", _FN, BAND_METHODS),
            "level": check_float(level, "level", _FN, low=0.0, high=1.0, low_open=True, high_open=True),
            "n_boot": check_int(n_boot, "n_boot", _FN, low=1, high=10**7),
            "n_subsamples": check_int(n_subsamples, "n_subsamples", _FN, low=2, high=10**6),
            "n_levels": check_int(n_levels, "n_levels", _FN, low=1, high=100),
            "account": check_bool(account, "account_for_landmarks", _FN), "landmarks": landmarks}
    if max_dim is not None:
        max_dim = check_int(max_dim, "max_dim", _FN, low=0, high=8)
    if filtration is not None:
        check_choice(filtration, "filtration", _FN, FILTRATIONS)
    if diagram_options is not None and not isinstance(diagram_options, dict):
        raise fail("diagram_options", _FN, "None or a dict of compute_diagrams options", diagram_options)
    if diagrams is None:
        _own_diagrams(opts, filtration, max_dim, dict(diagram_options or {}))
    else:
        _given_diagrams(opts, diagrams, filtration, max_dim, diagram_options)
    opts["subsample_size"] = subsample_size
    if subsample_size is not None:
        opts["subsample_size"] = check_int(subsample_size, "subsample_size", _FN, low=1, high=cloud.n_points - 1,
                                           note="fewer than the points")
    return opts


def _own_diagrams(opts, filtration, max_dim, diagram_options) -> None:
    method = opts["method"]
    if method == "density" and filtration is not None:
        raise fail("filtration", _FN, "None with method='density' (that band builds the superlevel-set filtration "
                   "of a kernel density estimate on a grid, so no other filtration can apply)", filtration)
    if method == "dtm" and filtration not in (None, "dtm"):
        raise fail("filtration", _FN, "'dtm' or None with method='dtm' (the band bounds the DTM-weighted filtration; "
                   "for a Rips diagram choose method 'subsample')", filtration)
    unknown = sorted(set(diagram_options) - set(DIAGRAM_OPTIONS))
    if unknown:
        raise fail("diagram_options", _FN, f"a dict whose keys are among {', '.join(DIAGRAM_OPTIONS)} (unknown: "
                   f"{', '.join(map(str, unknown))}; landmarks, filtration, max_dim and rng go to confidence_band "
                   "itself)", diagram_options)
    opts.update(filtration=filtration or ("dtm" if method == "dtm" else "rips"), max_dim=1 if max_dim is None
                else max_dim, diagram_options=diagram_options, diagrams=None)


def _given_diagrams(opts, diagrams, filtration, max_dim, diagram_options) -> None:
    if not isinstance(diagrams, Diagrams):
        raise fail("diagrams", _FN, "None or a Diagrams object from compute_diagrams", diagrams)
    if opts["method"] == "density":
        raise fail("diagrams", _FN, "None with method='density' (that band builds its own diagrams, of the "
                   "superlevel sets of a kernel density estimate)", diagrams)
    clashes = [(name, value, own) for name, value, own in
               (("filtration", filtration, diagrams.filtration), ("max_dim", max_dim, diagrams.max_dim))
               if value is not None and value != own]
    if clashes:
        name, value, own = clashes[0]
        raise fail(name, _FN, f"None or {own!r}, as in the diagrams passed (they fix it)", value)
    if diagram_options:
        raise fail("diagram_options", _FN, "None when diagrams are passed (their options are used)", diagram_options)
    marks, params = opts["landmarks"], diagrams.params
    on_landmarks = params.get("landmark_method", "all points") != "all points"
    if on_landmarks and (marks is None or marks.n_landmarks != params.get("n_landmarks")
                         or not np.isclose(marks.coverage_radius, params.get("coverage_radius", -1.0))):
        raise fail("landmarks", _FN, f"the {params.get('n_landmarks')} landmarks the diagrams were built on "
                   f"(coverage radius {params.get('coverage_radius', float('nan')):.4g})", marks)
    if opts["method"] == "dtm" and diagrams.filtration != "dtm":
        raise fail("diagrams", _FN, "diagrams of filtration 'dtm' with method='dtm' (or choose method 'subsample' "
                   f"for {diagrams.filtration!r} diagrams)", diagrams.filtration)
    opts.update(filtration=diagrams.filtration, max_dim=diagrams.max_dim, diagram_options=options_of(diagrams),
                diagrams=diagrams)


def options_of(diagrams: Diagrams) -> dict:
    """The :func:`compute_diagrams` keyword options that made ``diagrams`` (besides landmarks and max_dim)."""
    params = diagrams.params
    options = {"max_scale": None if not np.isfinite(diagrams.max_scale) else float(diagrams.max_scale),
               "coefficient_field": diagrams.coefficient_field, "collapse": params.get("collapse", True),
               "sparse": params.get("sparse"), "memory_budget": params.get("budget")}
    if diagrams.filtration == "witness":
        options.update(witness=params.get("witness", "lazy"), witness_nu=params.get("witness_nu") or 1)
    if diagrams.filtration == "dtm":
        options.update(dtm_neighbors=params.get("dtm_neighbors"), dtm_power=params.get("dtm_power", 1.0))
    return options


def _quantile(values, level) -> float:
    """The empirical level-quantile: the ceil(level * B)-th order statistic (common practice)."""
    return float(np.quantile(values, level, method="higher"))


def _reference(cloud, opts) -> Diagrams:
    if opts["diagrams"] is not None:
        return opts["diagrams"]
    return compute_diagrams(cloud, landmarks=opts["landmarks"], filtration=opts["filtration"],
                            max_dim=opts["max_dim"], rng=opts["seed"], **opts["diagram_options"])


def _fingerprint(cloud, opts, *extra) -> str:
    marks = opts["landmarks"]
    landmark_key = None if marks is None else (marks.method, marks.n_landmarks, sorted(marks.params.items()))
    return config_fingerprint(cloud.fingerprint, opts["method"], opts["filtration"], opts["max_dim"],
                              opts["diagram_options"], landmark_key, *extra)


def _statement(method, level, target, validity) -> str:
    return f"{method} band at level {level:g}: covers {target}; {validity}."


# -- subsampling ------------------------------------------------------------------------------
def _hausdorff_task(payload, rng) -> float:
    cloud, size = payload
    subset = rng.choice(cloud.n_points, size=size, replace=False)
    return float(_geometry.nearest_among(cloud, subset)[1].max())


def _subsample_band(cloud, opts, run, bandwidth, resolution) -> Band:
    check_subsample_allowed(cloud, opts["filtration"], opts["method"])
    n = cloud.n_points
    size = opts["subsample_size"] or max(1, int(n / np.log(n)))
    diagrams = _reference(cloud, opts)
    stats = run_replicates(_hausdorff_task, (cloud, size), opts["n_boot"], opts["seed"], **run,
                           fingerprint=_fingerprint(cloud, opts, size))
    return subsample_band(diagrams, 2.0 * _quantile(stats, opts["level"]), level=opts["level"],
                          landmarks=opts["landmarks"], account_for_landmarks=opts["account"], replicates=stats,
                          seed=opts["seed"], subsample_size=size)


def check_subsample_allowed(cloud, filtration, method, name="method", function=_FN) -> None:
    """Refuse the subsampling band where no Hausdorff stability constant applies."""
    if stability_constant(filtration) is None or not cloud.metric.is_metric:
        raise fail(name, function, f"not 'subsample' with filtration {filtration!r} and metric "
                   f"{cloud.metric.name!r} (it needs a Hausdorff stability constant: rips or alpha on a true metric)",
                   method)


def hausdorff_level(cloud: Cloud, *, level: float = 0.95, n_boot: int = 200, subsample_size: int | None = None,
                    rng=None, **run) -> tuple[float, np.ndarray]:
    """The subsampling method's Hausdorff level c = 2 * quantile of d_H(subsample, cloud).

    It depends on the cloud only, not on landmarks or filtration, so one level serves
    many landmark settings (see :func:`subsample_band`). Returns ``(c, replicates)``.
    ``run`` takes ``n_jobs``, ``executor``, ``progress``.

    References
    ----------
    .. [1] B. T. Fasy et al., "Confidence sets for persistence diagrams", Ann. Statist.
       42(6) (2014) 2301-2339, Section 4.1.
    """
    if not isinstance(cloud, Cloud):
        raise fail("cloud", "hausdorff_level", "a Cloud", cloud)
    level = check_float(level, "level", "hausdorff_level", low=0.0, high=1.0, low_open=True, high_open=True)
    n = cloud.n_points
    size = subsample_size or max(1, int(n / np.log(n)))
    size = check_int(size, "subsample_size", "hausdorff_level", low=1, high=n - 1, note="fewer than the points")
    seed = root_seed(rng, "hausdorff_level")
    stats = run_replicates(_hausdorff_task, (cloud, size), n_boot, seed, function="hausdorff_level", **run)
    return 2.0 * _quantile(stats, level), stats


def subsample_band(diagrams: Diagrams, hausdorff: float, *, level: float, landmarks: Landmarks | None = None,
                   account_for_landmarks: bool = True, replicates=None, seed: int = 0,
                   subsample_size: int | None = None) -> Band:
    """The subsampling band for diagrams built on ``landmarks``, from a Hausdorff level c.

    radius = C * (c + eps), C the filtration's stability constant and eps the landmarks'
    coverage radius (0 without landmarks) [1]_ (Section 4.1).

    References
    ----------
    .. [1] B. T. Fasy et al., "Confidence sets for persistence diagrams", Ann. Statist.
       42(6) (2014) 2301-2339.
    """
    constant = stability_constant(diagrams.filtration)
    if constant is None:
        raise fail("diagrams", "subsample_band", "diagrams of a filtration with a stability constant (rips, alpha)",
                   diagrams.filtration)
    eps = landmarks.coverage_radius if (landmarks is not None and account_for_landmarks) else 0.0
    radius = constant * (hausdorff + eps)
    handling = ("none used (every point)" if landmarks is None else "not accounted for" if not account_for_landmarks
                else f"accounted for: radius = {constant:g} x (c + eps) with eps = {eps:.4g}")
    target = f"the {diagrams.filtration} diagram of the shape the points were sampled from"
    validity = "confidence set (Fasy et al. 2014, Section 4.1; valid, conservative)"
    stats = np.zeros(0) if replicates is None else np.asarray(replicates)
    blind = landmarks is not None and not account_for_landmarks
    return Band("subsample", level, (radius,) * len(diagrams), diagrams, target, validity,
                _statement("subsample", level, target, validity), handling, stats, seed,
                {"subsample_size": subsample_size, "hausdorff_level": hausdorff, "coverage_radius": eps,
                 "stability_constant": constant, "n_boot": int(stats.size)}, calls=not blind,
                no_call_reason="account_for_landmarks=False: the strip leaves out what the landmark spacing alone "
                "can create, so bars inside 2 x the landmark bound could be called real" if blind else "")


# -- bottleneck bootstrap -------------------------------------------------------------------------
def _replicate_diagrams(sample: Cloud, spec: dict, rng) -> Diagrams:
    landmarks = None
    if spec["n_landmarks"] is not None:
        count = min(spec["n_landmarks"], sample.n_distinct)
        landmarks = select_landmarks(sample, count, method=spec["landmark_method"], rng=rng, **spec["landmark_options"])
    return compute_diagrams(sample, landmarks=landmarks, filtration=spec["filtration"], max_dim=spec["max_dim"],
                            rng=rng, **spec["diagram_options"])


def _spec(opts) -> dict:
    marks = opts["landmarks"]
    method = marks.method if marks is not None and marks.method in LANDMARK_METHODS else "maxmin"
    keep = ("density_power", "density_neighbors", "keep_fraction")
    options = {} if marks is None else {k: v for k, v in marks.params.items() if k in keep and v is not None}
    return {"n_landmarks": None if marks is None else marks.n_landmarks, "landmark_method": method,
            "landmark_options": options, "filtration": opts["filtration"], "max_dim": opts["max_dim"],
            "diagram_options": opts["diagram_options"]}


def _bootstrap_task(payload, rng):
    cloud, reference, spec = payload
    sample = cloud.subset(rng.integers(cloud.n_points, size=cloud.n_points))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", TdakitWarning)
        diagrams = _replicate_diagrams(sample, spec, rng)
    return np.array([diagram_distance(reference[k], diagrams[k]) for k in range(len(reference))])


def _bootstrap_band(cloud, opts, run, bandwidth, resolution) -> Band:
    diagrams = _reference(cloud, opts)
    spec = _spec(opts)
    stats = run_replicates(_bootstrap_task, (cloud, diagrams, spec), opts["n_boot"], opts["seed"], **run,
                           fingerprint=_fingerprint(cloud, opts))
    term, calls, reason = _landmark_term(cloud, diagrams, "bootstrap")
    radii = tuple(_quantile(stats[:, k], opts["level"]) + term for k in range(stats.shape[1]))
    target = f"the {opts['filtration']} diagram of the sampling distribution (as resampling sees it)"
    validity = ("resampling heuristic, not a proven confidence set for this filtration (proofs cover "
                f"distance-to-measure and kernel-distance sublevel sets; {BOOTSTRAP_RIPS_COVERAGE_NOTE})")
    handling = (f"each replicate re-selects its landmarks the same way, and the radius adds the landmark bound "
                f"{term:.4g}, which the replicates' shared landmark spacing hides" if spec["n_landmarks"]
                else "none used (every point)")
    return Band("bootstrap", opts["level"], radii, diagrams, target, validity,
                _statement("bootstrap", opts["level"], target, validity), handling, stats, opts["seed"],
                {"n_boot": opts["n_boot"], "landmark_method": spec["landmark_method"], "landmark_term": term},
                calls=calls, no_call_reason=reason)


def _landmark_term(cloud, diagrams, method) -> tuple[float, bool, str]:
    """The landmark bound lam * eps added to a radius, and whether the band may then call features."""
    params = diagrams.params
    if params.get("landmark_method", "all points") == "all points":
        return 0.0, True, ""
    bound = params.get("landmark_bound")
    if bound is None:
        return 0.0, False, (f"no landmark bound is known for {diagrams.filtration!r} diagrams on metric "
                            f"{cloud.metric.name!r}, so bars the landmark spacing creates cannot be ruled out; "
                            "use every point, or the rips, alpha or dtm filtration")
    return float(bound), True, ""


# -- distance to measure ------------------------------------------------------------------------------
def _dtm_band(cloud, opts, run, bandwidth, resolution) -> Band:
    diagrams = _reference(cloud, opts)
    params = diagrams.params
    marks = opts["landmarks"]
    vertices = marks.indices if marks is not None else np.arange(cloud.n_points)
    term, calls, reason = _landmark_term(cloud, diagrams, "dtm")
    table = dtm.neighbour_table(cloud, vertices, int(params["dtm_neighbors"]))
    weights, _ = dtm.weighted_dtm(table)
    stats = run_replicates(dtm.dtm_sup_task, (table, weights), opts["n_boot"], opts["seed"], **run,
                           fingerprint=_fingerprint(cloud, opts, table.k, table.squared.shape[1]))
    power = params.get("dtm_power", 1.0)
    band_params = {"n_boot": opts["n_boot"], "dtm_neighbors": table.k, "dtm_mass": table.k / cloud.n_points,
                   "dtm_power": power, "listed_neighbours": int(table.squared.shape[1]), "landmark_term": term,
                   "weight_quantile": _quantile(stats[:, 0], opts["level"]),
                   "short_of_mass": int(stats[:, 1].sum())}
    radius = dtm_radius(band_params["weight_quantile"], band_params)
    p_text = "inf" if power == np.inf else "1"
    target = (f"the DTM-weighted Rips diagram (p = {p_text}, doubled scale) of every point of the cloud, weighted by "
              f"the sampled distribution's distance to measure with mass m = {table.k}/{cloud.n_points}")
    validity = ("confidence set, asymptotically valid: sup-norm bootstrap of the distance to measure (Chazal et al. "
                "2018) at the landmarks, weighted-filtration stability (Anai et al. 2020) and the landmark bound")
    handling = (f"accounted for: radius = 2 c + {term:.4g} (landmark bound {landmark_constant('dtm', power):g} x "
                f"eps, eps = {marks.coverage_radius:.4g})" if marks is not None else "none used (every point)")
    return Band("dtm", opts["level"], (radius,) * (diagrams.max_dim + 1), diagrams, target, validity,
                _statement("dtm", opts["level"], target, validity), handling, stats, opts["seed"], band_params,
                calls=calls, no_call_reason=reason)


def dtm_radius(weight_quantile: float, params: dict) -> float:
    """Bottleneck radius of the DTM band: 2 c (weights moved by c move values by 2 c) + the landmark term."""
    return 2.0 * weight_quantile + params["landmark_term"]


# -- landscapes -------------------------------------------------------------------------------------
def _landscape_task(payload, rng):
    cloud, spec, size, grid, n_levels = payload
    sample = cloud.subset(rng.choice(cloud.n_points, size=size, replace=False))
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", TdakitWarning)
        diagrams = _replicate_diagrams(sample, spec, rng)
    return np.stack([persistence_landscape(diagrams[k], grid, n_levels=n_levels) for k in range(len(diagrams))])


def _landscape_band(cloud, opts, run, bandwidth, resolution) -> Band:
    diagrams = _reference(cloud, opts)
    size = opts["subsample_size"] or min(200, cloud.n_points // 2)
    spec = _spec(opts)
    if spec["n_landmarks"] is not None:
        spec["n_landmarks"] = min(spec["n_landmarks"], size)
    finite = np.concatenate([p[np.isfinite(p[:, 1]), 1] for p in diagrams.pairs] + [[1e-12]])
    cap = diagrams.max_scale if np.isfinite(diagrams.max_scale) else 1.5 * finite.max()
    grid = np.linspace(0.0, cap, 256)
    curves = run_replicates(_landscape_task, (cloud, spec, size, grid, opts["n_levels"]), opts["n_subsamples"],
                            opts["seed"], **run, fingerprint=_fingerprint(cloud, opts, size, opts["n_levels"]))
    mean = curves.mean(axis=0)
    weights = np.random.default_rng(np.random.SeedSequence(opts["seed"]).spawn(opts["n_subsamples"] + 1)[-1])
    xi = weights.standard_normal((opts["n_boot"], opts["n_subsamples"]))
    centred = (curves - mean)[:, :, 0, :]  # first landscape, per dimension: (n_sub, dims, grid)
    theta = np.abs(np.einsum("bi,idt->bdt", xi, centred)).max(axis=2) / np.sqrt(opts["n_subsamples"])
    halfwidth = np.array([_quantile(theta[:, k], opts["level"]) for k in range(theta.shape[1])])
    halfwidth /= np.sqrt(opts["n_subsamples"])
    target = f"the mean first landscape of {size}-point subsamples ({opts['filtration']})"
    validity = "confidence band for that mean landscape (Chazal et al. 2015, multiplier bootstrap)"
    return Band("landscape", opts["level"], tuple(float(h) for h in halfwidth), diagrams, target, validity,
                _statement("landscape", opts["level"], target, validity),
                "subsample diagrams are computed on the subsamples themselves", theta, opts["seed"],
                {"subsample_size": size, "n_subsamples": opts["n_subsamples"], "n_boot": opts["n_boot"]},
                {"grid": grid, "mean": mean, "halfwidth": halfwidth, "landscapes": curves}, calls=False,
                no_call_reason=LANDSCAPE_NO_CALL)


# -- kernel density ----------------------------------------------------------------------------------
def _density_task(payload, rng) -> float:
    grid, density, n = payload
    counts = rng.multinomial(n, grid.counts.ravel() / n).reshape(grid.shape).astype(np.float64)
    return float(np.abs(kde.smooth_counts(grid, counts, n) - density).max())


def _density_band(cloud, opts, run, bandwidth, resolution) -> Band:
    if cloud.metric.name not in ("euclidean", "periodic") or not 1 <= cloud.n_dims <= 3:
        raise fail("method", _FN, f"not 'density' for {cloud.n_dims}-coordinate clouds under metric "
                   f"{cloud.metric.name!r} (the grid estimate needs 1 to 3 Euclidean or periodic coordinates); "
                   "use 'subsample', 'bootstrap' or 'landscape'", opts["method"])
    width = kde.scott_bandwidth(cloud.points) if bandwidth is None else \
        check_float(bandwidth, "bandwidth", _FN, low=0.0, low_open=True)
    if resolution is not None:
        resolution = check_int(resolution, "resolution", _FN, low=8, high=4096)
    grid = kde.make_density_grid(cloud, width, resolution)
    density = kde.smooth_counts(grid, grid.counts, cloud.n_points)
    diagrams = _density_diagrams(density, grid, opts)
    stats = run_replicates(_density_task, (grid, density, cloud.n_points), opts["n_boot"], opts["seed"], **run,
                           fingerprint=_fingerprint(cloud, opts, width, grid.shape))
    radius = _quantile(stats, opts["level"])
    target = f"the superlevel-set diagram of the smoothed density E p_h (h = {width:.4g})"
    validity = "confidence set (Fasy et al. 2014, Section 4.4; sup-norm bootstrap, asymptotically valid)"
    return Band("density", opts["level"], (radius,) * (opts["max_dim"] + 1), diagrams, target, validity,
                _statement("density", opts["level"], target, validity),
                "none: the density is estimated from every point", stats, opts["seed"],
                {"bandwidth": width, "grid_shape": grid.shape, "n_boot": opts["n_boot"]},
                {"density": density, "grid_lower": grid.lower, "grid_cell": grid.cell})


def _density_diagrams(density, grid, opts) -> Diagrams:
    pairs = [p[np.argsort(-(p[:, 1] - p[:, 0]), kind="stable")]  # decreasing persistence, as compute_diagrams
             for p in kde.grid_diagrams(density, opts["max_dim"], grid.periodic)]
    empty = tuple(np.full((len(p), k + 1), -1, dtype=np.intp) for k, p in enumerate(pairs))
    deaths = tuple(np.full((len(p), k + 2), -1, dtype=np.intp) for k, p in enumerate(pairs))
    flags = tuple(np.zeros(len(p), dtype=bool) for p in pairs)
    return Diagrams(tuple(pairs), flags, empty, deaths, filtration="density",
                    units="negated kernel density (superlevel sets)", coefficient_field=2,
                    params={"bandwidth": grid.bandwidth, "location": "not available for grid densities"})


def band_at_level(band: Band, level: float) -> Band:
    """The same band at another confidence level, from its stored replicates (no recomputation).

    Every method's radius is a quantile of replicates that do not depend on the level,
    so changing the level only re-reads them.
    """
    import dataclasses

    if not isinstance(band, Band):
        raise fail("band", "band_at_level", "a Band from confidence_band", band)
    level = check_float(level, "level", "band_at_level", low=0.0, high=1.0, low_open=True, high_open=True)
    stats, dims = np.asarray(band.replicates), len(band.radii)
    if stats.size == 0:
        raise fail("band", "band_at_level", "a band that kept its replicates", band)
    curves = band.curves
    if band.method == "subsample":
        params = band.params
        hausdorff = 2.0 * _quantile(stats, level)
        radii = (params["stability_constant"] * (hausdorff + params["coverage_radius"]),) * dims
        params = {**params, "hausdorff_level": hausdorff}
    elif band.method == "bootstrap":
        term = band.params.get("landmark_term", 0.0)
        radii, params = tuple(_quantile(stats[:, k], level) + term for k in range(dims)), band.params
    elif band.method == "dtm":
        radii, params = (dtm_radius(_quantile(stats[:, 0], level), band.params),) * dims, band.params
    elif band.method == "density":
        radii, params = (_quantile(stats, level),) * dims, band.params
    else:
        scale = np.sqrt(band.params["n_subsamples"])
        halfwidth = np.array([_quantile(stats[:, k], level) for k in range(dims)]) / scale
        radii, params, curves = tuple(float(h) for h in halfwidth), band.params, {**curves, "halfwidth": halfwidth}
    return dataclasses.replace(band, level=level, radii=tuple(float(r) for r in radii), params=params, curves=curves,
                               statement=_statement(band.method, level, band.target, band.validity))
