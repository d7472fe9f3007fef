"""The package's own error type and the small validators every entry point uses.

Every message is one line that names the parameter, the value received and
what is allowed, so the CLI can print it as it is and exit with a non-zero code.
"""

from __future__ import annotations

import difflib
import math
from typing import Iterable

import numpy as np

__all__ = [
    "NanoabsError",
    "check_positive",
    "check_nonnegative",
    "check_finite_array",
    "check_choice",
    "check_range",
    "suggest",
]


class NanoabsError(ValueError):
    """Invalid input or an impossible request; the message is one line.

    Subclasses ``ValueError`` so callers that already catch ``ValueError`` keep
    working. ``exit_code`` is what the CLI returns for it (see README, "Exit codes").
    """

    exit_code = 2

    def __init__(self, message: str):
        super().__init__(" ".join(str(message).split()))


class DataError(NanoabsError):
    """A data file (material table, spectrum CSV, study file) is unreadable or malformed."""

    exit_code = 3


def _fmt(value) -> str:
    if isinstance(value, float):
        return f"{value:g}"
    if isinstance(value, np.ndarray) and value.size > 6:
        return f"array(shape={value.shape})"
    return repr(value) if isinstance(value, str) else str(value)


def check_positive(name: str, value, *, unit: str = "") -> np.ndarray:
    """Return ``value`` as a float array; raise unless every element is finite and > 0."""
    arr = _as_float(name, value)
    bad = ~np.isfinite(arr) | (arr <= 0)
    if np.any(bad):
        v = arr[bad].flat[0] if arr.ndim else arr
        raise NanoabsError(
            f"{name} = {_fmt(float(v))}{' ' + unit if unit else ''}: must be a finite number > 0"
        )
    return arr


def check_nonnegative(name: str, value, *, unit: str = "") -> np.ndarray:
    """Return ``value`` as a float array; raise unless every element is finite and >= 0."""
    arr = _as_float(name, value)
    bad = ~np.isfinite(arr) | (arr < 0)
    if np.any(bad):
        v = arr[bad].flat[0] if arr.ndim else arr
        raise NanoabsError(
            f"{name} = {_fmt(float(v))}{' ' + unit if unit else ''}: must be a finite number >= 0"
        )
    return arr


def check_range(name: str, value, lo: float, hi: float, *, unit: str = "") -> np.ndarray:
    """Return ``value`` as a float array; raise unless lo <= value <= hi everywhere."""
    arr = _as_float(name, value)
    bad = ~np.isfinite(arr) | (arr < lo) | (arr > hi)
    if np.any(bad):
        v = arr[bad].flat[0] if arr.ndim else arr
        u = f" {unit}" if unit else ""
        raise NanoabsError(f"{name} = {_fmt(float(v))}{u}: allowed range is {lo:g} to {hi:g}{u}")
    return arr


def check_finite_array(name: str, value, *, increasing: bool = False) -> np.ndarray:
    """Return a 1-D float array; raise on NaN/inf, empty input, or (optionally) non-increasing order."""
    arr = np.atleast_1d(_as_float(name, value))
    if arr.size == 0:
        raise NanoabsError(f"{name} is empty: give at least one value")
    if not np.all(np.isfinite(arr)):
        raise NanoabsError(f"{name} contains NaN or infinite values: all values must be finite")
    if increasing and arr.size > 1 and np.any(np.diff(arr) <= 0):
        i = int(np.argmax(np.diff(arr) <= 0))
        raise NanoabsError(
            f"{name} must be strictly increasing: value {_fmt(float(arr[i + 1]))} follows {_fmt(float(arr[i]))}"
        )
    return arr


def suggest(word: str, choices: Iterable[str]) -> str:
    """A ' (did you mean X?)' hint, or '' when nothing is close."""
    choices = list(choices)
    lower = {c.lower(): c for c in choices}
    close = difflib.get_close_matches(str(word).lower(), list(lower), n=1, cutoff=0.6)
    return f" (did you mean {lower[close[0]]!r}?)" if close else ""


def check_choice(name: str, value, choices: Iterable[str]) -> str:
    """Return ``value`` if it is one of ``choices`` (case-insensitive), else raise listing them."""
    choices = list(choices)
    for c in choices:
        if str(value).lower() == c.lower():
            return c
    raise NanoabsError(
        f"{name} = {value!r} is not known{suggest(value, choices)}; allowed: {', '.join(choices)}"
    )


def _as_float(name: str, value) -> np.ndarray:
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise NanoabsError(f"{name} = {_fmt(value)}: must be a number") from None
    return arr


def isclose_or_raise(name: str, value: float, target: float, rtol: float) -> None:
    """Internal consistency check used by loaders (e.g. a header value against data)."""
    if not math.isclose(value, target, rel_tol=rtol):
        raise DataError(f"{name} = {value:g} does not match {target:g} within {rtol:g}")
