"""The schema of a run file (format version 1), checked field by field before anything is built.

:func:`check_text` bounds the JSON text before it is parsed (nesting depth); :func:`check_header`
reads the format name and version; :func:`array_specs` validates the ``arrays`` table; :func:`validate`
checks every field of the record and every array it refers to. Each failure raises
:class:`SchemaError` naming the field (dotted path, array names as in the file).
"""

from __future__ import annotations

import math
import numbers
import re

import numpy as np

__all__ = ["MAX_ARRAYS", "MAX_DEPTH", "MAX_DIMS", "ArraySpec", "SchemaError", "array_specs", "check_header",
           "check_text", "validate"]

RUN_FORMAT = "tdakit run"
MAX_DEPTH = 64  # written files nest at most ~8 deep (provenance.options.complex...)
MAX_ARRAYS = 4096
MAX_DIMS = 64  # homology dimensions in one file
_HEX = re.compile(r"[0-9a-f]{64}")
_STRING = re.compile(rb'"(?:[^"\\]|\\.)*"', re.DOTALL)


class SchemaError(Exception):
    """A field of the run file breaks the schema: ``field`` is its dotted path."""

    def __init__(self, field: str, problem: str) -> None:
        super().__init__(f"{field!r} {problem}" if field == "run.json" else f"field {field!r} of run.json {problem}")
        self.field = field


class ArraySpec:
    """One entry of the ``arrays`` table: declared shape, dtype and SHA-256."""

    def __init__(self, shape: tuple[int, ...], dtype: np.dtype, sha256: str) -> None:
        self.shape, self.dtype, self.sha256 = shape, dtype, sha256

    @property
    def n_bytes(self) -> int:
        return math.prod(self.shape) * self.dtype.itemsize


# -- before parsing ----------------------------------------------------------------------------
def check_text(raw: bytes) -> None:
    """Refuse JSON nested deeper than ``MAX_DEPTH`` (brackets outside strings), before ``json.loads`` recurses."""
    outside = _STRING.sub(b'""', raw)
    codes = np.frombuffer(outside, dtype=np.uint8)
    steps = np.zeros(codes.size, dtype=np.int32)
    steps[(codes == ord("[")) | (codes == ord("{"))] = 1
    steps[(codes == ord("]")) | (codes == ord("}"))] = -1
    depth = int(np.cumsum(steps).max()) if steps.size else 0
    if depth > MAX_DEPTH:
        raise SchemaError("run.json", f"is nested {depth} levels deep; a run record nests at most {MAX_DEPTH}")


# -- scalar checks ----------------------------------------------------------------------------
def _show(value) -> str:
    text = repr(value)
    return (text if len(text) <= 60 else text[:57] + "...") + f" (type {type(value).__name__})"


def _is_real(value) -> bool:
    return isinstance(value, numbers.Real) and not isinstance(value, bool)


def _is_int(value) -> bool:
    return isinstance(value, numbers.Integral) and not isinstance(value, bool)


def _get(record: dict, key: str, where: str):
    if not isinstance(record, dict):
        raise SchemaError(where, f"must be a JSON object; got {_show(record)}")
    if key not in record:
        raise SchemaError(f"{where}.{key}" if where else key, "is missing")
    return record[key]


def _dict(value, where: str) -> dict:
    if not isinstance(value, dict):
        raise SchemaError(where, f"must be a JSON object; got {_show(value)}")
    return value


def _text(value, where: str, optional: bool = False) -> str | None:
    if (value is None and optional) or isinstance(value, str):
        return value
    raise SchemaError(where, f"must be {'null or ' if optional else ''}a string; got {_show(value)}")


def _flag(value, where: str) -> bool:
    if not isinstance(value, bool):
        raise SchemaError(where, f"must be true or false; got {_show(value)}")
    return value


def _integer(value, where: str, low: int | None = 0, optional: bool = False) -> int | None:
    if value is None and optional:
        return None
    if not _is_int(value) or (low is not None and value < low):
        bound = "" if low is None else f" >= {low}"
        raise SchemaError(where, f"must be {'null or ' if optional else ''}an integer{bound}; got {_show(value)}")
    return int(value)


def _real(value, where: str, *, low: float | None = None, high: float | None = None, open_low=False,
          open_high=False, allow_inf=False, optional=False) -> float | None:
    if value is None and optional:
        return None
    ok = _is_real(value) and not math.isnan(value) and (allow_inf or math.isfinite(value))
    ok = ok and (low is None or (value > low if open_low else value >= low))
    ok = ok and (high is None or (value < high if open_high else value <= high))
    if not ok:
        left, right = ("(" if open_low else "["), (")" if open_high else "]")
        span = f" in {left}{'-inf' if low is None else f'{low:g}'}, {'inf' if high is None else f'{high:g}'}{right}"
        raise SchemaError(where, f"must be {'null or ' if optional else ''}a number{span}"
                                 f"{'' if allow_inf else ' (finite)'}; got {_show(value)}")
    return float(value)


# -- header and array table ---------------------------------------------------------------------
def check_header(record, newest: int) -> int:
    """The format version, after checking the record is a tdakit run (newer versions: ``SchemaError`` with 'newer')."""
    if not isinstance(record, dict):
        raise SchemaError("run.json", f"must hold a JSON object; got {_show(record)}")
    if record.get("format") != RUN_FORMAT:
        raise SchemaError("format", f"must be {RUN_FORMAT!r}; got {_show(record.get('format'))} (not a tdakit run)")
    version = record.get("format_version")
    if not _is_int(version) or version < 1:
        raise SchemaError("format_version", f"must be an integer >= 1; got {_show(version)}")
    return int(version)


def array_specs(record: dict) -> dict[str, ArraySpec]:
    """Validate the ``arrays`` table: every entry a shape (list of ints), a numeric dtype and a SHA-256."""
    table = _dict(_get(record, "arrays", ""), "arrays")
    if len(table) > MAX_ARRAYS:
        raise SchemaError("arrays", f"lists {len(table)} arrays; a run file holds at most {MAX_ARRAYS}")
    return {name: _spec(meta, f"arrays.{name}") for name, meta in table.items()}


def _spec(meta, where: str) -> ArraySpec:
    meta = _dict(meta, where)
    shape = _get(meta, "shape", where)
    if not isinstance(shape, list) or len(shape) > 32 or not all(_is_int(n) and n >= 0 for n in shape):
        raise SchemaError(f"{where}.shape", f"must be a list of at most 32 non-negative integers; got {_show(shape)}")
    text = _text(_get(meta, "dtype", where), f"{where}.dtype")
    try:
        dtype = np.dtype(text) if len(text) < 16 else None
    except (TypeError, ValueError, SyntaxError):
        dtype = None
    if dtype is None or dtype.kind not in "biuf":
        raise SchemaError(f"{where}.dtype", f"must name a boolean, integer or float type; got {_show(text)}")
    digest = _text(_get(meta, "sha256", where), f"{where}.sha256")
    if not _HEX.fullmatch(digest):
        raise SchemaError(f"{where}.sha256", f"must be 64 lower-case hex digits; got {_show(digest)}")
    return ArraySpec(tuple(int(n) for n in shape), dtype, digest)


# -- the record ---------------------------------------------------------------------------------
class _Arrays:
    """Resolves ``{"array": NAME}`` references and checks kind and shape."""

    def __init__(self, arrays: dict[str, np.ndarray]) -> None:
        self.arrays = arrays

    def get(self, value, where: str, kinds: str, ndim: int | None = None) -> np.ndarray:
        if not (isinstance(value, dict) and set(value) == {"array"} and isinstance(value["array"], str)):
            raise SchemaError(where, f"must be a reference {{\"array\": NAME}}; got {_show(value)}")
        name = value["array"]
        if name not in self.arrays:
            raise SchemaError(where, f"refers to array {name!r}, which the file does not hold")
        array = self.arrays[name]
        if array.dtype.kind not in kinds:
            wanted = {"f": "float", "i": "integer", "b": "boolean"}
            names = " or ".join(wanted.get(k, k) for k in kinds if k in wanted)
            raise SchemaError(where, f"must be a {names} array; got dtype {array.dtype}")
        if ndim is not None and array.ndim != ndim:
            raise SchemaError(where, f"must be a {ndim}-D array; got shape {array.shape}")
        return array


def check_references(value, arrays: dict, where: str = "") -> None:
    """Every ``{"array": NAME}`` anywhere in the record names an array the file holds."""
    if isinstance(value, dict):
        if set(value) == {"array"}:
            name = value["array"]
            if not isinstance(name, str) or name not in arrays:
                raise SchemaError(where or "run.json", f"refers to array {name!r}, which the file does not hold")
            return
        for key, item in value.items():
            check_references(item, arrays, f"{where}.{key}" if where else key)
    elif isinstance(value, list):
        for i, item in enumerate(value):
            check_references(item, arrays, f"{where}.{i}")


def validate(record: dict, arrays: dict[str, np.ndarray]) -> None:
    """Check every field of a version-1 record against the schema (arrays already loaded and checksummed)."""
    from tdakit.config import AnalysisOptions
    from tdakit.errors import TdakitError

    check_references(record, arrays)
    refs = _Arrays(arrays)
    _text(_get(record, "written_by", ""), "written_by")
    _integer(_get(record, "seed", ""), "seed")
    try:
        AnalysisOptions.from_dict(_dict(_get(record, "options", ""), "options"))
    except (TdakitError, TypeError, ValueError) as exc:
        raise SchemaError("options", f"is not a valid set of analysis options: {exc}") from None
    _timings(_get(record, "timings", ""))
    _peak_memory(_get(record, "peak_memory", ""))
    n_points = _provenance(_get(record, "provenance", ""))
    landmark_points = refs.get(_get(record, "landmark_points", ""), "landmark_points", "f", 2)
    _finite(landmark_points, "landmark_points")
    _preview(record, refs, n_points)
    n_dims = _diagrams(_get(record, "diagrams", ""), refs, "diagrams")
    marks = _get(record, "landmarks", "")
    if marks is not None:
        n_landmarks = _landmarks(marks, refs, n_points)
        if landmark_points.shape[0] != n_landmarks:
            raise SchemaError("landmark_points", f"has {landmark_points.shape[0]} rows for {n_landmarks} landmarks")
    band = _get(record, "band", "")
    if band is not None:
        _band(band, refs, n_dims)


def _timings(timings) -> None:
    for key, value in _dict(timings, "timings").items():
        _real(value, f"timings.{key}", low=0.0)


def _peak_memory(memory) -> None:
    memory = _dict(memory, "peak_memory")
    if "bytes" in memory:
        _real(memory["bytes"], "peak_memory.bytes", low=0.0)
    if "scope" in memory:
        _text(memory["scope"], "peak_memory.scope")


def _provenance(provenance) -> int | None:
    provenance = _dict(provenance, "provenance")
    source = provenance.get("input", {})
    source = _dict(source, "provenance.input")
    for key in ("unit", "source", "file_checksum", "fingerprint"):
        if key in source:
            _text(source[key], f"provenance.input.{key}", optional=True)
    if "read_options" in source:
        _dict(source["read_options"], "provenance.input.read_options")
    if "seed_scheme" in provenance:
        _integer(provenance["seed_scheme"], "provenance.seed_scheme", low=1)
    return _integer(source.get("n_points"), "provenance.input.n_points", optional=True)


def _preview(record, refs, n_points) -> None:
    indices = refs.get(_get(record, "preview_indices", ""), "preview_indices", "iu", 1)
    points = refs.get(_get(record, "preview_points", ""), "preview_points", "f", 2)
    if points.shape[0] != indices.shape[0]:
        raise SchemaError("preview_points", f"has {points.shape[0]} rows for {indices.shape[0]} preview indices")
    _finite(points, "preview_points")
    _index_range(indices, "preview_indices", n_points)


def _finite(array, where: str) -> None:
    if array.size and not np.isfinite(array).all():
        raise SchemaError(where, "holds NaN or infinite values")


def _index_range(indices, where: str, n_points: int | None) -> None:
    if not indices.size:
        return
    low, high = int(indices.min()), int(indices.max())
    if low < 0 or (n_points is not None and high >= n_points):
        bound = "" if n_points is None else f", {n_points - 1}"
        raise SchemaError(where, f"holds indices out of range [0{bound}] (from {low} to {high})")


def _diagrams(data, refs, where: str) -> int:
    data = _dict(data, where)
    lists = {}
    for key in ("pairs", "cutoff_flags", "birth_vertices", "death_vertices"):
        value = _get(data, key, where)
        if not isinstance(value, list) or not 1 <= len(value) <= MAX_DIMS:
            raise SchemaError(f"{where}.{key}", f"must be a list of 1 to {MAX_DIMS} array references; got "
                                                f"{_show(value)}")
        lists[key] = value
    n_dims = len(lists["pairs"])
    for key, value in lists.items():
        if len(value) != n_dims:
            raise SchemaError(f"{where}.{key}", f"has {len(value)} entries for {n_dims} homology dimensions")
    for k in range(n_dims):
        _dimension(lists, refs, where, k)
    _text(_get(data, "filtration", where), f"{where}.filtration")
    _text(_get(data, "units", where), f"{where}.units")
    _real(_get(data, "max_scale", where), f"{where}.max_scale", low=0.0, open_low=True, allow_inf=True)
    _integer(_get(data, "coefficient_field", where), f"{where}.coefficient_field", low=2)
    _diagram_params(_get(data, "params", where), f"{where}.params")
    return n_dims


def _dimension(lists, refs, where: str, k: int) -> None:
    pairs = refs.get(lists["pairs"][k], f"{where}.pairs.{k}", "f")
    if pairs.ndim != 2 or pairs.shape[1] != 2:
        raise SchemaError(f"{where}.pairs.{k}", f"must have shape (n, 2) of (birth, death) pairs; got shape "
                                                f"{pairs.shape}")
    births, deaths = pairs[:, 0], pairs[:, 1]
    if np.isnan(pairs).any():
        raise SchemaError(f"{where}.pairs.{k}", f"holds NaN at row {int(np.argwhere(np.isnan(pairs))[0, 0])}")
    if not np.isfinite(births).all():
        raise SchemaError(f"{where}.pairs.{k}", "holds an infinite birth")
    late = np.flatnonzero(births > deaths)
    if late.size:
        row = int(late[0])
        raise SchemaError(f"{where}.pairs.{k}", f"has birth {births[row]!r} after death {deaths[row]!r} at row {row}")
    m = pairs.shape[0]
    flags = refs.get(lists["cutoff_flags"][k], f"{where}.cutoff_flags.{k}", "b", 1)
    if flags.shape[0] != m:
        raise SchemaError(f"{where}.cutoff_flags.{k}", f"has {flags.shape[0]} entries for {m} pairs")
    if (flags & np.isfinite(deaths)).any():
        raise SchemaError(f"{where}.cutoff_flags.{k}", "marks a class with a finite death as alive at the cap")
    for key in ("birth_vertices", "death_vertices"):
        vertices = refs.get(lists[key][k], f"{where}.{key}.{k}", "iu", 2)
        if vertices.shape[0] != m:
            raise SchemaError(f"{where}.{key}.{k}", f"has {vertices.shape[0]} rows for {m} pairs")
        if vertices.size and int(vertices.min()) < -1:
            raise SchemaError(f"{where}.{key}.{k}", "holds vertex indices below -1")


def _diagram_params(params, where: str) -> None:
    params = _dict(params, where)
    for key in ("landmark_bound", "coverage_radius", "landmark_term"):
        if key in params:
            _real(params[key], f"{where}.{key}", low=0.0, allow_inf=True, optional=True)
    for key in ("landmark_method", "filtration", "witness"):
        if key in params:
            _text(params[key], f"{where}.{key}", optional=True)
    if "n_landmarks" in params:
        _integer(params["n_landmarks"], f"{where}.n_landmarks", optional=True)
    if params.get("metric") is not None:
        metric = _dict(params["metric"], f"{where}.metric")
        if "name" in metric:
            _text(metric["name"], f"{where}.metric.name")


def _landmarks(marks, refs, n_points) -> int:
    where = "landmarks"
    marks = _dict(marks, where)
    indices = refs.get(_get(marks, "indices", where), "landmarks.indices", "iu", 1)
    nearest = refs.get(_get(marks, "nearest", where), "landmarks.nearest", "iu", 1)
    distances = refs.get(_get(marks, "distance_to_nearest", where), "landmarks.distance_to_nearest", "f", 1)
    if n_points is None:
        n_points = nearest.shape[0]
    if indices.shape[0] < 1:
        raise SchemaError("landmarks.indices", "is empty")
    _index_range(indices, "landmarks.indices", n_points)
    if np.unique(indices).size != indices.size:
        raise SchemaError("landmarks.indices", "repeats a landmark")
    if nearest.shape[0] != n_points:
        raise SchemaError("landmarks.nearest", f"has {nearest.shape[0]} entries for {n_points} points")
    _index_range(nearest, "landmarks.nearest", indices.shape[0])
    if distances.shape != nearest.shape:
        raise SchemaError("landmarks.distance_to_nearest", f"has shape {distances.shape}; expected {nearest.shape}")
    if distances.size and not (np.isfinite(distances).all() and distances.min() >= 0):
        raise SchemaError("landmarks.distance_to_nearest", "must hold finite non-negative distances")
    _real(_get(marks, "coverage_radius", where), "landmarks.coverage_radius", low=0.0)
    _text(_get(marks, "method", where), "landmarks.method")
    _dict(_get(marks, "params", where), "landmarks.params")
    return int(indices.shape[0])


def _band(band, refs, n_dims: int) -> None:
    where = "band"
    band = _dict(band, where)
    _text(_get(band, "method", where), "band.method")
    _real(_get(band, "level", where), "band.level", low=0.0, high=1.0, open_low=True, open_high=True)
    for key in ("target", "validity", "statement", "landmark_handling"):
        _text(_get(band, key, where), f"band.{key}")
    refs.get(_get(band, "replicates", where), "band.replicates", "fiub")
    _integer(_get(band, "seed", where), "band.seed")
    params = _dict(_get(band, "params", where), "band.params")
    for key in ("data_scale", "landmark_term", "stability_constant", "coverage_radius"):
        if key in params:
            _real(params[key], f"band.params.{key}", low=0.0, allow_inf=True, optional=True)
    _dict(_get(band, "curves", where), "band.curves")
    if "calls" in band:
        _flag(band["calls"], "band.calls")
    if "no_call_reason" in band:
        _text(band["no_call_reason"], "band.no_call_reason")
    if _flag(_get(band, "same_diagrams", where), "band.same_diagrams"):
        dims = n_dims
    else:
        own = _get(band, "diagrams", where)
        if own is None:
            raise SchemaError("band.diagrams", "is missing although band.same_diagrams is false")
        dims = _diagrams(own, refs, "band.diagrams")
    radii = _get(band, "radii", where)
    if not isinstance(radii, list) or len(radii) != dims:
        raise SchemaError("band.radii", f"must be a list of {dims} radii (one per homology dimension); got "
                                        f"{_show(radii)}")
    for k, radius in enumerate(radii):
        _real(radius, f"band.radii.{k}", low=0.0, allow_inf=True)
