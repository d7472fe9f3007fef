"""Checks of nanoabs.stack: Fresnel formulas, the thin-film library ``tmm`` and energy balance.

``tmm`` (S. J. Byrnes, PyPI package tmm 0.2.0, a general-purpose thin-film
transfer-matrix code, used in tests only) takes complex indices n + ik with
k > 0 for absorbing media (its ``is_forward_angle`` asserts n.real * n.imag >= 0),
the same sign convention as nanoabs. Its r_s and r_p equal ours (read from its
``interface_r``); its t_p is a ratio of E fields, ours a ratio of H fields, so
t_p(ours) = t_p(tmm) n_N / n_0.
"""

import numpy as np
import pytest

from nanoabs._errors import NanoabsError
from nanoabs.stack import drive_field, kz, stack_coefficients, stack_RT

import tmm  # noqa: E402  (test extra: a general-purpose thin-film code, tests only)

WL = np.array([400.0, 633.0, 1000.0, 1550.0])


def _tmm(pol, n_list, d_list, theta_deg, wl):
    return tmm.coh_tmm(pol, n_list, d_list, np.deg2rad(theta_deg), wl)


@pytest.mark.parametrize("pol", ["s", "p"])
@pytest.mark.parametrize("theta", [0.0, 35.0, 70.0])
def test_single_interface_matches_fresnel_formulas(pol, theta):
    # Born & Wolf (1999), eqs. 1.5.20-21 (from memory): air / glass n = 1.5;
    # tolerance 1e-13 (closed form, rounding only).
    n1, n2 = 1.0, 1.5
    ci = np.cos(np.deg2rad(theta))
    st = n1 * np.sin(np.deg2rad(theta)) / n2
    ct = np.sqrt(1 - st ** 2)
    if pol == "s":
        r_ref = (n1 * ci - n2 * ct) / (n1 * ci + n2 * ct)
    else:
        r_ref = (n2 * ci - n1 * ct) / (n2 * ci + n1 * ct)
    k0 = 2 * np.pi / 500.0
    r, t = stack_coefficients([n1 ** 2, n2 ** 2], [], k0, n1 * k0 * np.sin(np.deg2rad(theta)), pol)
    assert abs(r - r_ref) < 1e-13
    R, T = stack_RT([n1 ** 2, n2 ** 2], [], 500.0, angle_deg=theta, pol=pol)
    assert abs(R + T - 1) < 1e-13


def test_brewster_angle_zero_p_reflection():
    # Brewster: tan(theta_B) = n2/n1 (Born & Wolf 1999, eq. 1.5.25, from memory); r_p = 0 to 1e-14.
    tb = np.rad2deg(np.arctan(1.5))
    R, _ = stack_RT([1.0, 2.25], [], 600.0, angle_deg=tb, pol="p")
    assert R < 1e-28


@pytest.mark.parametrize("pol", ["s", "p"])
@pytest.mark.parametrize("theta", [0.0, 40.0, 75.0])
def test_three_layers_with_absorbing_film_against_tmm(pol, theta):
    # Air / 5 nm Ti-like absorbing film / 100 nm SiO2 / Si-like absorbing substrate;
    # reference tmm.coh_tmm; tolerance 1e-12 on r, t, R, T (same algebra, different code).
    n_list = [1.0, 2.5 + 3.3j, 1.45, 3.9 + 0.02j]
    d_list = [5.0, 100.0]
    for wl in WL:
        ref = _tmm(pol, n_list, [np.inf] + d_list + [np.inf], theta, wl)
        k0 = 2 * np.pi / wl
        r, t = stack_coefficients([n ** 2 for n in n_list], d_list, k0, k0 * np.sin(np.deg2rad(theta)), pol)
        t_tmm = ref["t"] * (n_list[-1] / n_list[0] if pol == "p" else 1)
        assert abs(r - ref["r"]) < 1e-12
        assert abs(t - t_tmm) < 1e-12
        R, T = stack_RT([n ** 2 for n in n_list], d_list, wl, angle_deg=theta, pol=pol)
        assert abs(R - ref["R"]) < 1e-12 and abs(T - ref["T"]) < 1e-12


def test_lossless_stack_conserves_energy_vectorised():
    # R + T = 1 for lossless media (Born & Wolf 1999, eq. 1.5.39); tolerance 1e-13.
    eps = [1.0, 2.25 * np.ones(4), 4.0 * np.ones(4), 12.0 * np.ones(4)]
    for pol in "sp":
        R, T = stack_RT(eps, [80.0, 30.0], WL, angle_deg=20.0, pol=pol)
        assert R.shape == (4,)
        np.testing.assert_allclose(R + T, 1.0, atol=1e-13)


def test_total_internal_reflection():
    # Glass -> air beyond the critical angle: |r| = 1, T = 0 (Born & Wolf 1999, Sec. 1.5.4); tol 1e-14.
    for pol in "sp":
        R, T = stack_RT([2.25, 1.0], [], 700.0, angle_deg=60.0, pol=pol)
        assert abs(R - 1) < 1e-14 and T == 0


def test_quarter_wave_antireflection():
    # Quarter-wave layer n1 = sqrt(n0 n2) cancels normal-incidence reflection
    # (Born & Wolf 1999, Sec. 1.6.4, eq. 1.6.65, from memory); tolerance 1e-28 on R.
    n2 = 3.5
    n1 = np.sqrt(n2)
    wl = 1300.0
    R, T = stack_RT([1.0, n1 ** 2, n2 ** 2], [wl / (4 * n1)], wl)
    assert R < 1e-28 and abs(T - 1) < 1e-14


def test_drive_field_standing_wave_normal_incidence():
    # In front of an interface: |E(z)|^2 = |1 + r exp(2 i k z)|^2 (Born & Wolf 1999, Sec. 1.5);
    # air / n = 3.5, both polarisations agree at normal incidence; tolerance 1e-13.
    wl = np.array([800.0, 1200.0])
    eps = [np.ones(2), 12.25 * np.ones(2)]
    r = (1 - 3.5) / (1 + 3.5)
    for z in (0.0, 37.0, 150.0):
        ref = np.abs(1 + r * np.exp(2j * 2 * np.pi / wl * z)) ** 2
        for pol in "sp":
            E = drive_field(eps, [], wl, z, pol=pol)
            np.testing.assert_allclose(np.sum(np.abs(E) ** 2, -1), ref, rtol=1e-13)
    # transmitted: |t|^2 = (2/(1 + n))^2 (Born & Wolf eq. 1.5.20 at normal incidence)
    E = drive_field(eps, [], wl, -40.0, pol="s")
    np.testing.assert_allclose(np.sum(np.abs(E) ** 2, -1), (2 / 4.5) ** 2, rtol=1e-13)


def test_drive_field_oblique_p_against_tmm_position_resolved():
    # tmm.position_resolved gives E_x, E_z inside each layer (E-field amplitudes, its forward
    # direction +z); our z axis points the other way, so E_z flips sign. Tolerance 1e-12.
    n_list = [1.0, 1.45, 3.6 + 0.01j]
    d = [3.0]
    wl, theta = 900.0, 50.0
    ref = _tmm("p", n_list, [np.inf] + d + [np.inf], theta, wl)
    eps = [np.array([n ** 2]) for n in n_list]
    E_trans = drive_field(eps, d, np.array([wl]), -25.0, angle_deg=theta, pol="p")[0]
    # tmm layer 2 (substrate), 25 nm below its start
    pr = tmm.position_resolved(2, 25.0, ref)
    assert abs(abs(E_trans[0]) - abs(pr["Ex"])) < 1e-12
    assert abs(abs(E_trans[2]) - abs(pr["Ez"])) < 1e-12
    E_front = drive_field(eps, d, np.array([wl]), 0.0, angle_deg=theta, pol="p")[0]
    pr0 = tmm.position_resolved(0, 0.0, ref)
    assert abs(abs(E_front[0]) - abs(pr0["Ex"])) < 1e-12
    assert abs(abs(E_front[2]) - abs(pr0["Ez"])) < 1e-12


def test_kz_branch_and_bad_polarization():
    # Im kz >= 0 on both sides of the branch cut (Novotny & Hecht 2012, Sec. 10.6).
    q = kz(2.25, 1.0, np.array([0.5, 1.5 - 1e-3j, 1.5 + 1e-3j, 3.0]))
    assert np.all(q.imag >= 0)
    assert q[0].real > 0 and abs(q[-1].imag - np.sqrt(9 - 2.25)) < 1e-14
    with pytest.raises(NanoabsError, match="polarization"):
        stack_coefficients([1.0, 2.0], [], 1.0, 0.0, "x")
