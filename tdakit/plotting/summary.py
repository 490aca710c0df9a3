"""The one-page summary of a run, and writing every figure of a run or a study to files."""

from __future__ import annotations

import textwrap
from pathlib import Path

from tdakit.plotting.cloud import plot_cloud
from tdakit.plotting.curves import plot_betti_curves, plot_landscape
from tdakit.plotting.diagrams import plot_barcode, plot_diagram
from tdakit.plotting.style import house_style, new_figure, save_figure, styled


def _top_dim(run) -> int:
    return min(1, len(run.diagrams) - 1)


@styled
def summary_figure(run, *, preset: str = "double"):
    """Cloud, diagram with band, barcode and Betti curves on one page, with the band's statement."""
    figure = new_figure(preset, aspect=0.95)
    grid = figure.add_gridspec(2, 2)
    three = run.preview_points.shape[1] == 3
    plot_cloud(run, dim=_top_dim(run), ax=figure.add_subplot(grid[0, 0], projection="3d" if three else None))
    plot_diagram(run.diagrams, run.band, ax=figure.add_subplot(grid[0, 1]))
    plot_barcode(run.diagrams, run.band, dim=_top_dim(run), ax=figure.add_subplot(grid[1, 0]))
    plot_betti_curves(run.diagrams, run.band, ax=figure.add_subplot(grid[1, 1]))
    source = run.provenance.get("input", {})
    statement = run.band.statement if run.band is not None else "No confidence band."
    bound = run.diagrams.params.get("landmark_bound")
    bound_text = f", landmark bound {bound:.3g}" if bound else ""
    blind = run.band.blind_dimensions() if run.band is not None else []
    warning = (f" Strip taller than the data in H{', H'.join(map(str, blind))}: nothing can be seen there."
               if blind else "")
    vertices = (f"{run.landmarks.n_landmarks} landmarks (coverage radius {run.coverage_radius:.3g}{bound_text})"
                if run.landmarks is not None else
                "every point (kernel density on a grid)" if run.diagrams.filtration == "density" else "every point")
    text = (f"{source.get('n_points', '?')} points, {source.get('n_dims', '?')} dims; {vertices}; seed {run.seed}. "
            f"{statement}{warning}")
    with house_style():
        # about 16 characters of 7-point text per inch, so the wrapped title fits the preset's width
        width = int(16 * figure.get_figwidth())
        figure.suptitle("\n".join(textwrap.wrap(text, width)), fontsize=7)
    return figure


@styled
def _run_figures(run, preset):
    dim = _top_dim(run)
    figures = {"summary": summary_figure(run, preset=preset)}
    for name, draw in (("diagram", lambda ax: plot_diagram(run.diagrams, run.band, ax=ax)),
                       ("barcode", lambda ax: plot_barcode(run.diagrams, run.band, dim=dim, ax=ax)),
                       ("betti", lambda ax: plot_betti_curves(run.diagrams, run.band, ax=ax)),
                       ("landscape", lambda ax: plot_landscape(run.diagrams, run.band, dim=dim, ax=ax))):
        figure = new_figure("single", aspect=1.0 if name == "diagram" else 0.7)
        draw(figure.add_subplot())
        figures[name] = figure
    figure = new_figure("single", aspect=0.9)
    three = run.preview_points.shape[1] == 3
    plot_cloud(run, dim=dim, ax=figure.add_subplot(projection="3d" if three else None))
    figures["cloud"] = figure
    return figures


def _write(figures: dict, folder, stem: str, formats, dpi) -> list[Path]:
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    return [save_figure(figure, folder / f"{stem}_{name}.{kind}", dpi=dpi)
            for name, figure in figures.items() for kind in formats]


def write_run_figures(run, folder, *, stem: str = "run", formats=("pdf", "png"), preset: str = "double",
                      dpi: int = 200) -> list[Path]:
    """Write the summary page and each single-column figure of a run; returns the paths."""
    return _write(_run_figures(run, preset), folder, stem, formats, dpi)


def write_study_figures(study, folder, *, stem: str = "study", formats=("pdf", "png"), preset: str = "double",
                        dpi: int = 200) -> list[Path]:
    """Write the study's two-panel figure; returns the paths."""
    from tdakit.plotting.study import plot_study

    return _write({"plot": plot_study(study, preset=preset)["figure"]}, folder, stem, formats, dpi)
