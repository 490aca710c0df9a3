"""Command-line and TOML settings turned into the core's option objects."""

from __future__ import annotations

import argparse
from pathlib import Path

import tomllib

from tdakit.config import AnalysisOptions, StudyOptions
from tdakit.errors import DataFileNotFoundError, InvalidDataError

INPUT_KEYS = ("file", "columns", "metric", "box", "p", "standardize", "delimiter")


def add_input_arguments(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("reading the catalogue")
    group.add_argument("--columns", help="comma-separated columns to use, by name or position (default: all)")
    group.add_argument("--metric", default=None,
                       help="euclidean (default), manhattan, chebyshev, minkowski, periodic, angular, cosine")
    group.add_argument("--box", type=float, default=None, help="side of the periodic box (with --metric periodic)")
    group.add_argument("--standardize", action="store_true", help="rescale every column to unit variance first")


def add_analysis_arguments(parser: argparse.ArgumentParser) -> None:
    group = parser.add_argument_group("analysis (each overrides the same setting in --config)")
    group.add_argument("--config", type=Path, help="TOML file with [sampling], [complex] and [band] sections")
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
    group.add_argument("--replicates", type=int, help="resampling replicates behind the band (default 200)")


def read_toml(path: Path) -> dict:
    if not path.is_file():
        raise DataFileNotFoundError(f"No config file at {str(path)!r}.", parameter="config")
    try:
        return tomllib.loads(path.read_text())
    except (tomllib.TOMLDecodeError, UnicodeDecodeError) as exc:
        raise InvalidDataError(f"The config file {str(path)!r} is not valid TOML: {exc}.", parameter="config") from None


def analysis_options(args, config: dict | None = None) -> AnalysisOptions:
    """Options from the config's sections, then the command-line overrides."""
    config = dict(config or {})
    sections = {key: dict(config.get(key, {})) for key in ("sampling", "complex", "band")}
    overrides = {("sampling", "method"): args.sampling, ("complex", "filtration"): args.complex,
                 ("complex", "max_dim"): args.max_dim, ("complex", "max_scale"): args.max_scale,
                 ("band", "method"): args.band, ("band", "level"): args.level, ("band", "n_boot"): args.replicates}
    for (section, key), value in overrides.items():
        if value is not None:
            sections[section][key] = value
    if args.landmarks is not None:
        sections["sampling"]["n_landmarks"] = None if args.landmarks == "all" else _count(args.landmarks)
    return AnalysisOptions.from_dict(sections)


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
    if getattr(args, "columns", None):
        settings["columns"] = [c.strip() for c in args.columns.split(",")]
    for key in ("metric", "box"):
        if getattr(args, key, None) is not None:
            settings[key] = getattr(args, key)
    if getattr(args, "standardize", False):
        settings["standardize"] = True
    return settings


def load(path, settings: dict):
    import tdakit

    columns = settings.get("columns")
    if columns is not None:
        columns = [int(c) if isinstance(c, str) and c.isdigit() else c for c in columns]
    return tdakit.load_cloud(path, columns=columns, metric=settings.get("metric", "euclidean"),
                             box=settings.get("box"), p=settings.get("p"),
                             standardize=settings.get("standardize", False), delimiter=settings.get("delimiter"))


def study_options(config: dict) -> StudyOptions:
    grid = dict(config.get("study", {}))
    grid.pop("seed", None)
    for key in ("sampling", "complex", "band"):
        if key in config:
            grid[key] = config[key]
    return StudyOptions.from_dict(grid)
