"""Figures: drawn without pyplot, strip and significance read back from the artists, deterministic SVG."""

import subprocess
import sys

import numpy as np
import pytest

import tdakit
from tdakit.core.inference.bands import Band
from tdakit.core.topology.diagrams import Diagrams
from tdakit.pipeline import analyze
from tdakit.plotting import (
    figure_bytes,
    plot_barcode,
    plot_betti_curves,
    plot_cloud,
    plot_diagram,
    plot_landscape,
    plot_study,
    summary_figure,
    write_run_figures,
)
from tdakit.shapes import circle
from tests.plotting.layout import drawn_texts, layout_problems


def make_diagrams(per_dim, max_scale=np.inf, cut=None):
    """Diagrams from (m, 2) arrays; ``cut[k]`` marks alive-at-cutoff rows."""
    pairs = tuple(np.asarray(p, dtype=float).reshape(-1, 2) for p in per_dim)
    flags = tuple(np.zeros(len(p), bool) if cut is None else np.asarray(cut[k], bool) for k, p in enumerate(pairs))
    births = tuple(np.full((len(p), k + 1), -1) for k, p in enumerate(pairs))
    deaths = tuple(np.full((len(p), k + 2), -1) for k, p in enumerate(pairs))
    return Diagrams(pairs, flags, births, deaths, "rips", "length; Rips edge length", max_scale)


def make_band(diagrams, radii):
    return Band("subsample", 0.9, tuple(radii), diagrams, "target", "confidence set", "statement", "none",
                np.zeros(3))


@pytest.fixture(scope="module")
def run():
    cloud = tdakit.load_cloud(circle(500, noise=0.03, rng=1))
    return analyze(cloud, {"sampling": {"n_landmarks": 60}, "band": {"method": "bootstrap", "n_boot": 10}}, rng=4)


def test_strip_height_is_twice_the_radius_and_significance_matches_it(global_seed):
    rng = np.random.default_rng(global_seed)
    births = rng.uniform(0, 1, (2, 80))
    diagrams = make_diagrams([np.c_[births[0], births[0] + rng.exponential(0.2, 80)],
                              np.c_[births[1], births[1] + rng.exponential(0.3, 80)]])
    band = make_band(diagrams, (0.11, 0.23))
    drawn = plot_diagram(diagrams, band)
    for k, radius in enumerate((0.11, 0.23)):
        corners = drawn["strips"][k].get_xy()
        heights = corners[:, 1] - corners[:, 0]
        assert sorted(np.round(heights, 12))[-1] == pytest.approx(2 * radius)
        shown = drawn["significant"][k].get_offsets()
        pairs = diagrams[k]
        expected = pairs[pairs[:, 1] - pairs[:, 0] > 2 * radius]
        assert np.array_equal(np.asarray(shown)[np.lexsort(np.asarray(shown).T)], expected[np.lexsort(expected.T)])
        assert len(drawn["noise"][k].get_offsets()) == len(pairs) - len(expected)


def test_barcode_threshold_and_betti_lower_bound(global_seed):
    rng = np.random.default_rng(global_seed)
    b = rng.uniform(0, 1, 50)
    diagrams = make_diagrams([np.c_[b, b + rng.exponential(0.3, 50)]])
    band = make_band(diagrams, (0.2,))
    drawn = plot_barcode(diagrams, band, dim=0)
    xs = drawn["threshold"].get_xdata()
    assert xs[1] - xs[0] == pytest.approx(0.4)
    lengths = np.diff(np.array(drawn["bars"].get_segments())[:, :, 0], axis=1).ravel()
    assert np.array_equal(drawn["significant"], lengths > 0.4)
    curves = plot_betti_curves(diagrams, band)
    assert (curves["guaranteed"][0] <= curves["curves"][0]).all()


EDGE_CASES = {
    "empty": lambda: make_diagrams([np.zeros((0, 2)), np.zeros((0, 2))]),
    "only essential": lambda: make_diagrams([[[0, np.inf]], [[0.5, np.inf]]]),
    "capped": lambda: make_diagrams([[[0, np.inf], [0, 0.3]], [[0.2, np.inf]]], max_scale=1.0,
                                    cut=[[False, False], [True]]),
}


@pytest.mark.parametrize("case", sorted(EDGE_CASES))
@pytest.mark.parametrize("with_band", [False, True])
def test_every_drawing_handles_edge_cases(case, with_band):
    diagrams = EDGE_CASES[case]()
    band = make_band(diagrams, (0.1, 0.1)) if with_band else None
    for draw in (lambda: plot_diagram(diagrams, band), lambda: plot_barcode(diagrams, band, dim=1),
                 lambda: plot_betti_curves(diagrams, band), lambda: plot_landscape(diagrams, band, dim=1)):
        drawn = draw()
        assert figure_bytes(drawn["ax"].figure)[:4] == b"\x89PNG"


def test_never_dies_band_sits_above_the_axes_and_cap_row_inside():
    """Essential classes live in their own labelled band above the scale (cut by a break mark); classes alive
    at the cap sit on the cap line inside the axes."""
    diagrams = EDGE_CASES["capped"]()
    drawn = plot_diagram(diagrams)
    band, ax = drawn["never_dies_ax"], drawn["ax"]
    assert drawn["never_dies"][0].axes is band and len(drawn["never_dies"][0].get_offsets()) == 1
    assert drawn["at_cap"][1].axes is ax and drawn["at_cap"][1].get_offsets()[:, 1].tolist() == [1.0]
    ax.figure.draw_without_rendering()
    assert band.get_window_extent().y0 > ax.get_window_extent().y1
    assert "never" in band.get_ylabel() and "dies" in band.get_ylabel()


def test_run_figures_without_pyplot(tmp_path):
    """In a fresh interpreter: every figure of a run, 10^4-point diagrams included, and pyplot never imported."""
    code = f"""
import sys, time, numpy as np, tdakit
from tdakit.pipeline import analyze
from tdakit.plotting import write_run_figures, plot_diagram, plot_barcode
cloud = tdakit.load_cloud(np.random.default_rng(0).normal(size=(400, 5)))
run = analyze(cloud, {{"sampling": {{"n_landmarks": 50}}, "band": {{"n_boot": 20}}}}, rng=1)
write_run_figures(run, r"{tmp_path}", formats=("png", "svg"))
from tests.plotting.test_figures import make_diagrams, make_band
b = np.random.default_rng(1).uniform(0, 1, 10_000)
big = make_diagrams([np.c_[b, b + np.random.default_rng(2).exponential(0.1, 10_000)]])
start = time.perf_counter()
plot_diagram(big, make_band(big, (0.1,)))["ax"].figure.savefig(r"{tmp_path / 'big.png'}")
plot_barcode(big, make_band(big, (0.1,)), dim=0)
print(round(time.perf_counter() - start, 2))
assert "matplotlib.pyplot" not in sys.modules, "pyplot was imported"
"""
    done = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=240,
                          cwd=str(__import__("pathlib").Path(__file__).resolve().parents[2]))
    assert done.returncode == 0, done.stderr
    assert float(done.stdout.split()[-1]) < 60  # generous: a 10^4-point diagram takes about a second
    names = sorted(p.name for p in tmp_path.glob("run_*.png"))
    assert names == [f"run_{n}.png" for n in ("barcode", "betti", "cloud", "diagram", "landscape", "summary")]


def test_svg_is_byte_identical_for_the_same_run(run, tmp_path):
    first = write_run_figures(run, tmp_path / "a", formats=("svg", "pdf"))
    second = write_run_figures(run, tmp_path / "b", formats=("svg", "pdf"))
    for a, b in zip(first, second):
        assert a.read_bytes() == b.read_bytes(), a.name


def test_svg_identical_across_processes(run, tmp_path):
    path = tdakit.io.save_run(run, tmp_path / "r")
    code = ("import sys; from tdakit.io import load_run; from tdakit.plotting import summary_figure, figure_bytes; "
            f"sys.stdout.buffer.write(figure_bytes(summary_figure(load_run(r'{path}')), 'svg'))")
    outputs = [subprocess.run([sys.executable, "-c", code], capture_output=True, timeout=120).stdout for _ in range(2)]
    assert outputs[0] == outputs[1] and outputs[0].startswith(b"<?xml")


def test_cloud_marks_feature_vertices(run):
    drawn = plot_cloud(run)
    assert drawn["landmarks"].get_offsets().shape == (60, 2)
    significant = run.table.query("dimension == 1 and significant")
    assert len(drawn["features"]) == min(3, len(significant)) >= 1
    row, artist = drawn["features"][0]
    assert len(artist.get_offsets()) == len(set(row.birth_vertices) | set(row.death_vertices))


def test_high_dimensional_cloud_is_projected():
    cloud = tdakit.load_cloud(np.random.default_rng(0).normal(size=(300, 6)))
    result = analyze(cloud, {"sampling": {"n_landmarks": 30}, "band": {"method": "none"}}, rng=0)
    drawn = plot_cloud(result)
    assert "principal axis 1" in drawn["ax"].get_xlabel()
    assert summary_figure(result) is not None


def test_study_plot_draws_one_line_per_method_and_dimension():
    from tdakit.study import subsampling_study

    cloud = tdakit.load_cloud(circle(400, noise=0.02, rng=0))
    study = subsampling_study(cloud, {"methods": ["maxmin", "random"], "counts": [10, 20, 40], "n_seeds": 2,
                                      "band": {"n_boot": 20}}, rng=0)
    drawn = plot_study(study)
    keys = {(panel, m, k) for panel, m, k in drawn["lines"] if panel != "certificate"}
    assert keys == {(p, m, k) for p in ("distance", "count") for m in ("maxmin", "random") for k in (0, 1)}
    assert ("certificate", "maxmin", None) in drawn["lines"]


def test_bad_arguments_are_named():
    from tdakit.errors import InvalidParameterError

    diagrams = EDGE_CASES["empty"]()
    with pytest.raises(InvalidParameterError, match="'diagrams'"):
        plot_diagram(np.zeros((3, 2)))
    with pytest.raises(InvalidParameterError, match="'dims'"):
        plot_diagram(diagrams, dims=[5])
    with pytest.raises(InvalidParameterError, match="'band'"):
        plot_barcode(diagrams, band=0.3)
    with pytest.raises(InvalidParameterError, match="'run'"):
        plot_cloud(diagrams)


def test_svg_does_not_depend_on_what_was_saved_before(run, tmp_path):
    from tdakit.plotting import save_figure

    first = summary_figure(run)
    save_figure(first, tmp_path / "first.pdf")
    save_figure(first, tmp_path / "first.png", dpi=72)
    fresh = summary_figure(run)
    assert save_figure(first, tmp_path / "a.svg").read_bytes() == save_figure(fresh, tmp_path / "b.svg").read_bytes()


def _texts(figure):
    return [t.get_text() for t in drawn_texts(figure)]


def test_one_dimensional_cloud_draws_a_histogram_with_a_rug(tmp_path):
    """1-D data used to crash the cloud figure: now a histogram, the landmarks on a rug below it."""
    values = np.r_[np.random.default_rng(0).normal(0, 1, 150), np.random.default_rng(1).normal(6, 1, 150)]
    result = analyze(tdakit.load_cloud(values[:, None], unit="kpc"),
                     {"sampling": {"n_landmarks": 30}, "complex": {"max_dim": 0}, "band": {"n_boot": 10}}, rng=0)
    drawn = plot_cloud(result, dim=0)
    assert len(drawn["points"]) > 0 and drawn["landmarks"].get_offsets().shape == (30, 2)
    assert drawn["ax"].get_xlabel().endswith("(kpc)")
    assert layout_problems(drawn["ax"].figure) == []
    assert len(write_run_figures(result, tmp_path, formats=("png",))) == 6


def test_angular_cloud_is_drawn_on_an_equal_area_sky():
    rng = np.random.default_rng(2)
    longitude = rng.uniform(0, 360, 300)
    points = np.c_[longitude, 20 * np.sin(np.radians(longitude)) + rng.normal(0, 3, 300)]
    result = analyze(tdakit.load_cloud(points, metric="angular"),
                     {"sampling": {"n_landmarks": 40}, "band": {"n_boot": 10}}, rng=0)
    drawn = plot_cloud(result)
    assert drawn["ax"].name == "mollweide"
    shown = drawn["points"].get_offsets()
    assert shown[:, 0].min() >= -np.pi and shown[:, 0].max() < np.pi  # longitudes wrapped to [-180, 180)
    expected = np.radians((result.preview_points[:, 0] + 180) % 360 - 180)
    assert np.allclose(shown[:, 0], expected) and np.allclose(shown[:, 1], np.radians(result.preview_points[:, 1]))
    assert layout_problems(drawn["ax"].figure) == []
    from tdakit.errors import InvalidParameterError
    from tdakit.plotting import new_figure

    with pytest.raises(InvalidParameterError, match="'ax'"):
        plot_cloud(result, ax=new_figure().add_subplot())


def test_every_scale_axis_and_the_caption_carry_the_unit():
    cloud = tdakit.load_cloud(circle(300, noise=0.03, rng=1), unit="Mpc/h")
    result = analyze(cloud, {"sampling": {"n_landmarks": 40}, "band": {"method": "bootstrap", "n_boot": 10}}, rng=4)
    assert result.unit == "Mpc/h"
    unit = result.unit
    diagram = plot_diagram(result.diagrams, result.band, unit=unit)["ax"]
    assert diagram.get_xlabel() == "birth (Mpc/h)" and diagram.get_ylabel() == "death (Mpc/h)"
    assert plot_barcode(result.diagrams, result.band, unit=unit)["ax"].get_xlabel() == "scale (Mpc/h)"
    rows = plot_betti_curves(result.diagrams, result.band, unit=unit)["axes"]
    assert rows[max(rows)].get_xlabel() == "scale (Mpc/h)"
    assert plot_landscape(result.diagrams, result.band, unit=unit)["ax"].get_xlabel() == "scale (Mpc/h)"
    assert all(label.endswith("(Mpc/h)") for label in (plot_cloud(result)["ax"].get_xlabel(),
                                                        plot_cloud(result)["ax"].get_ylabel()))
    assert "Scales in Mpc/h" in " ".join(_texts(summary_figure(result)))
    assert plot_diagram(result.diagrams)["ax"].get_xlabel() == "birth (DTM-Rips value)"


def test_betti_axes_use_integer_ticks_and_show_one_against_two():
    # H0 with 200 components and H1 with at most two loops: each row its own integer axis
    births = np.zeros(200)
    diagrams = make_diagrams([np.c_[births, np.linspace(0.01, 0.5, 200)], [[0.2, 0.9], [0.3, 0.6]]])
    drawn = plot_betti_curves(diagrams)
    drawn["ax"].figure.draw_without_rendering()
    loops = drawn["axes"][1]
    ticks = [t for t in loops.get_yticks() if loops.get_ylim()[0] <= t <= loops.get_ylim()[1]]
    assert {1.0, 2.0} <= set(ticks) and all(float(t).is_integer() for t in ticks)
    assert drawn["curves"][1].max() == 2


def test_plus_minus_sign_and_no_plain_ascii_substitute(run):
    for figure in (plot_landscape(run.diagrams, run.band)["ax"].figure, summary_figure(run, preset="single")):
        texts = _texts(figure)
        assert not any("+-" in t for t in texts)
    assert any("\u00b1" in t for t in _texts(plot_landscape(run.diagrams, run.band)["ax"].figure))


def test_numbered_features_carry_the_same_number_in_every_view(run):
    from tdakit.plotting import feature_numbers

    numbers = feature_numbers(run, dim=1)
    assert numbers and list(numbers.values()) == list(range(1, len(numbers) + 1))
    diagram = plot_diagram(run.diagrams, run.band, numbers=numbers)
    barcode = plot_barcode(run.diagrams, run.band, dim=1, numbers=numbers)
    cloud = plot_cloud(run, numbers=numbers)
    shown = [sorted(int(label.get_text()) for label in drawn["labels"]) for drawn in (diagram, barcode, cloud)]
    assert shown[0] == shown[1] == shown[2] == sorted(numbers.values())
    for label in diagram["labels"]:
        row = [r for r, n in numbers.items() if n == int(label.get_text())][0]
        assert tuple(label.xy) == pytest.approx((run.table.birth[row], run.table.death[row]))
    for row, artist in cloud["features"]:
        assert len(artist.get_offsets()) == len(set(row.birth_vertices) | set(row.death_vertices))


@pytest.mark.parametrize("preset", ["single", "double"])
def test_a_real_run_lays_out_cleanly(run, preset):
    from tdakit.plotting.summary import _run_figures

    for name, figure in _run_figures(run, preset).items():
        assert layout_problems(figure) == [], name
