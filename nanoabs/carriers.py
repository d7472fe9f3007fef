"""Energy-resolved hot-carrier generation and emission over a barrier from curved particles.

Generation (per absorbed photon of energy h nu, one electron-hole pair):

* intraband absorption (phonon/defect-assisted bulk and surface-assisted/Landau damping):
  electrons flat over [E_F, E_F + h nu], holes flat over [E_F - h nu, E_F] (Fowler picture,
  R. H. Fowler, Phys. Rev. 38, 45 (1931));
* interband absorption of the noble metals: a d-band hole at least E_d below E_F and an sp
  electron of at most h nu - E_d above it, both flat over their ranges; for Al the
  parallel-band transition (about 1.5 eV; H. Ehrenreich, H. R. Philipp and B. Segall,
  Phys. Rev. 132, 1918 (1963), from memory) leaves nearly flat distributions (Brown et al.
  2016), taken as the intraband form, as are those of the transition metals (Pt, Pd, Ni, Ti,
  Cr, W), whose d bands cross E_F.

This is a documented simplification of the calculated distributions of A. Manjavacas et al.,
ACS Nano 8, 7630 (2014); R. Sundararaman et al., Nat. Commun. 5, 5788 (2014) and
A. M. Brown et al., ACS Nano 10, 957 (2016): their shapes (joint density of states, matrix
elements, the smearing of the d-band edge) are replaced by flat boxes with the same support,
which keeps the number of carriers (one pair per photon), the energy (h nu per pair) and the
thresholds that decide whether a carrier can cross a barrier.

Emission: a carrier of excess energy E (above E_F for electrons, below it for holes)
crosses a barrier phi if its momentum lies in the escape cone cos(theta) >= c(E) with
c = sqrt((E_F + phi)/(E_F + E)) about the local interface normal (free-electron escape cone,
Scales & Berini, IEEE J. Quantum Electron. 46, 633 (2010)), after a straight flight of length
s that it survives with probability exp(-s / l(E)). For a flat interface the fraction of an
isotropic distribution in the cone is (1 - c)/2; for a particle, the cone sits at the point of
the curved wall where the straight path ends, which lets far more carriers escape
(1 - c^3 instead of (1 - c)/2 for a sphere without attenuation; first wall hit only,
reflected carriers are taken as lost).
"""

from __future__ import annotations

import numpy as np

from ._errors import NanoabsError, check_positive, check_range
from .hotcarriers import FREE_ELECTRON, Sourced

__all__ = ["BAND_EDGE_EV", "VALENCE_DEPTH_EV", "CHANNELS", "fermi_energy",
           "excess_energy_bounds", "carrier_distributions", "cone_cosine", "mean_free_path_nm",
           "energy_grid", "sphere_escape", "ellipsoid_escape", "channel_yield", "fowler_function",
           "fermi_dirac"]

CHANNELS = ("intraband_bulk", "intraband_surface", "interband")

_EDGE = ("d-band edge below E_F (from memory): Au ~2 eV (interband onset 1.8-2.4 eV; band structure "
         "in N. E. Christensen and B. O. Seraphin, Phys. Rev. B 4, 3321 (1971)); Ag ~3.9 eV and Cu ~2.1 eV "
         "(H. Ehrenreich and H. R. Philipp, Phys. Rev. 128, 1622 (1962)); used with the distributions of "
         "Sundararaman et al., Nat. Commun. 5, 5788 (2014)")

#: Depth of the top of the d band below E_F [eV] (interband threshold) of the noble metals.
BAND_EDGE_EV = {"Au": Sourced(2.0, _EDGE), "Ag": Sourced(3.9, _EDGE), "Cu": Sourced(2.1, _EDGE)}

_VAL = ("estimate (from memory): depth of the occupied sp valence band below E_F from band-structure "
        "calculations, +-2 eV; used only as E_F in the escape cone, where it enters as sqrt(E_F + E)")

#: Effective E_F [eV] for the escape cone of metals without free-electron data.
VALENCE_DEPTH_EV = {"Pt": Sourced(10.0, _VAL), "Pd": Sourced(8.0, _VAL), "Ni": Sourced(9.0, _VAL),
                    "Ti": Sourced(6.0, _VAL), "Cr": Sourced(7.0, _VAL), "W": Sourced(10.0, _VAL),
                    "TiN": Sourced(8.0, _VAL), "PtSi": Sourced(10.0, _VAL)}


def fermi_energy(metal: str) -> Sourced:
    """E_F [eV] used in the escape cone: free-electron value (Au, Ag, Cu, Al) or the estimate table."""
    if metal in FREE_ELECTRON:
        fe = FREE_ELECTRON[metal]
        return Sourced(fe.fermi_energy_eV, fe.source)
    if metal in VALENCE_DEPTH_EV:
        return VALENCE_DEPTH_EV[metal]
    raise NanoabsError(f"metal = {metal!r}: no tabulated Fermi energy (known: "
                       f"{', '.join(list(FREE_ELECTRON) + list(VALENCE_DEPTH_EV))}); give fermi_energy_eV")


def excess_energy_bounds(photon_energy_eV, metal: str, channel: str, carrier: str):
    """Support [lo, hi] of the excess-energy distribution of one carrier type [eV].

    The excess energy is E - E_F for electrons and E_F - E for holes. Intraband (and Al):
    [0, h nu] for both. Interband in Au, Ag, Cu with d-band edge E_d: electrons
    [0, h nu - E_d], holes [E_d, h nu]. Below the edge (h nu <= E_d) no d-band transition
    exists; the interband part of eps'' of a Drude-Lorentz fit there is the tail of its
    oscillators and stands for absorption of intraband nature, so it gets the flat
    intraband distributions (our choice; exactly at the edge lo == hi is a delta).

    Returns
    -------
    (lo, hi) : numpy.ndarray, shape of ``photon_energy_eV``
    """
    hv = check_positive("photon_energy_eV", photon_energy_eV, unit="eV")
    if carrier not in ("electron", "hole"):
        raise NanoabsError(f"carrier = {carrier!r}: allowed: electron, hole")
    if channel not in CHANNELS:
        raise NanoabsError(f"channel = {channel!r}: allowed: {', '.join(CHANNELS)}")
    if channel != "interband" or metal not in BAND_EDGE_EV:
        return np.zeros_like(hv), hv
    ed = BAND_EDGE_EV[metal].value
    above = hv > ed
    if carrier == "electron":
        return np.zeros_like(hv), np.where(above, hv - ed, hv)
    return np.where(above, ed, 0.0), hv


def carrier_distributions(photon_energy_eV, energy_eV, metal: str, channel: str):
    """Electron and hole distributions per absorbed photon over excess energy [eV^-1].

    Parameters
    ----------
    photon_energy_eV : float
        Photon energy h nu [eV], > 0.
    energy_eV : array_like, shape (n,)
        Excess-energy grid [eV] (above E_F for electrons, below for holes), increasing.
    metal, channel : str
        See :func:`excess_energy_bounds`.

    Returns
    -------
    dict with 'electron' and 'hole' densities on the grid; each integrates to 1 (one pair
    per photon). A delta (below the interband edge) is put in the grid cell that holds it.
    """
    E = np.asarray(energy_eV, dtype=float)
    out = {}
    for carrier in ("electron", "hole"):
        lo, hi = (float(v) for v in excess_energy_bounds(float(photon_energy_eV), metal, channel, carrier))
        if hi > lo:
            g = np.where((E >= lo) & (E <= hi), 1.0 / (hi - lo), 0.0)
        else:
            g = np.zeros(E.shape)
            j = int(np.clip(np.searchsorted(E, lo), 1, E.size - 1))
            g[j - 1:j + 1] = 1.0 / (E[j] - E[j - 1])
        out[carrier] = g
    return out


def cone_cosine(energy_eV, barrier_eV, fermi_energy_eV, model: str = "escape-cone"):
    """Cosine c of the escape-cone half-angle of a carrier of excess energy E [-].

    "escape-cone": c = sqrt((E_F + phi)/(E_F + E)) (free-electron band; Scales & Berini 2010);
    "fowler": c = 1 - (E - phi)/(2 E_F), its first order with E_F in place of E_F + phi, which
    gives Fowler's yield (h nu - phi)^2/(8 E_F h nu) for a flat interface (Fowler 1931).
    c = 1 (no escape) for E <= phi; clipped to >= 0.
    """
    E = np.asarray(energy_eV, dtype=float)
    phi, ef = float(barrier_eV), float(fermi_energy_eV)
    with np.errstate(invalid="ignore"):
        if model == "escape-cone":
            c = np.sqrt((ef + phi) / (ef + np.maximum(E, phi)))
        elif model == "fowler":
            c = 1.0 - np.maximum(E - phi, 0.0) / (2.0 * ef)
        else:
            raise NanoabsError(f"yield model = {model!r}: allowed: escape-cone, fowler")
    return np.clip(c, 0.0, 1.0)


def mean_free_path_nm(energy_eV, length_1eV_nm):
    """Hot-carrier attenuation length l(E) = l_1 min(1, (1 eV / E)^2) [nm].

    Electron-electron scattering gives l ~ (E - E_F)^-2 (J. J. Quinn, Phys. Rev. 126, 1453
    (1962)); below ~1 eV phonon and defect scattering, roughly energy independent, take over
    (a simplification: one tabulated length l_1 at 1 eV sets both).
    """
    E = np.asarray(energy_eV, dtype=float)
    with np.errstate(divide="ignore"):
        return float(length_1eV_nm) * np.minimum(1.0, 1.0 / np.maximum(E, 1e-12) ** 2)


def energy_grid(barrier_eV, max_energy_eV, n: int = 160):
    """Excess-energy grid from just above the barrier to ``max_energy_eV`` [eV], dense at threshold."""
    x = np.linspace(1e-3, 1.0, n)
    return float(barrier_eV) + (float(max_energy_eV) - float(barrier_eV)) * x**2


_GL_X, _GL_W = np.polynomial.legendre.leggauss(24)


def _gl(a, b):
    """Gauss-Legendre nodes and weights on [a, b] (arrays broadcast; nodes on the last axis)."""
    a, b = np.asarray(a, dtype=float)[..., None], np.asarray(b, dtype=float)[..., None]
    h = 0.5 * (b - a)
    return a + h * (_GL_X + 1.0), h * _GL_W


def _survive(s, ell):
    with np.errstate(divide="ignore", invalid="ignore"):
        return np.exp(-s / ell)


def sphere_escape(r_nm, outer_radius_nm, inner_radius_nm, cone_cos, attenuation_nm):
    """Escape probability of isotropic carriers born at radius r of a sphere or shell [-].

    P(r) = (1/2) int dmu [escape] exp(-s(mu)/l), mu = cos(alpha) from the outward radius,
    path length to the outer wall s = -r mu + sqrt(R^2 - r^2 (1 - mu^2)) and angle of
    incidence there sin(theta) = r sqrt(1 - mu^2)/R; the carrier escapes if cos(theta) >= c
    (geometry of chords of a sphere). In a shell, inward paths that meet the core
    (r sqrt(1 - mu^2) < a) are lost. The mu integral is split at the escape and core limits
    and done by 24-point Gauss-Legendre quadrature on each part (exact to ~1e-12 for smooth
    attenuation). Averaged over a uniform source with the 96-point midpoint rule of
    :mod:`nanoabs.detector`, the result is within 2e-3 of 1 - c^3 (kink of P(r) at
    r = R sqrt(1 - c^2)); shells agree with a seeded Monte Carlo within its ~1e-3 error.

    Parameters
    ----------
    r_nm : array_like, shape (n,)
        Radii of birth [nm], inner <= r <= R.
    outer_radius_nm, inner_radius_nm : float
        R and the core radius a [nm] (0 for a solid sphere).
    cone_cos : array_like, shape (m,)
        Escape-cone cosine c per energy (see :func:`cone_cosine`).
    attenuation_nm : float or array_like, shape (m,)
        Attenuation length per energy [nm] (inf: no loss).

    Returns
    -------
    numpy.ndarray, shape (n, m)
    """
    r = np.asarray(r_nm, dtype=float)[:, None]
    R, a = float(outer_radius_nm), float(inner_radius_nm)
    c = np.asarray(cone_cos, dtype=float)[None, :]
    ell = np.broadcast_to(np.asarray(attenuation_nm, dtype=float), c.shape[1:])[None, :, None]
    with np.errstate(divide="ignore", invalid="ignore"):
        mu0 = np.sqrt(np.clip(1.0 - R**2 * (1.0 - c**2) / np.maximum(r, 1e-300) ** 2, 0.0, 1.0))
        mua = np.sqrt(np.clip(1.0 - a**2 / np.maximum(r, 1e-300) ** 2, 0.0, 1.0)) if a > 0 else np.ones_like(r)
    mua = np.broadcast_to(mua, mu0.shape)

    def part(lo, hi, sign):
        mu, w = _gl(lo, np.maximum(hi, lo))
        m = sign * mu
        s = -r[..., None] * m + np.sqrt(np.clip(R**2 - r[..., None] ** 2 * (1 - m**2), 0.0, None))
        return np.sum(w * _survive(s, ell), axis=-1)

    return 0.5 * (part(mu0, np.ones_like(mu0), 1.0) + part(mu0, mua, -1.0))


def _facet_u0(p, q, h, fraction):
    """Upper limit u0 of u = cos(polar angle) so that u <= u0 covers ``fraction`` of the area."""
    from scipy.optimize import brentq

    if fraction >= 1.0:
        return 1.0
    total = _area(p, q, h, 1.0)
    return brentq(lambda u0: _area(p, q, h, u0) / total - fraction, -1.0, 1.0, xtol=1e-12)


def _surface(p, q, h, u0, n_u=32, n_phi=32):
    """Quadrature of the ellipsoid surface u in [-1, u0]: points, unit normals, area weights."""
    u, wu = _gl(-1.0, u0)
    phi = (np.arange(n_phi) + 0.5) * 2 * np.pi / n_phi
    U, PHI = np.meshgrid(u, phi, indexing="ij")
    S = np.sqrt(1 - U**2)
    x = np.stack([p * S * np.cos(PHI), q * S * np.sin(PHI), h * U], axis=-1)
    dA = np.sqrt(h**2 * S**2 * (q**2 * np.cos(PHI) ** 2 + p**2 * np.sin(PHI) ** 2) + p**2 * q**2 * U**2)
    w = dA * wu[:, None] * (2 * np.pi / n_phi)
    grad = x / np.array([p, q, h]) ** 2
    n = grad / np.linalg.norm(grad, axis=-1, keepdims=True)
    return x.reshape(-1, 3), n.reshape(-1, 3), w.ravel()


def _area(p, q, h, u0):
    return float(np.sum(_surface(p, q, h, u0)[2]))


def ellipsoid_escape(semi_axes_nm, cone_cos, attenuation_nm, *, facet_fraction=1.0, facet_axis=2,
                     n_t=12, n_psi=16):
    """Escape probability of carriers born uniformly and isotropically in an ellipsoid [-].

    For a convex body with a uniform isotropic source q, the carrier flux arriving at a
    surface point in direction Omega is (q/4pi) int_0^s exp(-t/l) dt, s being the chord
    behind it (a ray-counting identity of transport theory; K. M. Case and P. F. Zweifel,
    Linear Transport Theory, Addison-Wesley 1967, ch. 2). So

        P = (1/(4 pi V)) int_S dA int_{cos theta >= c} cos(theta) l (1 - exp(-s/l)) dOmega,

    with the chord of the ellipsoid x^T M x = 1 from a surface point x inward along -Omega,
    s = 2 (x^T M Omega)/(Omega^T M Omega). For a sphere without attenuation P = 1 - c^3.
    Quadrature: Gauss-Legendre in u = cos(polar angle) (24 points) and cos(theta) (12),
    midpoint rule in the two azimuths (32 and 16 points; periodic integrands). Accuracy: 1 - c^3
    for a sphere to 1e-6; a (50, 15, 15) nm spheroid agrees with a seeded Monte Carlo of 2e5
    carriers within its statistical error (~1e-3, tests/test_carriers.py); doubling the
    direction points changes the result by < 1e-5.

    Parameters
    ----------
    semi_axes_nm : sequence of 3 floats
        Semi-axes a, b, c [nm] along x, y, z.
    cone_cos : array_like, shape (m,)
        Escape-cone cosines.
    attenuation_nm : float or array_like, shape (m,)
        Attenuation length per energy [nm] (inf: no loss).
    facet_fraction : float, keyword-only
        Fraction of the surface in contact with the semiconductor, 0 < f <= 1: the part with
        the lowest coordinate along ``facet_axis`` (a particle resting on a substrate).
    facet_axis : int, keyword-only
        0, 1, 2 for x, y, z (default z, the substrate normal of :mod:`nanoabs.particles`).

    Returns
    -------
    numpy.ndarray, shape (m,)
    """
    axes = [float(v) for v in np.ravel(semi_axes_nm)]
    f = float(check_range("facet_fraction", facet_fraction, 1e-6, 1.0))
    k = int(facet_axis)
    p, q = [axes[i] for i in range(3) if i != k]
    h = axes[k]
    x, n, w = _surface(p, q, h, _facet_u0(p, q, h, f))
    e1 = np.cross(n, np.where(np.abs(n[:, 2:3]) < 0.9, [0.0, 0.0, 1.0], [1.0, 0.0, 0.0]))
    e1 /= np.linalg.norm(e1, axis=-1, keepdims=True)
    e2 = np.cross(n, e1)
    M = 1.0 / np.array([p, q, h]) ** 2
    psi = (np.arange(n_psi) + 0.5) * 2 * np.pi / n_psi
    tx, tw = np.polynomial.legendre.leggauss(n_t)
    c_all = np.atleast_1d(np.asarray(cone_cos, dtype=float))
    ell_all = np.broadcast_to(np.asarray(attenuation_nm, dtype=float), c_all.shape)
    vol = 4.0 / 3.0 * np.pi * p * q * h
    out = np.empty(c_all.shape)
    for j, (c, ell) in enumerate(zip(c_all, ell_all)):
        if c >= 1.0:
            out[j] = 0.0
            continue
        t = c + 0.5 * (1 - c) * (tx + 1)
        wt = 0.5 * (1 - c) * tw
        st = np.sqrt(1 - t**2)
        om = (t[:, None, None, None] * n[None, None] + st[:, None, None, None]
              * (np.cos(psi)[None, :, None, None] * e1 + np.sin(psi)[None, :, None, None] * e2))
        s = 2 * np.sum(x * M * om, axis=-1) / np.sum(om * M * om, axis=-1)
        kern = s if not np.isfinite(ell) else ell * -np.expm1(-s / ell)
        flux = np.sum(kern * (t * wt)[:, None, None], axis=(0, 1)) * (2 * np.pi / n_psi)
        out[j] = float(np.sum(flux * w)) / (4 * np.pi * vol)
    return out


def fowler_function(x, *, n_terms: int = 400):
    """Fowler's function F(x) = int_0^inf ln(1 + exp(x - u)) du [-] (x = (h nu - phi)/kT).

    Series of R. H. Fowler, Phys. Rev. 38, 45 (1931) (from memory):

        x <= 0:  F(x) = e^x - e^(2x)/2^2 + e^(3x)/3^2 - ...
        x > 0:   F(x) = pi^2/6 + x^2/2 - (e^(-x) - e^(-2x)/2^2 + e^(-3x)/3^2 - ...)

    (F = -Li_2(-e^x)). The photoyield near threshold at temperature T is proportional to
    T^2 F((h nu - phi)/kT); for kT -> 0, 2 (kT)^2 F -> (h nu - phi)^2 above threshold and 0 below,
    Fowler's square law. The alternating series is summed to ``n_terms`` terms and the last two
    partial sums are averaged (error < 1/n_terms^3 at x = 0, the slowest point).

    Parameters
    ----------
    x : float or array_like
        Reduced photon energy above threshold [-].
    n_terms : int, keyword-only
        Terms of the series (default 400).

    Returns
    -------
    numpy.ndarray, shape of ``x``
    """
    x = np.asarray(x, dtype=float)
    n = np.arange(1, int(n_terms) + 1).reshape((-1,) + (1,) * x.ndim)
    z = -np.abs(x)  # both series run in e^(-|x|)
    terms = (-1.0) ** (n + 1) * np.exp(n * z) / n**2
    partial = np.cumsum(terms, axis=0)
    s = 0.5 * (partial[-1] + partial[-2])
    return np.where(x <= 0, s, np.pi**2 / 6 + 0.5 * x**2 - s)


def fermi_dirac(energy_eV, temperature_K):
    """Occupation 1/(1 + exp(E/kT)) of a state E above the Fermi level [-] (a step at T = 0).

    Parameters
    ----------
    energy_eV : float or array_like
        Energy above the Fermi level [eV].
    temperature_K : float
        Temperature [K], >= 0.

    Returns
    -------
    numpy.ndarray
    """
    from ._si import e, k

    E = np.asarray(energy_eV, dtype=float)
    kT = k * float(temperature_K) / e
    if kT <= 0:
        return np.where(E < 0, 1.0, np.where(E > 0, 0.0, 0.5))
    return 0.5 * (1.0 - np.tanh(0.5 * E / kT))


def channel_yield(weight, energy_eV, lo, hi, *, kT_eV: float = 0.0):
    """Mean of an escape weight W(E) over flat distributions on [lo, hi] [-].

    eta = (1/(hi - lo)) int_lo^hi W(E) dE, with W = 0 below the first grid energy (the
    barrier) and the integral from the cumulative trapezoid rule on the grid; for lo == hi
    (a delta) eta = W(lo).

    Parameters
    ----------
    weight : array_like, shape (m,) or (L, m)
        W on the energy grid (one row per wavelength, or one row for all).
    energy_eV : array_like, shape (m,)
        Increasing energy grid [eV].
    lo, hi : array_like, shape (L,)
        Distribution bounds per wavelength [eV].
    kT_eV : float, keyword-only
        Thermal energy [eV]; > 0 smears the upper edge with the Fermi-Dirac occupation of the
        initial states: the density becomes f(E - hi)/N on [lo, inf), N = kT ln(1 + exp((hi -
        lo)/kT)), which near threshold gives Fowler's T^2 F((h nu - phi)/kT) (Fowler 1931). The
        grid must reach ~40 kT beyond the largest ``hi``. The lower edge stays sharp.
    """
    E = np.asarray(energy_eV, dtype=float)
    lo, hi = np.asarray(lo, dtype=float), np.asarray(hi, dtype=float)
    W = np.broadcast_to(np.atleast_2d(np.asarray(weight, dtype=float)), (lo.size, E.size))
    C = np.concatenate([np.zeros((lo.size, 1)), np.cumsum(0.5 * (W[:, 1:] + W[:, :-1]) * np.diff(E), axis=1)],
                       axis=1)

    def interp(rows, xq):
        j = np.clip(np.searchsorted(E, xq) - 1, 0, E.size - 2)
        t = np.clip((xq - E[j]) / (E[j + 1] - E[j]), 0.0, 1.0)
        val = rows[np.arange(lo.size), j] * (1 - t) + rows[np.arange(lo.size), j + 1] * t
        return np.where(xq < E[0], 0.0, val)

    width = hi - lo
    if kT_eV > 0:
        G = W * 0.5 * (1.0 - np.tanh(0.5 * (E[None, :] - hi[:, None]) / kT_eV))  # W f_FD(E - hi)
        CG = np.concatenate([np.zeros((lo.size, 1)), np.cumsum(0.5 * (G[:, 1:] + G[:, :-1]) * np.diff(E), axis=1)],
                            axis=1)
        norm = kT_eV * np.logaddexp(0.0, width / kT_eV)
        with np.errstate(invalid="ignore", divide="ignore"):
            smeared = (CG[:, -1] - interp(CG, lo)) / norm
        return np.where(width > 1e-12, smeared, interp(W, hi))
    with np.errstate(invalid="ignore", divide="ignore"):
        box = (interp(C, hi) - interp(C, lo)) / width
    return np.where(width > 1e-12, box, interp(W, hi))
