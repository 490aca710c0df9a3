"""Entry point of the ``tdakit`` command: sub-commands, one-line errors, exit codes."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from tdakit.errors import TdakitError

DEMO_FILE = Path(__file__).resolve().parents[2] / "datasets" / "marrowfield_halos.csv"

_ANALYZE = ("Find the landmarks of one catalogue, build the filtration on them, draw a noise band and mark each "
            "feature (component, loop, void) as real or noise. Writes a run file (.tdkrun, reloadable with "
            "'tdakit summary' and 'tdakit redraw'), a feature table (CSV) and figures into --out.")
_STUDY = ("Does the subsampling choice change the topology you report? Runs every combination of sampling "
          "methods x landmark counts x seeds from a TOML config, compares each with a reference diagram, checks the "
          "stability certificate and recommends the smallest landmark count whose significant features stop "
          "changing. Config sections: [input] file, columns, metric, box; [study] methods, counts, n_seeds, "
          "reference, seed; optional [sampling], [complex], [band].")


def _figure_arguments(parser):
    group = parser.add_argument_group("figures")
    group.add_argument("--no-figures", action="store_true", help="skip the figures")
    group.add_argument("--formats", default="pdf,png", help="comma-separated: pdf, svg, png (default pdf,png)")
    group.add_argument("--preset", default="double", choices=["single", "double"],
                       help="journal column width: single (3.5 in) or double (7.2 in, default)")
    group.add_argument("--dpi", type=int, default=200, help="resolution of PNG figures (default 200)")


def _run_arguments(parser, out_default):
    parser.add_argument("--out", type=Path, default=Path(out_default), help=f"output folder (default ./{out_default})")
    parser.add_argument("--seed", type=int, default=None, help="random seed; the run records it for replay")
    parser.add_argument("--jobs", type=int, default=1, help="worker processes for the resampling (default 1)")
    parser.add_argument("--quiet", action="store_true", help="no progress bars")


def _parser() -> argparse.ArgumentParser:
    from tdakit.cli.options import add_analysis_arguments, add_input_arguments

    parser = argparse.ArgumentParser(
        prog="tdakit",
        description="Persistent-homology diagnostics for large point clouds: which loops and voids are real?")
    parser.add_argument("--debug", action="store_true", help="show the full traceback on errors")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND")
    analyze = commands.add_parser("analyze", help="analyse one catalogue file", description=_ANALYZE)
    analyze.add_argument("file", type=Path, help="the catalogue: .csv, .tsv, .txt, .dat, .npy or .npz")
    add_input_arguments(analyze)
    add_analysis_arguments(analyze)
    _run_arguments(analyze, "tdakit-out")
    _figure_arguments(analyze)
    study = commands.add_parser("study", help="compare subsampling choices (methods x counts x seeds)",
                                description=_STUDY)
    study.add_argument("config", type=Path, help="TOML file describing the catalogue and the grid")
    study.add_argument("--resume", action="store_true", help="keep a checkpoint in --out and resume from it")
    _run_arguments(study, "tdakit-study")
    _figure_arguments(study)
    redraw = commands.add_parser("redraw", help="draw the figures of a saved run again",
                                 description="Draw every figure of a saved run file, without recomputing anything.")
    redraw.add_argument("runfile", type=Path, help="a .tdkrun file written by 'tdakit analyze'")
    redraw.add_argument("--out", type=Path, default=Path("."), help="output folder (default: here)")
    _figure_arguments(redraw)
    summary = commands.add_parser("summary", help="print what a saved run found",
                                  description="Print a saved run's settings, diagrams, band and top features.")
    summary.add_argument("runfile", type=Path, help="a .tdkrun file")
    summary.add_argument("--rows", type=int, default=10, help="feature rows to print (default 10)")
    demo = commands.add_parser(
        "demo", help="analyse the bundled mock halo catalogue (Marrowfield simulation box)",
        description="Load the bundled mock catalogue and run tdakit's defaults on it (the calibrated band: in "
                    "three plain coordinates the kernel-density band), print the longest-lived loops with whether "
                    "they stand above the band; writes the run file, the feature table and the figures.")
    demo.add_argument("--landmarks", type=int, default=200, help="number of landmarks (default 200)")
    demo.add_argument("--out", type=Path, default=Path("tdakit-demo"), help="output folder (default ./tdakit-demo)")
    demo.add_argument("--seed", type=int, default=2026, help="random seed (default 2026)")
    demo.add_argument("--n-boot", type=int, default=100, help="replicates behind the noise band (default 100)")
    demo.add_argument("--no-figures", action="store_true", help="skip the figures")
    demo.add_argument("--quiet", action="store_true", help="no progress bars")
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the process exit code."""
    args = _parser().parse_args(argv)
    if args.command is None:
        _parser().print_help()
        return 2
    try:
        return _dispatch(args)
    except (TdakitError, OSError) as exc:
        if args.debug:
            raise
        message = " ".join(str(exc).split())
        print(f"tdakit: error: {message}", file=sys.stderr)
        return 1


def _dispatch(args) -> int:
    from tdakit.cli import commands, demo

    if args.command == "demo":
        return demo.run(args, DEMO_FILE)
    return {"analyze": commands.analyze, "study": commands.study, "redraw": commands.redraw,
            "summary": commands.summary}[args.command](args)


if __name__ == "__main__":
    sys.exit(main())
