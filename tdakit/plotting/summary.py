"""The one-page summary of a run, its caption, and writing every figure of a run or a study to files."""

from __future__ import annotations

import textwrap
from pathlib import Path

from matplotlib.transforms import blended_transform_factory

from tdakit.plotting.cloud import cloud_projection, plot_cloud
from tdakit.plotting.curves import plot_betti_curves, plot_landscape
from tdakit.plotting.diagrams import plot_barcode, plot_diagram
from tdakit.plotting.features import feature_numbers
from tdakit.plotting.style import new_figure, save_figure, styled

# Characters of 6.5-point DejaVu Sans per inch of line (measured widths average about 3.6 points per character;
# 18 leaves a margin), used to wrap the caption to the preset's width.
_CHARACTERS_PER_INCH = 18


def _top_dim(run) -> int:
    return min(1, len(run.diagrams) - 1)


def run_caption(run) -> str:
    """The caption of a run's figures: what was computed, what the band says, and its caveats."""
    numbered = run.band is not None and bool(feature_numbers(run, dim=_top_dim(run)))
    source = run.provenance.get("input", {})
    statement = run.band.statement if run.band is not None else "No confidence band."
    bound = run.diagrams.params.get("landmark_bound")
    bound_text = f", landmark bound {bound:.3g}" if bound else ""
    blind = run.band.blind_dimensions() if run.band is not None else []
    warning = (f" The strip is taller than the data in H{', H'.join(map(str, blind))}: nothing can be called there."
               if blind else "")
    vertices = (f"{run.landmarks.n_landmarks} landmarks (coverage radius {run.coverage_radius:.3g}{bound_text})"
                if run.landmarks is not None else
                "every point (kernel density on a grid)" if run.diagrams.filtration == "density" else "every point")
    unit = ("" if not run.unit else f" Coordinates in {run.unit}; scales are negated density."
            if run.diagrams.filtration == "density" else f" Scales in {run.unit}.")
    return (f"{source.get('n_points', '?')} points, {source.get('n_dims', '?')} coordinates; {vertices}; seed "
            f"{run.seed}.{unit} {statement}{warning}"
            + (" Boxed numbers mark the same feature in every panel." if numbered else ""))


@styled
def summary_figure(run, *, preset: str = "double"):
    """Cloud, diagram with band, barcode and Betti curves on one page, with the band's statement as a caption.

    The double-column preset is a 2 x 2 page; the single-column preset a tall stack of the diagram,
    the barcode and the cloud (Betti curves and landscapes are separate figures).
    """
    dim = _top_dim(run)
    numbers = feature_numbers(run, dim=dim) if run.band is not None else {}
    caption = textwrap.wrap(run_caption(run), int(_CHARACTERS_PER_INCH * _width(preset)))
    double = preset == "double"
    heights = [1.0, 1.0, 0.075 * len(caption) + 0.02] if double else [1.05, 0.9, 0.95, 0.038 * len(caption) + 0.02]
    figure = new_figure(preset, aspect=0.68 + 0.025 * len(caption) if double else 2.55 + 0.038 * len(caption))
    if double:
        figure.set_layout_engine("compressed")  # the constrained layout made for a grid of fixed-aspect panels
    grid = figure.add_gridspec(len(heights), 2 if double else 1, height_ratios=heights)
    cells = ([grid[0, 0], grid[0, 1], grid[1, 0], grid[1, 1]] if double else [grid[2], grid[0], grid[1]])
    unit = run.unit
    plot_cloud(run, dim=dim, numbers=numbers, ax=figure.add_subplot(cells[0], projection=cloud_projection(run)))
    plot_diagram(run.diagrams, run.band, ax=figure.add_subplot(cells[1]), unit=unit, numbers=numbers)
    plot_barcode(run.diagrams, run.band, dim=dim, ax=figure.add_subplot(cells[2]), unit=unit, numbers=numbers)
    if double:
        plot_betti_curves(run.diagrams, run.band, ax=figure.add_subplot(cells[3]), unit=unit)
    note = figure.add_subplot(grid[-1, :] if double else grid[-1])
    note.set_axis_off()
    place = blended_transform_factory(figure.transFigure, note.transAxes)  # from the page's left edge
    note.text(0.02, 1.0, "\n".join(caption), ha="left", va="top", fontsize=6.5, transform=place)
    return figure


def _width(preset):
    from tdakit.plotting.style import PRESETS

    if preset not in PRESETS:
        from tdakit._validation import fail

        raise fail("preset", "summary_figure", f"one of {sorted(PRESETS)}", preset)
    return PRESETS[preset] - 0.1


@styled
def _run_figures(run, preset):
    dim = _top_dim(run)
    unit = run.unit
    numbers = feature_numbers(run, dim=dim) if run.band is not None else {}
    figures = {"summary": summary_figure(run, preset=preset)}
    draws = {"diagram": lambda: plot_diagram(run.diagrams, run.band, unit=unit, numbers=numbers),
             "barcode": lambda: plot_barcode(run.diagrams, run.band, dim=dim, unit=unit, numbers=numbers),
             "betti": lambda: plot_betti_curves(run.diagrams, run.band, unit=unit),
             "landscape": lambda: plot_landscape(run.diagrams, run.band, dim=dim, unit=unit),
             "cloud": lambda: plot_cloud(run, dim=dim, numbers=numbers)}
    for name, draw in draws.items():
        figures[name] = draw()["ax"].figure
    return figures


def _write(figures: dict, folder, stem: str, formats, dpi) -> list[Path]:
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    return [save_figure(figure, folder / f"{stem}_{name}.{kind}", dpi=dpi)
            for name, figure in figures.items() for kind in formats]


def write_run_figures(run, folder, *, stem: str = "run", formats=("pdf", "png"), preset: str = "double",
                      dpi: int = 200) -> list[Path]:
    """Write the summary page (at the ``preset``'s width) and each single-column figure of a run; returns the paths."""
    return _write(_run_figures(run, preset), folder, stem, formats, dpi)


def write_study_figures(study, folder, *, stem: str = "study", formats=("pdf", "png"), preset: str = "double",
                        dpi: int = 200) -> list[Path]:
    """Write the study's two-panel figure; returns the paths."""
    from tdakit.plotting.study import plot_study

    return _write({"plot": plot_study(study, preset=preset)["figure"]}, folder, stem, formats, dpi)
