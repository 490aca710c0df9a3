"""The ways a band is built, one builder per method (called by :func:`confidence_band`)."""

from __future__ import annotations

import warnings

import numpy as np

from tdakit._validation import check_float, check_int, fail
from tdakit.core.geometry import _geometry, kde
from tdakit.core.geometry.cloud import Cloud
from tdakit.core.geometry.landmarks import LANDMARK_METHODS, Landmarks, select_landmarks
from tdakit.core.inference import dtm
from tdakit.core.inference.bands import Band
from tdakit.core.inference.replicates import config_fingerprint, root_seed, run_replicates
from tdakit.core.topology.diagrams import Diagrams
from tdakit.core.topology.distances import diagram_distance
from tdakit.core.topology.filtrations import compute_diagrams, landmark_constant, stability_constant
from tdakit.core.topology.landscapes import persistence_landscape
from tdakit.core.topology.preflight import default_memory_budget
from tdakit.errors import MemoryBudgetError, TdakitWarning

_FN = "confidence_band"
LANDSCAPE_NO_CALL = ("it bounds how precisely the mean landscape curve is known, not single bars; used as a threshold "
                     "on bars it flagged noise (measured: 67 H1 bars of 3,000 Gaussian points on 200 landmarks)")
# Measured with gudhi 3.13: coverage of the bottleneck bootstrap for Rips diagrams of uniform circle samples.
BOOTSTRAP_RIPS_COVERAGE_NOTE = "measured coverage about 0.43 at nominal 0.95 for Rips diagrams"


def quantile(values, level) -> float:
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


def statement(method, level, target, validity) -> str:
    return f"{method} band at level {level:g}: covers {target}; {validity}."


# -- subsampling ------------------------------------------------------------------------------
def _hausdorff_task(payload, rng) -> float:
    cloud, size = payload
    subset = rng.choice(cloud.n_points, size=size, replace=False)
    return float(_geometry.nearest_among(cloud, subset)[1].max())


def subsample_method(cloud, opts, run, bandwidth, resolution) -> Band:
    check_subsample_allowed(cloud, opts["filtration"], opts["method"])
    n = cloud.n_points
    size = opts["subsample_size"] or max(1, int(n / np.log(n)))
    diagrams = _reference(cloud, opts)
    stats = run_replicates(_hausdorff_task, (cloud, size), opts["n_boot"], opts["seed"], **run,
                           fingerprint=_fingerprint(cloud, opts, size))
    return subsample_band(diagrams, 2.0 * quantile(stats, opts["level"]), level=opts["level"],
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
    return 2.0 * quantile(stats, level), stats


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
                statement("subsample", level, target, validity), handling, stats, seed,
                {"subsample_size": subsample_size, "hausdorff_level": hausdorff, "coverage_radius": eps,
                 "stability_constant": constant, "n_boot": int(stats.size)}, calls=not blind,
                no_call_reason="account_for_landmarks=False: the strip leaves out what the landmark spacing alone "
                "can create, so bars inside 2 x the landmark bound could be called real" if blind else "")


# -- bottleneck bootstrap -------------------------------------------------------------------------
def _replicate_diagrams(sample: Cloud, spec: dict, rng) -> Diagrams:
    landmarks = None
    if spec["n_landmarks"] is not None:
        count = min(spec["n_landmarks"], sample.n_distinct)
        if spec["landmark_method"] == "core_maxmin":  # maxmin on the kept share of this sample only
            kept = int(np.ceil(spec["landmark_options"].get("keep_fraction", 0.9) * sample.n_points))
            count = max(1, min(count, kept))
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
    # classes alive at a finite cap die at the cap in both, as in the study (else one extra makes the radius inf)
    return np.array([diagram_distance(reference.capped(k), diagrams.capped(k)) for k in range(len(reference))])


def bootstrap_method(cloud, opts, run, bandwidth, resolution) -> Band:
    diagrams = _reference(cloud, opts)
    spec = _spec(opts)
    stats = run_replicates(_bootstrap_task, (cloud, diagrams, spec), opts["n_boot"], opts["seed"], **run,
                           fingerprint=_fingerprint(cloud, opts))
    term, calls, reason = _landmark_term(cloud, diagrams)
    radii = tuple(quantile(stats[:, k], opts["level"]) + term for k in range(stats.shape[1]))
    target = f"the {opts['filtration']} diagram of the sampling distribution (as resampling sees it)"
    validity = ("resampling heuristic, not a proven confidence set for this filtration (proofs cover "
                f"distance-to-measure and kernel-distance sublevel sets; {BOOTSTRAP_RIPS_COVERAGE_NOTE})")
    handling = (f"each replicate re-selects its landmarks the same way, and the radius adds the landmark bound "
                f"{term:.4g}, which the replicates' shared landmark spacing hides" if spec["n_landmarks"]
                else "none used (every point)")
    return Band("bootstrap", opts["level"], radii, diagrams, target, validity,
                statement("bootstrap", opts["level"], target, validity), handling, stats, opts["seed"],
                {"n_boot": opts["n_boot"], "landmark_method": spec["landmark_method"], "landmark_term": term},
                calls=calls, no_call_reason=reason)


def _landmark_term(cloud, diagrams) -> tuple[float, bool, str]:
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
def dtm_method(cloud, opts, run, bandwidth, resolution) -> Band:
    diagrams = _reference(cloud, opts)
    params = diagrams.params
    marks = opts["landmarks"]
    vertices = marks.indices if marks is not None else np.arange(cloud.n_points)
    term, calls, reason = _landmark_term(cloud, diagrams)
    table = dtm.neighbour_table(cloud, vertices, int(params["dtm_neighbors"]))
    weights, _ = dtm.weighted_dtm(table)
    stats = run_replicates(dtm.dtm_sup_task, (table, weights), opts["n_boot"], opts["seed"], **run,
                           fingerprint=_fingerprint(cloud, opts, table.k, table.squared.shape[1]))
    power = params.get("dtm_power", 1.0)
    band_params = {"n_boot": opts["n_boot"], "dtm_neighbors": table.k, "dtm_mass": table.k / cloud.n_points,
                   "dtm_power": power, "listed_neighbours": int(table.squared.shape[1]), "landmark_term": term,
                   "weight_quantile": quantile(stats[:, 0], opts["level"]),
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
                statement("dtm", opts["level"], target, validity), handling, stats, opts["seed"], band_params,
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


def landscape_method(cloud, opts, run, bandwidth, resolution) -> Band:
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
    halfwidth = np.array([quantile(theta[:, k], opts["level"]) for k in range(theta.shape[1])])
    halfwidth /= np.sqrt(opts["n_subsamples"])
    target = f"the mean first landscape of {size}-point subsamples ({opts['filtration']})"
    validity = "confidence band for that mean landscape (Chazal et al. 2015, multiplier bootstrap)"
    return Band("landscape", opts["level"], tuple(float(h) for h in halfwidth), diagrams, target, validity,
                statement("landscape", opts["level"], target, validity),
                "subsample diagrams are computed on the subsamples themselves", theta, opts["seed"],
                {"subsample_size": size, "n_subsamples": opts["n_subsamples"], "n_boot": opts["n_boot"]},
                {"grid": grid, "mean": mean, "halfwidth": halfwidth, "landscapes": curves}, calls=False,
                no_call_reason=LANDSCAPE_NO_CALL)


# -- kernel density ----------------------------------------------------------------------------------
def _density_task(payload, rng) -> float:
    grid, density, n = payload
    counts = rng.multinomial(n, grid.counts.ravel() / n).reshape(grid.shape).astype(np.float64)
    return float(np.abs(kde.smooth_counts(grid, counts, n) - density).max())


def density_method(cloud, opts, run, bandwidth, resolution) -> Band:
    if cloud.metric.name not in ("euclidean", "periodic") or not 1 <= cloud.n_dims <= 3:
        raise fail("method", _FN, f"not 'density' for {cloud.n_dims}-coordinate clouds under metric "
                   f"{cloud.metric.name!r} (the grid estimate needs 1 to 3 Euclidean or periodic coordinates); "
                   "use 'subsample', 'bootstrap' or 'landscape'", opts["method"])
    width = kde.scott_bandwidth(cloud.points) if bandwidth is None else \
        check_float(bandwidth, "bandwidth", _FN, low=0.0, low_open=True)
    if not width > 0:
        raise fail("bandwidth", _FN, "a positive kernel width (the points have no spread, so Scott's rule gives 0; "
                   "pass bandwidth= in the data's units)", width)
    _check_bandwidth_reach(cloud, width)
    if resolution is not None:
        resolution = check_int(resolution, "resolution", _FN, low=8, high=4096)
    budget = (opts.get("diagram_options") or {}).get("memory_budget")
    _check_grid_memory(resolution or kde.DEFAULT_RESOLUTION[cloud.n_dims], cloud.n_dims, budget)
    grid = kde.make_density_grid(cloud, width, resolution)
    density = kde.smooth_counts(grid, grid.counts, cloud.n_points)
    diagrams = _density_diagrams(density, grid, opts)
    stats = run_replicates(_density_task, (grid, density, cloud.n_points), opts["n_boot"], opts["seed"], **run,
                           fingerprint=_fingerprint(cloud, opts, width, grid.shape))
    radius = quantile(stats, opts["level"])
    target = f"the superlevel-set diagram of the smoothed density E p_h (h = {width:.4g})"
    validity = "confidence set (Fasy et al. 2014, Section 4.4; sup-norm bootstrap, asymptotically valid)"
    return Band("density", opts["level"], (radius,) * (opts["max_dim"] + 1), diagrams, target, validity,
                statement("density", opts["level"], target, validity),
                "none: the density is estimated from every point", stats, opts["seed"],
                {"bandwidth": width, "grid_shape": grid.shape, "n_boot": opts["n_boot"]},
                {"density": density, "grid_lower": grid.lower, "grid_cell": grid.cell})


def _check_bandwidth_reach(cloud, width: float) -> None:
    """Refuse a kernel wider than the cloud (or than half the periodic box).

    Such a kernel smooths every point into one blob: the estimate has a single mode whatever the data,
    the points fall into a few grid cells, so the bootstrap sees no variation and the radius came out 0
    (a band that calls everything); in a periodic box the kernel also wraps onto itself.
    """
    if cloud.metric.name == "periodic":
        reach, what = 0.5 * min(cloud.metric.box), "half the smallest side of the periodic box"
    else:
        reach, what = float((cloud.points.max(axis=0) - cloud.points.min(axis=0)).max()), "the cloud's widest span"
    if width > reach:
        raise fail("bandwidth", _FN, f"a kernel width no wider than {what}, {reach:.4g} (a kernel wider than that "
                   "smooths the cloud into one blob: one mode whatever the data, and a bootstrap that sees no "
                   "variation, so the band's radius would be 0); leave it None for Scott's rule", width)


# Measured peak growth of binning, smoothing and cubical persistence up to H2:
# 396-433 bytes per grid cell (64^3 and 128^3 grids).
GRID_BYTES_PER_CELL = 450


def _check_grid_memory(resolution: int, n_dims: int, budget: float | None = None) -> None:
    """Refuse a density grid whose persistence would not fit the memory budget (default: a quarter of the
    memory), before allocating it.
    """
    if budget is None:
        budget = default_memory_budget()
    else:
        budget = check_float(budget, "memory_budget", _FN, low=0.0, low_open=True, allow_inf=True)
    need = GRID_BYTES_PER_CELL * float(resolution) ** n_dims
    if need > budget:
        fits = int((budget / GRID_BYTES_PER_CELL) ** (1.0 / n_dims))
        raise MemoryBudgetError(
            f"Refused before building: a {n_dims}-D density grid of {resolution} cells per axis needs about "
            f"{need / 2**30:.3g} GiB (budget {budget / 2**30:.3g} GiB). Use at most resolution={fits}, or raise "
            f"'memory_budget'.", parameter="resolution")


def _density_diagrams(density, grid, opts) -> Diagrams:
    pairs = [p[np.argsort(-(p[:, 1] - p[:, 0]), kind="stable")]  # decreasing persistence, as compute_diagrams
             for p in kde.grid_diagrams(density, opts["max_dim"], grid.periodic)]
    empty = tuple(np.full((len(p), k + 1), -1, dtype=np.intp) for k, p in enumerate(pairs))
    deaths = tuple(np.full((len(p), k + 2), -1, dtype=np.intp) for k, p in enumerate(pairs))
    flags = tuple(np.zeros(len(p), dtype=bool) for p in pairs)
    return Diagrams(tuple(pairs), flags, empty, deaths, filtration="density",
                    units="negated kernel density (superlevel sets)", coefficient_field=2,
                    params={"bandwidth": grid.bandwidth, "location": "not available for grid densities"})
