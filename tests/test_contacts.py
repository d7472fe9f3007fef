"""Contacts: barrier table, image-force lowering, cut-off, thermionic dark current, noise figures."""

import re

import numpy as np
import pytest
from scipy import constants as c

from nanoabs import NanoabsError
from nanoabs import contacts as ct
from nanoabs import noise


def test_pairs_n_and_p_and_coverage():
    # Contract of issue 13: 'Au/Si' keeps meaning n-Si; 'Au/p-Si' is the p-type contact with holes crossing.
    assert ct.contact("Au/Si") == ct.contact("au / n-si")
    assert ct.contact("Au/Si").carrier == "electron" and ct.contact("Au/p-Si").carrier == "hole"
    metals = ["Au", "Ag", "Cu", "Al", "Pt", "Pd", "Ni", "Ti", "Cr", "W", "TiN", "PtSi"]
    for m in metals:
        for semi in ["n-Si", "p-Si", "n-GaAs", "TiO2", "ZnO"]:
            k = ct.contact(f"{m}/{semi}")
            lo, hi = k.range_eV
            assert lo <= k.barrier_eV <= hi and k.source
            # every value carries a citation or says it is an estimate / from memory
            assert ("Sze" in k.source or "Tung" in k.source or "estimate" in k.source
                    or "from memory" in k.source)
    for m in ["Pd2Si", "IrSi"]:
        assert ct.contact(f"{m}/p-Si").barrier_eV < ct.contact(f"{m}/n-Si").barrier_eV
    with pytest.raises(NanoabsError) as exc:
        ct.contact("Au/InP")
    assert "Au/Si" in str(exc.value) and "\n" not in str(exc.value)


def test_barrier_sum_rule_for_silicon():
    # phi_Bn + phi_Bp ~ E_g for the same metal on Si (Sze & Ng 2007, Sec. 3.2). Measured pairs scatter about it by
    # up to ~0.2 eV (Ag and Al on Si sum to ~1.3 eV in the measured table; from memory), so 0.25 eV: a check that
    # no n/p entry is grossly inconsistent, not a precision test.
    for m in ["Au", "Ag", "Al", "Cu", "Ni", "Ti", "Cr", "W"]:
        total = ct.contact(f"{m}/n-Si").barrier_eV + ct.contact(f"{m}/p-Si").barrier_eV
        assert total == pytest.approx(float(ct.band_gap_eV("Si", 300.0)), abs=0.25), m


def test_band_gap_varshni():
    # Si E_g(300 K) = 1.12 eV and GaAs 1.42 eV (Sze & Ng 2007, Appendix; from memory); 0.01 eV.
    assert ct.band_gap_eV("Si", 300.0) == pytest.approx(1.12, abs=0.01)
    assert ct.band_gap_eV("GaAs", 300.0) == pytest.approx(1.424, abs=0.01)
    assert ct.band_gap_eV("Si", 77.0) > ct.band_gap_eV("Si", 300.0)


def test_image_force_lowering_textbook_example():
    # Sze & Ng (2007) Sec. 3.2.4, metal-vacuum example (from memory): at E = 1e5 V/cm, Delta phi = 0.12 V and
    # x_m = 6 nm; at 1e7 V/cm, 1.2 V. Tolerance 3 % (the book rounds to two digits).
    assert ct.image_force_lowering_eV(1e7, 1.0) == pytest.approx(0.12, rel=0.03)
    assert ct.image_force_lowering_eV(1e9, 1.0) == pytest.approx(1.2, rel=0.03)
    x_m = np.sqrt(c.e / (16 * np.pi * c.epsilon_0 * 1e7))
    assert x_m == pytest.approx(6e-9, rel=0.05)
    # In silicon the lowering scales as eps_s^-1/2 (same formula, eps_s = 11.9); 1e-12.
    assert ct.image_force_lowering_eV(1e7, 11.9) == pytest.approx(0.12 / np.sqrt(11.9), rel=0.03)


def test_reverse_bias_lowers_the_barrier_and_moves_the_cutoff():
    # Sze & Ng (2007) Sec. 3.2.4: Delta phi grows with reverse bias and doping (E_m ~ sqrt(N (psi_bi + V_R))).
    k = ct.contact("Au/p-Si")
    phi0, d0, e0 = ct.effective_barrier_eV(k, bias_V=0.0, doping_cm3=1e15)
    phi1, d1, e1 = ct.effective_barrier_eV(k, bias_V=-5.0, doping_cm3=1e15)
    phi2, d2, _ = ct.effective_barrier_eV(k, bias_V=-5.0, doping_cm3=1e17)
    assert 0 < d0 < d1 < d2 and phi1 < phi0
    # depletion approximation written out: E_m = sqrt(2 q N (psi_bi + V_R - kT/q)/eps_s)
    vt = c.k * 300 / c.e
    nv = 2 * (2 * np.pi * 0.81 * c.m_e * c.k * 300 / c.h**2) ** 1.5
    psi = k.barrier_eV - vt * np.log(nv / 1e21)
    # rel 1e-8: scipy's epsilon_0 is CODATA 2018 or 2022 depending on its version (they differ by 3e-10)
    assert e1 == pytest.approx(np.sqrt(2 * c.e * 1e21 * (psi + 5 - vt) / (11.9 * c.epsilon_0)), rel=1e-8)
    assert ct.cutoff_wavelength_nm(phi1) > ct.cutoff_wavelength_nm(phi0)


def test_ptsi_cutoff_near_5_6_um():
    # PtSi/p-Si infrared detectors cut off near 5.6 um at 77 K (Shepherd, Proc. SPIE 1980s; from memory; common
    # practice): 10 % tolerance (the effective barrier depends on bias and doping).
    phi, _, _ = ct.effective_barrier_eV(ct.contact("PtSi/p-Si"), bias_V=-1.0, doping_cm3=1e15, temperature_K=77)
    assert ct.cutoff_wavelength_nm(phi) == pytest.approx(5600.0, rel=0.10)


def test_richardson_constant_and_thermionic_current():
    # A = 4 pi q m k^2 / h^3 = 120 A cm^-2 K^-2 (Sze & Ng 2007 Sec. 3.3.2); 0.5 %.
    assert ct.RICHARDSON_A_CM2_K2 == pytest.approx(120.0, rel=0.005)
    # A** of Si: 112 (n) and 32 (p) A cm^-2 K^-2 (Sze & Ng 2007, Sec. 3.3.2, as quoted in issue 13).
    assert ct.richardson_constant(ct.contact("Au/Si")) == 112.0
    assert ct.richardson_constant(ct.contact("Au/p-Si")) == 32.0
    # Worked number (formula of Sze & Ng eq. for J_s, evaluated by hand): phi_B = 0.80 eV on n-Si at 300 K,
    # J_s = 112 * 300^2 * exp(-0.80/0.025852) = 3.7e-7 A/cm^2 = 3.7e-3 A/m^2; 2 %.
    js = ct.thermionic_current_density_A_m2(0.80, 300.0, 112.0, None)
    assert js == pytest.approx(3.66e-3, rel=0.02)
    # reverse bias saturates at -J_s, forward bias grows as exp(qV/kT); zero at zero bias
    assert ct.thermionic_current_density_A_m2(0.80, 300.0, 112.0, -1.0) == pytest.approx(-js, rel=1e-12)
    assert ct.thermionic_current_density_A_m2(0.80, 300.0, 112.0, 0.0) == 0.0
    # 77 K: PtSi/p-Si dark current falls by many orders (exp(-q phi/kT))
    assert ct.thermionic_current_density_A_m2(0.22, 77.0, 32.0, None) < 1e-8 * ct.thermionic_current_density_A_m2(
        0.22, 300.0, 32.0, None)


def test_noise_nep_and_detectivity():
    # Shot noise 2 q I (Schottky 1918) and Johnson noise 4 k T / R (Johnson, Phys. Rev. 32, 97 (1928));
    # NEP = i_n / R, D* = sqrt(A)/NEP (Jones, Proc. IRE 47, 1495 (1959)); written out here, 1e-12.
    i_s, i_ph, T, RL = 1e-9, 2e-10, 300.0, 1e6
    i_n = noise.noise_current_A_Hz05(i_s, i_ph, bias_V=-1.0, temperature_K=T, load_ohm=RL)
    expect = np.sqrt(2 * c.e * (i_s * (1 + np.exp(-1.0 * c.e / (c.k * T))) + i_ph) + 4 * c.k * T / RL)
    assert i_n == pytest.approx(expect, rel=1e-12)
    # zero bias: the two opposing thermionic currents give 4 q I_s = 4 k T / R_0 with R_0 = kT/(q I_s)
    i0 = noise.noise_current_A_Hz05(i_s, 0.0, bias_V=0.0, temperature_K=T)
    assert i0**2 == pytest.approx(4 * c.k * T / (c.k * T / (c.e * i_s)), rel=1e-12)
    nep = noise.noise_equivalent_power_W_Hz05(i_n, np.array([0.0, 1e-3]))
    assert np.isnan(nep[0]) and nep[1] == pytest.approx(i_n / 1e-3)
    d = noise.specific_detectivity_Jones(1e4, nep)  # 1e4 um^2 = 1e-4 cm^2
    assert d[0] == 0 and d[1] == pytest.approx(np.sqrt(1e-4) / nep[1], rel=1e-12)


def test_values_typed_from_memory_say_so_and_carry_a_range():
    # Rules (issue 13, task 4): no book was at hand, so every tabulated barrier, semiconductor constant,
    # band edge, E_F estimate, attenuation length and conductivity is marked "(from memory)" or
    # "from memory" in its source; every barrier lies inside its range, and estimates have a range of
    # non-zero width. (Bookkeeping check of the tables, not physics.)
    from nanoabs import carriers as cr
    from nanoabs import hotcarriers as hc
    from nanoabs.contacts import CONTACTS, SEMICONDUCTORS

    for label, c in CONTACTS.items():
        assert "from memory" in c.source, label
        assert c.range_eV[0] <= c.barrier_eV <= c.range_eV[1], label
        if "estimate" in c.source:
            assert c.range_eV[1] > c.range_eV[0], label
    for table in (SEMICONDUCTORS, hc.FREE_ELECTRON, hc.ATTENUATION_LENGTH_NM, hc.THERMAL_CONDUCTIVITY_W_MK,
                  cr.BAND_EDGE_EV, cr.VALENCE_DEPTH_EV):
        for name, entry in table.items():
            assert "from memory" in entry.source, name
    for name, entry in hc.ATTENUATION_LENGTH_NM.items():
        assert re.search(r"\d+-\d+ nm", entry.source), name  # a range, e.g. "20-100 nm"
