"""The one pipeline: cloud -> landmarks -> diagrams -> band -> significance, with provenance.

The command line, the widgets and the notebooks all call :func:`analyze`; nothing
else chains the steps.
"""

from __future__ import annotations

import dataclasses
import datetime
import platform
import time
from collections.abc import Callable
from dataclasses import dataclass, field
from functools import cached_property
from pathlib import Path

import numpy as np
from numpy.typing import NDArray

from tdakit._memory import PeakMemory
from tdakit._validation import fail
from tdakit.config import AnalysisOptions
from tdakit.core.geometry.cloud import Cloud
from tdakit.core.geometry.landmarks import Landmarks, select_landmarks
from tdakit.core.inference.bands import Band
from tdakit.core.inference.confidence import confidence_band
from tdakit.core.inference.replicates import root_seed
from tdakit.core.inference.tables import significance_table
from tdakit.core.topology.diagrams import Diagrams
from tdakit.core.topology.filtrations import check_filtration_for, compute_diagrams
from tdakit.errors import InvalidDataError

__all__ = ["RunResult", "RunSteps", "analyze", "auto_band", "check_options", "rerun", "PREVIEW_POINTS"]

PREVIEW_POINTS = 20_000
_FN = "analyze"


@dataclass(frozen=True, eq=False)
class RunResult:
    """Everything one analysis produced, enough to redraw its figures and tables without recomputing.

    Attributes
    ----------
    options : AnalysisOptions
    seed : int
        Root seed; :func:`rerun` with it reproduces every number.
    landmarks : Landmarks or None
        None when every point was a vertex.
    landmark_points : ndarray of shape (n_landmarks, n_dims)
        Landmark coordinates (for figures; width 0 for a precomputed metric).
    preview_indices, preview_points : ndarray
        A random display sample of at most ``PREVIEW_POINTS`` points of the cloud.
    diagrams : Diagrams
    band : Band or None
    timings : dict
        Seconds per step.
    peak_memory : dict
        ``bytes`` (peak resident memory of this process during the run) and ``scope``.
    provenance : dict
        Versions, input description and checksum, creation time.
    """

    options: AnalysisOptions
    seed: int
    landmarks: Landmarks | None
    landmark_points: NDArray[np.float64] = field(repr=False)
    preview_indices: NDArray[np.intp] = field(repr=False)
    preview_points: NDArray[np.float64] = field(repr=False)
    diagrams: Diagrams = field(repr=False)
    band: Band | None
    timings: dict = field(default_factory=dict)
    peak_memory: dict = field(default_factory=dict)
    provenance: dict = field(default_factory=dict, repr=False)

    @property
    def coverage_radius(self) -> float:
        """Every point lies within this distance of a landmark (0 without landmarks)."""
        return 0.0 if self.landmarks is None else self.landmarks.coverage_radius

    @cached_property
    def table(self):
        """Every class with its significance, as a pandas DataFrame (see :func:`significance_table`).

        Built once per run (figures and widgets read it repeatedly); do not modify it in place.
        """
        return significance_table(self.diagrams, self.band)

    def landmark_coordinates(self, indices) -> NDArray[np.float64]:
        """Coordinates of cloud indices that are landmarks (e.g. a feature's vertices)."""
        if self.landmarks is None:
            raise InvalidDataError("This run used every point as a vertex and kept only a preview of the cloud; "
                                   "feature locations need the cloud itself.", parameter="indices")
        lookup = {int(v): i for i, v in enumerate(self.landmarks.indices)}
        return self.landmark_points[[lookup[int(v)] for v in indices]]

    @property
    def unit(self) -> str | None:
        """The unit of the coordinates (and so of every scale in the run), None when unnamed."""
        return self.provenance.get("input", {}).get("unit")

    def summary(self) -> str:
        source = self.provenance.get("input", {})
        lines = [f"Run on {source.get('n_points', '?')} points ({source.get('source', '?')}), seed {self.seed}."]
        if self.landmarks is not None:
            lines.append(f"{self.landmarks.n_landmarks} landmarks by {self.landmarks.method}; coverage radius "
                         f"{self.coverage_radius:.4g}.")
        lines.append(self.diagrams.summary())
        lines.append(self.band.summary() if self.band is not None else "No confidence band (method 'none').")
        steps = ", ".join(f"{k} {v:.2f} s" for k, v in self.timings.items())
        lines.append(f"Time: {steps}. Peak memory {self.peak_memory.get('bytes', 0) / 2**20:.0f} MiB "
                     f"({self.peak_memory.get('scope', '?')}).")
        return "\n".join(lines)

    def at_level(self, level: float) -> RunResult:
        """The same run with its band re-read at another level (instant: no replicate is recomputed)."""
        from tdakit.core.inference.confidence import band_at_level

        if self.band is None:
            raise fail("level", "RunResult.at_level", "used only on a run with a band", level)
        band = band_at_level(self.band, level)
        options = dataclasses.replace(self.options, band=dataclasses.replace(self.options.band, level=band.level))
        return dataclasses.replace(self, band=band, options=options)

    def save(self, path) -> Path:
        """Write the run file (see :func:`tdakit.io.save_run`)."""
        from tdakit.io.runfiles import save_run

        return save_run(self, path)


def _check_options(options) -> AnalysisOptions:
    if options is None:
        return AnalysisOptions()
    if isinstance(options, dict):
        return AnalysisOptions.from_dict(options)
    if not isinstance(options, AnalysisOptions):
        raise fail("options", _FN, "None, an AnalysisOptions or a dict of its sections", options)
    return options


SEED_SCHEME = 2
"""How the root seed reaches the steps; recorded in the provenance so older runs replay exactly.

Scheme 2: the landmarks draw from the root seed itself, so ``analyze(cloud, rng=s)``, ``tdakit analyze --seed s``
and ``select_landmarks(cloud, n, rng=s)`` pick the same landmarks; diagrams, band and preview draw from
independent children of ``SeedSequence(s)``. Scheme 1 (runs made before it was recorded): the landmarks drew
from a child too.
"""


def _step_seeds(seed: int, scheme: int = SEED_SCHEME) -> list[int]:
    """Seeds for landmarks, diagrams, band and preview, from the root seed."""
    seeds = [int(s) for s in np.random.SeedSequence(seed).generate_state(4, np.uint32)]
    if scheme >= 2:
        seeds[0] = seed
    return seeds


@dataclass(frozen=True)
class RunSteps:
    """The functions behind a run's landmark and witness steps, and the executor of its replicates.

    :func:`analyze` runs with the in-memory functions (the default) or, with ``scheduler=``, with those
    :func:`tdakit.distributed.scheduler.SchedulerSession.steps` builds for a Dask cluster; every function
    returns what the in-memory one would, so the numbers do not depend on where the steps run.

    Attributes
    ----------
    landmarks : callable
        ``f(cloud, n_landmarks, *, method, rng, **options) -> Landmarks``, as :func:`select_landmarks`.
    lazy_witness_edges : callable or None
        As :func:`witness_edge_values`, for the lazy witness complex (passed to :func:`compute_diagrams`);
        None computes the edge values in this process. gudhi's weak and strong witness complexes and every
        other complex are built in this process.
    replicates : object with ``submit`` or None
        The executor of the band's replicates (None: the ``n_jobs`` and ``executor`` given to :func:`analyze`).
    cluster_methods : tuple of str
        The landmark methods ``landmarks`` runs on a cluster (recorded in the provenance; the others run here).
    """

    landmarks: Callable[..., Landmarks] = select_landmarks
    lazy_witness_edges: Callable[..., NDArray[np.float64]] | None = None
    replicates: object | None = None
    cluster_methods: tuple[str, ...] = ()

    def placement(self, options: AnalysisOptions) -> dict[str, str]:
        """Where each step of a run with these (checked) options runs.

        "cluster" (the scheduler's workers), "driver" (this machine: the process that called :func:`analyze`,
        and for the replicates its ``n_jobs`` local processes) or "not used". ``"diagrams"`` is the complex
        and its persistence, always built here.
        """
        sampling, complex_, band = options.sampling, options.complex, options.band

        def where(on_cluster: bool, used: bool = True) -> str:
            return "not used" if not used else ("cluster" if on_cluster else "driver")

        lazy = complex_.filtration == "witness" and complex_.witness == "lazy"
        return {"landmarks": where(sampling.method in self.cluster_methods, sampling.n_landmarks is not None),
                "witness": where(lazy and self.lazy_witness_edges is not None, complex_.filtration == "witness"),
                "diagrams": "driver",
                "replicates": where(self.replicates is not None, band.method != "none")}


IN_MEMORY = RunSteps()


def analyze(
    cloud: Cloud,
    options: AnalysisOptions | dict | None = None,
    *,
    rng=None,
    n_jobs: int = 1,
    executor=None,
    progress: Callable[[str, int, int], None] | None = None,
    checkpoint=None,
    scheduler: str | None = None,
) -> RunResult:
    """Run the whole job on one cloud: landmarks, diagrams, confidence band, significance.

    Parameters
    ----------
    cloud : Cloud
        From :func:`tdakit.load_cloud`.
    options : AnalysisOptions or dict, optional
        Sampling, complex and band options (default: 200 maxmin landmarks, the DTM-weighted
        Rips filtration up to H1 and the band ``"auto"`` at 0.95: the test that was calibrated
        and most powerful on tdakit's planted-truth evaluation for the data at hand, see
        :func:`auto_band` and ``benchmarks/README.md``).
        Contradictory options (the DTM band on another filtration; the density band, which
        builds its own diagrams from every point, with landmark or complex options) are
        refused.
    rng : int, Generator or None
        Root randomness; the run records the root seed it used. The landmarks draw from the
        root seed itself: ``select_landmarks(cloud, n, rng=s)`` picks the same ones.
    n_jobs, executor, checkpoint
        Passed to :func:`confidence_band` for the replicates (the checkpoint file keeps the
        finished replicates; a rerun with the same cloud, options and seed resumes from it
        and gives the same numbers).
    progress : callable, optional
        ``progress(step, done, total)`` with ``step`` in ``"landmarks"``, ``"diagrams"``
        (0 of 1 at the start, 1 of 1 at the end) and ``"band"`` (replicates done of the
        total, first 0 of the total when the band starts).
    scheduler : str, optional
        A Dask scheduler address or ``"local"`` (see :mod:`tdakit.distributed.scheduler`): the
        landmarks (methods the cluster offers, see ``tdakit.distributed.landmarks.DISTRIBUTED_METHODS``),
        the lazy witness edge values (every point a witness) and the band's replicates run on that
        cluster, with the numbers of the same run without a scheduler. The complex and its
        persistence, gudhi's weak and strong witness complexes, other landmark methods and every
        step on a precomputed distance matrix run in this process. ``provenance["scheduler"]``
        records the address, the workers' versions and where each step ran (``"steps"``).

    Returns
    -------
    RunResult
    """
    if not isinstance(cloud, Cloud):
        raise fail("cloud", _FN, "a Cloud from tdakit.load_cloud", cloud)
    options = _check_combination(cloud, _check_options(options))
    if progress is not None and not callable(progress):
        raise fail("progress", _FN, "None or a callable progress(step, done, total)", progress)
    if scheduler is not None and executor is not None:
        raise fail("executor", _FN, "None when a scheduler is given (the scheduler's client runs the replicates)",
                   executor)
    seed = root_seed(rng, _FN)
    run = {"n_jobs": n_jobs, "executor": executor, "checkpoint": checkpoint}
    if scheduler is None:
        return _run(cloud, options, seed, SEED_SCHEME, progress, run)
    return _run_on_scheduler(scheduler, cloud, options, seed, progress, run)


def _run_on_scheduler(scheduler, cloud, options, seed, progress, run) -> RunResult:
    """The run with the cluster's step functions; provenance records the cluster and where each step ran."""
    from tdakit.distributed.scheduler import open_scheduler  # dask only when asked for

    session = open_scheduler(scheduler, _FN)
    try:
        steps = _for_cloud(cloud, session.steps())
        result = _run(cloud, options, seed, SEED_SCHEME, progress, run, steps)
        record = {**session.record(), "steps": steps.placement(options)}
    finally:
        session.close()
    return dataclasses.replace(result, provenance={**result.provenance, "scheduler": record})


def _for_cloud(cloud: Cloud, steps: RunSteps) -> RunSteps:
    """A precomputed distance matrix cannot be split over workers: its landmarks and witnesses stay here."""
    if cloud.distance_matrix is None:
        return steps
    return dataclasses.replace(steps, landmarks=select_landmarks, lazy_witness_edges=None, cluster_methods=())


def _run(cloud, options, seed, scheme, progress, run, steps: RunSteps = IN_MEMORY) -> RunResult:
    seeds = _step_seeds(seed, scheme)
    report = progress or (lambda step, done, total: None)
    timings: dict[str, float] = {}
    if steps.replicates is not None:
        run = {**run, "executor": steps.replicates}
    with PeakMemory() as memory:
        marks = _landmarks(cloud, options, seeds[0], timings, report, steps.landmarks)
        diagrams, band = _diagrams_and_band(cloud, marks, options, seeds, timings, report, run,
                                            steps.lazy_witness_edges)
    preview = _preview(cloud, seeds[3])
    points = cloud.points[marks.indices] if marks is not None else np.zeros((0, cloud.n_dims))
    info = provenance(cloud, options, seed)
    info["seed_scheme"] = scheme
    return RunResult(options, seed, marks, points, preview, cloud.points[preview], diagrams, band, timings,
                     {"bytes": memory.peak_bytes, "scope": memory.scope}, info)


def _landmarks(cloud, options, seed, timings, report, select) -> Landmarks | None:
    sampling = options.sampling
    if sampling.n_landmarks is None:
        return None
    start = time.perf_counter()
    report("landmarks", 0, 1)
    marks = select(cloud, sampling.n_landmarks, method=sampling.method, rng=seed, **sampling.landmark_options())
    report("landmarks", 1, 1)
    timings["landmarks"] = time.perf_counter() - start
    return marks


def _diagrams_and_band(cloud, marks, options, seeds, timings, report, run,
                       witness_edges) -> tuple[Diagrams, Band | None]:
    complex_, band_options = options.complex, options.band
    start = time.perf_counter()
    total = band_options.n_subsamples if band_options.method == "landscape" else band_options.n_boot
    band_kwargs = {"rng": seeds[2], "progress": lambda done, n: report("band", done, n), **run,
                   **band_options.to_dict()}
    report("diagrams", 0, 1)
    if band_options.method == "density":  # it builds its own diagrams, from every point, before the replicates
        band_kwargs["progress"] = _after_first(lambda: report("diagrams", 1, 1), band_kwargs["progress"])
        budget = complex_.memory_budget
        band = confidence_band(cloud, max_dim=complex_.max_dim, **band_kwargs,
                               diagram_options=None if budget is None else {"memory_budget": budget})
        timings["diagrams + band"] = time.perf_counter() - start
        return band.diagrams, band
    diagrams = compute_diagrams(cloud, landmarks=marks, filtration=complex_.filtration,
                                max_dim=complex_.max_dim, rng=seeds[1], lazy_witness_edges=witness_edges,
                                **complex_.diagram_options())
    report("diagrams", 1, 1)
    timings["diagrams"] = time.perf_counter() - start
    if band_options.method == "none":
        return diagrams, None
    start = time.perf_counter()
    report("band", 0, total)
    band = confidence_band(cloud, diagrams, landmarks=marks, **band_kwargs)
    timings["band"] = time.perf_counter() - start
    return diagrams, band


def _after_first(first: Callable[[], None], then: Callable[[int, int], None]) -> Callable[[int, int], None]:
    """``then``, preceded once by ``first`` (the density band's diagrams are done when its replicates report)."""
    pending = [first]

    def call(done: int, total: int) -> None:
        if pending:
            pending.pop()()
        then(done, total)

    return call


def auto_band(cloud: Cloud, options: AnalysisOptions) -> str:
    """The band ``method="auto"`` stands for, from tdakit's planted-truth evaluation (``benchmarks/README.md``).

    Density in 1-3 plain coordinates with default landmarks and complex (it needs no landmarks, so the landmark
    spacing costs it nothing); otherwise the DTM band on the DTM complex (any number of coordinates, any
    metric), the subsampling band on Rips or alpha diagrams (valid; the only band with a proof for them), and
    the bootstrap for witness diagrams (which then calls nothing and says why: no landmark bound is known).
    """
    from tdakit.config import SamplingOptions

    plain = cloud.metric.name in ("euclidean", "periodic") and 1 <= cloud.n_dims <= 3
    defaults = _default_complex(options.complex) and options.sampling == SamplingOptions()
    if plain and defaults:
        return "density"
    return {"dtm": "dtm", "rips": "subsample", "alpha": "subsample"}.get(options.complex.filtration, "bootstrap")


def _default_complex(complex_) -> bool:
    """The default complex for its max_dim; the memory budget is no choice of complex (it bounds any band's work)."""
    from tdakit.config import ComplexOptions

    return dataclasses.replace(complex_, memory_budget=None) == ComplexOptions(max_dim=complex_.max_dim)


def check_options(cloud: Cloud, options: AnalysisOptions | dict | None = None) -> AnalysisOptions:
    """The options :func:`analyze` would run with, or the error it would raise, without running (for front ends)."""
    if not isinstance(cloud, Cloud):
        raise fail("cloud", "check_options", "a Cloud from tdakit.load_cloud", cloud)
    return _check_combination(cloud, _check_options(options))


def _check_combination(cloud: Cloud, options: AnalysisOptions) -> AnalysisOptions:
    """Refuse options that cannot go together; record what a density run really computes."""
    from tdakit.config import SamplingOptions

    if options.band.method == "auto":
        options = dataclasses.replace(options, band=dataclasses.replace(options.band, method=auto_band(cloud, options)))
    check_filtration_for(cloud, options.complex.filtration, _FN)
    if options.band.method == "dtm" and options.complex.filtration != "dtm":
        raise fail("options", _FN, "complex filtration 'dtm' with the 'dtm' band (it bounds the DTM-weighted "
                   f"filtration); for {options.complex.filtration!r} diagrams choose band 'subsample'",
                   options.complex.filtration)
    if options.band.method != "density":
        return options
    complex_ = options.complex
    if not _default_complex(complex_) or options.sampling not in (
            SamplingOptions(), SamplingOptions(n_landmarks=None)):
        raise fail("options", _FN, "default sampling and complex options with the 'density' band (it estimates a "
                   "kernel density on a grid from every point and builds its superlevel-set filtration, so no "
                   "landmarks and no other complex apply); choose another band to use them",
                   {"sampling": options.sampling.to_dict(), "complex": complex_.to_dict()})
    return dataclasses.replace(options, sampling=dataclasses.replace(options.sampling, n_landmarks=None))


def _preview(cloud: Cloud, seed: int) -> NDArray[np.intp]:
    if cloud.n_points <= PREVIEW_POINTS:
        return np.arange(cloud.n_points)
    chosen = np.random.default_rng(seed).choice(cloud.n_points, size=PREVIEW_POINTS, replace=False)
    return np.sort(chosen)


def _versions() -> dict:
    import gudhi
    import scipy

    import tdakit

    return {"tdakit": tdakit.__version__, "gudhi": gudhi.__version__, "numpy": np.__version__,
            "scipy": scipy.__version__, "python": platform.python_version()}


def provenance(cloud: Cloud, options: AnalysisOptions, seed: int) -> dict:
    """What made a run: versions, the input (with its file checksum), options, seed and time."""
    source = {"source": cloud.source, "file_checksum": cloud.source_checksum, "fingerprint": cloud.fingerprint,
              "n_points": cloud.n_points, "n_dims": cloud.n_dims, "columns": list(cloud.columns),
              "metric": cloud.metric.to_dict(), "standardized": cloud.shift is not None,
              "n_duplicates": cloud.n_duplicates, "read_options": dict(cloud.read_options), "unit": cloud.unit}
    return {"versions": _versions(), "platform": platform.platform(), "input": source,
            "options": options.to_dict(), "seed": seed,
            "created": datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds")}


def rerun(run: RunResult, cloud: Cloud | None = None, *, n_jobs: int = 1, executor=None,
          progress: Callable[[str, int, int], None] | None = None) -> RunResult:
    """Recompute a run from its provenance: same data, options and seed give the same numbers.

    Parameters
    ----------
    run : RunResult
        A run, typically from :func:`tdakit.io.load_run`.
    cloud : Cloud, optional
        The data; default: reload the input file named in the provenance, whose
        checksum must match. Clouds not read from a file must be passed here.
    n_jobs, executor, progress
        As in :func:`analyze`; they do not change the numbers.
    """
    if not isinstance(run, RunResult):
        raise fail("run", "rerun", "a RunResult (from analyze or load_run)", run)
    recorded = run.provenance["input"]
    if cloud is None:
        cloud = _reload(recorded)
    if not isinstance(cloud, Cloud):
        raise fail("cloud", "rerun", "None or a Cloud", cloud)
    if cloud.fingerprint != recorded["fingerprint"]:
        raise InvalidDataError(
            f"The cloud passed to rerun differs from the one the run was made on (its coordinates or metric "
            f"changed: fingerprint {cloud.fingerprint[:12]} instead of {recorded['fingerprint'][:12]}).",
            parameter="cloud")
    if progress is not None and not callable(progress):
        raise fail("progress", "rerun", "None or a callable progress(step, done, total)", progress)
    scheme = run.provenance.get("seed_scheme", 1)  # runs made before the scheme was recorded: scheme 1
    return _run(cloud, _check_combination(cloud, run.options), run.seed, scheme, progress,
                {"n_jobs": n_jobs, "executor": executor, "checkpoint": None})


def _reload(recorded: dict) -> Cloud:
    from tdakit.errors import DataFileNotFoundError
    from tdakit.io.readers import load_cloud

    if recorded["file_checksum"] is None:
        raise fail("cloud", "rerun", f"a Cloud: this run was made on data from {recorded['source']!r}, not a file, "
                   "so pass the same data again", None)
    path = Path(recorded["source"])
    if not path.exists():
        raise DataFileNotFoundError(f"The run's input file {str(path)!r} no longer exists; load it from its new "
                                    f"place and pass it as rerun(run, cloud=...).", parameter="cloud")
    metric = recorded["metric"]
    # Runs made before reading options were recorded name their columns instead.
    reading = recorded.get("read_options", {"columns": recorded["columns"] or None})
    cloud = load_cloud(path, metric=metric["name"], box=metric.get("box"),
                       p=metric.get("p") if metric["name"] == "minkowski" else None,
                       standardize=recorded["standardized"], unit=recorded.get("unit"), **reading)
    if cloud.source_checksum != recorded["file_checksum"]:
        raise InvalidDataError(f"The file {str(path)!r} changed since the run was made (checksum differs).",
                               parameter="cloud")
    return cloud
