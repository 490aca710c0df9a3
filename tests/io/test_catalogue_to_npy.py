"""catalogue_to_npy: a catalogue's chosen rows written to a .npy file chunk by chunk, equal to load_cloud's points."""

import json
import subprocess
import sys
import textwrap

import numpy as np
import pytest
from astropy.io import fits
from astropy.table import MaskedColumn, Table

import tdakit
from tdakit.errors import InvalidDataError, InvalidParameterError
from tdakit.io import catalogue_to_npy
from tdakit.scenarios import marrowfield_halos
from tests.io.test_catalogues import write_fits, write_hdf5_group, write_parquet


@pytest.fixture(scope="module")
def halos():
    positions, masses = marrowfield_halos(900, rng=5)
    return {"x": positions[:, 0], "y": positions[:, 1], "z": positions[:, 2], "mass": masses}


@pytest.mark.parametrize("fmt", ["fits", "h5", "parquet"])
@pytest.mark.parametrize("where", [None, "mass > 1.1 and x < 60"])
def test_npy_holds_exactly_the_points_load_cloud_reads(tmp_path, halos, fmt, where):
    writer = {"fits": write_fits, "parquet": write_parquet}.get(fmt)
    path = tmp_path / f"halos.{fmt}"
    if writer is None:
        write_hdf5_group(path, "halos", halos, units={"x": "Mpc/h", "y": "Mpc/h", "z": "Mpc/h"})
    else:
        writer(path, halos, units={"x": "Mpc/h", "y": "Mpc/h", "z": "Mpc/h"})
    cloud = tdakit.load_cloud(path, columns=["x", "y", "z"], where=where)
    record = catalogue_to_npy(path, tmp_path / "out.npy", columns=["x", "y", "z"], where=where, chunk_rows=97)
    written = np.load(tmp_path / "out.npy")
    np.testing.assert_array_equal(written, cloud.points)
    assert record["n_rows"] == cloud.n_points and record["unit"] == "Mpc/h" == cloud.unit
    assert record["source_sha256"] == cloud.source_checksum
    assert json.loads((tmp_path / "out.npy.json").read_text()) == record
    assert sorted(p.name for p in tmp_path.iterdir()) == sorted([path.name, "out.npy", "out.npy.json"])


def test_sky_conversion_equals_load_cloud_for_redshifts_and_parallaxes(tmp_path):
    rng = np.random.default_rng(2)
    n = 9000  # above the 8,193 redshifts from which comoving distances go through a spline
    ra, dec = rng.uniform(0, 360, n), np.degrees(np.arcsin(rng.uniform(-1, 1, n)))
    z, parallax = rng.uniform(0.01, 0.3, n), rng.uniform(1.0, 20.0, n)
    write_parquet(tmp_path / "sky.parquet", {"ra": ra, "dec": dec, "z": z, "plx": parallax})
    for columns, sky in ((["ra", "dec", "z"], {"distance": "redshift", "little_h": True}),
                         (["ra", "dec", "plx"], "parallax")):
        cloud = tdakit.load_cloud(tmp_path / "sky.parquet", columns=columns, sky=sky)
        record = catalogue_to_npy(tmp_path / "sky.parquet", tmp_path / "xyz.npy", columns=columns, sky=sky,
                                  chunk_rows=1000)
        np.testing.assert_array_equal(np.load(tmp_path / "xyz.npy"), cloud.points)
        assert record["columns"] == ["x", "y", "z"] and record["unit"] == cloud.unit
        assert record["sky"]["distance"] == (sky if isinstance(sky, str) else sky["distance"])


def test_drop_missing_counts_exactly_and_missing_values_are_refused(tmp_path):
    table = Table()
    table["a"] = np.arange(40, dtype=float)
    table["a"][5] = np.nan
    table["n"] = MaskedColumn(np.arange(40), mask=np.isin(np.arange(40), [3, 17]), fill_value=-99)
    table.write(tmp_path / "masked.fits")
    with pytest.raises(InvalidDataError, match=r"Column 'a' .* row 5"):
        catalogue_to_npy(tmp_path / "masked.fits", tmp_path / "m.npy")
    assert not (tmp_path / "m.npy").exists() and len(list(tmp_path.iterdir())) == 1  # no partial file left
    record = catalogue_to_npy(tmp_path / "masked.fits", tmp_path / "m.npy", columns=["a", "n"], drop_missing=True,
                              chunk_rows=7)
    expected = tdakit.load_cloud(tmp_path / "masked.fits", columns=["a", "n"], drop_missing=True).points
    np.testing.assert_array_equal(np.load(tmp_path / "m.npy"), expected)
    assert record["n_rows"] == 37 and record["n_dropped_missing"] == 3


def test_bad_requests_name_the_parameter(tmp_path, halos):
    write_fits(tmp_path / "h.fits", halos)
    with pytest.raises(InvalidParameterError, match="'destination' parameter of catalogue_to_npy"):
        catalogue_to_npy(tmp_path / "h.fits", tmp_path / "out.csv")
    with pytest.raises(InvalidParameterError, match="'columns' parameter of catalogue_to_npy"):
        catalogue_to_npy(tmp_path / "h.fits", tmp_path / "out.npy", columns=["x", "nope"])
    with pytest.raises(InvalidParameterError, match="'columns' parameter of catalogue_to_npy .* three columns"):
        catalogue_to_npy(tmp_path / "h.fits", tmp_path / "out.npy", columns=["x", "y"], sky="parallax")
    with pytest.raises(InvalidDataError, match="gives 0 row"):
        catalogue_to_npy(tmp_path / "h.fits", tmp_path / "out.npy", where="x < -1e9")
    assert sorted(p.name for p in tmp_path.iterdir()) == ["h.fits"]


_MEMORY = textwrap.dedent("""
    import json, sys, tracemalloc
    import astropy.io.fits  # the format library's first-use import is not the conversion's memory
    from tdakit.io import catalogue_to_npy
    tracemalloc.start()
    catalogue_to_npy(sys.argv[1], sys.argv[2], columns=["x", "y", "z"], where=sys.argv[3] or None)
    print(json.dumps(tracemalloc.get_traced_memory()[1]))
""")


def test_conversion_holds_a_few_chunks_not_the_table(tmp_path):
    # 2 million rows x 3 chosen columns = 48 MB written; the process itself may trace only a few chunks (< 10 %;
    # measured 2.1 MB without the filter).
    rng = np.random.default_rng(4)
    columns = {name: rng.normal(size=2_000_000) for name in ("x", "y", "z", "w")}
    hdu = fits.BinTableHDU.from_columns([fits.Column(name=k, format="D", array=v) for k, v in columns.items()])
    hdu.writeto(tmp_path / "big.fits")
    del columns, hdu
    for where in ("", "w > -0.5"):
        result = subprocess.run([sys.executable, "-c", _MEMORY, str(tmp_path / "big.fits"), str(tmp_path / "b.npy"),
                                 where], capture_output=True, text=True, check=True)
        peak = json.loads(result.stdout)
        written = np.load(tmp_path / "b.npy", mmap_mode="r").nbytes
        assert peak < 0.1 * written, (where, peak, written)


def test_hostile_destinations_and_sources(tmp_path, halos):
    from tdakit.errors import DataFileNotFoundError

    write_fits(tmp_path / "h.fits", halos)
    (tmp_path / "folder.npy").mkdir()
    with pytest.raises(InvalidParameterError, match="'destination' .* a file path, not a folder"):
        catalogue_to_npy(tmp_path / "h.fits", tmp_path / "folder.npy")
    with pytest.raises(DataFileNotFoundError):
        catalogue_to_npy(tmp_path / "h.fits", tmp_path / "missing" / "out.npy")
    with pytest.raises(DataFileNotFoundError):
        catalogue_to_npy(tmp_path / "nothing.fits", tmp_path / "out.npy")
    with pytest.raises(InvalidParameterError, match="'destination'"):
        catalogue_to_npy(tmp_path / "h.fits", 42)
    old = np.arange(6.0).reshape(3, 2)
    np.save(tmp_path / "keep.npy", old)
    with pytest.raises(InvalidParameterError):
        catalogue_to_npy(tmp_path / "h.fits", tmp_path / "keep.npy", columns=["nope"])
    np.testing.assert_array_equal(np.load(tmp_path / "keep.npy"), old)  # a failed conversion leaves the old file
