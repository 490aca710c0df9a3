"""The worker process: same numbers as a direct call, and it never outlives the session that started it."""

import signal
import subprocess
import sys
import textwrap

import numpy as np
import psutil

import tdakit
from tdakit.widgets import BackgroundJob
from tdakit.widgets.jobs import run_analysis

SESSION = textwrap.dedent("""
    import sys, time
    import tdakit
    from tdakit.shapes import circle
    from tdakit.widgets import BackgroundJob
    from tdakit.widgets.jobs import run_analysis

    if __name__ == "__main__":
        cloud = tdakit.load_cloud(circle(500, noise=0.03, rng=1))
        options = {"sampling": {"n_landmarks": 300}, "band": {"method": "bootstrap", "n_boot": 1000}}
        steps = []
        job = BackgroundJob(run_analysis, cloud, options, 0, on_progress=lambda *a: steps.append(a)).start()
        while not steps:
            time.sleep(0.05)
        print(job.process.pid, flush=True)
        if sys.argv[1] == "exit":
            sys.exit(0)  # a normal end of the kernel, nobody pressed Cancel
        time.sleep(600)
""")


def _worker_of_a_session(tmp_path, how):
    script = tmp_path / "session.py"
    script.write_text(SESSION)
    session = subprocess.Popen([sys.executable, str(script), how], stdout=subprocess.PIPE, text=True,
                               start_new_session=True)
    line = session.stdout.readline()
    assert line.strip().isdigit(), f"the session did not start its worker (exit code {session.poll()})"
    return session, psutil.Process(int(line))


def _gone(process, timeout=30) -> bool:
    try:
        process.wait(timeout)
    except psutil.TimeoutExpired:
        process.kill()
        return False
    return True


def test_the_worker_exits_when_its_kernel_is_killed(tmp_path):
    session, worker = _worker_of_a_session(tmp_path, "kill")
    assert worker.is_running()
    session.send_signal(signal.SIGKILL)  # no atexit, no cleanup: only the worker's watchdog can notice
    session.wait(10)
    assert _gone(worker), "the worker outlived its killed kernel"


def test_the_worker_exits_when_its_kernel_ends(tmp_path):
    session, worker = _worker_of_a_session(tmp_path, "exit")
    assert session.wait(60) == 0
    assert _gone(worker), "the worker outlived its kernel"


def test_background_job_result_equals_a_direct_call(ring):
    options = {"sampling": {"n_landmarks": 20}, "band": {"method": "none"}}
    job = BackgroundJob(run_analysis, ring, options, 3).start()
    assert job.wait(120) == "done"
    direct = tdakit.analyze(ring, options, rng=3)
    assert np.array_equal(job.result.diagrams[1], direct.diagrams[1])
