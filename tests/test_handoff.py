"""Device-model hand-off: the generation profile integrates to the absorbed photon rate, the
irradiance parser converts units exactly, and the responsivity table reads back.

Independent references: sigma_abs comes from the Mie series (far-field coefficients), while
G(r) comes from the internal fields (Bohren & Huffman 1983, sec. 4.4): their agreement is an
energy check, not a restatement. Photon energy h c / lambda with the exact SI 2019 constants.
"""

import numpy as np
import pytest

import nanoabs
from nanoabs import NanoabsError
from nanoabs._units import parse_irradiance
from nanoabs.cli import main
from nanoabs.handoff import absorbed_photon_rate, generation_profile, responsivity_table


@pytest.mark.parametrize("particle, medium, wl", [
    (nanoabs.Sphere("Au", 40.0), "Si", [1310.0, 1550.0]),
    (nanoabs.Sphere("Ag", 25.0), "water", [420.0, 600.0]),
    (nanoabs.LayeredSphere("SiO2", 30.0, [("Au", 8.0)]), "water", [700.0, 900.0]),
])
def test_generation_integrates_to_absorbed_photon_rate(particle, medium, wl):
    s = nanoabs.spectrum(particle, np.array(wl), medium=medium)
    I0 = 10.0  # W/m^2
    f = generation_profile(s, particle, I0, n_points=60)
    for w, rate in zip(wl, absorbed_photon_rate(s, I0)):
        rows = f[f.wavelength_nm == w]
        total = float(np.sum(rows.generation_rate_cm3_s * rows.cell_volume_nm3 * 1e-21))  # nm^3 -> cm^3
        assert total == pytest.approx(float(rate), rel=1e-6)


@pytest.mark.parametrize("particle, env, wl", [
    (nanoabs.Sphere("Au", 40.0), nanoabs.on_substrate("Si", superstrate="air", gap_nm=1.0), [520.0, 600.0]),
    (nanoabs.Sphere("Au", 40.0), nanoabs.on_substrate("Si", superstrate="air", gap_nm=1.0, incidence="back"),
     [1200.0, 1500.0]),
    (nanoabs.LayeredSphere("SiO2", 30.0, [("Au", 6.0)]), nanoabs.buried("Si", depth_nm=80.0), [1300.0]),
])
def test_generation_in_planar_environment_integrates_to_its_absorbed_photon_rate(particle, env, wl):
    # sigma_abs of the environment is the drive work minus the power scattered into both half-spaces
    # (far-field multipole coefficients); G(r) comes from the internal fields of the same solution
    # (Poynting's theorem per order, Bohren & Huffman 1983 sec. 4.4). Their agreement is an energy check.
    s = nanoabs.spectrum(particle, np.array(wl), environment=env)
    s_free = nanoabs.spectrum(particle, np.array(wl), medium=env.host_material())
    I0 = 10.0
    f = generation_profile(s, particle, I0, n_points=60)
    for w, rate, rate_free in zip(wl, absorbed_photon_rate(s, I0), absorbed_photon_rate(s_free, I0)):
        rows = f[f.wavelength_nm == w]
        total = float(np.sum(rows.generation_rate_cm3_s * rows.cell_volume_nm3 * 1e-21))
        assert total == pytest.approx(float(rate), rel=1e-6)
        assert abs(rate / rate_free - 1) > 1e-3  # so the free particle's profile would fail the check above


def test_generation_of_a_body_on_a_substrate_is_the_scaled_free_profile():
    # Documented approximation (issue 11: "a documented approximation for others"): the free body's
    # T-matrix profile shape scaled to the environment's sigma_abs. Checks: it integrates to the
    # environment's absorbed photon rate (identity, 1e-9) and its shape is the free body's (cell ratios
    # equal to 1e-9), so the substrate enters only through sigma_abs, as the sidecar says.
    p = nanoabs.spheroid("Au", length_nm=40.0, diameter_nm=16.0)
    wl = np.array([560.0, 620.0])
    env = nanoabs.on_substrate("SiO2", superstrate="air", gap_nm=5.0)
    s = nanoabs.spectrum(p, wl, environment=env, method="mlwa", polarization="long")
    s_free = nanoabs.spectrum(p, wl, medium=env.host_material(), method="tmatrix", polarization="long")
    f = generation_profile(s, p, 10.0, n_points=12)
    f_free = generation_profile(s_free, p, 10.0, n_points=12)
    assert "scaled" in f.attrs["profile_approximation"]
    for w, rate in zip(wl, absorbed_photon_rate(s, 10.0)):
        rows, free = f[f.wavelength_nm == w], f_free[f_free.wavelength_nm == w]
        total = float(np.sum(rows.generation_rate_cm3_s * rows.cell_volume_nm3 * 1e-21))
        assert total == pytest.approx(float(rate), rel=1e-9)
        ratio = rows.generation_rate_cm3_s.to_numpy() / free.generation_rate_cm3_s.to_numpy()
        assert np.ptp(ratio) <= 1e-9 * ratio.mean()


@pytest.mark.parametrize("text, value", [
    ("10", 10.0), ("10W/m2", 10.0), ("1mW/cm2", 10.0), ("1 mW/cm^2", 10.0), ("5kW/m2", 5000.0),
    ("2uW/um2", 2e6), ("1e-3 W/cm2", 10.0),
])
def test_irradiance_units(text, value):
    assert parse_irradiance(text) == pytest.approx(value, rel=1e-12)


@pytest.mark.parametrize("text", ["", "abc", "1mJ/cm2", "-5", "0", "inf", "1W/furlong2", "nan mW/cm2"])
def test_irradiance_refused(text):
    with pytest.raises(NanoabsError, match="irradiance"):
        parse_irradiance(text)


def test_cli_contract_form(tmp_path, capsys):
    out = tmp_path / "gen.csv"
    code = main(["export-generation", "--shape", "sphere", "--material", "Au", "--radius", "40", "--medium",
                 "Si", "--irradiance", "1mW/cm2", "--wl", "1310", "-o", str(out)])
    assert code == 0 and out.exists() and out.with_suffix(".json").exists()
    df, meta = nanoabs.read_export(out)
    assert set(df.wavelength_nm) == {1310.0} and (df.generation_rate_cm3_s > 0).all()
    assert meta["metadata"]["irradiance_W_m2"] == pytest.approx(10.0)
    # never overwrite without --force, and a rod is refused with a one-line error
    assert main(["export-generation", "--shape", "sphere", "--material", "Au", "--radius", "40", "--irradiance",
                 "10", "--wl", "1310", "-o", str(out)]) == 2
    assert main(["export-generation", "--shape", "spheroid", "--material", "Au", "--length", "80", "--diameter",
                 "20", "--irradiance", "10", "--wl", "800", "-o", str(tmp_path / "rod.csv")]) == 2
    err = capsys.readouterr().err.strip().splitlines()
    assert all(line.startswith("nanoabs: error:") for line in err[-2:])


def test_responsivity_table_round_trip(tmp_path):
    wl = np.linspace(1200, 1600, 9)
    R = 1e-4 * (1 + 0.1 * np.sin(wl / 50))
    p = responsivity_table(wl, R, tmp_path / "r.csv")
    back = np.loadtxt(p, delimiter=",", skiprows=1)
    np.testing.assert_allclose(back[:, 0], wl)
    np.testing.assert_allclose(back[:, 1], R, rtol=1e-9)
    with pytest.raises(NanoabsError):
        responsivity_table(wl, R * np.nan, tmp_path / "bad.csv")
