"""Every bad input gets one clear line and a non-zero exit; fuzzed readers never crash.

Table-driven: each case is (what, callable or CLI argv, text the message must contain).
"""

import string

import numpy as np
import pytest
from hypothesis import HealthCheck, given, settings, strategies as st

import nanoabs
from nanoabs import NanoabsError, illumination as il
from nanoabs.cli import main
from nanoabs.particles import Ellipsoid, LayeredSphere, Sphere, spheroid
from nanoabs.study import load_study

WL = np.arange(500, 901, 50.0)


def _hc(p=None, **kw):
    p = p or Sphere("Au", 20)
    s = nanoabs.spectrum(p, WL)
    args = dict(barrier_eV=0.8)
    args.update(kw)
    return nanoabs.hot_carrier_estimate(s, p, il.monochromatic(1.0), **args)


API_CASES = [
    ("negative radius", lambda: Sphere("Au", -1), "radius"),
    ("zero radius", lambda: Sphere("Au", 0), "radius"),
    ("inf radius", lambda: Sphere("Au", np.inf), "radius"),
    ("nan radius", lambda: Sphere("Au", np.nan), "radius"),
    ("string radius", lambda: Sphere("Au", "big"), "number"),
    ("sub-monolayer shell", lambda: LayeredSphere("SiO2", 50, [("Au", 0.1)]), "monolayer"),
    ("negative shell", lambda: LayeredSphere("SiO2", 50, [("Au", -2)]), "thickness"),
    ("shell not a pair", lambda: LayeredSphere("SiO2", 50, ["Au"]), "pair"),
    ("two semi-axes", lambda: Ellipsoid("Au", (10, 5)), "three"),
    ("semi-axes scalar", lambda: Ellipsoid("Au", 10), "three"),
    ("zero semi-axis", lambda: Ellipsoid("Au", (10, 0, 5)), "semi-axis"),
    ("negative length", lambda: spheroid("Au", -60, 20), "length"),
    ("unknown material", lambda: nanoabs.material("Unobtainium"), "unknown material"),
    ("misspelt material", lambda: nanoabs.material("Gold2"), "did you mean"),
    ("unknown dataset", lambda: nanoabs.material("Au", "smith-1900"), "unknown dataset"),
    ("negative index", lambda: nanoabs.material(-1.5), "refractive index"),
    ("wavelength below data", lambda: nanoabs.material("Au").permittivity(100.0), "outside"),
    ("wavelength <= 0", lambda: nanoabs.material("Au").permittivity(-5.0), "> 0"),
    ("wavelength nan", lambda: nanoabs.spectrum(Sphere("Au", 10), [500, np.nan]), "NaN"),
    ("non-monotonic wl", lambda: nanoabs.spectrum(Sphere("Au", 10), [600, 500, 700]), "increasing"),
    ("empty wl", lambda: nanoabs.spectrum(Sphere("Au", 10), []), "empty"),
    ("unknown method", lambda: nanoabs.spectrum(Sphere("Au", 10), WL, method="fem"), "method"),
    ("unknown polarisation", lambda: nanoabs.spectrum(Ellipsoid("Au", (30, 10, 10)), WL, polarization="q"),
     "polarization"),
    ("mie for ellipsoid", lambda: nanoabs.spectrum(Ellipsoid("Au", (30, 10, 10)), WL, method="mie"), "sphere"),
    ("absorbing medium", lambda: nanoabs.spectrum(Sphere("Au", 10), WL, medium="Si:green-2008"), "absorbs"),
    ("negative irradiance", lambda: il.monochromatic(-1.0), "irradiance"),
    ("negative laser power", lambda: il.laser(-1.0, 1e6), "power"),
    ("zero beam radius", lambda: il.laser(1.0, 0.0), "beam"),
    ("negative temperature", lambda: il.blackbody(-5.0), "temperature"),
    ("unknown solar", lambda: il.solar("am2"), "am1.5g"),
    ("solar outside table", lambda: il.solar("am1.5g").spectral_irradiance([200.0]), "280"),
    ("barrier <= 0", lambda: _hc(barrier_eV=0.0), "barrier"),
    # "barrier above photons" is no longer an error: beyond the cut-off the result is zero with a warning (issue 13;
    # tests/test_detector.py::test_bad_detector_inputs checks it)
    ("negative fermi energy", lambda: _hc(fermi_energy_eV=-1.0), "fermi"),
    ("zero attenuation length", lambda: _hc(attenuation_length_nm=0.0), "attenuation"),
    ("contact fraction > 1", lambda: _hc(contact_fraction=1.5), "contact"),
    ("unphysical density", lambda: _hc(Sphere("Au", 60), density_per_um2=1e4), "N"),
    ("bad yield model", lambda: _hc(yield_model="magic"), "yield"),
    ("unknown schottky pair", lambda: nanoabs.hotcarriers.schottky_barrier("Au/Cheese"), "Au/Si"),
    ("fit range outside", lambda: nanoabs.fit_drude_lorentz(WL, np.ones(WL.size) * (-5 + 1j),
                                                            range_nm=(100, 600)), "outside"),
    ("too many oscillators", lambda: nanoabs.fit_drude_lorentz(WL, np.ones(WL.size) * (-5 + 1j),
                                                               oscillators=20), "oscillators"),
    ("negative DL parameter", lambda: nanoabs.DrudeLorentz(1.0, 9.0, -0.05), ">= 0"),
    ("export bad suffix", lambda: nanoabs.write_export(nanoabs.spectrum(Sphere("Au", 10), WL).to_frame(),
                                                       "x.txt", metadata={}, units={}), "suffix"),
]


@pytest.mark.parametrize("what,call,needle", API_CASES, ids=[c[0] for c in API_CASES])
def test_api_bad_input(what, call, needle):
    with pytest.raises(NanoabsError) as e:
        call()
    msg = str(e.value)
    assert needle.lower() in msg.lower(), msg
    assert "\n" not in msg


CLI_CASES = [
    ("spectrum without shape", "spectrum --material Au --radius 10", "--shape"),
    ("sphere without radius", "spectrum --shape sphere --material Au", "--radius"),
    ("sphere without material", "spectrum --shape sphere --radius 10", "--material"),
    ("bad wl form", "spectrum --shape sphere --material Au --radius 10 --wl 400:900", "START:STOP:STEP"),
    ("zero step", "spectrum --shape sphere --material Au --radius 10 --wl 400:900:0", "STEP"),
    ("radius text", "spectrum --shape sphere --material Au --radius ten", "invalid float"),
    ("unknown method", "spectrum --shape sphere --material Au --radius 10 --method fdtd", "method"),
    ("shell count mismatch", "spectrum --shape shell --core SiO2 --core-radius 50 --shell Au --shell Ag "
                             "--thickness 5", "--thickness"),
    ("ellipsoid axes", "spectrum --shape ellipsoid --material Ag --semi-axes 1,2,3,4", "three"),
    ("hc no barrier", "hot-carriers --shape sphere --material Au --radius 10 --irradiance 1", "barrier"),
    ("hc two illuminations", "hot-carriers --shape sphere --material Au --radius 10 --barrier 0.8 "
                             "--irradiance 1 --spectrum am0", "only one"),
    ("hc unknown spectrum file", "hot-carriers --shape sphere --material Au --radius 10 --barrier 0.8 "
                                 "--spectrum nothere.csv", "not found"),
    ("hc band reversed", "hot-carriers --shape sphere --material Au --radius 10 --barrier 0.8 "
                         "--spectrum am1.5g --band 900:400", "START < STOP"),
    ("run missing file", "run missing.toml -o out", "not found"),
    ("materials unknown", "materials show Xx", "unknown material"),
    ("unknown command", "frobnicate", "invalid choice"),
]


@pytest.mark.parametrize("what,argv,needle", CLI_CASES, ids=[c[0] for c in CLI_CASES])
def test_cli_bad_input(what, argv, needle, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    code = main(argv.split() + (["-o", "o.csv"] if argv.startswith(("spectrum", "hot-carriers")) else []))
    err = capsys.readouterr().err
    assert code in (2, 3), err
    assert needle in err, err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert not (tmp_path / "o.csv").exists() and not (tmp_path / "out").exists()


def test_at_least_forty_distinct_cases():
    assert len(API_CASES) + len(CLI_CASES) >= 40


# -- study files --------------------------------------------------------------

GOOD = """
[study]
title = "t"
[wavelengths]
start_nm = 500
stop_nm = 900
step_nm = 10
[illumination]
kind = "monochromatic"
irradiance_W_m2 = 1000
[detector]
barrier_eV = 0.8
[[particle]]
name = "p"
shape = "sphere"
material = "Au"
radius_nm = 20
"""

STUDY_CASES = [
    ("malformed TOML", GOOD + "\n[[[", "malformed TOML"),
    ("unknown section", GOOD + "\n[detectr]\nx = 1\n", "did you mean 'detector'"),
    ("unknown key", GOOD.replace("radius_nm = 20", "radios_nm = 20"), "did you mean 'radius_nm'"),
    ("wrong type", GOOD.replace("radius_nm = 20", 'radius_nm = "20"'), "must be a number"),
    ("missing title", GOOD.replace('title = "t"', ""), "study.title is required"),
    ("bad kind", GOOD.replace('"monochromatic"', '"sunny"'), "illumination.kind"),
    ("bad shape", GOOD.replace('"sphere"', '"cube"'), "shape"),
    ("no barrier", GOOD.replace("barrier_eV = 0.8", ""), "barrier"),
    ("reversed wavelengths", GOOD.replace("stop_nm = 900", "stop_nm = 400"), "start < stop"),
    ("particle as table", GOOD.replace("[[particle]]", "[particle]"), "[[particle]]"),
]


@pytest.mark.parametrize("what,text,needle", STUDY_CASES, ids=[c[0] for c in STUDY_CASES])
def test_study_validation(what, text, needle, tmp_path):
    p = tmp_path / "s.toml"
    p.write_text(text)
    with pytest.raises(NanoabsError) as e:
        load_study(p)
    assert needle in str(e.value)


def test_study_cli_exit_code_and_nothing_written(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "s.toml").write_text(GOOD.replace("radius_nm = 20", "radius_nm = -20"))
    assert main(["run", "s.toml", "-o", "rep"]) == 2
    assert "radius" in capsys.readouterr().err
    assert not (tmp_path / "rep").exists()
    (tmp_path / "t.toml").write_text(GOOD + "\n[[[")
    assert main(["run", "t.toml", "-o", "rep"]) == 3


# -- fuzz: the study loader and the CSV spectrum reader -------------------------

_toml_bits = st.sampled_from([
    "[study]\n", 'title = "x"\n', "[wavelengths]\n", "start_nm = 500\n", "stop_nm = 400\n", "step_nm = 0\n",
    "[illumination]\n", 'kind = "flat"\n', "value_W_m2_nm = -1\n", "[[particle]]\n", 'name = "a"\n',
    'shape = "sphere"\n', "radius_nm = 1e400\n", "= 3\n", '"\n', "[detector]\n", "barrier_eV = true\n",
    "[search]\n", "band_nm = [1, 2, 3]\n", "\x00", "[[sweep]]\n", "values_nm = []\n", "x = [1,\n",
])


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(parts=st.lists(_toml_bits, max_size=14), noise=st.text(string.printable, max_size=30))
def test_fuzz_study_loader(parts, noise, tmp_path):
    p = tmp_path / "f.toml"
    p.write_text("".join(parts) + noise, encoding="utf-8", errors="replace")
    try:
        doc = load_study(p)
    except NanoabsError:
        return
    assert isinstance(doc, dict)


_csv_rows = st.lists(
    st.tuples(st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.text("0123456789.-e", max_size=6)),
              st.one_of(st.floats(allow_nan=True, allow_infinity=True), st.text("0123456789.-eX", max_size=6))),
    max_size=8)


@settings(max_examples=150, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(header=st.sampled_from(["wavelength_nm,irradiance_W_m2_nm", "wavelength_nm,irr", "", "a,b,c",
                               "# comment\nwavelength_nm,irradiance_W_m2_nm"]),
       rows=_csv_rows, trailer=st.text(",\n0123456789", max_size=10))
def test_fuzz_csv_spectrum_reader(header, rows, trailer, tmp_path):
    p = tmp_path / "s.csv"
    p.write_text(header + "\n" + "\n".join(f"{a},{b}" for a, b in rows) + trailer)
    try:
        src = il.from_csv(p)
    except NanoabsError:
        return
    lo, hi = src.range_nm
    v = src.spectral_irradiance(np.linspace(lo, hi, 5))
    assert np.all(np.isfinite(v)) and np.all(v >= 0)
