"""Checks of nanoabs.tmatrix (EBCM T matrix of axisymmetric particles).

References used here, each named beside its check:

* miepython (general-purpose Mie code): a sphere run through the EBCM
  machinery must give its Mie coefficients. miepython uses m = n - ik, we use
  n + ik, so indices are conjugated before calling it.
* pytmatrix (``pytmatrixc`` on PyPI; a general-purpose T-matrix library that
  wraps the EBCM Fortran code of Mishchenko & Travis, used for atmospheric and
  radar scattering): spheroids and finite cylinders in fixed orientations.
  Its ``radius`` is the equal-volume-sphere radius and ``axis_ratio`` the
  horizontal-to-rotational axis ratio; ``thet0`` is the angle of incidence to
  the symmetry axis, ``h_pol=False`` the field in the plane of incidence.
* Bohren & Huffman (1983), §5.3: dipole limit of small spheroids through
  nanoabs.quasistatic (depolarisation factors, eqs. 5.32-5.35).
* Mishchenko, Travis & Lacis (2002), §5.3 (from memory): reciprocity gives
  T^{11}, T^{22} symmetric and T^{12} = -(T^{21})^T in each m block for the
  normalised VSWFs; a lossless particle conserves energy, C_ext = C_sca.
* Link, Mohamed & El-Sayed, J. Phys. Chem. B 103, 3073 (1999) (from memory;
  common practice): the longitudinal peak of Au rods in water red-shifts by
  about 95 nm per unit aspect ratio over AR 2-5.
"""

from __future__ import annotations

import miepython
import numpy as np
import pytest

import nanoabs
from nanoabs._errors import NanoabsError
from nanoabs import quasistatic as qs
from nanoabs.tmatrix import TMatrix, cross_sections_nm2, plane_wave

N_WATER = 1.333  # refractive index of water in the visible (from memory)


def _mie_coefficients(m, x, n_max):
    """a_n, b_n from miepython: its index is m = n - ik (pass conj); the a_n, b_n it returns
    then equal Bohren & Huffman's eq. 4.53 for n + ik (checked against nanoabs.mie in test_mie)."""
    a, b = miepython.coefficients(np.conj(m), x, n_pole=n_max)
    return np.asarray(a)[:n_max], np.asarray(b)[:n_max]


@pytest.mark.parametrize("m_rel", [1.5 + 0.01j, 0.3 + 4.0j, 0.4 + 12.0j, 2.0])
def test_sphere_reproduces_miepython_every_order(m_rel):
    # Reference: miepython.coefficients (Mie, Bohren & Huffman 1983 eq. 4.53); tolerance 1e-8
    # absolute on T (|T| <= 1), every n and every m block; off-diagonal elements vanish.
    wl = np.array([600.0])
    radius = 80.0
    x = 2 * np.pi * radius / wl[0]
    n_max = 10
    tm = TMatrix.axisymmetric("spheroid", m_rel**2, 1.0, 2 * radius, 2 * radius, wl, n_max=n_max)
    a, b = _mie_coefficients(m_rel, x, n_max)
    for m in range(n_max + 1):
        n0 = max(m, 1) - 1
        expected = np.diag(np.concatenate([-b[n0:], -a[n0:]]))
        assert np.max(np.abs(tm.blocks[m][0] - expected)) < 1e-8


def test_sphere_cross_sections_every_orientation_match_miepython():
    # Reference: miepython.efficiencies_mx; tolerance 1e-8 relative, for four directions and
    # polarisations and the orientation average (the trace formula).
    wl = np.array([500.0, 700.0])
    eps = nanoabs.material("Au").permittivity(wl)
    radius = 60.0
    m = np.sqrt(eps) / N_WATER
    x = 2 * np.pi * N_WATER * radius / wl
    qext, qsca, _, _ = miepython.efficiencies_mx(np.conj(m), x)
    geo = np.pi * radius**2
    tm = TMatrix.axisymmetric("spheroid", eps, N_WATER**2, 2 * radius, 2 * radius, wl, tol=1e-10)
    cases = [tm.cross_sections(t, p) for t, p in [(0, 0), (0.4, 1.1), (np.pi / 2, 0), (2.0, 0.3)]]
    for c_abs, c_sca, c_ext in cases + [tm.orientation_average()]:
        np.testing.assert_allclose(c_ext / geo, qext, rtol=1e-8)
        np.testing.assert_allclose(c_sca / geo, qsca, rtol=1e-8)
        np.testing.assert_allclose(c_abs, c_ext - c_sca, rtol=1e-12)


def test_sphere_constructor_equals_ebcm_sphere():
    # Reference: the Mie-based TMatrix.sphere (nanoabs.mie, itself tested against miepython);
    # tolerance 1e-10 absolute on T.
    wl = np.array([450.0, 800.0])
    eps = nanoabs.material("Ag").permittivity(wl)
    sp = TMatrix.sphere(eps, N_WATER**2, 40.0, wl, n_max=8)
    eb = TMatrix.axisymmetric("capped-rod", eps, N_WATER**2, 80.0, 80.0, wl, n_max=8)
    for a, b in zip(sp.blocks, eb.blocks):
        assert np.max(np.abs(a - b)) < 1e-10


# pytmatrix reference values are computed in the test with ddelt = 1e-7 and quadrature factor
# ndgs = 4. Our tol: 1e-8 for dielectrics; 1e-6 for gold-like indices, where the EBCM system
# loses precision beyond n_max ~ 14 (module docstring) and the agreement is 1e-5.
SPHEROIDS = [  # (length, diameter, wavelength, m, tol, rtol): prolate, oblate, gold-like rod/disc
    (300.0, 100.0, 600.0, 1.5 + 0.02j, 1e-8, 2e-6),
    (100.0, 300.0, 600.0, 1.3 + 0.5j, 1e-8, 2e-6),
    (150.0, 40.0, 700.0, 0.1 + 3.0j, 1e-6, 1e-5),
    (40.0, 100.0, 900.0, 0.13 + 4.3j, 1e-6, 1e-5),
]


def _pytmatrix(shape, L, D, wl, m, theta_deg, h_pol, ddelt):
    ptm = pytest.importorskip("pytmatrix.tmatrix", reason="pytmatrixc is a test dependency")
    scatter = pytest.importorskip("pytmatrix.scatter")
    c, R = L / 2, D / 2
    r_ev = (R * R * c) ** (1 / 3) if shape == "spheroid" else (1.5 * R * R * c) ** (1 / 3)
    kind = ptm.Scatterer.SHAPE_SPHEROID if shape == "spheroid" else ptm.Scatterer.SHAPE_CYLINDER
    s = ptm.Scatterer(radius=r_ev, wavelength=wl, m=m, axis_ratio=R / c, ddelt=ddelt, ndgs=4, shape=kind)
    s.thet0, s.thet, s.phi0, s.phi = theta_deg, 180 - theta_deg, 0.0, 180.0
    return scatter.ext_xsect(s, h_pol=h_pol), scatter.sca_xsect(s, h_pol=h_pol)


@pytest.mark.parametrize("L, D, wl, m, tol, rtol", SPHEROIDS)
def test_spheroids_match_pytmatrix(L, D, wl, m, tol, rtol):
    # Reference: pytmatrix (Mishchenko's EBCM code) ext_xsect / sca_xsect, fixed orientations at
    # 0, 30 and 90 degrees, both polarisations; tolerance rtol (2e-6 for dielectrics: pytmatrix's
    # own convergence and angular integration of C_sca limit the agreement to ~1e-7).
    tm = TMatrix.axisymmetric("spheroid", m * m, 1.0, L, D, np.array([wl]), tol=tol)
    for theta in (0.0, 30.0, 90.0):
        for h_pol in (False, True):
            ext_ref, sca_ref = _pytmatrix("spheroid", L, D, wl, m, theta, h_pol, 1e-7)
            _, sca, ext = tm.cross_sections(np.radians(theta), np.pi / 2 if h_pol else 0.0)
            assert ext[0] == pytest.approx(ext_ref, rel=rtol)
            assert sca[0] == pytest.approx(sca_ref, rel=rtol)


def test_cylinder_matches_pytmatrix():
    # Reference: pytmatrix with SHAPE_CYLINDER (ddelt = 1e-5). The EBCM converges slowly for
    # flat-ended cylinders (edges) in both codes, so the tolerance is 1e-3 relative.
    L, D, wl, m = 200.0, 100.0, 600.0, 1.5 + 0.02j
    tm = TMatrix.axisymmetric("cylinder", m * m, 1.0, L, D, np.array([wl]), tol=1e-3)
    for theta, h_pol in ((90.0, False), (90.0, True), (30.0, False)):
        ext_ref, sca_ref = _pytmatrix("cylinder", L, D, wl, m, theta, h_pol, 1e-5)
        _, sca, ext = tm.cross_sections(np.radians(theta), np.pi / 2 if h_pol else 0.0)
        assert ext[0] == pytest.approx(ext_ref, rel=1e-3)
        assert sca[0] == pytest.approx(sca_ref, rel=1e-3)


def test_small_spheroids_tend_to_quasistatic_limit():
    # Reference: Bohren & Huffman 1983 §5.3 (static polarisability with depolarisation factors,
    # C_abs = k Im(alpha) as in nanoabs.quasistatic.cross_sections). The difference must shrink
    # about 4x per halving of the size (first corrections are O((k a)^2)) and be < 1e-2 relative
    # at k a_max <= 0.04 (largest semi-axis 2.5 nm), near and off the gold resonances.
    wl = np.array([520.0, 650.0, 800.0])
    eps = nanoabs.material("Au").permittivity(wl)
    k = 2 * np.pi * N_WATER / wl
    for aspect in (2.5, 1 / 2.5):
        errors = []
        for L in (4.0, 2.0):
            D = L / aspect
            a, c = D / 2, L / 2
            tm = TMatrix.axisymmetric("spheroid", eps, N_WATER**2, L, D, wl, tol=1e-8)
            q_z = qs.cross_sections(qs.polarizability_ellipsoid(eps, N_WATER**2, a, a, c, axis="z"), k)[0]
            q_x = qs.cross_sections(qs.polarizability_ellipsoid(eps, N_WATER**2, a, a, c, axis="x"), k)[0]
            pairs = [(tm.cross_sections(np.pi / 2, 0.0)[0], q_z),
                     (tm.cross_sections(np.pi / 2, np.pi / 2)[0], q_x),
                     (tm.orientation_average()[0], (q_z + 2 * q_x) / 3)]
            errors.append(max(np.max(np.abs(t / q - 1)) for t, q in pairs))
        assert errors[1] < 1e-2
        assert errors[1] < errors[0] / 3


def _asymmetry(tm):
    """Largest violation of T11 = T11^T, T22 = T22^T, T12 = -T21^T over the m blocks, / max|T|."""
    worst = 0.0
    for T in tm.blocks:
        K = T.shape[-1] // 2
        t11, t12, t21, t22 = T[:, :K, :K], T[:, :K, K:], T[:, K:, :K], T[:, K:, K:]
        tr = (0, 2, 1)
        worst = max(worst, np.max(np.abs(t11 - t11.transpose(tr))), np.max(np.abs(t22 - t22.transpose(tr))),
                    np.max(np.abs(t12 + t21.transpose(tr))))
    return worst / max(np.max(np.abs(b)) for b in tm.blocks)


def test_reciprocity_symmetry_of_t():
    # Reference: Mishchenko et al. 2002 §5.3 (from memory): T11, T22 symmetric, T12 = -T21^T per
    # m block (normalised VSWFs), for a gold rod. The truncated EBCM matrix obeys them as far as
    # it has converged: the spheroid's violation falls from ~1e-5 (n_max 6) to < 1e-10 (n_max 12);
    # the capped rod and cylinder, whose series converge slowly (edges), stay below 1e-3.
    wl = np.array([700.0, 900.0])
    eps = nanoabs.material("Au").permittivity(wl)
    sph = [_asymmetry(TMatrix.axisymmetric("spheroid", eps, N_WATER**2, 100.0, 40.0, wl, n_max=n, n_quad=80))
           for n in (6, 9, 12)]
    assert sph[0] > sph[1] > sph[2] and sph[2] < 1e-10
    for shape in ("capped-rod", "cylinder"):
        tm = TMatrix.axisymmetric(shape, eps, N_WATER**2, 100.0, 40.0, wl, n_max=12, n_quad=100)
        assert _asymmetry(tm) < 1e-3


@pytest.mark.parametrize("eps, L, D, n_max, rtol_fixed", [
    (2.25, 300.0, 100.0, 12, 1e-10), (-16.0, 150.0, 40.0, 12, 1e-7), (-30.0, 30.0, 90.0, 14, 1e-10)])
def test_lossless_particle_conserves_energy(eps, L, D, n_max, rtol_fixed):
    # Reference: energy conservation / unitarity of S (Mishchenko et al. 2002 §5.3, from memory):
    # C_ext = C_sca for a lossless particle; 1e-10 relative for the orientation average. For a
    # fixed direction the balance is reached as fast as the series converges: 1e-10, but 1e-7
    # for the lossless-metal rod (eps = -16, near its resonance) at n_max = 12, beyond which Q
    # loses precision (module docstring).
    wl = np.array([600.0, 800.0])
    tm = TMatrix.axisymmetric("spheroid", eps, N_WATER**2, L, D, wl, n_max=n_max)
    _, c_sca, c_ext = tm.orientation_average()
    np.testing.assert_allclose(c_ext, c_sca, rtol=1e-10)
    _, c_sca, c_ext = tm.cross_sections(1.0, 0.5)
    np.testing.assert_allclose(c_ext, c_sca, rtol=rtol_fixed)


def test_results_stop_changing_as_order_and_quadrature_grow():
    # Convergence (Mishchenko et al. 2002 §5.11 procedure, from memory): successive changes of
    # the averaged C_ext of a gold spheroid fall below 1e-6 as n_max grows, and doubling the
    # quadrature changes it by < 1e-8 at n_max = 12.
    wl = np.array([850.0])
    eps = nanoabs.material("Au").permittivity(wl)

    def ext(n, q):
        return TMatrix.axisymmetric("spheroid", eps, N_WATER**2, 150.0, 40.0, wl, n_max=n,
                                    n_quad=q).orientation_average()[2][0]

    values = [ext(n, 2 * n + 8) for n in (4, 6, 8, 10, 12)]
    changes = np.abs(np.diff(values)) / values[-1]
    assert changes[0] > 1e-4 > changes[-1]  # a real change at low order, then it settles
    assert changes[-1] < 1e-6 and changes[-2] < 1e-4 and changes[-1] < changes[-2] < changes[-3]
    assert abs(ext(12, 64) - values[-1]) / values[-1] < 1e-8


def test_convergence_report_and_nonconvergent_case_raises():
    # The automatic loop reports its order and achieved change; a case beyond the validated
    # range (gold capped rod of aspect ratio 6 at tol 1e-6) raises NanoabsError, never a number.
    wl = np.array([700.0, 1000.0])
    eps = nanoabs.material("Au").permittivity(wl)
    tm = TMatrix.axisymmetric("spheroid", eps, N_WATER**2, 120.0, 40.0, wl, tol=1e-5)
    assert tm.info["achieved_change"] < 1e-5 and tm.info["quadrature_change"] < 1e-5
    assert tm.info["n_max"] >= 6
    with pytest.raises(NanoabsError, match="T-matrix"):
        TMatrix.axisymmetric("capped-rod", eps, N_WATER**2, 180.0, 30.0, wl, tol=1e-6)


def test_rotated_matrix_matches_turned_incidence():
    # Identity: the particle turned by (alpha, beta, gamma) and lit along lab z gives the same
    # cross-sections as the unturned particle lit from the inverse-turned direction. Tolerance
    # 1e-10 relative. The turned axis is (sin b cos a, sin b sin a, cos b): lab z makes the
    # angle beta with it, so theta_inc = beta.
    wl = np.array([800.0])
    eps = nanoabs.material("Au").permittivity(wl)
    tm = TMatrix.axisymmetric("spheroid", eps, N_WATER**2, 120.0, 40.0, wl, n_max=8)
    k = tm.k_nm[0]
    alpha, beta, gamma = 0.3, 0.9, -0.4
    Tr = tm.rotated(alpha, beta, gamma)
    # lab: k along z (theta = 0), field along lab x or y; phi_inc = alpha puts the lab field
    # (cos alpha, sin alpha, 0) = theta-hat in the plane of k and the turned axis
    for psi in (0.0, np.pi / 2):
        a = plane_wave(tm.n_max, 0.0, alpha, np.cos(psi), np.sin(psi))
        ta = Tr @ a
        ext = -np.real(np.vdot(a, ta)) / k**2
        sca = np.sum(np.abs(ta) ** 2) / k**2
        # in the particle frame the wave comes in at beta from the axis; psi = 0 is the field in
        # the plane of incidence (theta-hat), psi = pi/2 perpendicular to it
        _, sca_ref, ext_ref = tm.cross_sections(beta, psi)
        assert ext == pytest.approx(ext_ref[0], rel=1e-10)
        assert sca == pytest.approx(sca_ref[0], rel=1e-10)
    # rotation keeps the orientation average (the trace and the Frobenius norm)
    T = tm.dense()
    assert np.trace(Tr) == pytest.approx(np.trace(T), rel=1e-12)
    assert np.sum(np.abs(Tr) ** 2) == pytest.approx(np.sum(np.abs(T) ** 2), rel=1e-12)


def test_gold_rod_longitudinal_peak_shift_per_aspect_ratio():
    # Common practice (Link, Mohamed & El-Sayed 1999, from memory): ~95 nm per unit AR over AR
    # 2-5 for Au rods in water; loose band 70-120 nm/AR for spheroids of 20 nm diameter.
    wl = np.arange(550.0, 1300.0, 4.0)
    eps = nanoabs.material("Au").permittivity(wl)
    peaks = []
    ars = np.array([2.0, 3.0, 4.0, 5.0])
    for ar in ars:
        c_abs, _, _, info = cross_sections_nm2("spheroid", eps, N_WATER**2, (20.0 * ar, 20.0), wl, "long")
        peaks.append(wl[np.argmax(c_abs)])
    slope = np.polyfit(ars, peaks, 1)[0]
    assert 70.0 <= slope <= 120.0


def test_adaptor_polarisation_conventions():
    # Project convention (nanoabs.particles): for a rod "long" is the field along the axis, for a
    # disc the field in its plane with light along the axis; "random" is the trace average.
    wl = np.array([700.0, 900.0])
    eps = nanoabs.material("Au").permittivity(wl)
    rod = TMatrix.axisymmetric("spheroid", eps, N_WATER**2, 100.0, 40.0, wl)
    out = cross_sections_nm2("spheroid", eps, N_WATER**2, (100.0, 40.0), wl, "long")
    np.testing.assert_allclose(out[0], rod.cross_sections(np.pi / 2, 0.0)[0], rtol=1e-12)
    disc = TMatrix.axisymmetric("spheroid", eps, N_WATER**2, 20.0, 60.0, wl)
    out = cross_sections_nm2("spheroid", eps, N_WATER**2, (20.0, 60.0), wl, "long")
    np.testing.assert_allclose(out[0], disc.cross_sections(0.0, 0.0)[0], rtol=1e-12)
    out = cross_sections_nm2("spheroid", eps, N_WATER**2, (20.0, 60.0), wl, "random")
    np.testing.assert_allclose(out[0], disc.orientation_average()[0], rtol=1e-12)
    assert out[3]["n_max"] == disc.n_max and out[3]["method"] == "tmatrix"


@pytest.mark.parametrize("kwargs, match", [
    (dict(shape="cone"), "shape"),
    (dict(shape="capped-rod", length_nm=20.0), "capped rod"),
    (dict(eps_medium=1.7 + 0.1j), "eps_medium"),
    (dict(eps=-10.0 - 1.0j), "eps"),
])
def test_bad_input_raises_one_line(kwargs, match):
    args = dict(shape="spheroid", eps=-10.0 + 1.0j, eps_medium=1.77, length_nm=60.0, diameter_nm=30.0,
                wavelength_nm=[700.0])
    args.update(kwargs)
    shape = args.pop("shape")
    with pytest.raises(NanoabsError, match=match) as err:
        TMatrix.axisymmetric(shape, **args)
    assert "\n" not in str(err.value)


def test_spectrum_uses_the_tmatrix_for_spheroids_and_the_new_shapes(tmp_path):
    # Wiring: spectrum(method="tmatrix") returns the adaptor's numbers; "auto" picks the T-matrix
    # for a capped rod. Reference for the geometry facts: a capped rod with length = diameter is
    # a sphere, so its spectrum (surface damping 4V/S = 4r/3 included) must equal the Mie sphere's
    # (nanoabs.mie) to 1e-6 relative.
    import warnings

    from nanoabs.cli import main
    from nanoabs.validity import NanoabsWarning

    wl = np.linspace(500.0, 900.0, 21)
    rod = nanoabs.spheroid("Au", 100.0, 40.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", NanoabsWarning)
        s = nanoabs.spectrum(rod, wl, medium=N_WATER, method="tmatrix", polarization="long",
                             surface_damping=False)
        eps = nanoabs.material("Au").permittivity(wl)
        ref = cross_sections_nm2("spheroid", eps, N_WATER**2, (100.0, 40.0), wl, "long")
        np.testing.assert_allclose(s.sigma_abs_m2, ref[0] * 1e-18, rtol=1e-10)
        ball = nanoabs.spectrum(nanoabs.CappedRod("Au", 30.0, 30.0), wl, medium=N_WATER)
        mie = nanoabs.spectrum(nanoabs.Sphere("Au", 15.0), wl, medium=N_WATER)
    assert ball.metadata["method"] == "tmatrix" and "auto" in ball.metadata["method_reason"]
    assert "tmatrix-edges" in [c["code"] for c in ball.metadata["cautions"]]
    np.testing.assert_allclose(ball.sigma_abs_m2, mie.sigma_abs_m2, rtol=1e-6)
    np.testing.assert_allclose(ball.q_abs, mie.q_abs, rtol=1e-6)
    # a family of sizes is solved one size at a time: equal to the single-size calls
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", NanoabsWarning)
        fam = nanoabs.spectrum(nanoabs.spheroid("Au", np.array([[60.0], [80.0]]), 20.0), wl, method="tmatrix")
        for i, L in enumerate((60.0, 80.0)):
            one = nanoabs.spectrum(nanoabs.spheroid("Au", L, 20.0), wl, method="tmatrix")
            np.testing.assert_allclose(fam.sigma_abs_m2[i], one.sigma_abs_m2, rtol=1e-12)
    out = tmp_path / "cyl.csv"
    code = main(["spectrum", "--shape", "cylinder", "--material", "Au", "--length", "100", "--diameter",
                 "40", "--medium", "water", "--polarization", "random", "--wl", "600:800:50", "-o", str(out)])
    assert code == 0 and out.exists()
    assert main(["spectrum", "--shape", "capped-rod", "--material", "Au", "--length", "20", "--diameter",
                 "30", "--wl", "600:800:50", "-o", str(tmp_path / "x.csv")]) == 2


def test_plane_wave_coefficients_sum_to_the_plane_wave():
    # Identity (Mishchenko et al. 2002 eq. 5.40-5.41 form, from memory; the normalisation the
    # trace formulas rely on): sum_mn a_mn RgM_mn + b_mn RgN_mn with the module's normalised
    # VSWFs equals E0 exp(i k.r) at points inside the unit-radius ball. Tolerance 1e-10 at
    # k r <= 2.5 with n_max = 25 (one point on the axis, theta = 0). VSWFs are built here from
    # the module's Wigner functions and scipy.special.spherical_jn.
    from scipy.special import spherical_jn

    from nanoabs._ebcm import wigner_d_all

    n_max = 25
    theta_k, phi_k, psi = 0.7, 1.9, 0.4
    e_t, e_p = np.cos(psi), np.sin(psi)
    a = plane_wave(n_max, theta_k, phi_k, e_t, e_p)
    st, ct, sp, cp = np.sin(theta_k), np.cos(theta_k), np.sin(phi_k), np.cos(phi_k)
    k_hat = np.array([st * cp, st * sp, ct])
    e0 = e_t * np.array([ct * cp, ct * sp, -st]) + e_p * np.array([-sp, cp, 0.0])
    for point in ([0.3, -1.2, 0.8], [-2.0, 0.5, -1.1], [0.0, 0.0, 1.5]):
        p = np.array(point)
        kr = np.linalg.norm(p)
        th, ph = np.arccos(p[2] / kr), np.arctan2(p[1], p[0])
        field = np.zeros(3, dtype=complex)  # (r, theta, phi) components
        for m in range(-n_max, n_max + 1):
            d, pi, tau = (f[:, 0] for f in wigner_d_all(n_max, abs(m), np.array([th])))
            if m < 0:  # d^n_{0,-m} = (-1)^m d^n_{0m}
                s = (-1.0) ** m
                d, pi, tau = s * d, -s * pi, s * tau
            n = np.arange(max(abs(m), 1), n_max + 1)
            j = spherical_jn(n, kr)
            zeta = spherical_jn(n - 1, kr) - n * j / kr
            coeff = a[2 * (n * n - 1 + n + m)], a[2 * (n * n - 1 + n + m) + 1]
            ph_m = np.exp(1j * m * ph)
            field += ph_m * np.array([
                np.sum(coeff[1] * n * (n + 1) * j / kr * d),
                np.sum(coeff[0] * 1j * j * pi + coeff[1] * zeta * tau),
                np.sum(-coeff[0] * j * tau + coeff[1] * 1j * zeta * pi)])
        r_hat = p / kr
        t_hat = np.array([np.cos(th) * np.cos(ph), np.cos(th) * np.sin(ph), -np.sin(th)])
        p_hat = np.array([-np.sin(ph), np.cos(ph), 0.0])
        cart = field[0] * r_hat + field[1] * t_hat + field[2] * p_hat
        np.testing.assert_allclose(cart, e0 * np.exp(1j * kr * (k_hat @ r_hat)), rtol=0, atol=1e-10)


@pytest.mark.parametrize("cls, L, D", [(nanoabs.Cylinder, 100.0, 40.0), (nanoabs.Cylinder, 20.0, 60.0),
                                       (nanoabs.CappedRod, 120.0, 30.0), (nanoabs.RoundedDisc, 20.0, 80.0)])
def test_surface_parametrisation_matches_the_geometry_facts(cls, L, D):
    # Identity: the volume (2π/3) ∮ r³ sinθ dθ and the area 2π ∮ r sinθ sqrt(r² + r'²) dθ of the
    # EBCM surface r(θ) equal the particle's closed forms (cylinder; Pappus's theorems for the
    # caps and the rounded rim), to 1e-10 relative with 200 Gauss points split at the corner.
    from nanoabs._ebcm import quadrature, surface

    body = cls("Au", L, D)
    dims = (L / 2, D / 2)
    theta, w = quadrature(body.shape, dims, 200)
    r, rho = surface(body.shape, dims, theta)
    volume = 2 * (2 * np.pi / 3) * np.sum(w * r**3 * np.sin(theta))
    area = 2 * 2 * np.pi * np.sum(w * r**2 * np.sin(theta) * np.sqrt(1 + rho**2))
    assert volume == pytest.approx(float(body.volume_nm3()), rel=1e-10)
    assert area == pytest.approx(float(body.surface_nm2()), rel=1e-10)


def test_rounded_disc_of_equal_length_and_diameter_is_a_sphere():
    # Reference: Mie (nanoabs.mie, tested against miepython); a rounded disc with length =
    # diameter is a sphere (rim radius = sphere radius). Tolerance 1e-8 on the averaged C_ext.
    wl = np.array([550.0, 800.0])
    eps = nanoabs.material("Ag").permittivity(wl)
    tm = TMatrix.axisymmetric("rounded-disc", eps, N_WATER**2, 60.0, 60.0, wl, tol=1e-10)
    sp = TMatrix.sphere(eps, N_WATER**2, 30.0, wl)
    np.testing.assert_allclose(tm.orientation_average()[2], sp.orientation_average()[2], rtol=1e-8)
