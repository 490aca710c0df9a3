"""tdakit's visual identity: palette, markers, journal presets, deterministic export."""

from __future__ import annotations

import functools
import io
from contextlib import contextmanager
from pathlib import Path

import matplotlib
from matplotlib.figure import Figure

# Our own colour-blind-safe set: four hues far apart in lightness as well as hue, so they stay
# distinct in grey scale and under the common colour-vision deficiencies; shape and fill carry
# the same information, so no figure relies on colour alone.
DIMENSION_COLORS = ("#1d4e89", "#e3901d", "#8a3d82", "#3a9a8c", "#5a5a5a")
DIMENSION_MARKERS = ("o", "^", "s", "D", "v")
BAND_COLOR = "#c9ced6"
CLOUD_COLOR = "#9aa3ad"
LANDMARK_COLOR = "#1d4e89"
FEATURE_COLOR = "#c0392b"
PRESETS = {"single": 3.5, "double": 7.2}  # column widths in inches
RC = {"font.size": 8, "axes.titlesize": 8.5, "axes.labelsize": 8, "xtick.labelsize": 7, "ytick.labelsize": 7,
      "legend.fontsize": 7, "lines.linewidth": 1.0, "axes.linewidth": 0.6, "svg.hashsalt": "tdakit",
      "svg.fonttype": "path", "pdf.fonttype": 42, "figure.dpi": 100}
_METADATA = {"svg": {"Date": None, "Creator": "tdakit"}, "pdf": {"CreationDate": None, "Creator": "tdakit",
                                                                 "Producer": "tdakit"},
             "png": {"Software": "tdakit"}}


def color(dim: int) -> str:
    return DIMENSION_COLORS[min(dim, len(DIMENSION_COLORS) - 1)]


def marker(dim: int) -> str:
    return DIMENSION_MARKERS[min(dim, len(DIMENSION_MARKERS) - 1)]


def axis_units(diagrams) -> str:
    """The short unit of a diagram's scale for axis labels (the full text stays in ``diagrams.units``)."""
    text = diagrams.units.split("; ")[-1]
    return text.replace("sqrt(alpha^2)", "\u221a\u03b1\u00b2")


def styled(function):
    """Run a drawing function inside the house style, so every artist and tick gets its sizes."""

    @functools.wraps(function)
    def wrapper(*args, **kwargs):
        with house_style():
            return function(*args, **kwargs)

    return wrapper


@contextmanager
def house_style():
    """Font sizes that survive reduction to a journal column, and a fixed SVG hash salt."""
    with matplotlib.rc_context(RC):
        yield


def new_figure(preset: str = "single", aspect: float = 0.8) -> Figure:
    """A Figure of a journal column width (``"single"`` 3.5 in or ``"double"`` 7.2 in)."""
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


def _freeze_layout(figure: Figure) -> None:
    """Run the constrained layout once, then keep it: each draw would otherwise start the iterative
    layout from the last positions, and a figure saved as PDF then SVG would differ from one saved
    as SVG alone.
    """
    if figure.get_layout_engine() is not None:
        with house_style():
            figure.draw_without_rendering()
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
