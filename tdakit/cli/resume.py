"""Checkpoints of the command line: what an unfinished run was, and whether a rerun may reuse its work.

``analyze`` and ``study`` keep the finished replicates (settings) in ``<out>/<stem>.checkpoint.npz`` and
describe the run beside it in ``<out>/<stem>.checkpoint.json``: the input file's checksum, the options and the
seed. A rerun of the same command resumes automatically (a run without ``--seed`` takes the unfinished run's
seed), and gives the same numbers as an uninterrupted run: replicate i always draws from the i-th child of the
seed. A checkpoint made with other data, options or seed is refused with what differs; ``--fresh`` discards
it. Both files are removed once the outputs are written. The memory budget and the number of workers do not
change the numbers and may differ between the runs.
"""

from __future__ import annotations

import datetime
import json
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from tdakit.errors import InvalidDataError

IGNORED = ("memory_budget",)  # options that never change a number


@dataclass
class Checkpoint:
    """Where a command keeps its finished work, and the run it belongs to."""

    data: Path
    manifest: Path
    seed: int
    reused: int = 0
    resumed: bool = False

    def remove(self) -> None:
        self.data.unlink(missing_ok=True)
        self.manifest.unlink(missing_ok=True)

    def forget_if_empty(self) -> None:
        """After a failure: without finished work there is nothing to resume, so no description either."""
        if not self.data.is_file():
            self.manifest.unlink(missing_ok=True)


def _strip(options: dict) -> dict:
    out = {}
    for key, value in options.items():
        if key in IGNORED:
            continue
        out[key] = _strip(value) if isinstance(value, dict) else value
    return out


def _describe(command: str, cloud, options: dict, seed: int | None) -> dict:
    return {"command": command, "input": str(cloud.source), "input_checksum": cloud.source_checksum,
            "fingerprint": cloud.fingerprint, "options": _strip(json.loads(json.dumps(options, default=str))),
            "seed": seed}


def _differences(old: dict, new: dict, prefix: str = "") -> list[str]:
    keys = sorted(set(old) | set(new))
    found = []
    for key in keys:
        a, b = old.get(key), new.get(key)
        if isinstance(a, dict) and isinstance(b, dict):
            found += _differences(a, b, f"{prefix}{key}.")
        elif a != b:
            found.append(f"{prefix}{key} ({a!r} then, {b!r} now)")
    return found


def _count(path: Path) -> int:
    if not path.is_file():
        return 0
    try:
        with np.load(path, allow_pickle=False) as data:
            return int(np.asarray(data["indices"]).size)
    except (OSError, ValueError, KeyError, TypeError, EOFError, AttributeError):
        return 0  # the band's own reader names the damaged file


def open_checkpoint(out: Path, stem: str, command: str, cloud, options: dict, seed: int | None, *,
                    fresh: bool = False) -> Checkpoint:
    """The checkpoint of this run: resumed when one with the same input, options and seed is there.

    Raises
    ------
    InvalidDataError
        The checkpoint in ``out`` was made with other data, options or seed.
    """
    data, manifest = Path(out) / f"{stem}.checkpoint.npz", Path(out) / f"{stem}.checkpoint.json"
    if fresh:
        data.unlink(missing_ok=True)
        manifest.unlink(missing_ok=True)
    wanted = _describe(command, cloud, options, seed)
    recorded = _read(manifest, strict=data.is_file()) if manifest.is_file() else None
    if recorded is not None:
        compare = dict(wanted, seed=recorded["seed"] if seed is None else seed)
        differ = _differences({k: recorded.get(k) for k in compare if k != "input"},
                              {k: v for k, v in compare.items() if k != "input"})
        if not differ:
            return Checkpoint(data, manifest, recorded["seed"], _count(data), resumed=data.is_file())
        if data.is_file():  # finished work of another run: never mix it in, never drop it silently
            raise InvalidDataError(
                f"The checkpoint {str(data)!r} belongs to an unfinished run with other settings: "
                f"{'; '.join(differ[:4])}. Rerun that command to finish it, or add --fresh to discard it and "
                f"start over.", parameter="checkpoint")
    if seed is None:
        seed = int(np.random.default_rng().integers(2**63 - 1))
    record = dict(wanted, seed=seed, created=datetime.datetime.now(datetime.timezone.utc).isoformat(timespec="seconds"))
    _write_json(manifest, record)
    data.unlink(missing_ok=True)  # replicates without a description cannot be trusted
    return Checkpoint(data, manifest, seed)


def _read(manifest: Path, strict: bool) -> dict | None:
    try:
        recorded = json.loads(manifest.read_text())
        if not isinstance(recorded, dict) or not isinstance(recorded.get("seed"), int):
            raise ValueError("not a checkpoint description")
    except (OSError, ValueError, UnicodeDecodeError, RecursionError) as exc:
        if not strict:  # no finished work depends on it: start afresh
            return None
        raise InvalidDataError(f"The checkpoint description {str(manifest)!r} cannot be read ({exc}); rerun "
                               f"with --fresh to start over.", parameter="checkpoint") from None
    return recorded


def _write_json(path: Path, record: dict) -> None:
    from tdakit.io._atomic import atomic_output

    with atomic_output(path, what="checkpoint description") as temporary:
        temporary.write_text(json.dumps(record, indent=1))
