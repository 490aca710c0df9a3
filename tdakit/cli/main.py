"""Entry point of the ``tdakit`` command: sub-commands, one-line errors, exit codes."""

from __future__ import annotations

import argparse
import signal
import sys
from pathlib import Path

from tdakit.errors import MemoryBudgetError, TdakitError

DEMO_FILE = Path(__file__).resolve().parents[2] / "datasets" / "marrowfield_halos.csv"

EXIT_CODES = ("Exit codes: 0 done; 1 refused or failed (one line 'tdakit: error: ...'; --debug shows the traceback); "
              "2 command-line usage error (unknown option, a value of the wrong type); 130 interrupted (Ctrl-C), "
              "143 terminated (SIGTERM), with the finished replicates kept in the checkpoint.")
_OUTPUTS = ("Outputs go to --out (default ./tdakit-out): <stem>.tdkrun (the run file), <stem>_features.csv, "
            "<stem>_<figure>.<format>. The run file is written last: a folder with figures but no run file holds an "
            "unfinished run. While it runs, <stem>.checkpoint.npz/.json keep the finished replicates; rerunning the "
            "same command resumes from them (same numbers as an uninterrupted run) and says how many it reused.")
_ANALYZE = ("Find the landmarks of one catalogue, build the filtration on them, draw a noise band and mark each "
            "feature (component, loop, void) as real or noise. Writes a run file (.tdkrun, reloadable with "
            "'tdakit summary' and 'tdakit redraw'), a feature table (CSV) and figures into --out. Angular input "
            "(--metric angular) is (longitude, latitude) in degrees; column positions count from 0.")
_STUDY = ("Does the subsampling choice change the topology you report? Runs every combination of sampling "
          "methods x landmark counts x seeds from a TOML config, compares each with a reference diagram, checks the "
          "stability certificate and recommends the smallest landmark count whose significant features stop "
          "changing. Config sections: [input] file, columns, metric, box; [study] methods, counts, n_seeds, "
          "reference, seed; optional [sampling], [complex], [band] ('tdakit config-keys' lists every key with its "
          "default).")


class _Terminated(KeyboardInterrupt):
    """SIGTERM (a job scheduler's time limit): handled like Ctrl-C."""


def _terminate(signum, frame):
    raise _Terminated()


def _figure_arguments(parser):
    group = parser.add_argument_group("figures")
    group.add_argument("--no-figures", action="store_true", help="skip the figures")
    group.add_argument("--formats", default="pdf,png", help="comma-separated: pdf, svg, png (default pdf,png)")
    group.add_argument("--preset", default="double", choices=["single", "double"],
                       help="journal column width: single (3.5 in) or double (7.2 in, default)")
    group.add_argument("--dpi", type=int, default=200, help="resolution of PNG figures, 20 to 1200 (default 200)")


def _run_arguments(parser, out_default):
    from tdakit.cli.options import add_resume_arguments

    parser.add_argument("--out", type=Path, default=Path(out_default), help=f"output folder (default ./{out_default})")
    parser.add_argument("--seed", type=int, default=None, help="random seed; the run records it for replay (the "
                                                               "same seed as rng= in Python picks the same landmarks)")
    parser.add_argument("--jobs", type=int, default=1, help="worker processes for the resampling (default 1)")
    parser.add_argument("--quiet", action="store_true", help="no progress bars or progress lines")
    add_resume_arguments(parser)


def _version() -> str:
    import platform

    from tdakit import __version__

    return f"tdakit {__version__} (Python {platform.python_version()})"


def _epilog(*parts: str) -> str:
    return "\n\n".join(parts)


def _parser() -> argparse.ArgumentParser:
    from tdakit.cli.options import (
        add_analysis_arguments,
        add_budget_argument,
        add_catalogue_arguments,
        add_input_arguments,
    )

    parser = argparse.ArgumentParser(
        prog="tdakit",
        description="Persistent-homology diagnostics for large point clouds: which loops and voids are real?",
        epilog=_epilog("'tdakit config-keys' lists every key of a config file with its default.", EXIT_CODES))
    parser.add_argument("--version", action="version", version=_version())
    parser.add_argument("--debug", action="store_true", help="show the full traceback on errors")
    commands = parser.add_subparsers(dest="command", metavar="COMMAND")
    analyze = commands.add_parser("analyze", help="analyse one catalogue file", description=_ANALYZE,
                                  epilog=_epilog(_OUTPUTS, "Config files: 'tdakit config-keys' lists every section "
                                                 "and key with its default.", EXIT_CODES))
    analyze.add_argument("file", type=Path, help="the catalogue: .csv, .tsv, .txt, .dat, .npy, .npz, or "
                         "with tdakit[formats] .fits, .h5/.hdf5, .parquet")
    add_input_arguments(analyze)
    add_analysis_arguments(analyze)
    _run_arguments(analyze, "tdakit-out")
    _figure_arguments(analyze)
    study = commands.add_parser("study", help="compare subsampling choices (methods x counts x seeds)",
                                description=_STUDY, epilog=EXIT_CODES)
    study.add_argument("config", type=Path, help="TOML file describing the catalogue and the grid")
    add_budget_argument(study)
    _run_arguments(study, "tdakit-study")
    _figure_arguments(study)
    redraw = commands.add_parser("redraw", help="draw the figures of a saved run again",
                                 description="Draw every figure of a saved run file, without recomputing anything.",
                                 epilog=EXIT_CODES)
    redraw.add_argument("runfile", type=Path, help="a .tdkrun file written by 'tdakit analyze'")
    redraw.add_argument("--out", type=Path, default=Path("tdakit-out"),
                        help="output folder (default ./tdakit-out, as for analyze)")
    _figure_arguments(redraw)
    summary = commands.add_parser("summary", help="print what a saved run found", epilog=EXIT_CODES,
                                  description="Print a saved run's settings, its band (target, method, level, "
                                              "radius), the landmark bound, the verdict per dimension and the "
                                              "leading features of each dimension.")
    summary.add_argument("runfile", type=Path, help="a .tdkrun file")
    summary.add_argument("--rows", type=int, default=5, help="leading features per dimension (default 5)")
    demo = commands.add_parser(
        "demo", help="analyse the bundled mock halo catalogue (Marrowfield simulation box)", epilog=EXIT_CODES,
        description="Load the bundled mock catalogue and run tdakit's defaults on it (the calibrated band: in "
                    "three plain coordinates the kernel-density band), print the longest-lived loops with whether "
                    "they stand above the band; writes the run file, the feature table and the figures.")
    demo.add_argument("--landmarks", type=int, default=200, help="number of landmarks (default 200)")
    demo.add_argument("--out", type=Path, default=Path("tdakit-demo"), help="output folder (default ./tdakit-demo)")
    demo.add_argument("--seed", type=int, default=2026, help="random seed (default 2026)")
    from tdakit.cli.options import add_replicate_arguments

    add_replicate_arguments(demo, "replicates behind the noise band (default 100)", default=None)
    demo.add_argument("--no-figures", action="store_true", help="skip the figures")
    demo.add_argument("--quiet", action="store_true", help="no progress bars or progress lines")
    convert = commands.add_parser(
        "convert", help="write a catalogue's columns to a .npy file that every worker of a cluster can map",
        epilog=EXIT_CODES,
        description="Read chosen columns of a FITS, HDF5 or Parquet table in chunks (with the filter and the sky "
                    "conversion of 'analyze') and write them to a float64 .npy file, with a description beside "
                    "it (OUTPUT.json: source checksum, columns, filter, units). Row i of the file is point i of "
                    "'analyze' with the same flags. For tdakit.distributed.select_landmarks_distributed.")
    convert.add_argument("file", type=Path, help="the catalogue: .fits, .h5/.hdf5, .parquet (tdakit[formats])")
    convert.add_argument("output", type=Path, help="the .npy file to write")
    convert.add_argument("--columns", help="comma-separated columns, by name or by position counted from 0; "
                                           "default: all")
    add_catalogue_arguments(convert)
    commands.add_parser("config-keys", help="list every section and key of a config file, with defaults",
                        description="Every section and key of a tdakit config file, with its default and meaning.")
    return parser


def main(argv: list[str] | None = None) -> int:
    """Run the command line; returns the process exit code."""
    args = _parser().parse_args(argv)
    if args.command is None:
        _parser().print_help()
        return 2
    previous = signal.signal(signal.SIGTERM, _terminate) if _main_thread() else None
    try:
        return _dispatch(args)
    except KeyboardInterrupt as exc:
        return _interrupted(args, isinstance(exc, _Terminated))
    except (TdakitError, OSError) as exc:
        if args.debug:
            raise
        print(f"tdakit: error: {_message(exc)}", file=sys.stderr)
        return 1
    except Exception as exc:  # a bug in tdakit: one line all the same, and how to see more
        interrupt = _interrupt_inside(exc)
        if interrupt is not None:  # Ctrl-C or SIGTERM inside compiled code arrives wrapped in a SystemError
            return _interrupted(args, isinstance(interrupt, _Terminated))
        if args.debug:
            raise
        print(f"tdakit: internal error: {type(exc).__name__}: {' '.join(str(exc).split())} (rerun with --debug for "
              f"the traceback and please report it)", file=sys.stderr)
        return 1
    finally:
        if previous is not None:
            signal.signal(signal.SIGTERM, previous)


def _interrupt_inside(exc: BaseException) -> KeyboardInterrupt | None:
    """The KeyboardInterrupt (or termination) behind ``exc``, when one caused it."""
    seen = set()
    while exc is not None and id(exc) not in seen:
        if isinstance(exc, KeyboardInterrupt):
            return exc
        seen.add(id(exc))
        exc = exc.__cause__ or exc.__context__
    return None


def _main_thread() -> bool:
    import threading

    return threading.current_thread() is threading.main_thread()


def _message(exc: BaseException) -> str:
    from tdakit.cli.options import in_cli_words, proposal_words

    message = " ".join(str(exc).split())
    if isinstance(exc, MemoryBudgetError):
        message = in_cli_words(message) + proposal_words(exc)
    elif isinstance(exc, OSError) and not isinstance(exc, TdakitError):
        where = f" ({exc.filename})" if getattr(exc, "filename", None) else ""
        message = f"{exc.strerror or message}{where}"
    return message


def _interrupted(args, terminated: bool) -> int:
    word = "terminated" if terminated else "interrupted"
    kept = getattr(args, "checkpoint_kept", None)
    if kept is not None and Path(kept).is_file():
        print(f"tdakit: {word}; finished work kept in the checkpoint {kept} (rerun the same command to resume).",
              file=sys.stderr)
    else:
        print(f"tdakit: {word}; nothing was written.", file=sys.stderr)
    return 143 if terminated else 130


def _dispatch(args) -> int:
    from tdakit.cli import commands, demo

    if args.command == "demo":
        return demo.run(args, DEMO_FILE)
    if args.command == "config-keys":
        from tdakit.cli.keys import config_keys_text

        print(config_keys_text())
        return 0
    return {"analyze": commands.analyze, "study": commands.study, "redraw": commands.redraw,
            "summary": commands.summary, "convert": commands.convert}[args.command](args)


if __name__ == "__main__":
    sys.exit(main())
