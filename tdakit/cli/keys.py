"""Every key of a tdakit config file, with its default and meaning (``tdakit config-keys``)."""

from __future__ import annotations

from dataclasses import MISSING, fields

from tdakit.config import BandOptions, ComplexOptions, RunOptions, SamplingOptions, StudyOptions

INPUT_HELP = {
    "file": ("(required by study)", "the catalogue file, relative to the config file's folder"),
    "columns": ("all columns", "columns to use, by header name or by position; positions count from 0 (the "
                "first column is 0), as in --columns"),
    "metric": ('"euclidean"', "euclidean, manhattan, chebyshev, minkowski, periodic, angular (longitude, "
               "latitude in degrees), cosine"),
    "box": ("none", "side of the periodic box (metric periodic)"),
    "p": ("none", "the exponent of the minkowski metric"),
    "standardize": ("false", "rescale every column to unit variance first"),
    "delimiter": ("guessed", "the column separator of a text file"),
}

OPTION_HELP = {
    "sampling": {
        "method": "how landmarks are picked: maxmin, random, density, core_maxmin (--sampling)",
        "n_landmarks": "number of landmarks, or \"all\" for every point (--landmarks)",
        "keep_fraction": "core_maxmin: fraction of the densest points kept before maxmin",
        "density_power": "density: landmarks drawn with probability proportional to density ** power",
        "density_neighbors": "neighbours behind the density estimate",
    },
    "complex": {
        "filtration": "dtm (DTM-weighted Rips), rips, witness, alpha (--complex)",
        "max_dim": "highest homology dimension: 0 components, 1 loops, 2 voids (--max-dim)",
        "max_scale": "stop the filtration at this scale (--max-scale)",
        "coefficient_field": "prime p of the coefficient field Z/p",
        "collapse": "edge collapse before expansion (exact, faster)",
        "sparse": "sparse Rips approximation parameter in (0, 1)",
        "witness": "witness complex kind: lazy, strong, weak",
        "witness_nu": "nu of the lazy witness complex (0, 1 or 2)",
        "dtm_neighbors": "points per distance-to-measure average",
        "dtm_power": "power p of the DTM filtration: 1 or \"inf\"",
        "memory_budget": "refuse complexes predicted to need more memory, e.g. \"8GB\", \"512MiB\" "
                         "(--memory-budget)",
    },
    "band": {
        "method": "auto, dtm, density, subsample, bootstrap, landscape, none (--band)",
        "level": "confidence level in (0, 1) (--level)",
        "n_boot": "resampling replicates behind the band (--n-boot)",
        "subsample_size": "points per subsample (subsample and landscape bands)",
        "account_for_landmarks": "widen the band by the landmarks' coverage radius",
        "bandwidth": "kernel width of the density band, in the data's units (none: Scott's rule)",
        "resolution": "grid cells per axis of the density band (memory grows as resolution ** dimensions)",
        "n_subsamples": "subsamples behind the landscape band",
        "n_levels": "landscape levels kept by the landscape band",
    },
    "run": {
        "scheduler": "analyze: Dask scheduler address (\"tcp://host:8786\") or \"local\"; runs landmarks, lazy "
                     "witness edges and replicates there, same numbers (--scheduler)",
    },
    "study": {
        "methods": "sampling methods compared",
        "counts": "landmark counts compared",
        "n_seeds": "seeds per (method, count)",
        "reference": "auto, full (the whole cloud) or densest (the largest count of the first method)",
        "full_cloud_limit": "reference auto: the whole cloud when it has at most this many points",
        "seed": "root seed of the study (--seed overrides it)",
    },
}

_CLASSES = {"sampling": SamplingOptions, "complex": ComplexOptions, "band": BandOptions, "run": RunOptions,
            "study": StudyOptions}
_NESTED = ("sampling", "complex", "band")


def _default(field) -> str:
    value = field.default if field.default is not MISSING else None
    if field.name == "memory_budget":
        return "a quarter of the machine's (or container's) memory"
    if field.name == "scheduler":
        return '"none" (this machine)'
    if value is None:
        return "none (chosen from the data)" if field.name.endswith(("neighbors", "size", "bandwidth", "resolution",
                                                                     "budget")) else "none"
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, str):
        return f'"{value}"'
    if isinstance(value, tuple):
        return "[" + ", ".join(f'"{v}"' if isinstance(v, str) else str(v) for v in value) + "]"
    if value == float("inf"):
        return '"inf"'
    return str(value)


def documented_keys() -> dict[str, dict[str, tuple[str, str]]]:
    """Section -> key -> (default, meaning), from the option classes themselves."""
    from tdakit.cli.options import CATALOGUE_KEY_HELP

    sections = {"input": {**INPUT_HELP, **CATALOGUE_KEY_HELP}}
    for section, cls in _CLASSES.items():
        keys = {}
        for field in fields(cls):
            if section == "study" and field.name in _NESTED:
                continue
            keys[field.name] = (_default(field), OPTION_HELP[section].get(field.name, ""))
        if section == "study":
            keys["seed"] = ("none (a fresh seed, recorded)", OPTION_HELP["study"]["seed"])
        sections[section] = keys
    return sections


def config_keys_text() -> str:
    """The help topic: every section and key of a config file, with its default and meaning."""
    lines = ["Config files are TOML. Sections and keys (default, meaning); a command-line option overrides the same",
             "key. 'tdakit analyze --config' reads [input], [sampling], [complex], [band], [run]; 'tdakit study' reads",
             "[input] (with file) and [study], plus [sampling], [complex], [band] shared by every setting.",
             "Every section is a table ([band] followed by key = value lines); unknown sections and keys are refused.",
             "Column positions count from 0.", ""]
    for section, keys in documented_keys().items():
        lines.append(f"[{section}]")
        width = max(len(k) for k in keys)
        for key, (default, meaning) in keys.items():
            lines.append(f"  {key:<{width}}  default {default}: {meaning}")
        lines.append("")
    lines += ["Example:", "  [input]", '  columns = ["ra", "dec"]', '  metric = "angular"', "  [sampling]",
              "  n_landmarks = 400", "  [band]", '  method = "dtm"', "  n_boot = 500", "  [complex]",
              '  memory_budget = "8GB"']
    return "\n".join(lines)
