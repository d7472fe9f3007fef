"""Hot-carrier pipeline: absorbed power, partition, transport, array quantities, export contract."""

import numpy as np
import pytest
from scipy import constants as c

import nanoabs
from nanoabs import NanoabsError, Sphere, hot_carrier_estimate, illumination as il, spectrum, spheroid
from nanoabs.cli import main
from nanoabs.detector import ARRAY_COLUMNS, EXPORT_COLUMNS


def _run(p, wl, src, **kw):
    s = spectrum(p, wl, medium=kw.pop("medium", "water"))
    return s, hot_carrier_estimate(s, p, src, **kw)


def test_power_and_photon_rate_identities():
    wl = np.arange(500, 1001, 10.0)
    s, r = _run(Sphere("Au", 20), wl, il.monochromatic(1e4), barrier_eV=0.8)
    f = r.frame
    np.testing.assert_allclose(f.absorbed_power_W, s.sigma_abs_m2 * 1e4, rtol=1e-12)
    # Gamma = P lambda / (h c), CODATA constants
    np.testing.assert_allclose(f.absorbed_photon_rate_per_s, f.absorbed_power_W * wl * 1e-9 / (c.h * c.c),
                               rtol=1e-12)
    np.testing.assert_allclose(f.photocurrent_A, c.e * f.injected_electron_rate_per_s, rtol=1e-12)
    np.testing.assert_allclose(f.injected_electron_rate_per_s,
                               f.absorbed_photon_rate_per_s * f.emission_probability * f.transport_factor,
                               rtol=1e-12)
    assert list(f.columns[:9]) == EXPORT_COLUMNS


def test_mechanism_partition_sums_to_total():
    wl = np.arange(450, 1201, 10.0)
    _, r = _run(Sphere("Au", 8), wl, il.solar("am1.5g"), barrier_eV=0.7)
    f = r.frame
    parts = f.power_interband_W + f.power_intraband_bulk_W + f.power_intraband_surface_W
    np.testing.assert_allclose(parts, f.absorbed_power_W, rtol=1e-10)
    # interband dominates below ~500 nm in gold, intraband in the infrared (common practice)
    assert f.power_interband_W.iloc[0] > f.power_intraband_bulk_W.iloc[0]
    assert f.power_interband_W.iloc[-1] < f.power_intraband_bulk_W.iloc[-1] + f.power_intraband_surface_W.iloc[-1]


def test_emission_zero_below_barrier_and_transport_limits():
    wl = np.arange(600, 1921, 20.0)
    p = Sphere("Au", 15)
    s = spectrum(p, wl, medium="water")
    r = hot_carrier_estimate(s, p, il.monochromatic(1e3), barrier_eV=0.9)
    hv = c.h * c.c / (wl * 1e-9) / c.e
    assert np.all(r.frame.emission_probability[hv <= 0.9] == 0)
    # transport -> 1 for very long attenuation length, smaller for short ones
    long = hot_carrier_estimate(s, p, il.monochromatic(1e3), barrier_eV=0.9, attenuation_length_nm=1e7)
    short = hot_carrier_estimate(s, p, il.monochromatic(1e3), barrier_eV=0.9, attenuation_length_nm=2.0)
    np.testing.assert_allclose(long.frame.transport_factor, 1.0, rtol=1e-5)
    assert np.all(short.frame.transport_factor < 0.6)


def test_flat_geometry_small_sphere_matches_uniform_closed_form():
    # geometry="flat" keeps the straight-radial-path model: for a small sphere the absorption profile is
    # uniform (quasi-static), so the transport factor equals the closed-form volume average of exp(-(R-r)/l)
    # (nanoabs.hotcarriers.transport_factor_uniform); 2e-3 (midpoint rule over 96 radii).
    from nanoabs.hotcarriers import transport_factor_uniform

    p = Sphere("Au", 3.0)
    s = spectrum(p, [800.0], medium="water")
    r = hot_carrier_estimate(s, p, il.monochromatic(1.0), barrier_eV=0.5, attenuation_length_nm=2.0,
                             geometry="flat", surface_emission="cone")
    assert r.frame.transport_factor[0] == pytest.approx(transport_factor_uniform(3.0, 2.0), rel=2e-3)


def test_curved_sphere_yield_matches_chord_integral():
    # Independent reference (written here with scipy quad): for a uniform isotropic source in a sphere of radius
    # R, the carriers crossing the wall inside the escape cone are (3/(2R)) int_c^1 mu K(2 R mu) dmu per
    # generated carrier, K(s) = l (1 - exp(-s/l)) (chord 2 R mu behind a wall point at incidence mu; ray-counting
    # identity, Case & Zweifel 1967 ch. 2); c = sqrt((E_F+phi)/(E_F+E)) (free-electron escape cone, Scales &
    # Berini 2010). Au at 800 nm (1.55 eV, below the 2 eV d-band edge) makes flat distributions over [0, hv] in
    # every channel, so eta = (1/hv) int_phi^hv P(E) dE. Small sphere (R = 3 nm): uniform Mie profile. 3e-3.
    from scipy.integrate import quad

    R, ell, phi, ef = 3.0, 2.0, 0.5, 5.53
    p = Sphere("Au", R)
    s = spectrum(p, [800.0], medium="water")
    r = hot_carrier_estimate(s, p, il.monochromatic(1.0), barrier_eV=phi, attenuation_length_nm=ell,
                             surface_emission="cone")  # the escape-cone model alone
    hv = c.h * c.c / (800e-9 * c.e)

    def P(E, L):
        cc = np.sqrt((ef + phi) / (ef + E))
        k = (lambda mu: mu * L * -np.expm1(-2 * R * mu / L)) if np.isfinite(L) else (lambda mu: 2 * R * mu * mu)
        return 1.5 / R * quad(k, cc, 1.0)[0]

    eta_inf = quad(lambda E: P(E, np.inf), phi, hv)[0] / hv
    eta_ell = quad(lambda E: P(E, ell), phi, hv)[0] / hv
    assert r.frame.emission_probability[0] == pytest.approx(eta_inf, rel=3e-3)
    assert r.frame.transport_factor[0] == pytest.approx(eta_ell / eta_inf, rel=3e-3)


def test_array_quantities_and_warning():
    wl = np.arange(400, 1601, 10.0)
    rod = spheroid("Au", 80, 20)
    s = spectrum(rod, wl, medium=1.45, polarization="long")
    r = hot_carrier_estimate(s, rod, il.solar("am1.5g"), barrier_eV=0.8, density_per_um2=20)
    f = r.frame
    assert list(f.columns[9:13]) == ARRAY_COLUMNS
    np.testing.assert_allclose(f.absorptance, 20e12 * f.sigma_abs_m2, rtol=1e-12)
    np.testing.assert_allclose(f.photocurrent_density_A_m2, 20e12 * f.photocurrent_A, rtol=1e-12)
    ok = f.irradiance_W_m2_nm > 0
    np.testing.assert_allclose(f.external_quantum_efficiency[ok],
                               f.responsivity_A_W[ok] * c.h * c.c / (c.e * wl[ok] * 1e-9), rtol=1e-10)
    assert any("coupling" in w for w in r.metadata["warnings"])
    assert r.totals["photocurrent_A"] == pytest.approx(np.trapezoid(f.photocurrent_A, wl), rel=1e-12)


def test_temperature_rise_formula():
    # Govorov & Richardson (2007): Delta T = P/(4 pi kappa R), kappa(water) = 0.6 W/(m K).
    p = Sphere("Au", 20)
    s, r = _run(p, np.arange(500, 560, 5.0), il.monochromatic(1e8), barrier_eV=0.8)
    P = r.totals["peak_absorbed_power_W"]
    assert r.totals["temperature_rise_K"] == pytest.approx(P / (4 * np.pi * 0.6 * 20e-9), rel=1e-9)
    assert "laser" in r.metadata["safety_caution"].lower()


def test_bad_detector_inputs():
    p = Sphere("Au", 20)
    s = spectrum(p, np.arange(500, 1001, 10.0))
    with pytest.raises(NanoabsError, match="barrier"):
        hot_carrier_estimate(s, p, il.monochromatic(1.0), barrier_eV=-0.1)
    # beyond the cut-off the result is zero with a warning (issue 13; it used to be an error)
    r = hot_carrier_estimate(s, p, il.monochromatic(1.0), barrier_eV=3.0)
    assert np.all(r.frame.injected_electron_rate_per_s == 0)
    assert any("cut-off" in w for w in r.metadata["warnings"])
    with pytest.raises(NanoabsError, match="contact fraction"):
        hot_carrier_estimate(s, p, il.monochromatic(1.0), barrier_eV=0.8, contact_fraction=2)
    q = Sphere("SiO2", 20)
    with pytest.raises(NanoabsError, match="no metal"):
        hot_carrier_estimate(spectrum(q, [600.0]), q, il.monochromatic(1.0), barrier_eV=0.8)


CLI = [
    "hot-carriers --shape sphere --material Au --radius 20 --medium water --barrier 0.8 --irradiance 1e4 --wl 500:1500:5 -o det.csv",
    "hot-carriers --shape spheroid --material Au --length 80 --diameter 20 --medium 1.45 --polarization long --schottky Au/Si --spectrum am1.5g --density 20 --wl 400:1600:5 -o rods.csv",
]


@pytest.mark.parametrize("form", CLI)
def test_cli_forms_and_round_trip(form, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(form.split()) == 0
    out = capsys.readouterr().out
    assert "caution" in out and ("photocurrent" in out)
    name = form.split()[-1]
    df, meta = nanoabs.read_export(name)
    # export format 2: the exported names say what the numbers are (per-nm densities under broadband
    # light, W/m^2 for a monochromatic irradiance); the sidecar maps them back to the Python names
    back = meta["metadata"].get("column_names_in_python", {})
    assert [back.get(c, c) for c in df.columns[:9]] == EXPORT_COLUMNS
    units = {c["name"]: c["unit"] for c in meta["columns"]}
    for c, u in units.items():
        assert c.endswith("_per_nm") == u.endswith("nm^-1"), (c, u)
    if "spectrum" in form:
        assert "absorbed_power_W_per_nm" in df.columns and "photocurrent_A_per_nm" in df.columns
        assert "irradiance_W_m2_per_nm" in df.columns
    else:
        assert "irradiance_W_m2" in df.columns and units["irradiance_W_m2"] == "W m^-2"
    md = meta["metadata"]
    for key in ("illumination", "schottky", "methods", "materials", "totals", "package_version"):
        assert key in md
    units = {c["name"]: c["unit"] for c in meta["columns"]}
    assert units["sigma_abs_m2"] == "m^2" and units["wavelength_nm"] == "nm"
    # never overwrite without --force; nothing changes
    before = (tmp_path / name).read_bytes()
    assert main(form.split()) == 2
    assert (tmp_path / name).read_bytes() == before
    assert main(form.split() + ["--force"]) == 0


@pytest.mark.parametrize("extra,needle", [
    ("--barrier 0.8", "illumination"),
    ("--barrier 0.8 --irradiance -5", "irradiance"),
    ("--irradiance 1e4", "barrier"),
    ("--schottky Au/Unob --irradiance 1e4", "Au/Si"),
    ("--barrier 0.8 --laser-power 0.01", "beam-radius"),
    ("--barrier 0.8 --spectrum blackbody:hot", "blackbody"),
    ("--barrier 0.8 --spectrum missing.csv", "missing.csv"),
    ("--barrier 0.8 --irradiance 1e4 --density -1", "density"),
    ("--barrier 0.8 --irradiance 1e4 --density 5 --area 100", "--schottky"),
    ("--schottky Au/p-Si --irradiance 1e4 --area 100", "density"),
    ("--barrier 0.3 --carrier positron --irradiance 1e4", "carrier"),
])
def test_cli_errors(extra, needle, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    base = "hot-carriers --shape sphere --material Au --radius 20 --wl 500:1500:5 -o o.csv "
    code = main((base + extra).split())
    err = capsys.readouterr().err
    assert code in (2, 3) and needle in err and err.count("\n") == 1, err
    assert not (tmp_path / "o.csv").exists()


@pytest.mark.parametrize("particle", [Sphere("Au", 40.0), nanoabs.LayeredSphere("SiO2", 40.0, [("Au", 8.0)])],
                         ids=["sphere", "shell"])
def test_absorption_profile_integrates_to_sigma_times_irradiance(particle):
    # Poynting's theorem: the volume integral of the absorbed power density equals sigma_abs * I0
    # (to 1e-6 relative, Gauss-Legendre quadrature per layer).
    from nanoabs.detector import absorbed_power_density

    wl = np.array([550.0, 700.0, 900.0])
    s = spectrum(particle, wl, medium="water")
    total = np.zeros(wl.size)
    r_edges = [0.0] + [float(r) for _, r in particle.layers]
    xg, wg = np.polynomial.legendre.leggauss(200)
    for a, b in zip(r_edges[:-1], r_edges[1:]):
        r = 0.5 * (b - a) * xg + 0.5 * (b + a)
        p = absorbed_power_density(s, particle, r, 1e3)
        total += 0.5 * (b - a) * np.sum(wg * p * 4 * np.pi * (r * 1e-9) ** 2, axis=1) * 1e-9
    np.testing.assert_allclose(total, s.sigma_abs_m2 * 1e3, rtol=1e-6)


def test_absorption_profile_uniform_in_small_sphere():
    # Quasi-static limit: uniform internal field, so the profile is flat (relative variation < 1e-3).
    from nanoabs.detector import absorbed_power_density

    p = Sphere("Au", 1.0)
    s = spectrum(p, [600.0], medium="water", surface_damping=False)
    prof = absorbed_power_density(s, p, np.linspace(0.05, 1.0, 20))[0]
    assert np.ptp(prof) / prof.mean() < 1e-3


CONTRACT = [
    "hot-carriers --shape sphere --material Au --radius 20 --medium 1.45 --schottky Au/Si --spectrum am1.5g "
    "--density 20 --wl 400:1600:5 -o au_n.csv",
    "hot-carriers --shape spheroid --material Au --length 100 --diameter 30 --medium Si --polarization long "
    "--schottky Au/p-Si --irradiance 10 --density 20 --area 1e4 --temperature 300 --bias -1 --wl 1200:1700:5 "
    "-o au_p.csv",
    "hot-carriers --shape sphere --material Pt --radius 15 --medium Si --schottky PtSi/p-Si --irradiance 10 "
    "--density 50 --area 1e4 --temperature 77 --wl 1500:5000:10 -o ptsi.csv",
]


@pytest.mark.parametrize("form", CONTRACT, ids=["au_n", "au_p", "ptsi"])
def test_issue13_contract_forms(form, tmp_path, monkeypatch, capsys):
    # Contract of issue 13 (must work as written): carrier named in the columns, channel split sums to the total,
    # cut-off in the sidecar, device columns with an area.
    monkeypatch.chdir(tmp_path)
    assert main(form.split()) == 0
    df, meta = nanoabs.read_export(form.split()[-1])
    md = meta["metadata"]
    df = df.rename(columns=md.get("column_names_in_python", {}))  # export-format-2 names back to Python's
    carrier = "hole" if "p-Si" in form else "electron"
    total = df[f"injected_{carrier}_rate_per_s"]
    parts = sum(df[f"injected_{carrier}_rate_{k}_per_s"] for k in ("intraband_bulk", "intraband_surface", "interband"))
    np.testing.assert_allclose(parts, total, rtol=1e-9, atol=1e-30)
    split = sum(df[f"injected_{carrier}_rate_{k}_per_s"] for k in ("volume", "surface"))
    np.testing.assert_allclose(split, total, rtol=1e-9, atol=1e-30)  # volume + surface emission
    lam_c = md["cutoff_wavelength_nm"]
    assert np.all(total[df.wavelength_nm > lam_c] == 0)
    if "--area" in form:
        assert md["totals"]["dark_current_A"] >= 0 and md["totals"]["saturation_current_A"] > 0
        assert {"noise_equivalent_power_W_Hz05", "specific_detectivity_Jones"} <= set(df.columns)
        ok = df.responsivity_A_W > 0
        np.testing.assert_allclose(df.specific_detectivity_Jones[ok],
                                   np.sqrt(1e-4) / df.noise_equivalent_power_W_Hz05[ok], rtol=1e-9)
    if "PtSi" in form:
        # PtSi/p-Si cut-off near 5.6 um at 77 K (Shepherd, Proc. SPIE 1980s; from memory): 10 %
        assert lam_c == pytest.approx(5600, rel=0.10)


def test_au_n_si_responsivity_sanity_range():
    # Common practice (from memory): Au/n-Si internal-photoemission nanoantenna devices reach responsivities of
    # order 0.01-1 mA/W at 1200-1550 nm. A gold rod resonant near 1300 nm at 20 rods/um^2 in Si: the model's
    # responsivity in that band should fall in 0.001-10 mA/W (a decade of slack either side).
    rod = spheroid("Au", 100, 40)
    wl = np.arange(1200, 1551, 25.0)
    s = spectrum(rod, wl, medium="Si", polarization="long")
    r = hot_carrier_estimate(s, rod, il.monochromatic(10.0), contact="Au/Si", density_per_um2=5)
    resp = r.frame.responsivity_A_W[wl < r.totals["cutoff_wavelength_nm"]] * 1e3
    assert np.all((resp > 1e-3) & (resp < 10)), resp.values


def test_band_edges_cut_gold_injection_under_sunlight():
    # Issue 13: applying the escape cone to all absorbed power overstates the AM1.5G injection of a 20 nm gold
    # sphere over an n-type 0.8 eV barrier by several times, because interband electrons lie within hv - 2 eV of
    # E_F. With the same geometry, the band-edge generation must give at most half the all-flat value, and the
    # interband channel must inject less than its share of absorbed power.
    p = Sphere("Au", 20)
    wl = np.arange(400, 1601, 10.0)
    s = spectrum(p, wl, medium=1.45)
    sun = il.solar("am1.5g")
    edges = hot_carrier_estimate(s, p, sun, contact="Au/Si")
    flat = hot_carrier_estimate(s, p, sun, contact="Au/Si", generation="flat")
    t = edges.totals
    assert t["injected_electron_rate_per_s"] < 0.5 * flat.totals["injected_electron_rate_per_s"]
    share_abs = t["absorbed_power_interband_W"] / t["absorbed_power_W"]
    share_inj = t["injected_electron_rate_interband_per_s"] / t["injected_electron_rate_per_s"]
    assert share_inj < 0.5 * share_abs


def test_p_type_contact_names_holes_and_plot(tmp_path):
    from nanoabs.plotting import plot_detector

    p = Sphere("Au", 20)
    wl = np.arange(1200, 1701, 50.0)
    s = spectrum(p, wl, medium="Si")
    r = hot_carrier_estimate(s, p, il.monochromatic(10.0), contact="Au/p-Si", density_per_um2=20, area_um2=1e4)
    assert "injected_hole_rate_per_s" in r.frame and "injected_electron_rate_per_s" not in r.frame
    assert r.metadata["schottky"]["carrier"] == "hole"
    ax = plot_detector(r)
    assert ax.get_xlabel() == "wavelength [nm]" and len(ax.figure.axes) == 2
    with pytest.raises(NanoabsError, match="contact"):
        hot_carrier_estimate(s, p, il.monochromatic(10.0), barrier_eV=0.3, density_per_um2=20, area_um2=1e4)


def test_cutoff_warnings_beyond_and_near():
    # Issue 13: beyond hc/phi_B the result is zero with a warning; a band ending near the cut-off is flagged too
    # (our threshold: within max(0.1 eV, 10 % of phi) of the barrier).
    p = Sphere("Au", 20)
    s = spectrum(p, np.arange(1200, 1541, 20.0), medium="Si")
    r = hot_carrier_estimate(s, p, il.monochromatic(10.0), barrier_eV=0.8)  # cut-off 1550 nm
    assert r.totals["cutoff_wavelength_nm"] == pytest.approx(1239.84198 / 0.8, rel=1e-8)  # hc, CODATA 2018
    assert any("long-wavelength end" in w for w in r.metadata["warnings"])
    assert not any("beyond the cut-off" in w for w in r.metadata["warnings"])
    r2 = hot_carrier_estimate(s, p, il.monochromatic(10.0), barrier_eV=1.0)  # cut-off 1240 nm
    assert any("beyond the cut-off" in w for w in r2.metadata["warnings"])
    assert np.all(r2.frame.injected_electron_rate_per_s[s.wavelength_nm > 1239.84198] == 0)


def test_metal_without_fit_gets_flat_carriers():
    # Without a Drude-Lorentz model there is no mechanism partition: all absorbed power gets the flat
    # (intraband) distributions, so band-edge and flat generation agree (1e-12) and the channel columns are NaN.
    from nanoabs import material

    p = Sphere(material("Au", "rakic-1998-ld"), 20)
    s = spectrum(p, np.arange(450, 901, 50.0), medium="water", surface_damping=False)
    a = hot_carrier_estimate(s, p, il.monochromatic(1.0), barrier_eV=0.8)
    b = hot_carrier_estimate(s, p, il.monochromatic(1.0), barrier_eV=0.8, generation="flat")
    np.testing.assert_allclose(a.frame.injected_electron_rate_per_s, b.frame.injected_electron_rate_per_s, rtol=1e-12)
    assert a.frame.injected_electron_rate_interband_per_s.isna().all()
    assert any("partition not available" in n for n in a.metadata["notes"])


@pytest.mark.parametrize("kw,needle", [
    ({"bias_V": float("nan")}, "bias"), ({"temperature_K": 0.0}, "temperature"), ({"doping_cm3": -1.0}, "doping"),
    ({"area_um2": -5.0}, "area"), ({"load_ohm": 0.0}, "load"), ({"geometry": "cube"}, "geometry"),
    ({"generation": "magic"}, "generation"), ({"contact": "Au/InP"}, "Au/Si"),
])
def test_device_input_errors(kw, needle):
    # Bad device inputs raise one-line NanoabsErrors naming the parameter (house rule).
    p = Sphere("Au", 20)
    s = spectrum(p, np.arange(1200, 1301, 50.0), medium="Si")
    args = {"contact": "Au/p-Si", "density_per_um2": 5.0, "area_um2": 100.0, **kw}
    with pytest.raises(NanoabsError) as e:
        hot_carrier_estimate(s, p, il.monochromatic(10.0), **args)
    assert needle in str(e.value) and "\n" not in str(e.value)


def test_plausibility_warnings_for_a_mismatched_contact():
    # Contract (reliability issue): a Schottky pair whose metal is not the particle's, or whose
    # semiconductor is not the host, is flagged; a matching pair is not.
    wl = np.array([1300.0, 1400.0])
    ag = Sphere("Ag", 20.0)
    res = hot_carrier_estimate(spectrum(ag, wl, medium="water"), ag, il.monochromatic(10.0), contact="Au/Si")
    text = " ".join(res.metadata["warnings"])
    assert "particle's metal is Ag" in text and "sits in or on H2O" in text
    au = Sphere("Au", 20.0)
    ok = hot_carrier_estimate(spectrum(au, wl, medium="Si"), au, il.monochromatic(10.0), contact="Au/Si")
    assert not any("Schottky pair" in w for w in ok.metadata["warnings"])


def test_cli_checks_every_output_before_work(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main("spectrum --shape sphere --material Au --radius 20 --wl 500:600:10 -o x.csv --plot x.jpg".split()) == 2
    assert not (tmp_path / "x.csv").exists()  # the bad plot path is refused before the CSV is written
    assert main("hot-carriers --shape sphere --material Au --radius 20 --wl 500:600:10 --barrier 0.8 "
                "--irradiance 10 --total-irradiance 5".split()) == 2
    assert "--total-irradiance" in capsys.readouterr().err
