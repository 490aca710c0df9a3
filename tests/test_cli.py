import subprocess
import sys

import pytest


def run(*args, cwd):
    return subprocess.run([sys.executable, "-m", "tdakit", *args], capture_output=True, text=True,
                          cwd=cwd, timeout=300)


def test_demo_end_to_end(tmp_path):
    result = run("demo", "--out", str(tmp_path / "out"), "--n-boot", "10", "--no-figures", cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    # The demo runs tdakit's defaults: in three plain coordinates the kernel-density band, a confidence set that
    # finds the planted ring and the three loops of the periodic box (4 H1, measured) and the six node clusters.
    assert "Longest-lived loops" in result.stdout and "density band" in result.stdout
    assert "H1: strip height" in result.stdout and "significant 4" in result.stdout
    table = (tmp_path / "out" / "features.csv").read_text().splitlines()
    assert table[0].startswith("dimension,birth,death,persistence,status,significant,margin") and len(table) > 10


@pytest.mark.parametrize("args", [["demo", "--landmarks", "0"], ["demo", "--landmarks", "999999"]])
def test_bad_input_gives_one_line_and_exit_code(tmp_path, args):
    result = run(*args, "--out", str(tmp_path), cwd=tmp_path)
    assert result.returncode == 1
    assert result.stderr.startswith("tdakit: error: The 'n_landmarks' parameter")
    assert "Traceback" not in result.stderr


def test_unknown_option_is_a_usage_error(tmp_path):
    result = run("demo", "--landmark-count", "5", cwd=tmp_path)
    assert result.returncode == 2 and "usage:" in result.stderr


REPO = __import__("pathlib").Path(__file__).resolve().parents[1]
HALOS = REPO / "datasets" / "marrowfield_halos.csv"


def test_analyze_writes_run_table_and_figures_then_summary_and_redraw(tmp_path):
    result = run("analyze", str(HALOS), "--columns", "x,y,z", "--metric", "periodic", "--box", "100",
                 "--landmarks", "80", "--max-scale", "50", "--band", "bootstrap", "--replicates", "6", "--seed", "4",
                 "--formats", "svg", "--out", str(tmp_path / "out"), cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    out = tmp_path / "out"
    assert (out / "marrowfield_halos.tdkrun").is_file() and (out / "marrowfield_halos_features.csv").is_file()
    assert (out / "marrowfield_halos_diagram.svg").is_file() and "resampling heuristic" in result.stdout
    shown = run("summary", str(out / "marrowfield_halos.tdkrun"), "--rows", "3", cwd=tmp_path)
    assert shown.returncode == 0 and "80 landmarks by maxmin" in shown.stdout
    again = run("redraw", str(out / "marrowfield_halos.tdkrun"), "--formats", "svg", "--out", str(tmp_path / "re"),
                cwd=tmp_path)
    assert again.returncode == 0, again.stderr
    first = (out / "marrowfield_halos_diagram.svg").read_bytes()
    assert (tmp_path / "re" / "marrowfield_halos_diagram.svg").read_bytes() == first


def test_study_from_toml(tmp_path):
    config = tmp_path / "grid.toml"
    config.write_text(f'[input]\nfile = "{HALOS.as_posix()}"\ncolumns = ["x", "y", "z"]\nmetric = "periodic"\n'
                      'box = 100.0\n[study]\nmethods = ["maxmin", "random"]\ncounts = [20, 40]\nn_seeds = 2\n'
                      'seed = 1\n[complex]\nmax_scale = 40.0\n[band]\nmethod = "none"\n')
    result = run("study", str(config), "--out", str(tmp_path / "study"), "--formats", "png", cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    assert "Stability certificate held in 8 of 8 cells" in result.stdout
    assert {p.name for p in (tmp_path / "study").iterdir()} >= {"study_cells.csv", "study_plot.png"}


@pytest.mark.parametrize("args, message", [
    (["analyze", "missing.csv"], "does not exist"),
    (["analyze", str(HALOS), "--band", "magic"], "'method' parameter of BandOptions"),
    (["analyze", str(HALOS), "--landmarks", "ten"], "'n_landmarks' parameter"),
    (["analyze", str(HALOS), "--band", "density", "--complex", "rips"], "with the 'density' band"),
    (["analyze", str(HALOS), "--band", "dtm", "--complex", "rips"], "with the 'dtm' band"),
    (["summary", str(HALOS)], "not a tdakit run file"),
    (["study", "nowhere.toml"], "No config file"),
])
def test_bad_input_to_each_command(tmp_path, args, message):
    result = run(*args, cwd=tmp_path)
    assert result.returncode == 1, result.stdout
    assert result.stderr.startswith("tdakit: error:") and message in result.stderr
    assert len(result.stderr.strip().splitlines()) == 1 and "Traceback" not in result.stderr


def test_help_texts_explain_each_command(tmp_path):
    result = run("--help", cwd=tmp_path)
    assert all(name in result.stdout for name in ("analyze", "study", "redraw", "summary", "demo"))
    assert "real or noise" in run("analyze", "--help", cwd=tmp_path).stdout
