"""Planted-truth evaluation: does each band call the planted features real, and nothing else?

For every configuration (scenario, band method, filtration, landmark count) and seed the script draws a cloud
with a known answer (:mod:`tdakit.planted`), runs :func:`tdakit.analyze` on it and compares the number of
significant features per homology dimension with the truth:

- false features in dimension k = max(0, significant_k - truth_k), missed = max(0, truth_k - significant_k);
- a run has a false feature (family-wise) when any scored dimension has one.

Per configuration it reports the runs, the family-wise false-feature rate with a Wilson 95 % interval, the mean
number of false features per dimension, the power per planted dimension (the fraction of runs with
significant_k >= truth_k, for every k with truth_k > 0 and for H0 when more than one component is planted), the
"exact" rate (significant_k == truth_k in every scored dimension) and the median seconds of one analysis. A band
that does not call features (``band.calls`` False, or an all-empty ``significant`` column) gives "no verdict",
never zero false features. Errors are caught and counted per configuration.

Seeds: seed s draws the cloud from ``SeedSequence(s)``'s first word and runs the analysis with its second, so
every configuration of one scenario sees the same clouds (paired comparisons between bands).

Run::

    python benchmarks/significance.py                        # the default grid, 100 seeds
    python benchmarks/significance.py --quick                # a CI-sized subset (10 seeds, seconds)
    python benchmarks/significance.py --methods dtm subsample --scenarios noisy_circle uniform_cube --seeds 20
    python benchmarks/significance.py --jobs 2 --out results.csv   # also writes results_runs.csv
    python benchmarks/significance.py --list                 # the grid and its estimated time, without running

From a test::

    spec = importlib.util.spec_from_file_location("significance", "benchmarks/significance.py")
    significance = importlib.util.module_from_spec(spec); spec.loader.exec_module(significance)
    summary = significance.evaluate(significance.quick_grid()[0], 5)
    assert summary["fwer_high"] < 0.6
"""

from __future__ import annotations

import argparse
import concurrent.futures
import dataclasses
import math
import os
import statistics
import sys
import time
import warnings
from collections.abc import Iterable, Sequence

import numpy as np

import tdakit
from tdakit._validation import check_choice, check_float, check_int, fail
from tdakit.planted import SCENARIOS, PlantedCloud, planted_cloud

BAND_METHODS = ("bootstrap", "density", "dtm", "landscape", "subsample")
FILTRATIONS = ("dtm", "rips")
MAX_SCORED_DIM = 3
_Z95 = 1.959963984540054  # standard normal 0.975 quantile
_CHUNK = 10  # seeds per unit of work sent to a worker process


@dataclasses.dataclass(frozen=True)
class Config:
    """One configuration of the evaluation: a scenario, a band, a complex and a landmark count.

    Parameters
    ----------
    scenario : str
        A key of :data:`tdakit.planted.SCENARIOS`.
    method : {"bootstrap", "density", "dtm", "landscape", "subsample"}
        Band method.
    filtration : {"rips", "dtm"}, default="rips"
        Complex on the landmarks (ignored by ``"density"``, which uses every point).
    n_landmarks : int or None, default=100
        Maxmin landmarks; None for the density band (every point).
    n_points : int, default=3000
        Points per cloud.
    scenario_params : tuple of (str, value) pairs, default=()
        Keyword parameters of the scenario (a dict is accepted and sorted).
    label : str, optional
        Display name of the scenario variant (default: the scenario's name).
    max_dim : int, default=1
        Diagrams up to H_max_dim; dimensions above are not scored.
    n_boot : int, default=100
    level : float, default=0.95
    max_scale : float, optional
        Filtration cap (the periodic box: half its side).
    max_seeds : int, optional
        Use at most this many of the seeds given (configurations that cost much more per run).
    sampling : str, default="maxmin"
        Landmark method.
    """

    scenario: str
    method: str
    filtration: str = "rips"
    n_landmarks: int | None = 100
    n_points: int = 3000
    scenario_params: tuple = ()
    label: str | None = None
    max_dim: int = 1
    n_boot: int = 100
    level: float = 0.95
    max_scale: float | None = None
    max_seeds: int | None = None
    sampling: str = "maxmin"

    def __post_init__(self):
        name = "Config"
        check_choice(self.scenario, "scenario", name, SCENARIOS)
        check_choice(self.method, "method", name, BAND_METHODS)
        check_choice(self.filtration, "filtration", name, FILTRATIONS)
        if self.n_landmarks is not None:
            check_int(self.n_landmarks, "n_landmarks", name, low=2)
        elif self.method != "density":
            raise fail("n_landmarks", name, "an int >= 2 (None only for the density band)", self.n_landmarks)
        check_int(self.n_points, "n_points", name, low=10)
        params = self.scenario_params
        if isinstance(params, dict):
            params = tuple(sorted(params.items()))
        if not isinstance(params, tuple) or not all(isinstance(p, tuple) and len(p) == 2 for p in params):
            raise fail("scenario_params", name, "a dict or a tuple of (name, value) pairs", self.scenario_params)
        object.__setattr__(self, "scenario_params", params)
        check_int(self.max_dim, "max_dim", name, low=0, high=MAX_SCORED_DIM)
        check_int(self.n_boot, "n_boot", name, low=1)
        check_float(self.level, "level", name, low=0.0, high=1.0, low_open=True, high_open=True)
        if self.max_scale is not None:
            check_float(self.max_scale, "max_scale", name, low=0.0, low_open=True)
        if self.max_seeds is not None:
            check_int(self.max_seeds, "max_seeds", name, low=1)
        if self.label is not None and not isinstance(self.label, str):
            raise fail("label", name, "None or a str", self.label)

    @property
    def name(self) -> str:
        """The scenario's display name."""
        return self.label or self.scenario

    def analysis_options(self) -> tdakit.AnalysisOptions:
        """The options passed to :func:`tdakit.analyze` (the density band takes no landmark or complex options)."""
        band = {"method": self.method, "n_boot": self.n_boot, "level": self.level}
        if self.method == "density":
            return tdakit.AnalysisOptions.from_dict({"complex": {"max_dim": self.max_dim}, "band": band})
        complex_ = {"filtration": self.filtration, "max_dim": self.max_dim}
        if self.max_scale is not None:
            complex_["max_scale"] = self.max_scale
        sampling = {"method": self.sampling, "n_landmarks": self.n_landmarks}
        return tdakit.AnalysisOptions.from_dict({"sampling": sampling, "complex": complex_, "band": band})

    def draw(self, seed: int) -> PlantedCloud:
        """The planted cloud of ``seed``."""
        return planted_cloud(self.scenario, self.n_points, rng=_seeds(seed)[0], **dict(self.scenario_params))

    def to_dict(self) -> dict:
        """The fields as a plain dict (``scenario_params`` as a dict)."""
        data = dataclasses.asdict(self)
        data["scenario_params"] = dict(self.scenario_params)
        return data


def _seeds(seed: int) -> tuple[int, int]:
    """Cloud seed and analysis seed of one evaluation seed."""
    words = np.random.SeedSequence(seed).generate_state(2, np.uint32)
    return int(words[0]), int(words[1])


def _check_config(config, function: str) -> Config:
    if isinstance(config, Config):
        return config
    if isinstance(config, dict):
        return Config(**config)
    raise fail("config", function, "a Config or a dict of its fields", config)


def _check_results(results, function: str, name: str = "results") -> list[dict]:
    ok = isinstance(results, (list, tuple)) and all(isinstance(r, dict) and ("error" in r or "status" in r)
                                                    for r in results)
    if not ok:
        raise fail(name, function, "a list of dicts (run records, or results of evaluate / run_grid)", results)
    return list(results)


def _check_seeds(seeds, function: str) -> list[int]:
    if isinstance(seeds, (int, np.integer)) and not isinstance(seeds, bool):
        return list(range(check_int(seeds, "seeds", function, low=1, note="a count, or a list of seeds")))
    if isinstance(seeds, (str, bytes)) or not isinstance(seeds, Iterable):
        raise fail("seeds", function, "a positive int (seeds 0..N-1) or a list of non-negative ints", seeds)
    seeds = [check_int(s, "seeds", function, low=0, note="each seed") for s in seeds]
    if not seeds or len(set(seeds)) != len(seeds):
        raise fail("seeds", function, "a non-empty list of distinct seeds", seeds)
    return seeds


# -- one run -------------------------------------------------------------------------------------------------
def run_one(config: Config, seed: int) -> dict:
    """Draw the cloud of ``seed``, analyse it and score it against the truth. Never raises on a failed run.

    Parameters
    ----------
    config : Config or dict
    seed : int
        Non-negative evaluation seed.

    Returns
    -------
    dict
        ``seed``, ``seconds`` and ``cpu_seconds`` (the analysis alone), ``error`` (empty or the message),
        ``verdict`` (False when the band does not call features), ``scored`` (the dimensions scored) and per
        scored dimension k ``truth_hk``, ``significant_hk``, ``false_hk``, ``missed_hk``; ``any_false`` and
        ``exact``.
    """
    config = _check_config(config, "run_one")
    seed = check_int(seed, "seed", "run_one", low=0)
    record = {"seed": seed, "seconds": math.nan, "cpu_seconds": math.nan, "error": "", "verdict": False, "scored": ()}
    try:
        planted = config.draw(seed)
        options = config.analysis_options()
        cloud = planted.to_cloud()
        start, cpu = time.perf_counter(), time.process_time()
        with warnings.catch_warnings():
            warnings.simplefilter("ignore")
            run = tdakit.analyze(cloud, options, rng=_seeds(seed)[1], n_jobs=1)
            table = run.table
        record["seconds"], record["cpu_seconds"] = time.perf_counter() - start, time.process_time() - cpu
        record.update(_score(planted, run, table, config.max_dim))
    except Exception as error:  # counted per configuration, never fatal
        record["error"] = f"{type(error).__name__}: {error}"
    return record


def _score(planted: PlantedCloud, run, table, max_dim: int) -> dict:
    scored = planted.scored_dims(max_dim)
    out = {"verdict": True, "scored": scored, **{f"truth_h{k}": planted.truth(k) for k in scored}}
    calls = getattr(run.band, "calls", True) if run.band is not None else False
    if not calls or table.empty or table["significant"].isna().all():
        reason = getattr(run.band, "no_call_reason", "") if run.band is not None else "no band"
        return {**out, "verdict": False, "no_verdict_reason": reason or "significance left empty"}
    any_false, exact = False, True
    for k in scored:
        significant = int(table.loc[table["dimension"] == k, "significant"].fillna(False).astype(bool).sum())
        truth = planted.truth(k)
        out.update({f"significant_h{k}": significant, f"false_h{k}": max(0, significant - truth),
                    f"missed_h{k}": max(0, truth - significant)})
        any_false |= significant > truth
        exact &= significant == truth
    out.update(any_false=any_false, exact=exact)
    return out


# -- aggregation ---------------------------------------------------------------------------------------------
def wilson_interval(successes: int, trials: int, *, z: float = _Z95) -> tuple[float, float]:
    """Wilson score interval for a binomial proportion (95 % by default).

    Parameters
    ----------
    successes : int
    trials : int
        At least 1.
    z : float, default=1.96
        Normal quantile of the two-sided level.

    Returns
    -------
    (low, high) : tuple of float

    References
    ----------
    .. [1] E. B. Wilson, "Probable inference, the law of succession, and statistical inference",
       J. Amer. Statist. Assoc. 22 (1927) 209-212.
    """
    trials = check_int(trials, "trials", "wilson_interval", low=1)
    successes = check_int(successes, "successes", "wilson_interval", low=0, high=trials)
    z = check_float(z, "z", "wilson_interval", low=0.0, low_open=True)
    p = successes / trials
    denominator = 1.0 + z**2 / trials
    centre = (p + z**2 / (2 * trials)) / denominator
    half = z * math.sqrt(p * (1 - p) / trials + z**2 / (4 * trials**2)) / denominator
    return max(0.0, centre - half), min(1.0, centre + half)


def summarize(config: Config, records: Sequence[dict]) -> dict:
    """Aggregate the run records of one configuration (see the module docstring for each quantity).

    Returns
    -------
    dict
        The configuration's fields, ``runs`` (runs with a verdict), ``no_verdict``, ``errors``,
        ``error_messages`` (distinct, at most 3), ``status`` (``"ok"``, ``"no verdict"``, ``"error"``),
        ``fwer`` with ``fwer_low``/``fwer_high``, ``mean_false``, ``mean_false_hk``, ``fwer_hk``, ``power_hk``
        (planted dimensions), ``exact``, ``median_seconds`` (wall), ``median_cpu_seconds``, ``scored`` and ``truth``;
        rates are NaN without runs.
    """
    config = _check_config(config, "summarize")
    records = _check_results(records, "summarize", "records")
    done = [r for r in records if not r["error"]]
    judged = [r for r in done if r["verdict"]]
    errors = [r["error"] for r in records if r["error"]]
    summary = {**config.to_dict(), "name": config.name, "seeds": len(records), "runs": len(judged),
               "no_verdict": len(done) - len(judged), "errors": len(errors),
               "error_messages": list(dict.fromkeys(errors))[:3],
               "no_verdict_reasons": list(dict.fromkeys(r.get("no_verdict_reason", "") for r in done
                                                        if not r["verdict"]))[:2],
               "median_seconds": statistics.median(r["seconds"] for r in done) if done else math.nan,
               "median_cpu_seconds": statistics.median(r["cpu_seconds"] for r in done) if done else math.nan}
    summary["status"] = "ok" if judged else "no verdict" if done else "error" if errors else "no runs"
    scored = done[0]["scored"] if done else ()
    summary["scored"] = tuple(scored)
    summary["truth"] = {k: done[0][f"truth_h{k}"] for k in scored}
    n = len(judged)
    hits = sum(r["any_false"] for r in judged)
    summary["fwer"] = hits / n if n else math.nan
    summary["fwer_low"], summary["fwer_high"] = wilson_interval(hits, n) if n else (math.nan, math.nan)
    summary["mean_false"] = float(np.mean([sum(r[f"false_h{k}"] for k in scored) for r in judged])) if n else math.nan
    summary["exact"] = float(np.mean([r["exact"] for r in judged])) if n else math.nan
    for k in range(MAX_SCORED_DIM + 1):
        on = n and k in scored
        summary[f"mean_false_h{k}"] = float(np.mean([r[f"false_h{k}"] for r in judged])) if on else math.nan
        summary[f"fwer_h{k}"] = float(np.mean([r[f"false_h{k}"] > 0 for r in judged])) if on else math.nan
        planted = on and summary["truth"][k] > (1 if k == 0 else 0)
        summary[f"power_h{k}"] = (float(np.mean([r[f"significant_h{k}"] >= r[f"truth_h{k}"] for r in judged]))
                                  if planted else math.nan)
    return summary


def evaluate(config, seeds) -> dict:
    """Run one configuration over seeds and aggregate (serially, in this process).

    Parameters
    ----------
    config : Config or dict
        A configuration, e.g. one of :func:`quick_grid` or :func:`default_grid`.
    seeds : int or sequence of int
        A count N (seeds 0..N-1) or the seeds themselves; ``config.max_seeds`` keeps the first ones.

    Returns
    -------
    dict
        The summary of :func:`summarize`, with the per-run records under ``"records"``.

    Examples
    --------
    >>> summary = evaluate(quick_grid()[0], 3)  # doctest: +SKIP
    >>> summary["runs"], summary["fwer"]  # doctest: +SKIP
    """
    config = _check_config(config, "evaluate")
    seeds = _check_seeds(seeds, "evaluate")[: config.max_seeds]
    records = [run_one(config, seed) for seed in seeds]
    return {**summarize(config, records), "records": records}


# -- grids ----------------------------------------------------------------------------------------------------
def applicable(config: Config) -> str:
    """Why ``config`` cannot run ("" when it can): the density band needs 1 to 3 Euclidean or periodic coordinates."""
    config = _check_config(config, "applicable")
    if config.method == "dtm" and config.filtration != "dtm":
        return "the dtm band bounds the dtm filtration only"
    if config.method == "density":
        dims = config.draw(0).n_dims
        if not 1 <= dims <= 3:
            return f"the density band needs 1 to 3 coordinates ({config.name} has {dims})"
    return ""


# (scenario, label, n_points, scenario params, max_dim, max_scale): clouds of 2,000-4,000 points; H2 is scored
# where the cavity is the point and cheap to reach (Rips H2 on hundreds of landmarks placed exactly on a sphere is
# not: edge collapse removes little there, so the uniform sphere is the null for H1 only).
DEFAULT_SCENARIOS = (
    ("uniform_cube", None, 3000, {}, 1, None),
    ("gaussian_blob", None, 3000, {}, 1, None),
    ("gaussian_clumps", None, 3000, {}, 1, None),
    ("uniform_sphere", None, 3000, {}, 1, None),
    ("noisy_circle", None, 2000, {"noise": 0.05}, 1, None),
    ("noisy_circle", "noisy_circle_0.2", 2000, {"noise": 0.2}, 1, None),
    ("two_circles", None, 2000, {}, 1, None),
    ("torus", None, 4000, {}, 2, None),
    ("noisy_sphere", None, 3000, {}, 2, None),
    ("loop_with_outliers", None, 2000, {}, 1, None),
    ("marrowfield", None, 4000, {}, 1, 50.0),
)
# (method, filtration, landmark counts, seeds at most, H_max at most) on every scenario. The bottleneck bootstrap
# rebuilds 100 diagrams per run (2-9 s at 100 landmarks against 0.03-0.8 s for the other bands), so it runs on
# fewer seeds and up to H1: enough to see a false-feature rate far from the level.
DEFAULT_BANDS = (
    ("dtm", "dtm", (100, 300), None, None),
    ("subsample", "rips", (100, 300), None, None),
    ("density", "rips", (None,), None, None),
    ("bootstrap", "rips", (100,), 30, 1),
    ("bootstrap", "dtm", (100,), 30, 1),
)
# (scenario, method, filtration, landmarks, seeds at most): 1,000 landmarks where that stays cheap (3-4 s a run), the
# bootstrap at 300 landmarks on the cube (17 s a run), and the landscape band, which should give no verdict.
EXTRA_CONFIGS = (
    ("uniform_cube", "dtm", "dtm", 1000, 30),
    ("noisy_circle", "dtm", "dtm", 1000, 30),
    ("uniform_cube", "subsample", "rips", 1000, 30),
    ("uniform_cube", "bootstrap", "rips", 300, 20),
    ("uniform_cube", "landscape", "rips", 100, 10),
)


def default_grid() -> list[Config]:
    """The full evaluation's configurations (about 35-40 minutes for 100 seeds with ``--jobs 2`` on 2 cores)."""
    grid = []
    for scenario, label, n_points, params, max_dim, max_scale in DEFAULT_SCENARIOS:
        base = {"scenario": scenario, "label": label, "n_points": n_points, "scenario_params": params,
                "max_scale": max_scale}
        for method, filtration, counts, max_seeds, dim_cap in DEFAULT_BANDS:
            grid += [Config(method=method, filtration=filtration, n_landmarks=count, max_seeds=max_seeds,
                            max_dim=min(max_dim, dim_cap or max_dim), **base) for count in counts]
        for extra_scenario, method, filtration, count, max_seeds in EXTRA_CONFIGS:
            if extra_scenario == scenario and label is None:
                grid.append(Config(method=method, filtration=filtration, n_landmarks=count, max_seeds=max_seeds,
                                   max_dim=max_dim, **base))
    return [c for c in grid if not applicable(c)]


def quick_grid() -> list[Config]:
    """Three small configurations of the default band, 600 points and 60 landmarks, under 0.05 s a run.

    A null for loops on a surface (uniform sphere), one planted loop (noisy circle) and five planted
    components (Gaussian clumps): enough for CI bounds on the false-feature rate and on power in H0 and H1.
    """
    small = {"method": "dtm", "filtration": "dtm", "n_landmarks": 60, "n_points": 600, "n_boot": 50}
    return [Config("uniform_sphere", **small), Config("noisy_circle", **small), Config("gaussian_clumps", **small)]


def select(grid: Sequence[Config], *, methods=None, scenarios=None, counts=None) -> list[Config]:
    """The configurations of ``grid`` whose method, scenario (name or label) and landmark count are listed.

    ``counts`` may hold ``"all"`` for the density band's every-point setting; None keeps everything.
    """
    if methods is not None:
        [check_choice(m, "methods", "select", BAND_METHODS) for m in methods]
    if scenarios is not None:
        names = {c.scenario for c in grid} | {c.name for c in grid}
        [check_choice(s, "scenarios", "select", names) for s in scenarios]
    wanted = None if counts is None else {None if str(c) == "all" else int(c) for c in counts}
    return [c for c in grid
            if (methods is None or c.method in methods)
            and (scenarios is None or c.scenario in scenarios or c.name in scenarios)
            and (wanted is None or c.n_landmarks in wanted)]


# -- running a grid -------------------------------------------------------------------------------------------
# CPU seconds per analysis measured for this grid with one process (2,000-4,000 points, n_boot=100): the mean over
# the scenarios, and the uniform sphere apart: landmarks placed exactly on a sphere make Rips and DTM complexes much
# dearer (edge collapse removes little there). Used to send the dearest work first and for the estimate of --list;
# the measured sum over the default grid was 4,100 s for 100 seeds.
_SECONDS = {("dtm", 100): 0.03, ("dtm", 300): 0.22, ("dtm", 1000): 3.6, ("subsample", 100): 0.21,
            ("subsample", 300): 0.38, ("subsample", 1000): 4.1, ("bootstrap", 100): 1.6, ("bootstrap", 300): 15.2,
            ("density", None): 0.55, ("landscape", 100): 0.27}
_SPHERE_SECONDS = {("dtm", 300): 3.6, ("subsample", 300): 3.2, ("bootstrap", 100): 7.4}


def expected_seconds(config: Config) -> float:
    """Rough CPU seconds of one analysis of ``config`` (for ordering work and estimating a grid's time)."""
    config = _check_config(config, "expected_seconds")
    key = (config.method, config.n_landmarks)
    if config.scenario == "uniform_sphere" and key in _SPHERE_SECONDS:
        return _SPHERE_SECONDS[key]
    return _SECONDS.get(key, 2.0 * (config.n_landmarks or 100) / 100)


def _unit(config: Config, seeds: list[int]) -> list[dict]:
    return [run_one(config, seed) for seed in seeds]


def _init_worker() -> None:
    os.environ["OMP_NUM_THREADS"] = "1"  # each analysis single-threaded: the workers share the cores


def run_grid(configs: Sequence[Config], seeds, *, jobs: int = 1, log=None) -> list[dict]:
    """Evaluate every configuration over ``seeds``, in ``jobs`` worker processes.

    Work is split into chunks of seeds of one configuration, dearest first; the summaries are
    identical for any ``jobs``.

    Parameters
    ----------
    configs : sequence of Config
    seeds : int or sequence of int
        As in :func:`evaluate`.
    jobs : int, default=1
        Worker processes (1: run here).
    log : file-like, optional
        Progress lines go here (default: none).

    Returns
    -------
    list of dict
        One :func:`evaluate` result per configuration, in the order given.
    """
    configs = [_check_config(c, "run_grid") for c in configs]
    seeds = _check_seeds(seeds, "run_grid")
    jobs = check_int(jobs, "jobs", "run_grid", low=1, high=256)
    units = [(i, mine[start:start + _CHUNK]) for i, c in enumerate(configs) for mine in [seeds[: c.max_seeds]]
             for start in range(0, len(mine), _CHUNK)]
    units.sort(key=lambda u: -expected_seconds(configs[u[0]]) * len(u[1]))
    records: dict[int, list[dict]] = {i: [] for i in range(len(configs))}
    start = time.perf_counter()

    def collect(index, chunk_records, done):
        records[index].extend(chunk_records)
        if log is not None:
            c = configs[index]
            print(f"[{done}/{len(units)} {time.perf_counter() - start:7.1f} s] {c.name} {c.method}/{c.filtration} "
                  f"{c.n_landmarks or 'all'}: {len(records[index])} runs", file=log, flush=True)

    if jobs == 1:
        for done, (index, chunk) in enumerate(units, 1):
            collect(index, _unit(configs[index], chunk), done)
    else:
        with concurrent.futures.ProcessPoolExecutor(max_workers=jobs, initializer=_init_worker) as pool:
            futures = {pool.submit(_unit, configs[i], chunk): (i, chunk) for i, chunk in units}
            for done, future in enumerate(concurrent.futures.as_completed(futures), 1):
                index, chunk = futures[future]
                try:
                    chunk_records = future.result()
                except Exception as error:  # a worker that died (e.g. a crash in compiled code) fails its seeds only
                    chunk_records = [{"seed": seed, "seconds": math.nan, "cpu_seconds": math.nan, "verdict": False,
                                      "error": f"worker failed: {error!r}", "scored": ()} for seed in chunk]
                collect(index, chunk_records, done)
    results = []
    for i, config in enumerate(configs):
        ordered = sorted(records[i], key=lambda r: r["seed"])
        results.append({**summarize(config, ordered), "records": ordered})
    return results


# -- reporting ------------------------------------------------------------------------------------------------
def _rate(value: float) -> str:
    return "-" if value != value else f"{value:.2f}"


def _per_dim(summary: dict, key: str) -> str:
    parts = [f"H{k} {_rate(summary[f'{key}_h{k}'])}" for k in summary["scored"] if summary[f"{key}_h{k}"] == summary[
        f"{key}_h{k}"]]
    return ", ".join(parts) or "-"


def markdown_table(results: Sequence[dict]) -> str:
    """The summaries as one markdown table (a row per configuration)."""
    results = _check_results(results, "markdown_table")
    header = ("| scenario | band | complex | landmarks | truth | runs | family-wise false rate [95 % CI] | "
              "mean false | power | exact | median s | notes |")
    lines = [header, "|" + "---|" * 12]
    for s in results:
        truth = ", ".join(f"H{k} {v}" for k, v in s["truth"].items()) or "-"
        complex_ = "kde (all points)" if s["method"] == "density" else s["filtration"]
        if s["runs"]:
            fwer = f"{s['fwer']:.2f} [{s['fwer_low']:.2f}, {s['fwer_high']:.2f}]"
            false = _per_dim(s, "mean_false")
        else:
            fwer = false = s["status"]
        notes = []
        if s["no_verdict"]:
            notes.append(f"no verdict in {s['no_verdict']} runs")
        if s["errors"]:
            notes.append(f"{s['errors']} errors: {s['error_messages'][0][:90]}")
        median = "-" if s["median_seconds"] != s["median_seconds"] else f"{s['median_seconds']:.2f}"
        lines.append(f"| {s['name']} | {s['method']} | {complex_} | {s['n_landmarks'] or 'all'} | {truth} | "
                     f"{s['runs']}/{s['seeds']} | {fwer} | {false} | {_per_dim(s, 'power')} | {_rate(s['exact'])} | "
                     f"{median} | {'; '.join(notes)} |")
    return "\n".join(lines)


def write_csv(results: Sequence[dict], path) -> tuple[str, str]:
    """Write one row per configuration to ``path`` and one row per run to ``<stem>_runs.csv``."""
    import pandas as pd

    results = _check_results(results, "write_csv")
    if not isinstance(path, (str, os.PathLike)):
        raise fail("path", "write_csv", "a file path (str or os.PathLike)", path)
    path = os.fspath(path)
    rows = []
    for s in results:
        row = {k: v for k, v in s.items() if k != "records"}
        for key in ("scenario_params", "truth", "scored", "error_messages", "no_verdict_reasons"):
            row[key] = repr(row[key])
        rows.append(row)
    pd.DataFrame(rows).to_csv(path, index=False)
    runs = [{"name": s["name"], "method": s["method"], "filtration": s["filtration"],
             "n_landmarks": s["n_landmarks"], **{k: (repr(v) if k == "scored" else v) for k, v in r.items()}}
            for s in results for r in s["records"]]
    stem, _ = os.path.splitext(path)
    pd.DataFrame(runs).to_csv(stem + "_runs.csv", index=False)
    return path, stem + "_runs.csv"


def _parse(argv):
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0],
                                     formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--seeds", type=int, default=None,
                        help="seeds per configuration (default 100; 10 with --quick)")
    parser.add_argument("--quick", action="store_true", help="a CI-sized subset: three small configurations")
    parser.add_argument("--methods", nargs="+", choices=BAND_METHODS, help="band methods to keep")
    parser.add_argument("--scenarios", nargs="+", help="scenarios (names or labels) to keep")
    parser.add_argument("--counts", nargs="+", help="landmark counts to keep ('all': the density band)")
    parser.add_argument("--jobs", type=int, default=1, help="worker processes (default 1)")
    parser.add_argument("--out", help="write the summaries to this CSV (and the runs to <stem>_runs.csv)")
    parser.add_argument("--list", action="store_true", help="print the grid and its estimated time, run nothing")
    return parser.parse_args(argv)


def main(argv=None) -> int:
    """The command line (see the module docstring); returns the exit status."""
    args = _parse(argv)
    seeds = args.seeds if args.seeds is not None else (10 if args.quick else 100)
    grid = select(quick_grid() if args.quick else default_grid(), methods=args.methods, scenarios=args.scenarios,
                  counts=args.counts)
    if not grid:
        print("No configuration left after the filters.", file=sys.stderr)
        return 1
    estimate = sum(expected_seconds(c) * min(seeds, c.max_seeds or seeds) for c in grid) / max(1, args.jobs)
    print(f"{len(grid)} configurations, {seeds} seeds, {args.jobs} process(es); estimated {estimate / 60:.0f} min",
          file=sys.stderr)
    if args.list:
        for c in grid:
            print(f"{c.name:20} {c.method:10} {c.filtration:4} {str(c.n_landmarks or 'all'):>5} "
                  f"n={c.n_points} max_dim={c.max_dim} seeds={min(seeds, c.max_seeds or seeds)} "
                  f"~{expected_seconds(c) * min(seeds, c.max_seeds or seeds):.0f} s")
        return 0
    start = time.perf_counter()
    results = run_grid(grid, seeds, jobs=args.jobs, log=sys.stderr)
    print(markdown_table(results))
    print(f"\n{len(grid)} configurations, {seeds} seeds, {time.perf_counter() - start:.0f} s wall time, "
          f"{args.jobs} process(es); tdakit {tdakit.__version__}.")
    if args.out:
        written = write_csv(results, args.out)
        print(f"Wrote {written[0]} and {written[1]}.", file=sys.stderr)
    return 0


if __name__ == "__main__":
    sys.exit(main())
