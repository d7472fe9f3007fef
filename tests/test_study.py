"""Study files and the demo report."""


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
    assert df.irradiance_W_m2_nm.iloc[0] == pytest.approx(2 * 0.01 / (3.141592653589793 * (5e-4) ** 2))


def test_emission_figure_uses_each_metals_fermi_energy(tmp_path, monkeypatch):
    """The yield figure is drawn with the Fermi energy of the study's own metals.

    E_F values: free-electron table in nanoabs.hotcarriers (Ashcroft & Mermin 1976, Table 2.1, from
    memory);
    the curves must equal escape_cone_yield / fowler_yield evaluated with them.
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
    for metal in ("Ag", "Cu"):
        ef = FREE_ELECTRON[metal].fermi_energy_eV
        (name, y), = [(n, y) for n, y in curves if n.startswith("escape-cone") and f"{metal}," in n]
        assert f"E_F = {ef:g} eV" in name
        np.testing.assert_allclose(y, escape_cone_yield(photon_energy_eV(wl), 0.8, ef), rtol=1e-12)
    assert not any("Au" in n for n in labels)
