"""A small, documented parser for irradiances typed with their unit (no dependency).

Accepted: a bare number (W/m²), or a number followed by a power unit over an area unit:
power W, mW, uW (or µW), nW, kW; area m2, cm2, mm2, um2 (or µm2); ``^2`` may be written, and
spaces are ignored. Examples: ``10``, ``10W/m2``, ``1mW/cm2``, ``5 kW/m^2``, ``2 uW/um2``.
"""

from __future__ import annotations

import math
import re

from ._errors import NanoabsError

__all__ = ["parse_irradiance"]

_POWER = {"w": 1.0, "mw": 1e-3, "uw": 1e-6, "µw": 1e-6, "nw": 1e-9, "kw": 1e3}
_AREA = {"m2": 1.0, "cm2": 1e-4, "mm2": 1e-6, "um2": 1e-12, "µm2": 1e-12}
_FORM = re.compile(r"^([-+0-9.eE]+)(?:([a-zµ]+)/([a-zµ]+2))?$")


def parse_irradiance(text, name: str = "--irradiance") -> float:
    """Irradiance in W/m² from ``text`` (see the module docstring); one-line error otherwise."""
    t = str(text).replace(" ", "").replace("^", "").lower()
    m = _FORM.match(t)
    allowed = "a number in W/m2, or NUMBER UNIT such as 1mW/cm2, 10W/m2, 5kW/m2"
    if not m or (m.group(2) and (m.group(2) not in _POWER or m.group(3) not in _AREA)):
        raise NanoabsError(f"{name} = {str(text)[:40]!r}: expected {allowed}")
    try:
        value = float(m.group(1))
    except ValueError:
        raise NanoabsError(f"{name} = {str(text)[:40]!r}: expected {allowed}") from None
    if m.group(2):
        value *= _POWER[m.group(2)] / _AREA[m.group(3)]
    if not math.isfinite(value) or value <= 0:
        raise NanoabsError(f"{name} = {str(text)[:40]!r}: must be a finite irradiance > 0 W/m2")
    return value
