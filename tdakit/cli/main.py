"""Entry point of the ``tdakit`` command: sub-commands, one-line errors, exit codes."""

from __future__ import annotations

import argparse
import sys
from pathlib import Path

from tdakit.errors import TdakitError

DEMO_FILE = Path(__file__).resolve().parents[2] / "datasets" / "marrowfield_halos.csv"


def _parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="tdakit",
        description="Persistent-homology diagnostics for large point clouds: which loops and voids are real?")
    parser.add_argument("--debug", action="store_true", help="show the full traceback on errors")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND")
    demo = commands.add_parser(
        "demo", help="analyse the bundled mock halo catalogue (Marrowfield simulation box)",
        description="Load the bundled mock catalogue, pick landmarks in its dense core, build a DTM-Rips "
                    "filtration in the periodic box, draw a bootstrap noise band and print the longest-lived loops "
                    "with their locations and whether they stand above the band.")
    demo.add_argument("--landmarks", type=int, default=200, help="number of landmarks (default 200)")
    demo.add_argument("--out", type=Path, default=Path("tdakit-demo"),
                      help="folder for the feature table (default ./tdakit-demo)")
    demo.add_argument("--seed", type=int, default=2026, help="random seed (default 2026)")
    demo.add_argument("--n-boot", type=int, default=40,
                      help="bootstrap replicates behind the noise band (default 40)")
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the process exit code."""
    args = _parser().parse_args(argv)
    if args.command is None:
        _parser().print_help()
        return 2
    try:
        from tdakit.cli import demo

        return demo.run(args, DEMO_FILE)
    except (TdakitError, OSError) as exc:
        if args.debug:
            raise
        print(f"tdakit: error: {exc}", file=sys.stderr)
        return 1


if __name__ == "__main__":
    sys.exit(main())
