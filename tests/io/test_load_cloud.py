import warnings

import numpy as np
import pandas as pd
import pytest

import tdakit
from tdakit.errors import (
    DataFileNotFoundError,
    DuplicatePointsWarning,
    InvalidDataError,
    InvalidParameterError,
    SuspiciousDataWarning,
)


def distance(cloud, i, j):
    """Distance between points i and j through the public API (point j's distance to landmark i)."""
    return tdakit.landmarks_from_indices(cloud, np.array([i])).distance_to_nearest[j]


@pytest.fixture
def table():
    return np.random.default_rng(3).normal(size=(40, 3))


# -- round trips ----------------------------------------------------------------------------
def test_same_cloud_from_array_dataframe_npy_npz_csv(tmp_path, table):
    frame = pd.DataFrame(table, columns=["a", "b", "c"])
    np.save(tmp_path / "c.npy", table)
    np.savez(tmp_path / "c.npz", points=table, other=np.zeros(3))
    frame.to_csv(tmp_path / "c.csv", index=False, float_format="%.17g")
    np.savetxt(tmp_path / "c.txt", table, fmt="%.17g")  # no header, white space
    np.savetxt(tmp_path / "c.tsv", table, fmt="%.17g", delimiter="\t", header="a\tb\tc", comments="")
    clouds = [tdakit.load_cloud(table), tdakit.load_cloud(frame), tdakit.load_cloud(tmp_path / "c.npy"),
              tdakit.load_cloud(tmp_path / "c.npz"), tdakit.load_cloud(str(tmp_path / "c.csv")),
              tdakit.load_cloud(tmp_path / "c.txt"), tdakit.load_cloud(tmp_path / "c.tsv")]
    for cloud in clouds:
        np.testing.assert_array_equal(cloud.points, table)
        assert cloud.points.dtype == np.float64 and cloud.n_points == 40
    assert clouds[1].columns == ("a", "b", "c") and clouds[4].columns == ("a", "b", "c")
    assert clouds[2].source_checksum is not None and clouds[0].source_checksum is None


def test_columns_by_name_and_position(tmp_path, table):
    frame = pd.DataFrame(table, columns=["a", "b", "c"]).assign(label=["x"] * 40)
    cloud = tdakit.load_cloud(frame, columns=["c", "a"])
    np.testing.assert_array_equal(cloud.points, table[:, [2, 0]])
    assert cloud.columns == ("c", "a")
    np.testing.assert_array_equal(tdakit.load_cloud(table, columns=[1]).points, table[:, [1]])


def test_semicolon_delimiter_detected_and_given(tmp_path, table):
    np.savetxt(tmp_path / "s.csv", table, fmt="%.17g", delimiter=";", header="a;b;c", comments="")
    np.testing.assert_array_equal(tdakit.load_cloud(tmp_path / "s.csv").points, table)
    np.testing.assert_array_equal(tdakit.load_cloud(tmp_path / "s.csv", delimiter=";", header=True).points, table)


def test_comments_and_blank_lines_skipped(tmp_path):
    (tmp_path / "c.csv").write_text("# made by hand\nx,y\n\n0,0\n# mid comment\n3,4\n")
    np.testing.assert_array_equal(tdakit.load_cloud(tmp_path / "c.csv").points, [[0, 0], [3, 4]])


def test_integer_and_float32_input_converted():
    ints = np.array([[0, 0], [3, 4]], dtype=np.int32)
    assert tdakit.load_cloud(ints).points.dtype == np.float64
    small = np.array([[0, 0], [3, 4]], dtype=np.float32)
    assert distance(tdakit.load_cloud(small), 0, 1) == 5.0  # 3-4-5 triangle


def test_points_are_read_only(table):
    cloud = tdakit.load_cloud(table)
    with pytest.raises(ValueError):
        cloud.points[0, 0] = 1.0


def test_standardize_rescales_and_records(table):
    cloud = tdakit.load_cloud(table * [1, 1000, 0.001], standardize=True)
    np.testing.assert_allclose(cloud.points.std(axis=0), 1.0)
    np.testing.assert_allclose(cloud.scale, (table * [1, 1000, 0.001]).std(axis=0))


def test_duplicates_accepted_and_reported():
    points = np.array([[0.0, 0.0], [1.0, 1.0], [0.0, 0.0], [-0.0, 0.0]])
    with pytest.warns(DuplicatePointsWarning, match="2 repeated point"):
        cloud = tdakit.load_cloud(points)
    assert cloud.n_duplicates == 2 and cloud.n_distinct == 2


# -- metrics: hand-computed distances --------------------------------------------------------
def test_periodic_minimum_image_across_faces():
    # Box of side 10: x = 0.5 and x = 9.5 differ by 9 directly, by 10 - 9 = 1 across the face.
    cloud = tdakit.load_cloud([[0.5, 5, 5], [9.5, 5, 5]], metric="periodic", box=10)
    assert distance(cloud, 0, 1) == pytest.approx(1.0, abs=1e-12)


def test_periodic_per_axis_box():
    # Sides (10, 20, 30): differences 8, 18, 28 wrap to 2, 2, 2, so the distance is sqrt(12).
    cloud = tdakit.load_cloud([[1, 1, 1], [9, 19, 29]], metric="periodic", box=[10, 20, 30])
    assert distance(cloud, 0, 1) == pytest.approx(np.sqrt(12), abs=1e-12)
    assert cloud.metric.box == (10.0, 20.0, 30.0)


def test_periodic_point_on_the_far_face_is_the_near_face():
    # x = 10 in a box of side 10 is the same place as x = 0: distance 0 to it.
    cloud = tdakit.load_cloud([[10.0, 3.0], [0.0, 3.0], [5.0, 5.0]], metric="periodic", box=10)
    assert distance(cloud, 0, 1) == 0.0


def test_periodic_outside_box_is_an_error():
    with pytest.raises(InvalidDataError, match="outside the periodic box at row 1"):
        tdakit.load_cloud([[1, 1], [10.5, 1]], metric="periodic", box=10)
    with pytest.raises(InvalidDataError, match="outside"):
        tdakit.load_cloud([[1, 1], [-0.1, 1]], metric="periodic", box=10)


@pytest.mark.parametrize(("a", "b", "expected", "why"), [
    ((179.5, 0.0), (-179.5, 0.0), 1.0, "across the date line on the equator: 0.5 + 0.5 degrees"),
    ((0.0, 89.5), (180.0, 89.5), 1.0, "over the pole along a meridian: 0.5 + 0.5 degrees"),
    ((0.0, 0.0), (90.0, 0.0), 90.0, "a quarter of the equator"),
    ((10.0, -90.0), (200.0, 90.0), 180.0, "pole to pole"),
    ((0.0, 0.0), (0.0, 1e-6), 1e-6, "tiny separation along a meridian"),
])
def test_angular_great_circle_degrees(a, b, expected, why):
    cloud = tdakit.load_cloud([a, b], metric="angular")
    assert distance(cloud, 0, 1) == pytest.approx(expected, rel=1e-9, abs=1e-9), why


def test_angular_needs_two_columns_and_valid_latitudes():
    with pytest.raises(InvalidDataError, match="exactly 2 columns"):
        tdakit.load_cloud(np.zeros((3, 3)) + [[0, 0, 0], [1, 1, 1], [2, 2, 2]], metric="angular")
    with pytest.raises(InvalidDataError, match="latitude 91.0 at row 1"):
        tdakit.load_cloud([[0, 0], [0, 91]], metric="angular")


@pytest.mark.parametrize(("a", "b", "expected"), [
    ((1, 0), (0, 1), 1.0),   # orthogonal: 1 - cos(90 deg) = 1
    ((1, 0), (-1, 0), 2.0),  # opposite: 1 - cos(180 deg) = 2
    ((1, 1), (2, 2), 0.0),   # same direction
    ((1, 0), (1, 1), 1 - 1 / np.sqrt(2)),  # 45 degrees
])
def test_cosine_dissimilarity(a, b, expected):
    cloud = tdakit.load_cloud([a, b], metric="cosine")
    assert distance(cloud, 0, 1) == pytest.approx(expected, abs=1e-12)
    assert not cloud.metric.is_metric


def test_minkowski_family():
    points = [[0, 0], [3, 4]]
    assert distance(tdakit.load_cloud(points, metric="manhattan"), 0, 1) == 7.0
    assert distance(tdakit.load_cloud(points, metric="chebyshev"), 0, 1) == 4.0
    assert distance(tdakit.load_cloud(points, metric="minkowski", p=3), 0, 1) == pytest.approx(91 ** (1 / 3))


def test_precomputed_matrix():
    matrix = np.array([[0, 1, 2], [1, 0, 1.5], [2, 1.5, 0]])
    cloud = tdakit.load_cloud(matrix, metric="precomputed")
    assert cloud.n_points == 3 and cloud.points.shape == (3, 0)
    assert distance(cloud, 0, 2) == 2.0


@pytest.mark.parametrize(("matrix", "message"), [
    ([[0, 1], [1, 0], [1, 1]], "square"),
    ([[0, -1], [-1, 0]], r"entry \[0, 1\] = -1.0 is negative"),
    ([[0, 1], [2, 0]], r"entry \[0, 1\] = 1.0 differs from its mirror"),
    ([[1, 1], [1, 0]], r"entry \[0, 0\] = 1.0 is on the diagonal"),
    ([[0, np.inf], [np.inf, 0]], "infinity at row 0"),
    ([[0, np.nan], [np.nan, 0]], "NaN at row 0"),
])
def test_precomputed_violations_name_the_first_entry(matrix, message):
    with pytest.raises(InvalidDataError, match=message):
        tdakit.load_cloud(np.array(matrix, dtype=float), metric="precomputed")


# -- file errors ------------------------------------------------------------------------------
def test_non_numeric_cell_reports_line_and_column(tmp_path):
    (tmp_path / "bad.csv").write_text("x,y,z\n# comment\n1,2,3\n\n4,five,6\n")
    with pytest.raises(InvalidDataError, match=r"'five' at line 5, column 2 \('y'\)"):
        tdakit.load_cloud(tmp_path / "bad.csv")


def test_missing_file_and_unknown_extension(tmp_path):
    with pytest.raises(DataFileNotFoundError, match="does not exist"):
        tdakit.load_cloud(tmp_path / "nope.csv")
    (tmp_path / "cloud.xyz").write_text("1 2\n3 4\n")
    with pytest.raises(InvalidParameterError, match=r"\.csv, \.dat, \.npy"):
        tdakit.load_cloud(tmp_path / "cloud.xyz")


def test_unknown_metric_and_column_list_the_valid_ones(table):
    with pytest.raises(InvalidParameterError, match="'angular', 'chebyshev', 'cosine'"):
        tdakit.load_cloud(table, metric="euclidian")
    frame = pd.DataFrame(table, columns=["a", "b", "c"])
    with pytest.raises(InvalidParameterError, match="valid names: 'a', 'b', 'c'"):
        tdakit.load_cloud(frame, columns=["a", "d"])


# -- warnings about data that load but look misread (issue 15 item 4) -------------------------
def _suspicious(record):
    return [w for w in record if issubclass(w.category, SuspiciousDataWarning)]


def test_radians_given_to_the_angular_metric_are_warned():
    rng = np.random.default_rng(5)
    radians = np.column_stack([rng.uniform(0, 2 * np.pi, 200), np.arcsin(rng.uniform(-1, 1, 200))])
    with pytest.warns(SuspiciousDataWarning, match="look like radians"):
        tdakit.load_cloud(radians, metric="angular")
    with warnings.catch_warnings(record=True) as record:
        warnings.simplefilter("always")
        tdakit.load_cloud(np.degrees(radians), metric="angular")
        tdakit.load_cloud(radians, metric="angular", unit="deg")  # the user says degrees: no warning
    assert not _suspicious(record)


def test_identifier_column_is_warned_unless_columns_are_chosen(tmp_path):
    rng = np.random.default_rng(6)
    table = np.column_stack([np.arange(1, 51), rng.normal(size=(50, 2))])
    np.savetxt(tmp_path / "ids.csv", table, delimiter=",", header="id,x,y", comments="", fmt="%.17g")
    with pytest.warns(SuspiciousDataWarning, match=r"Column 0 \('id'\).*row identifier"):
        tdakit.load_cloud(tmp_path / "ids.csv")
    with warnings.catch_warnings(record=True) as record:
        warnings.simplefilter("always")
        tdakit.load_cloud(tmp_path / "ids.csv", columns=["id", "x", "y"])  # chosen on purpose
        tdakit.load_cloud(table[rng.permutation(50)])  # shuffled: not increasing
    assert not _suspicious(record)


def test_column_scales_apart_by_orders_of_magnitude_are_warned():
    rng = np.random.default_rng(7)
    table = rng.normal(size=(100, 3)) * [1.0, 5e3, 1.0]
    with pytest.warns(SuspiciousDataWarning, match=r"standardize=True"):
        tdakit.load_cloud(table)
    with warnings.catch_warnings(record=True) as record:
        warnings.simplefilter("always")
        tdakit.load_cloud(table, standardize=True)
        tdakit.load_cloud(rng.normal(size=(100, 3)) * [1.0, 500.0, 1.0])  # below the ratio of 1000
    assert not _suspicious(record)


def test_no_data_warning_on_the_bundled_demo_data():
    from pathlib import Path

    root = Path(__file__).resolve().parents[2] / "datasets"
    with warnings.catch_warnings(record=True) as record:
        warnings.simplefilter("always")
        tdakit.load_cloud(root / "marrowfield_halos.csv", columns=["x", "y", "z"], metric="periodic", box=100)
        tdakit.load_cloud(root / "tidewater_readings.npz", key="points")
    assert not _suspicious(record), [str(w.message) for w in record]


def test_errors_of_a_text_file_name_its_line(tmp_path):
    # Data row 1 is line 5 of the file (a comment and the header come first, a blank line between).
    (tmp_path / "box.csv").write_text("# box\nx,y\n1,1\n\n12,1\n")
    with pytest.raises(InvalidDataError, match=r"row 1 \(line 5 of the file\)"):
        tdakit.load_cloud(tmp_path / "box.csv", metric="periodic", box=10)
