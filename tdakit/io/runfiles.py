"""Run files: one analysis on disk, readable metadata plus binary arrays, written atomically.

Format (version 1)
------------------
A ZIP archive (stored, not compressed) with the suffix ``.tdkrun`` holding

``run.json``
    UTF-8 JSON: ``"format": "tdakit run"``, ``"format_version"``, ``"written_by"``,
    the options, seed, timings, peak memory, provenance, and the scalar fields of the
    landmarks, diagrams and band. Wherever an array belongs, the JSON holds
    ``{"array": NAME}``. Non-finite numbers are written as ``Infinity`` / ``NaN``
    (Python's JSON dialect). ``"arrays"`` lists every array with its shape, dtype
    and SHA-256.
``arrays/NAME.npy``
    Each array in NumPy's ``.npy`` format (no pickled objects).

The file is written to a temporary name in the target folder and renamed over
the target only when complete, so a crash mid-write leaves any earlier file
intact. Reading checks the format name and version, the ZIP checksums and each
array's SHA-256.
"""

from __future__ import annotations

import hashlib
import io
import json
import os
import tempfile
import zipfile
from pathlib import Path

import numpy as np

from tdakit._validation import fail
from tdakit.errors import DataFileNotFoundError, InvalidDataError

__all__ = ["save_run", "load_run", "RUN_FORMAT_VERSION", "RUN_SUFFIX"]

RUN_FORMAT = "tdakit run"
RUN_FORMAT_VERSION = 1
RUN_SUFFIX = ".tdkrun"


class _Packer:
    """Turns nested values into JSON with arrays set aside under generated names."""

    def __init__(self):
        self.arrays: dict[str, np.ndarray] = {}

    def pack(self, value, name: str):
        if isinstance(value, np.ndarray):
            key = name.replace("/", ".")
            self.arrays[key] = np.ascontiguousarray(value)
            return {"array": key}
        if isinstance(value, dict):
            return {str(k): self.pack(v, f"{name}.{k}" if name else str(k)) for k, v in value.items()}
        if isinstance(value, (list, tuple)):
            return [self.pack(v, f"{name}.{i}") for i, v in enumerate(value)]
        if isinstance(value, np.generic):
            return value.item()
        return value


def _unpack(value, arrays: dict):
    if isinstance(value, dict):
        if set(value) == {"array"}:
            return arrays[value["array"]]
        return {k: _unpack(v, arrays) for k, v in value.items()}
    if isinstance(value, list):
        return [_unpack(v, arrays) for v in value]
    return value


def _diagrams_record(diagrams) -> dict:
    return {"pairs": list(diagrams.pairs), "cutoff_flags": list(diagrams.cutoff_flags),
            "birth_vertices": list(diagrams.birth_vertices), "death_vertices": list(diagrams.death_vertices),
            "filtration": diagrams.filtration, "units": diagrams.units, "max_scale": diagrams.max_scale,
            "coefficient_field": diagrams.coefficient_field, "params": diagrams.params}


def _record(run) -> dict:
    marks, band = run.landmarks, run.band
    record = {"format": RUN_FORMAT, "format_version": RUN_FORMAT_VERSION,
              "written_by": f"tdakit {run.provenance.get('versions', {}).get('tdakit', '?')}",
              "seed": run.seed, "options": run.options.to_dict(), "timings": run.timings,
              "peak_memory": run.peak_memory, "provenance": run.provenance,
              "landmark_points": run.landmark_points, "preview_indices": run.preview_indices,
              "preview_points": run.preview_points, "diagrams": _diagrams_record(run.diagrams)}
    record["landmarks"] = None if marks is None else {
        "indices": marks.indices, "coverage_radius": marks.coverage_radius, "nearest": marks.nearest,
        "distance_to_nearest": marks.distance_to_nearest, "method": marks.method, "params": marks.params}
    record["band"] = None if band is None else {
        "method": band.method, "level": band.level, "radii": list(band.radii), "target": band.target,
        "validity": band.validity, "statement": band.statement, "landmark_handling": band.landmark_handling,
        "replicates": band.replicates, "seed": band.seed, "params": band.params, "curves": band.curves,
        "calls": band.calls, "no_call_reason": band.no_call_reason, "same_diagrams": band.diagrams is run.diagrams,
        "diagrams": None if band.diagrams is run.diagrams else _diagrams_record(band.diagrams)}
    return record


def save_run(run, path) -> Path:
    """Write a run to ``path`` (suffix ``.tdkrun`` added if missing), atomically.

    Parameters
    ----------
    run : RunResult
    path : str or path

    Returns
    -------
    Path
        Where the file was written.
    """
    from tdakit.pipeline import RunResult

    if not isinstance(run, RunResult):
        raise fail("run", "save_run", "a RunResult from tdakit.analyze", run)
    if not isinstance(path, (str, os.PathLike)):
        raise fail("path", "save_run", "a file path", path)
    path = Path(path)
    if path.suffix != RUN_SUFFIX:
        path = path.with_name(path.name + RUN_SUFFIX)
    if not path.parent.is_dir():
        raise DataFileNotFoundError(f"The folder {str(path.parent)!r} for the run file does not exist.",
                                    parameter="path")
    packer = _Packer()
    record = packer.pack(_record(run), "")
    record["arrays"] = {name: {"shape": list(a.shape), "dtype": a.dtype.str,
                               "sha256": hashlib.sha256(a.tobytes()).hexdigest()} for name, a in packer.arrays.items()}
    _write_atomically(path, record, packer.arrays)
    return path


def _write_atomically(path: Path, record: dict, arrays: dict) -> None:
    handle, temporary = tempfile.mkstemp(dir=path.parent, prefix=f".{path.name}.", suffix=".partial")
    try:
        with os.fdopen(handle, "wb") as stream:
            with zipfile.ZipFile(stream, "w", compression=zipfile.ZIP_STORED) as archive:
                archive.writestr("run.json", json.dumps(record, indent=1))
                for name, array in arrays.items():
                    buffer = io.BytesIO()
                    np.save(buffer, array, allow_pickle=False)
                    archive.writestr(f"arrays/{name}.npy", buffer.getvalue())
            stream.flush()
            os.fsync(stream.fileno())
        os.replace(temporary, path)
    except BaseException:
        Path(temporary).unlink(missing_ok=True)
        raise


def _corrupt(path, reason: str) -> InvalidDataError:
    return InvalidDataError(f"The run file {str(path)!r} is damaged or not a tdakit run file: {reason}. "
                            f"Write it again with `tdakit analyze` or RunResult.save.", parameter="path")


def _read_archive(path: Path) -> tuple[dict, dict]:
    try:
        with zipfile.ZipFile(path) as archive:
            bad = archive.testzip()
            if bad is not None:
                raise _corrupt(path, f"member {bad!r} fails its checksum")
            record = json.loads(archive.read("run.json"))
            _check_version(path, record)
            arrays = {name: np.load(io.BytesIO(archive.read(f"arrays/{name}.npy")), allow_pickle=False)
                      for name in record.get("arrays", {})}
    except zipfile.BadZipFile as exc:
        raise _corrupt(path, f"not a complete ZIP archive ({exc}); it may be truncated") from None
    except KeyError as exc:
        raise _corrupt(path, f"missing part {exc}") from None
    except (ValueError, EOFError, OSError) as exc:
        raise _corrupt(path, f"unreadable content ({exc})") from None
    for name, meta in record["arrays"].items():
        if hashlib.sha256(np.ascontiguousarray(arrays[name]).tobytes()).hexdigest() != meta["sha256"]:
            raise _corrupt(path, f"array {name!r} does not match its recorded checksum")
    return record, arrays


def _check_version(path, record) -> None:
    if not isinstance(record, dict) or record.get("format") != RUN_FORMAT:
        raise _corrupt(path, "run.json does not describe a tdakit run")
    version = record.get("format_version")
    if not isinstance(version, int) or version < 1:
        raise _corrupt(path, f"invalid format version {version!r}")
    if version > RUN_FORMAT_VERSION:
        raise InvalidDataError(
            f"The run file {str(path)!r} has format version {version} (written by {record.get('written_by')}); "
            f"this tdakit reads versions up to {RUN_FORMAT_VERSION}. Upgrade tdakit to read it.", parameter="path")


def load_run(path):
    """Read a run file written by :func:`save_run`; figures and tables need no recomputation.

    Raises
    ------
    DataFileNotFoundError
        No such file.
    InvalidDataError
        The file is truncated, corrupt, not a run file, or from a newer format version.
    """
    if not isinstance(path, (str, os.PathLike)):
        raise fail("path", "load_run", "a file path", path)
    path = Path(path)
    if not path.is_file():
        raise DataFileNotFoundError(f"No run file at {str(path)!r}.", parameter="path")
    record, arrays = _read_archive(path)
    try:
        return _build(_unpack(record, arrays))
    except (KeyError, TypeError, ValueError) as exc:
        raise _corrupt(path, f"incomplete record ({exc!r})") from None


def _diagrams(data):
    from tdakit.core.topology.diagrams import Diagrams

    return Diagrams(tuple(data["pairs"]), tuple(data["cutoff_flags"]), tuple(data["birth_vertices"]),
                    tuple(data["death_vertices"]), data["filtration"], data["units"], float(data["max_scale"]),
                    int(data["coefficient_field"]), data["params"])


def _build(data):
    from tdakit.config import AnalysisOptions
    from tdakit.core.geometry.landmarks import Landmarks
    from tdakit.core.inference.bands import Band
    from tdakit.pipeline import RunResult

    diagrams = _diagrams(data["diagrams"])
    marks = data["landmarks"]
    if marks is not None:
        marks = Landmarks(marks["indices"], float(marks["coverage_radius"]), marks["nearest"],
                          marks["distance_to_nearest"], marks["method"], marks["params"])
    band = data["band"]
    if band is not None:
        band_diagrams = diagrams if band["same_diagrams"] else _diagrams(band["diagrams"])
        band = Band(band["method"], float(band["level"]), tuple(float(r) for r in band["radii"]), band_diagrams,
                    band["target"], band["validity"], band["statement"], band["landmark_handling"],
                    band["replicates"], int(band["seed"]), band["params"], band["curves"],
                    bool(band.get("calls", True)), str(band.get("no_call_reason", "")))
    return RunResult(AnalysisOptions.from_dict(data["options"]), int(data["seed"]), marks, data["landmark_points"],
                     data["preview_indices"], data["preview_points"], diagrams, band, data["timings"],
                     data["peak_memory"], data["provenance"])
