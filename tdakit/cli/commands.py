"""The sub-commands: analyze one catalogue, run the subsampling study, redraw figures, summarize a run.

Every command checks its options and its output folder before any computation, keeps its finished work in
a checkpoint while it runs (see :mod:`tdakit.cli.resume`) and writes its outputs through a staging folder,
the run file last (see :mod:`tdakit.cli.outputs`).
"""

from __future__ import annotations

from pathlib import Path

from tdakit.cli import options as settings
from tdakit.cli.outputs import FolderLock, Staging, prepare_folder, remove_stale_staging, write_figures, write_table
from tdakit.cli.progress import step_bars
from tdakit.cli.resume import open_checkpoint
from tdakit.errors import InvalidParameterError


def _formats(text: str) -> tuple[str, ...]:
    chosen = tuple(f.strip().lower() for f in text.split(",") if f.strip())
    bad = [f for f in chosen if f not in ("pdf", "svg", "png")]
    if bad or not chosen:
        raise InvalidParameterError(f"The '--formats' option takes pdf, svg and png, comma-separated. Got {text!r}.",
                                    parameter="formats")
    return chosen


def check_jobs(args) -> None:
    """Refuse a worker count that can never work, and --resume with --fresh, before any computation."""
    if args.jobs == 0 or args.jobs < -1:
        raise InvalidParameterError(f"The '--jobs' option must be a positive number of worker processes, or -1 for "
                                    f"every core. Got {args.jobs}.", parameter="jobs")
    if getattr(args, "resume", False) and getattr(args, "fresh", False):
        raise InvalidParameterError("The options --resume and --fresh contradict each other: --resume continues the "
                                    "unfinished run in --out, --fresh discards it. Give one.", parameter="fresh")


def figure_formats(args) -> tuple[str, ...]:
    """The figure formats asked for (none with --no-figures), checked with --dpi before any work."""
    if getattr(args, "no_figures", False):
        return ()
    settings.check_dpi(args)
    return _formats(args.formats)


def publish_run(run, out: Path, stem: str, formats, args) -> list[Path]:
    """Write the feature table, the figures and (last) the run file of ``run`` into ``out``."""
    with Staging(out, stem) as staging:
        staging.write(f"{stem}_features.csv", lambda path: write_table(run.table, path))
        if formats:
            from tdakit.plotting import write_run_figures

            write_figures(staging, lambda folder, kinds: write_run_figures(
                run, folder, stem=stem, formats=kinds, preset=getattr(args, "preset", "double"),
                dpi=getattr(args, "dpi", 200)), formats)
        staging.write(f"{stem}.tdkrun", run.save)
        published = staging.publish(last=f"{stem}.tdkrun")
    return published[-1:] + published[:-1]


def _say_reused(point, total: int, unit: str) -> None:
    if point.resumed:
        print(f"Resuming the unfinished run (seed {point.seed}): reused {min(point.reused, total)} of {total} "
              f"{unit} from {point.data}.")


def _band_total(run_options) -> int:
    band = run_options.band
    return band.n_subsamples if band.method == "landscape" else band.n_boot


def analyze(args) -> int:
    from tdakit.pipeline import analyze as run_analysis
    from tdakit.pipeline import check_options

    config = settings.read_toml(args.config) if args.config else {}
    options = settings.analysis_options(args, config)
    where = settings.run_options(args, config)
    check_jobs(args)
    formats = figure_formats(args)
    out = prepare_folder(args.out)
    settings.check_scheduler(args, where)  # a dead address is refused before a long read
    stem = Path(args.file).stem
    cloud = settings.load(args.file, settings.input_settings(args, config))
    print(f"Read {cloud.n_points} points in {cloud.n_dims} dimensions from {args.file} ({cloud.metric.name} metric).")
    print(settings.memory_budget_line(options))
    resolved = check_options(cloud, options)  # contradictions refused before anything is kept
    with FolderLock(out, stem):
        remove_stale_staging(out, stem)
        point = open_checkpoint(out, stem, "analyze", cloud, options.to_dict(), args.seed, fresh=args.fresh)
        args.checkpoint_kept = point.data
        _say_reused(point, _band_total(resolved), "replicates")
        try:
            with step_bars(not args.quiet) as report:
                report.reused["band"] = point.reused
                run = run_analysis(cloud, options, rng=point.seed, n_jobs=args.jobs, progress=report,
                                   checkpoint=point.data, scheduler=where.scheduler)
            written = publish_run(run, out, stem, formats, args)
        except BaseException:
            point.forget_if_empty()
            raise
        point.remove()
        args.checkpoint_kept = None
    print(run.summary())
    print("Wrote " + ", ".join(str(p) for p in written))
    return 0


def study(args) -> int:
    from tdakit.study import subsampling_study

    config = settings.read_toml(args.config, settings.STUDY_SECTIONS)
    source = config.get("input", {}).get("file")
    if not isinstance(source, str) or not source:
        raise InvalidParameterError("The study config needs the catalogue: file = \"...\" in its [input] section"
                                    + ("" if source is None else f" (a text, got {source!r})") + ".",
                                    parameter="config")
    path = (args.config.parent / source) if not Path(source).is_absolute() else Path(source)
    options = settings.study_options(config, args.memory_budget)
    check_jobs(args)
    formats = figure_formats(args)
    out = prepare_folder(args.out)
    cloud = settings.load(path, settings.input_settings(args, config))
    seed = args.seed if args.seed is not None else config.get("study", {}).get("seed")
    if seed is not None and (isinstance(seed, bool) or not isinstance(seed, int) or seed < 0):
        raise InvalidParameterError(f"The [study] key 'seed' must be a non-negative integer. Got {seed!r}.",
                                    parameter="seed")
    n_cells = len(options.methods) * len(options.counts) * options.n_seeds
    print(f"Study on {cloud.n_points} points: {len(options.methods)} methods x {len(options.counts)} counts x "
          f"{options.n_seeds} seeds = {n_cells} settings.")
    print(settings.memory_budget_line(options))
    with FolderLock(out, "study"):
        remove_stale_staging(out, "study")
        point = open_checkpoint(out, "study", "study", cloud, options.to_dict(), seed, fresh=args.fresh)
        args.checkpoint_kept = point.data
        _say_reused(point, n_cells, "settings")
        try:
            with step_bars(not args.quiet) as report:
                report.reused["settings"] = point.reused
                result = subsampling_study(cloud, options, rng=point.seed, n_jobs=args.jobs, checkpoint=point.data,
                                           progress=lambda done, total: report("settings", done, total))
            written = _publish_study(result, out, formats, args)
        except BaseException:
            point.forget_if_empty()
            raise
        point.remove()
        args.checkpoint_kept = None
    print(result.report())
    print("Wrote " + ", ".join(str(p) for p in written))
    return 0


def _publish_study(result, out, formats, args) -> list[Path]:
    with Staging(out, "study") as staging:
        try:
            result.save(staging.folder)  # study_cells.csv, study_summary.csv, study_report.txt (published last)
        except OSError as exc:
            name = Path(exc.filename).name if getattr(exc, "filename", None) else "study_cells.csv"
            raise staging.failure(out / name, exc) from None
        if formats:
            from tdakit.plotting import write_study_figures

            write_figures(staging, lambda folder, kinds: write_study_figures(
                result, folder, stem="study", formats=kinds, preset=args.preset, dpi=args.dpi), formats)
        return staging.publish(last="study_report.txt")


def redraw(args) -> int:
    from tdakit.io import load_run

    formats = _formats(args.formats)
    settings.check_dpi(args)
    out = prepare_folder(args.out)
    run = load_run(args.runfile)
    stem = Path(args.runfile).stem
    with FolderLock(out, stem), Staging(out, stem) as staging:
        from tdakit.plotting import write_run_figures

        write_figures(staging, lambda folder, kinds: write_run_figures(
            run, folder, stem=stem, formats=kinds, preset=args.preset, dpi=args.dpi), formats)
        written = staging.publish()
    print("Wrote " + ", ".join(str(p) for p in written))
    return 0


def summary(args) -> int:
    from tdakit.cli.report import run_report
    from tdakit.io import load_run

    if args.rows < 0:
        raise InvalidParameterError(f"The '--rows' option must be 0 or more (features per dimension). "
                                    f"Got {args.rows}.", parameter="rows")
    run = load_run(args.runfile)
    print(run_report(run, args.rows))
    return 0


def convert(args) -> int:
    from tdakit.io import catalogue_to_npy

    columns = None if not args.columns else [int(c) if c.strip().isdigit() else c.strip()
                                             for c in args.columns.split(",")]
    record = catalogue_to_npy(args.file, args.output, columns=columns,
                              **settings.catalogue_options(settings.catalogue_settings(args)))
    unit = f" in {record['unit']}" if record["unit"] else ""
    print(f"Wrote {args.output} ({record['n_rows']:,} of {record['n_rows_in_file']:,} rows, columns "
          f"{', '.join(record['columns'])}{unit}) and {args.output}.json")
    return 0
