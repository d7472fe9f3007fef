"""Checks of nanoabs.surface (dipole near a planar stack) against closed forms,
an independent quadrature written here, miepython and the image-dipole literature.
"""

import miepython
import numpy as np
import pytest
from scipy.integrate import quad

import nanoabs
from nanoabs.environments import on_substrate
from nanoabs.surface import (
    dipole_cross_sections,
    dipole_response,
    dressed_dipole,
    image_dyadic,
    reflected_dyadic,
    sphere_alpha,
)

PEC_EPS = -1e16 + 1j   # |eps| -> inf: r_s -> -1, r_p -> +1 up to O(|eps|^-1/2) = 1e-8


@pytest.mark.parametrize("h", [5.0, 60.0, 250.0, 2000.0])
def test_decay_rate_near_perfect_mirror_matches_image_closed_form(h):
    # Chance, Prock & Silbey (1978), perfect-mirror limit (Novotny & Hecht 2012, Sec. 10.5,
    # from memory): with x = 2 k h,
    #   P_perp/P0 = 1 + 3 [sin x / x^3 - cos x / x^2]
    #   P_par/P0  = 1 - (3/2) [sin x / x + cos x / x^2 - sin x / x^3]
    # tolerance 1e-7 (the mirror is eps = -1e16, rounding of the quadrature 1e-9).
    wl = np.array([500.0, 900.0])
    ge, gm, err = reflected_dyadic([np.ones(2), np.full(2, PEC_EPS)], [], wl, h)
    k = 2 * np.pi / wl
    x = 2 * k * h
    perp = 1 + 3 * (np.sin(x) / x ** 3 - np.cos(x) / x ** 2)
    par = 1 - 1.5 * (np.sin(x) / x + np.cos(x) / x ** 2 - np.sin(x) / x ** 3)
    np.testing.assert_allclose(1 + 6 * np.pi / k ** 3 * ge[:, 2, 2].imag, perp, atol=1e-7)
    np.testing.assert_allclose(1 + 6 * np.pi / k ** 3 * ge[:, 0, 0].imag, par, atol=1e-7)
    # magnetic dipole: r_s and r_p exchange roles (duality), and the mirror's images of a
    # magnetic dipole have the opposite signs (Novotny & Hecht 2012, Sec. 10.5): 2 - (electric)
    np.testing.assert_allclose(1 + 6 * np.pi / k ** 3 * gm[:, 2, 2].imag, 2 - perp, atol=1e-7)
    np.testing.assert_allclose(1 + 6 * np.pi / k ** 3 * gm[:, 0, 0].imag, 2 - par, atol=1e-7)
    assert np.all(err < 1e-9)


def _gamma_real_axis(eps1, eps2, k0, h, comp):
    """Independent check: Novotny & Hecht (2012) eqs. 10.15-10.16 on the real k_par axis,
    split at k_par = k1; the 1/k_z1 endpoint singularity removed by k_z1 = k1 cos(t) on the
    propagating part and k_z1 = i v on the evanescent part; scipy.integrate.quad (QUADPACK)."""
    k1 = np.sqrt(eps1) * k0

    def refl(kp):
        kz1 = np.sqrt(eps1 * k0 ** 2 - kp ** 2 + 0j)
        kz2 = np.sqrt(eps2 * k0 ** 2 - kp ** 2 + 0j)
        kz2 = kz2 if kz2.imag >= 0 else -kz2
        rs = (kz1 - kz2) / (kz1 + kz2)
        rp = (eps2 * kz1 - eps1 * kz2) / (eps2 * kz1 + eps1 * kz2)
        return rs, rp, kz1

    def f(kp, kz1):
        rs, rp, _ = refl(kp)
        if comp == "par":
            return 1j / (8 * np.pi) * (k1 ** 2 * rs - kz1 ** 2 * rp) * np.exp(2j * kz1 * h)
        return 1j / (4 * np.pi) * kp ** 2 * rp * np.exp(2j * kz1 * h)

    def prop(t):           # k_par = k1 sin t, k_par dk_par / k_z1 = k1 sin t dt
        return f(k1 * np.sin(t), k1 * np.cos(t)) * k1 * np.sin(t)

    def evan(v):           # k_par = sqrt(k1^2 + v^2), k_par dk_par / k_z1 = -i dv
        return f(np.sqrt(k1 ** 2 + v ** 2), 1j * v) * (-1j)

    out = 0j
    for g, a, b in ((prop, 0, np.pi / 2), (evan, 0, np.inf)):
        for part in (np.real, np.imag):
            val, _ = quad(lambda t: part(g(t)), a, b, epsabs=1e-14, epsrel=1e-12, limit=400)
            out += val if part is np.real else 1j * val
    return out


@pytest.mark.parametrize("eps2", [2.13, 12.0, 12.0 + 0.5j])
def test_dielectric_half_space_against_independent_real_axis_quadrature(eps2):
    # Reference: _gamma_real_axis above (different path and quadrature); tolerance 1e-8
    # relative to k^3/(6 pi) + |Gamma| (the accuracy the method promises is 1e-9).
    wl, h = 633.0, 40.0
    k0 = 2 * np.pi / wl
    ge, _, _ = reflected_dyadic([np.ones(1), np.full(1, eps2)], [], np.array([wl]), h)
    scale = k0 ** 3 / (6 * np.pi) + abs(ge[0, 2, 2])
    for comp, idx in (("par", 0), ("perp", 2)):
        ref = _gamma_real_axis(1.0, eps2, k0, h, comp)
        assert abs(ge[0, idx, idx] - ref) < 1e-8 * scale


def test_sommerfeld_tends_to_image_dipole_for_close_dipoles():
    # Quasi-static image dipole (Yamaguchi et al. 1974; Wind et al. 1987): Gamma_zz = 2 Gamma_xx =
    # beta / (16 pi h^3), beta = (eps2 - eps1)/(eps2 + eps1) (from memory). Retardation corrections
    # are O((k_s h)^2) relative, k_s the substrate wavenumber: tolerance 3 (k_s h)^2 at h = 2 nm,
    # lambda = 1000 nm.
    wl, h, eps2 = 1000.0, 2.0, 12.0
    ge, _, _ = reflected_dyadic([np.ones(1), np.full(1, eps2 + 0j)], [], np.array([wl]), h)
    beta = (eps2 - 1) / (eps2 + 1)
    ref = beta / (16 * np.pi * h ** 3)
    kh = 2 * np.pi / wl * h * np.sqrt(eps2)
    assert abs(ge[0, 2, 2] / ref - 1) < 3 * kh ** 2
    assert abs(ge[0, 0, 0] / (ref / 2) - 1) < 3 * kh ** 2
    np.testing.assert_allclose(image_dyadic([np.ones(1), np.full(1, eps2 + 0j)], [], h)[0, 2, 2], ref, rtol=1e-14)


def test_layered_image_limit_reduces_to_half_space_when_spacer_matches():
    # A spacer of the substrate's own permittivity changes nothing (identity); a spacer of the
    # host's permittivity moves the image plane down by its thickness (Wind et al. 1987, Sec. 2).
    # Gauss-Laguerre with 64 nodes: tolerance 1e-10.
    e = [np.ones(1) + 0j, np.full(1, 12.0 + 0j), np.full(1, 12.0 + 0j)]
    g_layer = image_dyadic(e, [5.0], 3.0)
    g_half = image_dyadic([e[0], e[2]], [], 3.0)
    np.testing.assert_allclose(g_layer, g_half, rtol=1e-10)
    g_shift = image_dyadic([e[0], e[0], e[2]], [5.0], 3.0)
    np.testing.assert_allclose(g_shift, image_dyadic([e[0], e[2]], [], 8.0), rtol=1e-10)


def test_small_sphere_on_substrate_matches_yamaguchi_image_polarisability():
    # Yamaguchi, Yoshida & Kinbara (1974) / Wind et al. (1987) (from memory): a sphere of static
    # polarisability alpha at height h over a half-space has
    #   alpha_par  = alpha / (1 - alpha beta / (32 pi h^3)),
    #   alpha_perp = alpha / (1 - alpha beta / (16 pi h^3)).
    # Checked through the dressed dipole with the image dyadic; tolerance 1e-12.
    eps, eps_s, a, h = -5.0 + 1.2j, 11.7, 5.0, 6.0
    alpha = 4 * np.pi * a ** 3 * (eps - 1) / (eps + 2)
    beta = (eps_s - 1) / (eps_s + 1)
    g = image_dyadic([np.ones(1) + 0j, np.full(1, eps_s + 0j)], [], h)
    A = np.full((1, 3, 3), 0j)
    A[0] = alpha * np.eye(3)
    qx = dressed_dipole(A, g, np.array([[1.0, 0, 0]]))[0, 0]
    qz = dressed_dipole(A, g, np.array([[0, 0, 1.0]]))[0, 2]
    assert abs(qx / (alpha / (1 - alpha * beta / (32 * np.pi * h ** 3))) - 1) < 1e-12
    assert abs(qz / (alpha / (1 - alpha * beta / (16 * np.pi * h ** 3))) - 1) < 1e-12


def test_index_matched_substrate_reproduces_mie_dipole_term():
    # Substrate = superstrate: no reflection, so sigma_abs must equal the electric-dipole term of
    # Mie theory. Reference: miepython.efficiencies_mx(conj(m), x, n_pole=1, e_field=True)
    # (miepython 3.3 uses n - ik, hence conj); Q_abs = Q_ext - Q_sca; tolerance 1e-10.
    wl = np.array([450.0, 520.0, 600.0, 750.0])
    sp = nanoabs.Sphere("Au", 25.0)
    env = on_substrate(1.33, superstrate=1.33, gap_nm=3.0)
    n_h = np.full(4, 1.33)
    out = dipole_response(env, sphere_alpha([sp.material.permittivity(wl)], [25.0], wl, n_h), wl,
                          half_height_nm=25.0)
    m = nanoabs.material("Au").refractive_index(wl) / 1.33
    x = 2 * np.pi * 1.33 / wl * 25.0
    for i in range(4):
        qe, qs, _, _ = miepython.efficiencies_mx(np.conj(m[i]), x[i], n_pole=1, e_field=True)
        assert abs(out["sigma_abs_nm2"][i] / ((qe - qs) * np.pi * 25.0 ** 2) - 1) < 1e-10
    np.testing.assert_allclose(out["field_factor"], 1.0, rtol=1e-14)


def test_far_from_interface_tends_to_free_particle_times_field_factor():
    # Far from the surface the reflected field of the particle itself falls as 1/(k h), so
    # sigma_abs -> sigma_free * |E_drive/E_inc|^2 (n_h = n_inc). Bound on the coupling
    # (Novotny & Hecht 2012, eq. 10.26 far field, from memory): relative error
    # <= 3 |r| |a_1| / (2 k h); checked at k h ~ 24 and ~ 95.
    wl = np.array([530.0])
    sp = nanoabs.Sphere("Au", 20.0)
    a1 = None
    for h in (2000.0, 8000.0):
        env = on_substrate(1.5, superstrate=1.0, gap_nm=h)
        alpha = sphere_alpha([sp.material.permittivity(wl)], [20.0], wl, np.ones(1))
        out = dipole_response(env, alpha, wl, half_height_nm=20.0)
        k = 2 * np.pi / wl[0]
        a1 = alpha[0, 0, 0] * k ** 3 / (6j * np.pi)
        free = k * alpha[0, 0, 0].imag - k ** 4 * abs(alpha[0, 0, 0]) ** 2 / (6 * np.pi)
        ratio = out["sigma_abs_nm2"][0] / (free * out["field_factor"][0])
        assert abs(ratio - 1) < 3 * 0.2 * abs(a1) / (2 * k * (h + 20)) + 1e-9


def test_energy_identity_and_positivity_on_silicon():
    # Work done by the drive field = absorbed + emitted power (Poynting's theorem for the dipole,
    # Novotny & Hecht 2012, ch. 8, from memory): sigma_drive = (k0 n_h^2/n_inc) Im(E_d^* . q); tolerance 1e-10.
    wl = np.linspace(450.0, 800.0, 8)
    sp = nanoabs.Sphere("Au", 30.0)
    for env in (on_substrate("Si", gap_nm=1.0), on_substrate("Si", gap_nm=1.0, incidence="back", angle_deg=0.0)):
        if env.incidence == "back":
            wl = np.linspace(1150.0, 1600.0, 6)
        res = env.resolve(wl)
        alpha = sphere_alpha([sp.material.permittivity(wl)], [30.0], wl, res.n_host)
        out = dipole_response(env, alpha, wl, half_height_nm=30.0)
        ed = env.drive_field(wl, 30.0)
        drive = 2 * np.pi / wl * res.n_host ** 2 / res.n_inc * np.einsum("wi,wi->w", np.conj(ed), out["q"]).imag
        np.testing.assert_allclose(out["sigma_abs_nm2"] + out["sigma_rad_nm2"], drive, rtol=1e-10)
        assert np.all(out["sigma_abs_nm2"] > 0) and np.all(out["sigma_rad_nm2"] > 0)


def test_cross_sections_homogeneous_formula():
    # Homogeneous host (Gamma = 0): sigma_abs = k Im(alpha) - k^4 |alpha|^2 / (6 pi)
    # (Draine 1988, eq. 3-4, from memory); tolerance 1e-13.
    alpha = np.array([[[100 + 40j, 0, 0], [0, 100 + 40j, 0], [0, 0, 100 + 40j]]])
    q = np.array([[100 + 40j, 0, 0]])
    k = 2 * np.pi / 500
    s_abs, s_rad = dipole_cross_sections(alpha, q, np.zeros((1, 3, 3)), np.array([k]), np.ones(1), np.ones(1))
    assert abs(s_abs[0] - (k * 40 - k ** 4 * abs(100 + 40j) ** 2 / (6 * np.pi))) < 1e-13
    assert abs(s_rad[0] - k ** 4 * abs(100 + 40j) ** 2 / (6 * np.pi)) < 1e-13


def test_sommerfeld_accuracy_is_reported_and_tightening_it_changes_nothing_beyond_it():
    # The doubling test reports the achieved accuracy (relative to k^3/6pi + |Gamma|); a run at
    # rtol = 1e-5 must agree with one at 1e-11 to its own reported error (times a safety factor 10).
    wl = np.array([450.0, 800.0])
    stack = [np.ones(2) + 0j, np.full(2, 2.1 + 0j), np.full(2, 15.0 + 0.2j)]
    loose, _, e_loose = reflected_dyadic(stack, [20.0], wl, 12.0, rtol=1e-5)
    tight, _, e_tight = reflected_dyadic(stack, [20.0], wl, 12.0, rtol=1e-11)
    assert np.all(e_loose < 1e-5) and np.all(e_tight < 1e-11)
    k = 2 * np.pi / wl
    scale = k ** 3 / (6 * np.pi) + np.max(np.abs(tight), axis=(1, 2))
    assert np.all(np.max(np.abs(loose - tight), axis=(1, 2)) < 10 * np.maximum(e_loose, 1e-12) * scale)
