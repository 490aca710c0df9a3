"""Hostile input to every sub-command: refused with exit code 1 and one line naming the option or file.

Exit codes (see ``tdakit --help``): 1 for everything tdakit refuses or fails at, 2 only for argparse's usage
errors (an unknown option, a value of the wrong type), 130 for Ctrl-C. Never a traceback without --debug.
"""

import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from tdakit.shapes import circle
from tests.helpers import assert_refused, cli

REPO = Path(__file__).resolve().parents[2]
HALOS = REPO / "datasets" / "marrowfield_halos.csv"


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    folder = tmp_path_factory.mktemp("hostile_cli")
    ring = folder / "ring.csv"
    np.savetxt(ring, circle(200, noise=0.05, rng=3), delimiter=",", header="x,y", comments="")
    afile = folder / "a_file.txt"
    afile.write_text("not a folder\n")
    return {"ring": ring, "file": afile, "folder": folder}


def toml(tmp_path, text, name="bad.toml"):
    path = tmp_path / name
    path.write_text(text)
    return path


FAST = ["--landmarks", "20", "--complex", "rips", "--band", "bootstrap", "--n-boot", "8", "--seed", "1"]

# -- analyze -------------------------------------------------------------------------------------------------
ANALYZE = [
    (["--dpi", "0"], "--dpi"),
    (["--dpi", "-5"], "--dpi"),
    (["--dpi", "100000"], "--dpi"),
    (["--formats", "gif"], "--formats"),
    (["--landmarks", "-3"], "'n_landmarks'"),
    (["--level", "1.5"], "'level'"),
    (["--n-boot", "0"], "'n_boot'"),
    (["--memory-budget=-1GB"], "'memory_budget'"),
    (["--memory-budget", "lots"], "'memory_budget'"),
    (["--max-scale", "-2"], "'max_scale'"),
    (["--jobs", "0"], "--jobs"),
    (["--n-boot", "5", "--replicates", "6"], "--n-boot 5 and --replicates 6"),
    (["--sampling", "density", "--band", "density"], "with the 'density' band"),
    (["--columns", "7"], "columns"),
    (["--resume", "--fresh"], "--resume and --fresh"),
]


@pytest.mark.entry("tdakit analyze")
@pytest.mark.parametrize("extra, needle", ANALYZE, ids=[" ".join(a) for a, _ in ANALYZE])
def test_analyze_refuses_bad_options(data, tmp_path, capsys, extra, needle):
    args = [a for a in FAST]
    for flag in extra:  # the hostile value replaces FAST's value of the same option
        if flag.startswith("--") and flag in args:
            position = args.index(flag)
            del args[position:position + 2]
    assert_refused(cli(capsys, "analyze", data["ring"], *args, *extra, "--out", tmp_path), needle)


@pytest.mark.entry("tdakit analyze")
@pytest.mark.parametrize("extra", [["--dpi", "abc"], ["--landmark-count", "5"], ["--max-dim", "one"]])
def test_analyze_usage_errors_exit_2(data, tmp_path, capsys, extra):
    status, _, err = cli(capsys, "analyze", data["ring"], *extra, "--out", tmp_path)
    assert status == 2 and "usage:" in err and "Traceback" not in err


@pytest.mark.entry("tdakit analyze")
@pytest.mark.parametrize("text, needle", [
    ("[[band]]\nmethod = \"dtm\"\n", "[band] section"),
    ("band = [1, 2]\n", "[band] section"),
    ("sampling = 3\n", "[sampling] section"),
    ("[bands]\nmethod = \"dtm\"\n", "Unknown section [bands]"),
    ("[band]\nmethod = \n", "not valid TOML"),
    ("[input]\ncolumns = 5\n", "'columns'"),
    ("[band]\nn_replicates = 10\n", "'n_replicates'"),
], ids=["array-of-tables", "list-value", "int-value", "unknown-section", "bad-toml", "columns-int", "unknown-key"])
def test_analyze_refuses_bad_config_files(data, tmp_path, capsys, text, needle):
    config = toml(tmp_path, text)
    result = cli(capsys, "analyze", data["ring"], *FAST, "--config", config, "--out", tmp_path / "out")
    assert_refused(result, needle)
    assert "bad.toml" in result[2] or needle.startswith("'")


@pytest.mark.entry("tdakit analyze")
def test_a_huge_density_resolution_is_refused_before_allocating(data, tmp_path, capsys):
    config = toml(tmp_path, "[band]\nmethod = \"density\"\nresolution = 4096\n")
    result = cli(capsys, "analyze", data["ring"], "--config", config, "--n-boot", "5", "--out", tmp_path / "out",
                 "--no-figures")
    assert_refused(result, "resolution")
    assert "[band] section of --config" in result[2] or "[band] resolution" in result[2]


@pytest.mark.entry("tdakit analyze")
@pytest.mark.parametrize("where", ["file", "under-a-file"])
def test_an_out_that_cannot_be_a_folder_is_refused_before_the_computation(data, capsys, where):
    out = data["file"] if where == "file" else data["file"] / "sub"
    status, stdout, err = cli(capsys, "analyze", data["ring"], *FAST, "--out", out)
    assert_refused((status, stdout, err), str(out))
    assert "--out" in err and "Read " not in stdout  # refused before the data were even read


def _failing_pdf(monkeypatch):
    from matplotlib.figure import Figure

    original = Figure.savefig

    def savefig(self, path, *args, **kwargs):
        if str(path).endswith(".pdf"):
            Path(path).write_bytes(b"%PDF-1.4 half")
            raise AttributeError("'Stream' object has no attribute 'pos'")
        return original(self, path, *args, **kwargs)

    monkeypatch.setattr(Figure, "savefig", savefig)


@pytest.mark.entry("tdakit analyze")
def test_a_failing_pdf_names_the_file_and_keeps_the_previous_outputs(data, tmp_path, capsys, monkeypatch):
    assert cli(capsys, "analyze", data["ring"], *FAST, "--formats", "png", "--out", tmp_path, "--quiet")[0] == 0
    before = {p.name: p.read_bytes() for p in tmp_path.iterdir() if not p.name.startswith(".")}
    _failing_pdf(monkeypatch)
    reseeded = [a if a != "1" else "2" for a in FAST]
    result = cli(capsys, "analyze", data["ring"], *reseeded, "--formats", "png,pdf", "--out", tmp_path, "--quiet")
    assert_refused(result, "ring_summary.pdf")
    assert "previous outputs" in result[2]
    after = {p.name: p.read_bytes() for p in tmp_path.iterdir() if not p.name.startswith(".")}
    kept = {"ring.checkpoint.npz", "ring.checkpoint.json"}  # the finished replicates, for the rerun
    assert set(after) == set(before) | kept
    # the old complete set, no half-written file, no new figure beside the old run file
    assert {name: after[name] for name in before} == before
    assert not list(tmp_path.glob(".tdakit-partial-*"))


@pytest.mark.entry("tdakit analyze")
@pytest.mark.parametrize("sent, word, code", [(signal.SIGINT, "interrupted", 130),
                                               (signal.SIGTERM, "terminated", 143)], ids=["ctrl-c", "sigterm"])
def test_ctrl_c_prints_one_line_and_exits_130(data, tmp_path, sent, word, code):
    # Many replicates, so the interrupt comes while the band runs; the checkpoint is named.
    command = [sys.executable, "-m", "tdakit", "analyze", str(data["ring"]), "--landmarks", "20", "--complex", "rips",
               "--band", "bootstrap", "--n-boot", "4000", "--seed", "1", "--no-figures", "--out", str(tmp_path)]
    process = subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
    checkpoint = tmp_path / "ring.checkpoint.npz"
    deadline = time.monotonic() + 60
    while not checkpoint.exists() and time.monotonic() < deadline and process.poll() is None:
        time.sleep(0.02)
    process.send_signal(sent)
    out, err = process.communicate(timeout=60)
    assert process.returncode == code, err
    last = err.strip().splitlines()[-1]
    assert last == (f"tdakit: {word}; finished work kept in the checkpoint {checkpoint} (rerun the same "
                    "command to resume).")
    assert "Traceback" not in out + err and checkpoint.is_file()


# -- study -----------------------------------------------------------------------------------------------------
STUDY_INPUT = f'[input]\nfile = "{HALOS.as_posix()}"\ncolumns = ["x", "y", "z"]\n'
STUDY = [
    ("[study]\ncounts = [10]\n", "file = "),
    ("[input]\nfile = 5\n", "file = "),
    (STUDY_INPUT + "[study]\ncounts = \"many\"\n", "'counts'"),
    (STUDY_INPUT + "[studdy]\ncounts = [10]\n", "Unknown section [studdy]"),
    (STUDY_INPUT + "[[study]]\ncounts = [10]\n", "[study] section"),
    (STUDY_INPUT + "[study]\nmethods = []\n", "'methods'"),
    (STUDY_INPUT + "[band]\nmethod = \"density\"\n[study]\ncounts = [10, 20]\nn_seeds = 1\n", "'density'"),
    ('[input]\nfile = "missing.csv"\n', "missing.csv"),
    (STUDY_INPUT + "[study]\ncounts = [10, 20]\nseed = \"one\"\n", "'seed'"),
]


@pytest.mark.entry("tdakit study")
@pytest.mark.parametrize("text, needle", STUDY, ids=["no-input", "file-int", "counts-text", "unknown-section",
                                                     "array-of-tables", "no-methods", "density-band", "missing-file",
                                                     "seed-text"])
def test_study_refuses_bad_configs(tmp_path, capsys, text, needle):
    config = toml(tmp_path, text)
    assert_refused(cli(capsys, "study", config, "--out", tmp_path / "out", "--no-figures", "--quiet"), needle)


@pytest.mark.entry("tdakit study")
@pytest.mark.parametrize("extra, needle", [(["--dpi", "0"], "--dpi"), (["--jobs", "-4"], "--jobs"),
                                           (["--memory-budget", "8 apples"], "'memory_budget'")])
def test_study_refuses_bad_options(tmp_path, capsys, extra, needle):
    config = toml(tmp_path, STUDY_INPUT + "[study]\ncounts = [10, 20]\nn_seeds = 1\n")
    assert_refused(cli(capsys, "study", config, *extra, "--out", tmp_path / "out"), needle)


@pytest.mark.entry("tdakit study")
def test_study_out_that_is_a_file_is_refused_first(data, tmp_path, capsys):
    config = toml(tmp_path, STUDY_INPUT + "[study]\ncounts = [10, 20]\nn_seeds = 1\n")
    status, out, err = cli(capsys, "study", config, "--out", data["file"])
    assert_refused((status, out, err), "a_file.txt")
    assert "Study on" not in out


# -- redraw and summary ----------------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def runfile(data, tmp_path_factory):
    from tdakit.cli.main import main

    out = tmp_path_factory.mktemp("hostile_run")
    assert main(["analyze", str(data["ring"]), *FAST, "--no-figures", "--quiet", "--out", str(out)]) == 0
    return out / "ring.tdkrun"


@pytest.mark.entry("tdakit redraw")
@pytest.mark.parametrize("extra, needle", [(["--dpi", "100000"], "--dpi"), (["--dpi", "0"], "--dpi"),
                                           (["--formats", "bmp"], "--formats")])
def test_redraw_refuses_bad_options(runfile, tmp_path, capsys, extra, needle):
    assert_refused(cli(capsys, "redraw", runfile, *extra, "--out", tmp_path), needle)


@pytest.mark.entry("tdakit redraw")
def test_redraw_refuses_missing_and_odd_run_files(tmp_path, capsys):
    assert_refused(cli(capsys, "redraw", tmp_path / "gone.tdkrun", "--out", tmp_path), "gone.tdkrun")
    (tmp_path / "dir.tdkrun").mkdir()
    assert_refused(cli(capsys, "redraw", tmp_path / "dir.tdkrun", "--out", tmp_path / "o"), "dir.tdkrun")


@pytest.mark.entry("tdakit redraw")
def test_redraw_into_a_file_is_refused(runfile, data, capsys):
    assert_refused(cli(capsys, "redraw", runfile, "--out", data["file"]), "a_file.txt")


@pytest.mark.entry("tdakit redraw")
def test_redraw_names_a_figure_it_cannot_write(runfile, tmp_path, capsys, monkeypatch):
    _failing_pdf(monkeypatch)
    assert_refused(cli(capsys, "redraw", runfile, "--formats", "pdf", "--out", tmp_path), "ring_summary.pdf")
    assert not [p for p in tmp_path.iterdir() if p.suffix == ".pdf"]


@pytest.mark.entry("tdakit summary")
@pytest.mark.parametrize("content", [b"", b"garbage \x00\xff" * 50, b"PK\x03\x04 broken zip"],
                         ids=["empty", "garbage", "broken-zip"])
def test_summary_refuses_damaged_run_files(tmp_path, capsys, content):
    path = tmp_path / "bad.tdkrun"
    path.write_bytes(content)
    assert_refused(cli(capsys, "summary", path), "bad.tdkrun")


@pytest.mark.entry("tdakit summary")
def test_summary_refuses_negative_rows_and_missing_files(runfile, tmp_path, capsys):
    assert_refused(cli(capsys, "summary", runfile, "--rows", "-1"), "--rows")
    assert_refused(cli(capsys, "summary", tmp_path / "none.tdkrun"), "none.tdkrun")


# -- demo ---------------------------------------------------------------------------------------------------------
@pytest.mark.entry("tdakit demo")
@pytest.mark.parametrize("extra, needle", [(["--n-boot", "0"], "'n_boot'"), (["--landmarks", "0"], "'n_landmarks'")])
def test_demo_refuses_bad_options(tmp_path, capsys, extra, needle):
    assert_refused(cli(capsys, "demo", *extra, "--no-figures", "--quiet", "--out", tmp_path), needle)


@pytest.mark.entry("tdakit demo")
def test_demo_into_a_file_is_refused_before_loading(data, capsys):
    status, out, err = cli(capsys, "demo", "--out", data["file"], "--no-figures")
    assert_refused((status, out, err), "a_file.txt")
    assert "Loaded" not in out



@pytest.mark.entry("tdakit analyze")
def test_an_interrupt_inside_compiled_code_is_still_an_interrupt(monkeypatch, capsys, tmp_path):
    # Ctrl-C inside numba code surfaces as SystemError("... returned a result with an exception set") chained to
    # the KeyboardInterrupt (seen with the maxmin kernel): exit 130 with the one line, not an internal error.
    import importlib

    cli_main = importlib.import_module("tdakit.cli.main")  # the module (tdakit.cli.main is also the function)

    def compiled_code_interrupted(args):
        try:
            raise KeyboardInterrupt
        except KeyboardInterrupt as inner:
            raise SystemError("CPUDispatcher(maxmin_tree) returned a result with an exception set") from inner

    monkeypatch.setattr(cli_main, "_dispatch", compiled_code_interrupted)
    code, _, err = cli(capsys, "demo", "--out", tmp_path)
    assert code == 130 and "interrupted" in err and "internal error" not in err and "Traceback" not in err
