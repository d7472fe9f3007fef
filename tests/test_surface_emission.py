"""Surface photoemission (nanoabs.surface_emission) and its normal-field integrals.

Each check names its reference and tolerance. The rate is the package's own golden-rule
derivation for a step barrier (notes/carriers.md); the tests recompute it independently.
"""

import warnings

import numpy as np
import pytest
from scipy import constants as C
from scipy import integrate
from scipy.special import lpmv, spherical_jn, spherical_yn

import nanoabs as na
from nanoabs import illumination as il
from nanoabs.mie import normal_field_surface_integral
from nanoabs.quasistatic import ellipsoid_surface_area
from nanoabs.surface_emission import normal_field_factors_ellipsoid, surface_emission_rate, threshold_power


def _golden_rule_direct(hw_eV, phi_eV, ef_eV):
    """Rate per area per |E_n|^2 by a direct golden-rule sum written independently of the package.

    Wavefunctions of the step (metal z < 0, barrier U = E_F + phi for z > 0, free-electron mass on
    both sides) from the matching conditions solved numerically; matrix element in the LENGTH form
    <f|z|i> = int phi_f* z phi_i dz with the oscillating z < 0 part Abel-regularised
    (int_{-inf}^0 z exp(iqz) dz = 1/q^2), not the acceleration form used by the package; final
    states leaving into z > 0 (time-reversed scattering states, energy-normalised with
    |B|^2 = m/(2 pi hbar^2 k_s)); golden rule w = (2 pi/hbar) |e E_n/2|^2 |<f|z|i>|^2; sum over
    spin (2), standing waves (L/pi per dk, |A|^2 = 1/(2L)) and parallel momenta as a 2-D
    integral over (k_z, k_par) with scipy dblquad (T = 0 occupation).
    """
    m, hbar, e = C.m_e, C.hbar, C.e
    U = (ef_eV + phi_eV) * e
    hw = hw_eV * e
    kF = np.sqrt(2 * m * ef_eV * e) / hbar

    def w_times_L(k):  # w_i * L for |E_n| = 1 V/m
        Ez = (hbar * k) ** 2 / (2 * m)
        if Ez + hw <= U:
            return 0.0
        kappa = np.sqrt(2 * m * (U - Ez)) / hbar
        # initial: A(e^{ikz} + r e^{-ikz}) | A t e^{-kappa z}; continuity of value and slope at 0
        r, t = np.linalg.solve([[1, -1], [-1j * k, kappa]], [-1, -1j * k])
        ks = np.sqrt(2 * m * (Ez + hw - U)) / hbar
        km = np.sqrt(2 * m * (Ez + hw)) / hbar
        # right-incident state: B(e^{-iks z} + rho e^{iks z}) | B tau e^{-ikm z}; the emitted state is its conjugate
        rho, tau = np.linalg.solve([[1, -1], [1j * ks, 1j * km]], [-1, 1j * ks])
        # conj(phi_f) = B (e^{-iks z} + rho e^{iks z}) for z > 0, B tau e^{-ikm z} for z < 0 (B real)
        left = tau * (1 / (k - km) ** 2 + r / (-k - km) ** 2)
        right = t * (1 / (kappa + 1j * ks) ** 2 + rho / (kappa - 1j * ks) ** 2)
        M2 = (m / (2 * np.pi * hbar**2 * ks)) * 0.5 * abs(left + right) ** 2  # |A|^2 L = 1/2
        return 2 * np.pi / hbar * (e / 2) ** 2 * M2

    def integrand(kp, k):
        return 2 * (1 / np.pi) * kp / (2 * np.pi) * w_times_L(k)

    k_lo = np.sqrt(max(2 * m * (U - hw), 0.0)) / hbar
    val, _ = integrate.dblquad(integrand, k_lo, kF, 0.0, lambda k: np.sqrt(max(kF**2 - k**2, 0.0)),
                               epsabs=0, epsrel=1e-9)
    return val


@pytest.mark.parametrize("hw, phi, ef", [(1.0, 0.8, 5.53), (1.6, 0.8, 5.53), (2.5, 0.5, 5.49), (0.5, 0.3, 9.0)])
def test_rate_against_direct_golden_rule_sum(hw, phi, ef):
    # Independent length-form golden-rule sum (above); tolerance 1e-6 relative (quadrature).
    ref = _golden_rule_direct(hw, phi, ef)
    got = float(surface_emission_rate(hw, phi, ef))
    assert ref > 0
    assert got == pytest.approx(ref, rel=1e-6)


def test_threshold_law_and_zero_below():
    # The step model's threshold: R ~ (h nu - phi)^(5/2) (derived in the module docstring); check the
    # local log-slope numerically between Delta = 1e-4 and 2e-4 eV (tolerance 0.5 %) and the
    # asymptote (4/15) e^2 sqrt(E_F) Delta^(5/2) / (pi^2 hbar^5 omega^4) (tolerance 1 %).
    phi, ef = 0.8, 5.53
    d = np.array([1e-4, 2e-4])
    R = surface_emission_rate(phi + d, phi, ef)
    slope = np.log(R[1] / R[0]) / np.log(2.0)
    assert slope == pytest.approx(threshold_power, rel=5e-3)
    omega = (phi + d[0]) * C.e / C.hbar
    asym = 4 / 15 * C.e**2 * np.sqrt(ef * C.e) * (d[0] * C.e) ** 2.5 / (np.pi**2 * C.hbar**5 * omega**4) \
        / np.sqrt(C.e) * np.sqrt(C.e)  # sqrt(E_F) Delta^(5/2) in J^3
    assert R[0] == pytest.approx(asym, rel=1e-2)
    assert np.all(surface_emission_rate([phi - 0.1, phi], phi, ef) == 0.0)


def test_temperature_limits_and_direct_fermi_dirac_integral():
    # T -> 0 gives the sharp rate (1e-6); at 300 K the rate equals a direct scipy-quad integral over the
    # normal energy with the Fermi-Dirac parallel sum kT ln(1 + exp((E_F - E_z)/kT)) (Sommerfeld,
    # common practice) written out here (tolerance 1e-4); below threshold it stays positive (thermal tail).
    phi, ef = 0.6, 5.53
    assert float(surface_emission_rate(0.9, phi, ef, temperature_K=1.0)) == pytest.approx(
        float(surface_emission_rate(0.9, phi, ef)), rel=1e-6)
    kT = C.k * 300 / C.e
    U = ef + phi
    for hw in (0.55, 0.62, 0.9):
        def f(Ez):
            ks, km = np.sqrt(Ez + hw - U), np.sqrt(Ez + hw)
            occ = kT * np.logaddexp(0, (ef - Ez) / kT)
            return occ * np.sqrt(Ez) * ks / (ks + km) ** 2
        I, _ = integrate.quad(f, U - hw, ef + 40 * kT, points=[ef], epsabs=0, epsrel=1e-11, limit=400)
        omega = hw * C.e / C.hbar
        ref = C.e**2 * U * C.e * I * C.e**2 / (np.pi**2 * C.hbar**5 * omega**4)
        assert float(surface_emission_rate(hw, phi, ef, temperature_K=300)) == pytest.approx(ref, rel=1e-4)


def _normal_field_quadrature(m, x):
    """int |E_r(R^-)|^2 dOmega / |E0|^2 of a homogeneous sphere from its internal field (B&H eqs. 4.40,
    4.50, 4.52-4.53: internal coefficients d_n, field -i E_n d_n N_e1n^(1)(m k r)), by Gauss-Legendre
    quadrature in cos(theta) and the midpoint rule in phi, with scipy's Bessel and Legendre functions."""
    n_max = int(x + 4 * x ** (1 / 3) + 8)
    n = np.arange(1, n_max + 1)
    mx = m * x
    jx, jmx = spherical_jn(n, x), spherical_jn(n, mx)
    hx = jx + 1j * spherical_yn(n, x)
    dj = lambda f, z: f(n, z) + z * f(n, z, derivative=True)  # [z f_n(z)]'
    dxh = dj(spherical_jn, x) + 1j * dj(spherical_yn, x)
    d = (m * jx * dxh - m * hx * dj(spherical_jn, x)) / (m**2 * jmx * dxh - hx * dj(spherical_jn, mx))
    En = 1j**n * (2 * n + 1) / (n * (n + 1))
    mu, wmu = np.polynomial.legendre.leggauss(80)
    phi = (np.arange(64) + 0.5) * 2 * np.pi / 64
    # N_e1n radial at r = R^-: cos(phi) n(n+1) sin(theta) pi_n j_n(mx)/(mx); sin(theta) pi_n = -P_n^1(mu)
    P1 = np.array([lpmv(1, k, mu) for k in n])  # (N, mu)
    Er_theta = np.sum((-1j * En * d * n * (n + 1) * jmx / mx)[:, None] * (-P1), axis=0)
    Er = Er_theta[:, None] * np.cos(phi)[None, :]
    return float(np.sum(np.abs(Er) ** 2 * wmu[:, None]) * 2 * np.pi / 64)


@pytest.mark.parametrize("m, x", [(0.3 + 5.0j, 1.2), (1.5 + 0.1j, 3.0), (0.2 + 3.0j, 0.05), (2.0 + 1.0j, 6.0)])
def test_sphere_normal_field_against_internal_field_quadrature(m, x):
    # Package: from the scattering coefficients a_n outside and continuity of D_n; reference: direct
    # quadrature of the internal Mie field (above). Tolerance 1e-8 relative.
    got = float(normal_field_surface_integral(np.array([m]), np.array([x])))
    assert got == pytest.approx(_normal_field_quadrature(m, x), rel=1e-8)


def test_sphere_normal_field_small_limit():
    # Rayleigh limit: uniform internal field 3/(m^2 + 2) (B&H eq. 5.14, from memory) over the unit
    # sphere, int cos^2 dOmega = 4 pi / 3. Tolerance 1e-5 at x = 1e-3.
    m = 0.4 + 4.0j
    got = float(normal_field_surface_integral(np.array([m]), np.array([1e-3])))
    assert got == pytest.approx(4 * np.pi / 3 * abs(3 / (m**2 + 2)) ** 2, rel=1e-5)


def test_ellipsoid_normal_factors():
    # sum_j G_j = surface area (n is a unit vector) against the package's Carlson-integral area
    # (B. C. Carlson 1995), tolerance 1e-6; a sphere gives 4 pi R^2/3 per axis exactly (1e-10);
    # the half facet of a sphere gives half of each.
    axes = (40.0, 15.0, 10.0)
    G = normal_field_factors_ellipsoid(axes)
    assert G.sum() == pytest.approx(float(ellipsoid_surface_area(*axes)), rel=1e-6)
    assert G[0] < G[1] < G[2]  # a thin axis faces more of the surface
    Gs = normal_field_factors_ellipsoid((7.0, 7.0, 7.0))
    assert np.allclose(Gs, 4 * np.pi * 49 / 3, rtol=1e-10)
    assert np.allclose(normal_field_factors_ellipsoid((7.0, 7.0, 7.0), facet_fraction=0.5), Gs / 2, rtol=1e-8)


def _estimate(particle, method, **kw):
    wl = np.arange(450.0, 1300.0, 50.0)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        spec = na.spectrum(particle, wl, medium=1.45, method=method)
        return na.hot_carrier_estimate(spec, particle, il.monochromatic(1e4), barrier_eV=0.5, **kw)


def test_sphere_mie_and_uniform_field_routes_agree_for_small_sphere():
    # A 5 nm sphere through the Mie normal field and through the uniform quasi-static field of an
    # ellipsoid with equal axes (independent routes in the pipeline): surface emission per absorbed
    # power agrees within 2 % (dipole limit, B&H ch. 5: the internal field departs from uniform by
    # O(|m x|^2), up to ~0.04 here at 1250 nm; observed 1.4 %).
    a = _estimate(na.Sphere("Au", radius_nm=5), "mie").frame
    b = _estimate(na.Ellipsoid("Au", semi_axes_nm=(5, 5, 5)), "quasistatic").frame
    col = "injected_electron_rate_surface_per_s"
    ya = a[col].values / a["absorbed_power_W"].values
    yb = b[col].values / b["absorbed_power_W"].values
    assert np.all(ya > 0)
    assert np.allclose(ya, yb, rtol=2e-2)


def test_pipeline_columns_volume_plus_surface():
    # Bookkeeping (identity, 1e-12): total = volume + surface; surface = the intraband_surface channel
    # under "field"; "cone" has no surface rate and keeps the volume channels unchanged.
    p = na.spheroid("Au", length_nm=80, diameter_nm=20)
    f = _estimate(p, "mlwa")
    c = _estimate(p, "mlwa", surface_emission="cone")
    F, Cc = f.frame, c.frame
    tot, vol, surf = (F[f"injected_electron_rate{k}_per_s"].values for k in ("", "_volume", "_surface"))
    assert np.all(surf > 0)
    assert np.allclose(tot, vol + surf, rtol=1e-12)
    assert np.allclose(surf, F["injected_electron_rate_intraband_surface_per_s"].values, rtol=1e-12)
    assert np.all(Cc["injected_electron_rate_surface_per_s"].values == 0)
    for k in ("intraband_bulk", "interband"):
        assert np.allclose(F[f"injected_electron_rate_{k}_per_s"], Cc[f"injected_electron_rate_{k}_per_s"], rtol=1e-12)
    rate = F["absorbed_photon_rate_per_s"] * F["emission_probability"] * F["transport_factor"]
    assert np.allclose(rate, tot, rtol=1e-10)
    assert f.metadata["schottky"]["surface_emission"] == "field"


def test_cli_surface_and_thermal_options(tmp_path, monkeypatch, capsys):
    # Contract: --surface-emission and --fermi-smearing reach the pipeline; the export carries the volume and
    # surface columns (per-nm densities under broadband light), the summary prints the split, and with
    # smearing the row beyond the cut-off (hc/0.8 eV = 1550 nm) is a small positive thermal tail.
    from nanoabs.cli import main

    monkeypatch.chdir(tmp_path)
    base = ("hot-carriers --shape sphere --material Au --radius 20 --medium 1.45 --barrier 0.8 --spectrum am1.5g "
            "--wl 1400:1700:20").split()
    assert main(base + ["-o", "a.csv", "--fermi-smearing"]) == 0
    out = capsys.readouterr().out
    assert "volume" in out and "surface" in out and "surface emission: field" in out
    df, meta = na.read_export(tmp_path / "a.csv")
    vol, surf = df["injected_electron_rate_volume_per_s_per_nm"], df["injected_electron_rate_surface_per_s_per_nm"]
    assert np.allclose(vol + surf, df["injected_electron_rate_per_s_per_nm"], rtol=1e-12)
    assert meta["metadata"]["schottky"]["fermi_smearing"] is True
    assert df["injected_electron_rate_per_s_per_nm"].iloc[-1] > 0  # 1700 nm, thermal tail
    assert main(base + ["-o", "b.csv", "--surface-emission", "cone"]) == 0
    df2, _ = na.read_export(tmp_path / "b.csv")
    assert np.all(df2["injected_electron_rate_surface_per_s_per_nm"] == 0)
    assert df2["injected_electron_rate_per_s_per_nm"].iloc[-1] == 0  # sharp threshold
    assert main(base + ["-o", "c.csv", "--surface-emission", "both"]) == 2
