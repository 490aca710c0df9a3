"""Every figure type at both presets: laid out without clipped or overprinted text or a legend over data,
and pixel-compared with a stored image.

Baselines live in tests/plotting/baseline/ (PNG at 72 dpi). After an intended change of a figure,
regenerate them and look at every changed image before committing:

    TDAKIT_REGENERATE_BASELINES=1 python -m pytest -q tests/plotting/test_images.py

(the test then writes the baselines and reports itself skipped). The inputs are hand-built
(tests/plotting/cases.py), so a change in the core's numbers cannot move a baseline.
"""

import os
import warnings
from pathlib import Path

import pytest
from matplotlib.testing.compare import compare_images

from tdakit.plotting import PRESETS, save_figure
from tests.plotting.cases import figure_cases
from tests.plotting.layout import layout_problems

BASELINE = Path(__file__).parent / "baseline"
REGENERATE = os.environ.get("TDAKIT_REGENERATE_BASELINES") == "1"
DPI = 72
TOLERANCE = 3.0  # RMS of the pixel difference on the 0-255 scale: anti-aliasing noise, not a moved label
CASES = figure_cases()


@pytest.mark.parametrize("preset", sorted(PRESETS))
@pytest.mark.parametrize("name", sorted(CASES))
def test_figure_layout_and_image(name, preset, tmp_path):
    with warnings.catch_warnings():
        warnings.simplefilter("error")  # e.g. "constrained_layout not applied": the panels collapsed
        figure = CASES[name](preset)
        assert layout_problems(figure) == []
    actual = save_figure(figure, tmp_path / f"{name}_{preset}.png", dpi=DPI)
    expected = BASELINE / actual.name
    if REGENERATE:
        BASELINE.mkdir(exist_ok=True)
        expected.write_bytes(actual.read_bytes())
        pytest.skip(f"baseline {expected.name} written")
    assert expected.exists(), f"no baseline {expected}; run with TDAKIT_REGENERATE_BASELINES=1 and look at it"
    difference = compare_images(str(expected), str(actual), tol=TOLERANCE)
    assert difference is None, difference


@pytest.mark.filterwarnings("ignore:constrained_layout not applied")
def test_layout_check_catches_what_it_must():
    """The check itself: a clipped label, two overprinted texts and a legend over data are each reported."""
    from tdakit.plotting import new_figure

    figure = new_figure("single", aspect=0.6)
    ax = figure.add_subplot()
    ax.scatter([0.5, 0.9], [0.9, 0.95], label="data")
    ax.legend(loc="upper right")
    ax.text(0.2, 0.2, "one label")
    ax.text(0.2, 0.2, "another label")
    ax.set_title("a title far too long for a single column, so it runs off the page at both ends, surely")
    problems = " | ".join(layout_problems(figure))
    assert "leaves the figure" in problems
    assert "'one label' and 'another label' overlap" in problems
    assert "legend covers data" in problems


def test_baselines_stay_small():
    sizes = [p.stat().st_size for p in BASELINE.glob("*.png")]
    assert len(sizes) == 2 * len(CASES) and sum(sizes) < 3 * 2**20
