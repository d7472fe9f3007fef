"""Vector spherical wave functions: angular functions, plane-wave expansion, sphere T-matrix.

Convention (Jackson 1999, Sec. 9.7 and 10.3, from memory): with the normalised
spherical harmonics Y_nm = c_nm P_n^m(cos theta) exp(i m phi) (Condon-Shortley
phase in P_n^m, c_nm = sqrt((2n+1)/(4 pi) (n-m)!/(n+m)!)) and the vector
spherical harmonics X_nm = L Y_nm / sqrt(n(n+1)),

    M_nm = z_n(k r) X_nm(r_hat),     N_nm = curl(M_nm) / k,

with z_n = j_n (regular, superscript 1) or h_n^(1) (outgoing, superscript 3).
In the local frame of a direction (theta, phi):

    X_nm = exp(i m phi) [-pi_nm theta_hat - i tau_nm phi_hat] / sqrt(n(n+1)),
    pi_nm = m Pbar_n^m / sin(theta),  tau_nm = d Pbar_n^m / d theta,  Pbar = c_nm P_n^m.

A plane wave E e^{i k.r} (k_hat.E = 0) has regular coefficients (Jackson eq. 10.44
generalised; checked numerically in tests/test_surface_multipole.py)

    a^M_nm = 4 pi i^n E . Xt_nm(k_hat),   a^N_nm = 4 pi i^n (-i) E . (k_hat x Xt_nm(k_hat)),

where Xt_nm = exp(-i m phi)[-pi_nm theta_hat + i tau_nm phi_hat]/sqrt(n(n+1)) is the
conjugate of X_nm on real directions, continued analytically (for complex
directions cos(theta) = k_z/k, sin(theta) = k_par/k with cos^2 + sin^2 = 1).
An outgoing field sum b^M M^(3) + b^N N^(3) has the far field
(-i)^(n+1) X_nm e^{ikr}/(kr) (M) and (-i)^n r_hat x X_nm e^{ikr}/(kr) (N), its power is
sum |b|^2 / (2 Z k^2), and with the exciting regular field e the power taken up by
the particle is sum(-Re(conj(e) b) - |b|^2) / (2 Z k^2).
"""

from __future__ import annotations

import numpy as np

__all__ = ["angular", "plane_wave_coefficients", "sphere_tmatrix", "orders"]


def orders(m, n_max):
    """Degrees n = max(1, |m|) .. n_max carried for azimuthal order m.

    Parameters
    ----------
    m : int
        Azimuthal order.
    n_max : int
        Largest degree.
    """
    return np.arange(max(1, abs(m)), n_max + 1)


def angular(cos_t, sin_t, m, n_max):
    """pi_nm and tau_nm (normalised, see module docstring) for n = max(1,|m|)..n_max.

    Parameters
    ----------
    cos_t, sin_t : complex array_like (same shape S)
        cos(theta), sin(theta) of (possibly complex) directions, cos^2 + sin^2 = 1.
    m : int
        Azimuthal order.
    n_max : int
        Largest degree.

    Returns
    -------
    pi, tau : complex ndarray, shape S + (len(orders(m, n_max)),)

    Notes
    -----
    Fully normalised associated Legendre recurrences (e.g. Holmes & Featherstone
    2002, eqs. 11-13, from memory), run on Q_n^m = Pbar_n^m / sin(theta) for m >= 1
    so that nothing is divided by sin(theta): pi = m Q, tau = n cos Q_n - f_nm Q_{n-1},
    f_nm = sqrt((2n+1)/(2n-1) (n^2 - m^2)); for m = 0, tau_n0 = sqrt(n(n+1)) Pbar_n^1.
    Negative m: Pbar_n^-m = (-1)^m Pbar_n^m, so pi_n,-m = -(-1)^m pi_nm, tau_n,-m = (-1)^m tau_nm.
    """
    x = np.asarray(cos_t, complex)
    s = np.asarray(sin_t, complex)
    ma = abs(m)
    mm = max(ma, 1)
    # Q_mm = Pbar_mm / s for mm >= 1
    q = np.full(x.shape, 1 / np.sqrt(4 * np.pi), complex)
    for j in range(1, mm + 1):
        q = -np.sqrt((2 * j + 1) / (2 * j)) * q * (s if j > 1 else 1)
    qs = [q]                                              # Q_n^mm, n = mm..n_max
    if n_max > mm:
        qs.append(np.sqrt(2 * mm + 3) * x * q)
    for n in range(mm + 2, n_max + 1):
        a = np.sqrt((4 * n * n - 1) / (n * n - mm * mm))
        b = np.sqrt(((n - 1) ** 2 - mm * mm) / (4 * (n - 1) ** 2 - 1))
        qs.append(a * (x * qs[-1] - b * qs[-2]))
    Q = np.stack(qs, -1)
    n = np.arange(mm, n_max + 1)
    f = np.sqrt((2 * n + 1) / (2 * n - 1) * (n * n - mm * mm))
    Qm1 = np.concatenate([np.zeros(x.shape + (1,), complex), Q[..., :-1]], -1)
    if ma == 0:
        pi = np.zeros_like(Q)
        tau = np.sqrt(n * (n + 1)) * s[..., None] * Q      # Pbar_n^1 = s Q_n^1
        return pi, tau
    pi = ma * Q
    tau = n * x[..., None] * Q - f * Qm1
    if m < 0:
        sign = (-1) ** ma
        pi, tau = -sign * pi, sign * tau
    return pi, tau


def plane_wave_coefficients(khat, E, m, n_max):
    """Regular-wave coefficients (a^M, a^N) of order m of plane waves E exp(i k.r).

    Parameters
    ----------
    khat : (W, 3) complex
        Directions in the x-z plane with k_x >= 0 (k_hat . k_hat = 1).
    E : (W, 3) complex
        Amplitudes at the expansion origin.
    m : int
    n_max : int

    Returns
    -------
    aM, aN : (W, len(orders(m, n_max))) complex
    """
    cos_t, sin_t = khat[:, 2], khat[:, 0]
    pi, tau = angular(cos_t, sin_t, m, n_max)
    n = orders(m, n_max)
    e_th = E[:, 0] * cos_t - E[:, 2] * sin_t              # E . theta_hat (bilinear), phi = 0
    e_ph = E[:, 1]
    pref = 4 * np.pi * (1j ** n) / np.sqrt(n * (n + 1))
    aM = pref * (e_th[:, None] * (-pi) + e_ph[:, None] * (1j * tau))
    aN = pref * (-1j) * (e_th[:, None] * (-1j * tau) + e_ph[:, None] * (-pi))
    return aM, aN


def sphere_tmatrix(eps_layers, radii_nm, wavelength_nm, n_host, n_max):
    """Diagonal T-matrix (t^M_n, t^N_n) = (-b_n, -a_n) of a (layered) sphere, each (W, n_max).

    Parameters
    ----------
    eps_layers : sequence of (W,) complex
        Permittivity of each layer, core first [1].
    radii_nm : sequence of float
        Outer radius of each layer [nm].
    wavelength_nm : (W,) float
    n_host : (W,) float
        Real index of the host [1].
    n_max : int

    Notes
    -----
    With b^M = t^M e^M, b^N = t^N e^N for the coefficients of this module;
    a_n, b_n from `nanoabs.mie.mie_coefficients_layered` (Bohren & Huffman 1983,
    eq. 4.53: the scattered field is sum E_n (i a_n N_e1n - b_n M_o1n) for the
    incident sum E_n (M_o1n - i N_e1n)).
    """
    from .mie import mie_coefficients_layered

    wl = np.atleast_1d(np.asarray(wavelength_nm, float))
    k_h = 2 * np.pi * n_host / wl
    m = np.stack([np.sqrt(np.asarray(e, complex) + 0 * wl) / n_host for e in eps_layers])
    x = np.stack([k_h * float(r) for r in radii_nm])
    a, b = mie_coefficients_layered(m, x, n_max)
    return -b.T, -a.T
