"""Invented, hand-built inputs for every figure type, independent of the core's numbers.

The stored baseline images must change only when a figure changes, not when a landmark or band
routine is tuned, so these runs, studies and tests are assembled from fixed arrays (a fictional
"Marrowfield"-style ring, shell and sky scatter), never computed by ``analyze``. Each builder is
deterministic (fixed seeds) and small.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from tdakit.config import AnalysisOptions, StudyOptions
from tdakit.core.geometry.landmarks import Landmarks
from tdakit.core.inference.bands import Band
from tdakit.core.inference.compare import PermutationResult
from tdakit.core.topology.diagrams import Diagrams
from tdakit.pipeline import RunResult
from tdakit.study import StudyResult


def make_diagrams(per_dim, max_scale=np.inf, cut=None, *, vertices=None, filtration="rips",
                  units="length; Rips edge length"):
    """Diagrams from (m, 2) arrays; ``cut[k]`` marks alive-at-cutoff rows; ``vertices[k]`` = (births, deaths)."""
    pairs = tuple(np.asarray(p, dtype=float).reshape(-1, 2) for p in per_dim)
    flags = tuple(np.zeros(len(p), bool) if cut is None else np.asarray(cut[k], bool) for k, p in enumerate(pairs))
    births = [np.full((len(p), k + 1), -1) for k, p in enumerate(pairs)]
    deaths = [np.full((len(p), k + 2), -1) for k, p in enumerate(pairs)]
    for k, (born, died) in (vertices or {}).items():
        for row, (b, d) in enumerate(zip(born, died)):
            births[k][row] = b
            deaths[k][row] = d
    return Diagrams(pairs, flags, tuple(births), tuple(deaths), filtration, units, max_scale)


def make_band(diagrams, radii, method="subsample", level=0.95):
    return Band(method, level, tuple(radii), diagrams, "target", "confidence set", "statement", "none",
                np.zeros(3))


def _noise_pairs(rng, n, scale, start=0.0):
    births = start + rng.uniform(0, scale, n)
    return np.c_[births, births + rng.exponential(0.18 * scale, n)]


def _sorted(pairs):
    persistence = pairs[:, 1] - pairs[:, 0]
    return pairs[np.argsort(-persistence, kind="stable")]


def ring_points(n, rng, dims=2):
    """A noisy ring of radius 1 (and, for dims=3, a thin slab)."""
    angle = rng.uniform(0, 2 * np.pi, n)
    points = np.c_[np.cos(angle), np.sin(angle)] * (1 + 0.05 * rng.normal(size=(n, 1)))
    if dims == 1:
        return np.r_[rng.normal(-1.2, 0.25, n // 2), rng.normal(1.0, 0.3, n - n // 2)][:, None]
    if dims == 3:
        return np.c_[points, 0.15 * rng.normal(size=n)]
    if dims > 3:
        return np.c_[points, 0.1 * rng.normal(size=(n, dims - 2))] @ np.linalg.qr(rng.normal(size=(dims, dims)))[0]
    return points


def _landmarks(points, n_marks):
    order = np.argsort(np.arctan2(points[:, 1], points[:, 0]) if points.shape[1] > 1 else points[:, 0],
                       kind="stable")
    indices = np.sort(order[np.linspace(0, len(points) - 1, n_marks).astype(int)])
    distances = np.linalg.norm(points[:, None, :] - points[indices][None, :, :], axis=2)
    return Landmarks(indices, float(distances.min(axis=1).max()), distances.argmin(axis=1),
                     distances.min(axis=1), "maxmin")


def ring_diagrams(rng, marks, max_dim=1, *, scale=1.0):
    """H0 with one component that never dies; H1 with two real loops (numbered) and noise; H2 small."""
    h0 = _sorted(np.r_[np.c_[np.zeros(1), [np.inf]], np.c_[np.zeros(39), rng.exponential(0.09, 39) * scale]])
    loops = np.array([[0.22, 1.55], [0.35, 0.95]]) * scale
    h1 = np.r_[loops, _noise_pairs(rng, 24, 0.5 * scale, 0.1 * scale)]
    pairs = [h0, _sorted(h1)]
    if max_dim >= 2:
        pairs.append(_sorted(np.r_[[[0.7, 1.2]], _noise_pairs(rng, 8, 0.4 * scale, 0.6 * scale)]) * np.r_[1.0])
    n = len(marks)
    vertices = {1: ([(marks[0], marks[n // 3]), (marks[n // 2], marks[n // 2 + 2])],
                    [(marks[n // 6], marks[n // 2], marks[5 * n // 6]), (marks[n // 2 + 1], marks[n // 2 + 3],
                                                                        marks[n // 2 + 5])])}
    return make_diagrams(pairs, vertices=vertices)


def synthetic_run(kind="plane", *, unit="Mpc/h", n_points=400, n_marks=60, band=True, seed=3):
    """A RunResult assembled from fixed arrays: ``kind`` is plane, space, sky, line, projected or density."""
    rng = np.random.default_rng(seed)
    dims = {"plane": 2, "space": 3, "sky": 2, "line": 1, "projected": 5, "density": 2}[kind]
    points = ring_points(n_points, rng, dims)
    metric = "euclidean"
    if kind == "sky":
        points = np.c_[(np.degrees(np.arctan2(points[:, 1], points[:, 0])) * 1.6 + 400) % 360,
                       35 * points[:, 0] + 8 * rng.normal(size=n_points)]
        metric, unit = "angular", "deg"
    marks = _landmarks(points if kind != "sky" else ring_points(n_points, np.random.default_rng(seed), 2), n_marks)
    if kind == "density":
        diagrams = density_diagrams(rng)
        landmarks, landmark_points = None, np.zeros((0, dims))
    else:
        diagrams = ring_diagrams(rng, marks.indices, max_dim=2 if kind == "space" else 1,
                                 scale=30.0 if kind == "sky" else 1.0)
        if kind == "line":
            m = marks.indices
            diagrams = make_diagrams([diagrams[0], np.zeros((0, 2))],
                                     vertices={0: ([(m[-1],), (m[5],)], [(m[-1], m[-2]), (m[5], m[6])])})
        landmarks, landmark_points = marks, points[marks.indices]
    radii = tuple((0.1, 0.21, 0.15)[: len(diagrams)]) if kind != "density" else (2e-4, 2e-4)
    if kind == "sky":
        radii = tuple(30 * r for r in radii)
    the_band = make_band(diagrams, radii, "density" if kind == "density" else "subsample") if band else None
    columns = {"sky": ["longitude", "latitude"], "space": ["x", "y", "z"], "line": ["x"]}.get(kind)
    provenance = {"input": {"n_points": n_points, "n_dims": dims, "unit": unit, "metric": {"name": metric},
                            "columns": columns, "source": "Marrowfield mock"}}
    return RunResult(AnalysisOptions(), seed, landmarks, landmark_points, np.arange(n_points), points, diagrams,
                     the_band, provenance=provenance)


def density_diagrams(rng):
    """Negated kernel densities (small negative numbers) whose ticks would overprint without care."""
    h0 = _sorted(np.r_[[[-3.1e-3, np.inf]], np.c_[-rng.uniform(1.2e-3, 3e-3, 6), -rng.uniform(2e-4, 1e-3, 6)]])
    h1 = np.array([[-2.2e-3, -6e-4], [-9e-4, -7e-4]])
    return make_diagrams([h0, h1], filtration="density", units="negated kernel density (superlevel sets)")


def synthetic_study(seed=5):
    """A StudyResult with two methods, three landmark counts and three seeds."""
    rng = np.random.default_rng(seed)
    rows = []
    for method, slope in (("maxmin", 1.0), ("random", 1.6)):
        for count in (20, 40, 80):
            for s in range(3):
                rows.append({"method": method, "n_landmarks": count, "seed": s,
                             "coverage_radius": 2.0 / count, "certificate": 4.0 * slope / count,
                             "certificate_holds": True,
                             "bottleneck_H0": slope * 1.1 / count * (1 + 0.2 * rng.uniform()),
                             "bottleneck_H1": slope * 1.8 / count * (1 + 0.3 * rng.uniform()),
                             "significant_H0": 1, "significant_H1": int(1 + (count >= 40) + (s == 0 and count > 20)),
                             "seconds": 0.1, "peak_memory_mib": 10.0})
    cells = pd.DataFrame(rows)
    summary = cells.groupby(["method", "n_landmarks"]).max(numeric_only=True).reset_index()
    options = StudyOptions(methods=("maxmin", "random"), counts=(20, 40, 80), n_seeds=3)
    reference = ring_diagrams(rng, np.arange(60))
    return StudyResult(cells, summary, (), {"kind": "full cloud", "n_landmarks": None, "coverage_radius": 0.0},
                       reference, options, seed)


def synthetic_permutation(seed=6):
    rng = np.random.default_rng(seed)
    null = rng.gamma(6.0, 0.05, 400)
    return PermutationResult(0.0125, 0.11, null, False, np.zeros((4, 4)), {"power": 2.0})


def figure_cases():
    """Every figure type, as ``{name: callable(preset) -> Figure}``."""
    from tdakit.plotting import (
        plot_barcode,
        plot_betti_curves,
        plot_cloud,
        plot_diagram,
        plot_landscape,
        plot_permutation_null,
        plot_run_pair,
        plot_study,
        summary_figure,
    )

    plane, space = synthetic_run("plane"), synthetic_run("space")
    density = synthetic_run("density", unit=None)
    wide = synthetic_run("plane", seed=4)
    wide = RunResult(wide.options, wide.seed, wide.landmarks, wide.landmark_points, wide.preview_indices,
                     wide.preview_points, wide.diagrams, make_band(wide.diagrams, (1.2, 2.5)),
                     provenance=wide.provenance)
    unit = plane.unit
    numbers = {40 + 0: 1, 40 + 1: 2}  # the two planted loops: H1 rows follow the 40 H0 rows of the table
    return {
        "diagram": lambda p: plot_diagram(plane.diagrams, plane.band, preset=p, unit=unit,
                                          numbers=numbers)["ax"].figure,
        "diagram_3dims": lambda p: plot_diagram(space.diagrams, space.band, preset=p, unit=unit)["ax"].figure,
        "density_diagram": lambda p: plot_diagram(density.diagrams, density.band, preset=p)["ax"].figure,
        "barcode": lambda p: plot_barcode(plane.diagrams, plane.band, dim=1, preset=p, unit=unit,
                                          numbers=numbers)["ax"].figure,
        "barcode_h0": lambda p: plot_barcode(plane.diagrams, plane.band, dim=0, preset=p, unit=unit)["ax"].figure,
        "barcode_wide_band": lambda p: plot_barcode(wide.diagrams, wide.band, dim=1, preset=p,
                                                    unit=unit)["ax"].figure,
        "betti": lambda p: plot_betti_curves(plane.diagrams, plane.band, preset=p, unit=unit)["ax"].figure,
        "landscape": lambda p: plot_landscape(plane.diagrams, plane.band, preset=p, unit=unit)["ax"].figure,
        "cloud_plane": lambda p: plot_cloud(plane, preset=p)["ax"].figure,
        "cloud_space": lambda p: plot_cloud(space, preset=p)["ax"].figure,
        "cloud_sky": lambda p: plot_cloud(synthetic_run("sky"), preset=p)["ax"].figure,
        "cloud_line": lambda p: plot_cloud(synthetic_run("line"), dim=0, preset=p)["ax"].figure,
        "cloud_projected": lambda p: plot_cloud(synthetic_run("projected"), preset=p)["ax"].figure,
        "study": lambda p: plot_study(synthetic_study(), preset=p, unit=unit)["figure"],
        "permutation": lambda p: plot_permutation_null(synthetic_permutation(), preset=p, unit=unit)["ax"].figure,
        "pair": lambda p: plot_run_pair(plane, wide, titles=("60 landmarks", "wide band"), preset=p)["figure"],
        "summary": lambda p: summary_figure(plane, preset=p),
        "summary_space": lambda p: summary_figure(space, preset=p),
    }
