"""Faults during batch runs: kill -9 and resume, two writers of one output, a full disk.

``tdakit analyze`` and ``tdakit study --resume`` are killed with SIGKILL at several points (found by polling
their checkpoint and output folder), then rerun: no finished replicate is lost or computed twice, the final
numbers equal an uninterrupted run's, and every output file is either the previous complete one or the new
complete one (the run file, written last, may be missing in between: the run is then visibly unfinished).
"""

import hashlib
import os
import resource
import signal
import subprocess
import sys
import time
from pathlib import Path

import numpy as np
import pytest

from tdakit.shapes import circle

pytestmark = pytest.mark.slow

REPO = Path(__file__).resolve().parents[2]
HALOS = REPO / "datasets" / "marrowfield_halos.csv"
N_BOOT = 160  # 16 checkpointed chunks of 10 replicates, about 1 s of work


# Each bootstrap replicate waits 20 ms more and each file rename 50 ms more, so that a kill lands mid-run and
# mid-publishing on a fast or a slow machine alike (the numbers are unchanged: the wrappers only sleep before
# calling the real functions).
SLOWED_CLI = ("import os, sys, time\n"
              "rename = os.replace\n"
              "def slow_rename(*args, **kwargs):\n"
              "    time.sleep(0.05)\n"
              "    return rename(*args, **kwargs)\n"
              "os.replace = slow_rename\n"
              "import tdakit.core.inference._band_methods as methods\n"
              "task = methods._bootstrap_task\n"
              "def slowed(payload, rng):\n"
              "    time.sleep(0.02)\n"
              "    return task(payload, rng)\n"
              "methods._bootstrap_task = slowed\n"
              "from tdakit.cli import main\n"
              "sys.exit(main(sys.argv[1:]))\n")


def command(*args):
    return [sys.executable, "-c", SLOWED_CLI, *map(str, args)]


@pytest.fixture(scope="module")
def ring(tmp_path_factory):
    path = tmp_path_factory.mktemp("faults") / "ring.csv"
    np.savetxt(path, circle(300, noise=0.05, rng=3), delimiter=",", header="x,y", comments="")
    return path


def analyze_args(ring, out, n_boot=N_BOOT, *extra):
    return command("analyze", ring, "--landmarks", "20", "--complex", "rips", "--band", "bootstrap", "--n-boot",
                   n_boot, "--seed", "7", "--out", out, *extra)


def checkpoint_count(path: Path) -> int:
    try:
        with np.load(path) as data:
            return int(data["indices"].size)
    except (OSError, ValueError, KeyError, EOFError):
        return 0


def kill_when(args, ready, timeout=60.0):
    """Start ``args``, SIGKILL it as soon as ``ready()`` holds; True when it was killed (not finished first)."""
    process = subprocess.Popen(args, stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    deadline = time.monotonic() + timeout
    while process.poll() is None and time.monotonic() < deadline:
        if ready():
            process.send_signal(signal.SIGKILL)
            process.wait()
            return True
        time.sleep(0.005)
    process.wait()
    return False


def snapshot(folder: Path) -> dict:
    return {p.name: hashlib.sha256(p.read_bytes()).hexdigest() for p in folder.iterdir()
            if p.is_file() and not p.name.startswith(".") and ".checkpoint." not in p.name}


def test_killed_analyze_resumes_without_losing_or_repeating_replicates(ring, tmp_path):
    from tdakit.io import load_run

    whole = subprocess.run(analyze_args(ring, tmp_path / "whole", N_BOOT, "--no-figures"), capture_output=True,
                           text=True, timeout=120)
    assert whole.returncode == 0, whole.stderr
    out = tmp_path / "cut"
    old = subprocess.run(analyze_args(ring, out, 16, "--no-figures"), capture_output=True, timeout=120)
    assert old.returncode == 0
    old_files = snapshot(out)
    checkpoint, snapshots, reused = out / "ring.checkpoint.npz", [], []
    run_file = out / "ring.tdkrun"
    points = [lambda: checkpoint_count(checkpoint) >= 30, lambda: checkpoint_count(checkpoint) >= 100,
              lambda: not run_file.exists()]  # the last one lands while the outputs are published
    for ready in points:
        before = checkpoint_count(checkpoint)
        killed = kill_when(analyze_args(ring, out, N_BOOT, "--no-figures"), ready)
        kept = checkpoint_count(checkpoint)
        assert killed or ready is points[-1], "the run finished before the kill point"
        assert kept >= before or not killed  # a kill never loses what the checkpoint held (a finished run drops it)
        snapshots.append(snapshot(out))
        reused.append(kept)
        if not killed:
            break
    final = subprocess.run(analyze_args(ring, out, N_BOOT, "--no-figures"), capture_output=True, text=True,
                           timeout=120)
    assert final.returncode == 0, final.stderr
    kept = reused[-1]
    if kept:
        assert f"reused {kept} of {N_BOOT} replicates" in final.stdout
    if 0 < kept < N_BOOT:
        # the resumed run computes exactly the others: its first chunk + the rest it announces = N_BOOT - kept
        line = next(line for line in final.stderr.splitlines() if "should take about" in line)
        first, rest = int(line.split("band: ")[1].split()[0]), int(line.split("the remaining ")[1].split()[0])
        assert first + rest == N_BOOT - kept
    a, b = load_run(tmp_path / "whole" / "ring.tdkrun"), load_run(run_file)
    np.testing.assert_array_equal(a.band.replicates, b.band.replicates)
    assert a.band.radii == b.band.radii
    assert (tmp_path / "whole" / "ring_features.csv").read_bytes() == (out / "ring_features.csv").read_bytes()
    new_files = snapshot(out)
    assert not checkpoint.exists() and not list(out.glob(".tdakit-partial-*"))
    assert not [p.name for p in out.iterdir() if p.name.endswith((".tmp", ".partial"))]  # no temporary file left
    for seen in snapshots:  # after every kill: each file the old complete one or the new complete one
        for name, digest in seen.items():
            assert digest in (old_files.get(name), new_files.get(name)), name
        if seen.get("ring.tdkrun") == old_files["ring.tdkrun"]:  # never the old run file beside new outputs
            assert all(digest == old_files.get(name) for name, digest in seen.items())


STUDY = (f'[input]\nfile = "{HALOS.as_posix()}"\ncolumns = ["x", "y", "z"]\nmetric = "periodic"\nbox = 100.0\n'
         '[study]\nmethods = ["maxmin", "random"]\ncounts = [10, 20]\nn_seeds = 4\nseed = 3\n[complex]\n'
         'max_scale = 40.0\n[band]\nmethod = "none"\n')


def test_killed_study_resumes_with_the_same_cells(tmp_path):
    import pandas as pd

    config = tmp_path / "grid.toml"
    config.write_text(STUDY)
    study = [*command("study", config, "--no-figures", "--resume", "--out")]
    whole = subprocess.run([*study, tmp_path / "whole"], capture_output=True, text=True, timeout=120)
    assert whole.returncode == 0, whole.stderr
    out = tmp_path / "cut"
    checkpoint = out / "study.checkpoint.npz"
    kept = 0
    for target in (3, 9):
        kill_when([*study, out], lambda goal=target: checkpoint_count(checkpoint) >= goal)
        assert checkpoint_count(checkpoint) >= kept
        kept = checkpoint_count(checkpoint)
    final = subprocess.run([*study, out], capture_output=True, text=True, timeout=120)
    assert final.returncode == 0, final.stderr
    if kept:
        assert f"reused {kept} of 16 settings from {checkpoint}" in final.stdout
    timing = ["seconds", "peak_memory_mib"]
    a = pd.read_csv(tmp_path / "whole" / "study_cells.csv").drop(columns=timing)
    b = pd.read_csv(out / "study_cells.csv").drop(columns=timing)
    pd.testing.assert_frame_equal(a, b)
    assert (tmp_path / "whole" / "study_report.txt").read_text() == (out / "study_report.txt").read_text()
    assert not checkpoint.exists()


def test_two_analyses_into_one_folder_one_writes_one_is_refused(ring, tmp_path):
    from tdakit.io import load_run

    out = tmp_path / "shared"
    first = subprocess.Popen(analyze_args(ring, out, N_BOOT, "--no-figures"), stdout=subprocess.PIPE,
                             stderr=subprocess.PIPE, text=True)
    lock = out / ".ring.lock"
    deadline = time.monotonic() + 30
    while not (lock.exists() and lock.read_text()) and time.monotonic() < deadline:
        time.sleep(0.01)
    second = subprocess.run(analyze_args(ring, out, N_BOOT, "--no-figures"), capture_output=True, text=True,
                            timeout=120)
    out1, err1 = first.communicate(timeout=120)
    assert first.returncode == 0, err1
    assert second.returncode == 1 and "Another tdakit process" in second.stderr and str(out) in second.stderr
    assert "Traceback" not in second.stderr
    assert len(load_run(out / "ring.tdkrun").band.replicates) == N_BOOT


WRITER = """
import sys, pandas as pd
from pathlib import Path
from tdakit.cli.outputs import write_table
value = int(sys.argv[2])
table = pd.DataFrame({"a": [value] * 20000, "b": range(20000)})
for _ in range(15):
    write_table(table, Path(sys.argv[1]))
"""


def test_two_processes_writing_one_csv_leave_one_complete_file(tmp_path):
    import pandas as pd

    path = tmp_path / "features.csv"
    writers = [subprocess.Popen([sys.executable, "-c", WRITER, str(path), str(v)]) for v in (1, 2)]
    assert [w.wait(timeout=120) for w in writers] == [0, 0]
    table = pd.read_csv(path)
    assert len(table) == 20000 and table["a"].nunique() == 1 and table["a"].iloc[0] in (1, 2)
    assert table["b"].tolist() == list(range(20000))
    assert sorted(p.name for p in tmp_path.iterdir()) == ["features.csv"]  # no temporary file left


def _small_disk(limit):
    def apply():
        signal.signal(signal.SIGXFSZ, signal.SIG_IGN)  # then a write past the limit fails with EFBIG
        resource.setrlimit(resource.RLIMIT_FSIZE, (limit, limit))
    return apply


def test_a_full_disk_leaves_the_previous_outputs_and_says_which_file(ring, tmp_path):
    out = tmp_path / "out"
    assert subprocess.run(analyze_args(ring, out, 16, "--no-figures"), capture_output=True).returncode == 0
    before = snapshot(out)
    # files up to 12 kB fit (the checkpoint, the feature table), the run file (about 30 kB) does not
    full = subprocess.run(analyze_args(ring, out, 32, "--no-figures"), capture_output=True, text=True,
                          timeout=120, preexec_fn=_small_disk(12_000))
    assert full.returncode == 1 and "Traceback" not in full.stderr
    message = full.stderr.strip().splitlines()[-1]
    assert message.startswith("tdakit: error: Could not write ") and f"'{out / 'ring.tdkrun'}'" in message
    assert "File too large" in message and "previous outputs" in message and ".tdakit-partial" not in message
    assert snapshot(out) == before
    leftovers = [p.name for p in out.iterdir() if p.name.startswith(".") and p.name != ".ring.lock"]
    assert leftovers == [] and not [p for p in out.iterdir() if p.suffix == ".partial"]
    assert os.path.getsize(out / "ring.tdkrun") > 0
