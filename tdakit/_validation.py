"""Checks shared by every public function; all raise tdakit's own errors with one wording."""

from __future__ import annotations

import numbers
from collections.abc import Iterable

import numpy as np

from tdakit.errors import InvalidParameterError


def _describe(value: object) -> str:
    text = repr(value)
    if len(text) > 80:
        text = text[:77] + "..."
    return f"{text} (type {type(value).__name__})"


def fail(name: str, function: str, requirement: str, value: object) -> InvalidParameterError:
    """Build the standard error: parameter, function, requirement, received value."""
    return InvalidParameterError(
        f"The '{name}' parameter of {function} must be {requirement}. Got {_describe(value)} instead.",
        parameter=name,
    )


def _unwrap(value: object) -> object:
    """A 0-d numpy array of numbers stands for its number (``np.array(5)`` is 5); anything else is unchanged."""
    if isinstance(value, np.ndarray) and value.ndim == 0 and value.dtype.kind in "iuf":
        return value.item()
    return value


def check_int(
    value: object,
    name: str,
    function: str,
    *,
    low: int | None = None,
    high: int | None = None,
    note: str = "",
) -> int:
    """Return ``value`` as an int if it is an integer (not a bool) within [low, high]."""
    bounds = f"[{'-inf' if low is None else low}, {'inf' if high is None else high}]"
    requirement = f"an int in {bounds}" + (f" ({note})" if note else "")
    value = _unwrap(value)
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Integral):
        raise fail(name, function, requirement, value)
    value = int(value)
    if (low is not None and value < low) or (high is not None and value > high):
        raise fail(name, function, requirement, value)
    return value


def check_float(
    value: object,
    name: str,
    function: str,
    *,
    low: float | None = None,
    high: float | None = None,
    low_open: bool = False,
    high_open: bool = False,
    allow_inf: bool = False,
    note: str = "",
) -> float:
    """Return ``value`` as a float if it is a real number within the stated interval."""
    left = "(" if low_open else "["
    right = ")" if high_open else "]"
    bounds = f"{left}{'-inf' if low is None else low}, {'inf' if high is None else high}{right}"
    requirement = f"a real number in {bounds}" + (f" ({note})" if note else "")
    value = _unwrap(value)
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real):
        raise fail(name, function, requirement, value)
    value = float(value)
    if np.isnan(value) or (np.isinf(value) and not allow_inf):
        raise fail(name, function, requirement, value)
    too_low = low is not None and (value < low or (low_open and value == low))
    too_high = high is not None and (value > high or (high_open and value == high))
    if too_low or too_high:
        raise fail(name, function, requirement, value)
    return value


def check_choice(value: object, name: str, function: str, choices: Iterable[str]) -> str:
    """Return ``value`` if it is one of ``choices``; the error lists them sorted."""
    options = sorted(choices)
    if not isinstance(value, str) or value not in options:
        listed = ", ".join(repr(c) for c in options)
        raise fail(name, function, f"one of {listed}", value)
    return value


def check_bool(value: object, name: str, function: str) -> bool:
    """Return ``value`` if it is a bool (numpy bools accepted)."""
    if not isinstance(value, (bool, np.bool_)):
        raise fail(name, function, "True or False", value)
    return bool(value)


def check_rng(value: object, function: str) -> np.random.Generator:
    """Turn the ``rng`` argument into a Generator (int seed, SeedSequence, Generator or None).

    A Generator is used as it is (drawn from once, by the caller), so ``rng=seed`` and
    ``rng=numpy.random.default_rng(seed)`` give the same numbers.
    """
    value = _unwrap(value)
    ok = value is None or isinstance(value, (np.random.Generator, np.random.SeedSequence))
    ok = ok or (isinstance(value, numbers.Integral) and not isinstance(value, bool) and int(value) >= 0)
    if not ok:
        raise fail("rng", function, "None, a non-negative int, a SeedSequence or a numpy Generator", value)
    return np.random.default_rng(value)


def check_real(value: object, name: str, function: str, *, requirement: str = "a real number") -> float:
    """Return ``value`` as a float if it is a real, non-NaN number (numpy scalars included; not a bool)."""
    value = _unwrap(value)
    if isinstance(value, (bool, np.bool_)) or not isinstance(value, numbers.Real) or np.isnan(float(value)):
        raise fail(name, function, requirement, value)
    return float(value)


def check_dtm_power(value, function: str) -> float:
    """The DTM filtration's power p: 1 or inf (the two with closed-form edge values)."""
    value = _unwrap(value)
    if isinstance(value, str):
        value = {"1": 1.0, "inf": np.inf}.get(value.strip().lower(), value)
    number = isinstance(value, (int, float, np.integer, np.floating)) and not isinstance(value, bool)
    if number and value in (1, np.inf):
        return float(value)
    raise fail("dtm_power", function, "1 or inf (the power p of the DTM-weighted Rips filtration)", value)
