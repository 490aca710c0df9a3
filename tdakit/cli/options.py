"""Command-line and TOML settings turned into the core's option objects."""

from __future__ import annotations

import argparse
import re
import sys
from pathlib import Path

import tomllib

from tdakit.config import AnalysisOptions, RunOptions, StudyOptions
from tdakit.errors import DataFileNotFoundError, InvalidDataError, InvalidParameterError

INPUT_KEYS = ("file", "columns", "metric", "box", "p", "standardize", "delimiter")
ANALYZE_SECTIONS = ("input", "sampling", "complex", "band", "run", "study")
STUDY_SECTIONS = ("input", "study", "sampling", "complex", "band")
# PNG resolution: journals ask 300-600 dpi, line art 1200; a 7.2 in wide page at 1200 dpi is 8640 pixels wide.
DPI_RANGE = (20, 1200)

ANGULAR = "angular: (longitude, latitude) in degrees, in that column order"


def add_input_arguments(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("reading the catalogue")
    group.add_argument("--columns", help="comma-separated columns to use, by header name or by position counted "
                                         "from 0 (the first column is 0); default: all")
    group.add_argument("--metric", default=None,
                       help=f"euclidean (default), manhattan, chebyshev, minkowski, periodic, cosine, or {ANGULAR}")
    group.add_argument("--box", type=float, default=None, help="side of the periodic box (with --metric periodic)")
    group.add_argument("--standardize", action="store_true", help="rescale every column to unit variance first")
    add_catalogue_arguments(parser)


def add_analysis_arguments(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("analysis (each overrides the same setting in --config; see 'tdakit "
                                      "config-keys')")
    group.add_argument("--config", type=Path, help="TOML file with [input], [sampling], [complex] and [band] "
                                                   "sections ('tdakit config-keys' lists every key)")
    group.add_argument("--landmarks", help="number of landmarks, or 'all' to use every point (default 200)")
    group.add_argument("--sampling", help="how landmarks are picked: maxmin (default), random, density, core_maxmin")
    group.add_argument("--complex", help="filtration: dtm (default: DTM-weighted Rips), rips, witness, alpha")
    group.add_argument("--max-dim", type=int, help="highest homology dimension (default 1: components and loops)")
    group.add_argument("--max-scale", type=float, help="stop the filtration at this scale (default: no cap)")
    group.add_argument("--band", help="noise band: auto (default: density for 1-3 coordinates with default "
                                      "sampling and complex, else dtm; both proven confidence sets, calibrated on "
                                      "planted truth), dtm, density, subsample (proven, conservative), bootstrap "
                                      "(heuristic), landscape (draws a band, calls nothing), or none")
    group.add_argument("--level", type=float, help="confidence level of the band (default 0.95)")
    add_replicate_arguments(group, "replicates behind the band (default 200; config key [band] n_boot)")
    add_budget_argument(group)
    group.add_argument("--scheduler", metavar="ADDRESS", help="run the landmarks, the lazy witness edges and the "
                       "replicates on a Dask cluster: its scheduler's address (tcp://host:8786), 'local', or 'none' "
                       "for this machine; checked before the catalogue is read; the run file records it, the "
                       "workers' versions and where each step ran (needs tdakit[distributed]; config key [run] "
                       "scheduler)")


def add_replicate_arguments(group, text: str, default=None) -> None:
    group.add_argument("--n-boot", type=int, default=default, metavar="N", help=text)
    group.add_argument("--replicates", type=int, dest="replicates_deprecated", help=argparse.SUPPRESS)


def add_budget_argument(group) -> None:
    group.add_argument("--memory-budget", metavar="SIZE",
                       help="refuse, before building, complexes predicted to need more memory: 8GB, 512MiB, 0.5TB, "
                            "16G (GB = 10^9 bytes, GiB and G = 2^30); default a quarter of the machine's or the "
                            "container's memory; config key [complex] memory_budget")


def add_resume_arguments(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("checkpoints")
    group.add_argument("--resume", action="store_true",
                       help="resume from the checkpoint in --out (automatic whenever one from the same input, options "
                            "and seed is there; the flag is kept for scripts and changes nothing)")
    group.add_argument("--fresh", action="store_true", help="discard a checkpoint in --out and start over")


def replicate_count(args):
    """``--n-boot``, with the old spelling ``--replicates`` accepted and flagged."""
    old = getattr(args, "replicates_deprecated", None)
    if old is not None:
        print("tdakit: note: --replicates is deprecated; it is called --n-boot now (the config key [band] n_boot).",
              file=sys.stderr)
        if args.n_boot is not None and args.n_boot != old:
            raise InvalidParameterError(f"--n-boot {args.n_boot} and --replicates {old} name the same count "
                                        f"with two values; give --n-boot only.", parameter="n_boot")
        return old
    return args.n_boot


def read_toml(path: Path, sections=ANALYZE_SECTIONS) -> dict:
    """The config file, each section checked to be a table among ``sections``."""
    path = Path(path)
    if not path.is_file():
        raise DataFileNotFoundError(f"No config file at {str(path)!r}.", parameter="config")
    try:
        config = tomllib.loads(path.read_text())
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InvalidDataError(f"The config file {str(path)!r} is not valid TOML: {exc}.", parameter="config") from None
    except OSError as exc:
        raise InvalidDataError(f"The config file {str(path)!r} cannot be read ({exc.strerror or exc}).",
                               parameter="config") from None
    for name, value in config.items():
        if name not in sections:
            raise InvalidDataError(f"Unknown section [{name}] in the config file {str(path)!r}; known sections: "
                                   f"{', '.join(sections)} ('tdakit config-keys' lists every key).",
                                   parameter="config")
        if not isinstance(value, dict):
            kind = "a list (an [[array]] of tables or a list value)" if isinstance(value, list) else \
                f"a {type(value).__name__} value"
            raise InvalidDataError(f"The [{name}] section of the config file {str(path)!r} must be a table (a "
                                   f"[{name}] line followed by key = value lines), not {kind}.", parameter="config")
    return config


def analysis_options(args, config: dict | None = None) -> AnalysisOptions:
    """Options from the config's sections, then the command-line overrides."""
    config = dict(config or {})
    sections = {key: dict(config.get(key, {})) for key in ("sampling", "complex", "band")}
    overrides = {("sampling", "method"): args.sampling, ("complex", "filtration"): args.complex,
                 ("complex", "max_dim"): args.max_dim, ("complex", "max_scale"): args.max_scale,
                 ("band", "method"): args.band, ("band", "level"): args.level,
                 ("band", "n_boot"): replicate_count(args),
                 ("complex", "memory_budget"): args.memory_budget}
    for (section, key), value in overrides.items():
        if value is not None:
            sections[section][key] = value
    if sections["sampling"].get("n_landmarks") == "all":
        sections["sampling"]["n_landmarks"] = None
    if args.landmarks is not None:
        sections["sampling"]["n_landmarks"] = None if args.landmarks == "all" else _count(args.landmarks)
    return AnalysisOptions.from_dict(sections)


def run_options(args, config: dict | None = None) -> RunOptions:
    """The [run] section of the config, then ``--scheduler`` (the flag wins, ``none`` included)."""
    section = dict((config or {}).get("run", {}))
    if getattr(args, "scheduler", None) is not None:
        section["scheduler"] = args.scheduler
    try:
        return RunOptions.from_dict(section)
    except InvalidParameterError as exc:
        raise _scheduler_words(exc, args) if exc.parameter == "scheduler" else exc from None


def check_scheduler(args, options: RunOptions, function: str = "analyze") -> None:
    """Refuse a scheduler that does not answer (within seconds, before any file is read), in the flag's words."""
    if options.scheduler is None:
        return
    from tdakit.distributed.scheduler import check_scheduler as probe

    try:
        probe(options.scheduler, function)
    except InvalidParameterError as exc:
        raise _scheduler_words(exc, args) from None


def _scheduler_words(exc: InvalidParameterError, args) -> InvalidParameterError:
    """A refused scheduler named as the user gave it: ``--scheduler`` or the config's ``[run] scheduler``."""
    where = "--scheduler" if getattr(args, "scheduler", None) is not None else "[run] scheduler (in --config)"
    text = re.sub(r"\bThe 'scheduler' parameter of [\w.]+ must be", f"{where} must be", " ".join(str(exc).split()))
    return InvalidParameterError(text, parameter="scheduler")


def memory_budget_line(options) -> str:
    """What the memory budget is and where it comes from, for the first lines of a command."""
    from tdakit.core.topology.preflight import default_memory_budget

    chosen = options.complex.memory_budget
    if chosen is None:
        return (f"Memory budget {_size(default_memory_budget())} (a quarter of this machine's or container's "
                f"memory; --memory-budget to change).")
    return f"Memory budget {_size(chosen)} (chosen)."


def _size(value: float) -> str:
    if value == float("inf"):
        return "unlimited"
    return f"{value / 2**30:.3g} GiB" if value >= 2**30 else f"{value / 2**20:.3g} MiB"


def check_dpi(args) -> None:
    """Refuse a PNG resolution that is not positive or would make figures of absurd pixel sizes."""
    low, high = DPI_RANGE
    if not low <= args.dpi <= high:
        raise InvalidParameterError(f"The '--dpi' option must be between {low} and {high} dots per inch (at "
                                    f"{high} a 7.2 in wide figure is {int(7.2 * high)} pixels wide). Got {args.dpi}.",
                                    parameter="dpi")


def _count(text: str):
    try:
        return int(text)
    except ValueError:
        return text  # the option check names it


def input_settings(args, config: dict | None = None) -> dict:
    settings = dict((config or {}).get("input", {}))
    unknown = sorted(set(settings) - set(INPUT_KEYS))
    if unknown:
        raise InvalidDataError(f"Unknown key {unknown[0]!r} in the [input] section; known keys: "
                               f"{', '.join(INPUT_KEYS)}.", parameter="config")
    columns = settings.get("columns")
    if isinstance(columns, str):
        settings["columns"] = [c.strip() for c in columns.split(",")]
    elif columns is not None and not (isinstance(columns, list)
                                      and all(isinstance(c, (str, int)) and not isinstance(c, bool) for c in columns)):
        raise InvalidDataError(f"The [input] key 'columns' must be a list of column names or positions (counted "
                               f"from 0), like [\"x\", \"y\"] or [0, 1]. Got {columns!r}.", parameter="columns")
    if getattr(args, "columns", None):
        settings["columns"] = [c.strip() for c in args.columns.split(",")]
    for key in ("metric", "box"):
        if getattr(args, key, None) is not None:
            settings[key] = getattr(args, key)
    if getattr(args, "standardize", False):
        settings["standardize"] = True
    settings.update(catalogue_settings(args))
    return settings


def load(path, settings: dict):
    import tdakit

    columns = settings.get("columns")
    if columns is not None:
        columns = [int(c) if isinstance(c, str) and c.isdigit() else c for c in columns]
    return tdakit.load_cloud(path, columns=columns, metric=settings.get("metric", "euclidean"),
                             box=settings.get("box"), p=settings.get("p"),
                             standardize=settings.get("standardize", False), delimiter=settings.get("delimiter"),
                             **catalogue_options(settings))


def study_options(config: dict, memory_budget=None) -> StudyOptions:
    grid = dict(config.get("study", {}))
    grid.pop("seed", None)
    for key in ("sampling", "complex", "band"):
        if key in config:
            grid[key] = dict(config[key])
    if memory_budget is not None:
        grid["complex"] = {**grid.get("complex", {}), "memory_budget": memory_budget}
    return StudyOptions.from_dict(grid)


# -- the core's words in the command line's words ---------------------------------------------------------
_FLAGS = {"max_scale": "--max-scale", "max_dim": "--max-dim", "n_landmarks": "--landmarks",
          "landmarks": "--landmarks", "memory_budget": "--memory-budget", "n_boot": "--n-boot", "level": "--level",
          "filtration": "--complex", "n_jobs": "--jobs", "columns": "--columns", "metric": "--metric", "box": "--box",
          "standardize": "--standardize", "where": "--where", "dataset": "--dataset", "file_format": "--file-format",
          "unit": "--unit", "drop_missing": "--drop-missing", "sky": "--sky", "angle_unit": "--angle-unit",
          "cosmology": "--cosmology", "little_h": "--little-h", "scheduler": "--scheduler"}
_CONFIG_ONLY = {"resolution": "band", "bandwidth": "band", "sparse": "complex", "witness": "complex",
                "dtm_neighbors": "complex", "subsample_size": "band", "n_subsamples": "band"}


def _flag_value(match: re.Match) -> str:
    name, value = match.group(1), match.group(2)
    if name in _FLAGS:
        return f"{_FLAGS[name]} {value}"
    return f"{name} = {value} in the [{_CONFIG_ONLY[name]}] section of --config"


def in_cli_words(message: str) -> str:
    """Rewrite a core message's Python parameter names and calls as the command line's options."""
    names = "|".join(sorted(set(_FLAGS) | set(_CONFIG_ONLY), key=len, reverse=True))
    text = re.sub(rf"\b({names})\s*=\s*([0-9][0-9.eE+-]*|'[^']*'|\"[^\"]*\")", _flag_value, message)
    text = re.sub(r"'memory_budget' \(bytes\)", "--memory-budget (e.g. 16GB)", text)
    for name, flag in _FLAGS.items():
        text = text.replace(f"'{name}'", flag)
    for name, section in _CONFIG_ONLY.items():
        text = text.replace(f"'{name}'", f"[{section}] {name} (in --config)")
    text = re.sub(r"\bwith select_landmarks\b", "with --landmarks", text)
    text = re.sub(r"\(select_landmarks; ", "(", text)
    text = re.sub(r"\bThe (--[a-z-]+) parameter of [\w.]+ must be", r"\1 must be", text)
    text = text.replace("the number of landmarks", "--landmarks")
    for name in ("max_scale", "max_dim", "n_landmarks", "memory_budget"):  # bare names left, e.g. "no max_scale"
        text = re.sub(rf"(?<![\w-]){name}\b", _FLAGS[name], text)
    return text


def proposal_words(exc) -> str:
    """A refusal's proposed settings (``exc.proposal``, when the core gives one) as command-line options."""
    proposal = getattr(exc, "proposal", None)
    if not isinstance(proposal, dict) or not proposal:
        return ""
    parts = []
    for name, value in proposal.items():
        if name in _FLAGS:
            parts.append(f"{_FLAGS[name]} {value:g}" if isinstance(value, float) else f"{_FLAGS[name]} {value}")
        elif name in _CONFIG_ONLY:
            parts.append(f"[{_CONFIG_ONLY[name]}] {name} = {value} (in --config)")
    return " Try: " + " or ".join(parts) + "." if parts else ""


# -- catalogue files (FITS, HDF5, Parquet) and sky coordinates -------------------------------------------------
CATALOGUE_KEYS = ("where", "dataset", "file_format", "unit", "drop_missing", "sky", "angle_unit", "cosmology",
                  "little_h")
INPUT_KEYS = INPUT_KEYS + CATALOGUE_KEYS  # also keys of the config's [input] section
_SKY_KEYS = ("angle_unit", "cosmology", "little_h")
CATALOGUE_KEY_HELP = {  # (default, meaning) of each [input] key above, in the form of tdakit.cli.keys.INPUT_HELP
    "where": ("none", "row filter of a FITS, HDF5 or Parquet file, e.g. \"z < 0.1 and mag_r < 19\" (--where)"),
    "dataset": ("the only table", "HDF5 path of the table, or FITS extension name or number (--dataset)"),
    "file_format": ("from the suffix", "fits, hdf5 or parquet (--file-format)"),
    "unit": ("the file's", "unit of the coordinates, e.g. \"Mpc/h\" (--unit)"),
    "drop_missing": ("false", "drop rows with NaN or NULL values instead of stopping (--drop-missing)"),
    "sky": ("none", "parallax or redshift: columns are RA, Dec and parallax (mas) or redshift (--sky)"),
    "angle_unit": ('"deg"', "unit of RA and Dec with sky: deg or rad (--angle-unit)"),
    "cosmology": ('"Planck18"', "sky redshift: an astropy cosmology name or \"H0=70,Om0=0.3\" (--cosmology)"),
    "little_h": ("false", "sky redshift: positions in Mpc/h (--little-h)"),
}


def add_catalogue_arguments(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("catalogue files (.fits, .fits.gz, .h5, .hdf5, .parquet; pip install "
                                      "tdakit[formats]) and sky coordinates")
    group.add_argument("--where", metavar="FILTER", help="keep the rows that pass, e.g. \"parallax > 2\" or \"z < 0.1 "
                       "and mag_r < 19\" (comparisons joined by and, or, not; FITS, HDF5, Parquet)")
    group.add_argument("--dataset", help="HDF5: path of the table (a compound dataset, a group of columns or a 2-D "
                                         "array); FITS: name or number of the table extension")
    group.add_argument("--file-format", choices=("fits", "hdf5", "parquet"),
                       help="the file's format when its suffix does not say")
    group.add_argument("--unit", help="unit of the coordinates for tables and figures (default: the file's, when "
                                      "every column names the same)")
    group.add_argument("--drop-missing", action="store_true", help="drop rows with missing values (NaN, NULL) "
                                                                   "instead of stopping at the first")
    group.add_argument("--sky", choices=("parallax", "redshift"),
                       help="--columns names RA, Dec and parallax (mas) or redshift: convert them to x, y, z in pc "
                            "or comoving Mpc")
    group.add_argument("--angle-unit", choices=("deg", "rad"), help="unit of RA and Dec with --sky (default deg)")
    group.add_argument("--cosmology", help="with --sky redshift: an astropy cosmology (Planck18 by default, "
                                           "Planck15, WMAP9, ...) or Lambda-CDM parameters like H0=70,Om0=0.3")
    group.add_argument("--little-h", action="store_true", help="with --sky redshift: positions in Mpc/h")


def catalogue_settings(args) -> dict:
    """The catalogue and sky flags given on the command line (they override the config's [input] keys)."""
    given = {key: getattr(args, key, None) for key in CATALOGUE_KEYS}
    return {key: value for key, value in given.items() if value not in (None, False)}


def catalogue_options(settings: dict) -> dict:
    """``load_cloud`` keywords from the [input] settings: filter, dataset, format, unit, missing values, sky."""
    options = {key: settings[key] for key in ("where", "dataset", "file_format", "unit") if key in settings}
    if settings.get("drop_missing"):
        options["drop_missing"] = settings["drop_missing"]
    sky = {key: settings[key] for key in _SKY_KEYS if key in settings and settings[key] is not False}
    if "sky" in settings:
        options["sky"] = {"distance": settings["sky"], **sky}
    elif sky:
        flag = "--" + sorted(sky)[0].replace("_", "-")
        raise InvalidParameterError(f"{flag} (config key {sorted(sky)[0]}) applies to sky coordinates only; add --sky "
                                    f"parallax or --sky redshift (config key sky).", parameter="sky")
    return options
