"""Planar layered stack: Fresnel coefficients by transfer matrix, fields, R and T.

A stack is a list of media seen from one side: medium 0 (semi-infinite, the side
the wave comes from), optional finite layers 1..N-1 of given thickness, and
medium N (semi-infinite). Interface j lies between media j and j+1; the first
interface is at z = 0, medium 0 fills z > 0 and the wave travels towards -z.
The same stack seen from the other side is the reversed list.

Conventions
-----------
* Time dependence exp(-i omega t); refractive index n + ik, k >= 0.
* k_par is the wavevector component along the interfaces [nm^-1] (conserved);
  k_z,j = sqrt(eps_j k0^2 - k_par^2) with Im k_z >= 0 (and Re k_z >= 0 on the
  real axis): the upward wave exp(+i k_z z) decays or propagates away from the
  stack.
* s polarisation: the coefficients are ratios of the tangential E_y;
  p polarisation: ratios of the tangential H_y. Then
  r_s = (k_z0 - k_z1)/(k_z0 + k_z1), r_p = (eps1 k_z0 - eps0 k_z1)/(eps1 k_z0 + eps0 k_z1)
  (Novotny & Hecht 2012, eq. 2.49), and a perfect mirror has r_s = -1, r_p = +1.
  The general-purpose package ``tmm`` (tests only) uses the same r_s and r_p
  at normal and oblique incidence (its p coefficient is the ratio of E fields
  with its own sign convention, which equals this r_p); its t_p is an E-field
  ratio and differs from the H-field ratio here by n_0 / n_N.

References
----------
.. [BW] M. Born and E. Wolf, *Principles of Optics*, 7th ed., Cambridge (1999), Sec. 1.6.
.. [Y88] P. Yeh, *Optical Waves in Layered Media*, Wiley (1988), ch. 5 (transfer matrix)
   (from memory).
.. [NH] L. Novotny and B. Hecht, *Principles of Nano-Optics*, 2nd ed., Cambridge (2012),
   eqs. 2.49-2.50 (Fresnel) and Sec. 10.6 (from memory).
"""

from __future__ import annotations

import numpy as np

from ._errors import check_choice

__all__ = ["kz", "stack_coefficients", "stack_RT", "plane_waves", "drive_field"]

POLARIZATIONS = ("s", "p")


def kz(eps, k0, k_par):
    """Normal wavevector component k_z = sqrt(eps k0^2 - k_par^2) [nm^-1] with Im k_z >= 0.

    Parameters
    ----------
    eps : complex array_like
        Relative permittivity of the medium [1] (eps'' >= 0).
    k0 : float array_like
        Vacuum wavenumber 2 pi / lambda [nm^-1].
    k_par : complex array_like
        Wavevector component along the interface [nm^-1].

    Notes
    -----
    The branch is the physical one of a wave leaving the interface
    (Novotny & Hecht 2012, Sec. 10.6): Im k_z >= 0, and for real k_z the
    positive root. On the real k_par axis principal ``sqrt`` already gives it;
    the correction matters only for lossless media and complex k_par.
    """
    q = np.sqrt(np.asarray(eps, dtype=complex) * np.asarray(k0) ** 2 - np.asarray(k_par, dtype=complex) ** 2)
    return np.where(q.imag < 0, -q, q)


def _admittance(eps, kz_, pol):
    """q_j = k_z,j (s) or k_z,j / eps_j (p): interface r_ij = (q_i - q_j)/(q_i + q_j)."""
    return kz_ if pol == "s" else kz_ / eps


def stack_coefficients(eps, thickness_nm, k0, k_par, pol):
    """Reflection and transmission amplitude coefficients of a planar stack.

    Parameters
    ----------
    eps : sequence of complex array_like
        Permittivities of media 0..N, incidence side first [1]; each broadcasts
        with ``k0`` and ``k_par``.
    thickness_nm : sequence of float
        Thicknesses of the N-1 inner layers [nm] (empty for one interface).
    k0 : float array_like
        Vacuum wavenumber [nm^-1].
    k_par : complex array_like
        In-plane wavevector [nm^-1] (k_par = n_0 k0 sin(theta_0) for a plane wave).
    pol : {"s", "p"}
        Polarisation (s: E_y amplitudes, p: H_y amplitudes).

    Returns
    -------
    r : complex ndarray
        Amplitude reflection coefficient at the first interface (z = 0).
    t : complex ndarray
        Amplitude of the transmitted down-going wave in medium N at the last
        interface, per unit incident amplitude at z = 0.

    Notes
    -----
    Airy summation of the transfer matrix, layer by layer from the exit side
    (Born & Wolf 1999, Sec. 1.6.4, eqs. 1.6.57-58; Yeh 1988, eq. 5.1-24, from memory):
    Gamma_j = (r_{j,j+1} + rho)/(1 + r_{j,j+1} rho), rho = Gamma_{j+1} exp(2i k_z,j+1 d_j+1),
    T_j = t_{j,j+1} exp(i k_z,j+1 d_j+1) T_{j+1}/(1 + r_{j,j+1} rho). Only decaying
    exponentials appear, so evanescent k_par and thick absorbing layers are stable.
    """
    pol = check_choice("polarization", pol, POLARIZATIONS)
    eps = [np.asarray(e, dtype=complex) for e in eps]
    d = [0.0] + [float(t) for t in thickness_nm] + [0.0]
    kzs = [kz(e, k0, k_par) for e in eps]
    q = [_admittance(e, k, pol) for e, k in zip(eps, kzs)]
    gamma = np.zeros(np.broadcast(kzs[-1], kzs[0]).shape, dtype=complex)
    trans = np.ones_like(gamma)
    for j in range(len(eps) - 2, -1, -1):
        phase = np.exp(1j * kzs[j + 1] * d[j + 1])
        rho = gamma * phase ** 2
        rj = (q[j] - q[j + 1]) / (q[j] + q[j + 1])
        tj = 2 * q[j] / (q[j] + q[j + 1])
        den = 1 + rj * rho
        trans = tj * phase * trans / den
        gamma = (rj + rho) / den
    return gamma, trans


def stack_RT(eps, thickness_nm, wavelength_nm, *, angle_deg=0.0, pol="s"):
    """Power reflectance R and transmittance T of the bare stack for a plane wave.

    Parameters
    ----------
    eps : sequence of complex array_like
        Permittivities of media 0..N [1], incidence side first; medium 0 must
        be non-absorbing (its real index is used).
    thickness_nm : sequence of float
        Inner-layer thicknesses [nm].
    wavelength_nm : float array_like
        Vacuum wavelength [nm].
    angle_deg : float, keyword-only
        Angle of incidence in medium 0 [deg].
    pol : {"s", "p"}, keyword-only

    Returns
    -------
    R, T : ndarray
        R = |r|^2, T = Re(q_N)/Re(q_0) |t|^2 with q = k_z (s) or k_z/eps (p)
        (Born & Wolf 1999, eqs. 1.5.37-38, from memory). T = 0 when medium N
        does not carry a propagating wave (total internal reflection).
    """
    k0 = 2 * np.pi / np.asarray(wavelength_nm, dtype=float)
    n0 = np.sqrt(np.asarray(eps[0], dtype=complex)).real
    kp = n0 * k0 * np.sin(np.deg2rad(angle_deg))
    r, t = stack_coefficients(eps, thickness_nm, k0, kp, pol)
    q0 = _admittance(np.asarray(eps[0], dtype=complex).real, kz(np.asarray(eps[0]).real, k0, kp), pol)
    qn = _admittance(np.asarray(eps[-1], dtype=complex), kz(eps[-1], k0, kp), pol)
    return np.abs(r) ** 2, (qn.real / q0.real) * np.abs(t) ** 2


def _plane_wave_vector(eps, kz_signed, k_par, k0, pol):
    """Unit-amplitude field vector of a plane wave with k = (k_par, 0, kz_signed).

    s: E = y. p (H = y, per unit H): E = -(k x y)/(omega eps0 eps) ∝ (kz, 0, -k_par)/(k0 eps).
    Normalised so that the incident wave in medium 0 (real n0) has |E| = 1:
    multiply by n0 (returned per unit H amplitude, see `drive_field`).
    """
    if pol == "s":
        z = np.zeros(np.broadcast(kz_signed, k_par).shape, dtype=complex)
        return np.stack([z, z + 1, z], axis=-1)
    return np.stack([kz_signed, np.zeros_like(kz_signed), -k_par + 0 * kz_signed], axis=-1) / (k0 * eps)[..., None]


def plane_waves(eps, thickness_nm, wavelength_nm, z_nm, *, angle_deg=0.0, pol="s"):
    """The plane waves that make up the field without the particle at a point of an end half-space.

    Parameters
    ----------
    eps : sequence of complex array_like, shape (W,) each
        Permittivities of media 0..N, incidence side first [1] (medium 0: real part used).
    thickness_nm : sequence of float
        Inner-layer thicknesses [nm].
    wavelength_nm : float array_like, shape (W,)
        Vacuum wavelength [nm].
    z_nm : float
        Height above the first interface (>= 0) or minus the depth below the last one [nm].
    angle_deg : float, keyword-only
        Angle of incidence in medium 0 [deg].
    pol : {"s", "p"}, keyword-only
        Polarisation.

    Returns
    -------
    list of (khat, E) pairs
        ``khat`` (W, 3) complex unit direction (k / k_medium, k_hat . k_hat = 1) and
        ``E`` (W, 3) complex amplitude at the point, per unit incident amplitude:
        [incident, reflected] in the incidence medium (z >= 0) or [transmitted]
        in medium N (z < 0).
    """
    pol = check_choice("polarization", pol, POLARIZATIONS)
    wl = np.asarray(wavelength_nm, dtype=float)
    k0 = 2 * np.pi / wl
    e0 = np.asarray(eps[0], dtype=complex).real + 0j
    eps = [e0] + [np.asarray(e, dtype=complex) for e in eps[1:]]
    n0 = np.sqrt(e0.real)
    kp = n0 * k0 * np.sin(np.deg2rad(angle_deg)) + 0j
    r, t = stack_coefficients(eps, thickness_nm, k0, kp, pol)
    scale = n0[..., None] if (pol == "p" and np.ndim(n0)) else (n0 if pol == "p" else 1.0)

    def wave(e, k, amp):
        kn = k0 * np.sqrt(e)
        khat = np.stack([kp / kn, 0 * kp, k / kn], axis=-1)
        return khat, _plane_wave_vector(e, k, kp, k0, pol) * amp[..., None] * scale
    if z_nm >= 0:
        k = kz(e0, k0, kp)
        return [wave(e0, -k, np.exp(-1j * k * z_nm)), wave(e0, k, r * np.exp(1j * k * z_nm))]
    k = kz(eps[-1], k0, kp)
    return [wave(eps[-1], -k, t * np.exp(1j * k * (-z_nm)))]


def drive_field(eps, thickness_nm, wavelength_nm, z_nm, *, angle_deg=0.0, pol="s"):
    """Field without the particle, E/|E_inc|, at a point of an end half-space.

    Parameters
    ----------
    eps : sequence of complex array_like, shape (W,) each
        Permittivities of media 0..N, incidence side first [1]; medium 0 is
        taken non-absorbing (real part used).
    thickness_nm : sequence of float
        Inner-layer thicknesses [nm].
    wavelength_nm : float array_like, shape (W,)
        Vacuum wavelength [nm].
    z_nm : float
        Position [nm]: z >= 0 is the height above the first interface in the
        incidence medium (incident + reflected wave); z < 0 is the depth -z
        below the LAST interface, inside medium N (transmitted wave).
    angle_deg : float, keyword-only
        Angle of incidence in medium 0 [deg]; the plane of incidence is x-z.
    pol : {"s", "p"}, keyword-only

    Returns
    -------
    E : complex ndarray, shape (W, 3)
        (E_x, E_y, E_z) per unit incident amplitude; ``sum |E|^2`` is the
        field factor |E_drive/E_inc|^2.

    Notes
    -----
    Incident wave exp(i k_par x - i k_z0 z), reflected r exp(i k_z0 z),
    transmitted t exp(+i k_zN z') in medium N (z' >= 0 the depth below the last
    interface); p-polarised E from H by Ampère's law (Born & Wolf 1999, Sec. 1.5.2).
    Phase reference: incident wave at the first interface, x = 0.
    """
    return sum(E for _, E in plane_waves(eps, thickness_nm, wavelength_nm, z_nm, angle_deg=angle_deg, pol=pol))
