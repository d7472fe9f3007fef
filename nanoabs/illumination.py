"""Illumination: the spectral irradiance that falls on the particles.

One class, :class:`Illumination`, built by the constructors below. Every instance
answers ``spectral_irradiance(wavelength_nm)`` and carries ``kind``,
``description``, ``is_monochromatic`` and a JSON-friendly ``metadata()`` dict for
export sidecars.

Constructors
------------
``monochromatic(irradiance_W_m2)``
    A single-wavelength source of the given irradiance. Each requested wavelength
    is treated as its own experiment at that irradiance (a flat line in W m^-2,
    *not* W m^-2 nm^-1); per-wavelength quantities are for that irradiance and
    band integrals are not meaningful (``is_monochromatic = True``).
``laser(power_W, beam_radius_nm)``
    Monochromatic, with the peak irradiance of a Gaussian beam, I0 = 2P/(pi w^2).
``solar(name)``
    ASTM G173-03 reference spectra: ``'am1.5g'`` (global tilt 37 deg),
    ``'am1.5d'`` (direct + circumsolar), ``'am0'`` (extraterrestrial).
``blackbody(temperature_K, ...)``
    Planck's law.
``flat(value_W_m2_nm)``, ``from_csv(path)``
    A constant spectrum, or a user table.

Any instance can be band-limited with ``.filtered(lo_nm, hi_nm)``.
:func:`band_integral` integrates a spectral quantity over wavelength (trapezoid).

Units: wavelengths in nm, irradiance in W m^-2 (monochromatic) or
W m^-2 nm^-1 (spectral), power in W, lengths given by the user in nm.
"""

from __future__ import annotations

import csv
import io
import math
from functools import lru_cache
from importlib.resources import files
from pathlib import Path
from typing import Callable

import numpy as np

from . import _si as _c
from ._errors import (DataError, NanoabsError, _as_float, _fmt, check_finite_array, check_nonnegative, check_positive,
                      check_range, suggest)

__all__ = [
    "Illumination",
    "monochromatic",
    "laser",
    "solar",
    "blackbody",
    "flat",
    "from_csv",
    "band_integral",
    "planck_spectral_radiance",
    "gaussian_beam_peak_irradiance",
    "gaussian_beam_irradiance",
    "SOLAR_SPECTRA",
    "ASTM_G173_FILE",
    "BLACKBODY_RANGE_K",
    "check_illumination",
]

ASTM_G173_FILE = "astm_g173_03.csv"

# Our short names -> (column in the shipped CSV, long description).
SOLAR_SPECTRA = {
    "am1.5g": ("global_tilt_W_m2_nm", "ASTM G173-03 global tilt 37 deg (AM1.5G)"),
    "am1.5d": ("direct_circumsolar_W_m2_nm", "ASTM G173-03 direct normal + circumsolar (AM1.5D)"),
    "am0": ("extraterrestrial_W_m2_nm", "ASTM G173-03 extraterrestrial (AM0)"),
}

#: Temperatures accepted by :func:`blackbody` [K]. Below 1 K Planck's law underflows to 0 over
#: every wavelength a material table covers (and a scaled source divides by sigma T^4 -> 0);
#: above 1e6 K sigma T^4 leaves the range where the scaling is meaningful. A documented bound.
BLACKBODY_RANGE_K = (1.0, 1.0e6)

_REF_G173 = (
    "ASTM G173-03, Standard Tables for Reference Solar Spectral Irradiances: Direct Normal "
    "and Hemispherical on 37 deg Tilted Surface (ASTM International, 2003)"
)
_REF_PLANCK = (
    "Planck's law, M. Planck, Ann. Phys. 309, 553 (1901); hemispherical total sigma T^4 "
    "(Stefan-Boltzmann law); constants from scipy.constants (CODATA)"
)


class Illumination:
    """A spectral irradiance as a function of wavelength.

    Build instances with :func:`monochromatic`, :func:`laser`, :func:`solar`,
    :func:`blackbody`, :func:`flat` or :func:`from_csv` rather than directly.

    Parameters
    ----------
    kind : str
        ``'monochromatic'``, ``'laser'``, ``'solar'``, ``'blackbody'``, ``'flat'``,
        ``'csv'``, or ``'<kind>+filter'`` after :meth:`filtered`.
    description : str
        One human-readable line.
    evaluate : callable
        Maps an array of wavelengths [nm] (already checked against ``range_nm``) to
        the spectral irradiance [W m^-2 nm^-1], or [W m^-2] when ``is_monochromatic``.
    is_monochromatic : bool, keyword-only
        True when ``spectral_irradiance`` returns an irradiance [W m^-2] applied at
        each wavelength separately; then band integrals are not meaningful.
    range_nm : tuple of float, keyword-only
        Wavelengths [nm] where the source is defined; outside it evaluation raises.
    nodes_nm : numpy.ndarray or None, keyword-only
        The tabulated wavelengths [nm] of a table source (solar, CSV), else None.
    parameters : dict or None, keyword-only
        The constructor's inputs, with the unit in each key (e.g. ``irradiance_W_m2``),
        for metadata and exports.
    source : str, keyword-only
        Reference or origin of the spectrum (citation, ``'user'`` or the file).

    Attributes
    ----------
    unit : str
        ``'W m^-2'`` (monochromatic) or ``'W m^-2 nm^-1'`` (spectral).
    """

    def __init__(
        self,
        kind: str,
        description: str,
        evaluate: Callable[[np.ndarray], np.ndarray],
        *,
        is_monochromatic: bool = False,
        range_nm: tuple[float, float] = (0.0, math.inf),
        nodes_nm: np.ndarray | None = None,
        parameters: dict | None = None,
        source: str = "",
    ):
        self.kind = kind
        self.description = description
        self.is_monochromatic = bool(is_monochromatic)
        self.unit = "W m^-2" if self.is_monochromatic else "W m^-2 nm^-1"
        self.range_nm = (float(range_nm[0]), float(range_nm[1]))
        self.nodes_nm = None if nodes_nm is None else np.asarray(nodes_nm, dtype=float)
        self.parameters = dict(parameters or {})
        self.source = source
        self._evaluate = evaluate

    def __repr__(self) -> str:
        return f"Illumination(kind={self.kind!r}, description={self.description!r})"

    def spectral_irradiance(self, wavelength_nm):
        """Spectral irradiance at ``wavelength_nm``.

        Parameters
        ----------
        wavelength_nm : float or array_like
            Wavelengths [nm], > 0, any shape.

        Returns
        -------
        numpy.ndarray or numpy.float64
            Same shape as the input: [W m^-2 nm^-1], or [W m^-2] for a monochromatic
            source (``is_monochromatic``), where the value is the irradiance applied
            at each wavelength on its own.

        Raises
        ------
        NanoabsError
            For non-positive wavelengths or wavelengths outside ``range_nm``.
        """
        wl = check_positive("wavelength_nm", wavelength_nm, unit="nm")
        lo, hi = self.range_nm
        if wl.size and (wl.min() < lo or wl.max() > hi):
            asked = f"{wl.min():g}" if wl.min() == wl.max() else f"{wl.min():g}-{wl.max():g}"
            raise NanoabsError(
                f"wavelength_nm: the {self.description} spectrum is defined on {lo:g}-{hi:g} nm; "
                f"requested {asked} nm"
            )
        with np.errstate(over="ignore", invalid="ignore"):
            out = np.asarray(self._evaluate(wl), dtype=float)
        if not np.all(np.isfinite(out)):
            raise NanoabsError(f"illumination: the {self.description} spectrum is not finite (overflow) "
                               "at some requested wavelengths; check its parameters")
        return np.broadcast_to(out, wl.shape).copy()[()]

    def integrated_irradiance_W_m2(self, wavelength_nm) -> float:
        """Trapezoid integral of the spectral irradiance over the given wavelengths [W m^-2].

        Parameters
        ----------
        wavelength_nm : array_like
            Strictly increasing wavelengths [nm]; for a table source, its
            ``nodes_nm`` reproduce the table's own integral.

        Raises
        ------
        NanoabsError
            For a monochromatic source (a band integral has no meaning there).
        """
        if self.is_monochromatic:
            raise NanoabsError(
                f"integrated irradiance: the {self.kind} source is monochromatic "
                "(W m^-2 at each wavelength separately); a band integral is not meaningful"
            )
        wl = check_finite_array("wavelength_nm", wavelength_nm, increasing=True)
        return band_integral(wl, self.spectral_irradiance(wl))

    def filtered(self, lo_nm: float | None = None, hi_nm: float | None = None) -> "Illumination":
        """The same source behind an ideal filter: zero outside ``[lo_nm, hi_nm]``.

        ``lo_nm`` alone is a long-pass, ``hi_nm`` alone a short-pass, both a band-pass
        filter. Edges are included in the pass band. Wavelengths outside the pass band
        give 0 without evaluating the underlying source (so a filtered solar spectrum
        may be asked for wavelengths outside 280-4000 nm if they are blocked).

        Parameters
        ----------
        lo_nm, hi_nm : float or None
            Pass-band edges [nm], > 0, ``lo_nm < hi_nm``; None means no edge.
        """
        lo = 0.0 if lo_nm is None else check_positive("lo_nm", lo_nm, unit="nm", scalar=True)
        hi = math.inf if hi_nm is None else check_positive("hi_nm", hi_nm, unit="nm", scalar=True)
        if lo >= hi:
            raise NanoabsError(f"filter: lo_nm = {lo:g} nm must be below hi_nm = {hi:g} nm")
        base = self

        def evaluate(wl):
            out = np.zeros_like(wl)
            inside = (wl >= lo) & (wl <= hi)
            if np.any(inside):
                out[inside] = base.spectral_irradiance(wl[inside])
            return out

        band = f"{lo:g}-{hi:g} nm" if lo_nm is not None and hi_nm is not None else (
            f">= {lo:g} nm" if lo_nm is not None else f"<= {hi:g} nm")
        params = dict(self.parameters)
        params["filter_lo_nm"] = None if lo_nm is None else lo
        params["filter_hi_nm"] = None if hi_nm is None else hi
        nodes = self.nodes_nm
        return Illumination(
            self.kind if self.kind.endswith("+filter") else self.kind + "+filter",
            f"{self.description}, filtered to {band}",
            evaluate,
            is_monochromatic=self.is_monochromatic,
            range_nm=(0.0, math.inf),
            nodes_nm=None if nodes is None else nodes[(nodes >= lo) & (nodes <= hi)],
            parameters=params,
            source=self.source,
        )

    def metadata(self) -> dict:
        """A JSON-serialisable description for export sidecars."""
        lo, hi = self.range_nm
        return {
            "kind": self.kind,
            "description": self.description,
            "is_monochromatic": self.is_monochromatic,
            "unit": self.unit,
            "range_nm": [lo, None if math.isinf(hi) else hi],
            "parameters": dict(self.parameters),
            "source": self.source,
            "note": (
                "monochromatic: each wavelength is computed on its own at this irradiance; "
                "band integrals are not meaningful" if self.is_monochromatic else ""
            ),
        }


# ---------------------------------------------------------------------------
# Monochromatic sources
# ---------------------------------------------------------------------------

def monochromatic(irradiance_W_m2: float) -> Illumination:
    """A monochromatic source of irradiance ``irradiance_W_m2`` [W m^-2].

    ``spectral_irradiance(wavelength_nm)`` returns this irradiance at every
    wavelength: each wavelength is an independent single-wavelength experiment at
    this irradiance, so per-wavelength outputs (absorbed power [W], photocurrent
    [A], temperature rise [K]) are for that irradiance, while integrals over
    wavelength are not meaningful (``is_monochromatic = True``).

    Parameters
    ----------
    irradiance_W_m2 : float
        Irradiance [W m^-2], >= 0.
    """
    value = check_nonnegative("irradiance_W_m2", irradiance_W_m2, unit="W/m^2", scalar=True)
    return Illumination(
        "monochromatic",
        f"monochromatic {value:g} W/m^2",
        lambda wl: np.full_like(wl, value),
        is_monochromatic=True,
        parameters={"irradiance_W_m2": value},
        source="user",
    )


def gaussian_beam_peak_irradiance(power_W, beam_radius_nm):
    """Peak irradiance of a Gaussian beam [W m^-2].

    I0 = 2 P / (pi w^2), with w the 1/e^2 intensity radius, so that
    I(r) = I0 exp(-2 r^2 / w^2) integrates to P over the plane
    (e.g. A. E. Siegman, *Lasers*, University Science Books, 1986, ch. 17).

    Parameters
    ----------
    power_W : float or array_like
        Beam power [W], >= 0.
    beam_radius_nm : float or array_like
        1/e^2 intensity radius w [nm], > 0.
    """
    p = check_nonnegative("power_W", power_W, unit="W")
    w_m = check_positive("beam_radius_nm", beam_radius_nm, unit="nm") * 1e-9
    with np.errstate(over="ignore", invalid="ignore", divide="ignore", under="ignore"):
        out = 2.0 * p / (np.pi * w_m**2)
    if not np.all(np.isfinite(out)):
        raise NanoabsError(f"laser: power {_fmt(p)} W on a 1/e^2 radius of {_fmt(w_m * 1e9)} nm "
                           "overflows the peak irradiance; check the units (W and nm)")
    return out[()]


def gaussian_beam_irradiance(r_nm, power_W, beam_radius_nm):
    """Irradiance of a Gaussian beam at distance ``r_nm`` from its axis [W m^-2].

    I(r) = 2P/(pi w^2) exp(-2 r^2/w^2) (Siegman, *Lasers*, 1986, ch. 17).

    Parameters
    ----------
    r_nm : float or array_like
        Distance r from the beam axis [nm], >= 0.
    power_W : float or array_like
        Beam power P [W], >= 0.
    beam_radius_nm : float or array_like
        1/e^2 intensity radius w [nm], > 0.
    """
    r = check_nonnegative("r_nm", r_nm, unit="nm")
    w = check_positive("beam_radius_nm", beam_radius_nm, unit="nm")
    return (gaussian_beam_peak_irradiance(power_W, beam_radius_nm) * np.exp(-2.0 * (r / w) ** 2))[()]


def laser(power_W: float, beam_radius_nm: float) -> Illumination:
    """A monochromatic laser: the peak irradiance of a Gaussian beam.

    The irradiance is I0 = 2P/(pi w^2) (see :func:`gaussian_beam_peak_irradiance`),
    i.e. the particles are assumed at the beam centre. Like :func:`monochromatic`,
    each wavelength is computed on its own at this irradiance.

    Parameters
    ----------
    power_W : float
        Beam power [W], >= 0.
    beam_radius_nm : float
        1/e^2 intensity radius [nm], > 0 (e.g. 500 nm for a focused spot).

    Notes
    -----
    Focused beams reach irradiances that heat particles and hosts strongly and are
    hazardous to eyes and skin: treat computed temperatures as estimates, and plan any
    experiment under your local laser-safety rules (e.g. IEC 60825-1, ANSI Z136.1) and
    officer. An overflowing irradiance (e.g. metres typed as nm) is refused.
    """
    p = check_nonnegative("power_W", power_W, unit="W", scalar=True)
    w = check_positive("beam_radius_nm", beam_radius_nm, unit="nm", scalar=True)
    i0 = float(gaussian_beam_peak_irradiance(p, w))
    return Illumination(
        "laser",
        f"laser {p:g} W, 1/e^2 radius {w:g} nm (peak {i0:.4g} W/m^2)",
        lambda wl: np.full_like(wl, i0),
        is_monochromatic=True,
        parameters={"power_W": p, "beam_radius_nm": w, "peak_irradiance_W_m2": i0},
        source="user; Gaussian beam peak irradiance 2P/(pi w^2)",
    )


# ---------------------------------------------------------------------------
# Solar reference spectra
# ---------------------------------------------------------------------------

@lru_cache(maxsize=1)
def _astm_table() -> dict[str, np.ndarray]:
    """The shipped ASTM G173-03 table as {column: array}."""
    text = files("nanoabs._data").joinpath(ASTM_G173_FILE).read_text(encoding="utf-8")
    lines = [ln for ln in text.splitlines() if ln.strip() and not ln.lstrip().startswith("#")]
    names = [c.strip() for c in lines[0].split(",")]
    data = np.array([[float(x) for x in ln.split(",")] for ln in lines[1:]])
    return {n: data[:, i].copy() for i, n in enumerate(names)}


def solar(name: str = "am1.5g") -> Illumination:
    """An ASTM G173-03 reference solar spectrum, linearly interpolated [W m^-2 nm^-1].

    Parameters
    ----------
    name : str
        ``'am1.5g'`` (global tilt 37 deg, integral ~1000.4 W m^-2), ``'am1.5d'``
        (direct normal + circumsolar, ~900.1 W m^-2) or ``'am0'`` (extraterrestrial,
        ~1348 W m^-2); case-insensitive.

    Notes
    -----
    Source: ASTM G173-03 (ASTM International, 2003), shipped as
    ``nanoabs/_data/astm_g173_03.csv`` (extracted by ``tools/extract_astm_g173.py``).
    Defined on 280-4000 nm; other wavelengths raise a NanoabsError.
    """
    key = str(name).strip().lower()
    if key not in SOLAR_SPECTRA:
        raise NanoabsError(
            f"solar spectrum name = {name!r} is not known{suggest(key, SOLAR_SPECTRA)}; "
            f"allowed: {', '.join(SOLAR_SPECTRA)}"
        )
    column, label = SOLAR_SPECTRA[key]
    table = _astm_table()
    wl_t, e_t = table["wavelength_nm"], table[column]
    return Illumination(
        "solar",
        label,
        lambda wl: np.interp(wl, wl_t, e_t),
        range_nm=(float(wl_t[0]), float(wl_t[-1])),
        nodes_nm=wl_t,
        parameters={"name": key, "column": column},
        source=f"{_REF_G173}; shipped table nanoabs/_data/{ASTM_G173_FILE}",
    )


# ---------------------------------------------------------------------------
# Blackbody
# ---------------------------------------------------------------------------

def planck_spectral_radiance(wavelength_nm, temperature_K):
    """Planck spectral radiance B_lambda(T) [W m^-2 sr^-1 nm^-1].

    B_lambda = 2 h c^2 / lambda^5 / (exp(h c / (lambda k_B T)) - 1)
    (M. Planck, Ann. Phys. 309, 553 (1901)), with h, c, k_B from
    ``scipy.constants`` (CODATA). Its hemispherical integral pi * int B_lambda dlambda
    is sigma T^4 (Stefan-Boltzmann law).

    Parameters
    ----------
    wavelength_nm : float or array_like
        Wavelength [nm], > 0.
    temperature_K : float or array_like
        Temperature [K], > 0; broadcasts with ``wavelength_nm``.
    """
    wl_m = check_positive("wavelength_nm", wavelength_nm, unit="nm") * 1e-9
    t = check_positive("temperature_K", temperature_K, unit="K")
    h, c, k = _c.h, _c.c, _c.k
    with np.errstate(over="ignore"):
        x = h * c / (wl_m * k * t)
        b = 2.0 * h * c**2 / wl_m**5 / np.expm1(x)  # per metre of wavelength
    return (b * 1e-9)[()]


def blackbody(
    temperature_K: float,
    *,
    total_irradiance_W_m2: float | None = None,
    solid_angle_sr: float | None = None,
) -> Illumination:
    """Blackbody illumination from Planck's law [W m^-2 nm^-1].

    Three normalisations (at most one keyword):

    * default: E_lambda = pi B_lambda(T), the irradiance in front of a large flat
      emitter filling the hemisphere; its integral is sigma T^4 (Stefan-Boltzmann).
    * ``solid_angle_sr``: E_lambda = Omega B_lambda(T), normal incidence from a
      small source subtending Omega (e.g. the Sun: ~6.8e-5 sr).
    * ``total_irradiance_W_m2``: E_lambda = pi B_lambda(T) * E_tot / (sigma T^4),
      so that the integral over all wavelengths equals ``total_irradiance_W_m2``.

    References: M. Planck, Ann. Phys. 309, 553 (1901); J. Stefan (1879) and
    L. Boltzmann (1884) for sigma T^4; constants from ``scipy.constants`` (CODATA).

    ``temperature_K`` must lie in ``BLACKBODY_RANGE_K`` (1 K to 1e6 K): below it the
    spectrum underflows to zero at every tabulated wavelength, and a source of negligible
    temperature "scaled to a total" would divide by sigma T^4 ~ 0.

    Parameters
    ----------
    temperature_K : float
        Blackbody temperature T [K], within ``BLACKBODY_RANGE_K``.
    total_irradiance_W_m2 : float or None, keyword-only
        Scale the spectrum so its integral over all wavelengths is this irradiance [W m^-2], >= 0.
    solid_angle_sr : float or None, keyword-only
        Solid angle Omega subtended by the source [sr], in (0, 2 pi].
    """
    t = check_range("temperature_K", temperature_K, *BLACKBODY_RANGE_K, unit="K", scalar=True)
    if total_irradiance_W_m2 is not None and solid_angle_sr is not None:
        raise NanoabsError(
            "blackbody: give at most one of total_irradiance_W_m2 and solid_angle_sr"
        )
    sigma_t4 = _c.Stefan_Boltzmann * t**4
    if solid_angle_sr is not None:
        omega = check_positive("solid_angle_sr", solid_angle_sr, unit="sr", scalar=True)
        if omega > 2 * np.pi:
            raise NanoabsError(f"solid_angle_sr = {omega:g} sr: allowed range is 0 to 2 pi sr")
        factor, norm = omega, f"solid angle {omega:g} sr"
    elif total_irradiance_W_m2 is not None:
        e_tot = check_nonnegative("total_irradiance_W_m2", total_irradiance_W_m2, unit="W/m^2", scalar=True)
        factor, norm = np.pi * e_tot / sigma_t4, f"scaled to {e_tot:g} W/m^2"
        if not math.isfinite(factor):
            raise NanoabsError(f"blackbody: total_irradiance_W_m2 = {e_tot:g} at {t:g} K overflows the "
                               "scaling; check the units (W/m^2)")
    else:
        factor, norm = np.pi, f"hemisphere (sigma T^4 = {sigma_t4:.4g} W/m^2)"
    return Illumination(
        "blackbody",
        f"blackbody {t:g} K, {norm}",
        lambda wl: factor * planck_spectral_radiance(wl, t),
        parameters={
            "temperature_K": t,
            "total_irradiance_W_m2": None if total_irradiance_W_m2 is None else float(total_irradiance_W_m2),
            "solid_angle_sr": None if solid_angle_sr is None else float(solid_angle_sr),
            "radiance_factor_sr": float(factor),
        },
        source=_REF_PLANCK,
    )


# ---------------------------------------------------------------------------
# Flat and user tables
# ---------------------------------------------------------------------------

def flat(value_W_m2_nm: float) -> Illumination:
    """A wavelength-independent spectral irradiance ``value_W_m2_nm`` [W m^-2 nm^-1].

    Parameters
    ----------
    value_W_m2_nm : float
        Spectral irradiance [W m^-2 nm^-1], >= 0, at every wavelength.
    """
    v = check_nonnegative("value_W_m2_nm", value_W_m2_nm, unit="W m^-2 nm^-1", scalar=True)
    return Illumination(
        "flat",
        f"flat {v:g} W m^-2 nm^-1",
        lambda wl: np.full_like(wl, v),
        parameters={"value_W_m2_nm": v},
        source="user",
    )


CSV_COLUMNS = ("wavelength_nm", "irradiance_W_m2_nm")


def _read_spectrum_csv(path: Path) -> tuple[np.ndarray, np.ndarray]:
    """Parse a user spectrum CSV; DataError (one line) on anything malformed."""
    from .materials import read_user_text

    text = read_user_text(path, "spectrum file")  # size-bounded, BOM accepted

    rows = []  # (line number, cells)
    for line_no, cells in enumerate(csv.reader(io.StringIO(text)), start=1):
        if not cells or not "".join(cells).strip() or cells[0].lstrip().startswith("#"):
            continue
        rows.append((line_no, [c.strip() for c in cells]))
    if not rows:
        raise DataError(f"spectrum file {path}: empty; expected a header row {','.join(CSV_COLUMNS)}")

    header_line, header = rows[0]
    lower = [h.lower() for h in header]
    idx = []
    for col in CSV_COLUMNS:
        if col.lower() not in lower:
            raise DataError(
                f"spectrum file {path}, line {header_line}: missing column {col!r} in the header "
                f"row ({len(header)} columns); required columns {', '.join(CSV_COLUMNS)}"
            )
        idx.append(lower.index(col.lower()))

    data = []
    for line_no, cells in rows[1:]:
        vals = []
        for col, i in zip(CSV_COLUMNS, idx):
            if i >= len(cells) or cells[i] == "":
                raise DataError(f"spectrum file {path}, line {line_no}: column {col!r} is empty")
            try:
                v = float(cells[i])
            except ValueError:
                raise DataError(  # the file's contents are never quoted in a message
                    f"spectrum file {path}, line {line_no}, column {col!r}: not a number"
                ) from None
            if not math.isfinite(v):
                raise DataError(
                    f"spectrum file {path}, line {line_no}, column {col!r}: not finite"
                )
            vals.append(v)
        wl, e = vals
        if wl <= 0:
            raise DataError(
                f"spectrum file {path}, line {line_no}, column 'wavelength_nm': {wl:g} must be > 0"
            )
        if e < 0:
            raise DataError(
                f"spectrum file {path}, line {line_no}, column 'irradiance_W_m2_nm': "
                f"{e:g} is negative; must be >= 0"
            )
        if data and wl <= data[-1][0]:
            raise DataError(
                f"spectrum file {path}, line {line_no}, column 'wavelength_nm': {wl:g} does not "
                f"follow {data[-1][0]:g}; wavelengths must be strictly increasing"
            )
        data.append((wl, e))
    if len(data) < 2:
        raise DataError(f"spectrum file {path}: {len(data)} data row(s); at least 2 are needed")
    arr = np.array(data)
    return arr[:, 0].copy(), arr[:, 1].copy()


def from_csv(path) -> Illumination:
    """A user spectrum from a CSV file, linearly interpolated [W m^-2 nm^-1].

    File format: optional ``#`` comment lines, then a header row with (at least)
    the columns ``wavelength_nm`` and ``irradiance_W_m2_nm`` (any order, extra
    columns ignored), then at least two data rows with strictly increasing
    wavelengths (> 0) and finite irradiances (>= 0). Any other content raises a
    one-line :class:`DataError` naming the file, line, column and value. Evaluation
    outside the table's wavelength range raises a NanoabsError.

    Parameters
    ----------
    path : str or os.PathLike
        The CSV file (wavelengths [nm], irradiances [W m^-2 nm^-1]).
    """
    from .materials import user_path

    p = user_path(path, "spectrum file")
    wl_t, e_t = _read_spectrum_csv(p)
    return Illumination(
        "csv",
        f"user spectrum {p.name}",
        lambda wl: np.interp(wl, wl_t, e_t),
        range_nm=(float(wl_t[0]), float(wl_t[-1])),
        nodes_nm=wl_t,
        parameters={"path": str(p), "rows": int(wl_t.size)},
        source=f"user file {p}",
    )


def check_illumination(value, name: str = "illumination") -> Illumination:
    """Return ``value`` if it is an :class:`Illumination`; else a one-line NanoabsError.

    For every function that takes an illumination (``None``, a number or a string there
    would otherwise fail deep inside with an AttributeError).

    Parameters
    ----------
    value : object
        What the caller passed as the illumination.
    name : str
        The parameter's name, for the message.
    """
    if isinstance(value, Illumination):
        return value
    raise NanoabsError(f"{name} = {_fmt(value)}: must be an Illumination from nanoabs.illumination "
                       "(monochromatic, laser, solar, blackbody, flat, from_csv)")


# ---------------------------------------------------------------------------
# Integration
# ---------------------------------------------------------------------------

def band_integral(wavelength_nm, values):
    """Trapezoid integral of a spectral quantity over wavelength.

    Parameters
    ----------
    wavelength_nm : array_like, shape (n,)
        Strictly increasing wavelengths [nm], n >= 2.
    values : array_like, shape (..., n)
        Spectral density per nm along the last axis (e.g. W m^-2 nm^-1,
        A m^-2 nm^-1).

    Returns
    -------
    float or numpy.ndarray
        The integral, shape (...), in the unit of ``values`` times nm
        (e.g. W m^-2 from W m^-2 nm^-1).

    Notes
    -----
    Not meaningful for monochromatic illumination (``Illumination.is_monochromatic``).
    """
    wl = check_finite_array("wavelength_nm", wavelength_nm, increasing=True)
    if wl.size < 2:
        raise NanoabsError(f"wavelength_nm has {wl.size} value(s): a band integral needs at least 2")
    v = _as_float("values", values)
    if v.ndim == 0 or v.shape[-1] != wl.size:
        raise NanoabsError(
            f"values: last axis has length {v.shape[-1] if v.ndim else 0}, expected {wl.size} "
            "(one value per wavelength)"
        )
    from scipy.integrate import trapezoid

    with np.errstate(over="ignore", invalid="ignore"):
        out = trapezoid(v, wl, axis=-1)
    if not np.all(np.isfinite(out)):
        raise NanoabsError("band integral: the result overflows or is NaN; check the values' units")
    return out[()]
