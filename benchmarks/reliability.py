"""Regenerate the README's reliability table from the hostile-input battery in ``tests/hostile``.

Run: python benchmarks/reliability.py [--timeout SECONDS] [--tests tests/hostile] [pytest options...]

It runs pytest over every ``test_*.py`` file in ``tests/hostile`` (files other helpers add are picked up
without changes here) with this file loaded as a pytest plugin, records each case's outcome, and prints a
markdown table:

    | entry point | cases tried | crashes | hangs | silent wrong answers |

How a case is assigned to an entry point (first rule that applies):

1. the marker ``@pytest.mark.entry("name")`` on the test;
2. a parametrize id of the form ``"name: description"`` (the text before the colon), as in
   ``tests/hostile/test_core_entry.py``;
3. the test file: ``test_readers.py`` -> ``readers``, ``test_cli_analyze.py`` -> ``cli analyze``
   (``test_`` dropped, underscores as spaces).

How an outcome is counted:

- passed: a case tried, nothing wrong;
- failed (an error in the test's setup or call): a **crash**, unless the test carries the marker ``hang``
  (counted as a hang) or ``silent`` (counted as a silent wrong answer): such tests check a bound or a known
  answer, so their failure means the library hung or answered wrongly;
- ran past ``--timeout`` seconds (default 120; the case is interrupted with SIGALRM): a **hang**;
- skipped: not tried (listed below the table).

The markers are registered in ``tests/hostile/conftest.py``. The exit status is 1 when any count is not 0.
"""

from __future__ import annotations

import argparse
import json
import os
import re
import signal
import subprocess
import sys
import tempfile
from collections import defaultdict
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent
_RECORDS_ENV = "TDAKIT_RELIABILITY_RECORDS"
_TIMEOUT_ENV = "TDAKIT_RELIABILITY_TIMEOUT"


# -- the pytest plugin (loaded in the child pytest process with -p reliability) -------------------------------
class CaseTimeout(BaseException):
    """Raised inside a case that ran past the timeout (a BaseException, so library code cannot swallow it)."""


def _alarm(signum, frame):
    raise CaseTimeout()


def _entry_point(item) -> str:
    marker = item.get_closest_marker("entry")
    if marker is not None and marker.args:
        return str(marker.args[0])
    callspec = getattr(item, "callspec", None)
    if callspec is not None and ": " in callspec.id:
        return callspec.id.split(": ", 1)[0]
    stem = Path(str(item.fspath)).stem
    return re.sub(r"^test_", "", stem).replace("_", " ")


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_call(item):
    seconds = int(os.environ.get(_TIMEOUT_ENV, "0"))
    if seconds > 0 and hasattr(signal, "SIGALRM"):
        previous = signal.signal(signal.SIGALRM, _alarm)
        signal.alarm(seconds)
        try:
            yield
        finally:
            signal.alarm(0)
            signal.signal(signal.SIGALRM, previous)
    else:
        yield


@pytest.hookimpl(hookwrapper=True)
def pytest_runtest_makereport(item, call):
    outcome = yield
    report = outcome.get_result()
    path = os.environ.get(_RECORDS_ENV)
    if not path:
        return
    failed = report.failed and report.when in ("setup", "call")
    timed_out = call.excinfo is not None and call.excinfo.errisinstance(CaseTimeout)
    if report.when == "call" or failed or report.skipped:
        record = {"nodeid": item.nodeid, "entry": _entry_point(item), "when": report.when,
                  "outcome": "hang" if timed_out else report.outcome,
                  "hang": item.get_closest_marker("hang") is not None,
                  "silent": item.get_closest_marker("silent") is not None}
        with open(path, "a", encoding="utf-8") as stream:
            stream.write(json.dumps(record) + "\n")


# -- the script ------------------------------------------------------------------------------------------------
def classify(records: list[dict]) -> tuple[dict, list[str]]:
    """Per entry point: cases tried, crashes, hangs, silent wrong answers; and the skipped cases' ids."""
    table: dict[str, dict[str, int]] = defaultdict(lambda: {"tried": 0, "crashes": 0, "hangs": 0, "silent": 0})
    skipped, seen = [], {}
    for record in records:  # one verdict per case: a failed setup or call wins over a later teardown record
        previous = seen.get(record["nodeid"])
        if previous is None or previous["outcome"] in ("passed", "skipped"):
            seen[record["nodeid"]] = record
    for record in seen.values():
        if record["outcome"] == "skipped":
            skipped.append(record["nodeid"])
            continue
        row = table[record["entry"]]
        row["tried"] += 1
        if record["outcome"] == "hang" or (record["outcome"] == "failed" and record["hang"]):
            row["hangs"] += 1
        elif record["outcome"] == "failed" and record["silent"]:
            row["silent"] += 1
        elif record["outcome"] == "failed":
            row["crashes"] += 1
    return dict(table), skipped


def markdown(table: dict) -> str:
    lines = ["| entry point | cases tried | crashes | hangs | silent wrong answers |",
             "|---|---:|---:|---:|---:|"]
    total = {"tried": 0, "crashes": 0, "hangs": 0, "silent": 0}
    for name in sorted(table, key=str.lower):
        row = table[name]
        lines.append(f"| `{name}` | {row['tried']} | {row['crashes']} | {row['hangs']} | {row['silent']} |")
        for key in total:
            total[key] += row[key]
    lines.append(f"| **all** | **{total['tried']}** | **{total['crashes']}** | **{total['hangs']}** | "
                 f"**{total['silent']}** |")
    return "\n".join(lines)


def run(tests: str, timeout: int, extra: list[str]) -> list[dict]:
    with tempfile.TemporaryDirectory() as folder:
        records = Path(folder) / "records.jsonl"
        env = {**os.environ, _RECORDS_ENV: str(records), _TIMEOUT_ENV: str(timeout),
               "PYTHONPATH": os.pathsep.join(filter(None, [str(Path(__file__).parent),
                                                           os.environ.get("PYTHONPATH", "")]))}
        command = [sys.executable, "-m", "pytest", "-q", "-p", "reliability", "-p", "no:cacheprovider", tests, *extra]
        subprocess.run(command, cwd=ROOT, env=env, check=False)
        if not records.exists():
            return []
        return [json.loads(line) for line in records.read_text(encoding="utf-8").splitlines() if line.strip()]


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--tests", default="tests/hostile", help="folder of hostile cases (default tests/hostile)")
    parser.add_argument("--timeout", type=int, default=120, help="seconds before a case counts as a hang")
    args, extra = parser.parse_known_args(argv)
    records = run(args.tests, args.timeout, extra)
    if not records:
        print("No hostile case ran (is pytest importable and the folder right?).", file=sys.stderr)
        return 1
    table, skipped = classify(records)
    print()
    print(markdown(table))
    if skipped:
        print(f"\n{len(skipped)} case(s) skipped (not counted): " + ", ".join(skipped[:10])
              + (" ..." if len(skipped) > 10 else ""))
    bad = any(row["crashes"] or row["hangs"] or row["silent"] for row in table.values())
    return 1 if bad else 0


if __name__ == "__main__":
    sys.exit(main())
