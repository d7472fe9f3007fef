"""Tests of nanoabs.hotcarriers: photons, emission yields, transport, arrays, tables."""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from scipy import constants
from scipy.integrate import quad

from nanoabs import hotcarriers as hc
from nanoabs._errors import NanoabsError

EF_AU = 5.53  # eV, Ashcroft & Mermin Table 2.1 (from memory)


# ---------------------------------------------------------------------------
# Photons
# ---------------------------------------------------------------------------

def test_hc_in_eV_nm():
    # Source: CODATA 2018, hc = 1239.84198 eV nm (h, c, e exact in the 2019 SI).
    # Tolerance 1e-8 relative (the quoted value has 9 significant digits).
    assert hc.HC_EV_NM == pytest.approx(1239.84198, rel=1e-8)
    assert hc.photon_energy_eV(1239.84198) == pytest.approx(1.0, rel=1e-8)
    np.testing.assert_allclose(hc.photon_energy_eV([500.0, 1000.0]), [2.47968, 1.23984], rtol=1e-5)


def test_photon_rate():
    # 1 W of 1 eV photons is 1/e photons per second (e from scipy.constants); 1e-8.
    assert hc.photon_rate(1.0, 1239.84198) == pytest.approx(1.0 / constants.e, rel=1e-8)
    assert hc.photon_rate([0.0, 2.0], 500.0).shape == (2,)


# ---------------------------------------------------------------------------
# Emission yield
# ---------------------------------------------------------------------------

def test_yields_zero_at_and_below_threshold():
    phi = 0.8
    hv = np.array([0.1, 0.5, 0.79999, 0.8])
    np.testing.assert_array_equal(hc.fowler_yield(hv, phi, EF_AU), 0.0)
    np.testing.assert_array_equal(hc.escape_cone_yield(hv, phi, EF_AU), 0.0)
    assert hc.escape_cone_yield(0.80001, phi, EF_AU) > 0


def test_escape_cone_closed_form_matches_numerical_integral():
    # Independent: eta = (1/hv) int_phi^hv (1/2)(1 - sqrt((EF+phi)/(EF+E))) dE by quad
    # (escape-cone probability of an isotropic free-electron distribution). Tolerance 1e-10.
    for hv, phi, ef in [(1.2, 0.8, 5.53), (2.5, 0.5, 7.0), (3.0, 1.0, 11.7), (0.9, 0.85, 5.49)]:
        p = lambda e: 0.5 * (1.0 - np.sqrt((ef + phi) / (ef + e)))
        integral, _ = quad(p, phi, hv, epsabs=0, epsrel=1e-13)
        assert hc.escape_cone_yield(hv, phi, ef) == pytest.approx(integral / hv, rel=1e-10)


def test_escape_cone_first_order_is_fowler_form():
    # Near threshold (hv - phi = 1e-4 eV) the exact integral -> (hv-phi)^2/(8 (EF+phi) hv)
    # (first-order expansion; Scales & Berini 2010, Leenheer et al. 2014); ratio within 1e-3.
    # The textbook Fowler form uses E_F alone: it exceeds the exact result by
    # (EF + phi)/EF (~1.145 for Au on Si), also checked to 1e-3.
    phi, delta = 0.8, 1e-4
    hv = phi + delta
    exact = hc.escape_cone_yield(hv, phi, EF_AU)
    approx_ef_phi = delta**2 / (8 * (EF_AU + phi) * hv)
    assert exact / approx_ef_phi == pytest.approx(1.0, abs=1e-3)
    fowler = hc.fowler_yield(hv, phi, EF_AU)
    assert fowler / exact == pytest.approx((EF_AU + phi) / EF_AU, rel=1e-3)
    assert abs(fowler / exact - 1.0) > 0.1  # the two forms differ noticeably


energies = st.floats(min_value=0.05, max_value=20.0, allow_nan=False)
barriers = st.floats(min_value=0.05, max_value=3.0, allow_nan=False)
fermis = st.floats(min_value=1.0, max_value=15.0, allow_nan=False)


@settings(max_examples=200, deadline=None)
@given(hv=energies, step=st.floats(min_value=1e-6, max_value=5.0), phi=barriers, ef=fermis)
def test_escape_cone_monotone_bounded_and_below_fowler(hv, step, phi, ef):
    # Properties of the closed form: d eta / d hv >= 0 and eta <= 1/2 (since
    # (sqrt b - sqrt a)^2 <= b - a <= hv); the Fowler form with E_F < E_F + phi is an
    # upper bound. Tolerances: 1e-15 absolute (rounding).
    lo = hc.escape_cone_yield(hv, phi, ef)
    hi = hc.escape_cone_yield(hv + step, phi, ef)
    assert hi >= lo - 1e-15
    assert 0.0 <= hi <= 0.5
    assert hc.fowler_yield(hv, phi, ef) >= lo - 1e-15


def test_escape_cone_limit_large_photon_energy():
    # hv -> inf: eta -> 1/2 (every electron far above the barrier has half-space escape);
    # at hv = 1e8 eV the closed form gives 1/2 (1 - O(hv^-1/2)), within 1e-3.
    assert hc.escape_cone_yield(1e8, 0.8, EF_AU) == pytest.approx(0.5, abs=1e-3)


def test_momentum_factor_scales_and_clips():
    base = hc.escape_cone_yield(2.0, 0.8, EF_AU)
    assert hc.escape_cone_yield(2.0, 0.8, EF_AU, momentum_factor=3.0) == pytest.approx(3 * base, rel=1e-14)
    assert hc.escape_cone_yield(1e8, 0.8, EF_AU, momentum_factor=5.0) == 1.0
    with pytest.raises(NanoabsError):
        hc.escape_cone_yield(2.0, 0.8, EF_AU, momentum_factor=-1.0)


@pytest.mark.parametrize("args", [(-1.0, 0.8, 5.5), (1.0, 0.0, 5.5), (1.0, 0.8, -5.5), (1.0, np.nan, 5.5)])
def test_yield_input_errors(args):
    with pytest.raises(NanoabsError):
        hc.escape_cone_yield(*args)
    with pytest.raises(NanoabsError):
        hc.fowler_yield(*args)


def test_yield_broadcasting():
    hv = np.linspace(0.5, 3.0, 6)
    out = hc.escape_cone_yield(hv[:, None], np.array([0.5, 0.8, 1.0]), EF_AU)
    assert out.shape == (6, 3)


# ---------------------------------------------------------------------------
# Transport
# ---------------------------------------------------------------------------

def test_uniform_transport_closed_form_vs_quad():
    # Independent: (3/R^3) int_0^R r^2 exp(-(R-r)/l) dr by quad; tolerance 1e-8,
    # across the small-u series branch (u < 0.1) and the direct formula.
    R = 20.0
    for ell in [0.05, 1.0, 15.0, 40.0, 199.0, 201.0, 1e3, 1e5]:
        num, _ = quad(lambda r: r * r * np.exp(-(R - r) / ell), 0.0, R, epsabs=0, epsrel=1e-13, limit=200)
        assert hc.transport_factor_uniform(R, ell) == pytest.approx(3 * num / R**3, rel=1e-8)


def test_transport_limits():
    # l -> inf: every carrier arrives (T -> 1); l -> 0: none does (T -> 0); T ~ 3 l / R for
    # l << R (surface layer of thickness l out of volume R/3 per area). Tolerances stated inline.
    R = 25.0
    r = np.linspace(0.0, R, 201)
    p = 1.0 + 0.5 * np.cos(r / 5.0)
    assert hc.transport_factor_uniform(R, np.inf) == 1.0
    assert hc.transport_factor_uniform(R, 1e12) == pytest.approx(1.0, abs=1e-9)
    assert hc.transport_factor_uniform(R, 1e-9) == pytest.approx(3e-9 / R, rel=1e-6)
    assert hc.transport_factor_profile(r, p, R, np.inf) == pytest.approx(1.0, abs=1e-14)
    assert hc.transport_factor_profile(r, p, R, 1e12) == pytest.approx(1.0, abs=1e-9)
    assert hc.transport_factor_profile(r, p, R, 1e-9) < 1e-9


def test_profile_exact_for_constant_g():
    # For p(r) = 1/r^2 on a shell a..R, g = p r^2 is constant and the scheme is exact:
    # T = l (1 - exp(-(R-a)/l)) / (R - a). Tolerance 1e-12.
    a, R = 10.0, 30.0
    r = np.linspace(a, R, 7)
    for ell in [0.3, 5.0, 50.0, 5e4]:
        expected = ell * -np.expm1(-(R - a) / ell) / (R - a)
        assert hc.transport_factor_profile(r, 1 / r**2, R, ell) == pytest.approx(expected, rel=1e-12)


def test_profile_uniform_matches_closed_form():
    # Uniform p on a fine grid vs the closed form: O(h^2) discretisation of r^2,
    # h = 0.01 nm -> relative error < 1e-6.
    R = 20.0
    r = np.linspace(0.0, R, 2001)
    ells = np.array([2.0, 20.0, 100.0])
    np.testing.assert_allclose(
        hc.transport_factor_profile(r, np.ones_like(r), R, ells),
        hc.transport_factor_uniform(R, ells), rtol=1e-6,
    )


def test_contact_fraction_and_errors():
    R = 20.0
    r = np.linspace(0.0, R, 11)
    assert hc.transport_factor_uniform(R, 30.0, contact_fraction=0.25) == pytest.approx(
        0.25 * hc.transport_factor_uniform(R, 30.0), rel=1e-15)
    assert hc.transport_factor_profile(r, np.ones(11), R, 30.0, contact_fraction=0.5) == pytest.approx(
        0.5 * hc.transport_factor_profile(r, np.ones(11), R, 30.0), rel=1e-15)
    bad = [
        lambda: hc.transport_factor_uniform(R, 30.0, contact_fraction=1.5),
        lambda: hc.transport_factor_uniform(R, 0.0),
        lambda: hc.transport_factor_uniform(-1.0, 10.0),
        lambda: hc.transport_factor_profile(r, np.ones(11), 10.0, 30.0),  # r beyond R
        lambda: hc.transport_factor_profile(r[::-1], np.ones(11), R, 30.0),
        lambda: hc.transport_factor_profile(r, np.zeros(11), R, 30.0),
        lambda: hc.transport_factor_profile(r, -np.ones(11), R, 30.0),
        lambda: hc.transport_factor_profile(r, np.ones(5), R, 30.0),
    ]
    for f in bad:
        with pytest.raises(NanoabsError):
            f()


def test_equal_volume_radius():
    # (4/3) pi a b c = (4/3) pi R^3 (exact up to rounding).
    assert hc.equal_volume_radius(40.0, 10.0, 10.0) ** 3 == pytest.approx(4000.0, rel=1e-14)


# ---------------------------------------------------------------------------
# Power, arrays, heating, partition
# ---------------------------------------------------------------------------

def test_array_chain_eqe_equals_absorptance_times_yield():
    # Independent bookkeeping: with internal yield eta, EQE must equal A * eta where
    # A = N sigma_abs (photons absorbed per incident photon), for any irradiance. 1e-12.
    wl = np.array([450.0, 550.0, 650.0, 800.0])
    sigma = np.array([1e-15, 8e-15, 2e-14, 5e-15])  # m^2
    irr = np.array([1.2, 1.5, 1.3, 1.0])  # W m^-2 nm^-1
    eta = np.array([0.0, 0.01, 0.05, 0.1])
    density = 5.0  # um^-2
    A, warn = hc.array_absorptance(sigma, areal_density_per_um2=density)
    # 5 um^-2 = 5e12 m^-2; 5e12 * 2e-14 = 0.1 (hand value).
    assert A[2] == pytest.approx(0.1, rel=1e-14) and warn == []
    i_particle = hc.particle_photocurrent_A(hc.absorbed_power(sigma, irr), wl, eta)
    j = hc.current_density_A_m2(i_particle, areal_density_per_um2=density)
    resp = hc.responsivity_A_W(j, irr)
    np.testing.assert_allclose(hc.external_quantum_efficiency(resp, wl), A * eta, rtol=1e-12)


def test_ideal_detector_responsivity():
    # EQE = 1 at 1239.84198 nm (1 eV photons) <=> R = 1 A/W (common practice); 1e-8.
    assert hc.external_quantum_efficiency(1.0, 1239.84198) == pytest.approx(1.0, rel=1e-8)
    assert np.isnan(hc.responsivity_A_W(0.0, 0.0))


def test_array_coupling_warning_and_error():
    A, warn = hc.array_absorptance([1e-14, 8e-14], areal_density_per_um2=5.0, wavelength_nm=[500.0, 600.0])
    assert A[1] == pytest.approx(0.4) and len(warn) == 1 and "600 nm" in warn[0] and "coupling" in warn[0]
    with pytest.raises(NanoabsError, match="unphysical"):
        hc.array_absorptance(2e-13, areal_density_per_um2=5.0)
    with pytest.raises(NanoabsError):
        hc.array_absorptance(1e-15, areal_density_per_um2=-1.0)


def test_temperature_rise_satisfies_fourier_law():
    # Independent: outside a sphere, T(r) = P/(4 pi kappa r) must carry the heat flux
    # -4 pi r^2 kappa dT/dr = P (Fourier's law; Govorov & Richardson, Nano Today 2, 30
    # (2007)). Central difference at r = 50 nm, step 1e-3 nm: tolerance 1e-6.
    P, kappa, r, h = 1e-6, 0.6, 50.0, 1e-3
    dT = (hc.temperature_rise(P, r + h, kappa) - hc.temperature_rise(P, r - h, kappa)) / (2 * h * 1e-9)
    assert -4 * np.pi * (r * 1e-9) ** 2 * kappa * dT == pytest.approx(P, rel=1e-6)
    with pytest.raises(NanoabsError):
        hc.temperature_rise(-1.0, 50.0, 0.6)
    with pytest.raises(NanoabsError):
        hc.temperature_rise(1.0, 50.0, 0.0)


def test_partition_sums_to_total_and_is_proportional():
    # Parts add up to the total (1e-12 relative) and keep the eps'' ratios (1e-12).
    rng = np.random.default_rng(7)
    n = 300
    power = rng.uniform(0.0, 1e-12, n)
    parts = {
        "interband": rng.uniform(0.0, 5.0, n),
        "intraband_bulk": rng.uniform(0.0, 1.0, n),
        "intraband_surface": rng.uniform(0.0, 0.5, n),
    }
    out = hc.partition_by_mechanism(power, parts)
    assert set(out) == set(parts)
    np.testing.assert_allclose(sum(out.values()), power, rtol=1e-12, atol=0)
    np.testing.assert_allclose(out["interband"] / out["intraband_bulk"],
                               parts["interband"] / parts["intraband_bulk"], rtol=1e-12)


def test_partition_edge_cases():
    out = hc.partition_by_mechanism([0.0, 1.0], {"a": [0.0, 1.0], "b": [0.0, 0.0]})
    np.testing.assert_array_equal(out["a"], [0.0, 1.0])
    with pytest.raises(NanoabsError):
        hc.partition_by_mechanism([1.0], {"a": [0.0]})
    with pytest.raises(NanoabsError):
        hc.partition_by_mechanism([1.0, 2.0], {"a": [1.0, 2.0, 3.0]})
    with pytest.raises(NanoabsError):
        hc.partition_by_mechanism([1.0], {"a": [-1.0]})
    with pytest.raises(NanoabsError):
        hc.partition_by_mechanism([1.0], {})


# ---------------------------------------------------------------------------
# Tables
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("metal", ["Au", "Ag", "Cu", "Al"])
def test_free_electron_table_consistent_with_free_electron_model(metal):
    # Source: free-electron relations k_F = (3 pi^2 n)^(1/3), E_F = hbar^2 k_F^2 / 2m,
    # v_F = hbar k_F / m (Ashcroft & Mermin, ch. 2); the tabulated E_F, v_F follow from n
    # to the 3 digits quoted: tolerance 1 %.
    m = hc.free_electron(metal)
    kf = (3 * np.pi**2 * m.electron_density_m3) ** (1 / 3)
    ef_eV = constants.hbar**2 * kf**2 / (2 * constants.m_e) / constants.e
    vf = constants.hbar * kf / constants.m_e
    assert m.fermi_energy_eV == pytest.approx(ef_eV, rel=1e-2)
    assert m.fermi_velocity_m_s == pytest.approx(vf, rel=1e-2)
    assert "from memory" in m.source


def test_schottky_lookup_and_coverage():
    value, source = hc.schottky_barrier("Au/Si")
    assert 0.5 < value < 1.0 and "Sze" in source
    assert hc.schottky_barrier(" au / n-si ").value == value
    for metal in ["Au", "Ag", "Al", "Cu", "TiN"]:
        for semi in ["Si", "GaAs", "TiO2", "ZnO", "GaN"]:
            v, s = hc.schottky_barrier(f"{metal}/{semi}")
            assert 0.0 < v < 2.0 and s
            if semi in ("TiO2", "ZnO", "GaN") or metal == "TiN":
                assert "process dependent" in s
    with pytest.raises(NanoabsError) as exc:  # Pt/Si is tabulated since issue 13; InP is not
        hc.schottky_barrier("Pt/InP")
    assert "Au/Si" in str(exc.value) and "\n" not in str(exc.value)


def test_other_tables_have_sources():
    for table in (hc.ATTENUATION_LENGTH_NM, hc.THERMAL_CONDUCTIVITY_W_MK):
        for key, entry in table.items():
            assert entry.value > 0 and entry.source, key
    assert hc.thermal_conductivity("WATER").value == pytest.approx(0.6, rel=0.05)  # CRC ~0.6 at 25 C
    assert hc.attenuation_length_nm("au").value > 0
    with pytest.raises(NanoabsError, match="known"):
        hc.thermal_conductivity("vacuum")


def test_safety_caution_mentions_standards():
    text = hc.SAFETY_CAUTION
    assert "IEC 60825-1" in text and "ANSI Z136.1" in text and "laser-safety officer" in text
