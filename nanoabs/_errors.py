"""The package's own error type and the small validators every entry point uses.

Every message is one line that names the parameter, the value received and
what is allowed, so the CLI can print it as it is and exit with a non-zero code.
"""

from __future__ import annotations

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
    "check_flag",
    "suggest",
]


class NanoabsError(ValueError):
    """Invalid input or an impossible request; the message is one line.

    Subclasses ``ValueError`` so callers that already catch ``ValueError`` keep
    working. ``exit_code`` is what the CLI returns for it (see README, "Exit codes").

    Parameters
    ----------
    message : str
        What is wrong: the parameter, its value and the allowed range. Runs of
        whitespace (including newlines) are collapsed so the message is one line.
    """

    exit_code = 2

    def __init__(self, message: str):
        super().__init__(" ".join(str(message).split()))


class DataError(NanoabsError):
    """A data file (material table, spectrum CSV, study file) is unreadable or malformed."""

    exit_code = 3


def _fmt(value) -> str:
    """A short printable form of a user value (never longer than about 60 characters)."""
    if isinstance(value, float):
        return f"{value:g}"
    if isinstance(value, np.ndarray) and value.size > 6:
        return f"array(shape={value.shape})"
    if isinstance(value, (list, tuple, dict, set)) and len(value) > 6:
        return f"{type(value).__name__} of {len(value)} items"
    text = " ".join((repr(value) if isinstance(value, str) else str(value)).split())
    return text if len(text) <= 60 else text[:57] + "..."


def check_positive(name: str, value, *, unit: str = "", scalar: bool = False):
    """Return ``value`` as a float array (a float with ``scalar=True``, which refuses arrays);
    raise unless every element is finite and > 0."""
    arr = _as_float(name, value, scalar)
    bad = ~np.isfinite(arr) | (arr <= 0)
    if np.any(bad):
        v = arr[bad].flat[0] if arr.ndim else arr
        raise NanoabsError(
            f"{name} = {_fmt(float(v))}{' ' + unit if unit else ''}: must be a finite number > 0"
        )
    return float(arr) if scalar else arr


def check_nonnegative(name: str, value, *, unit: str = "", scalar: bool = False):
    """Return ``value`` as a float array (a float with ``scalar=True``, which refuses arrays);
    raise unless every element is finite and >= 0."""
    arr = _as_float(name, value, scalar)
    bad = ~np.isfinite(arr) | (arr < 0)
    if np.any(bad):
        v = arr[bad].flat[0] if arr.ndim else arr
        raise NanoabsError(
            f"{name} = {_fmt(float(v))}{' ' + unit if unit else ''}: must be a finite number >= 0"
        )
    return float(arr) if scalar else arr


def check_range(name: str, value, lo: float, hi: float, *, unit: str = "", scalar: bool = False):
    """Return ``value`` as a float array (a float with ``scalar=True``, which refuses arrays);
    raise unless lo <= value <= hi everywhere."""
    arr = _as_float(name, value, scalar)
    bad = ~np.isfinite(arr) | (arr < lo) | (arr > hi)
    if np.any(bad):
        v = arr[bad].flat[0] if arr.ndim else arr
        u = f" {unit}" if unit else ""
        raise NanoabsError(f"{name} = {_fmt(float(v))}{u}: allowed range is {lo:g} to {hi:g}{u}")
    return float(arr) if scalar else arr


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
    import difflib  # here, not at import (start-up)

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


def _as_float(name: str, value, scalar: bool = False) -> np.ndarray:
    """``value`` as a float array; strict: booleans, strings, complex and non-numeric objects
    are refused (``True`` is not a radius, ``"10"`` is not a number in the Python API);
    with ``scalar`` anything but a single number is refused too."""
    if not isinstance(value, (str, bytes, bool, np.bool_, dict, set)) and value is not None:
        try:
            arr = np.asarray(value)
        except Exception:  # noqa: BLE001 - ragged lists, objects whose __array__ fails
            arr = None
        if arr is not None and arr.dtype.kind == "O" and arr.size and all(
                isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(v, (bool, np.bool_))
                for v in arr.flat):
            arr = arr.astype(float)
        if arr is not None and arr.dtype.kind in "iuf":
            if scalar and arr.ndim:
                raise NanoabsError(f"{name} = {_fmt(value)}: must be a single number, not an array "
                                   f"of shape {arr.shape}")
            return arr.astype(float, copy=False)
    kind = "a boolean" if isinstance(value, (bool, np.bool_)) or (
        isinstance(value, np.ndarray) and value.dtype.kind == "b") else type(value).__name__
    raise NanoabsError(f"{name} = {_fmt(value)}: must be a real number or an array of them (got {kind})")


def check_flag(name: str, value) -> bool:
    """Return ``value`` if it is a real boolean (``True``/``False``, numpy bool); else raise.

    A string such as ``"no"`` or ``"off"`` is truthy in Python and would silently mean *on*;
    call this on every on/off keyword (e.g. ``surface_damping``) before using it.
    """
    if isinstance(value, (bool, np.bool_)):
        return bool(value)
    raise NanoabsError(f"{name} = {_fmt(value)}: must be True or False (got {type(value).__name__})")


def isclose_or_raise(name: str, value: float, target: float, rtol: float) -> None:
    """Internal consistency check used by loaders (e.g. a header value against data)."""
    if not math.isclose(value, target, rel_tol=rtol):
        raise DataError(f"{name} = {value:g} does not match {target:g} within {rtol:g}")
