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
the target only when complete (:func:`tdakit.io._atomic.atomic_output`), so a crash
mid-write leaves any earlier file intact.

Reading never trusts the file: only a regular file is opened (never a pipe), member
sizes are bounded from the ZIP directory before anything is inflated (``run.json`` at
most ``MAX_RECORD_BYTES``; each array's declared size must match its member), the JSON
nesting depth is bounded before parsing, and every field and array is checked against the
schema (:mod:`tdakit.io._runschema`) before anything is built. Members other than
``run.json`` and the listed arrays are ignored. Every failure is an
:class:`~tdakit.errors.InvalidDataError` naming the file and the field.
"""

from __future__ import annotations

import hashlib
import io
import json
import os
import zipfile
from pathlib import Path

import numpy as np

from tdakit._validation import fail
from tdakit.errors import DataFileNotFoundError, InvalidDataError, TdakitError
from tdakit.io import _runschema as schema
from tdakit.io._atomic import atomic_output
from tdakit.io._binary import ZIP_ERRORS, check_member, npy_from_bytes, open_zip, read_member
from tdakit.io._files import as_path, describe_size, open_regular

__all__ = ["save_run", "load_run", "RUN_FORMAT_VERSION", "RUN_SUFFIX"]

RUN_FORMAT = "tdakit run"
RUN_FORMAT_VERSION = 1
RUN_SUFFIX = ".tdkrun"
MAX_RECORD_BYTES = 32 * 2**20  # run.json: written files hold ~10-100 kB
_NPY_HEADER_MAX = 65_536 + 16  # a .npy header is at most 64 kB (numpy's own limit) plus the magic


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
    with atomic_output(path, what="run file") as temporary:
        with open(temporary, "wb") as stream:
            with zipfile.ZipFile(stream, "w", compression=zipfile.ZIP_STORED) as archive:
                archive.writestr("run.json", json.dumps(record, indent=1))
                for name, array in arrays.items():
                    buffer = io.BytesIO()
                    np.save(buffer, array, allow_pickle=False)
                    archive.writestr(f"arrays/{name}.npy", buffer.getvalue())


def _corrupt(path, reason: str) -> InvalidDataError:
    return InvalidDataError(f"The run file {str(path)!r} is damaged or not a tdakit run file: {reason}. "
                            f"Write it again with `tdakit analyze` or RunResult.save.", parameter="path")


def _restate(path, exc: InvalidDataError) -> InvalidDataError:
    """A reading helper's error restated as a run-file error (its own file label removed)."""
    label = f"The run file {str(path)!r}"
    text = str(exc)
    text = text[len(label):].lstrip(": ,") if text.startswith(label) else text
    return _corrupt(path, text.rstrip("."))


def _member(archive, name: str, path, size: int, limit: int | None = None) -> bytes:
    try:
        info = archive.getinfo(name)
    except KeyError:
        raise _corrupt(path, f"missing part {name!r}") from None
    label = f"The run file {str(path)!r}"
    check_member(info, size, label, limit=limit, parameter="path")
    return read_member(archive, info, label, parameter="path")


def _read_record(archive, path, size: int) -> dict:
    raw = _member(archive, "run.json", path, size, limit=MAX_RECORD_BYTES)
    try:
        schema.check_text(raw)
        record = json.loads(raw.decode("utf-8"))
    except schema.SchemaError as exc:
        raise _corrupt(path, str(exc)) from None
    except (UnicodeDecodeError, ValueError, RecursionError) as exc:
        raise _corrupt(path, f"'run.json' is not valid JSON ({str(exc)[:120]})") from None
    try:
        version = schema.check_header(record, RUN_FORMAT_VERSION)
    except schema.SchemaError as exc:
        raise _corrupt(path, str(exc)) from None
    if version > RUN_FORMAT_VERSION:
        raise InvalidDataError(
            f"The run file {str(path)!r} has format version {version} (written by {str(record.get('written_by'))[:60]}"
            f"); this tdakit reads versions up to {RUN_FORMAT_VERSION}. Upgrade tdakit to read it.", parameter="path")
    return record


def _read_array(archive, name: str, spec, path, size: int) -> np.ndarray:
    member = f"arrays/{name}.npy"
    try:
        info = archive.getinfo(member)
    except KeyError:
        raise _corrupt(path, f"array {name!r} is listed but its member {member!r} is missing") from None
    if not spec.n_bytes <= info.file_size <= spec.n_bytes + _NPY_HEADER_MAX:
        raise _corrupt(path, f"array {name!r} declares shape {spec.shape} and type {spec.dtype} "
                             f"({describe_size(spec.n_bytes)}) but its member holds {describe_size(info.file_size)}; "
                             f"it was not read")
    data = _member(archive, member, path, size)
    array = npy_from_bytes(data, f"The run file {str(path)!r}: array {name!r}", parameter="path")
    if array.shape != spec.shape or array.dtype != spec.dtype:
        raise _corrupt(path, f"array {name!r} has shape {array.shape} and type {array.dtype} where the arrays "
                             f"table declares shape {spec.shape} and type {spec.dtype}")
    if hashlib.sha256(np.ascontiguousarray(array).tobytes()).hexdigest() != spec.sha256:
        raise _corrupt(path, f"array {name!r} does not match its recorded checksum")
    return array


def _read_archive(path: Path) -> tuple[dict, dict]:
    with open_regular(path, "run file", "path") as handle:
        size = os.fstat(handle.fileno()).st_size
        try:
            with open_zip(handle, f"The run file {str(path)!r}", "path") as archive:
                record = _read_record(archive, path, size)
                try:
                    specs = schema.array_specs(record)
                except schema.SchemaError as exc:
                    raise _corrupt(path, str(exc)) from None
                arrays = {name: _read_array(archive, name, spec, path, size) for name, spec in specs.items()}
        except InvalidDataError as exc:
            if "Write it again" in str(exc) or "Upgrade tdakit" in str(exc):
                raise
            raise _restate(path, exc) from None
        except ZIP_ERRORS as exc:  # anything else the ZIP layer raises on a damaged file
            raise _corrupt(path, f"unreadable content ({type(exc).__name__}: {str(exc)[:120]})") from None
    try:
        schema.validate(record, arrays)
    except schema.SchemaError as exc:
        raise _corrupt(path, str(exc)) from None
    return record, arrays


def load_run(path):
    """Read a run file written by :func:`save_run`; figures and tables need no recomputation.

    Parameters
    ----------
    path : str, bytes or path
        The ``.tdkrun`` file.

    Returns
    -------
    RunResult

    Raises
    ------
    DataFileNotFoundError
        No such file.
    InvalidDataError
        The file is not a regular file, is truncated, corrupt, not a run file, from a newer format
        version, inflates beyond its bounds, or a field or array breaks the format's schema
        (:mod:`tdakit.io._runschema`); the message names the file and the field.
    """
    if not isinstance(path, (str, bytes, os.PathLike)):
        raise fail("path", "load_run", "a file path", path)
    path = as_path(path)
    record, arrays = _read_archive(path)
    try:
        return _build(_unpack(record, arrays))
    except (KeyError, TypeError, ValueError, AttributeError, TdakitError) as exc:
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
