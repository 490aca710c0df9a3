import subprocess
import sys

import pytest


def run(*args, cwd):
    return subprocess.run([sys.executable, "-m", "tdakit", *args], capture_output=True, text=True,
                          cwd=cwd, timeout=300)


def test_demo_end_to_end(tmp_path):
    result = run("demo", "--out", str(tmp_path / "out"), "--n-boot", "10", cwd=tmp_path)
    assert result.returncode == 0, result.stderr
    assert "Longest-lived loops" in result.stdout and "resampling heuristic" in result.stdout
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
