"""Device environments through the command line and the hot-carrier estimate: the contract forms of
the substrate issue run as written, the field factor reaches the export, and the external and
internal responsivities are named and related by the drive irradiance.

References: the export reproduces nanoabs.spectrum with the same environment (exact); the internal
responsivity is the external one divided by |E_drive/E_inc|^2 n_host/n_inc (definition of the drive
irradiance, Born & Wolf ch. 1: I = n |E|^2 / (2 Z0)); a homogeneous host has field factor 1.
"""

import numpy as np
import pytest

import nanoabs
from nanoabs.cli import main

FORMS = [
    "spectrum --shape sphere --material Au --radius 20 --substrate Si --superstrate air --gap 1 --incidence front --wl 450:800:5 -o on_si.csv",
    "spectrum --shape sphere --material Au --radius 40 --substrate Si --superstrate air --gap 1 --incidence back --wl 1100:1600:5 -o back.csv",
    "spectrum --shape sphere --material Au --radius 30 --substrate Si --superstrate air --depth 60 --incidence front --wl 1000:1600:5 -o buried.csv",
    "spectrum --shape spheroid --material Au --length 100 --diameter 30 --substrate Si --superstrate air --gap 2 --spacer SiO2:3 --incidence back --polarization long --wl 1000:1700:5 -o rod_on_si.csv",
]


@pytest.mark.parametrize("form", FORMS, ids=[f.split()[-1] for f in FORMS])
def test_contract_forms_run_and_export_field_factor(form, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(form.split()) == 0
    df, meta = nanoabs.read_export(form.split()[-1])
    md = meta["metadata"]
    assert "field_factor" in df.columns and (df.field_factor > 0).all()
    assert md["environment"]["kind"] in ("on_substrate", "buried")
    assert "incidence medium" in md["sigma_reference"] and md["method"] in ("mie", "mlwa", "quasistatic", "tmatrix")
    if "spheroid" in form:   # the rod goes through the multipole method (tests/test_surface_tmatrix.py)
        assert md["method"] == "tmatrix" and md["multipole_converged"] is True


def test_export_equals_the_python_call(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(FORMS[0].split()) == 0
    df, _ = nanoabs.read_export("on_si.csv")
    env = nanoabs.on_substrate("Si", superstrate="air", gap_nm=1, incidence="front")
    s = nanoabs.spectrum(nanoabs.Sphere("Au", 20), np.arange(450, 801, 5.0), environment=env)
    np.testing.assert_array_equal(df.sigma_abs_m2.to_numpy(), s.sigma_abs_m2)
    np.testing.assert_array_equal(df.field_factor.to_numpy(), s.field_factor)
    assert np.all(nanoabs.spectrum(nanoabs.Sphere("Au", 20), np.arange(450, 801, 50.0)).field_factor == 1.0)


def test_hot_carriers_on_a_substrate_names_external_and_internal(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    form = ("hot-carriers --shape sphere --material Au --radius 40 --substrate Si --superstrate air --gap 1 "
            "--incidence back --schottky Au/Si --irradiance 10 --density 5 --wl 1100:1600:5 -o det.csv")
    assert main(form.split()) == 0
    df, meta = nanoabs.read_export("det.csv")
    md = meta["metadata"]
    drive = df.field_factor.to_numpy() if "field_factor" in df else np.asarray(md["field_factor"])
    n_inc = np.asarray(md["incidence_index"])
    ok = (df.responsivity_internal_A_W > 0).to_numpy()  # beyond the cut-off both are 0
    assert ok.sum() > 50
    ratio = (df.responsivity_A_W / df.responsivity_internal_A_W).to_numpy()[ok]
    np.testing.assert_allclose(ratio, (drive * 1.0 / n_inc)[ok], rtol=1e-12)  # host air: n_host = 1
    assert any("external" in n for n in md["notes"])


@pytest.mark.parametrize("extra, needle", [
    ("--medium water --substrate Si", "--medium and --substrate"),
    ("--substrate Si --gap 1 --depth 50", "--depth"),
    ("--gap 1", "--substrate"),
    ("--polarization p", "oblique"),
    ("--substrate Si --depth 50 --spacer SiO2:3", "--spacer"),
])
def test_environment_options_refused_in_one_line(extra, needle, capsys):
    code = main(("spectrum --shape sphere --material Au --radius 20 --wl 500:600:50 " + extra).split())
    err = capsys.readouterr().err.strip()
    assert code == 2 and needle in err and err.count("\n") == 0
