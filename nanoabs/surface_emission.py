"""Surface photoemission: carriers emitted directly by the field normal to the metal surface.

A free-electron metal (band bottom at 0, Fermi level E_F) meets its barrier partner at a flat
step of height U = E_F + phi_B (phi_B the Schottky barrier). A field normal to the surface,
E_z(t) = Re[E_n exp(-i omega t)], couples to the electrons through H' = (e E_n / 2) z. For
free electrons the bulk matrix elements of z vanish (momentum conservation); what remains is
the surface photoeffect of the step, the model family of I. Tamm and S. Schubin, Z. Phys. 68,
97 (1931), and A. M. Brodsky and Yu. Ya. Gurevich, Sov. Phys. JETP 27, 114 (1968) (both from
memory; cited as the family of models, not for the formulas below). The same physical channel
is discussed for plasmonic particles by A. V. Uskov et al., Nanoscale 6, 4716 (2014), and
V. E. Babicheva et al., ACS Photonics 2, 1039 (2015). **The rate below is this package's own
derivation within that model family** (Fermi's golden rule, written out in
notes/carriers.md "Surface photoemission: derivation"); it is not typed from those papers.

Assumptions: equal (free-electron) masses on both sides, so the parallel momentum and the
parallel energy pass the step unchanged; an abrupt step (no image-force rounding); E_n is the
normal field just inside the metal, uniform over the few-angstrom decay length of the
wavefunctions at the step; final states counted are those leaving into the barrier partner;
Pauli blocking of the final states is neglected (they lie at least phi_B above E_F); holes
(p-type contacts) use the same free-carrier step model with E_F as the band depth, a
simplification shared with :mod:`nanoabs.carriers`.
"""

from __future__ import annotations

import numpy as np

from . import _si as _c
from ._errors import check_nonnegative, check_positive

__all__ = ["surface_emission_rate", "threshold_power", "normal_field_factors_ellipsoid"]

#: Exponent of the threshold law R ~ (h nu - phi_B)^p at T = 0 of the step model (derived, see
#: :func:`surface_emission_rate`).
threshold_power = 2.5

_GX, _GW = np.polynomial.legendre.leggauss(64)


def _gl(a, b):
    a, b = np.asarray(a, dtype=float)[..., None], np.asarray(b, dtype=float)[..., None]
    h = 0.5 * (b - a)
    return a + h * (_GX + 1.0), h * _GW


def _integrand(a, c0, U, ef, kT):
    """Integrand over a = sqrt(E_z + h nu - U) [sqrt(eV)] of the normal-energy integral [eV^2 / sqrt(eV)]."""
    eps = a**2 + c0  # normal energy E_z of the initial state [eV]
    b = np.sqrt(a**2 + U)  # sqrt(E_z + h nu): normal kinetic energy of the final state in the metal
    if kT > 0:
        occ = kT * np.logaddexp(0.0, (ef - eps) / kT)
    else:
        occ = np.maximum(ef - eps, 0.0)
    return occ * np.sqrt(np.maximum(eps, 0.0)) * a * (b - a) ** 2 / U**2 * 2.0 * a


def surface_emission_rate(photon_energy_eV, barrier_eV, fermi_energy_eV, *, temperature_K=0.0):
    """Carriers emitted per second per unit area of contact per |E_n|^2 [m^-2 s^-1 (V/m)^-2].

    Parameters
    ----------
    photon_energy_eV : float or array_like
        Photon energy h nu [eV], > 0.
    barrier_eV : float
        Barrier phi_B above E_F [eV], > 0.
    fermi_energy_eV : float
        E_F above the band bottom [eV], > 0 (5.53 eV for free-electron gold).
    temperature_K : float, keyword-only
        Electron temperature [K], >= 0: Fermi-Dirac occupation of the initial states (0: the
        sharp threshold).

    Returns
    -------
    numpy.ndarray, shape of ``photon_energy_eV``
        R(h nu) such that the emitted rate per area is R |E_n|^2, E_n the complex amplitude of
        the normal field just inside the metal.

    Notes
    -----
    Derivation (golden rule; details in notes/carriers.md). Initial normal state of energy
    E_z = hbar^2 k^2/2m < U: standing wave in a metal of thickness L, phi_i(0)^2 =
    (2/L) k^2 / q_U^2 with q_U^2 = 2 m U / hbar^2. Final state (energy-normalised, leaving into
    the partner with k_s, k_m in the metal): |phi_f(0)|^2 = (m / (2 pi hbar^2 k_s)) 4 k_s^2/(k_s + k_m)^2.
    Acceleration form of the matrix element, exact between eigenstates of the step:

        <f|z|i> = <f|dV/dz|i> / (m omega^2) = U phi_f*(0) phi_i(0) / (m omega^2),

    since dV/dz = U delta(z). With the golden rule, spin 2, L/pi states per dk and the
    parallel-momentum sum m (E_F - E_z)/(2 pi hbar^2) per area at T = 0 (m kT ln(1 +
    exp((E_F - E_z)/kT))/(2 pi hbar^2) at T > 0):

        R = e^2 U / (pi^2 hbar^5 omega^4) int dE_z  occ(E_z) sqrt(E_z) k_s (k_m - k_s)^2 / U^2,

    k_s = sqrt(E_z + h nu - U), k_m = sqrt(E_z + h nu) (in sqrt(eV); the identity
    1/(k_s + k_m)^2 = (k_m - k_s)^2/U^2 is used), over E_z >= max(0, U - h nu). The matrix
    element and the parallel sum are closed forms; the last integral over E_z is done by
    64-point Gauss-Legendre quadrature in k_s (which removes the square-root threshold), split
    at E_F when T > 0 and cut 40 kT above E_F.

    Threshold (T = 0): with Delta = h nu - phi_B -> 0, R -> (4/15) e^2 sqrt(E_F) Delta^(5/2) /
    (pi^2 hbar^5 omega^4): the step model's threshold law is Delta^(5/2)
    (:data:`threshold_power`), against Fowler's Delta^2 for volume emission.

    References
    ----------
    E. Fermi's golden rule and the acceleration form of the dipole matrix element: standard
    (e.g. L. D. Landau and E. M. Lifshitz, Quantum Mechanics, Sec. 43; from memory).
    Model family: Tamm & Schubin (1931); Brodsky & Gurevich (1968) (from memory).
    """
    hv = np.atleast_1d(check_positive("photon_energy_eV", photon_energy_eV, unit="eV")).astype(float)
    phi = float(check_positive("barrier", barrier_eV, unit="eV", scalar=True))
    ef = float(check_positive("fermi energy", fermi_energy_eV, unit="eV", scalar=True))
    T = float(check_nonnegative("temperature", temperature_K, unit="K"))
    kT = _c.k * T / _c.e
    U = ef + phi
    c0 = U - hv  # E_z = a^2 + c0
    a_lo = np.sqrt(np.maximum(-c0, 0.0))
    delta = hv - phi  # a^2 at E_z = E_F
    total = np.zeros(hv.shape)
    pieces = [(a_lo, np.sqrt(np.maximum(delta, 0.0)))]
    if kT > 0:
        pieces.append((np.maximum(a_lo, np.sqrt(np.maximum(delta, 0.0))), np.sqrt(np.maximum(delta + 40 * kT, 0.0))))
    for lo, hi in pieces:
        a, w = _gl(lo, np.maximum(hi, lo))
        total += np.sum(w * _integrand(a, c0[:, None], U, ef, kT), axis=-1)
    omega = hv * _c.e / _c.hbar
    out = _c.e**2 * (U * _c.e) * (total * _c.e**2) / (np.pi**2 * _c.hbar**5 * omega**4)
    return out.reshape(np.shape(photon_energy_eV))


def normal_field_factors_ellipsoid(semi_axes_nm, *, facet_fraction=1.0, facet_axis=2):
    """Surface integrals G_j = int n_j^2 dA over the contact part of an ellipsoid [nm^2], j = x, y, z.

    A uniform internal field E (quasi-static ellipsoid) has normal component E . n, so
    int |E_n|^2 dA = sum_j |E_j|^2 G_j when the field lies along one axis or the axes are
    excited incoherently. The contact is the facet with the lowest ``facet_axis`` coordinate
    covering ``facet_fraction`` of the area (as in :func:`nanoabs.carriers.ellipsoid_escape`);
    quadrature of :mod:`nanoabs.carriers` (24 x 32 points). For a sphere of radius R and the
    whole surface G_j = 4 pi R^2 / 3 exactly.

    Parameters
    ----------
    semi_axes_nm : sequence of 3 floats
        Semi-axes along x, y, z [nm].
    facet_fraction : float, keyword-only
        Contact area fraction, 0 < f <= 1.
    facet_axis : int, keyword-only
        Axis normal to the substrate (0, 1, 2; default z).

    Returns
    -------
    numpy.ndarray, shape (3,)
    """
    from .carriers import _facet_u0, _surface

    axes = [float(v) for v in np.ravel(semi_axes_nm)]
    k = int(facet_axis)
    order = [i for i in range(3) if i != k] + [k]
    p, q, h = (axes[i] for i in order)
    _, n, w = _surface(p, q, h, _facet_u0(p, q, h, float(facet_fraction)))
    g = np.sum(n**2 * w[:, None], axis=0)  # in the (p, q, h) frame
    out = np.empty(3)
    out[order] = g
    return out
