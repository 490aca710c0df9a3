"""The sub-commands: analyze one catalogue, run the subsampling study, redraw figures, summarize a run."""

from __future__ import annotations

from pathlib import Path

from tdakit.cli import options as settings
from tdakit.cli.progress import step_bars
from tdakit.errors import InvalidParameterError


def _formats(text: str) -> tuple[str, ...]:
    chosen = tuple(f.strip().lower() for f in text.split(",") if f.strip())
    bad = [f for f in chosen if f not in ("pdf", "svg", "png")]
    if bad or not chosen:
        raise InvalidParameterError(f"The '--formats' option takes pdf, svg and png, comma-separated. Got {text!r}.",
                                    parameter="formats")
    return chosen


def _figures(kind: str, result, out: Path, stem: str, args) -> list[Path]:
    if args.no_figures:
        return []
    from tdakit.plotting import write_run_figures, write_study_figures

    writer = write_run_figures if kind == "run" else write_study_figures
    return writer(result, out, stem=stem, formats=_formats(args.formats), preset=args.preset, dpi=args.dpi)


def analyze(args) -> int:
    from tdakit.pipeline import analyze as run_analysis

    config = settings.read_toml(args.config) if args.config else {}
    options = settings.analysis_options(args, config)
    cloud = settings.load(args.file, settings.input_settings(args, config))
    print(f"Read {cloud.n_points} points in {cloud.n_dims} dimensions from {args.file} ({cloud.metric.name} metric).")
    with step_bars(not args.quiet) as report:
        run = run_analysis(cloud, options, rng=args.seed, n_jobs=args.jobs, progress=report)
    args.out.mkdir(parents=True, exist_ok=True)
    stem = Path(args.file).stem
    written = [run.save(args.out / stem), args.out / f"{stem}_features.csv"]
    run.table.to_csv(written[1], index=False)
    written += _figures("run", run, args.out, stem, args)
    print(run.summary())
    print("Wrote " + ", ".join(str(p) for p in written))
    return 0


def study(args) -> int:
    from tdakit.study import subsampling_study

    config = settings.read_toml(args.config)
    source = config.get("input", {}).get("file")
    if source is None:
        raise InvalidParameterError("The study config needs the catalogue: file = \"...\" in its [input] section.",
                                    parameter="config")
    path = (args.config.parent / source) if not Path(source).is_absolute() else Path(source)
    cloud = settings.load(path, settings.input_settings(args, config))
    options = settings.study_options(config)
    seed = args.seed if args.seed is not None else config.get("study", {}).get("seed")
    n_cells = len(options.methods) * len(options.counts) * options.n_seeds
    print(f"Study on {cloud.n_points} points: {len(options.methods)} methods x {len(options.counts)} counts x "
          f"{options.n_seeds} seeds = {n_cells} settings.")
    args.out.mkdir(parents=True, exist_ok=True)
    checkpoint = args.out / "study_checkpoint.npz" if args.resume else None
    with step_bars(not args.quiet) as report:
        result = subsampling_study(cloud, options, rng=seed, n_jobs=args.jobs, checkpoint=checkpoint,
                                   progress=lambda done, total: report("settings", done, total))
    written = result.save(args.out) + _figures("study", result, args.out, "study", args)
    print(result.report())
    print("Wrote " + ", ".join(str(p) for p in written))
    return 0


def redraw(args) -> int:
    from tdakit.io import load_run

    run = load_run(args.runfile)
    args.no_figures = False
    written = _figures("run", run, args.out, Path(args.runfile).stem, args)
    print("Wrote " + ", ".join(str(p) for p in written))
    return 0


def summary(args) -> int:
    from tdakit.io import load_run

    run = load_run(args.runfile)
    print(run.summary())
    table = run.table
    print(table.head(args.rows).to_string(index=False))
    return 0
