"""Particle spectra through the public pipeline: facts of the trade, limits, contract, CLI."""

import json

import numpy as np
import pytest

import nanoabs
from nanoabs import NanoabsError
from nanoabs.cli import main
from nanoabs.optics import FRAME_COLUMNS, spectrum
from nanoabs.particles import Ellipsoid, LayeredSphere, Sphere, spheroid


def test_gold_20nm_sphere_peak_near_520():
    # Common practice (e.g. Link & El-Sayed, J. Phys. Chem. B 103, 4212 (1999), from memory):
    # a 20 nm-diameter gold sphere in water absorbs most near 520 nm. Tolerance +-8 nm.
    s = spectrum(Sphere("Au", 10.0), np.arange(450, 651, 1.0), medium="water")
    assert s.peak_wavelength_nm() == pytest.approx(520, abs=8)


@pytest.mark.parametrize("metal,medium,wl", [("Ag", "water", np.arange(330, 500, 1.0)),
                                             ("Al", "air", np.arange(150, 300, 1.0))])
def test_silver_aluminium_absorb_more_than_geometric(metal, medium, wl):
    # Common practice: small Ag and Al spheres have Q_abs > 1 at the dipole resonance.
    s = spectrum(Sphere(metal, 10.0), wl, medium=medium)
    assert s.q_abs.max() > 1.0


def test_dipole_limit_matches_mie_small_size():
    # Issue check: quasi-static -> Mie as size -> 0: |relative difference| <= 1e-3 at x = 0.01.
    wl = np.array([500.0, 600.0, 700.0])
    n_w = 1.333
    r = 0.01 * wl / (2 * np.pi * n_w)  # x = 0.01 at each wavelength (radius differs per row)
    for ri, w in zip(r, wl):
        kw = dict(medium=n_w, surface_damping=False)
        mie = spectrum(Sphere("Au", ri), [w], method="mie", **kw)
        qs = spectrum(Sphere("Au", ri), [w], method="quasistatic", **kw)
        assert qs.sigma_abs_m2[0] == pytest.approx(mie.sigma_abs_m2[0], rel=1e-3)


def test_mlwa_tracks_mie_better_than_static():
    # Meier & Wokaun (1983): the corrected dipole follows the Mie peak shift with size.
    wl = np.arange(480, 640, 0.5)
    for R in (20.0, 30.0, 40.0):  # up to ~lambda/10 in water in diameter terms
        kw = dict(medium="water", surface_damping=False)
        pk_mie = spectrum(Sphere("Au", R), wl, method="mie", **kw).peak_wavelength_nm()
        pk_qs = spectrum(Sphere("Au", R), wl, method="quasistatic", **kw).peak_wavelength_nm()
        pk_mlwa = spectrum(Sphere("Au", R), wl, method="mlwa", **kw).peak_wavelength_nm()
        assert abs(pk_mlwa - pk_mie) < abs(pk_qs - pk_mie)


def test_mie_vs_miepython_through_pipeline():
    # Reference library: miepython (S. Prahl), homogeneous sphere; <= 1e-8 relative.
    wl = np.arange(400, 901, 25.0)
    a = spectrum(Sphere("Ag", 35.0), wl, method="mie")
    b = spectrum(Sphere("Ag", 35.0), wl, method="miepython")
    np.testing.assert_allclose(a.sigma_ext_m2, b.sigma_ext_m2, rtol=1e-8)
    np.testing.assert_allclose(a.sigma_sca_m2, b.sigma_sca_m2, rtol=1e-8)


def test_layered_same_material_equals_sphere():
    wl = np.arange(400, 801, 20.0)
    kw = dict(medium="water", surface_damping=False)
    a = spectrum(Sphere("Au", 40.0), wl, **kw)
    b = spectrum(LayeredSphere("Au", 25.0, [("Au", 10.0), ("Au", 5.0)]), wl, **kw)
    np.testing.assert_allclose(b.sigma_abs_m2, a.sigma_abs_m2, rtol=1e-10)


def test_multishell_quasistatic_matches_layered_mie_small():
    # Nested equivalent permittivity (B&H eq. 5.36 applied outward) vs layered Mie, tiny particle.
    wl = np.array([550.0, 700.0])
    p = LayeredSphere("SiO2", 1.0, [("Au", 0.5), ("TiO2", 0.3)])
    kw = dict(medium="water", surface_damping=False)
    np.testing.assert_allclose(spectrum(p, wl, method="quasistatic", **kw).sigma_abs_m2,
                               spectrum(p, wl, method="mie", **kw).sigma_abs_m2, rtol=2e-3)


def test_random_orientation_and_efficiency_references():
    wl = np.arange(500, 1101, 5.0)
    rod = spheroid("Au", 60, 20)
    # dipole-limit identity: the corrected quasi-static model, named (k a_max reaches 0.5 at 500 nm,
    # where "auto" would hand the rod to the T-matrix)
    long = spectrum(rod, wl, polarization="long", method="mlwa")
    short = spectrum(rod, wl, polarization="short", method="mlwa")
    rnd = spectrum(rod, wl, polarization="random", method="mlwa")
    # orientation average of a spheroid: (sigma_long + 2 sigma_short)/3 (B&H sec. 5.3)
    np.testing.assert_allclose(rnd.sigma_abs_m2, (long.sigma_abs_m2 + 2 * short.sigma_abs_m2) / 3, rtol=1e-12)
    # random orientation: Q against a quarter of the surface area (Cauchy's theorem)
    from nanoabs.quasistatic import ellipsoid_surface_area

    S = ellipsoid_surface_area(30, 10, 10) * 1e-18
    np.testing.assert_allclose(rnd.q_abs, rnd.sigma_abs_m2 / (S / 4), rtol=1e-12)
    assert "Cauchy" in rnd.metadata["efficiency_reference_area"]
    # long-axis projected area pi a b for light along z
    np.testing.assert_allclose(long.q_abs, long.sigma_abs_m2 / (np.pi * 30 * 10 * 1e-18), rtol=1e-12)
    # equal-volume sphere reference
    rv = (30 * 10 * 10) ** (1 / 3)
    np.testing.assert_allclose(long.q_abs_eqvol, long.sigma_abs_m2 / (np.pi * rv**2 * 1e-18), rtol=1e-12)


def test_frame_contract_and_derived():
    s = spectrum(Sphere("Au", 20.0), np.arange(400, 901, 1.0))
    df = s.to_frame()
    assert list(df.columns[:7]) == ["wavelength_nm", "sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2",
                                    "q_abs", "q_sca", "q_ext"]
    assert list(df.columns) == FRAME_COLUMNS
    np.testing.assert_allclose(df.sigma_ext_m2, df.sigma_abs_m2 + df.sigma_sca_m2, rtol=1e-10)
    np.testing.assert_allclose(df.absorbed_fraction, df.sigma_abs_m2 / df.sigma_ext_m2)
    vol = 4 / 3 * np.pi * (20e-9) ** 3
    np.testing.assert_allclose(df.sigma_abs_per_metal_volume_m_1, df.sigma_abs_m2 / vol)
    lam_med = df.wavelength_nm * 1e-9 / s.n_medium
    np.testing.assert_allclose(df.dipole_bound_ratio, df.sigma_abs_m2 / (3 * lam_med**2 / (8 * np.pi)))
    md = s.metadata
    for key in ("method", "materials", "medium", "surface_damping", "warnings", "package_version"):
        assert key in md
    assert md["surface_damping"][0]["effective_length_nm"] == pytest.approx(4 / 3 * 20)


def test_fwhm_of_lorentzian_like_peak():
    # FWHM on a synthetic Lorentzian: exact 2*gamma within grid resolution.
    from nanoabs.optics import _fwhm

    x = np.linspace(500, 900, 4001)
    y = 1 / (1 + ((x - 700) / 30) ** 2)
    assert _fwhm(x, y) == pytest.approx(60, abs=0.05)


def test_surface_damping_broadens_small_sphere():
    wl = np.arange(450, 650, 1.0)
    on = spectrum(Sphere("Au", 3.0), wl)
    off = spectrum(Sphere("Au", 3.0), wl, surface_damping=False)
    assert on.sigma_abs_m2.max() < off.sigma_abs_m2.max()


def test_dipole_validity_warning():
    s = spectrum(spheroid("Au", 200, 80), np.arange(500, 1500, 10.0), polarization="long", method="mlwa")
    assert any("validity" in w for w in s.metadata["warnings"])
    # "auto" does not use a dipole method outside its validity when the T-matrix accepts the particle
    assert spectrum(spheroid("Au", 200, 80), np.arange(700, 1500, 20.0), polarization="long").metadata[
        "method"] == "tmatrix"


@pytest.mark.parametrize("make,needle", [
    (lambda: Sphere("Au", -5), "radius"),
    (lambda: Sphere("Au", float("nan")), "radius"),
    (lambda: LayeredSphere("SiO2", 50, [("Au", 0.05)]), "monolayer"),
    (lambda: LayeredSphere("SiO2", 50, []), "shell"),
    (lambda: Ellipsoid("Au", (10, 5)), "three"),
    (lambda: Ellipsoid("Au", (10, 5, 0)), "semi-axis c"),
    (lambda: spectrum(Sphere("Au", 10), [500, 400]), "increasing"),
    (lambda: spectrum(Sphere("Au", 10), [100, 200]), "outside"),
    (lambda: spectrum(Sphere("Au", 10), [500], method="fdtd"), "method"),
    (lambda: spectrum(spheroid("Au", 60, 20), [600], polarization="diagonal"), "polarization"),
    (lambda: spectrum(spheroid("Au", 60, 20), [600], method="mie"), "sphere"),
])
def test_bad_inputs(make, needle):
    with pytest.raises(NanoabsError, match=needle):
        make()


CLI_FORMS = [
    "spectrum --shape sphere --material Au --radius 20 --medium water --wl 400:900:1 -o au20.csv",
    "spectrum --shape shell --core SiO2 --core-radius 60 --shell Au --thickness 10 --medium water --wl 400:1200:2 -o shell.csv",
    "spectrum --shape spheroid --material Au --length 60 --diameter 20 --medium water --polarization long --wl 500:1100:2 -o rod.csv",
    "spectrum --shape spheroid --material Au --length 60 --diameter 20 --medium water --polarization random --wl 500:1100:2 -o rod_random.csv",
    "spectrum --shape ellipsoid --material Ag --semi-axes 30,15,10 --medium 1.5 --polarization x --wl 300:900:2 -o ell.csv",
]


@pytest.mark.parametrize("form", CLI_FORMS)
def test_cli_forms_exactly_as_written(form, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(form.split()) == 0
    out = form.split()[-1]
    df, meta = nanoabs.read_export(out)
    assert list(df.columns[:7]) == FRAME_COLUMNS[:7]
    assert meta["metadata"]["method"] in ("mie", "mlwa", "tmatrix")
    assert (tmp_path / out.replace(".csv", ".json")).exists()


def test_cli_json_and_table(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main("spectrum --shape sphere --material Au --radius 20 --wl 400:900:5 -o one.json".split()) == 0
    d = json.loads((tmp_path / "one.json").read_text())
    assert "data" in d and len(d["data"]["wavelength_nm"]) == 101
    capsys.readouterr()
    assert main("spectrum --shape sphere --material Au --radius 20 --wl 400:900:5 --plot p.png".split()) == 0
    out = capsys.readouterr().out
    assert "absorption peak" in out and (tmp_path / "p.png").exists()


@pytest.mark.parametrize("args,needle", [
    ("--shape sphere --material Au --radius -3", "radius"),
    ("--shape sphere --material Au --radius 0", "radius"),
    ("--shape sphere --material Unob --radius 10", "unknown material"),
    ("--shape sphere --material Au --radius 10 --wl 100:900:1", "outside"),
    ("--shape shell --core SiO2 --core-radius 60 --shell Au --thickness 0.01", "monolayer"),
    ("--shape shell --core SiO2 --core-radius 60 --shell Au", "thickness"),
    ("--shape spheroid --material Au --length 60", "diameter"),
    ("--shape spheroid --material Au --length 60 --diameter 20 --polarization x2", "polarization"),
    ("--shape ellipsoid --material Ag --semi-axes 30,15", "three"),
    ("--shape ellipsoid --material Ag --semi-axes 30,a,15", "three numbers"),
    ("--shape sphere --material Au --radius 10 --medium -2", "refractive index"),
    ("--shape cube --material Au", "invalid choice"),
    ("--shape sphere --material Au --radius 10 --wl 900:400:1", "START < STOP"),
])
def test_cli_errors(args, needle, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    code = main(["spectrum"] + args.split() + ["-o", "x.csv"])
    err = capsys.readouterr().err
    assert code == 2 and needle in err and err.count("\n") == 1
    assert not list(tmp_path.iterdir())  # nothing written
