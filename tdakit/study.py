"""The subsampling study: does the subsampling choice change the topology a run reports?

Over a grid of sampling methods x landmark counts x seeds, every cell selects
landmarks, builds the diagrams and reports its coverage radius eps, the stability
certificate, distances to a reference diagram, the number of significant features
per homology dimension, time and peak memory. The summary says, per method, the
smallest landmark count from which the significant features stop changing.
"""

from __future__ import annotations

import dataclasses
import time
import warnings
from dataclasses import dataclass, field
from pathlib import Path

import numpy as np

from tdakit._memory import PeakMemory
from tdakit._validation import fail
from tdakit.config import StudyOptions
from tdakit.core.geometry.cloud import Cloud
from tdakit.core.geometry.landmarks import select_landmarks
from tdakit.core.inference.confidence import check_subsample_allowed, confidence_band, hausdorff_level, subsample_band
from tdakit.core.inference.replicates import config_fingerprint, root_seed, run_replicates
from tdakit.core.topology.diagrams import Diagrams
from tdakit.core.topology.distances import diagram_distance
from tdakit.core.topology.filtrations import compute_diagrams, default_dtm_neighbors, landmark_constant
from tdakit.errors import TdakitWarning

__all__ = ["StudyResult", "Recommendation", "subsampling_study"]

_FN = "subsampling_study"


@dataclass(frozen=True)
class Recommendation:
    """The smallest landmark count of one method from which the significant features stop changing."""

    method: str
    n_landmarks: int | None
    features: tuple[int, ...] | None
    evidence: str


@dataclass(frozen=True, eq=False)
class StudyResult:
    """Cells, per-setting summary and recommendations of a subsampling study.

    Attributes
    ----------
    cells : pandas.DataFrame
        One row per (method, n_landmarks, seed): ``coverage_radius``, ``certificate``
        (bound on every bottleneck distance to the reference that theory guarantees;
        NaN where no bound is known), ``certificate_holds``, ``bottleneck_H{k}``,
        ``wasserstein_H{k}``, ``significant_H{k}``, ``seconds``, ``peak_memory_mib``.
    summary : pandas.DataFrame
        One row per (method, n_landmarks): worst distances, seed spread and whether the
        significant counts agree across seeds (``stable``).
    recommendations : tuple of Recommendation
    reference : dict
        ``kind`` ("full cloud" or "densest setting"), ``n_landmarks``, ``coverage_radius``.
    reference_diagrams : Diagrams
    options : StudyOptions
    seed : int
    band_note : str
        What "significant" means in this study (the band used and its validity).
    """

    cells: object
    summary: object
    recommendations: tuple[Recommendation, ...]
    reference: dict
    reference_diagrams: Diagrams = field(repr=False)
    options: StudyOptions = field(repr=False)
    seed: int = 0
    band_note: str = ""

    def report(self) -> str:
        """The recommendations with their evidence, in words."""
        lines = [f"Reference: {self.reference['kind']}" + (
            f" ({self.reference['n_landmarks']} landmarks, eps = {self.reference['coverage_radius']:.4g})"
            if self.reference["n_landmarks"] else ""), f"Significance: {self.band_note}"]
        lines += [f"{r.method}: {r.evidence}" for r in self.recommendations]
        held = self.cells["certificate_holds"].dropna()
        if len(held):
            lines.append(f"Stability certificate held in {int(held.sum())} of {len(held)} cells.")
        return "\n".join(lines)

    def save(self, folder) -> list[Path]:
        """Write ``study_cells.csv``, ``study_summary.csv`` and ``study_report.txt`` into ``folder``."""
        folder = Path(folder)
        folder.mkdir(parents=True, exist_ok=True)
        paths = [folder / "study_cells.csv", folder / "study_summary.csv", folder / "study_report.txt"]
        self.cells.to_csv(paths[0], index=False)
        self.summary.to_csv(paths[1], index=False)
        paths[2].write_text(self.report() + "\n")
        return paths


def subsampling_study(
    cloud: Cloud,
    options: StudyOptions | dict | None = None,
    *,
    rng=None,
    n_jobs: int = 1,
    executor=None,
    progress=None,
    checkpoint=None,
) -> StudyResult:
    """Run the subsampling study on one cloud.

    Parameters
    ----------
    cloud : Cloud
    options : StudyOptions or dict, optional
        The grid (methods, counts, n_seeds), the reference and the sampling, complex
        and band options shared by every cell.
    rng : int, Generator or None
        Root randomness; cell i uses child i of ``SeedSequence(seed)``, so results are
        identical for any ``n_jobs`` or executor.
    n_jobs, executor, progress, checkpoint
        As in :func:`tdakit.core.inference.replicates.run_replicates`: local processes, any
        executor with ``submit`` (a Dask client included), ``progress(done, total)``
        per finished chunk of cells, and a resumable checkpoint file.

    Returns
    -------
    StudyResult

    Notes
    -----
    Certificate: for landmarks L of X with coverage radius eps,
    d_B(Dgm X, Dgm L) <= C eps with C = 2 for Rips (edge lengths) and 1 for alpha [1]_.
    Against the densest setting L' the triangle inequality gives C (eps + eps').
    Diagrams stopped at ``max_scale`` are compared with alive-at-cutoff classes dying
    at the cap (truncating both filtrations at one scale keeps the bound). No bound is
    claimed for witness, DTM or sparse Rips complexes.

    With the ``"subsample"`` band one Hausdorff level c serves every cell, whose
    radius is C (c + eps_cell) [2]_; other bands are computed per cell.

    References
    ----------
    .. [1] F. Chazal, V. de Silva, S. Oudot, "Persistence stability for geometric
       complexes", Geom. Dedicata 173 (2014) 193-214.
    .. [2] B. T. Fasy et al., "Confidence sets for persistence diagrams", Ann. Statist.
       42(6) (2014) 2301-2339, Section 4.1.
    """
    import pandas as pd

    if not isinstance(cloud, Cloud):
        raise fail("cloud", _FN, "a Cloud from tdakit.load_cloud", cloud)
    options = _check_options(options, cloud)
    seed = root_seed(rng, _FN)
    grid = [(m, c, s) for m in options.methods for c in options.counts for s in range(options.n_seeds)]
    reference = _reference(cloud, options, np.random.SeedSequence(seed).spawn(len(grid) + 1)[-1])
    level = None
    if options.band.method == "subsample":
        band = options.band
        check_subsample_allowed(cloud, options.complex.filtration, band.method, "band", "StudyOptions")
        level = hausdorff_level(cloud, level=band.level, n_boot=band.n_boot, subsample_size=band.subsample_size,
                                rng=seed, n_jobs=n_jobs, executor=executor)[0]
    payload = (cloud, options, grid, reference, level)
    fingerprint = config_fingerprint(cloud.fingerprint, options.to_dict(), "study")
    rows = run_replicates(_cell_task, payload, len(grid), seed, n_jobs=n_jobs, executor=executor, progress=progress,
                          checkpoint=checkpoint, fingerprint=fingerprint, function=_FN, indexed=True)
    cells = _cells_frame(grid, rows, options.complex.max_dim, pd)
    summary = _summarize(cells, options.complex.max_dim)
    recommendations = tuple(_recommend(summary, m, options.complex.max_dim) for m in options.methods)
    info = {k: v for k, v in reference.items() if k != "diagrams"}
    return StudyResult(cells, summary, recommendations, info, reference["diagrams"], options, seed,
                       _band_note(options.band, level))


def _check_options(options, cloud) -> StudyOptions:
    if options is None:
        options = StudyOptions()
    elif isinstance(options, dict):
        options = StudyOptions.from_dict(options)
    elif not isinstance(options, StudyOptions):
        raise fail("options", _FN, "None, a StudyOptions or a dict of its fields", options)
    if options.band.method == "auto":  # landmarks are what the study compares, so the density band cannot serve
        method = "dtm" if options.complex.filtration == "dtm" else "subsample"
        options = dataclasses.replace(options, band=dataclasses.replace(options.band, method=method))
    if options.complex.filtration == "dtm" and options.complex.dtm_neighbors is None:
        # one weight function for every cell, or their diagrams (and the certificate) would not compare
        k = default_dtm_neighbors(cloud.n_points, max(options.counts))
        options = dataclasses.replace(options, complex=dataclasses.replace(options.complex, dtm_neighbors=k))
    if options.band.method == "density":
        raise fail("options", _FN, "a band other than 'density' (it uses every point and no landmarks, so it cannot "
                   "tell subsampling choices apart)", options.band.method)
    if options.band.method == "dtm" and options.complex.filtration != "dtm":
        raise fail("options", _FN, "complex filtration 'dtm' with the 'dtm' band", options.complex.filtration)
    if options.counts[-1] > cloud.n_distinct:
        raise fail("options", _FN, f"landmark counts of at most the {cloud.n_distinct} distinct points",
                   list(options.counts))
    return options


def _band_note(band, level) -> str:
    if band.method == "none":
        return "no band (significant counts not reported)"
    if band.method == "subsample":
        return (f"subsample band at level {band.level:g}, Hausdorff level c = {level:.4g} shared by all cells, "
                f"radius C (c + eps) per cell (confidence set, conservative)")
    return f"{band.method} band at level {band.level:g} with {band.n_boot} replicates per cell"


# -- reference -----------------------------------------------------------------------------------
def _diagram_call(cloud, marks, options, rng) -> Diagrams:
    complex_ = options.complex
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", TdakitWarning)
        return compute_diagrams(cloud, landmarks=marks, filtration=complex_.filtration, max_dim=complex_.max_dim,
                                rng=rng, **complex_.diagram_options())


def _reference(cloud, options, seed_sequence) -> dict:
    kind = options.reference
    if kind == "auto":
        full_ok = cloud.n_points <= options.full_cloud_limit and options.complex.filtration != "witness"
        kind = "full" if full_ok else "densest"
    if kind == "full":
        if options.complex.filtration == "witness":
            raise fail("reference", "StudyOptions", "'densest' or 'auto' for witness complexes (they need landmarks)",
                       "full")
        rng = np.random.default_rng(seed_sequence)
        return {"kind": "full cloud", "n_landmarks": None, "coverage_radius": 0.0,
                "diagrams": _diagram_call(cloud, None, options, int(rng.integers(2**31)))}
    rng = np.random.default_rng(seed_sequence)
    marks = _select(cloud, options, options.methods[0], options.counts[-1], rng)
    return {"kind": f"densest setting ({options.methods[0]})", "n_landmarks": marks.n_landmarks,
            "coverage_radius": marks.coverage_radius,
            "diagrams": _diagram_call(cloud, marks, options, int(rng.integers(2**31)))}


def _select(cloud, options, method, count, rng):
    sampling = dataclasses.replace(options.sampling, method=method, n_landmarks=count)
    return select_landmarks(cloud, count, method=method, rng=rng, **sampling.landmark_options())


# -- one cell --------------------------------------------------------------------------------------
def _certificate(options, eps, reference) -> float:
    constant = landmark_constant(options.complex.filtration, options.complex.dtm_power)
    if constant is None or options.complex.sparse is not None:
        return np.nan
    return constant * (eps + reference["coverage_radius"])


def _cell_band(cloud, marks, diagrams, options, level, rng):
    band = options.band
    if band.method == "none":
        return None
    if band.method == "subsample":
        return subsample_band(diagrams, level, level=band.level, landmarks=marks,
                              account_for_landmarks=band.account_for_landmarks)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", TdakitWarning)
        return confidence_band(cloud, diagrams, landmarks=marks, rng=rng, **band.to_dict())


def _cell_task(payload, rng, index) -> np.ndarray:
    cloud, options, grid, reference, level = payload
    method, count, _ = grid[index]
    start = time.perf_counter()
    with PeakMemory() as memory:
        marks = _select(cloud, options, method, count, rng)
        diagrams = _diagram_call(cloud, marks, options, int(rng.integers(2**31)))
        band = _cell_band(cloud, marks, diagrams, options, level, int(rng.integers(2**31)))
    seconds = time.perf_counter() - start
    dims = range(options.complex.max_dim + 1)
    ref = reference["diagrams"]
    bottleneck = [diagram_distance(diagrams.capped(k), ref.capped(k)) for k in dims]
    wasserstein = [diagram_distance(diagrams.capped(k), ref.capped(k), kind="wasserstein") for k in dims]
    significant = [np.nan if band is None or not band.calls else float(band.significant(band.diagrams, k).sum())
                   for k in dims]
    return np.array([marks.n_landmarks, marks.coverage_radius, _certificate(options, marks.coverage_radius, reference),
                     seconds, memory.peak_bytes / 2**20, *bottleneck, *wasserstein, *significant], dtype=float)


# -- tables and the recommendation ---------------------------------------------------------------------
def _cells_frame(grid, rows, max_dim, pd):
    dims = range(max_dim + 1)
    names = (["n_landmarks_used", "coverage_radius", "certificate", "seconds", "peak_memory_mib"]
             + [f"bottleneck_H{k}" for k in dims] + [f"wasserstein_H{k}" for k in dims]
             + [f"significant_H{k}" for k in dims])
    frame = pd.DataFrame(np.atleast_2d(rows), columns=names)
    frame.insert(0, "seed", [s for _, _, s in grid])
    frame.insert(0, "n_landmarks", [c for _, c, _ in grid])
    frame.insert(0, "method", [m for m, _, _ in grid])
    worst = frame[[f"bottleneck_H{k}" for k in dims]].max(axis=1)
    holds = worst <= frame["certificate"] * (1 + 1e-9) + 1e-12
    frame["certificate_holds"] = holds.astype("boolean").where(frame["certificate"].notna())
    return frame


def _summarize(cells, max_dim):
    import pandas as pd

    dims = range(max_dim + 1)
    rows = []
    for (method, count), group in cells.groupby(["method", "n_landmarks"], sort=False):
        row = {"method": method, "n_landmarks": count, "n_seeds": len(group),
               "coverage_radius_max": group["coverage_radius"].max(), "certificate_max": group["certificate"].max(),
               "seconds_median": group["seconds"].median(), "peak_memory_mib_max": group["peak_memory_mib"].max()}
        for k in dims:
            row[f"bottleneck_H{k}_max"] = group[f"bottleneck_H{k}"].max()
            row[f"bottleneck_H{k}_spread"] = group[f"bottleneck_H{k}"].max() - group[f"bottleneck_H{k}"].min()
            values = group[f"significant_H{k}"]
            row[f"significant_H{k}"] = values.iloc[0] if values.nunique(dropna=False) == 1 else np.nan
        counts = group[[f"significant_H{k}" for k in dims]]
        row["stable"] = bool(counts.notna().all().all() and (counts.nunique() == 1).all())
        rows.append(row)
    return pd.DataFrame(rows)


def _recommend(summary, method, max_dim) -> Recommendation:
    dims = range(max_dim + 1)
    rows = summary[summary["method"] == method].sort_values("n_landmarks")
    columns = [f"significant_H{k}" for k in dims]
    if rows[columns].isna().all().all():
        return Recommendation(method, None, None, "no band, so no significant features to compare")
    final = tuple(rows[columns].iloc[-1])
    chosen = None
    for position in range(len(rows) - 1, -1, -1):
        row = rows.iloc[position]
        if not (row["stable"] and tuple(row[columns]) == final):
            break
        chosen = row
    if chosen is None:
        largest = int(rows.iloc[-1]["n_landmarks"])
        return Recommendation(method, None, None, f"not reached: at the largest count ({largest}) the seeds "
                              f"disagree; try more landmarks")
    features = tuple(int(v) for v in final)
    text = ", ".join(f"H{k}: {v}" for k, v in enumerate(features))
    if len(rows) > 1 and chosen["n_landmarks"] == rows.iloc[-1]["n_landmarks"]:
        return Recommendation(method, None, None, f"not confirmed: only the largest count "
                              f"({int(chosen['n_landmarks'])}) gives the same features ({text}) for every seed; "
                              f"add larger counts to see whether they stop changing")
    distances = ", ".join(f"H{k} <= {chosen[f'bottleneck_H{k}_max']:.3g}" for k in dims)
    evidence = (f"{int(chosen['n_landmarks'])} landmarks: from this count up to {int(rows.iloc[-1]['n_landmarks'])} "
                f"every seed finds the same significant features ({text}); bottleneck distance to the reference "
                f"{distances}; coverage radius <= {chosen['coverage_radius_max']:.3g}.")
    if sum(features) <= 1:
        evidence += (" No feature beyond one component stands above the band: the band (its landmark bound "
                     "included) may be too wide for these landmarks rather than the data featureless.")
    return Recommendation(method, int(chosen["n_landmarks"]), features, evidence)
