"""Sky positions with parallax or redshift to Cartesian positions, checked against published definitions.

Each check names its source. The sky positions and distances are invented (random draws, a torus sampler).
"""

import json
import math
import subprocess
import sys

import numpy as np
import pytest
from astropy import units as u
from astropy.coordinates import Distance, SkyCoord
from astropy.cosmology import FlatLambdaCDM, Planck18
from astropy.table import Table
from hypothesis import given
from hypothesis import strategies as st
from scipy.integrate import quad

import tdakit
from tdakit.errors import InvalidDataError, InvalidParameterError
from tdakit.io import (
    SkyConversion,
    comoving_distance,
    cosmology_record,
    parallax_to_cartesian,
    redshift_to_cartesian,
    sky_to_unit_vectors,
)

SPEED_OF_LIGHT_KM_S = 299_792.458  # exact, by the SI definition of the metre (BIPM SI Brochure, 9th ed., 2019)


def sky(n, seed=0):
    rng = np.random.default_rng(seed)
    return rng.uniform(0, 360, n), np.degrees(np.arcsin(rng.uniform(-1, 1, n)))


# -- unit vectors -----------------------------------------------------------------------------------------
def test_unit_vectors_match_astropy_skycoord():
    # Reference: astropy.coordinates.SkyCoord(ra, dec).cartesian (unit sphere, ICRS axes).
    ra, dec = sky(500)
    expected = SkyCoord(ra=ra * u.deg, dec=dec * u.deg).cartesian.xyz.value.T
    np.testing.assert_allclose(sky_to_unit_vectors(ra, dec), expected, rtol=0, atol=1e-14)
    np.testing.assert_allclose(sky_to_unit_vectors(np.radians(ra), np.radians(dec), angle_unit="rad"), expected,
                               rtol=0, atol=1e-14)


@given(st.floats(-720, 720), st.floats(-90, 90))
def test_unit_vectors_have_unit_length_and_wrap_in_ra(ra, dec):
    vector = sky_to_unit_vectors([ra, ra + 360.0], [dec, dec])
    np.testing.assert_allclose(np.linalg.norm(vector, axis=1), 1.0, rtol=1e-12)
    np.testing.assert_allclose(vector[0], vector[1], atol=1e-12)


def test_angles_out_of_range_are_refused_never_guessed():
    with pytest.raises(InvalidDataError, match=r"'dec'.*outside \[-1.5708, 1.5708\] rad.*row 1"):
        sky_to_unit_vectors([0.1, 0.2], [0.3, 45.0], angle_unit="rad")  # degrees given as radians
    with pytest.raises(InvalidDataError, match=r"'dec'.*outside \[-90, 90\] deg"):
        sky_to_unit_vectors([0.0], [91.0])
    with pytest.raises(InvalidParameterError, match="'angle_unit'.*'deg', 'rad'"):
        sky_to_unit_vectors([0.0], [0.0], angle_unit="degrees")
    with pytest.raises(InvalidDataError, match="'ra'.*not finite"):
        sky_to_unit_vectors([np.nan], [0.0])


# -- parallax ---------------------------------------------------------------------------------------------
def test_parallax_distance_follows_the_definition_of_the_parsec():
    # IAU 2015 Resolution B2: 1 pc = 648000/pi au exactly. A star at distance d (au) shows a parallax p with
    # tan(p) = 1 au / d, so d[pc] = 1 / tan(p) * pi / 648000, which is 1000 / p[mas] up to the small-angle term
    # (relative size p^2 / 3, below 1e-11 for p < 1 arcsec).
    parallax_mas = np.array([1000.0, 1.0, 768.0, 3.7, 0.05])
    p_radians = parallax_mas / 1000.0 / 3600.0 * math.pi / 180.0
    exact_pc = 1.0 / np.tan(p_radians) * math.pi / 648_000.0
    points = parallax_to_cartesian(np.zeros(5), np.full(5, 90.0), parallax_mas)
    np.testing.assert_allclose(points[:, 2], exact_pc, rtol=1e-10)
    assert points[0, 2] == pytest.approx(1.0, rel=1e-15) and points[1, 2] == pytest.approx(1000.0, rel=1e-15)


def test_parallax_positions_match_astropy_distance_and_skycoord():
    # Reference: astropy's Distance(parallax=...) and SkyCoord(..., distance=...).cartesian, in pc.
    ra, dec = sky(300, seed=1)
    parallax = np.random.default_rng(2).uniform(0.2, 50.0, 300)
    coords = SkyCoord(ra=ra * u.deg, dec=dec * u.deg, distance=Distance(parallax=parallax * u.mas))
    np.testing.assert_allclose(parallax_to_cartesian(ra, dec, parallax), coords.cartesian.xyz.to_value(u.pc).T,
                               rtol=1e-12)


def test_non_positive_parallaxes_are_counted_and_refused():
    with pytest.raises(InvalidDataError, match=r"3 value\(s\) <= 0 or not finite \(first at row 1"):
        parallax_to_cartesian([0, 1, 2, 3], [0, 0, 0, 0], [1.0, 0.0, -2.0, np.nan])


# -- redshift ---------------------------------------------------------------------------------------------
def hogg_comoving_distance(z, hubble, matter):
    """Hogg (1999), "Distance measures in cosmology", eqs. 14-15 for a flat model without radiation:
    D_C = (c / H0) * integral_0^z dz' / sqrt(Om (1 + z')^3 + 1 - Om), integrated here with scipy's quad."""
    integral, _ = quad(lambda x: 1.0 / math.sqrt(matter * (1 + x) ** 3 + 1 - matter), 0.0, z, epsabs=0,
                       epsrel=1e-12)
    return SPEED_OF_LIGHT_KM_S / hubble * integral


@pytest.mark.parametrize("spec", ["H0=70,Om0=0.3", {"H0": 70, "Om0": 0.3}, "FlatLambdaCDM(H0=70, Om0=0.3)",
                                  FlatLambdaCDM(H0=70, Om0=0.3)])
def test_comoving_distance_matches_hogg_equation_15(spec):
    redshifts = np.array([0.0, 0.01, 0.1, 0.5, 1.0, 2.0, 3.0])
    expected = [hogg_comoving_distance(z, 70.0, 0.3) for z in redshifts]
    np.testing.assert_allclose(comoving_distance(redshifts, cosmology=spec), expected, rtol=1e-9, atol=1e-9)


def test_comoving_distance_spline_for_many_redshifts_matches_direct_values():
    # Many redshifts go through a cubic spline in log(1 + z); compare with astropy's direct evaluation and, for a
    # cosmology without radiation, with Hogg's eq. 15 integrated by quad.
    z = np.concatenate([np.random.default_rng(3).uniform(0, 20, 20_000), [0.0, 1e-6, 20.0]])
    np.testing.assert_allclose(comoving_distance(z), Planck18.comoving_distance(z).value, rtol=1e-7, atol=1e-9)
    flat = comoving_distance(z[:: 400], cosmology="H0=70,Om0=0.3")
    np.testing.assert_allclose(comoving_distance(z, cosmology="H0=70,Om0=0.3")[:: 400], flat, rtol=1e-9, atol=1e-9)
    np.testing.assert_allclose(flat, [hogg_comoving_distance(v, 70.0, 0.3) for v in z[:: 400]], rtol=1e-9,
                               atol=1e-9)


def test_little_h_scales_by_h_and_positions_use_the_distance():
    ra, dec = sky(50, seed=4)
    z = np.random.default_rng(5).uniform(0.01, 0.5, 50)
    mpc = redshift_to_cartesian(ra, dec, z, cosmology="WMAP9")
    mpc_h = redshift_to_cartesian(ra, dec, z, cosmology="WMAP9", little_h=True)
    np.testing.assert_allclose(mpc_h, mpc * 0.6932, rtol=1e-12)  # WMAP9 in astropy: H0 = 69.32 km/s/Mpc
    np.testing.assert_allclose(np.linalg.norm(mpc, axis=1), comoving_distance(z, cosmology="WMAP9"), rtol=1e-12)


def test_cosmology_record_names_the_parameters():
    record = cosmology_record("Planck18")
    # Planck Collaboration (2020), A&A 641, A6, Table 2 (TT,TE,EE+lowE+lensing+BAO): H0 = 67.66, Om0 = 0.3111
    # (from memory); astropy's Planck18 realisation uses H0 = 67.66 and Om0 = 0.30966 (its docs).
    assert record["name"] == "Planck18" and record["class"] == "FlatLambdaCDM"
    assert record["H0"] == pytest.approx(67.66) and record["Om0"] == pytest.approx(Planck18.Om0)
    # Tcmb0 = 2.7255 K (Fixsen 2009, ApJ 707, 916) and one massive neutrino of 0.06 eV, as in astropy's Planck18
    # realisation (its docs; from memory).
    assert record["Tcmb0"] == pytest.approx(2.7255) and record["m_nu"] == pytest.approx([0.0, 0.0, 0.06])
    assert json.loads(json.dumps(record)) == record
    custom = cosmology_record("H0=70,Om0=0.3,Ode0=0.6")
    assert custom["class"] == "LambdaCDM" and custom["Ode0"] == pytest.approx(0.6) and custom["name"] is None


def test_bad_cosmologies_and_redshifts_are_refused():
    with pytest.raises(InvalidParameterError, match="'cosmology'.*'Planck18'.*'WMAP9'"):
        comoving_distance([0.1], cosmology="Planck2099")
    with pytest.raises(InvalidParameterError, match="'cosmology'.*keys H0, Om0"):
        comoving_distance([0.1], cosmology={"H0": 70})
    with pytest.raises(InvalidParameterError, match="astropy refuses"):
        comoving_distance([0.1], cosmology="H0=70,Om0=-0.3")
    with pytest.raises(InvalidDataError, match=r"2 value\(s\) < 0 or not finite \(first at row 1"):
        comoving_distance([0.1, -0.01, np.inf])


# -- through load_cloud -----------------------------------------------------------------------------------
def write_sky_catalogue(path, n=400, angle_unit="deg"):
    ra, dec = sky(n, seed=6)
    rng = np.random.default_rng(7)
    table = Table({"ra": ra, "dec": dec, "parallax": rng.uniform(0.5, 10, n), "redshift": rng.uniform(0.01, 0.3, n)})
    table["ra"].unit = table["dec"].unit = angle_unit
    table["parallax"].unit = "mas"
    table.write(path)
    return table


def test_load_cloud_converts_parallax_and_redshift_and_records_the_cosmology(tmp_path):
    table = write_sky_catalogue(tmp_path / "sky.fits")
    ra, dec = np.asarray(table["ra"]), np.asarray(table["dec"])
    stars = tdakit.load_cloud(tmp_path / "sky.fits", columns=["ra", "dec", "parallax"], sky="parallax",
                              where="parallax > 1")
    keep = np.asarray(table["parallax"]) > 1
    np.testing.assert_allclose(stars.points, parallax_to_cartesian(ra[keep], dec[keep], table["parallax"][keep]),
                               rtol=1e-14)
    assert stars.unit == "pc" and stars.columns == ("x", "y", "z")
    galaxies = tdakit.load_cloud(tmp_path / "sky.fits", columns=["ra", "dec", "redshift"],
                                 sky={"distance": "redshift", "cosmology": "H0=70,Om0=0.3", "little_h": True})
    assert galaxies.unit == "Mpc/h"
    record = dict(galaxies.read_options)["sky"]
    assert record["cosmology"] == "H0=70,Om0=0.3" and record["cosmology_parameters"]["H0"] == 70.0
    assert record["cosmology_parameters"]["class"] == "FlatLambdaCDM" and record["astropy"]
    expected = 0.7 * np.array([hogg_comoving_distance(z, 70.0, 0.3) for z in table["redshift"]])
    np.testing.assert_allclose(np.linalg.norm(galaxies.points, axis=1), expected, rtol=1e-9)
    # The record goes through JSON (the run file) and back into load_cloud, as a rerun does.
    options = json.loads(json.dumps(dict(galaxies.read_options)))
    again = tdakit.load_cloud(tmp_path / "sky.fits", unit=galaxies.unit, **options)
    np.testing.assert_array_equal(again.points, galaxies.points)


def test_file_units_must_agree_with_the_stated_angle_unit(tmp_path):
    write_sky_catalogue(tmp_path / "rad.fits", angle_unit="rad")
    with pytest.raises(InvalidDataError, match="RA column is in 'rad'.*angle_unit='deg'"):
        tdakit.load_cloud(tmp_path / "rad.fits", columns=["ra", "dec", "parallax"], sky="parallax")
    with pytest.raises(InvalidDataError, match="'dec'.*outside"):  # the values were written in degrees
        tdakit.load_cloud(tmp_path / "rad.fits", columns=["ra", "dec", "parallax"],
                          sky=SkyConversion("parallax", angle_unit="rad"))
    with pytest.raises(InvalidDataError, match="exactly three columns"):
        tdakit.load_cloud(tmp_path / "rad.fits", columns=["ra", "dec"], sky="parallax")
    with pytest.raises(InvalidParameterError, match="'unit'.*'pc'"):
        tdakit.load_cloud(tmp_path / "rad.fits", columns=["ra", "dec", "parallax"], unit="kpc",
                          sky=SkyConversion("parallax", angle_unit="rad"))


def test_sky_conversion_of_arrays_and_text_files(tmp_path):
    ra, dec = sky(100, seed=8)
    z = np.random.default_rng(9).uniform(0.01, 0.2, 100)
    expected = redshift_to_cartesian(ra, dec, z)
    np.testing.assert_allclose(tdakit.load_cloud(np.column_stack([ra, dec, z]), sky="redshift").points, expected,
                               rtol=1e-14)
    np.savetxt(tmp_path / "sky.csv", np.column_stack([z, ra, dec]), delimiter=",", header="z,ra,dec", comments="",
               fmt="%.17g")
    cloud = tdakit.load_cloud(tmp_path / "sky.csv", columns=["ra", "dec", "z"], sky="redshift")
    np.testing.assert_allclose(cloud.points, expected, rtol=1e-14)
    assert dict(cloud.read_options)["sky"]["cosmology"] == "Planck18" and cloud.unit == "Mpc"


def test_sky_conversion_options_are_checked():
    with pytest.raises(InvalidParameterError, match="'distance'.*'parallax', 'redshift'"):
        SkyConversion("luminosity")
    with pytest.raises(InvalidParameterError, match="apply to distance='redshift' only"):
        SkyConversion("parallax", cosmology="Planck18")
    with pytest.raises(InvalidParameterError, match="'sky'"):
        tdakit.load_cloud(np.zeros((3, 3)), sky=42)


def test_recorded_parameters_that_no_longer_match_are_warned(tmp_path):
    write_sky_catalogue(tmp_path / "s.fits")
    record = SkyConversion("redshift").to_dict()
    record["cosmology_parameters"] = dict(record["cosmology_parameters"], H0=1.0)
    with pytest.warns(tdakit.errors.TdakitWarning, match="not the recorded"):
        tdakit.load_cloud(tmp_path / "s.fits", columns=["ra", "dec", "redshift"], sky=record)


def test_import_tdakit_does_not_load_astropy():
    code = "import sys, tdakit; print(','.join(m for m in ('astropy', 'h5py', 'pyarrow') if m in sys.modules))"
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert result.stdout.strip() == ""
