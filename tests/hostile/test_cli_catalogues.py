"""Hostile values of the catalogue, sky, scheduler and memory flags of ``tdakit analyze`` and ``tdakit study``, and
``tdakit config-keys`` with arguments: exit code 1 with one line naming the option or file (2 for argparse's usage
errors), never a traceback, and a bad scheduler address refused within seconds.

The catalogues are invented (``tdakit.shapes`` and numpy random numbers) and written with astropy, h5py, pyarrow.
"""

import numpy as np
import pytest

from tdakit import shapes
from tests.helpers import assert_refused, cli

fits = pytest.importorskip("astropy.io.fits")
h5py = pytest.importorskip("h5py")
pq = pytest.importorskip("pyarrow.parquet")
pa = pytest.importorskip("pyarrow")

N = 80


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hostile_cli_catalogues")
    rng = np.random.default_rng(29)
    ring = shapes.circle(N, noise=0.05, rng=4)
    z = rng.uniform(0.01, 0.2, N)
    columns = {"x": ring[:, 0], "y": ring[:, 1], "ra": rng.uniform(0, 360, N), "dec": rng.uniform(-80, 80, N),
               "z": z, "parallax": rng.uniform(1, 4, N), "flag": (rng.random(N) > 0.5).astype(np.int16)}
    units = {"ra": "deg", "dec": "deg", "parallax": "mas"}
    fits.BinTableHDU.from_columns([fits.Column(name=k, format="D" if k != "flag" else "I", array=v,
                                               unit=units.get(k)) for k, v in columns.items()],
                                  name="HALOS").writeto(folder / "halos.fits")
    with h5py.File(folder / "halos.h5", "w") as handle:
        group = handle.create_group("survey")
        for name in ("x", "y"):
            group[name] = columns[name]
        handle["survey_copy"] = ring
        handle["dangling"] = h5py.SoftLink("/no/such/table")
    pq.write_table(pa.table({"x": ring[:, 0], "y": ring[:, 1], "tags": pa.array([[1, 2]] * N)}),
                   folder / "halos.parquet")
    np.savetxt(folder / "halos.csv", ring, delimiter=",", header="x,y", comments="")
    (folder / "broken.fits").write_bytes((folder / "halos.fits").read_bytes()[:4000])
    (folder / "study.toml").write_text('[input]\nfile = "halos.fits"\ncolumns = ["x", "y"]\n\n[study]\n'
                                       'methods = ["maxmin"]\ncounts = [10]\nn_seeds = 1\n')
    return folder


FAST = ["--landmarks", "20", "--complex", "rips", "--band", "bootstrap", "--n-boot", "8", "--seed", "1",
        "--no-figures", "--quiet"]
XY = ["--columns", "x,y"]
SKY = ["--columns", "ra,dec,z"]

ANALYZE = [
    # --where
    ("halos.fits", [*XY, "--where", "__import__('os').system('true')"], "'where'"),
    ("halos.fits", [*XY, "--where", "x.real > 0"], "x.real"),
    ("halos.fits", [*XY, "--where", "open('/etc/passwd')"], "'where'"),
    ("halos.fits", [*XY, "--where", "mass > 3"], "mass"),
    ("halos.fits", [*XY, "--where", "x > 99"], "where"),
    ("halos.fits", [*XY, "--where", "(" * 300 + "x > 0" + ")" * 300], "nested"),
    ("halos.fits", [*XY, "--where", "x > 0 and " * 400 + "x > 0"], "2000 characters"),
    ("halos.fits", [*XY, "--where", ""], "'where'"),
    ("halos.csv", ["--where", "x > 0"], "'where'"),
    # --dataset, --file-format
    ("halos.fits", [*XY, "--dataset", "7"], "'dataset'"),
    ("halos.fits", [*XY, "--dataset", "PRIMARY"], "'dataset'"),
    ("halos.h5", [*XY, "--dataset", "dangling"], "'dataset'"),
    ("halos.h5", [*XY], "'dataset'"),
    ("halos.h5", [*XY, "--dataset", "survey/z"], "'dataset'"),
    ("halos.parquet", [*XY, "--dataset", "x"], "'dataset'"),
    ("halos.csv", ["--dataset", "survey"], "'dataset'"),
    ("halos.csv", ["--file-format", "hdf5"], "halos.csv"),
    ("halos.fits", [*XY, "--file-format", "parquet"], "halos.fits"),
    ("broken.fits", [*XY], "broken.fits"),
    ("halos.parquet", ["--columns", "x,tags"], "tags"),
    # --unit, --drop-missing
    ("halos.fits", [*XY, "--unit", ""], "'unit'"),
    ("halos.fits", [*XY, "--unit", "x" * 200], "'unit'"),
    ("halos.csv", ["--drop-missing"], "drop_missing"),
    # --sky, --angle-unit, --cosmology, --little-h
    ("halos.fits", ["--columns", "ra,dec", "--sky", "redshift"], "three columns"),
    ("halos.fits", [*SKY, "--sky", "redshift", "--angle-unit", "rad"], "angle_unit"),
    ("halos.fits", [*SKY, "--angle-unit", "deg"], "--angle-unit"),
    ("halos.fits", [*SKY, "--cosmology", "Planck18"], "--cosmology"),
    ("halos.fits", [*SKY, "--little-h"], "--little-h"),
    ("halos.fits", [*SKY, "--sky", "redshift", "--cosmology", "Planck99"], "'cosmology'"),
    ("halos.fits", [*SKY, "--sky", "redshift", "--cosmology", "H0=seventy,Om0=0.3"], "'cosmology'"),
    ("halos.fits", [*SKY, "--sky", "redshift", "--cosmology", "H0=-70,Om0=0.3"], "'cosmology'"),
    ("halos.fits", [*SKY, "--sky", "redshift", "--cosmology", "H0=inf,Om0=0.3"], "'cosmology'"),
    ("halos.fits", [*SKY, "--sky", "redshift", "--cosmology", "H0=70"], "'cosmology'"),
    ("halos.fits", ["--columns", "ra,dec,parallax", "--sky", "parallax", "--little-h"], "little_h"),
    ("halos.fits", ["--columns", "ra,dec,parallax", "--sky", "parallax", "--cosmology", "WMAP9"], "cosmology"),
    ("halos.fits", ["--columns", "ra,dec,x", "--sky", "parallax"], "parallax"),
    ("halos.fits", [*SKY, "--sky", "redshift", "--unit", "pc"], "'unit'"),
    # --memory-budget
    ("halos.fits", [*XY, "--memory-budget="], "memory_budget"),
    ("halos.fits", [*XY, "--memory-budget=8XB"], "memory_budget"),
    ("halos.fits", [*XY, "--memory-budget=-1GB"], "memory_budget"),
    ("halos.fits", [*XY, "--memory-budget=nan"], "memory_budget"),
    ("halos.fits", [*XY, "--memory-budget=1e400GB"], "memory_budget"),
    ("halos.fits", [*XY, "--memory-budget=0"], "memory_budget"),
    # --n-boot / --replicates
    ("halos.fits", [*XY, "--n-boot", "5", "--replicates", "6"], "--n-boot 5 and --replicates 6"),
    ("halos.fits", [*XY, "--replicates", "0", "--n-boot", "0"], ("n_boot", "--n-boot")),
    # --scheduler
    ("halos.fits", [*XY, "--scheduler", ""], "--scheduler must be"),
    ("halos.fits", [*XY, "--scheduler", "tcp://127.0.0.1:1"], "within 3 s"),
    ("halos.fits", [*XY, "--scheduler", "tcp://127.0.0.1:99999"], "65535"),
    ("halos.fits", [*XY, "--scheduler", "tcp://no-such-host.invalid:8786"], "no-such-host.invalid"),
    ("halos.fits", [*XY, "--scheduler", "nowhere"], "--scheduler must be"),
]


def _args(extra):
    args = list(FAST)
    for flag in extra:  # the hostile value replaces FAST's value of the same option
        if flag.startswith("--") and flag in args and flag not in ("--no-figures", "--quiet"):
            position = args.index(flag)
            del args[position:position + 2]
    return args


@pytest.mark.entry("tdakit analyze")
@pytest.mark.parametrize("name, extra, needle", ANALYZE, ids=[f"{n} {' '.join(a)}"[:90] for n, a, _ in ANALYZE])
def test_analyze_refuses_bad_catalogue_options(data, tmp_path, capsys, monkeypatch, name, extra, needle):
    from tdakit.distributed import scheduler

    monkeypatch.setattr(scheduler, "CONNECT_TIMEOUT", "90s")  # the probe must refuse, not dask's timeout
    result = cli(capsys, "analyze", data / name, *_args(extra), *extra, "--out", tmp_path / "out")
    assert_refused(result, needle)
    assert not (tmp_path / "out" / f"{name.split('.')[0]}.tdkrun").exists()


USAGE = [
    ["--file-format", "xml"],
    ["--sky", "galactic"],
    ["--angle-unit", "grad"],
    ["--replicates", "many"],
    ["--n-boot", "1.5"],
    ["--drop-missing", "yes"],
    ["--little-h", "1"],
]


@pytest.mark.entry("tdakit analyze")
@pytest.mark.parametrize("extra", USAGE, ids=[" ".join(a) for a in USAGE])
def test_analyze_usage_errors_exit_2(data, tmp_path, capsys, extra):
    result = cli(capsys, "analyze", data / "halos.fits", *XY, *extra, "--out", tmp_path / "out")
    assert_refused(result, extra[0] if extra[0] != "--drop-missing" and extra[0] != "--little-h" else extra[1],
                   code=2)


STUDY = [
    (["--memory-budget="], "memory_budget"),
    (["--memory-budget=8XB"], "memory_budget"),
    (["--memory-budget=-1GB"], "memory_budget"),
    (["--memory-budget=nan"], "memory_budget"),
    (["--memory-budget=1e400GB"], "memory_budget"),
]


@pytest.mark.entry("tdakit study")
@pytest.mark.parametrize("extra, needle", STUDY, ids=[" ".join(a) for a, _ in STUDY])
def test_study_refuses_bad_memory_budgets(data, tmp_path, capsys, extra, needle):
    result = cli(capsys, "study", data / "study.toml", *extra, "--no-figures", "--quiet", "--out", tmp_path / "out")
    assert_refused(result, needle)


@pytest.mark.entry("tdakit study")
def test_study_config_with_a_bad_where_is_refused(data, tmp_path, capsys):
    config = tmp_path / "where.toml"
    config.write_text(f'[input]\nfile = "{data / "halos.fits"}"\ncolumns = ["x", "y"]\nwhere = "exec(1)"\n\n'
                      '[study]\nmethods = ["maxmin"]\ncounts = [10]\nn_seeds = 1\n')
    assert_refused(cli(capsys, "study", config, "--no-figures", "--quiet", "--out", tmp_path / "out"), "'where'")


CONFIG_KEYS = [["extra"], ["--where", "x > 0"], ["--memory-budget", "8GB"], ["analyze"]]


@pytest.mark.entry("tdakit config-keys")
@pytest.mark.parametrize("extra", CONFIG_KEYS, ids=[" ".join(a) for a in CONFIG_KEYS])
def test_config_keys_refuses_arguments(capsys, extra):
    assert_refused(cli(capsys, "config-keys", *extra), "unrecognized arguments", code=2)


@pytest.mark.entry("tdakit config-keys")
def test_config_keys_lists_the_catalogue_keys(capsys):
    status, out, err = cli(capsys, "config-keys")
    assert status == 0 and not err
    for key in ("where", "dataset", "file_format", "drop_missing", "sky", "angle_unit", "cosmology", "little_h"):
        assert key in out


CONVERT = [
    (["halos.csv", "out.npy"], "FITS, HDF5 or Parquet"),
    (["halos.fits", "out.csv"], "ending in .npy"),
    (["halos.fits", "no/such/folder/out.npy"], "folder"),
    (["halos.fits", "out.npy", "--columns", "x,nope"], "nope"),
    (["halos.fits", "out.npy", "--columns", "x,y", "--sky", "parallax"], "three columns"),
    (["halos.fits", "out.npy", "--columns", "ra,dec,parallax", "--sky", "parallax", "--unit", "Mpc"], "'unit'"),
    (["halos.fits", "out.npy", "--where", "__import__('os')"], "'where'"),
    (["halos.fits", "out.npy", "--where", "x > 1e9"], "gives 0 row"),
    (["broken.fits", "out.npy"], "broken.fits"),
    (["halos.h5", "out.npy", "--dataset", "dangling"], "dangling"),
    (["halos.parquet", "out.npy", "--columns", "tags"], "tags"),
    (["missing.fits", "out.npy"], "missing.fits"),
    (["halos.fits", "out.npy", "--little-h"], "--little-h"),
]


@pytest.mark.entry("tdakit convert")
@pytest.mark.parametrize("args, needle", CONVERT, ids=[" ".join(a) for a, _ in CONVERT])
def test_convert_refuses_with_one_line_and_writes_nothing(data, tmp_path, capsys, monkeypatch, args, needle):
    monkeypatch.chdir(tmp_path)
    source = args[0] if args[0] == "missing.fits" else data / args[0]
    assert_refused(cli(capsys, "convert", source, *args[1:]), needle)
    assert list(tmp_path.iterdir()) == []


@pytest.mark.entry("tdakit convert")
def test_convert_writes_the_points_analyze_reads(data, tmp_path, capsys):
    import tdakit

    status, out, err = cli(capsys, "convert", data / "halos.fits", tmp_path / "sky.npy", "--columns", "ra,dec,z",
                           "--sky", "redshift", "--where", "z < 0.15")
    assert status == 0 and "sky.npy.json" in out, err
    cloud = tdakit.load_cloud(data / "halos.fits", columns=["ra", "dec", "z"], sky="redshift", where="z < 0.15")
    np.testing.assert_array_equal(np.load(tmp_path / "sky.npy"), cloud.points)
