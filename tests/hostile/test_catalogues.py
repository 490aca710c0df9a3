"""Hostile catalogue files and options through ``load_cloud`` (FITS, HDF5, Parquet; row filters; sky positions) and
the coordinate functions of ``tdakit.io``: each must be refused by tdakit's own error class, with a message naming
the parameter or the file at fault, quickly, never with a recursion error or an unannounced allocation.

Every file is invented here (``tdakit.shapes`` and numpy random numbers) and written with its format's own library.
Case ids start with the entry point's name (``load_cloud: ...``), as ``benchmarks/reliability.py`` counts them.
"""

import warnings

import numpy as np
import pytest

import tdakit
from tdakit import shapes
from tdakit.errors import DataFileNotFoundError, InvalidDataError, InvalidParameterError, MemoryBudgetError
from tdakit.io import (
    SkyConversion,
    comoving_distance,
    cosmology_record,
    parallax_to_cartesian,
    redshift_to_cartesian,
    sky_to_unit_vectors,
)
from tdakit.io.catalogues import parse_where

fits = pytest.importorskip("astropy.io.fits")
h5py = pytest.importorskip("h5py")
pa = pytest.importorskip("pyarrow")
pq = pytest.importorskip("pyarrow.parquet")

P, D, M, F = InvalidParameterError, InvalidDataError, MemoryBudgetError, DataFileNotFoundError
N = 60


def _fits_table(path, columns, name=None):
    hdu = fits.BinTableHDU.from_columns([fits.Column(name=k, format=fmt, array=v, unit=unit)
                                         for k, (fmt, v, unit) in columns.items()], name=name)
    hdu.writeto(path)
    return path


@pytest.fixture(scope="module")
def files(tmp_path_factory):
    """Every hostile file of this module, written once: name -> path."""
    folder = tmp_path_factory.mktemp("hostile_catalogues")
    rng = np.random.default_rng(17)
    ring = shapes.circle(N, noise=0.05, rng=5)
    ra, dec = rng.uniform(0, 360, N), rng.uniform(-80, 80, N)
    out = {}
    out["table"] = _fits_table(folder / "table.fits", {
        "x": ("D", ring[:, 0], None), "y": ("D", ring[:, 1], None), "name": ("6A", np.array(["halo"] * N), None),
        "flag": ("L", rng.random(N) > 0.5, None), "wave": ("C", rng.normal(size=N) + 1j, None),
        "vec": ("3D", rng.normal(size=(N, 3)), None), "id": ("K", np.arange(N), None)})
    whole = out["table"].read_bytes()
    (folder / "truncated.fits").write_bytes(whole[:len(whole) // 2 + 7])
    out["truncated"] = folder / "truncated.fits"
    (folder / "garbage.fits").write_bytes(rng.integers(0, 256, 5000, dtype=np.uint8).tobytes())
    out["garbage"] = folder / "garbage.fits"
    fits.HDUList([fits.PrimaryHDU(rng.normal(size=(8, 8)))]).writeto(folder / "image.fits")
    out["image"] = folder / "image.fits"
    fits.HDUList([fits.PrimaryHDU(), fits.ImageHDU(rng.normal(size=(8, 8)), name="PICTURE"),
                  fits.BinTableHDU.from_columns([fits.Column(name="x", format="D", array=ring[:, 0]),
                                                 fits.Column(name="y", format="D", array=ring[:, 1])],
                                                name="HALOS")]).writeto(folder / "mixed.fits")
    out["mixed"] = folder / "mixed.fits"
    out["empty"] = _fits_table(folder / "empty.fits", {"x": ("D", np.zeros(0), None), "y": ("D", np.zeros(0), None)})
    parallax = rng.uniform(1, 5, N)
    parallax[7] = -0.3
    out["sky_deg"] = _fits_table(folder / "sky.fits", {
        "ra": ("D", ra, "deg"), "dec": ("D", dec, "deg"), "parallax": ("D", parallax, "mas"),
        "z": ("D", rng.uniform(0.01, 0.2, N), None), "plx_arcsec": ("D", rng.uniform(1, 5, N) / 1000, "arcsec")})
    bad_dec = dec.copy()
    bad_dec[3] = 95.0
    wide_ra = ra + 360.0
    z_nan = rng.uniform(0.01, 0.2, N)
    z_nan[11] = np.nan
    out["sky_bad"] = _fits_table(folder / "sky_bad.fits", {
        "ra": ("D", wide_ra, None), "dec": ("D", bad_dec, None), "z": ("D", z_nan, None),
        "good_dec": ("D", dec, None), "huge_z": ("D", np.full(N, 1e300), None)})
    with h5py.File(folder / "links.h5", "w") as handle:
        group = handle.create_group("halos")
        group["x"], group["y"] = ring[:, 0], ring[:, 1]
        handle["ghost"] = h5py.SoftLink("/nowhere")
        group["elsewhere"] = h5py.ExternalLink("no_such_file.h5", "/x")
        handle.create_dataset("huge", shape=(10**12, 3), chunks=(4096, 3), dtype="f8")  # declared, never written
        packed = handle.create_dataset("packed", shape=(10**12, 3), chunks=(4096, 3), dtype="f8",
                                       compression="gzip")  # compressed: one chunk written, the rest fill values
        packed[:4096] = rng.normal(size=(4096, 3))
        partial = handle.create_dataset("partial", shape=(20_000, 2), chunks=(1000, 2), dtype="f8")
        partial[:5000] = rng.normal(size=(5000, 2))  # 15,000 rows never written would read as zeros
        handle.create_dataset("cube", data=rng.normal(size=(4, 4, 4)))
        handle.create_dataset("words", data=np.array([b"a", b"b"] * 30))
    out["links"] = folder / "links.h5"
    whole = out["links"].read_bytes()
    (folder / "truncated.h5").write_bytes(whole[:1500])
    out["truncated_h5"] = folder / "truncated.h5"
    table = pa.table({"x": ring[:, 0], "y": ring[:, 1], "pair": pa.array([[1.0, 2.0]] * N),
                      "nested": pa.array([{"a": 1.0}] * N), "label": ["halo"] * N})
    pq.write_table(table, folder / "nested.parquet")
    pq.write_table(pa.Table.from_arrays([pa.array(ring[:, 0]), pa.array(ring[:, 1]), pa.array(ring[:, 1])],
                                        names=["x", "y", "y"]), folder / "twins.parquet")
    out["twins"] = folder / "twins.parquet"
    pq.write_table(pa.table({"x": ring[:, 0], "when": pa.array(np.arange(N).astype("datetime64[s]"))}),
                   folder / "times.parquet")
    out["times"] = folder / "times.parquet"
    out["nested"] = folder / "nested.parquet"
    whole = out["nested"].read_bytes()
    (folder / "truncated.parquet").write_bytes(whole[:len(whole) - 40])
    out["truncated_pq"] = folder / "truncated.parquet"
    (folder / "folder.parquet").mkdir()
    out["folder"] = folder / "folder.parquet"
    out["missing"] = folder / "absent.fits"
    np.savetxt(folder / "plain.csv", ring, delimiter=",", header="x,y", comments="")
    out["csv"] = folder / "plain.csv"
    return out


def _call(files, name, **options):
    return lambda: tdakit.load_cloud(files[name], **options)


XY = ["x", "y"]
SKY3 = ["ra", "dec", "z"]
CASES = [
    # damaged files and tables that are no tables
    ("load_cloud: truncated FITS", _call, ("truncated",), {"columns": XY}, D, "truncated.fits"),
    ("load_cloud: random bytes named .fits", _call, ("garbage",), {}, D, "garbage.fits"),
    ("load_cloud: FITS image HDU only", _call, ("image",), {}, D, "image.fits"),
    ("load_cloud: FITS dataset names the image HDU", _call, ("mixed",), {"dataset": "PICTURE"}, P, "dataset"),
    ("load_cloud: FITS dataset 0 (primary HDU)", _call, ("mixed",), {"dataset": 0}, P, "dataset"),
    ("load_cloud: FITS dataset float", _call, ("mixed",), {"dataset": 2.5}, P, "dataset"),
    ("load_cloud: FITS dataset bool", _call, ("mixed",), {"dataset": True}, P, "dataset"),
    ("load_cloud: truncated HDF5", _call, ("truncated_h5",), {}, D, "truncated.h5"),
    ("load_cloud: truncated Parquet", _call, ("truncated_pq",), {}, D, "truncated.parquet"),
    ("load_cloud: folder named .parquet", _call, ("folder",), {}, D, "folder.parquet"),
    ("load_cloud: missing .fits file", _call, ("missing",), {}, F, "absent.fits"),
    # columns that hold no numbers
    ("load_cloud: FITS string column", _call, ("table",), {"columns": ["x", "name"]}, D, "name"),
    ("load_cloud: FITS boolean column", _call, ("table",), {"columns": ["x", "flag"]}, D, "flag"),
    ("load_cloud: FITS complex column", _call, ("table",), {"columns": ["x", "wave"]}, D, "wave"),
    ("load_cloud: FITS vector column", _call, ("table",), {"columns": ["x", "vec"]}, D, "vec"),
    ("load_cloud: FITS all columns, one a string", _call, ("table",), {}, D, "name"),
    ("load_cloud: Parquet list column", _call, ("nested",), {"columns": ["x", "pair"]}, D, "pair"),
    ("load_cloud: Parquet struct column", _call, ("nested",), {"columns": ["x", "nested"]}, D, "nested"),
    ("load_cloud: Parquet dataset given", _call, ("nested",), {"columns": XY, "dataset": "x"}, P, "dataset"),
    ("load_cloud: Parquet two columns of one name", _call, ("twins",), {"columns": XY}, D, "'y'"),
    ("load_cloud: Parquet filter on a twice-named column", _call, ("twins",), {"columns": ["x"], "where": "y > 0"},
     D, "'y'"),
    ("load_cloud: Parquet timestamp column", _call, ("times",), {}, D, "when"),
    ("load_cloud: HDF5 string dataset", _call, ("links",), {"dataset": "words"}, D, "words"),
    ("load_cloud: HDF5 3-D dataset", _call, ("links",), {"dataset": "cube"}, D, "dataset"),
    ("load_cloud: columns empty list", _call, ("table",), {"columns": []}, P, "columns"),
    ("load_cloud: column position out of range", _call, ("table",), {"columns": [0, 99]}, P, "columns"),
    ("load_cloud: unknown column name", _call, ("table",), {"columns": ["x", "nope"]}, P, "columns"),
    # zero rows, every row filtered out
    ("load_cloud: FITS table with zero rows", _call, ("empty",), {}, D, "empty.fits"),
    ("load_cloud: where keeps no row", _call, ("table",), {"columns": XY, "where": "x > 100"}, D, "where"),
    ("load_cloud: where keeps one row", _call, ("table",), {"columns": XY, "where": "id == 3"}, D, "where"),
    # the filter language: unknown names, injection, size
    ("load_cloud: where unknown column", _call, ("table",), {"columns": XY, "where": "mass > 1"}, P, "where"),
    ("load_cloud: where __import__", _call, ("table",), {"columns": XY, "where": "__import__('os').system('true')"},
     P, "where"),
    ("load_cloud: where attribute access", _call, ("table",), {"columns": XY, "where": "x.__class__ > 1"},
     P, "where"),
    ("load_cloud: where function call", _call, ("table",), {"columns": XY, "where": "abs(x) > 1"}, P, "where"),
    ("load_cloud: where arithmetic", _call, ("table",), {"columns": XY, "where": "x + 1 > 1"}, P, "where"),
    ("load_cloud: where string literal", _call, ("table",), {"columns": XY, "where": "name == 'halo'"}, P, "where"),
    ("load_cloud: where on a string column", _call, ("table",), {"columns": XY, "where": "name > 1"}, D, "name"),
    ("load_cloud: where on a complex column", _call, ("table",), {"columns": XY, "where": "wave > 1"}, D, "wave"),
    ("load_cloud: where on a Parquet list column", _call, ("nested",), {"columns": XY, "where": "pair > 1"},
     D, "pair"),
    ("load_cloud: where a million characters", _call, ("table",), {"columns": XY, "where": "x > 1 or " * 10**5 +
                                                                    "x > 1"}, P, "where"),
    ("load_cloud: where 600 nested parentheses", _call, ("table",), {"columns": XY, "where": "(" * 600 + "x > 1" +
                                                                      ")" * 600}, P, "where"),
    ("load_cloud: where 400 nested nots", _call, ("table",), {"columns": XY, "where": "not " * 400 + "x > 1"},
     P, "where"),
    ("load_cloud: where not a string", _call, ("table",), {"columns": XY, "where": 3}, P, "where"),
    ("load_cloud: where on a CSV", _call, ("csv",), {"where": "x > 0"}, P, "where"),
    # HDF5 links and declared sizes
    ("load_cloud: HDF5 soft link to nothing", _call, ("links",), {"dataset": "ghost"}, P, "dataset"),
    ("load_cloud: HDF5 external link to a missing file", _call, ("links",), {"dataset": "halos/elsewhere"},
     P, "dataset"),
    ("load_cloud: HDF5 dataset path unknown", _call, ("links",), {"dataset": "halos/mass"}, P, "dataset"),
    ("load_cloud: HDF5 dataset None among several", _call, ("links",), {}, P, "dataset"),
    ("load_cloud: HDF5 dataset of 10**12 declared rows", _call, ("links",), {"dataset": "huge"}, D, "huge"),
    ("load_cloud: HDF5 10**12 declared rows with a filter", _call, ("links",), {"dataset": "huge", "where": "x0 > 5"},
     D, "huge"),
    ("load_cloud: HDF5 compressed 10**12 rows, one chunk written", _call, ("links",), {"dataset": "packed"}, M,
     "packed"),
    ("load_cloud: HDF5 dataset written in part", _call, ("links",), {"dataset": "partial"}, D, "partial"),
    ("load_cloud: HDF5 dataset an int", _call, ("links",), {"dataset": 3}, P, "dataset"),
    # other options
    ("load_cloud: file_format csv", _call, ("table",), {"file_format": "csv"}, P, "file_format"),
    ("load_cloud: file_format list", _call, ("table",), {"file_format": ["fits"]}, P, "file_format"),
    ("load_cloud: file_format hdf5 on a FITS file", _call, ("table",), {"file_format": "hdf5"}, D, "table.fits"),
    ("load_cloud: drop_missing string", _call, ("table",), {"columns": XY, "drop_missing": "yes"}, P,
     "drop_missing"),
    ("load_cloud: drop_missing on a CSV", _call, ("csv",), {"drop_missing": True}, P, "drop_missing"),
    ("load_cloud: delimiter with a FITS file", _call, ("table",), {"columns": XY, "delimiter": ","}, P, "delimiter"),
    ("load_cloud: unit empty", _call, ("table",), {"columns": XY, "unit": ""}, P, "unit"),
    # sky positions
    ("load_cloud: sky unknown kind", _call, ("sky_deg",), {"columns": SKY3, "sky": "distance"}, P, "sky"),
    ("load_cloud: sky a number", _call, ("sky_deg",), {"columns": SKY3, "sky": 3}, P, "sky"),
    ("load_cloud: sky mapping with an unknown key", _call, ("sky_deg",),
     {"columns": SKY3, "sky": {"distance": "redshift", "frame": "icrs"}}, P, "sky"),
    ("load_cloud: sky with two columns", _call, ("sky_deg",), {"columns": ["ra", "dec"], "sky": "redshift"},
     D, "columns"),
    ("load_cloud: negative parallax", _call, ("sky_deg",), {"columns": ["ra", "dec", "parallax"], "sky": "parallax"},
     D, "parallax"),
    ("load_cloud: parallax column in arcsec", _call, ("sky_deg",),
     {"columns": ["ra", "dec", "plx_arcsec"], "sky": "parallax"}, D, "arcsec"),
    ("load_cloud: redshift NaN", _call, ("sky_bad",), {"columns": ["ra", "good_dec", "z"], "sky": "redshift"},
     D, "'z'"),
    ("load_cloud: Dec above 90", _call, ("sky_bad",), {"columns": ["ra", "dec", "z"], "sky": "redshift",
                                                       "drop_missing": True}, D, "dec"),
    ("load_cloud: radians stated, file says degrees", _call, ("sky_deg",),
     {"columns": SKY3, "sky": {"distance": "redshift", "angle_unit": "rad"}}, D, "angle_unit"),
    ("load_cloud: radians stated, degrees in the values", _call, ("sky_bad",),
     {"columns": ["ra", "good_dec", "z"], "sky": {"distance": "redshift", "angle_unit": "rad"}, "drop_missing": True},
     D, "dec"),
    ("load_cloud: angle_unit grad", _call, ("sky_deg",),
     {"columns": SKY3, "sky": {"distance": "redshift", "angle_unit": "grad"}}, P, "angle_unit"),
    ("load_cloud: unknown cosmology name", _call, ("sky_deg",),
     {"columns": SKY3, "sky": {"distance": "redshift", "cosmology": "Planck99"}}, P, "cosmology"),
    ("load_cloud: cosmology text malformed", _call, ("sky_deg",),
     {"columns": SKY3, "sky": {"distance": "redshift", "cosmology": "H0=seventy,Om0=0.3"}}, P, "cosmology"),
    ("load_cloud: cosmology H0 negative", _call, ("sky_deg",),
     {"columns": SKY3, "sky": {"distance": "redshift", "cosmology": "H0=-70,Om0=0.3"}}, P, "cosmology"),
    ("load_cloud: redshift 1e300", _call, ("sky_bad",),
     {"columns": ["ra", "good_dec", "huge_z"], "sky": "redshift"}, D, "redshift"),
    ("load_cloud: little_h string", _call, ("sky_deg",),
     {"columns": SKY3, "sky": {"distance": "redshift", "little_h": "yes"}}, P, "little_h"),
    ("load_cloud: cosmology with parallax", _call, ("sky_deg",),
     {"columns": ["ra", "dec", "parallax"], "sky": {"distance": "parallax", "cosmology": "Planck18"}}, P, "cosmology"),
    ("load_cloud: unit other than the sky's", _call, ("sky_deg",), {"columns": SKY3, "sky": "redshift", "unit": "km"},
     P, "unit"),
]


@pytest.mark.parametrize("make, args, options, error, needle", [c[1:] for c in CASES], ids=[c[0] for c in CASES])
def test_load_cloud_refuses_hostile_catalogues(files, make, args, options, error, needle):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # astropy's and h5py's own warnings about damaged files
        with pytest.raises(error) as caught:
            make(files, *args, **options)()
    assert needle in str(caught.value), str(caught.value)
    assert not isinstance(caught.value, RecursionError)


@pytest.mark.silent
@pytest.mark.entry("load_cloud")
def test_ra_outside_0_360_wraps_to_the_same_positions(files):
    """RA is an angle: RA + 360 deg is the same direction (documented), so the positions are identical."""
    plain = tdakit.load_cloud(files["sky_deg"], columns=SKY3, sky="redshift")
    with fits.open(files["sky_bad"]) as handle:
        np.testing.assert_allclose(handle[1].data["ra"] - 360.0, fits.getdata(files["sky_deg"])["ra"])
    shifted = tdakit.load_cloud(files["sky_bad"], columns=["ra", "good_dec", "z"], sky="redshift",
                                drop_missing=True)
    keep = np.ones(N, dtype=bool)
    keep[11] = False  # the row whose redshift is NaN
    # the z columns differ; compare directions only
    unit_a = plain.points[keep] / np.linalg.norm(plain.points[keep], axis=1, keepdims=True)
    unit_b = shifted.points / np.linalg.norm(shifted.points, axis=1, keepdims=True)
    np.testing.assert_allclose(unit_a, unit_b, atol=1e-12)


@pytest.mark.entry("load_cloud")
@pytest.mark.parametrize("text, kept", [
    ("x" + " <= x" * 399, lambda ids: ids >= 0),
    (" or ".join(["id > 55"] * 180), lambda ids: ids > 55),
    ("(" * 45 + "id < 3" + ")" * 45 + " or id > 57", lambda ids: (ids < 3) | (ids > 57))],
    ids=["load_cloud: where of 399 chained comparisons", "load_cloud: where of 180 ors",
         "load_cloud: where in 45 parentheses"])
def test_long_filters_read_the_rows_numpy_keeps(files, text, kept):
    """Filters up to the length limit are read and evaluated without recursion, keeping the rows numpy keeps."""
    cloud = tdakit.load_cloud(files["table"], columns=XY, where=text)
    data = fits.getdata(files["table"])
    keep = kept(np.asarray(data["id"]))
    np.testing.assert_array_equal(cloud.points, np.column_stack([data["x"], data["y"]])[keep])


@pytest.mark.hang
@pytest.mark.entry("parse_where")
@pytest.mark.parametrize("text", ["x" + " < x" * 499, " and ".join(["x > 1"] * 199), "(" * 49 + "x > 1" + ")" * 49],
                         ids=["parse_where: long chain", "parse_where: long and", "parse_where: deep parentheses"])
def test_long_filters_within_the_limits_evaluate_without_recursion(text):
    rows = parse_where(text)
    result = rows.evaluate({"x": np.array([0.5, 2.0, 3.0])})
    assert result.dtype == bool and result.shape == (3,)


# -- the coordinate functions ------------------------------------------------------------------------------
RA, DEC = np.array([10.0, 20.0, 30.0]), np.array([0.0, 5.0, -5.0])
COORDINATES = [
    ("sky_to_unit_vectors: ra of strings", lambda: sky_to_unit_vectors(["a", "b"], [0, 0]), P, "ra"),
    ("sky_to_unit_vectors: complex ra", lambda: sky_to_unit_vectors([1 + 1j], [0.0]), P, "ra"),
    ("sky_to_unit_vectors: dec shorter than ra", lambda: sky_to_unit_vectors(RA, DEC[:2]), D, "dec"),
    ("sky_to_unit_vectors: 2-D ra", lambda: sky_to_unit_vectors(RA[None, :], DEC[None, :]), D, "ra"),
    ("sky_to_unit_vectors: scalar ra", lambda: sky_to_unit_vectors(1.0, 0.0), D, "ra"),
    ("sky_to_unit_vectors: dec -91", lambda: sky_to_unit_vectors([0.0], [-91.0]), D, "dec"),
    ("sky_to_unit_vectors: dec above pi/2 in radians", lambda: sky_to_unit_vectors([0.0], [1.6], angle_unit="rad"),
     D, "dec"),
    ("sky_to_unit_vectors: ra inf", lambda: sky_to_unit_vectors([np.inf], [0.0]), D, "ra"),
    ("sky_to_unit_vectors: angle_unit DEG", lambda: sky_to_unit_vectors(RA, DEC, angle_unit="DEG"), P, "angle_unit"),
    ("sky_to_unit_vectors: angle_unit None", lambda: sky_to_unit_vectors(RA, DEC, angle_unit=None), P, "angle_unit"),
    ("parallax_to_cartesian: negative parallax", lambda: parallax_to_cartesian(RA, DEC, [1.0, -2.0, 3.0]),
     D, "parallax"),
    ("parallax_to_cartesian: zero parallax", lambda: parallax_to_cartesian(RA, DEC, [1.0, 0.0, 3.0]), D, "parallax"),
    ("parallax_to_cartesian: NaN parallax", lambda: parallax_to_cartesian(RA, DEC, [1.0, np.nan, 3.0]),
     D, "parallax"),
    ("parallax_to_cartesian: parallax of other length", lambda: parallax_to_cartesian(RA, DEC, [1.0]), D,
     "parallax"),
    ("comoving_distance: negative redshift", lambda: comoving_distance([0.1, -0.01]), D, "redshift"),
    ("comoving_distance: infinite redshift", lambda: comoving_distance([np.inf]), D, "redshift"),
    ("comoving_distance: redshift 1e300", lambda: comoving_distance([0.1, 1e300]), D, "redshift"),
    ("comoving_distance: cosmology a number", lambda: comoving_distance([0.1], cosmology=42), P, "cosmology"),
    ("comoving_distance: cosmology H0 NaN", lambda: comoving_distance([0.1], cosmology="H0=nan,Om0=0.3"), P,
     "cosmology"),
    ("comoving_distance: cosmology H0 zero", lambda: comoving_distance([0.1], cosmology="H0=0,Om0=0.3"), P,
     "cosmology"),
    ("comoving_distance: cosmology H0 inf", lambda: comoving_distance([0.1], cosmology="H0=inf,Om0=0.3"), P,
     "cosmology"),
    ("comoving_distance: cosmology H0 1e400", lambda: comoving_distance([0.1], cosmology="H0=1e400,Om0=0.3"), P,
     "cosmology"),
    ("comoving_distance: cosmology Tcmb0 negative", lambda: comoving_distance(
        [0.1], cosmology="H0=70,Om0=0.3,Tcmb0=-3"), P, "cosmology"),
    ("comoving_distance: cosmology Ode0 NaN", lambda: comoving_distance([0.1], cosmology="H0=70,Om0=0.3,Ode0=nan"),
     P, "cosmology"),
    ("comoving_distance: cosmology without big bang", lambda: comoving_distance(
        [5.0], cosmology="H0=70,Om0=0.1,Ode0=2"), P, "cosmology"),
    ("comoving_distance: cosmology key twice", lambda: comoving_distance(
        [0.1], cosmology="H0=70,Om0=0.3,H0=50"), P, "cosmology"),
    ("comoving_distance: cosmology H0 a bool", lambda: comoving_distance([0.1], cosmology={"H0": True, "Om0": 0.3}),
     P, "cosmology"),
    ("comoving_distance: cosmology H0 a list", lambda: comoving_distance([0.1], cosmology={"H0": [70, 80],
                                                                                          "Om0": 0.3}),
     P, "cosmology"),
    ("comoving_distance: cosmology without Om0", lambda: comoving_distance([0.1], cosmology="H0=70"), P, "cosmology"),
    ("comoving_distance: cosmology empty text", lambda: comoving_distance([0.1], cosmology=""), P, "cosmology"),
    ("comoving_distance: little_h 1", lambda: comoving_distance([0.1], little_h=1), P, "little_h"),
    ("redshift_to_cartesian: redshift of other length", lambda: redshift_to_cartesian(RA, DEC, [0.1]), D,
     "redshift"),
    ("redshift_to_cartesian: cosmology a list", lambda: redshift_to_cartesian(RA, DEC, [0.1] * 3,
                                                                              cosmology=["Planck18"]),
     P, "cosmology"),
    ("cosmology_record: unknown name", lambda: cosmology_record("Marrowfield26"), P, "cosmology"),
    ("cosmology_record: None", lambda: cosmology_record(None), P, "cosmology"),
    ("SkyConversion: distance unknown", lambda: SkyConversion("luminosity"), P, "distance"),
    ("SkyConversion: little_h with parallax", lambda: SkyConversion("parallax", little_h=True), P, "little_h"),
]


@pytest.mark.parametrize("call, error, needle", [c[1:] for c in COORDINATES], ids=[c[0] for c in COORDINATES])
def test_coordinate_functions_refuse_hostile_input(call, error, needle):
    with pytest.raises(error) as caught:
        call()
    assert needle in str(caught.value), str(caught.value)
