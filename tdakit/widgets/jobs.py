"""The functions a worker process runs: thin calls into the one pipeline, the study and the comparison."""

from __future__ import annotations

from tdakit.pipeline import analyze


def run_analysis(cloud, options, seed, settings=None, *, progress):
    """``settings``: the other keyword arguments of :func:`analyze` (``n_jobs``, ``scheduler``, ``checkpoint``)."""
    return analyze(cloud, options, rng=seed, progress=progress, **(settings or {}))


def run_study(cloud, options, seed, *, progress):
    from tdakit.study import subsampling_study

    return subsampling_study(cloud, options, rng=seed, progress=lambda done, total: progress("settings", done, total))


def run_pair(cloud, first, second, seed, *, progress):
    results = []
    for i, options in enumerate((first, second)):
        results.append(analyze(cloud, options, rng=seed))
        progress("settings", i + 1, 2)
    return tuple(results)


def run_comparison(cloud_a, cloud_b, settings, seed, *, progress):
    from tdakit.comparison import compare_catalogues

    return compare_catalogues(cloud_a, cloud_b, rng=seed, progress=progress, **settings)

