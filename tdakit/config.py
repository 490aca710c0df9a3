"""Frozen option objects describing a run: how to sample, which complex, which band.

Each object checks its values when it is made, converts to a plain dict
(``to_dict``) for provenance and config files, and back (``from_dict``), where an
unknown key is an error that names it.
"""

from __future__ import annotations

import math
import re
from dataclasses import asdict, dataclass, field, fields

from tdakit._validation import check_bool, check_choice, check_dtm_power, check_float, check_int, fail

__all__ = ["AnalysisOptions", "BandOptions", "ComplexOptions", "RunOptions", "SamplingOptions", "StudyOptions",
           "parse_memory_size"]

SAMPLING_METHODS = ("core_maxmin", "density", "maxmin", "random")
FILTRATION_NAMES = ("alpha", "dtm", "rips", "witness")
BAND_NAMES = ("auto", "bootstrap", "density", "dtm", "landscape", "none", "subsample")
REFERENCE_KINDS = ("auto", "densest", "full")


# Decimal units as in disk and memory sizes (GB = 10^9 bytes), binary ones with "i" (GiB = 2^30); a bare
# K, M, G or T is binary, as in job schedulers' memory requests (common practice).
_SIZE_UNITS = {"": 1, "b": 1, "kb": 10**3, "mb": 10**6, "gb": 10**9, "tb": 10**12, "kib": 2**10, "mib": 2**20,
               "gib": 2**30, "tib": 2**40, "k": 2**10, "m": 2**20, "g": 2**30, "t": 2**40}
_SIZE = re.compile(r"^\s*([0-9]*\.?[0-9]+(?:e[+-]?[0-9]+)?)\s*([a-z]*)\s*$")


def parse_memory_size(value, name: str = "memory_budget", function: str = "ComplexOptions") -> float:
    """Bytes from a number of bytes or a size such as ``"8GB"``, ``"512MiB"``, ``"0.5TB"`` or ``"16G"``.

    GB, MB, kB, TB are powers of ten; GiB, MiB, KiB, TiB and a bare G, M, K, T powers of two.
    ``"inf"`` (or ``float("inf")``) switches the budget off.
    """
    if isinstance(value, str):
        text = value.strip().lower()
        if text in ("inf", "infinity", "none", "unlimited"):
            return float("inf")
        match = _SIZE.match(text)
        if match is None or match.group(2) not in _SIZE_UNITS:
            raise fail(name, function, "a size in bytes such as 8GB, 512MiB, 0.5TB or 16G (GB = 10^9 bytes, "
                       "GiB = 2^30)", value)
        value = float(match.group(1)) * _SIZE_UNITS[match.group(2)]
        if not math.isfinite(value):  # "1e400GB" must not switch the budget off
            raise fail(name, function, "a finite size such as 8GB (or 'inf' to switch the budget off)", text)
    return check_float(value, name, function, low=0.0, low_open=True, allow_inf=True, note="bytes")


def _optional(value, check, *args, **kwargs):
    return None if value is None else check(value, *args, **kwargs)


def _set(obj, name, value) -> None:
    object.__setattr__(obj, name, value)


class _Options:
    """Shared ``to_dict`` / ``from_dict`` of the option dataclasses."""

    def to_dict(self) -> dict:
        return asdict(self)

    @classmethod
    def from_dict(cls, data: dict | None):
        """Build from a plain dict (a config file section); unknown keys are errors."""
        if data is None:
            return cls()
        if not isinstance(data, dict):
            raise fail(cls.__name__, f"{cls.__name__}.from_dict", "a dict of option names to values", data)
        known = {f.name for f in fields(cls)}
        unknown = sorted(set(data) - known)
        if unknown:
            raise fail(unknown[0], cls.__name__, f"one of the known options {sorted(known)} (unknown key)",
                       data[unknown[0]])
        return cls(**data)


@dataclass(frozen=True)
class SamplingOptions(_Options):
    """How landmarks are chosen (see :func:`tdakit.select_landmarks`).

    ``n_landmarks=None`` uses every point (small clouds only).
    """

    method: str = "maxmin"
    n_landmarks: int | None = 200
    keep_fraction: float = 0.9
    density_power: float = 1.0
    density_neighbors: int | None = None

    def __post_init__(self):
        name = "SamplingOptions"
        _set(self, "method", check_choice(self.method, "method", name, SAMPLING_METHODS))
        _set(self, "n_landmarks", _optional(self.n_landmarks, check_int, "n_landmarks", name, low=1))
        _set(self, "keep_fraction", check_float(self.keep_fraction, "keep_fraction", name, low=0.0, high=1.0,
                                                low_open=True))
        _set(self, "density_power", check_float(self.density_power, "density_power", name))
        _set(self, "density_neighbors", _optional(self.density_neighbors, check_int, "density_neighbors", name,
                                                  low=1))

    def landmark_options(self) -> dict:
        """Keyword options of :func:`select_landmarks` that this method uses."""
        if self.method == "density":
            return {"density_power": self.density_power, "density_neighbors": self.density_neighbors}
        if self.method == "core_maxmin":
            return {"keep_fraction": self.keep_fraction, "density_neighbors": self.density_neighbors}
        return {}


@dataclass(frozen=True)
class ComplexOptions(_Options):
    """Which filtration is built on the landmarks (see :func:`tdakit.compute_diagrams`)."""

    filtration: str = "dtm"
    max_dim: int = 1
    max_scale: float | None = None
    coefficient_field: int = 2
    collapse: bool = True
    sparse: float | None = None
    witness: str = "lazy"
    witness_nu: int = 1
    dtm_neighbors: int | None = None
    dtm_power: float = float("inf")
    memory_budget: float | str | None = None

    def __post_init__(self):
        name = "ComplexOptions"
        _set(self, "filtration", check_choice(self.filtration, "filtration", name, FILTRATION_NAMES))
        _set(self, "max_dim", check_int(self.max_dim, "max_dim", name, low=0, high=8))
        _set(self, "max_scale", _optional(self.max_scale, check_float, "max_scale", name, low=0.0, low_open=True,
                                          allow_inf=True))
        _set(self, "coefficient_field", check_int(self.coefficient_field, "coefficient_field", name, low=2, high=47))
        _set(self, "collapse", check_bool(self.collapse, "collapse", name))
        _set(self, "sparse", _optional(self.sparse, check_float, "sparse", name, low=0.0, high=1.0, low_open=True,
                                       high_open=True))
        _set(self, "witness", check_choice(self.witness, "witness", name, ("lazy", "strong", "weak")))
        _set(self, "witness_nu", check_int(self.witness_nu, "witness_nu", name, low=0, high=2))
        _set(self, "dtm_neighbors", _optional(self.dtm_neighbors, check_int, "dtm_neighbors", name, low=1))
        _set(self, "dtm_power", check_dtm_power(self.dtm_power, name))
        _set(self, "memory_budget", _optional(self.memory_budget, parse_memory_size, "memory_budget", name))

    def to_dict(self) -> dict:
        data = asdict(self)
        for key in ("dtm_power", "memory_budget"):  # plain JSON and TOML have no infinity
            data[key] = "inf" if data[key] == float("inf") else data[key]
        return data

    def diagram_options(self) -> dict:
        """Keyword options of :func:`compute_diagrams` other than ``filtration`` and ``max_dim``."""
        options = asdict(self)
        del options["filtration"], options["max_dim"]
        return options


@dataclass(frozen=True)
class BandOptions(_Options):
    """Which confidence band separates features from noise (see :func:`tdakit.confidence_band`).

    ``method="none"`` skips the band: the run then reports diagrams without significance.
    ``method="auto"`` (the default) takes the band that was calibrated and most powerful on
    tdakit's planted-truth evaluation for the data at hand: the kernel-density band for 1 to 3
    Euclidean or periodic coordinates when sampling and complex are left at their defaults,
    the DTM band otherwise (see ``benchmarks/README.md``). A run records the method it used.
    """

    method: str = "auto"
    level: float = 0.95
    n_boot: int = 200
    subsample_size: int | None = None
    account_for_landmarks: bool = True
    bandwidth: float | None = None
    resolution: int | None = None
    n_subsamples: int = 30
    n_levels: int = 3

    def __post_init__(self):
        name = "BandOptions"
        _set(self, "method", check_choice(self.method, "method", name, BAND_NAMES))
        _set(self, "level", check_float(self.level, "level", name, low=0.0, high=1.0, low_open=True,
                                        high_open=True))
        _set(self, "n_boot", check_int(self.n_boot, "n_boot", name, low=1, high=10**7))
        _set(self, "subsample_size", _optional(self.subsample_size, check_int, "subsample_size", name, low=1))
        _set(self, "account_for_landmarks", check_bool(self.account_for_landmarks, "account_for_landmarks", name))
        _set(self, "bandwidth", _optional(self.bandwidth, check_float, "bandwidth", name, low=0.0, low_open=True))
        _set(self, "resolution", _optional(self.resolution, check_int, "resolution", name, low=4, high=4096))
        _set(self, "n_subsamples", check_int(self.n_subsamples, "n_subsamples", name, low=2))
        _set(self, "n_levels", check_int(self.n_levels, "n_levels", name, low=1, high=100))


def _nested(cls, value, name, owner):
    if isinstance(value, cls):
        return value
    if isinstance(value, dict):
        return cls.from_dict(value)
    raise fail(name, owner, f"a {cls.__name__} or a dict of its options", value)


@dataclass(frozen=True)
class AnalysisOptions(_Options):
    """Everything that decides a run's numbers, apart from the data and the seed."""

    sampling: SamplingOptions = field(default_factory=SamplingOptions)
    complex: ComplexOptions = field(default_factory=ComplexOptions)
    band: BandOptions = field(default_factory=BandOptions)

    def __post_init__(self):
        for name, cls in (("sampling", SamplingOptions), ("complex", ComplexOptions), ("band", BandOptions)):
            _set(self, name, _nested(cls, getattr(self, name), name, "AnalysisOptions"))


@dataclass(frozen=True)
class RunOptions(_Options):
    """Where a run computes (the ``[run]`` section of a config file); nothing here changes its numbers.

    Kept apart from :class:`AnalysisOptions`, which holds what decides the numbers (the run file's options,
    the checkpoint's identity and the explorer's generated controls): the same run on a cluster or on this
    machine has the same options.

    ``scheduler``: a Dask scheduler address such as ``"tcp://host:8786"``, or ``"local"``, for
    :func:`tdakit.analyze`'s ``scheduler=``; None (or ``"none"``, as TOML has no null) runs on this machine.
    Only the text is checked here; whether a scheduler answers is checked when the run starts.
    """

    scheduler: str | None = None

    def __post_init__(self):
        value = self.scheduler
        if value is not None and (not isinstance(value, str) or not value.strip()):
            raise fail("scheduler", "RunOptions", "none, \"local\" or a Dask scheduler address such as "
                       "\"tcp://host:8786\"", value)
        if value is not None:
            _set(self, "scheduler", None if value.strip().lower() == "none" else value.strip())


@dataclass(frozen=True)
class StudyOptions(_Options):
    """The grid of the subsampling study: methods x landmark counts x seeds.

    ``reference``: ``"full"`` compares every cell with the diagram of the whole cloud,
    ``"densest"`` with the largest count of the first method (first seed), ``"auto"``
    uses the whole cloud when it has at most ``full_cloud_limit`` points.
    """

    methods: tuple[str, ...] = ("maxmin", "random")
    counts: tuple[int, ...] = (50, 100, 200, 400)
    n_seeds: int = 3
    reference: str = "auto"
    full_cloud_limit: int = 2000
    sampling: SamplingOptions = field(default_factory=SamplingOptions)
    complex: ComplexOptions = field(default_factory=ComplexOptions)
    band: BandOptions = field(default_factory=BandOptions)

    def __post_init__(self):
        name = "StudyOptions"
        methods = self.methods if isinstance(self.methods, (list, tuple)) else [self.methods]
        if not methods:
            raise fail("methods", name, "a non-empty list of sampling methods", self.methods)
        _set(self, "methods", tuple(check_choice(m, "methods", name, SAMPLING_METHODS) for m in methods))
        if len(set(self.methods)) != len(self.methods):
            raise fail("methods", name, "a list without repeats", self.methods)
        counts = self.counts if isinstance(self.counts, (list, tuple)) else [self.counts]
        counts = tuple(check_int(c, "counts", name, low=2) for c in counts)
        if not counts or len(set(counts)) != len(counts):
            raise fail("counts", name, "a non-empty list of distinct landmark counts >= 2", self.counts)
        _set(self, "counts", tuple(sorted(counts)))
        _set(self, "n_seeds", check_int(self.n_seeds, "n_seeds", name, low=1, high=1000))
        _set(self, "reference", check_choice(self.reference, "reference", name, REFERENCE_KINDS))
        _set(self, "full_cloud_limit", check_int(self.full_cloud_limit, "full_cloud_limit", name, low=2))
        for key, cls in (("sampling", SamplingOptions), ("complex", ComplexOptions), ("band", BandOptions)):
            _set(self, key, _nested(cls, getattr(self, key), key, name))

    def to_dict(self) -> dict:
        data = asdict(self)
        data["methods"], data["counts"] = list(self.methods), list(self.counts)
        return data
