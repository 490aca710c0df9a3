"""The ``tdakit demo`` sub-command: the main job on the bundled mock catalogue, through the one pipeline."""

from __future__ import annotations

import time

import pandas as pd

import tdakit
from tdakit.cli.options import replicate_count
from tdakit.cli.outputs import FolderLock, prepare_folder
from tdakit.cli.progress import step_bars
from tdakit.config import AnalysisOptions, BandOptions, ComplexOptions, SamplingOptions
from tdakit.pipeline import analyze
from tdakit.scenarios import MARROWFIELD_BOX


def demo_options(n_landmarks: int = 200, n_boot: int = 100) -> AnalysisOptions:
    """The demo's choices: tdakit's defaults (the band ``"auto"`` picks), H0 and H1."""
    return AnalysisOptions(SamplingOptions(n_landmarks=n_landmarks), ComplexOptions(max_dim=1),
                           BandOptions(n_boot=n_boot))


STEM = "marrowfield"


def run(args, demo_file) -> int:
    from tdakit.cli.commands import publish_run

    start = time.perf_counter()
    n_boot = replicate_count(args)
    options = demo_options(args.landmarks, 100 if n_boot is None else n_boot)
    out = prepare_folder(args.out)
    cloud = tdakit.load_cloud(demo_file, columns=["x", "y", "z"], metric="periodic", box=MARROWFIELD_BOX,
                              unit="Mpc/h")
    print(f"Loaded {cloud.n_points} halos from {demo_file.name} (periodic box of side {MARROWFIELD_BOX:g} Mpc/h).")
    with step_bars(not args.quiet) as report:
        result = analyze(cloud, options, rng=args.seed, progress=report)
    print(result.summary())
    print("Longest-lived loops (H1). Planted: one ring of filaments; the periodic box (a 3-torus) adds three loops "
          "that wrap around it:")
    table = result.table
    _print_top(table[table.dimension == 1], cloud)
    with FolderLock(out, STEM):
        # the same file names as 'tdakit analyze': marrowfield.tdkrun, marrowfield_features.csv, figures
        written = publish_run(result, out, STEM, () if args.no_figures else ("pdf", "png"), args)
    print("Wrote " + ", ".join(str(p) for p in written) + f" ({time.perf_counter() - start:.1f} s in all).")
    return 0


def _print_top(rows, cloud, count=6):
    rows = rows.head(count)
    located = any(bool(v) for v in rows.birth_vertices)  # the density band has no vertices to point at
    where = "  born at (x, y, z)" if located else ""
    print(f"  {'birth':>12} {'death':>12} {'persistence':>12} {'real?':>6}{where}")
    for row in rows.itertuples():
        verdict = "-" if pd.isna(row.significant) else ("yes" if row.significant else "noise")
        line = f"  {row.birth:12.5g} {row.death:12.5g} {row.persistence:12.5g} {verdict:>6}"
        if located:
            line += "  (" + (", ".join(f"{v:.1f}" for v in cloud.points[row.birth_vertices[0]])
                             if row.birth_vertices else "-") + ")"
        print(line)
