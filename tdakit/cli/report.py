"""What ``tdakit summary`` prints: the run, its band, the landmark bound, the verdict and the leading features."""

from __future__ import annotations

import math


def _number(value) -> str:
    value = float(value)
    return "inf" if math.isinf(value) else f"{value:.4g}"


def band_lines(run) -> list[str]:
    band = run.band
    if band is None:
        return ["Band: none (no verdict on any feature)."]
    radii = ", ".join(f"H{k} {_number(r)}" for k, r in enumerate(band.radii))
    lines = [f"Band: {band.method}, level {band.level:g}, radius {radii} (a feature is real when its persistence "
             f"exceeds twice the radius).",
             f"  covers: {band.target}", f"  validity: {band.validity}"]
    if not band.calls:
        lines.append(f"  no verdict on single features: {band.no_call_reason}")
    return lines


def bound_line(run) -> str:
    bound = run.diagrams.params.get("landmark_bound")
    if run.landmarks is None:
        return "Landmark bound: none (every point was a vertex)."
    if not bound:
        return (f"Landmark bound: not known for {run.diagrams.filtration} diagrams (coverage radius "
                f"{_number(run.coverage_radius)}).")
    return (f"Landmark bound: {_number(bound)} (coverage radius {_number(run.coverage_radius)}); bars shorter than "
            f"{_number(2 * bound)} can come from the landmark spacing alone.")


def verdict_line(run, table) -> str:
    if run.band is None or not run.band.calls:
        return "Verdict: none (the band does not call single features)."
    parts = []
    for k in range(len(run.diagrams)):
        rows = table[table.dimension == k]
        parts.append(f"H{k} {int(rows['significant'].fillna(False).astype(bool).sum())} of {len(rows)}")
    return "Verdict, features called real per dimension: " + ", ".join(parts) + "."


def feature_lines(table, dimension: int, rows: int) -> list[str]:
    import pandas as pd

    chosen = table[table.dimension == dimension].head(rows)
    names = {0: "components", 1: "loops", 2: "voids"}
    lines = [f"H{dimension} ({names.get(dimension, 'classes')}): {len(table[table.dimension == dimension])} "
             f"classes; leading {len(chosen)}:"]
    if not len(chosen):
        return lines
    lines.append(f"  {'birth':>11} {'death':>11} {'persistence':>11} {'margin':>11}  {'real?':<6} status")
    for row in chosen.itertuples():
        verdict = "-" if pd.isna(row.significant) else ("yes" if row.significant else "noise")
        margin = "-" if pd.isna(row.margin) else _number(row.margin)
        lines.append(f"  {_number(row.birth):>11} {_number(row.death):>11} {_number(row.persistence):>11} "
                     f"{margin:>11}  {verdict:<6} {row.status}")
    return lines


def cluster_lines(run) -> list[str]:
    """Where the steps ran, for a run made with a Dask scheduler (none otherwise)."""
    record = run.provenance.get("scheduler")
    if not isinstance(record, dict):
        return []
    steps = record.get("steps") or {}
    words = {"cluster": "on the cluster", "driver": "here", "not used": "not used"}
    placed = ", ".join(f"{step} {words.get(where, where)}" for step, where in steps.items())
    return [f"Cluster: {record.get('address')} ({record.get('n_workers')} workers)" + (f"; {placed}." if placed
                                                                                         else ".")]


def run_report(run, rows: int = 5) -> str:
    """The summary of a saved run, with the leading ``rows`` features of every homology dimension."""
    table = run.table
    lines = [run.summary(), *cluster_lines(run), "", *band_lines(run), bound_line(run), verdict_line(run, table), ""]
    for k in range(len(run.diagrams)):
        lines += feature_lines(table, k, rows)
    return "\n".join(lines)
