import subprocess
import sys

import pytest

from tests.helpers import cli


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
    # the same names as 'tdakit analyze': <stem>.tdkrun and <stem>_features.csv
    assert (tmp_path / "out" / "marrowfield.tdkrun").is_file()
    table = (tmp_path / "out" / "marrowfield_features.csv").read_text().splitlines()
    assert table[0].startswith("dimension,birth,death,persistence,status,significant,margin") and len(table) > 10


@pytest.mark.parametrize("args", [["demo", "--landmarks", "0"], ["demo", "--landmarks", "999999"]])
def test_bad_input_gives_one_line_and_exit_code(tmp_path, args):
    result = run(*args, "--out", str(tmp_path), cwd=tmp_path)
    assert result.returncode == 1
    # off a terminal, progress lines may come first; the error is one line, the last
    errors = [line for line in result.stderr.splitlines() if not line.startswith("[")]
    assert len(errors) == 1 and errors[0].startswith("tdakit: error: The 'n_landmarks' parameter")
    assert "Traceback" not in result.stderr


def test_unknown_option_is_a_usage_error(tmp_path):
    result = run("demo", "--landmark-count", "5", cwd=tmp_path)
    assert result.returncode == 2 and "usage:" in result.stderr


REPO = __import__("pathlib").Path(__file__).resolve().parents[1]
HALOS = REPO / "datasets" / "marrowfield_halos.csv"


def test_analyze_writes_run_table_and_figures_then_summary_and_redraw(tmp_path):
    result = run("analyze", str(HALOS), "--columns", "x,y,z", "--metric", "periodic", "--box", "100",
                 "--landmarks", "80", "--max-scale", "50", "--band", "bootstrap", "--n-boot", "6", "--seed", "4",
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


# -- in-process helpers (fast): main() returns the exit code, capsys holds what it printed ------------------
@pytest.fixture(scope="module")
def ring_file(tmp_path_factory):
    import numpy as np

    from tdakit.shapes import circle

    path = tmp_path_factory.mktemp("ring") / "ring.csv"
    np.savetxt(path, circle(300, noise=0.05, rng=3), delimiter=",", header="x,y", comments="")
    return path


FAST = ["--landmarks", "30", "--complex", "rips", "--band", "bootstrap", "--n-boot", "32", "--seed", "5",
        "--no-figures"]


# -- 1. feedback -----------------------------------------------------------------------------------------
def test_progress_lines_off_a_terminal(ring_file, tmp_path):
    # stderr is a pipe here, as in a scheduler's log: dated lines per step, an estimate, a bounded count.
    result = run("analyze", str(ring_file), *FAST, "--out", str(tmp_path / "out"), cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    lines = result.stderr.strip().splitlines()
    for needed in ("landmarks: started", "landmarks: done in", "diagrams: started", "diagrams: done in",
                   "band: started (32 replicates)", "should take about", "band: done in"):
        assert any(needed in line for line in lines), (needed, lines)
    assert all(line.startswith("[") and line[9] == "]" for line in lines)
    band = [line for line in lines if "band:" in line]
    assert len(band) <= 13  # start, estimate, at most one per tenth, end


def test_line_progress_rate_is_bounded_and_estimates_the_rest():
    import io

    from tdakit.cli.progress import LineProgress

    now = [0.0]
    stream = io.StringIO()
    report = LineProgress(stream, every=30.0, clock=lambda: now[0])
    report("band", 0, 1000)
    for done in range(1, 1001):  # one replicate a second for 1000 s
        now[0] += 1.0
        report("band", done, 1000)
    lines = stream.getvalue().splitlines()
    assert len(lines) <= 2 + 10 + 1000 // 30 + 1
    assert "the remaining 999 should take about 16 min 39 s" in lines[1]
    assert "500 of 1000 replicates (50 %), 8 min 20 s elapsed, about 8 min 20 s left" in stream.getvalue()
    assert lines[-1].endswith("band: done in 16 min 40 s (1000 of 1000 replicates)")


def test_line_progress_estimates_a_step_whose_first_report_comes_after_its_first_units():
    import io

    from tdakit.cli.progress import LineProgress

    now = [0.0]
    stream = io.StringIO()
    report = LineProgress(stream, clock=lambda: now[0])  # the study reports its settings only as chunks finish
    now[0] = 10.0
    report("settings", 4, 16)
    assert "settings: 4 settings in 10.0 s; the remaining 12 should take about 30.0 s" in stream.getvalue()


def test_line_progress_counts_only_new_work_after_a_resume():
    import io

    from tdakit.cli.progress import LineProgress

    now = [0.0]
    stream = io.StringIO()
    report = LineProgress(stream, clock=lambda: now[0])
    report.reused["band"] = 40
    report("band", 0, 100)
    now[0] = 6.0
    report("band", 52, 100)
    text = stream.getvalue()
    assert "40 of 100 replicates already done (reused)" in text
    assert "12 replicates in 6.0 s; the remaining 48 should take about 24.0 s" in text


# -- 2. resume --------------------------------------------------------------------------------------------
def _interrupt_after(monkeypatch, saves):
    from tdakit.core.inference import replicates

    original, count = replicates._save_checkpoint, [0]

    def save_then_stop(*args, **kwargs):
        original(*args, **kwargs)
        count[0] += 1
        if count[0] == saves:
            raise KeyboardInterrupt

    monkeypatch.setattr(replicates, "_save_checkpoint", save_then_stop)


def test_analyze_resumes_from_its_checkpoint_with_the_same_numbers(ring_file, tmp_path, capsys, monkeypatch):
    import numpy as np

    from tdakit.io import load_run

    assert cli(capsys, "analyze", ring_file, *FAST, "--out", tmp_path / "whole")[0] == 0
    with monkeypatch.context() as patch:
        _interrupt_after(patch, 3)
        code, _, err = cli(capsys, "analyze", ring_file, *FAST, "--out", tmp_path / "cut", "--quiet")
    checkpoint = tmp_path / "cut" / "ring.checkpoint.npz"
    assert code == 130 and "Traceback" not in err
    assert err.strip() == (f"tdakit: interrupted; finished work kept in the checkpoint {checkpoint} (rerun the same "
                           "command to resume).")
    kept = np.load(checkpoint)["indices"].size
    assert 0 < kept < 32
    code, out, err = cli(capsys, "analyze", ring_file, *FAST, "--out", tmp_path / "cut")
    assert code == 0, err
    assert f"reused {kept} of 32 replicates from {checkpoint}" in out
    assert not checkpoint.exists() and not (tmp_path / "cut" / "ring.checkpoint.json").exists()
    whole, resumed = load_run(tmp_path / "whole" / "ring.tdkrun"), load_run(tmp_path / "cut" / "ring.tdkrun")
    np.testing.assert_array_equal(whole.band.replicates, resumed.band.replicates)
    assert whole.band.radii == resumed.band.radii
    table = "ring_features.csv"
    assert (tmp_path / "whole" / table).read_text() == (tmp_path / "cut" / table).read_text()


def test_a_checkpoint_made_with_other_settings_is_refused(ring_file, tmp_path, capsys, monkeypatch):
    with monkeypatch.context() as patch:
        _interrupt_after(patch, 2)
        assert cli(capsys, "analyze", ring_file, *FAST, "--out", tmp_path, "--quiet")[0] == 130
    other = [a if a != "32" else "48" for a in FAST]
    code, _, err = cli(capsys, "analyze", ring_file, *other, "--out", tmp_path, "--quiet")
    assert code == 1 and "other settings" in err and "n_boot (32 then, 48 now)" in err and "--fresh" in err
    reseeded = [a if a != "5" else "6" for a in FAST]
    code, _, err = cli(capsys, "analyze", ring_file, *reseeded, "--out", tmp_path)
    assert code == 1 and "seed (5 then, 6 now)" in err
    code, out, err = cli(capsys, "analyze", ring_file, *other, "--out", tmp_path, "--quiet", "--fresh")
    assert code == 0 and "reused" not in out


def test_a_run_without_seed_resumes_with_the_unfinished_runs_seed(ring_file, tmp_path, capsys, monkeypatch):
    no_seed = [a for a in FAST if a not in ("--seed", "5")]
    with monkeypatch.context() as patch:
        _interrupt_after(patch, 2)
        assert cli(capsys, "analyze", ring_file, *no_seed, "--out", tmp_path, "--quiet")[0] == 130
    recorded = __import__("json").loads((tmp_path / "ring.checkpoint.json").read_text())["seed"]
    code, out, _ = cli(capsys, "analyze", ring_file, *no_seed, "--out", tmp_path, "--quiet")
    assert code == 0 and f"Resuming the unfinished run (seed {recorded})" in out and f"seed {recorded}." in out


def test_study_says_what_it_reused(tmp_path, capsys, monkeypatch):
    config = tmp_path / "grid.toml"
    config.write_text(f'[input]\nfile = "{HALOS.as_posix()}"\ncolumns = ["x", "y", "z"]\nmetric = "periodic"\n'
                      'box = 100.0\n[study]\nmethods = ["maxmin", "random"]\ncounts = [10, 20]\nn_seeds = 2\n'
                      'seed = 1\n[complex]\nmax_scale = 40.0\n[band]\nmethod = "none"\n')
    args = ("study", config, "--out", tmp_path / "study", "--no-figures", "--quiet", "--resume")
    with monkeypatch.context() as patch:
        _interrupt_after(patch, 5)
        code, _, err = cli(capsys, *args)
    assert code == 130 and "study.checkpoint.npz" in err
    code, out, err = cli(capsys, *args)
    assert code == 0, err
    assert f"reused 5 of 8 settings from {tmp_path / 'study' / 'study.checkpoint.npz'}" in out


# -- 3. memory budget ---------------------------------------------------------------------------------------
def test_memory_budget_is_printed_and_takes_sizes(ring_file, tmp_path, capsys):
    from tdakit.core.topology.preflight import default_memory_budget
    from tdakit.io import load_run

    code, out, _ = cli(capsys, "analyze", ring_file, *FAST, "--out", tmp_path, "--quiet")
    assert code == 0 and f"Memory budget {default_memory_budget() / 2**30:.3g} GiB (a quarter" in out
    code, out, _ = cli(capsys, "analyze", ring_file, *FAST, "--memory-budget", "8GB", "--out", tmp_path, "--quiet")
    assert code == 0 and "Memory budget 7.45 GiB (chosen)" in out
    assert load_run(tmp_path / "ring.tdkrun").options.complex.memory_budget == 8e9
    code, _, err = cli(capsys, "analyze", ring_file, *FAST, "--memory-budget", "8 parsecs", "--out", tmp_path)
    assert code == 1 and "'memory_budget'" in err and "8GB" in err


def test_a_memory_refusal_speaks_in_options(ring_file, tmp_path, capsys):
    code, _, err = cli(capsys, "analyze", ring_file, "--landmarks", "200", "--complex", "rips", "--band", "none",
                       "--max-dim", "2", "--memory-budget", "64KiB", "--no-figures", "--out", tmp_path)
    assert code == 1 and "Traceback" not in err
    assert "--memory-budget" in err and ("--landmarks" in err or "--max-scale" in err)
    assert "'max_scale'" not in err and "'memory_budget'" not in err and "select_landmarks" not in err


def test_a_refused_complex_proposes_settings_as_options(tmp_path, capsys):
    import re

    code, _, err = cli(capsys, "analyze", HALOS, "--columns", "x,y,z", "--complex", "rips", "--band", "none",
                       "--landmarks", "1500", "--max-dim", "3", "--memory-budget", "200MB", "--no-figures", "--quiet",
                       "--out", tmp_path)
    assert code == 1 and "Traceback" not in err
    assert re.search(r"--max-scale [0-9.]+", err) and re.search(r"--landmarks [0-9]+", err), err
    assert "max_scale" not in err and "n_landmarks" not in err and "'memory_budget'" not in err


def test_core_words_become_options():
    from tdakit.cli.options import in_cli_words

    text = in_cli_words("Lower 'max_scale', 'max_dim' or the number of landmarks. Settings estimated to fit: "
                        "max_scale=0.25 (with these 300 landmarks) or n_landmarks=120 (with no max_scale); Use "
                        "resolution=90 or less. Or raise 'memory_budget' (bytes) if so.")
    assert text == ("Lower --max-scale, --max-dim or --landmarks. Settings estimated to fit: --max-scale 0.25 (with "
                    "these 300 landmarks) or --landmarks 120 (with no --max-scale); Use resolution = 90 in the [band] "
                    "section of --config or less. Or raise --memory-budget (e.g. 16GB) if so.")


# -- 4. contradictions, and the run file records what was used ------------------------------------------------
def test_density_band_with_landmark_options_is_refused(ring_file, tmp_path, capsys):
    code, _, err = cli(capsys, "analyze", ring_file, "--band", "density", "--sampling", "random", "--out", tmp_path)
    assert code == 1 and "with the 'density' band" in err and not (tmp_path / "ring.checkpoint.json").exists()


def test_the_run_file_records_the_band_really_used(ring_file, tmp_path, capsys):
    from tdakit.io import load_run

    code, _, err = cli(capsys, "analyze", ring_file, "--n-boot", "10", "--seed", "1", "--no-figures", "--quiet",
                       "--out", tmp_path)
    assert code == 0, err
    run = load_run(tmp_path / "ring.tdkrun")
    assert run.options.band.method == "density" and run.options.sampling.n_landmarks is None
    assert run.provenance["options"]["band"]["method"] == "density" and run.landmarks is None
    code, out, _ = cli(capsys, "summary", tmp_path / "ring.tdkrun")
    assert code == 0 and "Band: density, level 0.95" in out and "Landmark bound: none (every point" in out
    assert "H1 (loops):" in out and "Verdict, features called real per dimension: H0 " in out


# -- 5. one vocabulary ----------------------------------------------------------------------------------------
def test_n_boot_is_the_name_and_replicates_is_deprecated(ring_file, tmp_path, capsys):
    from tdakit.io import load_run

    old = [a if a != "--n-boot" else "--replicates" for a in FAST]
    code, _, err = cli(capsys, "analyze", ring_file, *old, "--quiet", "--out", tmp_path)
    assert code == 0 and "--replicates is deprecated" in err and "--n-boot" in err
    assert load_run(tmp_path / "ring.tdkrun").options.band.n_boot == 32


def test_seed_on_the_command_line_and_rng_in_python_choose_the_same_landmarks(ring_file, tmp_path, capsys):
    import numpy as np

    import tdakit
    from tdakit.io import load_run

    code, _, _ = cli(capsys, "analyze", ring_file, "--landmarks", "30", "--sampling", "random", "--complex", "rips",
                     "--band", "none", "--seed", "1", "--no-figures", "--quiet", "--out", tmp_path)
    assert code == 0
    chosen = tdakit.select_landmarks(tdakit.load_cloud(ring_file), 30, method="random", rng=1)
    np.testing.assert_array_equal(load_run(tmp_path / "ring.tdkrun").landmarks.indices, chosen.indices)


def test_redraw_writes_into_the_analyze_default_folder(ring_file, tmp_path, capsys, monkeypatch):
    assert cli(capsys, "analyze", ring_file, *FAST, "--quiet", "--out", tmp_path / "run")[0] == 0
    monkeypatch.chdir(tmp_path)
    code, _, err = cli(capsys, "redraw", tmp_path / "run" / "ring.tdkrun", "--formats", "svg")
    assert code == 0, err
    assert (tmp_path / "tdakit-out" / "ring_diagram.svg").is_file() and not (tmp_path / "ring_diagram.svg").exists()


def test_version(tmp_path):
    import tdakit

    result = run("--version", cwd=tmp_path)
    assert result.returncode == 0 and result.stdout.startswith(f"tdakit {tdakit.__version__}")


def test_config_keys_are_all_documented_with_defaults(capsys):
    from dataclasses import fields

    from tdakit.cli.keys import config_keys_text
    from tdakit.config import BandOptions, ComplexOptions, RunOptions, SamplingOptions, StudyOptions

    code, text, _ = cli(capsys, "config-keys")
    assert code == 0 and text.strip() == config_keys_text()
    for section, cls in (("sampling", SamplingOptions), ("complex", ComplexOptions), ("band", BandOptions),
                         ("run", RunOptions), ("study", StudyOptions)):
        block = text.split(f"[{section}]\n", 1)[1].split("\n\n", 1)[0]
        for field in fields(cls):
            if section == "study" and field.name in ("sampling", "complex", "band"):
                continue
            line = next(line for line in block.splitlines() if line.split()[0] == field.name)
            assert "default" in line and line.split(": ", 1)[1].strip(), line
    assert "n_boot             default 200" in text.replace("     default", " default") or "default 200" in text
    assert "count from 0" in text


def test_help_points_to_the_keys_and_says_angular_input_and_positions(tmp_path):
    text = " ".join(run("analyze", "--help", cwd=tmp_path).stdout.split())
    assert "tdakit config-keys" in text and "(longitude, latitude) in degrees" in text
    assert "counted from 0" in text and "--n-boot" in text and "--memory-budget" in text
    assert "--replicates" not in text


# -- 6. summary ------------------------------------------------------------------------------------------------
def test_summary_shows_each_dimension_the_band_the_bound_and_the_verdict(ring_file, tmp_path, capsys):
    assert cli(capsys, "analyze", ring_file, *FAST, "--quiet", "--out", tmp_path)[0] == 0
    code, out, _ = cli(capsys, "summary", tmp_path / "ring.tdkrun", "--rows", "2")
    assert code == 0
    assert "H0 (components): 30 classes; leading 2:" in out and "H1 (loops):" in out
    loops = out.split("H1 (loops):")[1].splitlines()
    assert any(line.split()[-1] == "finite" and "yes" in line.split() for line in loops)  # the ring's loop
    assert "Band: bootstrap, level 0.95, radius H0 " in out and "covers:" in out
    assert "Landmark bound: " in out
    assert "Verdict, features called real per dimension: H0 1 of 30, H1 1 of" in out


# -- 7. where the run computes: --scheduler and the config key [run] scheduler -----------------------------------
def _never_read(monkeypatch):
    """Record every call of the CLI's catalogue reader instead of reading."""
    from tdakit.cli import options

    calls = []
    monkeypatch.setattr(options, "load", lambda *args, **kwargs: calls.append(args))
    return calls


def _dead_address():
    """A local TCP port nobody listens on (bound, then closed: refused at once)."""
    import socket

    with socket.socket() as sock:
        sock.bind(("127.0.0.1", 0))
        return f"tcp://127.0.0.1:{sock.getsockname()[1]}"


def test_a_dead_scheduler_is_refused_before_the_catalogue_is_read(ring_file, tmp_path, capsys, monkeypatch):
    pytest.importorskip("distributed")
    calls = _never_read(monkeypatch)
    dead = _dead_address()
    code, _, err = cli(capsys, "analyze", ring_file, *FAST, "--scheduler", dead, "--out", tmp_path)
    assert code == 1 and calls == [] and "Traceback" not in err
    assert err.startswith("tdakit: error: --scheduler must be the address of a running Dask scheduler") and dead in err
    (tmp_path / "c.toml").write_text(f'[run]\nscheduler = "{dead}"\n')
    code, _, err = cli(capsys, "analyze", ring_file, *FAST, "--config", tmp_path / "c.toml", "--out", tmp_path)
    assert code == 1 and calls == [] and "[run] scheduler (in --config) must be" in err
    code, _, err = cli(capsys, "analyze", ring_file, *FAST, "--scheduler", " ", "--out", tmp_path)
    assert code == 1 and calls == [] and "--scheduler must be none" in err and "RunOptions" not in err


def test_the_scheduler_flag_wins_over_the_config_key(ring_file, tmp_path, capsys):
    from tdakit.io import load_run

    (tmp_path / "c.toml").write_text(f'[run]\nscheduler = "{_dead_address()}"\n')
    code, _, err = cli(capsys, "analyze", ring_file, *FAST, "--config", tmp_path / "c.toml", "--scheduler", "none",
                       "--quiet", "--out", tmp_path)
    assert code == 0, err
    assert "scheduler" not in load_run(tmp_path / "ring.tdkrun").provenance
    (tmp_path / "c.toml").write_text('[run]\nschedule = "local"\n')
    code, _, err = cli(capsys, "analyze", ring_file, *FAST, "--config", tmp_path / "c.toml", "--out", tmp_path)
    assert code == 1 and "'schedule'" in err and "scheduler" in err


def test_config_keys_list_the_scheduler(capsys):
    code, text, _ = cli(capsys, "config-keys")
    block = text.split("[run]\n", 1)[1].split("\n\n", 1)[0]
    assert code == 0 and block.split()[0] == "scheduler" and "tcp://host:8786" in block and "--scheduler" in block
    assert "[band], [run]" in text
