"""A dipole particle near a planar stack: reflected Green's function, image dipole, absorption.

The particle sits in a non-absorbing host (medium 0 of the stack seen from the
particle's side, real permittivity eps_h, k_h = n_h k0) at height h [nm] above
the first interface. Its response is the 3x3 electric polarisability alpha
[nm^3] in the host, radiatively corrected as the particle solver gives it, in the
convention p = eps0 eps_h alpha E (sphere, static limit: alpha = 4 pi a^3
(eps - eps_h)/(eps + 2 eps_h)). Fields are written per unit incident amplitude and
dipoles as q = p/(eps0 eps_h) [nm^3], so the field the particle makes at its own
position after reflection is E_R = Gamma q with Gamma = k_h^2 G_R [nm^-3]
(G_R the reflected dyadic Green's function of Novotny & Hecht 2012, eq. 10.13).

Method "sommerfeld": Gamma by Sommerfeld integrals over the in-plane wavevector
k_par on a path deformed into the fourth quadrant (an ellipse from 0 to c beyond
every branch point and guided-mode pole, then the real axis with a mapped
tail), so the branch points k_j and poles (which lie on or above the real axis
for exp(-i omega t) and passive media) are never touched; Gauss-Legendre rules
are doubled until two successive results agree to ``rtol`` relative to
k_h^3/(6 pi) + |Gamma| (Paulus et al. 2000, Sec. III, elliptic path).
Method "image": the quasi-static limit k0 -> 0 of the same integrals
(Yamaguchi, Yoshida & Kinbara 1974; Wind, Vlieger & Bedeaux 1987), which for
one interface is the image dipole Gamma_zz = 2 Gamma_xx = beta/(16 pi h^3),
beta = (eps_s - eps_h)/(eps_s + eps_h).

References
----------
.. [NH] L. Novotny and B. Hecht, *Principles of Nano-Optics*, 2nd ed., Cambridge
   (2012), eqs. 10.13-10.16 (reflected Green's function at the source), eq. 10.26
   (normalised power of a dipole) (from memory).
.. [P00] M. Paulus, P. Gay-Balmaz and O. J. F. Martin, "Accurate and efficient
   computation of the Green's tensor for stratified media", Phys. Rev. E 62,
   5797 (2000), Sec. III (integration path).
.. [Y74] T. Yamaguchi, S. Yoshida and A. Kinbara, Thin Solid Films 21, 173 (1974).
.. [W87] M. M. Wind, J. Vlieger and D. Bedeaux, Physica A 141, 33 (1987).
.. [BH83] C. F. Bohren and D. R. Huffman, Wiley (1983), eq. 5.15 (radiative
   correction) and Sec. 4.4 (dipole term of Mie theory).
"""

from __future__ import annotations

from functools import lru_cache

import numpy as np

from ._errors import NanoabsError
from .stack import kz, stack_coefficients

__all__ = ["sommerfeld", "reflected_dyadic", "image_dyadic", "dressed_dipole", "dipole_cross_sections"]

MAX_DOUBLINGS = 7
WAVELENGTH_CHUNK = 16   # wavelengths integrated together (arrays of WAVELENGTH_CHUNK x nodes x 2 n_max)


@lru_cache(maxsize=64)
def _gauss_legendre(n):
    """Gauss-Legendre nodes and weights on [-1, 1] (cached: numpy builds them by an eigenproblem)."""
    return np.polynomial.legendre.leggauss(n)


def _path(c, h_norm, n_ellipse, n_tail, s_max=None):
    """Nodes and weights in s = k_par / k_h: ellipse 0 -> c (fourth quadrant), then c -> inf.

    c : (W,) end of the ellipse; h_norm : k_h h. Returns s (W, K), w (W, K) complex.
    ``s_max`` (> c): stop the real-axis part there (a truncated contour, for studies only).
    """
    t, wt = _gauss_legendre(n_ellipse)
    th = 0.5 * np.pi * (t + 1)                                        # [0, pi]
    c = np.asarray(c, float)[:, None]
    depth = 0.25 * c
    s1 = 0.5 * c * (1 - np.cos(th)) - 1j * depth * np.sin(th)
    w1 = (0.5 * c * np.sin(th) - 1j * depth * np.cos(th)) * (0.5 * np.pi * wt)
    u, wu = _gauss_legendre(n_tail)
    u = 0.5 * (u + 1)
    scale = 1.0 / np.maximum(2 * np.asarray(h_norm, float), 1e-3)[:, None]
    s2 = c + scale * u / (1 - u)
    w2 = scale / (1 - u) ** 2 * 0.5 * wu
    if s_max is not None:
        span = np.maximum(s_max - c, 0.0)          # a cut inside the ellipse keeps the ellipse whole
        s2, w2 = c + span * u + 0 * scale, span * 0.5 * wu + 0 * scale
    return np.concatenate([s1, s2 + 0j], 1), np.concatenate([w1, w2 + 0j], 1)


def sommerfeld(integrand, n_max_stack, h_norm, *, rtol=1e-9, matrix=False, s_max=None):
    """Integral over s = k_par/k_h in [0, inf) of ``integrand(s)`` on the deformed path.

    Parameters
    ----------
    integrand : callable
        ``integrand(s, w)`` with nodes s and weights w of shape (W, K) returns the
        quadrature sum (W, C) of the C integrands.
    n_max_stack : (W,) float
        Largest Re(n_j)/n_h over the stack (the branch points lie at s <= this).
    h_norm : (W,) float
        k_h h of the source above the first interface [1].
    rtol : float, keyword-only
        Tolerance of the doubling test, relative to 1/(6 pi) + max |result| per
        wavelength (in units of k_h^3 for Green's-function integrands).
    matrix : bool, keyword-only
        The C components are a square matrix R whose entries span many orders of
        magnitude (multipoles): entry (i, j) is then compared with
        sqrt(|R_ii| |R_jj|) + |R_ij| instead.
    s_max : float, keyword-only
        Truncate the integral at s = s_max (studies of the truncated contour only; the
        package's results use the full path).

    Returns
    -------
    value : (W, C) complex ndarray
    error : (W,) float ndarray
        |I_2N - I_N| / (1/(6 pi) + max|I|) of the last doubling (achieved accuracy).
    """
    c = 1.2 * np.asarray(n_max_stack, float) + 0.5
    n1 = 24 + int(4 * np.max(h_norm))
    n2 = 24
    prev = None
    for _ in range(MAX_DOUBLINGS):
        s, w = _path(c, h_norm, n1, n2, s_max)
        val = integrand(s, w)
        if prev is not None:
            if matrix:
                size = int(round(np.sqrt(val.shape[1])))
                d = np.sqrt(np.abs(np.diagonal(val.reshape(-1, size, size), axis1=1, axis2=2)))
                scale = (d[:, :, None] * d[:, None, :]).reshape(val.shape) + np.abs(val) + 1e-300
                err = np.max(np.abs(val - prev) / scale, axis=1)
            else:
                scale = 1 / (6 * np.pi) + np.max(np.abs(val), axis=1)
                err = np.max(np.abs(val - prev), axis=1) / scale
            if np.all(err < rtol):
                return val, err
        prev, n1, n2 = val, 2 * n1, 2 * n2
    raise NanoabsError(f"Sommerfeld integral: tolerance {rtol:g} not reached (error {np.max(err):.2g}); "
                       "allowed: a smooth stack, particle height > 0.01 nm")


def _host_reflection(e, thickness_nm, k0, k_h, s):
    """r_s, r_p of the stack and u_z = k_z/k_h (Im >= 0) at s = k_par/k_h, shape (W, K)."""
    kp = s * k_h[:, None]
    rs, _ = stack_coefficients(e, thickness_nm, k0[:, None], kp, "s")
    rp, _ = stack_coefficients(e, thickness_nm, k0[:, None], kp, "p")
    return rs, rp, kz(1.0, 1.0, s)


def _green_integrand(eps, thickness_nm, k0, k_h, h_nm):
    """Integrand of Gamma/k_h^3 in s = k_par/k_h: components (E_par, E_perp, M_par, M_perp)."""
    e = [np.asarray(x, complex)[:, None] for x in eps]

    def f(s, w):
        rs, rp, uz = _host_reflection(e, thickness_nm, k0, k_h, s)
        ph = np.exp(2j * uz * k_h[:, None] * h_nm) / uz * 1j
        par_e = ph * s * (rs - uz ** 2 * rp) / (8 * np.pi)
        par_m = ph * s * (rp - uz ** 2 * rs) / (8 * np.pi)
        vals = np.stack([par_e, ph * s ** 3 * rp / (4 * np.pi), par_m, ph * s ** 3 * rs / (4 * np.pi)], -1)
        return np.einsum("wk,wkc->wc", w, vals)
    return f


def _diag(par, perp):
    out = np.zeros(par.shape + (3, 3), complex)
    out[..., 0, 0] = out[..., 1, 1] = par
    out[..., 2, 2] = perp
    return out


def reflected_dyadic(eps, thickness_nm, wavelength_nm, height_nm, *, rtol=1e-9):
    """Reflected Green's dyadic at the source, Gamma = k_h^2 G_R [nm^-3], electric and magnetic.

    Parameters
    ----------
    eps : sequence of (W,) complex arrays
        Permittivities of the stack seen from the particle: eps[0] is the host
        (real part used), then inner layers, then the far half-space [1].
    thickness_nm : sequence of float
        Inner-layer thicknesses [nm].
    wavelength_nm : (W,) float
        Vacuum wavelengths [nm].
    height_nm : float
        Height of the dipole above the first interface [nm], > 0.
    rtol : float, keyword-only
        Accuracy of the Sommerfeld integrals relative to k_h^3/(6 pi) + |Gamma|.

    Returns
    -------
    gamma_e, gamma_m : (W, 3, 3) complex ndarray
        Diagonal dyadics: E_R = gamma_e q for q = p/(eps0 eps_h); H_R = gamma_m m
        for a magnetic dipole m [nm^3 A/m units alike].
    error : (W,) float
        Achieved accuracy of the integrals (relative, see `sommerfeld`).

    Notes
    -----
    Novotny & Hecht (2012), eqs. 10.15-10.16 (from memory), written in s = k_par/k_h,
    u_z = sqrt(1 - s^2):
    Gamma_xx = Gamma_yy = (i k_h^3/8 pi) int s/u_z (r_s - u_z^2 r_p) exp(2 i u_z k_h h) ds,
    Gamma_zz = (i k_h^3/4 pi) int s^3/u_z r_p exp(2 i u_z k_h h) ds;
    the magnetic dyadic exchanges r_s and r_p (duality). Then a dipole's power
    relative to free space is P/P0 = 1 + (6 pi / k_h^3) Im Gamma_ii (eq. 10.26).
    """
    wl = np.asarray(wavelength_nm, float)
    k0 = 2 * np.pi / wl
    eps = [np.asarray(eps[0], complex).real + 0j] + [np.broadcast_to(np.asarray(x, complex), wl.shape) for x in eps[1:]]
    n_h = np.sqrt(eps[0].real)
    k_h = n_h * k0
    nmax = np.max([np.sqrt(x).real for x in eps], axis=0) / n_h
    vals, err = sommerfeld(_green_integrand(eps, thickness_nm, k0, k_h, height_nm), nmax, k_h * height_nm,
                           rtol=rtol)
    vals = vals * (k_h ** 3)[:, None]
    return _diag(vals[:, 0], vals[:, 1]), _diag(vals[:, 2], vals[:, 3]), err


def image_dyadic(eps, thickness_nm, height_nm, *, n_nodes=64):
    """Quasi-static (image-dipole) limit of the electric Gamma [nm^-3].

    Parameters
    ----------
    eps : sequence of (W,) complex arrays
        Stack seen from the particle, host first [1].
    thickness_nm : sequence of float
        Inner-layer thicknesses [nm].
    height_nm : float
        Height of the dipole above the first interface [nm].
    n_nodes : int, keyword-only
        Gauss-Laguerre nodes for a layered stack (one interface is closed form).

    Returns
    -------
    (W, 3, 3) complex ndarray
        diag(1, 1, 2) * (1/(32 pi h^3)) * beta for one interface, beta =
        (eps_s - eps_h)/(eps_s + eps_h) (Yamaguchi et al. 1974, eq. 5; Wind et al.
        1987, eq. 2.9, both from memory); for a layered stack
        Gamma_zz = 2 Gamma_xx = (1/4 pi) int_0^inf k^2 r_p^static(k) exp(-2 k h) dk,
        with r_p^static the k0 -> 0 limit of the stack's r_p.
    """
    e = [np.asarray(x, complex) for x in eps]
    e[0] = e[0].real + 0j
    if len(e) == 2:
        beta = (e[1] - e[0]) / (e[1] + e[0])
    else:
        x, w = np.polynomial.laguerre.laggauss(n_nodes)
        k = x / (2 * height_nm)
        rp, _ = stack_coefficients([np.asarray(v)[..., None] for v in e], thickness_nm, 0.0, k, "p")
        beta = np.sum(w * x ** 2 * rp, -1) / 2          # int k^2 r e^{-2kh} dk = beta_eff * 2/(2h)^3
    g = beta / (32 * np.pi * height_nm ** 3)
    return _diag(g, 2 * g)


def dressed_dipole(alpha, gamma, e_drive):
    """Dipole q = p/(eps0 eps_h) [nm^3] of a particle driven by e_drive and its own reflected field.

    q = (1 - alpha Gamma)^-1 alpha E_drive: the dipole in the field of its own image
    (Wind, Vlieger & Bedeaux 1987, Sec. 3; Novotny & Hecht 2012, ch. 10; from memory).

    Parameters
    ----------
    alpha : (W, 3, 3) complex
        Polarisability in the host [nm^3].
    gamma : (W, 3, 3) complex
        Reflected dyadic [nm^-3] (`reflected_dyadic` or `image_dyadic`).
    e_drive : (W, 3) complex
        Field without the particle, per unit incident amplitude.
    """
    alpha = np.asarray(alpha, complex)
    eye = np.eye(3)
    m = eye - alpha @ gamma
    return np.linalg.solve(m, (alpha @ np.asarray(e_drive, complex)[..., None]))[..., 0]


def dipole_cross_sections(alpha, q, gamma, k0, n_host, n_inc):
    """Absorbed and radiated power of the dipole per incident irradiance [nm^2].

    Parameters
    ----------
    alpha : (W, 3, 3) complex
        Radiatively corrected polarisability in the host [nm^3].
    q : (W, 3) complex
        Dressed dipole from `dressed_dipole` [nm^3] per unit incident field.
    gamma : (W, 3, 3) complex
        Reflected dyadic used [nm^-3].
    k0 : (W,) float
        Vacuum wavenumber [nm^-1].
    n_host, n_inc : (W,) float
        Real refractive indices of the host and of the incidence medium [1].

    Returns
    -------
    sigma_abs, sigma_rad : (W,) float ndarray
        sigma_abs = (k0 n_h^2 / n_inc) q^H (-Im alpha0^-1) q, where
        -Im alpha0^-1 = -(alpha^-1 - alpha^-H)/2i - k_h^3/(6 pi): the work done on
        the particle's own loss (bare polarisability alpha0, alpha^-1 = alpha0^-1 -
        i k_h^3/(6 pi), Bohren & Huffman 1983, eq. 5.15 / Draine 1988, eq. 3 from
        memory). In a homogeneous host it reduces to k_h Im(alpha) -
        k_h^4 |alpha|^2/(6 pi). sigma_rad = (k0 n_h^2/n_inc)(k_h^3/6 pi |q|^2 +
        Im q^H Gamma q): all power the dipole emits (both half-spaces, guided
        modes and loss in absorbing layers), Novotny & Hecht (2012), eq. 10.26.
        Both are per irradiance n_inc |E_inc|^2 / (2 Z0) of the incident wave.
    """
    alpha = np.asarray(alpha, complex)
    k_h = n_host * k0
    ainv = np.linalg.inv(alpha)
    loss = -(ainv - np.conj(np.swapaxes(ainv, -1, -2))) / 2j - (k_h ** 3 / (6 * np.pi))[:, None, None] * np.eye(3)
    qc = np.conj(q)
    pref = k0 * n_host ** 2 / n_inc
    s_abs = pref * np.einsum("wi,wij,wj->w", qc, loss, q).real
    s_rad = pref * (k_h ** 3 / (6 * np.pi) * np.sum(np.abs(q) ** 2, -1)
                    + np.einsum("wi,wij,wj->w", qc, gamma, q).imag)
    return s_abs, s_rad


def sphere_alpha(eps_layers, radii_nm, wavelength_nm, n_host):
    """Radiatively corrected electric-dipole polarisability of a (layered) sphere [nm^3], (W, 3, 3).

    alpha = 6 pi i a_1 / k_h^3 from the Mie coefficient a_1 (Bohren & Huffman 1983,
    eq. 4.53 and Sec. 5.2, from memory: the far field of a_1 is that of this dipole),
    so that k_h Im(alpha) - k_h^4 |alpha|^2 / (6 pi) is the n = 1 electric term of
    the Mie absorption cross-section exactly. Parameters as `nanoabs.vswf.sphere_tmatrix`.
    """
    from .vswf import sphere_tmatrix

    k_h = 2 * np.pi * np.asarray(n_host) / np.atleast_1d(np.asarray(wavelength_nm, float))
    _, tN = sphere_tmatrix(eps_layers, radii_nm, wavelength_nm, n_host, 1)
    return (-6j * np.pi * tN[:, 0] / k_h ** 3)[:, None, None] * np.eye(3)


METHODS = ("sommerfeld", "image")


def dipole_response(environment, alpha, wavelength_nm, *, half_height_nm, method="sommerfeld", rtol=1e-9):
    """Absorption of a dipole particle in a planar environment, per incident irradiance.

    Parameters
    ----------
    environment : OnSubstrate or Buried
        From `nanoabs.environments`.
    alpha : (W, 3, 3) complex
        Radiatively corrected polarisability in the host [nm^3] (e.g. `sphere_alpha`).
    wavelength_nm : (W,) float
        Vacuum wavelengths [nm].
    half_height_nm : float, keyword-only
        Particle extent below its centre [nm] (the radius of a sphere).
    method : {"sommerfeld", "image"}, keyword-only
        Full retarded reflected Green's function, or its quasi-static image limit.
    rtol : float, keyword-only
        Accuracy of the Sommerfeld integrals (see `reflected_dyadic`).

    Returns
    -------
    dict
        ``sigma_abs_nm2`` and ``sigma_rad_nm2`` (W,) per irradiance of the incident
        wave in the incidence medium (see `dipole_cross_sections`), ``field_factor``
        (W,), ``q`` (W, 3) dressed dipole [nm^3], ``integration_error`` (W,) (zeros for
        "image"), ``height_nm`` of the centre above/below the surface.
    """
    from ._errors import check_choice

    method = check_choice("method", method, METHODS)
    wl = np.atleast_1d(np.asarray(wavelength_nm, float))
    res = environment.resolve(wl)
    h = environment.center_height_nm(half_height_nm)
    e_drive = environment.drive_field(wl, half_height_nm, res)
    if method == "sommerfeld":
        gamma, _, err = reflected_dyadic(res.host_stack, res.host_thickness_nm, wl, h, rtol=rtol)
    else:
        gamma, err = image_dyadic(res.host_stack, res.host_thickness_nm, h), np.zeros(wl.shape)
    q = dressed_dipole(alpha, gamma, e_drive)
    s_abs, s_rad = dipole_cross_sections(alpha, q, gamma, 2 * np.pi / wl, res.n_host, res.n_inc)
    return {"sigma_abs_nm2": s_abs, "sigma_rad_nm2": s_rad, "field_factor": np.sum(np.abs(e_drive) ** 2, -1),
            "q": q, "integration_error": err, "height_nm": h}


# --------------------------------------------------------------------------
# multipole method (T-matrix coupled to the stack)
# --------------------------------------------------------------------------


def _coupling_integrand(eps, thickness_nm, k0, k_h, h_nm, m, n_max):
    """Integrand in s = k_par/k_h of the reflection matrix R (2x2 blocks M/N x n x n'), see `reflection_matrix`."""
    from .vswf import angular, orders

    n = orders(m, n_max)
    sq2 = np.tile(np.sqrt(n * (n + 1)), 2)
    i_n = 1j ** n
    e = [np.asarray(x, complex)[:, None] for x in eps]

    def f(s, w):
        rs, rp, uz = _host_reflection(e, thickness_nm, k0, k_h, s)
        pi_d, tau_d = angular(-uz, s, m, n_max)
        pi_u, tau_u = angular(uz, s, m, n_max)
        half = np.exp(1j * uz * k_h[:, None] * h_nm)          # split between source and receiver:
        gone = np.abs(half) < 1e-150                              # s^n of each stays finite
        half = np.where(gone, 0, half)[..., None]
        pre = np.where(gone, 0, w * 4j * np.pi * s / uz)[..., None]
        with np.errstate(invalid="ignore", over="ignore"):
            src_p = half * pre * np.concatenate([(-1j) ** (n + 1) * -pi_d, (-1j) ** n * 1j * tau_d], -1) / sq2
            src_s = half * pre * np.concatenate([(-1j) ** (n + 1) * -1j * tau_d, (-1j) ** n * -pi_d], -1) / sq2
            rec_p = half * np.concatenate([i_n * -pi_u, i_n * -tau_u], -1) / sq2
            rec_s = half * np.concatenate([i_n * 1j * tau_u, i_n * 1j * pi_u], -1) / sq2
        src_p = np.where(gone[..., None], 0, src_p) * rp[..., None]
        src_s = np.where(gone[..., None], 0, src_s) * rs[..., None]
        rec_p = np.where(gone[..., None], 0, rec_p)
        rec_s = np.where(gone[..., None], 0, rec_s)
        out = np.swapaxes(rec_p, 1, 2) @ src_p + np.swapaxes(rec_s, 1, 2) @ src_s       # (W, 2nn, 2nn)
        return out.reshape(out.shape[0], -1)
    return f


def reflection_matrix(eps, thickness_nm, wavelength_nm, height_nm, m, n_max, *, rtol=1e-9, s_max=None):
    """Matrix R of order m: regular coefficients of the reflected wave = R x outgoing coefficients.

    Parameters
    ----------
    eps : sequence of (W,) complex
        Stack seen from the particle, host first (real part of the host used) [1].
    thickness_nm : sequence of float
        Inner-layer thicknesses [nm].
    wavelength_nm : (W,) float
        Vacuum wavelengths [nm].
    height_nm : float
        Height of the expansion centre above the first interface [nm].
    m : int
        Azimuthal order (conserved: the stack is invariant under rotations about z).
    n_max : int
        Largest multipole degree.
    rtol : float, keyword-only
        Accuracy of the Sommerfeld integrals, entry (i, j) relative to
        sqrt(|R_ii| |R_jj|) + |R_ij|.
    s_max : float, keyword-only
        Truncate the k_par integral at s_max k_h (`sommerfeld`; order studies only).

    Returns
    -------
    R : (W, 2 nn, 2 nn) complex
        Rows and columns ordered [M_n..., N_n...] over n = max(1,|m|)..n_max
        (VSWF convention of `nanoabs.vswf`).
    error : (W,) float
        Achieved accuracy of the integrals.

    Notes
    -----
    Plane-wave (angular-spectrum) route (Bobbert & Vlieger 1986, Sec. 3; Egel, Kettlitz
    & Lemmer 2016, J. Opt. Soc. Am. A 33, 698, Sec. 2, from memory): the outgoing wave is
    written as downward plane waves (Weyl identity, far-field pattern F(k_hat):
    (i/2pi) int F e^{ik.r} / k_z d^2k_par), each is reflected with r_s or r_p of the
    stack and the phase exp(2 i k_z h), and expanded in regular waves about the centre
    (`nanoabs.vswf`). The azimuthal integral gives 2 pi delta_mm'. In s = k_par/k_h:
    R = int ds (s/u_z) 4 pi i exp(2 i u_z k_h h) sum_j r_j Rec_j(theta_up) Src_j(theta_down),
    on the path of `sommerfeld`.
    """
    wl = np.atleast_1d(np.asarray(wavelength_nm, float))
    k0 = 2 * np.pi / wl
    eps = [np.asarray(eps[0], complex).real + 0j] + [np.broadcast_to(np.asarray(x, complex), wl.shape) for x in eps[1:]]
    n_h = np.sqrt(eps[0].real)
    k_h = n_h * k0
    nmax_stack = np.max([np.sqrt(x).real for x in eps], axis=0) / n_h
    vals, err = sommerfeld(_coupling_integrand(eps, thickness_nm, k0, k_h, height_nm, m, n_max),
                           nmax_stack, k_h * height_nm, rtol=rtol, matrix=True, s_max=s_max)
    size = int(round(np.sqrt(vals.shape[-1])))
    return vals.reshape(len(wl), size, size), err


def sphere_blocks(eps_layers, radii_nm, wavelength_nm, n_host, n_max):
    """``tmatrix(m)`` -> (W, 2nn, 2nn) for a (layered) sphere: diagonal, independent of m.

    Parameters are those of `nanoabs.vswf.sphere_tmatrix`.
    """
    from .vswf import orders, sphere_tmatrix

    tM, tN = sphere_tmatrix(eps_layers, radii_nm, wavelength_nm, n_host, n_max)

    def blocks(m):
        n = orders(m, n_max) - 1
        d = np.concatenate([tM[:, n], tN[:, n]], 1)
        return d[:, :, None] * np.eye(d.shape[1])
    return blocks


def _azimuthal_orders(waves, n_max):
    """Orders m excited by the drive waves: +-1 at normal incidence, all |m| <= n_max otherwise."""
    oblique = any(np.any(np.abs(k[:, 0]) > 0) for k, _ in waves)
    return range(-n_max, n_max + 1) if oblique else (-1, 1)


def multipole_response(environment, tmatrix, wavelength_nm, *, half_height_nm, n_max, rtol=1e-9, check_order=4):
    """Absorption of a particle with a T-matrix in a planar environment (multipole method).

    Parameters
    ----------
    environment : OnSubstrate or Buried
        From `nanoabs.environments`.
    tmatrix : callable
        ``tmatrix(m)`` -> (W, 2 nn, 2 nn) T-matrix block of azimuthal order m in the
        host, ordered [M_n..., N_n...], n = max(1,|m|)..n_max (`nanoabs.vswf`
        convention). Any particle whose T-matrix is block-diagonal in m (a sphere,
        a body of revolution standing upright) fits.
    wavelength_nm : (W,) float
        Vacuum wavelengths [nm].
    half_height_nm : float, keyword-only
        Particle extent below its centre [nm].
    n_max : int, keyword-only
        Multipole degree.
    rtol : float, keyword-only
        Accuracy of the Sommerfeld integrals.
    check_order : int, keyword-only
        The system is also solved truncated at n_max - check_order (same integrals);
        ``n_max_change`` is the largest relative change of sigma_abs between the two.

    Returns
    -------
    dict
        ``sigma_abs_nm2`` (W,): (n_h/n_inc) k_h^-2 sum(-Re(conj(e) b) - |b|^2), e = a + R b
        the exciting coefficients, b = T e (Bobbert & Vlieger 1986, Sec. 3, from memory; the power
        flux of `nanoabs.vswf`); ``sigma_drive_nm2`` (W,): work of the drive field,
        (n_h/n_inc) k_h^-2 sum(-Re(conj(a) b)), = absorbed + all scattered power;
        ``field_factor``; ``integration_error`` (W,); ``n_max``; ``b`` and ``e`` (dict
        m -> (W, 2nn)): outgoing and exciting (drive + reflected) coefficients.

    Notes
    -----
    Solves (1 - T R) b = T a per order m, with a the regular coefficients of the
    field without the particle (`nanoabs.vswf.plane_wave_coefficients` of each plane
    wave of `environment.drive_waves`) and R from `reflection_matrix`.
    """
    from .vswf import orders, plane_wave_coefficients

    wl = np.atleast_1d(np.asarray(wavelength_nm, float))
    res = environment.resolve(wl)
    h = environment.center_height_nm(half_height_nm)
    waves = environment.drive_waves(wl, half_height_nm, res)
    k_h = 2 * np.pi * res.n_host / wl
    s_abs, s_drive, s_low, err = (np.zeros(wl.shape) for _ in range(4))
    coeffs, exciting, cache = {}, {}, {}
    for m in _azimuthal_orders(waves, n_max):
        a = sum(np.concatenate(plane_wave_coefficients(k, E, m, n_max), 1) for k, E in waves)
        T = tmatrix(m)
        if -m in cache:   # R(-m) = S R(m) S, S = diag(1 (M), -1 (N)): P_n^-m = (-1)^m P_n^m x const
            sgn = np.concatenate([np.ones(T.shape[1] // 2), -np.ones(T.shape[1] // 2)])
            R = cache[-m] * sgn[:, None] * sgn[None, :]
        else:
            R = np.empty(T.shape, complex)
            for i in range(0, len(wl), WAVELENGTH_CHUNK):
                sl = slice(i, i + WAVELENGTH_CHUNK)
                stack_i = [np.broadcast_to(x, wl.shape)[sl] for x in res.host_stack]
                R[sl], e_i = reflection_matrix(stack_i, res.host_thickness_nm, wl[sl], h, m, n_max, rtol=rtol)
                err[sl] = np.maximum(err[sl], e_i)
            cache[m] = R
        b, ab, dr = _solve_order(T, R, a)
        s_abs, s_drive, coeffs[m] = s_abs + ab, s_drive + dr, b
        exciting[m] = a + (R @ b[..., None])[..., 0]
        keep = np.tile(orders(m, n_max) <= n_max - check_order, 2)
        if np.any(keep):  # same R, T and a truncated check_order degrees lower: the order check
            s_low += _solve_order(T[:, keep][:, :, keep], R[:, keep][:, :, keep], a[:, keep])[1]
    scale = res.n_host / res.n_inc / k_h ** 2
    with np.errstate(invalid="ignore", divide="ignore"):
        change = float(np.nanmax(np.abs(s_low / s_abs - 1))) if check_order else float("nan")
    return {"sigma_abs_nm2": scale * s_abs, "sigma_drive_nm2": scale * s_drive,
            "field_factor": np.sum(np.abs(sum(E for _, E in waves)) ** 2, -1),
            "integration_error": err, "n_max": n_max, "n_max_change": change, "b": coeffs, "e": exciting}


def _solve_order(T, R, a):
    """b = (1 - T R)^-1 T a for one order m; returns b, absorbed and drive terms (before scaling).

    Balanced: D^-1 (1 - T R) D (D^-1 b) = D^-1 T a with D = sqrt|diag T|, since
    T_n ~ x^(2n+1) and R ~ (k h)^-(n+n'+1) span many decades.
    """
    d = np.sqrt(np.abs(np.diagonal(T, axis1=1, axis2=2))) + 1e-300
    A = np.eye(T.shape[1]) - (T @ R) / d[:, :, None] * d[:, None, :]
    b = d * np.linalg.solve(A, ((T @ a[..., None])[..., 0] / d)[..., None])[..., 0]
    e = a + (R @ b[..., None])[..., 0]
    return b, np.sum(-np.real(np.conj(e) * b) - np.abs(b) ** 2, 1), np.sum(-np.real(np.conj(a) * b), 1)


def _patterns(b, m, n_max, cos_t, sin_t):
    """Far-field pattern components (F_theta, F_phi) of outgoing coefficients b (W, 2nn) at directions (W, K)."""
    from .vswf import angular, orders

    n = orders(m, n_max)
    sq = np.sqrt(n * (n + 1))
    pi, tau = angular(cos_t, sin_t, m, n_max)
    bM, bN = b[:, None, :len(n)], b[:, None, len(n):]
    f_th = np.sum(bM * (-1j) ** (n + 1) * -pi / sq + bN * (-1j) ** n * 1j * tau / sq, -1)
    f_ph = np.sum(bM * (-1j) ** (n + 1) * -1j * tau / sq + bN * (-1j) ** n * -pi / sq, -1)
    return f_th, f_ph


def scattered_powers(environment, result, wavelength_nm, *, half_height_nm, n_nodes=96):
    """Power scattered into the particle's half-space and into the far half-space, per irradiance [nm^2].

    Parameters
    ----------
    environment : OnSubstrate or Buried
    result : dict
        From `multipole_response` (uses ``b`` and ``n_max``).
    wavelength_nm : (W,) float
    half_height_nm : float, keyword-only
    n_nodes : int, keyword-only
        Gauss-Legendre nodes per integration segment.

    Returns
    -------
    up, down : (W,) float
        Far-field integrals over the host half-space (direct + reflected waves) and
        over the propagating directions of the far half-space (transmitted waves,
        including those evanescent in the host, k_h < k_par < k_far). ``down`` is NaN
        when the far medium absorbs. Power per plane wave n |E|^2 cos(theta)/(2 Z0)
        (Born & Wolf 1999, Sec. 1.5.3); the angular spectrum of an outgoing wave is
        its far-field pattern F as (i/2 pi) F e^{ik.r}/k_z (Weyl identity, Novotny &
        Hecht 2012, ch. 3, angular spectrum representation, from memory).
    """
    wl = np.atleast_1d(np.asarray(wavelength_nm, float))
    res = environment.resolve(wl)
    h = environment.center_height_nm(half_height_nm)
    k0 = 2 * np.pi / wl
    n_h = res.n_host
    kh = (n_h * k0)[:, None]
    e = [np.asarray(x, complex)[:, None] + 0 * k0[:, None] for x in res.host_stack]
    e[0] = e[0].real + 0j
    n_far = np.sqrt(res.host_stack[-1] + 0j * k0)
    x, w = _gauss_legendre(n_nodes)
    x, w = 0.5 * (x + 1), 0.5 * w
    # host-propagating directions u_z in (0, 1), split at the critical angle of a less dense far
    # medium with quadratic maps that smooth the square-root kinks there
    u_c = np.sqrt(np.maximum(1 - (n_far.real / n_h) ** 2, 0))[:, None]
    seg_a = (u_c * (1 - x ** 2) + 0j, 2 * u_c * x * w)
    seg_b = (u_c + (1 - u_c) * x ** 2 + 0j, 2 * (1 - u_c) * x * w)
    V = np.sqrt(np.maximum((n_far.real / n_h) ** 2 - 1, 0))[:, None]
    phi = 0.5 * np.pi * x
    seg_c = (1j * V * np.sin(phi), (0.5 * np.pi * w) * V * np.cos(phi))   # evanescent in host: u_z = i v
    up = np.zeros(wl.shape)
    down = np.zeros(wl.shape)
    for m, b in result["b"].items():
        n_max = result["n_max"]
        for part, (u, wt) in enumerate((seg_a, seg_b, seg_c)):
            u = u + 0 * k0[:, None]
            s = np.sqrt(1 - u ** 2)
            kp = s * kh
            rs, ts = stack_coefficients(e, res.host_thickness_nm, k0[:, None], kp, "s")
            rp, tp = stack_coefficients(e, res.host_thickness_nm, k0[:, None], kp, "p")
            fd = _patterns(b, m, n_max, -u, s)
            ph = np.exp(2j * u * kh * h)
            if part < 2:   # d(Omega) = sin(theta) d(theta) d(alpha) = du_z d(alpha)
                fu = _patterns(b, m, n_max, u, s)
                up += 2 * np.pi * np.sum(wt * (np.abs(fu[0] + rp * ph * fd[0]) ** 2
                                               + np.abs(fu[1] + rs * ph * fd[1]) ** 2), 1)
            uzn = np.sqrt((n_far[:, None] / n_h[:, None]) ** 2 - s ** 2)       # k_zN / k_h
            with np.errstate(invalid="ignore", divide="ignore"):            # s ds / |u_z|^2 = du / |u| (dv / v)
                flux = (uzn.real * (np.abs(ts * fd[1]) ** 2 + np.abs(tp * fd[0] * n_h[:, None] / n_far[:, None]) ** 2)
                        * np.abs(ph) / np.abs(u))
            flux = np.where(np.abs(u) > 0, flux, 0.0)      # empty segment (no critical angle / no v range)
            down += 2 * np.pi * np.sum(wt * flux, 1)
    scale = n_h / res.n_inc / (n_h * k0) ** 2
    lossy = np.abs(np.imag(res.host_stack[-1] + 0j * k0)) > 1e-12
    return scale * up, np.where(lossy, np.nan, scale * down)


MAX_ORDER = 40


def sphere_on_stack(environment, eps_layers, radii_nm, wavelength_nm, *, n_max=None, conv_rtol=1e-3, rtol=1e-8):
    """Multipole method for a (layered) sphere in a planar environment, with the order chosen by convergence.

    Parameters
    ----------
    environment : OnSubstrate or Buried
    eps_layers : sequence of (W,) complex
        Permittivity of each layer, core first (with any surface damping) [1].
    radii_nm : sequence of float
        Outer radius of each layer [nm].
    wavelength_nm : (W,) float
    n_max : int, optional, keyword-only
        Fixed multipole degree; default: start 8 above the Mie truncation of the
        sphere alone (`nanoabs.mie.n_terms`) and add 8 until the solution truncated 4
        degrees lower differs by less than ``conv_rtol`` in sigma_abs (relative, at
        every wavelength), at most 40.
    conv_rtol : float, keyword-only
    rtol : float, keyword-only
        Accuracy of the Sommerfeld integrals.

    Returns
    -------
    dict
        As `multipole_response` (with ``n_max_change``), plus ``converged`` (bool).
    """
    from .mie import n_terms

    wl = np.atleast_1d(np.asarray(wavelength_nm, float))
    n_h = environment.resolve(wl).n_host
    half = float(radii_nm[-1])

    def run(n):
        return multipole_response(environment, sphere_blocks(eps_layers, radii_nm, wl, n_h, n), wl,
                                  half_height_nm=half, n_max=n, rtol=rtol)
    if n_max is not None:
        return run(int(n_max)) | {"converged": True}
    n = min(int(np.max(n_terms(2 * np.pi * n_h * half / wl))) + 8, MAX_ORDER)
    while True:
        out = run(n)
        if out["n_max_change"] < conv_rtol or n == MAX_ORDER:
            return out | {"converged": out["n_max_change"] < conv_rtol}
        n = min(n + 8, MAX_ORDER)


def sphere_absorption_profile(environment, result, eps_layers, radii_nm, wavelength_nm, rho):
    """Angle-averaged absorbed power density inside a sphere in a planar environment.

    Parameters
    ----------
    environment : OnSubstrate or Buried
    result : dict
        From `sphere_on_stack` / `multipole_response` for the same sphere (its ``e``).
    eps_layers, radii_nm, wavelength_nm :
        As given to `sphere_on_stack`.
    rho : (R,) float
        Radial positions k_h r [1] (k_h in the host).

    Returns
    -------
    q : (W, R) ndarray
        Dimensionless density with p(r) = I_inc k_h q(k_h r) [W m^-3] for the irradiance
        I_inc of the incident wave in the incidence medium, so that
        sigma_abs / (pi a^2) = (1/(pi x^2)) int q 4 pi rho^2 d rho.

    Notes
    -----
    The internal field of a sphere is fixed order by order by its exciting field; the
    angle-averaged |E|^2 keeps orders, TE and TM apart (orthogonality of the vector
    spherical harmonics, Jackson 1999, eq. 9.120, from memory). So the plane-wave profile
    of `nanoabs.mie.absorption_profile` with each order weighted by
    sum_m |e_nm|^2 / (2 pi (2n + 1)) (`nanoabs.vswf` normalisation, ``order_weights``)
    and the factor n_h / n_inc of the irradiance reference gives the profile here.
    """
    from .mie import absorption_profile

    wl = np.atleast_1d(np.asarray(wavelength_nm, float))
    res = environment.resolve(wl)
    n_max = result["n_max"]
    n = np.arange(1, n_max + 1)
    w = np.zeros((2, n_max, len(wl)))
    for m, e in result["e"].items():
        deg = np.arange(max(1, abs(m)), n_max + 1)
        half = len(deg)
        w[0, deg - 1] += (np.abs(e[:, :half]) ** 2).T
        w[1, deg - 1] += (np.abs(e[:, half:]) ** 2).T
    w /= (2 * np.pi * (2 * n + 1))[None, :, None]
    k_h = 2 * np.pi * res.n_host / wl
    m_rel = np.stack([np.sqrt(np.asarray(x, complex) + 0 * wl) / res.n_host for x in eps_layers])
    x = np.stack([k_h * float(r) for r in radii_nm])
    return (res.n_host / res.n_inc)[:, None] * absorption_profile(m_rel, x, rho, order_weights=w)
