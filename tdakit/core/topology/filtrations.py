"""compute_diagrams: filtrations on landmarks and their persistence diagrams."""

from __future__ import annotations

import warnings
from collections.abc import Callable

import numpy as np

from tdakit._validation import check_bool, check_choice, check_dtm_power, check_float, check_int, check_rng, fail
from tdakit.core.geometry.cloud import Cloud
from tdakit.core.geometry.landmarks import Landmarks, landmarks_from_indices
from tdakit.core.topology import _complexes, _persistence, _witness
from tdakit.core.topology.diagrams import Diagrams
from tdakit.core.topology.preflight import check_dense_matrix, default_memory_budget
from tdakit.errors import FewWitnessesWarning, MemoryBudgetError, TdakitError

__all__ = ["compute_diagrams", "check_filtration_for", "FILTRATIONS", "WITNESS_KINDS", "landmark_constant",
           "stability_constant",
           "witness_edge_values", "default_dtm_neighbors"]

FILTRATIONS = ("alpha", "dtm", "rips", "witness")
WITNESS_KINDS = ("lazy", "strong", "weak")
_FN = "compute_diagrams"
_PRIMES = (2, 3, 5, 7, 11, 13, 17, 19, 23, 29, 31, 37, 41, 43, 47)
# Lazy witness edges cost one evaluation per (witness, landmark pair) under the cap.
MAX_WITNESS_WORK = 3e9
ALPHA_MAX_DIMS = 5
# gudhi's strong witness complex: seconds per (witness, subset of its landmark list), measured (see
# strong_witness_seconds); refused above a few minutes, as the other complexes are refused up front.
STRONG_SECONDS_PER_SUBSET = 6e-7
MAX_STRONG_WITNESS_SECONDS = 120.0


def stability_constant(filtration: str) -> float | None:
    """C with d_B(Dgm(X), Dgm(Y)) <= C d_H(X, Y) for the filtration, or None when no bound applies.

    2 for Rips in edge-length units and 1 for alpha in radius units
    (Chazal, de Silva, Oudot 2014, Geom. Dedicata 173:193-214); none is known
    for tdakit's witness and DTM variants in this form.
    """
    return {"rips": 2.0, "alpha": 1.0}.get(filtration)


def default_dtm_neighbors(n_points: int, n_landmarks: int) -> int:
    """ceil(3 n / n_landmarks), at least 50 and at most n: about three landmarks' share of the cloud.

    Measured (benchmarks/README.md): the resampling spread c of the weights falls like 1/sqrt(k), and
    where maxmin puts landmarks on sparse outliers it decides the band. On the 12-coordinate loop with
    3 % outliers (2,000 points, 30 seeds) power was 0.03 with k = 20 (300 landmarks), 0.43 with k = 30
    (200 landmarks) and 1.0 with k = 50 or 100 at both counts, with no false feature; one landmark's
    share (k = n / n_landmarks) had left c at 0.42 on 4,000 points. Six shares start to shorten real
    loops (torus, 300 landmarks: 1.06 -> 0.80), so three shares, and at least 50 points.
    """
    return int(min(n_points, max(50, -(-3 * n_points // max(n_landmarks, 1)))))


def landmark_constant(filtration: str, dtm_power: float | None = None) -> float | None:
    """Lam with d_B(Dgm on landmarks, Dgm on every point) <= lam * eps, eps the coverage radius.

    Rips 2 (Chazal, de Silva, Oudot 2014), alpha 1; DTM-weighted Rips on the doubled scale with
    1-Lipschitz weights: 2 for p = inf and 4 for p = 1 (sending each point to its nearest
    landmark moves every edge value by at most 2 eps + 2 eps for p = 1 and by 2 eps for p = inf,
    and the point-landmark simplices stay within that shift, so the two filtrations are
    interleaved; see :func:`compute_diagrams`). None where no bound is known (witness).
    """
    if filtration == "dtm":
        return 2.0 if dtm_power == np.inf else 4.0
    return stability_constant(filtration)


def compute_diagrams(
    cloud: Cloud,
    *,
    landmarks: Landmarks | np.ndarray | None = None,
    filtration: str = "rips",
    max_dim: int = 1,
    max_scale: float | None = None,
    coefficient_field: int = 2,
    collapse: bool = True,
    sparse: float | None = None,
    witness: str = "lazy",
    witness_nu: int = 1,
    dtm_neighbors: int | None = None,
    dtm_power: float = np.inf,
    memory_budget: float | None = None,
    rng: int | np.random.Generator | None = None,
    lazy_witness_edges: Callable[..., np.ndarray] | None = None,
) -> Diagrams:
    """Persistence diagrams of a filtration built on the landmarks of a cloud.

    Parameters
    ----------
    cloud : Cloud
        The cloud; all distances use its metric.
    landmarks : Landmarks or array of int, optional
        Vertices of the complex. Default: every point (fine for small clouds; the
        pre-flight refuses what will not fit). Witness complexes require landmarks;
        every cloud point is then a witness.
    filtration : {"rips", "witness", "alpha", "dtm"}, default="rips"
        ``"rips"``: Vietoris-Rips, filtration value = edge length (diameter).
        ``"witness"``: witness complex of kind ``witness``.
        ``"alpha"``: alpha complex, Euclidean clouds of at most 5 dimensions;
        reported as radii sqrt(alpha^2).
        ``"dtm"``: DTM-weighted Rips (distance to measure over the whole cloud with
        ``dtm_neighbors`` points, the point itself counted, q = 2, power ``dtm_power``),
        on gudhi's doubled scale so values sit with Rips lengths.
    max_dim : int, default=1
        Highest homology dimension; simplices up to ``max_dim + 1`` are built.
    max_scale : float, optional
        Stop the filtration here (metric units); classes alive at this scale are
        flagged "alive at cutoff", not essential. Default: the complete filtration.
    coefficient_field : int, default=2
        Prime p of the coefficients Z/p (gudhi's own default is 11; tdakit uses 2).
    collapse : bool, default=True
        Edge-collapse flag complexes before expansion (exact: same diagrams).
        Collapse raises some edges' filtration values, so the located birth and
        death simplices are then simplices of the collapsed complex: their vertices
        lie on the feature, but their size need not equal the birth or death.
        ``params["location"]`` says which; pass ``collapse=False`` for the exact
        birth and death simplices.
    sparse : float, optional
        Rips only: build the sparse Rips approximation with this epsilon in (0, 1);
        log-scale diagrams are then within -log(1 - epsilon) in bottleneck distance.
    witness : {"lazy", "weak", "strong"}, default="lazy"
        ``"lazy"``: lazy witness complex with ``witness_nu``, length units.
        ``"weak"`` / ``"strong"``: gudhi's witness complexes, relaxation reported as
        sqrt(alpha^2) in length units.
    witness_nu : {0, 1, 2}, default=1
        nu of the lazy witness complex.
    dtm_neighbors : int, optional
        Points k in each distance-to-measure average (``"dtm"``), the point itself
        counted; the mass is m = k / n. Default: three times the cloud's points per
        landmark, ceil(3 n / n_landmarks), at least 50, so the weights smooth over about
        three landmarks' share of the cloud (measured choice, see ``default_dtm_neighbors``).
    dtm_power : {1, inf}, default=inf
        The p of the DTM-weighted Rips filtration [4]_, doubled as gudhi does: p = 1 gives
        edges max(d + w_a + w_b, 2 w_a, 2 w_b) (gudhi's DTM-Rips); p = inf gives
        max(d, 2 w_a, 2 w_b), Rips whose vertices wait for their weight, so holes smaller
        than the local weight never open. The landmark certificate is 4 eps for p = 1 and
        2 eps for p = inf (``params["landmark_bound"]``).
    memory_budget : float, optional
        Bytes the complex may use at its persistence peak; default a quarter of the
        machine's (or the container's) memory, the same on every run. Larger complexes are
        refused before they are built.
    rng : int, Generator or None
        Seed for the sparse Rips construction (the only random step).
    lazy_witness_edges : callable, optional
        Where the lazy witness edge values come from (``filtration="witness"``, ``witness="lazy"``;
        unused otherwise): a function with the signature of :func:`witness_edge_values`,
        ``f(cloud, landmark_indices, nu=..., max_scale=...)``, returning the same matrix, e.g. one
        computed on a cluster (:func:`tdakit.distributed.witness_edge_values_distributed`). Default:
        computed here. The complex is built here from the matrix either way; gudhi's weak and
        strong witness complexes are always built in this process.

    Returns
    -------
    Diagrams
        ``D[k]`` is the (m, 2) array of (birth, death) in dimension k.

    Raises
    ------
    MemoryBudgetError
        The predicted complex exceeds ``memory_budget``.

    References
    ----------
    .. [1] V. de Silva, G. Carlsson, "Topological estimation using witness complexes",
       Symposium on Point-Based Graphics (2004).
    .. [2] J.-D. Boissonnat, S. Pritam, "Edge collapse and persistence of flag complexes",
       SoCG 2020.
    .. [3] D. R. Sheehy, "Linear-size approximations to the Vietoris-Rips filtration",
       Discrete Comput. Geom. 49 (2013) 778-796.
    .. [4] H. Anai et al., "DTM-based filtrations", SoCG 2019.
    .. [5] H. Edelsbrunner, D. Kirkpatrick, R. Seidel, "On the shape of a set of points
       in the plane", IEEE Trans. Inform. Theory 29 (1983) 551-559.
    """
    opts = _check_options(cloud, landmarks, filtration, max_dim, max_scale, coefficient_field, collapse,
                          sparse, witness, witness_nu, dtm_neighbors, dtm_power, memory_budget)
    if lazy_witness_edges is not None and not callable(lazy_witness_edges):
        raise fail("lazy_witness_edges", _FN, "None or a function like witness_edge_values(cloud, landmarks, nu=, "
                   "max_scale=)", lazy_witness_edges)
    opts["edges"] = lazy_witness_edges
    marks, cap = opts["landmarks"], opts["cap"]
    tree, squared = _build(cloud, marks, opts, rng)
    per_dim = _persistence.tree_pairs(tree, opts["max_dim"], opts["field"])
    pairs, flags, births, deaths = _persistence.assemble(per_dim, marks.indices, squared=squared,
                                                         cap_reached=bool(np.isfinite(cap)))
    params = _provenance(cloud, marks, opts, tree)
    return Diagrams(pairs, flags, births, deaths, filtration=opts["filtration"], units=_units(cloud, opts),
                    max_scale=cap, coefficient_field=opts["field"], params=params)


def _check_options(cloud, landmarks, filtration, max_dim, max_scale, field, collapse, sparse, witness, nu,
                   dtm_neighbors, dtm_power, budget):
    if not isinstance(cloud, Cloud):
        raise fail("cloud", _FN, "a Cloud from tdakit.load_cloud", cloud)
    opts = {"filtration": check_choice(filtration, "filtration", _FN, FILTRATIONS),
            "max_dim": check_int(max_dim, "max_dim", _FN, low=0, high=8),
            "field": check_int(field, "coefficient_field", _FN, low=2, high=47),
            "collapse": check_bool(collapse, "collapse", _FN),
            "witness": check_choice(witness, "witness", _FN, WITNESS_KINDS),
            "nu": check_int(nu, "witness_nu", _FN, low=0, high=2),
            "dtm_neighbors": None if dtm_neighbors is None else check_int(
                dtm_neighbors, "dtm_neighbors", _FN, low=1, high=cloud.n_points if filtration == "dtm" else None),
            "dtm_power": check_dtm_power(dtm_power, _FN),
            "budget": default_memory_budget() if budget is None else
            check_float(budget, "memory_budget", _FN, low=0.0, low_open=True, allow_inf=True)}
    if opts["field"] not in _PRIMES:
        raise fail("coefficient_field", _FN, "a prime number up to 47 (Z/p coefficients), e.g. 2 or 3", field)
    opts["cap"] = np.inf if max_scale is None else check_float(max_scale, "max_scale", _FN, low=0.0,
                                                               low_open=True, allow_inf=True)
    if sparse is not None:
        if opts["filtration"] != "rips":
            raise fail("sparse", _FN, "None unless filtration='rips'", sparse)
        sparse = check_float(sparse, "sparse", _FN, low=0.0, high=1.0, low_open=True, high_open=True)
    opts["sparse"] = sparse
    opts["landmarks"] = _as_landmarks(cloud, landmarks, opts["filtration"])
    if opts["dtm_neighbors"] is None:
        opts["dtm_neighbors"] = default_dtm_neighbors(cloud.n_points, opts["landmarks"].n_landmarks)
    _check_geometry(cloud, opts)
    return opts


def _as_landmarks(cloud, landmarks, filtration) -> Landmarks:
    if landmarks is None:
        if filtration == "witness":
            raise fail("landmarks", _FN, "landmarks (from select_landmarks) when filtration='witness'", None)
        return landmarks_from_indices(cloud, np.arange(cloud.n_points), method="all points")
    if isinstance(landmarks, Landmarks):
        if landmarks.nearest.size != cloud.n_points:
            raise fail("landmarks", _FN, f"landmarks selected from this cloud of {cloud.n_points} points",
                       landmarks)
        return landmarks
    try:
        return landmarks_from_indices(cloud, landmarks)
    except TdakitError as exc:  # re-worded with this function's name
        raise fail("landmarks", _FN, f"a Landmarks object or indices into the cloud ({exc})", landmarks) from None


def check_filtration_for(cloud, filtration: str, function: str = _FN) -> None:
    """Refuse a filtration that cannot be built on this cloud's metric or dimension (before any work).

    Alpha complexes are Euclidean only (a periodic box, the sky or a cosine metric have no Delaunay
    triangulation in gudhi) and at most ``ALPHA_MAX_DIMS`` coordinates; Rips, DTM and witness complexes
    use tdakit's distances, so they work under every metric.
    """
    if filtration != "alpha":
        return
    if cloud.metric.name != "euclidean":
        raise fail("filtration", function, f"not 'alpha' for metric {cloud.metric.name!r} (alpha complexes are "
                   "Euclidean only; use 'rips', 'dtm' or 'witness', which use this metric's distances)", filtration)
    if cloud.n_dims > ALPHA_MAX_DIMS:
        raise fail("filtration", function, f"not 'alpha' for {cloud.n_dims}-dimensional points (at most "
                   f"{ALPHA_MAX_DIMS}; the Delaunay triangulation explodes above); use 'rips' or 'witness'",
                   filtration)


def _check_geometry(cloud, opts):
    marks, kind = opts["landmarks"], opts["filtration"]
    check_filtration_for(cloud, kind)
    if kind == "witness" and marks.witnesses_per_landmark < 10:
        warnings.warn(f"Only {marks.witnesses_per_landmark:.3g} witnesses per landmark; witness complexes are "
                      "unreliable below 10 (published examples use 20 to 300).", FewWitnessesWarning, stacklevel=4)


def _build(cloud, marks, opts, rng):
    idx, dim, cap, budget = marks.indices, opts["max_dim"], opts["cap"], opts["budget"]
    kind = opts["filtration"]
    if kind == "rips" and opts["sparse"] is not None:
        seed = int(check_rng(rng, _FN).integers(2**31 - 1))
        opts["sparse_seed"] = seed
        return _complexes.sparse_rips_tree(cloud, idx, dim, cap, sparse=opts["sparse"], seed=seed, budget=budget)
    if kind == "rips":
        return _complexes.rips_tree(cloud, idx, dim, cap, collapse=opts["collapse"], budget=budget)
    if kind == "dtm":
        return _complexes.dtm_tree(cloud, idx, dim, cap, k=opts["dtm_neighbors"], power=opts["dtm_power"],
                                   collapse=opts["collapse"],
                                   budget=budget)
    if kind == "alpha":
        return _complexes.alpha_tree(cloud, idx, dim, cap, budget=budget)
    if opts["witness"] == "lazy":
        _check_witness_work(cloud, idx, opts)
        if opts["edges"] is not None:
            return _given_witness_tree(cloud, idx, opts), False
        return _complexes.lazy_witness_tree(cloud, idx, dim, cap, nu=opts["nu"], collapse=opts["collapse"],
                                            budget=budget)
    _check_witness_table(cloud, idx, opts)
    return _complexes.gudhi_witness_tree(cloud, idx, dim, cap, strong=opts["witness"] == "strong")


def _given_witness_tree(cloud, idx, opts):
    """The lazy witness complex on edge values from the caller's function (e.g. computed on a cluster)."""
    check_dense_matrix(idx.size, opts["budget"])  # the matrix held here, and its copy when collapse re-checks
    matrix = opts["edges"](cloud, idx, nu=opts["nu"], max_scale=opts["cap"])
    _check_given_edges(matrix, idx.size)
    return _complexes.flag_tree(matrix, opts["cap"], opts["max_dim"], collapse=opts["collapse"],
                                budget=opts["budget"], what="lazy witness complex")


def _check_given_edges(matrix, n_landmarks: int) -> None:
    """Refuse a matrix that cannot be lazy witness edge values between ``n_landmarks`` landmarks."""
    shape = (n_landmarks, n_landmarks)
    if not isinstance(matrix, np.ndarray) or matrix.shape != shape or matrix.dtype != np.float64:
        got = matrix if not isinstance(matrix, np.ndarray) else f"an array of shape {matrix.shape}, {matrix.dtype}"
        raise fail("lazy_witness_edges", _FN, f"a function returning a float64 array of shape {shape} (one value "
                   "per pair of landmarks)", got)
    if np.isnan(matrix).any() or (matrix < 0).any() or (np.diagonal(matrix) != 0).any() \
            or not np.array_equal(matrix, matrix.T):
        raise fail("lazy_witness_edges", _FN, "a function returning lazy witness edge values: symmetric, "
                   "non-negative, no NaN, zero diagonal", "a matrix that is not")


def _check_witness_work(cloud, idx, opts):
    work = _witness.lazy_witness_work(cloud, idx, opts["nu"], opts["cap"])
    if work > MAX_WITNESS_WORK:
        fits = max(2, int(idx.size * np.sqrt(MAX_WITNESS_WORK / work)))
        raise MemoryBudgetError(
            f"Refused before building: the lazy witness edges need about {work:.3g} witness-pair evaluations "
            f"(limit {MAX_WITNESS_WORK:.3g}, hours of work). Give a finite 'max_scale' (only landmark pairs "
            f"within it of a witness are evaluated) or use fewer landmarks: with this max_scale about "
            f"n_landmarks={fits} (the pairs per witness grow like the square of the landmarks within reach).",
            parameter="max_scale")


def _check_witness_table(cloud, idx, opts):
    if not np.isfinite(opts["cap"]) and cloud.n_points * idx.size > 2e7:
        raise MemoryBudgetError(
            f"Refused before building: gudhi's {opts['witness']} witness complex with no 'max_scale' lists every "
            f"landmark for every witness ({cloud.n_points} x {idx.size} entries). Give a finite 'max_scale' "
            f"(for example 2 to 4 times the coverage radius).", parameter="max_scale")
    if opts["witness"] == "strong":
        _check_strong_witness_time(cloud, idx, opts)


def strong_witness_seconds(lengths, weight: float, max_dim: int) -> float:
    """Predicted seconds of gudhi's strong witness complex: it visits every subset of each witness's list.

    Measured with gudhi 3.13 (200 Gaussian points in R^3, 10-16 landmarks, no cap): 3.6-6.2e-7 s per
    witness and subset for max_dim 1 (20 landmarks predicted 105 s, 107 s observed), 1.0-2.2e-6 s for
    max_dim 2, rising with the list length; larger max_dim is charged more, unmeasured.
    """
    per_subset = STRONG_SECONDS_PER_SUBSET * (1.0 if max_dim <= 1 else 4.0 * (max_dim - 1))
    log2_total = float(np.logaddexp2.reduce(lengths)) + np.log2(weight)
    return float(2.0 ** min(log2_total, 1000.0) * per_subset)


def _check_strong_witness_time(cloud, idx, opts):
    lengths, weight = _witness.table_lengths(cloud, idx, opts["cap"], opts["max_dim"] + 2)
    seconds = strong_witness_seconds(lengths, weight, opts["max_dim"])
    if seconds <= MAX_STRONG_WITNESS_SECONDS:
        return
    per_subset = seconds / (2.0 ** float(np.logaddexp2.reduce(lengths)) * weight)
    fits = int(np.floor(np.log2(MAX_STRONG_WITNESS_SECONDS / (cloud.n_points * per_subset))))
    raise MemoryBudgetError(
        f"Refused before building: gudhi's strong witness complex visits every subset of each witness's list of "
        f"nearby landmarks (here up to {int(lengths.max())} landmarks, 2^{int(lengths.max())} subsets, for each of "
        f"{cloud.n_points} witnesses): about {_duration(seconds)} of work (limit {MAX_STRONG_WITNESS_SECONDS:g} s). "
        f"Use at most {max(fits, 2)} landmarks without a cap, give a finite 'max_scale' (each witness then lists "
        f"only the landmarks within it), or choose witness='weak' or 'lazy'.", parameter="landmarks")


def _duration(seconds: float) -> str:
    if seconds < 120:
        return f"{seconds:.3g} s"
    if seconds < 7200:
        return f"{seconds / 60:.3g} minutes"
    return f"{seconds / 3600:.3g} hours"


def _units(cloud, opts) -> str:
    base = cloud.metric.units
    kind = opts["filtration"]
    if kind == "rips":
        return f"{base}; Rips edge length"
    if kind == "dtm":
        return f"{base}; DTM-Rips value (doubled, Rips scale)"
    if kind == "alpha":
        return f"{base}; alpha radius sqrt(alpha^2)"
    if opts["witness"] == "lazy":
        return f"{base}; lazy witness value (nu={opts['nu']})"
    return f"{base}; {opts['witness']} witness relaxation sqrt(alpha^2)"


def _location(opts) -> str:
    flag = opts["filtration"] in ("rips", "dtm") or (opts["filtration"] == "witness" and opts["witness"] == "lazy")
    if flag and opts["collapse"] and opts["sparse"] is None and opts["max_dim"] >= 1:
        return "collapsed complex: vertices lie on the feature; simplex sizes may differ from birth and death"
    return "exact birth and death simplices"


def _provenance(cloud, marks, opts, tree) -> dict:
    constant = landmark_constant(opts["filtration"], opts["dtm_power"]) if opts["sparse"] is None else None
    bound = constant * marks.coverage_radius if constant is not None and cloud.metric.is_metric else None
    params = {key: opts[key] for key in ("max_dim", "collapse", "sparse", "budget")}
    params.update(
        filtration=opts["filtration"], n_landmarks=marks.n_landmarks, landmark_method=marks.method,
        coverage_radius=marks.coverage_radius, landmark_bound=bound, n_simplices=int(tree.num_simplices()),
        metric=cloud.metric.to_dict(), max_scale=opts["cap"], location=_location(opts))
    if opts["filtration"] == "witness":
        params.update(witness=opts["witness"], witness_nu=opts["nu"] if opts["witness"] == "lazy" else None)
    if opts["filtration"] == "dtm":
        params.update(dtm_neighbors=opts["dtm_neighbors"], dtm_power=opts["dtm_power"],
                      dtm_mass=opts["dtm_neighbors"] / cloud.n_points)
    if opts["sparse"] is not None:
        params.update(sparse_seed=opts.get("sparse_seed"), sparse_log_bound=-float(np.log1p(-opts["sparse"])))
    return params


def witness_edge_values(
    cloud: Cloud, landmarks: Landmarks | np.ndarray, *, nu: int = 1, max_scale: float | None = None
) -> np.ndarray:
    """Lazy witness edge values between the landmarks, every cloud point a witness.

    Returns the (n_landmarks, n_landmarks) matrix e(a, b) = max(0, min_w [max(d(a, w),
    d(b, w)) - m_nu(w)]), with m_nu(w) the distance from w to its nu-th nearest
    landmark (0 for nu = 0); zero diagonal; inf above ``max_scale``. A simplex of the
    lazy witness complex enters at the largest value among its edges.

    References
    ----------
    .. [1] V. de Silva, G. Carlsson, "Topological estimation using witness complexes",
       Symposium on Point-Based Graphics (2004).
    """
    fn = "witness_edge_values"
    if not isinstance(cloud, Cloud):
        raise fail("cloud", fn, "a Cloud from tdakit.load_cloud", cloud)
    marks = _as_landmarks(cloud, landmarks, "witness")
    nu = check_int(nu, "nu", fn, low=0, high=min(2, marks.n_landmarks))
    cap = np.inf if max_scale is None else check_float(max_scale, "max_scale", fn, low=0.0, low_open=True,
                                                       allow_inf=True)
    return _witness.lazy_witness_edges(cloud, marks.indices, nu, cap)
