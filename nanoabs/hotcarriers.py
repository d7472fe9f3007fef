"""Hot-carrier (internal photoemission) and absorbed-power estimates.

Pure functions, vectorised over wavelength (numpy broadcasting), for a metal
nanoparticle forming a Schottky contact with a semiconductor:

* photon energy and photon rate (``scipy.constants``, CODATA);
* internal photoemission yield over the Schottky barrier: the Fowler
  small-excess form and the exact escape-cone integral;
* transport of excited carriers to the particle surface;
* absorbed power, photocurrent, array absorptance, responsivity and EQE;
* a steady-state photothermal temperature rise of one particle;
* splitting absorbed power by loss mechanism (interband / intraband).

Tables of free-electron parameters, hot-electron attenuation lengths and thermal
conductivities carry a ``source`` string per entry; values quoted from memory say so.
Barrier heights of metal/semiconductor pairs live in :mod:`nanoabs.contacts`
(:func:`schottky_barrier` is re-exported here); the energy-resolved generation and the
emission geometry in :mod:`nanoabs.carriers`.

These are design estimates, not predictive device models: measured yields depend
on interfaces, momentum distributions and processing. See also
:data:`SAFETY_CAUTION`.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from . import _si as _c
from ._errors import NanoabsError, check_nonnegative, check_positive, check_range, suggest

__all__ = [
    "HC_EV_NM",
    "SAFETY_CAUTION",
    "photon_energy_eV",
    "fowler_yield",
    "escape_cone_yield",
    "transport_factor_profile",
    "transport_factor_uniform",
    "equal_volume_radius",
    "absorbed_power",
    "photon_rate",
    "particle_photocurrent_A",
    "array_absorptance",
    "current_density_A_m2",
    "responsivity_A_W",
    "external_quantum_efficiency",
    "temperature_rise",
    "partition_by_mechanism",
    "Sourced",
    "FreeElectronMetal",
    "FREE_ELECTRON",
    "ATTENUATION_LENGTH_NM",
    "THERMAL_CONDUCTIVITY_W_MK",
    "free_electron",
    "attenuation_length_nm",
    "schottky_barrier",  # re-exported from nanoabs.contacts
    "thermal_conductivity",
    "COUPLING_WARNING_THRESHOLD",
]

#: h c / e in eV nm (exact SI constants, nanoabs._si; h, c, e are exact since SI 2019).
from .drude_lorentz import HC_EV_NM  # noqa: E402  (h c [eV nm])

SAFETY_CAUTION = """\
Safety: the laser irradiances used to measure plasmonic photodetectors can injure eyes
and skin and can ignite, melt or otherwise damage samples and nearby materials.
Photothermal heating may well exceed the single-particle estimate of this package in
dense arrays, under wide beams and in poorly conducting media (air, polymers, glass).
Handle dry nanoparticle powders and suspensions with the usual precautions for
nanomaterials and solvents. Work to IEC 60825-1 / ANSI Z136.1, local regulations, and
the instructions of your institution's laser-safety officer and safety practice."""

#: Sparse-array absorptance N*sigma_abs above which a coupling warning is returned.
COUPLING_WARNING_THRESHOLD = 0.3


def _ret(x):
    """0-d arrays -> numpy scalars, other arrays unchanged."""
    return np.asarray(x)[()]


# ---------------------------------------------------------------------------
# Photons
# ---------------------------------------------------------------------------

def photon_energy_eV(wavelength_nm):
    """Photon energy E = h c / lambda [eV].

    Parameters
    ----------
    wavelength_nm : float or array_like
        Vacuum wavelength [nm], > 0.

    Notes
    -----
    h, c and e from ``scipy.constants`` (CODATA); hc = 1239.84198 eV nm.
    """
    wl = check_positive("wavelength_nm", wavelength_nm, unit="nm")
    return _ret(HC_EV_NM / wl)


def photon_rate(power_W, wavelength_nm):
    """Photon rate carried (or absorbed) by a power: P lambda / (h c).

    Parameters
    ----------
    power_W : float or array_like
        Power [W] (or spectral power [W nm^-1]), >= 0.
    wavelength_nm : float or array_like
        Vacuum wavelength [nm], > 0; broadcasts with ``power_W``.

    Returns
    -------
    Photons per second [s^-1] (or [s^-1 nm^-1] for a spectral power).
    """
    p = check_nonnegative("power_W", power_W, unit="W")
    wl = check_positive("wavelength_nm", wavelength_nm, unit="nm")
    return _ret(p * wl * 1e-9 / (_c.h * _c.c))


# ---------------------------------------------------------------------------
# Internal photoemission yield
# ---------------------------------------------------------------------------

def _yield_args(photon_energy_eV, barrier_eV, fermi_energy_eV):
    hv = check_positive("photon_energy_eV", photon_energy_eV, unit="eV")
    phi = check_positive("barrier_eV", barrier_eV, unit="eV")
    ef = check_positive("fermi_energy_eV", fermi_energy_eV, unit="eV")
    return np.broadcast_arrays(hv, phi, ef)


def fowler_yield(photon_energy_eV, barrier_eV, fermi_energy_eV):
    """Approximate internal photoemission yield (Fowler, escape-cone form).

    eta = (h nu - phi_B)^2 / (8 E_F h nu) for h nu > phi_B, else 0
    (R. H. Fowler, Phys. Rev. 38, 45 (1931); escape-cone form as in C. Scales and
    P. Berini, IEEE J. Quantum Electron. 46, 633 (2010) and M. A. Leenheer et al.,
    J. Appl. Phys. 115, 134301 (2014)).

    Parameters
    ----------
    photon_energy_eV : float or array_like
        Photon energy h nu [eV], > 0.
    barrier_eV : float or array_like
        Schottky barrier height phi_B [eV], > 0.
    fermi_energy_eV : float or array_like
        Fermi energy of the metal measured from the band bottom [eV], > 0.

    Returns
    -------
    Emitted electrons per absorbed photon [-].

    Notes
    -----
    The small-excess (h nu - phi_B << E_F) limit of :func:`escape_cone_yield`,
    with E_F in place of E_F + phi_B; it always lies above the exact integral
    (by the factor (E_F + phi_B)/E_F near threshold) and grows without bound for
    large excess, so use it only near threshold.
    """
    hv, phi, ef = _yield_args(photon_energy_eV, barrier_eV, fermi_energy_eV)
    excess = np.clip(hv - phi, 0.0, None)
    return _ret(excess**2 / (8.0 * ef * hv))


def escape_cone_yield(photon_energy_eV, barrier_eV, fermi_energy_eV, *, momentum_factor=1.0):
    """Internal photoemission yield from the exact escape-cone integral.

    Excited electrons are distributed uniformly in energy E (above E_F) between 0
    and h nu, with isotropic momenta. In a free-electron band an electron of
    kinetic energy E_F + E crosses a barrier phi_B (above E_F) if its momentum lies
    within the escape cone, probability

        P(E) = (1/2) (1 - sqrt((E_F + phi_B) / (E_F + E)))   for E > phi_B.

    The yield eta = (1/h nu) int_{phi_B}^{h nu} P(E) dE has the closed form

        eta = (sqrt(E_F + h nu) - sqrt(E_F + phi_B))^2 / (2 h nu)
            = (h nu - phi_B)^2 / (2 h nu (sqrt(E_F + phi_B) + sqrt(E_F + h nu))^2),

    whose first order in (h nu - phi_B) is (h nu - phi_B)^2 / (8 (E_F + phi_B) h nu),
    the Fowler form (R. H. Fowler, Phys. Rev. 38, 45 (1931); C. Scales and P. Berini,
    IEEE J. Quantum Electron. 46, 633 (2010), escape-cone model; M. A. Leenheer et al.,
    J. Appl. Phys. 115, 134301 (2014)). eta <= 1/2 and increases with h nu.

    Parameters
    ----------
    photon_energy_eV : float or array_like
        Photon energy h nu [eV], > 0.
    barrier_eV : float or array_like
        Schottky barrier height phi_B [eV], > 0.
    fermi_energy_eV : float or array_like
        Fermi energy from the band bottom [eV], > 0 (see :data:`FREE_ELECTRON`).
    momentum_factor : float or array_like, keyword-only
        Empirical user factor (>= 0) multiplying eta, for non-isotropic
        (e.g. plasmon-shaped, surface-normal enhanced) momentum distributions; not
        derived here. The product is clipped so that eta <= 1.

    Returns
    -------
    Emitted electrons per absorbed photon [-], 0 at and below threshold.
    """
    hv, phi, ef = _yield_args(photon_energy_eV, barrier_eV, fermi_energy_eV)
    mf = check_nonnegative("momentum_factor", momentum_factor)
    excess = np.clip(hv - phi, 0.0, None)
    eta = excess**2 / (2.0 * hv * (np.sqrt(ef + phi) + np.sqrt(ef + hv)) ** 2)
    return _ret(np.minimum(eta * mf, 1.0))


# ---------------------------------------------------------------------------
# Transport to the surface
# ---------------------------------------------------------------------------

def _check_length(name, value):
    """Return a float array; every element must be > 0 (+inf allowed: no scattering)."""
    try:
        arr = np.asarray(value, dtype=float)
    except (TypeError, ValueError):
        raise NanoabsError(f"{name} = {value!r}: must be a number") from None
    bad = np.isnan(arr) | (arr <= 0)
    if np.any(bad):
        v = arr[bad].flat[0] if arr.ndim else arr
        raise NanoabsError(f"{name} = {float(v):g}: must be > 0 (inf allowed)")
    return arr


def _phi1(x):
    """(1 - exp(-x)) / x, stable for small x."""
    with np.errstate(invalid="ignore", divide="ignore"):
        direct = -np.expm1(-x) / x
    return np.where(x < 1e-3, 1.0 - x / 2 + x**2 / 6 - x**3 / 24, direct)


def _phi2(x):
    """(x - 1 + exp(-x)) / x^2, stable for small x."""
    with np.errstate(invalid="ignore", divide="ignore"):
        direct = (x + np.expm1(-x)) / x**2
    return np.where(x < 1e-3, 0.5 - x / 6 + x**2 / 24 - x**3 / 120, direct)


def transport_factor_profile(r, p, outer_radius, attenuation_length, *, contact_fraction=1.0):
    """Fraction of excited carriers that reach the outer surface, for a radial profile.

    T = c * int p(r) exp(-(R - r)/l) r^2 dr / int p(r) r^2 dr

    Each carrier is taken to travel straight out along the radius, surviving with
    probability exp(-(R - r)/l) (attenuation length l). This is a simplification
    (real paths are isotropic and longer, with elastic scattering), in the spirit
    of the transport factors used by Scales & Berini, IEEE J. Quantum Electron. 46,
    633 (2010). The whole outer surface is assumed to be the Schottky interface
    (particle embedded in the semiconductor); ``contact_fraction`` c scales T for a
    particle that touches the semiconductor over part of its surface only.

    Parameters
    ----------
    r : array_like, shape (n,)
        Radii [any length unit, same as ``outer_radius``], strictly increasing,
        0 <= r <= R, n >= 2. For a shell, start at the inner (core) radius.
    p : array_like, shape (n,)
        Absorbed power density per unit volume at ``r`` [W m^-3, any scale], >= 0,
        not all zero (e.g. the angle-averaged Im(eps)|E|^2).
    outer_radius : float
        Outer radius R [same unit as r], > 0.
    attenuation_length : float or array_like
        Hot-carrier attenuation length l [same unit], > 0 (inf: no loss). An array
        gives one result per value.
    contact_fraction : float, keyword-only
        Fraction of the outer surface in contact with the semiconductor, 0..1.

    Returns
    -------
    Transport factor [-], 0..1, shape of ``attenuation_length``.

    Notes
    -----
    g(r) = p r^2 is taken as linear between grid points and the exponential is
    integrated exactly on each interval, so l -> 0 gives T -> 0 on any grid and a
    constant g is integrated exactly.
    """
    r = np.asarray(r, dtype=float)
    p = np.asarray(p, dtype=float)
    if r.ndim != 1 or r.size < 2 or p.shape != r.shape:
        raise NanoabsError(
            f"r and p must be 1-D arrays of the same length >= 2; got shapes {r.shape} and {p.shape}"
        )
    if not np.all(np.isfinite(r)) or np.any(np.diff(r) <= 0):
        raise NanoabsError("r must be finite and strictly increasing")
    R = float(check_positive("outer_radius", outer_radius))
    check_range("r", r, 0.0, R * (1 + 1e-12))
    p = check_nonnegative("p", p)
    cf = check_range("contact_fraction", contact_fraction, 0.0, 1.0)
    ell = _check_length("attenuation_length", attenuation_length)

    g = p * r**2
    ga, gb, h = g[:-1], g[1:], np.diff(r)
    den = np.sum(h * (ga + gb) / 2)
    if den <= 0:
        raise NanoabsError("p is zero everywhere: no absorbed power to transport")
    L = ell[..., None]
    with np.errstate(invalid="ignore", divide="ignore"):
        x = h / L
        eb = np.exp(-np.clip(R - r[1:], 0.0, None) / L)
    num = np.sum(eb * h * (ga * _phi1(x) + (gb - ga) * _phi2(x)), axis=-1)
    return _ret(cf * num / den)


def transport_factor_uniform(outer_radius, attenuation_length, *, contact_fraction=1.0):
    """Transport factor for uniform absorption in a sphere (closed form).

    Volume average of exp(-(R - r)/l) over a sphere of radius R, u = R/l:

        T = c * (3/R^3) int_0^R r^2 exp(-(R - r)/l) dr
          = c * 3 (u^2 - 2u + 2 - 2 exp(-u)) / u^3,

    T -> 1 - u/4 for u -> 0 and T -> 3/u for u -> inf. Same straight-radial-path
    and whole-surface-contact assumptions as :func:`transport_factor_profile`.
    For an ellipsoid use the equal-volume sphere, :func:`equal_volume_radius`
    (a simplification: it ignores the shorter paths along the minor axes).

    Parameters
    ----------
    outer_radius : float or array_like
        Sphere radius R [any length unit], > 0.
    attenuation_length : float or array_like
        Attenuation length l [same unit], > 0 (inf allowed); broadcasts.
    contact_fraction : float, keyword-only
        Fraction of the surface in contact with the semiconductor, 0..1.

    Returns
    -------
    Transport factor [-], 0..1.
    """
    R = check_positive("outer_radius", outer_radius)
    ell = _check_length("attenuation_length", attenuation_length)
    cf = check_range("contact_fraction", contact_fraction, 0.0, 1.0)
    u = R / ell
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        direct = 3.0 * (u * u - 2.0 * u + 2.0 - 2.0 * np.exp(-u)) / u**3
    # Series 6 * sum_m (-u)^m / (m+3)! for small u (cancellation in the direct form).
    series = sum(6.0 * (-u) ** m / float(np.prod(np.arange(1, m + 4))) for m in range(8))
    return _ret(cf * np.where(u < 0.1, series, direct))


def equal_volume_radius(a, b, c):
    """Radius of the sphere with the volume of an ellipsoid of semi-axes a, b, c.

    R_eq = (a b c)^(1/3) [same unit as the semi-axes] (common practice).

    Parameters
    ----------
    a, b, c : float or array_like
        Semi-axes, > 0, in one length unit (e.g. [nm]); the result is in that unit.
    """
    a = check_positive("a", a)
    b = check_positive("b", b)
    c = check_positive("c", c)
    return _ret(np.cbrt(a * b * c))


# ---------------------------------------------------------------------------
# Absorbed power, photocurrent, arrays
# ---------------------------------------------------------------------------

def absorbed_power(sigma_abs_m2, irradiance):
    """Power absorbed by one particle: P = sigma_abs * E.

    Parameters
    ----------
    sigma_abs_m2 : float or array_like
        Absorption cross-section [m^2], >= 0.
    irradiance : float or array_like
        Spectral irradiance [W m^-2 nm^-1] or monochromatic irradiance [W m^-2];
        broadcasts with ``sigma_abs_m2``.

    Returns
    -------
    [W nm^-1] for a spectral irradiance, [W] for a monochromatic one.
    """
    s = check_nonnegative("sigma_abs_m2", sigma_abs_m2, unit="m^2")
    e = check_nonnegative("irradiance", irradiance)
    return _ret(s * e)


def particle_photocurrent_A(absorbed_power_W, wavelength_nm, internal_yield):
    """Photocurrent of one particle: I = q * eta * P lambda / (h c).

    Parameters
    ----------
    absorbed_power_W : float or array_like
        Absorbed power [W] (or [W nm^-1]), >= 0.
    wavelength_nm : float or array_like
        Wavelength [nm], > 0.
    internal_yield : float or array_like
        Carriers collected per absorbed photon [-], 0..1 (e.g. emission yield x
        transport factor x fraction of power in the emitting mechanism).

    Returns
    -------
    Current [A] (or [A nm^-1]).
    """
    eta = check_range("internal_yield", internal_yield, 0.0, 1.0)
    return _ret(_c.e * eta * photon_rate(absorbed_power_W, wavelength_nm))


def array_absorptance(sigma_abs_m2, *, areal_density_per_um2, wavelength_nm=None):
    """Absorptance of a sparse particle array: A = N sigma_abs.

    Non-interacting (independent-scatterer) limit, valid while N sigma_abs << 1
    (common practice). Returns warnings where N sigma_abs > 0.3 (particle
    coupling and shadowing matter) and raises where N sigma_abs >= 1 (unphysical).

    Parameters
    ----------
    sigma_abs_m2 : float or array_like
        Absorption cross-section per particle [m^2], >= 0.
    areal_density_per_um2 : float, keyword-only
        Particles per square micrometre [um^-2], >= 0 (1 um^-2 = 1e12 m^-2).
    wavelength_nm : array_like, keyword-only, optional
        Wavelengths matching ``sigma_abs_m2``, used only in messages.

    Returns
    -------
    absorptance : numpy.ndarray
        N sigma_abs [-].
    warnings : list of str
        One-line warnings (empty when all values are <= 0.3).
    """
    s = check_nonnegative("sigma_abs_m2", sigma_abs_m2, unit="m^2")
    n_m2 = check_nonnegative("areal_density_per_um2", areal_density_per_um2, unit="um^-2") * 1e12
    a = np.asarray(n_m2 * s)
    worst = float(a.max()) if a.size else 0.0
    where = ""
    if wavelength_nm is not None and a.size:
        wl = np.broadcast_to(np.asarray(wavelength_nm, dtype=float), a.shape)
        where = f" at {float(wl.flat[int(np.argmax(a))]):g} nm"
    if worst >= 1.0:
        raise NanoabsError(
            f"areal_density_per_um2 = {float(np.max(n_m2)) * 1e-12:g} um^-2: N*sigma_abs reaches "
            f"{worst:.3g}{where} (>= 1), unphysical in the sparse-array limit; lower the density"
        )
    warnings = []
    if worst > COUPLING_WARNING_THRESHOLD:
        count = int(np.count_nonzero(a > COUPLING_WARNING_THRESHOLD))
        warnings.append(
            f"N*sigma_abs up to {worst:.3g}{where} (> {COUPLING_WARNING_THRESHOLD:g} at {count} "
            "point(s)): particle coupling matters; the sparse-limit absorptance is only indicative"
        )
    return _ret(a), warnings


def current_density_A_m2(particle_current_A, *, areal_density_per_um2):
    """Photocurrent density of an array: J = N I_particle [A m^-2] (or [A m^-2 nm^-1]).

    Parameters
    ----------
    particle_current_A : float or array_like
        Current per particle [A] (or [A nm^-1]), >= 0.
    areal_density_per_um2 : float, keyword-only
        Particles per square micrometre [um^-2], >= 0.
    """
    i = check_nonnegative("particle_current_A", particle_current_A, unit="A")
    n_m2 = check_nonnegative("areal_density_per_um2", areal_density_per_um2, unit="um^-2") * 1e12
    return _ret(n_m2 * i)


def responsivity_A_W(current_density, irradiance):
    """Responsivity R = J / E [A W^-1].

    Parameters
    ----------
    current_density : float or array_like
        [A m^-2 nm^-1] with a spectral irradiance, or [A m^-2] with a
        monochromatic one.
    irradiance : float or array_like
        Spectral irradiance [W m^-2 nm^-1] or irradiance [W m^-2] at the same
        wavelength, >= 0.

    Returns
    -------
    [A W^-1]; NaN where the irradiance is 0 (e.g. blocked by a filter).
    """
    j = check_nonnegative("current_density", current_density)
    e = check_nonnegative("irradiance", irradiance)
    j, e = np.broadcast_arrays(j, e)
    out = np.full(j.shape, np.nan)
    np.divide(j, e, out=out, where=e > 0)
    return _ret(out)


def external_quantum_efficiency(responsivity_A_W, wavelength_nm):
    """External quantum efficiency EQE = R h c / (q lambda) [-].

    Collected electrons per incident photon, from the responsivity [A W^-1]
    (common practice; hc/q = 1239.84198 V nm). NaN responsivities (zero
    irradiance) propagate.

    Parameters
    ----------
    responsivity_A_W : float or array_like
        Responsivity R [A W^-1].
    wavelength_nm : float or array_like
        Vacuum wavelength lambda [nm], > 0, broadcastable against ``responsivity_A_W``.
    """
    r = np.asarray(responsivity_A_W, dtype=float)
    wl = check_positive("wavelength_nm", wavelength_nm, unit="nm")
    return _ret(r * HC_EV_NM / wl)


def temperature_rise(absorbed_power_W, radius_nm, thermal_conductivity_W_mK):
    """Steady-state temperature rise of one isolated spherical particle.

    Delta T = P / (4 pi kappa R)
    (A. O. Govorov and H. H. Richardson, Nano Today 2, 30 (2007)), for a particle
    much better conducting than its surroundings in an infinite uniform medium.
    Collective heating of an illuminated array (many particles, wide beam) can be
    much larger than this single-particle value.

    Parameters
    ----------
    absorbed_power_W : float or array_like
        Absorbed power [W], >= 0 (monochromatic illumination; for a broadband
        source integrate the spectral power first).
    radius_nm : float or array_like
        Particle radius [nm], > 0 (equal-volume radius for other shapes).
    thermal_conductivity_W_mK : float or array_like
        Thermal conductivity of the surrounding medium [W m^-1 K^-1], > 0
        (see :data:`THERMAL_CONDUCTIVITY_W_MK`).

    Returns
    -------
    Temperature rise at the particle surface [K].
    """
    p = check_nonnegative("absorbed_power_W", absorbed_power_W, unit="W")
    r_m = check_positive("radius_nm", radius_nm, unit="nm") * 1e-9
    k = check_positive("thermal_conductivity_W_mK", thermal_conductivity_W_mK, unit="W/(m K)")
    return _ret(p / (4.0 * np.pi * k * r_m))


def partition_by_mechanism(absorbed_power, eps_imag_parts):
    """Split absorbed power between loss mechanisms in proportion to their eps''.

    The local absorbed power density is (omega/2) eps0 eps'' |E|^2; with the same
    field for every contribution, each part of eps'' = sum_k eps''_k takes the
    share eps''_k / eps'' (decomposition of the metal's damping into interband,
    bulk intraband and surface-collision parts as in U. Kreibig and M. Vollmer,
    *Optical Properties of Metal Clusters*, Springer 1995, ch. 2; its use for
    hot-carrier generation: J. B. Khurgin, Faraday Discuss. 214, 35 (2019)).

    Parameters
    ----------
    absorbed_power : float or array_like
        Total absorbed power (any unit, e.g. [W nm^-1]) over wavelength, >= 0.
    eps_imag_parts : dict of str -> array_like
        Non-negative parts of eps'' (e.g. ``{'interband': ..., 'intraband_bulk': ...,
        'intraband_surface': ...}``), each broadcastable with ``absorbed_power``.

    Returns
    -------
    dict of str -> numpy.ndarray
        Same keys, in the unit of ``absorbed_power``; the parts add up to the total.
        Where the total power is 0 every part is 0.
    """
    if not isinstance(eps_imag_parts, dict) or not eps_imag_parts:
        raise NanoabsError("eps_imag_parts must be a non-empty dict of name -> eps'' array")
    p = check_nonnegative("absorbed_power", absorbed_power)
    parts = {k: check_nonnegative(f"eps_imag_parts[{k!r}]", v) for k, v in eps_imag_parts.items()}
    try:
        arrays = np.broadcast_arrays(p, *parts.values())
    except ValueError:
        shapes = ", ".join(f"{k}: {np.shape(v)}" for k, v in parts.items())
        raise NanoabsError(
            f"eps_imag_parts do not broadcast with absorbed_power {p.shape} ({shapes})"
        ) from None
    p, values = arrays[0], arrays[1:]
    total = np.sum(values, axis=0)
    if np.any((total <= 0) & (p > 0)):
        raise NanoabsError("eps_imag_parts sum to 0 where absorbed_power > 0: cannot partition")
    share = np.zeros_like(total)
    np.divide(p, total, out=share, where=total > 0)
    return {k: _ret(v * share) for k, v in zip(parts, values)}


# ---------------------------------------------------------------------------
# Tables
# ---------------------------------------------------------------------------

class Sourced(NamedTuple):
    """A tabulated value and where it comes from; unpacks as (value, source).

    Parameters
    ----------
    value : float
        The value, in the unit of its table ([nm] for :func:`attenuation_length_nm`,
        [W m^-1 K^-1] for :func:`thermal_conductivity`).
    source : str
        Reference of the value, with its caveats (e.g. "from memory").
    """

    value: float
    source: str


@dataclass(frozen=True)
class FreeElectronMetal:
    """Free-electron parameters of a metal.

    Parameters
    ----------
    electron_density_m3 : float
        Conduction-electron density n [m^-3].
    fermi_energy_eV : float
        Fermi energy E_F measured from the band bottom [eV].
    fermi_velocity_m_s : float
        Fermi velocity v_F [m s^-1].
    source : str
        Reference of the values.
    """

    electron_density_m3: float  # conduction-electron density n [m^-3]
    fermi_energy_eV: float  # E_F from the band bottom [eV]
    fermi_velocity_m_s: float  # v_F [m s^-1]
    source: str


_AM = "N. W. Ashcroft and N. D. Mermin, Solid State Physics (Saunders, 1976), Tables 1.1 and 2.1 (from memory)"

FREE_ELECTRON = {
    "Au": FreeElectronMetal(5.90e28, 5.53, 1.40e6, _AM),
    "Ag": FreeElectronMetal(5.86e28, 5.49, 1.39e6, _AM),
    "Cu": FreeElectronMetal(8.47e28, 7.00, 1.57e6, _AM),
    "Al": FreeElectronMetal(18.1e28, 11.7, 2.03e6, _AM),
}

_ATT = (
    "from memory, order of magnitude, for electrons ~1 eV above E_F; strongly energy "
    "dependent (roughly (E - E_F)^-2 from electron-electron scattering, J. J. Quinn, "
    "Phys. Rev. 126, 1453 (1962)) and reduced by grain boundaries and surfaces"
)

#: Hot-electron attenuation lengths [nm].
ATTENUATION_LENGTH_NM = {
    "Au": Sourced(40.0, _ATT + "; estimate, 20-100 nm"),
    "Ag": Sourced(50.0, _ATT + "; estimate, 20-100 nm"),
    "Cu": Sourced(30.0, _ATT + "; estimate, 10-60 nm"),
    "Al": Sourced(20.0, _ATT + "; estimate, 10-40 nm"),
    "Pt": Sourced(10.0, _ATT + "; transition metals (d states at E_F) scatter faster: 5-15 nm"),
    "Pd": Sourced(10.0, _ATT + "; transition metals (d states at E_F) scatter faster: 5-15 nm"),
    "Ni": Sourced(5.0, _ATT + "; transition metals (d states at E_F) scatter faster: 2-10 nm"),
    "Ti": Sourced(5.0, _ATT + "; transition metals (d states at E_F) scatter faster: 2-10 nm"),
    "Cr": Sourced(5.0, _ATT + "; transition metals (d states at E_F) scatter faster: 2-10 nm"),
    "W": Sourced(10.0, _ATT + "; transition metals (d states at E_F) scatter faster: 5-15 nm"),
    "TiN": Sourced(10.0, _ATT + "; 5-20 nm, film dependent"),
}

_CRC = "CRC Handbook of Chemistry and Physics, near 300 K (from memory)"

#: Thermal conductivities of surrounding media near room temperature [W m^-1 K^-1].
THERMAL_CONDUCTIVITY_W_MK = {
    "water": Sourced(0.60, _CRC),
    "air": Sourced(0.026, _CRC),
    "SiO2": Sourced(1.38, _CRC + "; fused silica"),
    "glass": Sourced(1.0, _CRC + "; soda-lime glass, 0.9-1.1"),
    "Si": Sourced(148.0, _CRC + "; crystalline"),
    "TiO2": Sourced(8.5, _CRC + "; rutile bulk, films and anatase often 1-4"),
    "Al2O3": Sourced(35.0, _CRC + "; sapphire / dense alumina, 30-46"),
    "GaN": Sourced(130.0, "from memory, order of magnitude; bulk 130-230, films lower"),
    "ZnO": Sourced(50.0, "from memory, order of magnitude; bulk 50-100, films lower"),
}


def _lookup(table: dict, key: str, what: str):
    k = str(key).strip()
    lower = {name.lower(): name for name in table}
    if k.lower() in lower:
        return table[lower[k.lower()]]
    raise NanoabsError(
        f"{what} = {key!r} is not tabulated{suggest(k, table)}; known: {', '.join(table)}"
    )


def free_electron(metal: str) -> FreeElectronMetal:
    """Free-electron parameters (n, E_F, v_F) of 'Au', 'Ag', 'Cu' or 'Al' (case-insensitive).

    Parameters
    ----------
    metal : str
        Metal symbol, case-insensitive.
    """
    return _lookup(FREE_ELECTRON, metal, "metal")


def attenuation_length_nm(metal: str) -> Sourced:
    """Hot-electron attenuation length [nm] of a metal as (value, source).

    Parameters
    ----------
    metal : str
        Metal symbol in ``ATTENUATION_LENGTH_NM`` (e.g. 'Au', 'Pt', 'TiN'), case-insensitive.
    """
    return _lookup(ATTENUATION_LENGTH_NM, metal, "metal")


def thermal_conductivity(medium: str) -> Sourced:
    """Thermal conductivity [W m^-1 K^-1] of a surrounding medium as (value, source).

    Parameters
    ----------
    medium : str
        Medium name in ``THERMAL_CONDUCTIVITY_W_MK`` (e.g. 'water', 'SiO2'), case-insensitive.
    """
    return _lookup(THERMAL_CONDUCTIVITY_W_MK, medium, "medium")


from .contacts import schottky_barrier  # noqa: E402  (table of pairs: nanoabs.contacts)
