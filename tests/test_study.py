"""Study files and the demo report."""


import numpy as np
import pytest

import nanoabs
from nanoabs.cli import main
from nanoabs.study import demo_study_path, load_study, run_study


def test_demo_report_has_all_files(tmp_path, capsys):
    out = tmp_path / "rep"
    assert main(["demo", "-o", str(out), "--quiet"]) == 0
    names = {p.name for p in out.iterdir()}
    doc = load_study(demo_study_path())
    for p in doc["particle"]:
        from nanoabs.study import _slug

        for suffix in ("_spectrum.csv", "_spectrum.json", "_hot_carriers.csv", "_hot_carriers.json"):
            assert _slug(p["name"]) + suffix in names
    for f in ("summary.md", "spectra.png", "ranked_designs.csv", "ranked_designs.json",
              "emission_probability.png"):
        assert f in names
    assert any(n.endswith("_map.png") for n in names) and any(n.endswith("_sweep.csv") for n in names)
    text = (out / "summary.md").read_text()
    assert "Ranked designs" in text and "Cautions" in text and "laser" in text.lower()
    assert "fictional" in text
    # the optical-constant datasets are cited (Johnson & Christy 1972 for the demo's gold)
    assert "## Data sources" in text and "Johnson and R. W. Christy" in text
    # every CSV reads back through the export reader with its sidecar
    for csv in out.glob("*.csv"):
        df, meta = nanoabs.read_export(csv)
        assert len(df) > 0 and meta["format"] == "nanoabs-export"
    ranked, _ = nanoabs.read_export(out / "ranked_designs.csv")
    assert ranked["figure_of_merit"].is_monotonic_decreasing or len(ranked) > 0
    # never writes into a non-empty folder without --force
    assert main(["demo", "-o", str(out), "--quiet"]) == 2
    assert main(["demo", "-o", str(out), "--quiet", "--force"]) == 0


def test_study_without_search(tmp_path):
    p = tmp_path / "s.toml"
    p.write_text("""
[study]
title = "small"
[medium]
index = 1.33
[wavelengths]
start_nm = 450
stop_nm = 800
step_nm = 5
[illumination]
kind = "laser"
power_W = 0.01
beam_radius_nm = 5e5
[detector]
barrier_eV = 0.7
[[particle]]
name = "Au 20"
shape = "sphere"
material = "Au"
radius_nm = 20
[output]
formats = ["svg"]
""")
    summary = run_study(p, tmp_path / "r", progress=False)
    text = summary.read_text()
    assert "Au 20" in text and (tmp_path / "r" / "spectra.svg").exists()
    df, meta = nanoabs.read_export(tmp_path / "r" / "au_20_hot_carriers.csv")
    # laser: peak irradiance of a Gaussian beam 2P/(pi w^2) at every wavelength
    assert df.irradiance_W_m2.iloc[0] == pytest.approx(  # monochromatic: W/m^2 (export format 2)
        2 * 0.01 / (3.141592653589793 * (5e-4) ** 2))


def test_emission_figure_uses_the_energy_resolved_pipeline(tmp_path, monkeypatch):
    """The emission figure draws, per candidate particle, the hot-carrier pipeline's injected carriers per
    absorbed photon (total and surface part), not the flat escape-cone yield on all absorbed power.

    Source: nanoabs.hot_carrier_estimate for the same particle, spectrum and illumination (rtol 1e-12);
    the flat escape-cone curve (Scales & Berini 2010) must differ from it (issue 13).
    """
    import numpy as np

    import nanoabs.plotting as plotting
    from nanoabs.hotcarriers import FREE_ELECTRON, escape_cone_yield, photon_energy_eV

    captured = []
    real = plotting.plot_curves

    def spy(x, curves, **kw):
        captured.append((np.asarray(x), curves, kw))
        return real(x, curves, **kw)

    monkeypatch.setattr(plotting, "plot_curves", spy)
    p = tmp_path / "s.toml"
    p.write_text("""
[study]
title = "silver and copper"
[medium]
index = 1.5
[wavelengths]
start_nm = 450
stop_nm = 900
step_nm = 10
[illumination]
kind = "flat"
value_W_m2_nm = 1.0
[detector]
barrier_eV = 0.8
[[particle]]
name = "Ag 15"
shape = "sphere"
material = "Ag"
radius_nm = 15
[[particle]]
name = "Cu rod"
shape = "spheroid"
material = "Cu"
length_nm = 60
diameter_nm = 20
""")
    run_study(p, tmp_path / "rep", progress=False)
    assert (tmp_path / "rep" / "emission_probability.png").exists()
    emission = [c for c in captured if "photoemission" in c[2].get("title", "")]
    assert len(emission) == 1
    wl, curves, _ = emission[0]
    labels = [name for name, _ in curves]
    particles = {"Ag 15": (nanoabs.Sphere("Ag", 15.0), "x"),
                 "Cu rod": (nanoabs.spheroid("Cu", length_nm=60, diameter_nm=20), "long")}
    for name, (particle, pol) in particles.items():
        spec = nanoabs.spectrum(particle, wl, medium=1.5, polarization=pol)
        res = nanoabs.hot_carrier_estimate(spec, particle, nanoabs.illumination.flat(1.0), barrier_eV=0.8)
        f = res.frame
        gamma = f["absorbed_photon_rate_per_s"].to_numpy()
        ok = gamma > 0
        (y,) = [y for n, y in curves if n == f"{name}: volume + surface"]
        (ys,) = [y for n, y in curves if n == f"{name}: surface"]
        np.testing.assert_allclose(y[ok], f["injected_electron_rate_per_s"].to_numpy()[ok] / gamma[ok], rtol=1e-12)
        np.testing.assert_allclose(ys[ok], f["injected_electron_rate_surface_per_s"].to_numpy()[ok] / gamma[ok],
                                   rtol=1e-12)
        metal = particle.layer_materials()[-1].name
        flat = escape_cone_yield(photon_energy_eV(wl), 0.8, FREE_ELECTRON[metal].fermi_energy_eV)
        assert not np.allclose(y[ok], flat[ok], rtol=0.1)
    assert not any("Au" in n for n in labels)


_SMALL = """
study = {title = "names"}
medium = {index = 1.33}
wavelengths = {start_nm = 450, stop_nm = 800, step_nm = 10}
illumination = {kind = "flat", value_W_m2_nm = 1.0}
detector = {barrier_eV = 0.8}
output = {figures = false}
"""


def test_report_names_are_unique_by_construction(tmp_path):
    # Source: contract. Names that slug to the same 40 characters get suffixes; no file is overwritten.
    long = "Gold sphere of the Marrowfield Photonics Lab, batch"
    text = _SMALL + "".join(f'[[particle]]\nname = "{long} {k}"\nshape = "sphere"\nmaterial = "Au"\n'
                            f"radius_nm = {r}\n" for k, r in (("A", 10), ("B", 20)))
    text += (f'[[sweep]]\nname = "{long} C"\nshape = "sphere"\nparameter = "radius_nm"\nvalues_nm = [10, 20]\n')
    p = tmp_path / "s.toml"
    p.write_text(text)
    run_study(p, tmp_path / "rep", progress=False)
    stem = "gold_sphere_of_the_marrowfield_photonics"
    a, _ = nanoabs.read_export(tmp_path / "rep" / f"{stem}_spectrum.csv")
    b, _ = nanoabs.read_export(tmp_path / "rep" / f"{stem}_2_spectrum.csv")
    assert (tmp_path / "rep" / f"{stem}_3_sweep.csv").exists()
    s10 = nanoabs.spectrum(nanoabs.Sphere("Au", 10.0), np.arange(450, 801, 10.0), medium=1.33)
    np.testing.assert_allclose(a.sigma_abs_m2, s10.sigma_abs_m2, rtol=1e-14)
    assert b.sigma_abs_m2.max() > 2 * a.sigma_abs_m2.max()


def test_shell_sweep_runs_and_matches_the_single_particle(tmp_path):
    # Source: nanoabs.spectrum of the layered sphere built directly; rtol 1e-12 (CSV round trip).
    p = tmp_path / "s.toml"
    p.write_text(_SMALL + '[[sweep]]\nname = "shells"\nshape = "shell"\nparameter = "thickness_nm"\n'
                          'values_nm = [5, 10]\ncore = "SiO2"\nshell = "Au"\ncore_radius_nm = 40\n')
    run_study(p, tmp_path / "rep", progress=False)
    df, meta = nanoabs.read_export(tmp_path / "rep" / "shells_sweep.csv")
    s = nanoabs.spectrum(nanoabs.LayeredSphere("SiO2", 40.0, [("Au", 10.0)]), np.arange(450, 801, 10.0),
                         medium=1.33)
    np.testing.assert_allclose(df[df.thickness_nm == 10].sigma_abs_m2, s.sigma_abs_m2, rtol=1e-12)
    assert "thickness_nm from 5 to 10 nm" in (tmp_path / "rep" / "summary.md").read_text()


def test_failure_while_computing_leaves_no_report(tmp_path, monkeypatch):
    # Source: contract. An error in the middle (after the particles were computed) leaves the
    # output folder as it was, so the next run is not refused for a half-written folder.
    import nanoabs.design as design

    def broken(*a, **k):
        raise RuntimeError("boom")

    p = tmp_path / "s.toml"
    p.write_text(_SMALL + '[[particle]]\nname = "p"\nshape = "sphere"\nmaterial = "Au"\nradius_nm = 20\n'
                          "[search]\nband_nm = [600, 700]\n")
    monkeypatch.setattr(design, "search", broken)
    with pytest.raises(RuntimeError):
        run_study(p, tmp_path / "rep", progress=False)
    assert sorted(x.name for x in tmp_path.iterdir()) == ["s.toml"]


def test_second_run_into_a_locked_folder_is_refused(tmp_path):
    # Source: contract. A report folder being written by another process is refused at once.
    from nanoabs.export import exclusive_lock

    p = tmp_path / "s.toml"
    p.write_text(_SMALL + '[[particle]]\nname = "p"\nshape = "sphere"\nmaterial = "Au"\nradius_nm = 20\n')
    with exclusive_lock(tmp_path / "rep"):
        with pytest.raises(nanoabs.NanoabsError, match="being written by another"):
            run_study(p, tmp_path / "rep", progress=False)
    (tmp_path / ".rep.x1.partial").mkdir()  # left by a killed run
    run_study(p, tmp_path / "rep", progress=False)
    assert (tmp_path / "rep" / "summary.md").exists()
    assert sorted(x.name for x in tmp_path.iterdir()) == ["rep", "s.toml"]


def test_large_study_sweep_is_reduced_from_the_streamed_file(tmp_path, monkeypatch):
    # Source: an in-memory design.sweep of the same designs (peaks exact on the grid). The study
    # sweep is streamed (never returned as a frame) and its map keeps at most _MAP_ROWS designs.
    import nanoabs.study as study

    monkeypatch.setattr(study, "_MAP_ROWS", 7)
    values = [float(v) for v in np.linspace(60.0, 10.0, 30)]  # descending on purpose
    p = tmp_path / "s.toml"
    p.write_text(_SMALL.replace("figures = false", "figures = true") +
                 '[[sweep]]\nname = "r"\nshape = "sphere"\nparameter = "radius_nm"\n'
                 f"values_nm = {values}\n")
    run_study(p, tmp_path / "rep", progress=False)
    wl = np.arange(450, 801, 10.0)
    ref = nanoabs.design.sweep("sphere", {"radius_nm": values}, wl, medium=1.33, progress=False)
    v, peaks, fom, map_vals, grid, step = study._sweep_reduced(tmp_path / "rep" / "r_sweep.csv", "radius_nm",
                                                               30, wl, None)
    sig = ref.sigma_abs_m2.to_numpy().reshape(30, wl.size)[::-1]
    np.testing.assert_array_equal(v, np.sort(values))
    np.testing.assert_array_equal(peaks, wl[np.argmax(sig, axis=1)])
    assert step == 5 and grid.shape == (6, wl.size) and np.all(np.diff(map_vals) > 0)
    assert (tmp_path / "rep" / "r_map.png").exists()


def test_study_with_the_t_matrix_shapes(tmp_path):
    # The T-matrix bodies go through study particles (spectrum + hot carriers) and study sweeps; the
    # sweep rows equal single spectra computed directly (nanoabs.spectrum, method tmatrix; rtol 1e-12).
    import numpy as np

    p = tmp_path / "s.toml"
    p.write_text("""
[study]
title = "new shapes"
[medium]
name = "water"
[wavelengths]
start_nm = 500
stop_nm = 900
step_nm = 50
[illumination]
kind = "monochromatic"
irradiance_W_m2 = 10
[detector]
barrier_eV = 0.8
[[particle]]
name = "capped rod"
shape = "capped-rod"
material = "Au"
length_nm = 80
diameter_nm = 30
[[sweep]]
name = "cylinders"
shape = "cylinder"
material = "Au"
parameter = "length_nm"
values_nm = [60, 80]
diameter_nm = 40
polarization = "long"
[output]
figures = false
""")
    assert main(["run", str(p), "-o", str(tmp_path / "r"), "--quiet"]) == 0
    df, _ = nanoabs.read_export(tmp_path / "r" / "cylinders_sweep.csv")
    wl = np.arange(500.0, 901.0, 50.0)
    s = nanoabs.spectrum(nanoabs.Cylinder("Au", 80.0, 40.0), wl, medium="water", polarization="long",
                         method="tmatrix")
    np.testing.assert_allclose(df[df.length_nm == 80].sigma_abs_m2.to_numpy(), s.sigma_abs_m2, rtol=1e-12)
    text = (tmp_path / "r" / "summary.md").read_text()
    assert "| capped rod | tmatrix |" in text


def test_study_detector_surface_and_thermal_keys(tmp_path):
    # Contract: detector.surface_emission, fermi_smearing and temperature_K reach the hot-carrier estimate
    # (recorded in its sidecar); "cone" leaves no surface rate; a non-boolean fermi_smearing is refused.
    text = _SMALL.replace("detector = {barrier_eV = 0.8}",
                          'detector = {barrier_eV = 0.8, surface_emission = "cone", fermi_smearing = true, '
                          "temperature_K = 250}")
    text += '[[particle]]\nname = "Au 10"\nshape = "sphere"\nmaterial = "Au"\nradius_nm = 10\n'
    p = tmp_path / "s.toml"
    p.write_text(text)
    run_study(p, tmp_path / "rep", progress=False)
    df, meta = nanoabs.read_export(tmp_path / "rep" / "au_10_hot_carriers.csv")
    sch = meta["metadata"]["schottky"]
    assert sch["surface_emission"] == "cone" and sch["fermi_smearing"] is True
    assert sch["temperature_K"] == 250
    surf = [c for c in df.columns if c.startswith("injected_electron_rate_surface")]
    assert surf and np.all(df[surf[0]] == 0)
    bad = tmp_path / "bad.toml"
    bad.write_text(text.replace("fermi_smearing = true", 'fermi_smearing = "yes"'))
    with pytest.raises(Exception, match="fermi_smearing"):
        load_study(bad)


def test_study_carrier_follows_the_contact_doping():
    # Source: contract (issue 13): a p-type pair passes holes, an n-type pair electrons; with a bare
    # barrier the study file may name the carrier; naming both is refused.
    from nanoabs.study import DataError, _carrier

    assert _carrier({"detector": {"schottky": "Au/p-Si"}}) == "hole"
    assert _carrier({"detector": {"schottky": "Au/Si"}}) == "electron"
    assert _carrier({"detector": {"barrier_eV": 0.3, "carrier": "hole"}}) == "hole"
    assert _carrier({"detector": {"barrier_eV": 0.8}}) == "electron"
    for det in ({"schottky": "Au/p-Si", "carrier": "hole"}, {"barrier_eV": 0.3, "carrier": "ion"}):
        with pytest.raises(DataError, match="carrier"):
            _carrier({"detector": det})
