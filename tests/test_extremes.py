"""Numerical extremes through the public pipeline (tested range documented in the README)."""

import numpy as np
import pytest

import nanoabs
from nanoabs import LayeredSphere, NanoabsError, Sphere, fit_drude_lorentz, material
from nanoabs.materials import catalog
from nanoabs.mie import mie_layered, mie_sphere


@pytest.mark.parametrize("x", [1e-4, 1e-2, 1.0, 20.0, 100.0, 200.0])
@pytest.mark.parametrize("m", [1.5 + 0j, 0.2 + 3.0j, 0.5 + 10.0j, 3.0 + 20.0j, 20.0 + 0.0j, 12.0 + 16.0j])
def test_mie_energy_conservation_and_finite(x, m):
    # Energy conservation Q_ext = Q_sca + Q_abs with Q_abs computed independently of Q_ext - Q_sca
    # (nanoabs.mie: Wronskian identity), to 1e-10 relative; no NaN/inf. |m| up to 20.
    # The reference form sum (2n+1) Re(a_n + b_n) itself rounds at ~eps/x^2 relative for a lossless
    # sphere (Re a_1 ~ x^6 from the difference of O(1) terms), so the tolerance is max(1e-10, 1e-15/x^2).
    r = mie_sphere(m, x)
    for q in r[:4]:
        assert np.isfinite(q)
    assert r.qabs >= 0
    ext_from_coeffs = _qext_from_coefficients(np.array([m]), np.array([x]))
    rel = 1e-10 if m.imag > 0 else max(1e-10, 1e-15 / x**2)
    assert ext_from_coeffs == pytest.approx(r.qsca + r.qabs, rel=rel, abs=1e-300)


def _qext_from_coefficients(m, x):
    from nanoabs.mie import mie_coefficients_layered, n_terms

    n = int(n_terms(x[-1]))
    a, b = mie_coefficients_layered(m, x, n)
    k = np.arange(1, n + 1)
    return float(2 / x[-1] ** 2 * np.sum((2 * k + 1) * (a.real + b.real)))


def test_gold_in_the_mid_infrared():
    # Au at 5 um (Olmon et al. 2012 data reach 24.9 um): |m| ~ 30 in water-free air, strongly absorbing.
    au = material("Au", "olmon-2012-evaporated")
    wl = np.array([3000.0, 5000.0, 10000.0])
    n = au.refractive_index(wl)
    assert np.all(np.abs(n) > 15)
    for R in (10.0, 100.0, 1000.0):
        s = nanoabs.spectrum(Sphere(au, R), wl, medium="air")
        assert np.all(np.isfinite(s.sigma_ext_m2)) and np.all(s.sigma_abs_m2 > 0)
        np.testing.assert_allclose(s.sigma_ext_m2, s.sigma_abs_m2 + s.sigma_sca_m2, rtol=1e-10)


@pytest.mark.parametrize("t", [0.5, 1.0, 2.0, 5.0])
def test_thin_gold_shell_on_100nm_core(t):
    # 0.5 nm Au shells on 100 nm-radius silica cores: finite, positive absorption, and energy conserved.
    wl = np.arange(500, 1201, 50.0)
    s = nanoabs.spectrum(LayeredSphere("SiO2", 100.0, [("Au", t)]), wl, medium="water")
    assert np.all(np.isfinite(s.sigma_ext_m2)) and np.all(s.sigma_abs_m2 > 0)
    np.testing.assert_allclose(s.sigma_ext_m2, s.sigma_abs_m2 + s.sigma_sca_m2, rtol=1e-10)


def test_layered_large_size_parameter():
    # x up to 200 for a coated metal sphere: finite and conserving.
    m = np.array([1.45 + 0j, 0.3 + 8j])
    x = np.array([150.0, 200.0])
    r = mie_layered(m, x)
    assert np.isfinite(r.qext) and r.qabs > 0
    assert _qext_from_coefficients(m, x) == pytest.approx(r.qsca + r.qabs, rel=1e-10)


def test_quasistatic_near_pole_finite():
    # eps -> -2 eps_m with tiny loss: static result large but finite; MLWA bounded by radiative damping.
    from nanoabs.quasistatic import cross_sections, polarizability_sphere, polarizability_sphere_mlwa

    eps_m = 1.77
    k = 2 * np.pi * 1.33 / 500.0
    for loss in (1e-3, 1e-8, 1e-10):  # below POLE_RTOL * |eps| the static call refuses (see test_fuzz_inputs)
        eps = -2 * eps_m + 1j * loss
        a_s = polarizability_sphere(eps, eps_m, 10.0)
        a_c = polarizability_sphere_mlwa(eps, eps_m, 10.0, k)
        for a, corr in ((a_s, False), (a_c, True)):
            sa, ss, se = cross_sections(a, k, corrected=corr)
            assert np.isfinite(sa) and np.isfinite(se) and sa >= 0
        # the corrected extinction never exceeds the single-dipole bound 3 lambda^2/(2 pi) (optical theorem)
        assert cross_sections(a_c, k, corrected=True)[2] <= 3 * (2 * np.pi / k) ** 2 / (2 * np.pi) * (1 + 1e-9)


def _metal_datasets():
    return [(n, s) for n, srcs in catalog().items() for s, h in srcs.items() if h.get("kind") == "metal"]


@pytest.mark.parametrize("name,source", _metal_datasets())
def test_drude_lorentz_fit_converges_from_default_start(name, source):
    # Every shipped metal dataset: a default fit over 250-2000 nm (clipped to the data) converges,
    # or says why it cannot (too few points) in one line.
    m = material(name, source)
    lo, hi = max(m.range_nm[0], 250.0), min(m.range_nm[1], 2000.0)
    try:
        r = fit_drude_lorentz(m._wl, m._n**2, oscillators=3, range_nm=(lo, hi))
    except NanoabsError as e:
        assert "points" in str(e)
        return
    assert r.success and np.isfinite(r.rms_relative_error) and r.rms_relative_error < 0.35
