"""Internal field and absorbed power density of homogeneous EBCM particles (nanoabs.tmatrix).

References used below:

* Mie internal field: the angle-averaged intensity <|E|^2>/|E0|^2 inside a sphere from
  nanoabs.mie.internal_intensity_profile (Bohren & Huffman 1983, eqs. 4.52-4.53; Yang 2003),
  an independent code path (radial Riccati functions, no Q matrix): 1e-8.
* Energy balance: the volume integral of k Im(m^2)|E/E0|^2 equals C_abs = C_ext - C_sca from
  the far-field T matrix (Bohren & Huffman 1983, sec. 2.8 / 4.4, from memory).  Spheroids:
  1e-8 at n_max 12; cylinders and capped rods, whose internal series converges slowly near
  the edges: 3e-2 (the solver's own tolerance for them is 2e-2).
* Quasi-static limit (Bohren & Huffman 1983, eq. 5.14 and sec. 5.3, from memory): inside a
  small sphere E = 3 eps_m/(eps + 2 eps_m) E0, inside a small spheroid with the field along an
  axis E = E0 / (1 + L (eps/eps_m - 1)) with L the depolarisation factor: 1e-3 at the centre
  of a sphere with k a ~ 0.02, 5e-3 for a spheroid with k a = 0.05.
"""

from __future__ import annotations

import numpy as np
import pytest

import nanoabs
from nanoabs._errors import NanoabsError
from nanoabs.handoff import absorbed_photon_rate, generation_profile
from nanoabs.cli import main
from nanoabs.mie import internal_intensity_profile
from nanoabs.quasistatic import depolarization_factors
from nanoabs.tmatrix import TMatrix, absorption_cells

N_WATER = 1.333  # refractive index of water in the visible (from memory)


def test_sphere_internal_field_equals_mie():
    # Reference: nanoabs.mie.internal_intensity_profile (independent Mie path), 1e-8 relative,
    # at four radii up to the surface, three wavelengths of gold, light along the axis and tilted.
    wl = np.array([450.0, 520.0, 700.0])
    eps = nanoabs.material("Au").permittivity(wl)
    R = 40.0
    tm = TMatrix.axisymmetric("spheroid", eps, N_WATER**2, 2 * R, 2 * R, wl, n_max=14, internal=True)
    k = 2 * np.pi * N_WATER / wl
    t, wt = np.polynomial.legendre.leggauss(40)
    th, ph = np.arccos(t), np.linspace(0, 2 * np.pi, 33)[:-1]
    for r in (5.0, 20.0, 35.0, 39.9):
        ref = np.array([internal_intensity_profile(np.array([np.sqrt(eps[i]) / N_WATER]), np.array([k[i] * R]),
                                                   np.array([k[i] * r]))[0] for i in range(wl.size)])
        for theta_inc, psi in ((0.0, 0.0), (0.8, 0.3)):
            # the sphere average of |E|^2 at radius r, on a Gauss x uniform-azimuth grid (exact for these orders)
            pts = r * np.stack([np.outer(np.sin(th), np.cos(ph)), np.outer(np.sin(th), np.sin(ph)),
                                np.outer(np.cos(th), np.ones_like(ph))], -1).reshape(-1, 3)
            e2 = np.sum(np.abs(tm.internal_field(pts, theta_inc, psi)) ** 2, -1).reshape(wl.size, th.size, ph.size)
            avg = np.einsum("wtp,t->w", e2, wt) / (2 * ph.size)
            assert np.max(np.abs(avg / ref - 1)) < 1e-8


def test_small_particles_have_the_quasistatic_uniform_field():
    # Reference: Bohren & Huffman 1983 eq. 5.14 and sec. 5.3 (from memory), see module docstring;
    # depolarisation factor from nanoabs.quasistatic (itself tested against B&H in test_quasistatic).
    wl = np.array([500.0, 800.0])
    eps = np.array([-2.0 + 3.0j, -20.0 + 1.5j])
    em = N_WATER**2
    sph = TMatrix.axisymmetric("spheroid", eps, em, 2.0, 2.0, wl, n_max=3, internal=True)
    E = sph.internal_field([[0.0, 0.0, 0.0], [0.3, -0.2, 0.5]], 0.0, 0.0)  # light along z, E0 along x
    want = 3 * em / (eps + 2 * em)
    # centre: 1e-3; off centre the first retardation term (order k r ~ 1e-2) is allowed: 1e-2
    assert np.max(np.abs(E[:, 0, 0] / want - 1)) < 1e-3
    assert np.max(np.abs(E[:, 1, 0] / want - 1)) < 1e-2
    assert np.max(np.abs(E[:, :, 1:])) < 1e-2 * np.max(np.abs(want))
    rod = TMatrix.axisymmetric("spheroid", eps, em, 6.0, 2.0, wl, n_max=6, internal=True)  # axis z, c = 3, a = 1
    L = depolarization_factors(1.0, 1.0, 3.0)[2]
    E = rod.internal_field([[0.0, 0.0, 0.0]], np.pi / 2, 0.0)  # field along the axis: E0 = θ̂ = -z at θ = π/2
    want = -1.0 / (1.0 + L * (eps / em - 1.0))
    # k a = 0.05: dynamic corrections of order (k a)^2 ~ 3e-3 near the resonance at 800 nm
    assert np.max(np.abs(E[:, 0, 2] / want - 1)) < 5e-3


@pytest.mark.parametrize("shape, L, D, rtol", [("spheroid", 100.0, 40.0, 1e-8), ("spheroid", 30.0, 90.0, 1e-8),
                                               ("capped-rod", 100.0, 40.0, 3e-2), ("cylinder", 80.0, 40.0, 3e-2)])
def test_absorbed_power_integrates_to_extinction_minus_scattering(shape, L, D, rtol):
    # Reference: energy balance (module docstring); orientations along, across, tilted and averaged.
    wl = np.array([500.0, 650.0, 800.0])
    eps = nanoabs.material("Au").permittivity(wl)
    tm = TMatrix.axisymmetric(shape, eps, N_WATER**2, L, D, wl, n_max=12, internal=True)
    for theta_inc, psi in ((np.pi / 2, 0.0), (0.0, 0.0), (0.7, 0.4)):
        c_abs = tm.cross_sections(theta_inc, psi)[0]
        assert np.max(np.abs(tm.absorbed_cross_section(theta_inc, psi) / c_abs - 1)) < rtol
        cells = absorption_cells(tm, theta_inc, psi, 12)  # 12 x 12 cells of 4 x 4 points: 1e-5 at least
        assert np.max(np.abs(cells["q_per_nm"] @ cells["cell_volume_nm3"] / c_abs - 1)) < max(rtol, 1e-5)
    avg = tm.orientation_average()[0]
    assert np.max(np.abs(tm.absorbed_cross_section(None) / avg - 1)) < rtol
    # the cells tile the particle: their volumes add up to the body's (calculus; 12 x 12 cells: 1e-5)
    body = {"spheroid": lambda: np.pi / 6 * L * D**2, "capped-rod": lambda: nanoabs.CappedRod("Au", L, D).volume_nm3(),
            "cylinder": lambda: nanoabs.Cylinder("Au", L, D).volume_nm3()}[shape]()
    assert cells["cell_volume_nm3"].sum() == pytest.approx(float(body), rel=1e-5)


def test_internal_field_needs_the_coefficients():
    tm = TMatrix.axisymmetric("spheroid", -10 + 1j, 1.77, 60.0, 40.0, [600.0], n_max=6)
    with pytest.raises(NanoabsError, match="internal=True"):
        tm.internal_field([[0.0, 0.0, 0.0]], 0.0)


@pytest.mark.filterwarnings("ignore:tmatrix")
@pytest.mark.parametrize("particle, pol, method, rtol", [
    (nanoabs.spheroid("Au", 100.0, 40.0), "long", "tmatrix", 1e-5),
    (nanoabs.CappedRod("Au", 100.0, 40.0), "long", "auto", 3e-2),
    (nanoabs.RoundedDisc("Ag", 20.0, 60.0), "random", "auto", 3e-2)])
def test_generation_profile_of_bodies_integrates_to_absorbed_photon_rate(particle, pol, method, rtol):
    # Reference: energy balance as above; sigma_abs of the spectrum is far-field (C_ext - C_sca).
    wl = np.array([600.0, 750.0])
    s = nanoabs.spectrum(particle, wl, medium="water", polarization=pol, method=method)
    f = generation_profile(s, particle, 10.0, n_points=12)
    assert {"z_nm", "rho_nm", "cell_volume_nm3", "generation_rate_cm3_s"} <= set(f.columns)
    assert f.attrs["energy_balance_relative_error"] < rtol
    for w, rate in zip(wl, absorbed_photon_rate(s, 10.0)):
        rows = f[f.wavelength_nm == w]
        total = float(np.sum(rows.generation_rate_cm3_s * rows.cell_volume_nm3 * 1e-21))
        assert total == pytest.approx(float(rate), rel=rtol)


@pytest.mark.filterwarnings("ignore:tmatrix")
def test_cli_export_generation_of_a_capped_rod(tmp_path):
    out = tmp_path / "gen.csv"
    assert main(["export-generation", "--shape", "capped-rod", "--material", "Au", "--length", "120", "--diameter",
                 "30", "--medium", "water", "--polarization", "long", "--irradiance", "1mW/cm2", "--wl", "800",
                 "--points", "10", "-o", str(out)]) == 0
    df, meta = nanoabs.read_export(out)
    assert len(df) == 100 and (df.generation_rate_cm3_s > 0).all() and "T-matrix" in meta["metadata"]["what"]
    # a coated body has no internal-field profile yet: one-line refusal
    assert main(["export-generation", "--shape", "capped-rod", "--material", "Au", "--length", "60", "--diameter",
                 "40", "--shell", "SiO2", "--thickness", "2", "--irradiance", "10", "--wl", "800",
                 "-o", str(tmp_path / "c.csv")]) == 2
