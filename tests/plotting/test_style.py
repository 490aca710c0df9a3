"""tdakit's visual code: dimensions told apart in greyscale and under colour-vision deficiencies, by shape and
line style too, not matplotlib's default colours, and fonts that come with matplotlib (deterministic images)."""

from pathlib import Path

import matplotlib
import numpy as np
import pytest
from matplotlib.colors import TABLEAU_COLORS, to_hex, to_rgb
from matplotlib.font_manager import FontProperties, findfont

from tdakit.plotting import DIMENSION_STYLE, house_style

# Simulation matrices for full-severity dichromacy (linear RGB), from G. M. Machado, M. M. Oliveira,
# L. A. F. Fernandes, "A physiologically-based model for simulation of color vision deficiency",
# IEEE Trans. Vis. Comput. Graph. 15(6) (2009) 1291-1298, table of severity 1.0 (values from memory).
DICHROMACY = {
    "deuteranopia": [[0.367322, 0.860646, -0.227968], [0.280085, 0.672501, 0.047413], [-0.011820, 0.042940, 0.968881]],
    "protanopia": [[0.152286, 1.052583, -0.204868], [0.114503, 0.786281, 0.099216], [-0.003882, -0.048116, 1.051998]],
    "tritanopia": [[1.255528, -0.076749, -0.178779], [-0.078411, 0.930809, 0.147602], [0.004733, 0.691367, 0.303900]],
}
MAIN = (0, 1, 2)  # the dimensions nearly every figure shows


def _linear(rgb):
    """sRGB to linear RGB: the IEC 61966-2-1:1999 transfer function (from memory)."""
    rgb = np.asarray(rgb, dtype=float)
    return np.where(rgb <= 0.04045, rgb / 12.92, ((rgb + 0.055) / 1.055) ** 2.4)


def _lightness(linear_rgb):
    """CIE L* of a linear sRGB colour (sRGB luminance weights, CIE 1976 lightness)."""
    y = float(np.dot([0.2126, 0.7152, 0.0722], np.clip(linear_rgb, 0, 1)))
    return 116 * np.cbrt(y) - 16 if y > 216 / 24389 else y * 24389 / 27


@pytest.mark.parametrize("vision", ["normal"] + sorted(DICHROMACY))
def test_dimensions_differ_in_lightness_for_every_vision(vision):
    """Printed in grey or seen without one cone type, H0, H1 and H2 stay >= 15 L* apart (H0 darkest)."""
    matrix = np.eye(3) if vision == "normal" else np.asarray(DICHROMACY[vision])
    values = [_lightness(matrix @ _linear(to_rgb(DIMENSION_STYLE[k].color))) for k in MAIN]
    assert values == sorted(values)
    assert min(np.diff(values)) >= 15, values


def test_dimensions_differ_in_shape_line_and_hatch_too():
    styles = list(DIMENSION_STYLE.values())
    for field in ("marker", "linestyle", "hatch", "color"):
        assert len({getattr(s, field) for s in styles}) == len(styles), field


def test_light_fills_get_a_dark_edge():
    for style in DIMENSION_STYLE.values():
        fill, edge = (_lightness(_linear(to_rgb(c))) for c in (style.color, style.edge))
        assert fill < 60 or edge < 35


def test_not_matplotlib_default_colours():
    defaults = {to_hex(c) for c in TABLEAU_COLORS.values()}
    defaults |= {to_hex(c) for c in matplotlib.rcParamsDefault["axes.prop_cycle"].by_key()["color"]}
    assert not defaults & {to_hex(s.color) for s in DIMENSION_STYLE.values()}
    assert DIMENSION_STYLE[0].marker != "o" and DIMENSION_STYLE[1].marker != "^"


def test_fonts_are_the_ones_bundled_with_matplotlib():
    bundled = Path(matplotlib.get_data_path()) / "fonts"
    with house_style():
        assert matplotlib.rcParams["font.family"] == ["DejaVu Sans"]
        path = Path(findfont(FontProperties(family=matplotlib.rcParams["font.family"]), fallback_to_default=False))
        assert bundled in path.parents and path.name == "DejaVuSans.ttf"
        assert matplotlib.rcParams["mathtext.fontset"] == "dejavusans"
