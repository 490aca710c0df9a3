"""tdakit's visual identity: the dimension code, the feature and band styles, journal presets, deterministic export.

The code, in one place so every figure and widget draws the same way:

- ``DIMENSION_STYLE[k]`` (a :class:`DimensionStyle`): homology dimension k is told apart three ways at once,
  by lightness (H0 dark, H1 mid, H2 light with a dark edge), by shape (square, filled plus, hexagon, cross) and
  by line style (solid, dashed, dotted, dash-dot), so a figure survives greyscale printing and every common
  colour-vision deficiency (``tests/plotting/test_style.py`` checks both).
- Real (significant) classes are filled; noise classes are hollow and smaller: no colour needed.
- Classes that never die are drawn as upward arrows in a separate, labelled "never dies" band, cut from the
  scale axis by a break mark (diagrams: a band on top; barcodes: a band on the right).
- Numbered features carry the same number, in a small boxed label, in every view (:data:`FEATURE_LABEL`).
- Noise strips are hatched outlines, one hatch and edge style per dimension, explained in the legend.
"""

from __future__ import annotations

import functools
import io
from contextlib import contextmanager
from dataclasses import dataclass
from pathlib import Path

import matplotlib
import numpy as np
from matplotlib.figure import Figure
from matplotlib.ticker import FuncFormatter, MaxNLocator
from matplotlib.transforms import offset_copy

__all__ = [
    "BAND_COLOR", "CLOUD_COLOR", "DIMENSION_COLORS", "DIMENSION_MARKERS", "DIMENSION_STYLE", "DimensionStyle",
    "FEATURE_COLOR", "FEATURE_LABEL", "INK", "LANDMARK_COLOR", "NEVER_DIES_COLOR", "PRESETS", "axis_units",
    "color", "figure_bytes", "house_style", "marker", "new_figure", "save_figure", "scale_label",
]


@dataclass(frozen=True)
class DimensionStyle:
    """How homology dimension k is drawn everywhere.

    Attributes
    ----------
    color : str
        Fill colour of a real class (and line colour of its curves).
    edge : str
        Marker edge colour: the fill itself for dark and mid tones, dark ink for light ones.
    marker : str
        Matplotlib marker code.
    linestyle : str
        Line style of the dimension's curves and of its noise-strip edge.
    hatch : str
        Hatch of the dimension's noise strip.
    line : str
        Colour of the dimension's curves and bars (a light fill is too faint for a thin line).
    """

    color: str
    edge: str
    marker: str
    linestyle: str
    hatch: str
    line: str

    def scatter(self, real: bool = True, size: float = 18.0) -> dict:
        """Keyword arguments for ``ax.scatter``: filled when ``real``, hollow and smaller for noise."""
        if real:
            return {"marker": self.marker, "s": size, "facecolors": self.color, "edgecolors": self.edge,
                    "linewidths": 0.7}
        return {"marker": self.marker, "s": 0.6 * size, "facecolors": "white", "edgecolors": self.edge,
                "linewidths": 0.7}

    def handle(self, real: bool = True, **kwargs):
        """A legend handle showing the marker."""
        from matplotlib.lines import Line2D

        face = self.color if real else "white"
        return Line2D([], [], ls="", marker=self.marker, mfc=face, mec=self.edge, mew=0.7,
                      ms=5.0 if real else 4.0, **kwargs)


INK = "#1b2327"  # text, axes and every neutral dark element
_DARK_EDGE = "#0f3d4a"
# Lightness (CIE L*): H0 23, H1 52, H2 85, H3 70; under simulated deuteranopia, protanopia and tritanopia
# they stay at least 15 apart (H3 excepted against H2, told apart by its cross marker).
DIMENSION_STYLE = {
    0: DimensionStyle("#0f3d4a", "#0f3d4a", "s", "-", "////", "#0f3d4a"),
    1: DimensionStyle("#c65f3a", "#7a3119", "P", "--", "\\\\\\\\", "#c65f3a"),
    2: DimensionStyle("#f0d28c", _DARK_EDGE, "H", ":", "....", "#b08a2c"),
    3: DimensionStyle("#8fb3a3", _DARK_EDGE, "X", "-.", "xxxx", "#5f8a78"),
}
DIMENSION_COLORS = tuple(style.color for style in DIMENSION_STYLE.values())
DIMENSION_MARKERS = tuple(style.marker for style in DIMENSION_STYLE.values())
BAND_COLOR = "#8a9399"  # the shared noise strip when every dimension has the same height
NEVER_DIES_COLOR = "#efece4"  # background of the "never dies" band
CLOUD_COLOR = "#a9b1b6"
LANDMARK_COLOR = INK
FEATURE_COLOR = "#7a3119"
# A numbered feature's label, the same in the diagram, the barcode, the cloud and the tables.
FEATURE_LABEL = {"fontsize": 6, "fontweight": "bold", "color": INK, "ha": "center", "va": "center",
                 "bbox": {"boxstyle": "round,pad=0.15", "fc": "white", "ec": INK, "lw": 0.5}}
PRESETS = {"single": 3.5, "double": 7.2}  # column widths in inches
RC = {"font.family": ["DejaVu Sans"], "mathtext.fontset": "dejavusans", "font.size": 8, "axes.titlesize": 8,
      "axes.labelsize": 7.5, "xtick.labelsize": 6.5, "ytick.labelsize": 6.5, "legend.fontsize": 6.5,
      "legend.frameon": False, "legend.handlelength": 1.6, "legend.handletextpad": 0.4, "legend.borderaxespad": 0.3,
      "lines.linewidth": 1.0, "axes.linewidth": 0.6, "axes.edgecolor": INK, "axes.labelcolor": INK,
      "xtick.color": INK, "ytick.color": INK, "text.color": INK, "xtick.major.width": 0.6,
      "ytick.major.width": 0.6, "hatch.linewidth": 0.5, "axes.unicode_minus": True, "svg.hashsalt": "tdakit",
      "svg.fonttype": "path", "pdf.fonttype": 42, "figure.dpi": 100, "figure.constrained_layout.h_pad": 0.03,
      "figure.constrained_layout.w_pad": 0.03, "axes.formatter.limits": (-3, 4),
      "axes.formatter.use_mathtext": True, "image.interpolation": "nearest"}
_METADATA = {"svg": {"Date": None, "Creator": "tdakit"}, "pdf": {"CreationDate": None, "Creator": "tdakit",
                                                                 "Producer": "tdakit"},
             "png": {"Software": "tdakit"}}


def dimension_style(dim: int) -> DimensionStyle:
    """The style of homology dimension ``dim`` (dimensions above 3 share H3's)."""
    return DIMENSION_STYLE[min(int(dim), max(DIMENSION_STYLE))]


def color(dim: int) -> str:
    """Fill colour of homology dimension ``dim``."""
    return dimension_style(dim).color


def marker(dim: int) -> str:
    """Marker of homology dimension ``dim``."""
    return dimension_style(dim).marker


def axis_units(diagrams) -> str:
    """The short name of a diagram's scale for axis labels (the full text stays in ``diagrams.units``)."""
    text = diagrams.units.split("; ")[-1].split(" (")[0]  # "DTM-Rips value (doubled, Rips scale)": first words
    return text.replace("sqrt(alpha^2)", "\u221a\u03b1\u00b2")


def scale_label(what: str, diagrams=None, unit: str | None = None) -> str:
    """An axis label for a scale: ``"birth (Mpc/h)"`` with a named unit, else the filtration's scale name.

    A density filtration's scale is a density, not a length: it keeps its own name whatever the unit.
    """
    if diagrams is not None and diagrams.filtration == "density":
        return f"{what} (negated density)"
    if unit:
        return f"{what} ({unit})"
    return f"{what} ({axis_units(diagrams)})" if diagrams is not None else what


_SUPERSCRIPTS = str.maketrans("-0123456789", "\u207b\u2070\u00b9\u00b2\u00b3\u2074\u2075\u2076\u2077\u2078\u2079")


def tidy_scale_axis(axis, nbins: int = 5, label: str | None = None) -> None:
    """Few ticks, and a power of ten moved into the axis label (``"birth (negated density, ×10⁻³)"``)
    instead of a floating offset text, so long numbers (densities, 1e-5) never overprint.

    At most ``nbins`` intervals, and fewer on a narrow x axis (about one per 0.45 in). Call it after the
    axis limits are set.
    """
    ax = axis.axes
    if axis is ax.xaxis:
        width = ax.get_position().width * ax.get_figure(root=True).get_figwidth()
        nbins = max(2, min(nbins, int(width / 0.45)))
    axis.set_major_locator(MaxNLocator(nbins=nbins, steps=[1, 2, 2.5, 5, 10]))
    low, high = axis.get_view_interval()
    largest = max(abs(low), abs(high))
    power = int(np.floor(np.log10(largest))) if np.isfinite(largest) and largest > 0 else 0
    power = power if power < -2 or power > 3 else 0
    scale = 10.0**power
    axis.set_major_formatter(FuncFormatter(lambda value, _: f"{value / scale:.4g}".replace("-", "\u2212")))
    if label is not None and power:
        factor = f"\u00d710{str(power).translate(_SUPERSCRIPTS)}"
        label = f"{label[:-1]}, {factor})" if label.endswith(")") else f"{label} ({factor})"
    if label is not None:
        axis.set_label_text(label)


def styled(function):
    """Run a drawing function inside the house style, so every artist and tick gets its sizes."""

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        with house_style():
            return function(*args, **kwargs)

    return wrapper


@contextmanager
def house_style():
    """Font sizes that survive reduction to a journal column, the bundled DejaVu Sans, a fixed SVG hash salt."""
    with matplotlib.rc_context(RC):
        yield


def new_figure(preset: str = "single", aspect: float = 0.8) -> Figure:
    """A Figure of a journal column width (``"single"`` 3.5 in or ``"double"`` 7.2 in), height ``aspect`` x width."""
    if preset not in PRESETS:
        from tdakit._validation import fail

        raise fail("preset", "new_figure", f"one of {sorted(PRESETS)}", preset)
    width = PRESETS[preset]
    with house_style():
        return Figure(figsize=(width, width * aspect), layout="constrained")


def _axes(ax, preset="single", aspect=0.8, **kwargs):
    if ax is not None:
        return ax
    return new_figure(preset, aspect).add_subplot(**kwargs)


def legend_side(ax) -> str:
    """Where legends go: ``"below"`` in a single-column figure (narrower than 4.5 in), else ``"right"``."""
    return "below" if ax.get_figure(root=True).get_figwidth() < 4.5 else "right"


def outside_legend(ax, handles=None, *, where: str = "auto", pad: float = 0.0, ncols: int | None = None):
    """A legend beside the axes, never over the data: at the right, or under the x label.

    ``where="auto"`` puts it under the axes in a single-column figure (narrower than 4.5 in) and at
    the right otherwise. Call it after the x label is set. ``pad``: extra room at the right, in axes widths.
    """
    kwargs = {"handles": handles} if handles is not None else {}
    where = legend_side(ax) if where == "auto" else where
    if where == "right":
        return ax.legend(loc="upper left", bbox_to_anchor=(1.02 + pad, 1.0), ncols=ncols or 1, **kwargs)
    label = ax.xaxis.label.get_text()
    size = matplotlib.rcParams
    drop = (size["xtick.major.size"] + size["xtick.major.pad"] + 1.25 * size["xtick.labelsize"]
            + (size["axes.labelpad"] + 1.25 * size["axes.labelsize"] * (label.count("\n") + 1) if label else 0) + 3)
    below = offset_copy(ax.transAxes, fig=ax.get_figure(root=True), y=-drop, units="points")
    return ax.legend(loc="upper center", bbox_to_anchor=(0.5, 0.0), bbox_transform=below, ncols=ncols or 2,
                     columnspacing=1.0, **kwargs)


def _freeze_layout(figure: Figure) -> None:
    """Run the constrained layout once, then keep it: each draw would otherwise start the iterative
    layout from the last positions, and a figure saved as PDF then SVG would differ from one saved
    as SVG alone.
    """
    if figure.get_layout_engine() is not None:
        with house_style():
            # Until the panels stop moving (at most 6 passes; each pass cuts the change about fourfold): with
            # fixed-aspect panels and their "never dies" bands a single pass can leave text a point or two
            # outside the page.
            previous = None
            for _ in range(6):
                figure.draw_without_rendering()
                positions = np.array([ax.get_position(original=True).bounds for ax in figure.axes])
                if previous is not None and np.allclose(positions, previous, rtol=0, atol=1e-4):
                    break
                previous = positions
        figure.set_layout_engine("none")


def save_figure(figure: Figure, path, *, dpi: int = 200) -> Path:
    """Write a figure as PDF, SVG or PNG (from the suffix), byte-identical for identical content.

    The first save fixes the layout; artists added afterwards are not re-laid out.
    """
    path = Path(path)
    kind = path.suffix.lower().lstrip(".")
    if kind not in _METADATA:
        from tdakit._validation import fail

        raise fail("path", "save_figure", "a file name ending in .pdf, .svg or .png", str(path))
    _freeze_layout(figure)
    with house_style():
        figure.savefig(path, format=kind, dpi=dpi, metadata=_METADATA[kind])
    return path


def figure_bytes(figure: Figure, kind: str = "png", *, dpi: int = 110) -> bytes:
    """The figure encoded as PNG or SVG bytes (for widgets and notebooks)."""
    buffer = io.BytesIO()
    _freeze_layout(figure)
    with house_style():
        figure.savefig(buffer, format=kind, dpi=dpi, metadata=_METADATA[kind])
    return buffer.getvalue()
