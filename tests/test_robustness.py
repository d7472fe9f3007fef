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
    # bounded work (design module: sizes up to 1e5 nm, sweeps up to max_points = 1e8 points)
    ("sweep radius above bound", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [1e6]}, WL), "up to 10000 nm"),
    ("sweep radius 1e30", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [1e30]}, WL), "allowed range"),
    ("sweep 2.7e10 designs", lambda: nanoabs.design.sweep("ellipsoid", {k: np.linspace(5, 50, 3000) for k in
                                                                        ("a_nm", "b_nm", "c_nm")}, WL),
     "max_points"),
    ("sweep over explicit bound", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [10, 20]}, WL,
                                                               max_points=10), "max_points"),
    ("sweep max_points bool", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [10]}, WL, max_points=True),
     "max_points"),
    ("search too many starts", lambda: nanoabs.design.search((700, 800), n_starts=500), "n_starts"),
    ("ensemble too many nodes", lambda: nanoabs.design.ensemble_average("sphere", {"radius_nm": 20},
                                                                        {"radius_nm": 0.1}, WL, n_samples=10**6),
     "n_samples"),
    ("nominal radius above bound", lambda: nanoabs.design.ensemble_average("sphere", {"radius_nm": 1e7}, {}, WL),
     "allowed range"),
    ("sweep alias twice", lambda: nanoabs.design.sweep("shell", {"core_radius_nm": [20], "thickness_nm": [5],
                                                                 "shell": ["Au"], "material": ["Ag"]}, WL),
     "twice"),
    ("sweep executor unknown", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [10]}, WL,
                                                            executor="threads"), "executor"),
    ("sweep out not csv", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [10]}, WL, out="x.json"), ".csv"),
    ("sweep chunk_size bool", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [10]}, WL, chunk_size=True),
     "chunk_size"),
    ("sweep memory budget nan", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [10]}, WL,
                                                             memory_budget_MB=float("nan")), "memory_budget_MB"),
    ("sweep wavelengths reversed", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [10]}, WL[::-1]),
     "increasing"),
    ("sweep 2-D sizes", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [[10, 20]]}, WL), "1-D"),
    ("sweep surface damping text", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [10]}, WL,
                                                                surface_damping="no"), "True or False"),
    ("sweep material int", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [10], "material": {"Au": 1}}, WL),
     "material name"),
    ("sweep medium unknown", lambda: nanoabs.design.sweep("sphere", {"radius_nm": [10]}, WL, medium="Xx"),
     "unknown material"),
    ("sweep polarization unknown", lambda: nanoabs.design.sweep("spheroid", {"length_nm": [40], "diameter_nm": [10]},
                                                                WL, polarization="diag"), "polarization"),
    ("sweep thin shell", lambda: nanoabs.design.sweep("shell", {"core_radius_nm": [20], "thickness_nm": [0.01]},
                                                      WL), "monolayer"),
    ("search band one edge", lambda: nanoabs.design.search((700,)), "band_nm"),
    ("search materials empty", lambda: nanoabs.design.search((700, 800), materials=[]), "empty"),
    ("search materials dict", lambda: nanoabs.design.search((700, 800), materials={"Au": 1}), "materials"),
    ("search families dict", lambda: nanoabs.design.search((700, 800), families={"rod": 1}), "families"),
    ("search bounds reversed", lambda: nanoabs.design.search((700, 800), families=["sphere"],
                                                             bounds={"sphere": {"radius_nm": (50, 10)}}), "lo < hi"),
    ("search max size small", lambda: nanoabs.design.search((700, 800), max_size_nm=5), "max_size_nm"),
    ("search surface damping text", lambda: nanoabs.design.search((700, 800), surface_damping="yes"),
     "True or False"),
    ("ensemble histogram mismatch", lambda: nanoabs.design.ensemble_average(
        "sphere", {"radius_nm": 20}, {}, WL, distribution={"radius_nm": ([10, 20], [1.0])}), "same length"),
    ("ensemble histogram and spread", lambda: nanoabs.design.ensemble_average(
        "sphere", {"radius_nm": 20}, {"radius_nm": 0.1}, WL, distribution={"radius_nm": ([10], [1.0])}),
     "spread must be empty"),
    ("ensemble nominal array", lambda: nanoabs.design.ensemble_average("sphere", {"radius_nm": [10, 20]}, {}, WL),
     "one value"),
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
    ("sweep repeated param", "sweep --shape sphere --param radius_nm=10 --param radius_nm=20", "given twice"),
    ("sweep repeated alias", "sweep --shape shell --param core_radius_nm=20 --param thickness_nm=5 "
                             "--param shell=Au --param material=Ag", "twice"),
    ("sweep radius 1e30", "sweep --shape sphere --param radius_nm=1e30", "allowed range"),
    ("sweep 2.7e10 designs", "sweep --shape ellipsoid --param a_nm=1:3000:1 --param b_nm=1:3000:1 "
                             "--param c_nm=1:3000:1", "max_points"),
    ("sweep max points", "sweep --shape sphere --param radius_nm=10:50:10 --max-points 10", "max_points"),
    ("sweep param no value", "sweep --shape sphere --param radius_nm", "NAME=VALUES"),
    ("sweep no param", "sweep --shape sphere", "at least one --param"),
    ("sweep bad material list", "sweep --shape sphere --param radius_nm=10 --param material=Au,Xx",
     "unknown material"),
    ("sweep missing table", "sweep --shape sphere --param radius_nm=10 --material nothere.csv", "not found"),
    ("sweep out dir missing", "sweep --shape sphere --param radius_nm=10 -o nodir/s.csv", "does not exist"),
    ("sweep plot dir missing", "sweep --shape sphere --param radius_nm=10 --plot nodir/m.png", "does not exist"),
    ("sweep plot suffix", "sweep --shape sphere --param radius_nm=10 --plot m.gif", ".png or .svg"),
    ("search too many starts top", "search --band 700:800 --top 0", "top"),
    ("run debug after command", "run missing.toml -o out --debug", "not found"),
    ("demo empty output", "demo -o", "expected one argument"),
    ("sweep unknown shape", "sweep --shape cube --param radius_nm=10", "invalid choice"),
    ("sweep unknown method", "sweep --shape sphere --param radius_nm=10 --method fdtd", "method"),
    ("sweep wl reversed", "sweep --shape sphere --param radius_nm=10 --wl 900:400:5", "START < STOP"),
    ("sweep max points text", "sweep --shape sphere --param radius_nm=10 --max-points lots", "invalid int"),
    ("search band reversed", "search --band 800:700", "START < STOP"),
    ("search unknown family", "search --band 700:800 --families rod,cube", "family"),
    ("search unknown objective", "search --band 700:800 --objective speed", "objective"),
    ("search band and centre", "search --band 700:800 --center 750 --width 10", "either"),
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


def test_at_least_150_distinct_cases():
    assert len(API_CASES) + len(CLI_CASES) + len(STUDY_CASES) + len(RUN_CASES) >= 150


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

SWEEP = """
[[sweep]]
name = "radius"
shape = "sphere"
parameter = "radius_nm"
values_nm = [10, 20, 30]
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
    ("inf radius", GOOD.replace("radius_nm = 20", "radius_nm = inf"), "finite"),
    ("nan radius", GOOD.replace("radius_nm = 20", "radius_nm = nan"), "finite"),
    ("radius above bound", GOOD.replace("radius_nm = 20", "radius_nm = 1e30"), "allowed range"),
    ("inf barrier", GOOD.replace("barrier_eV = 0.8", "barrier_eV = inf"), "finite"),
    ("inf wavelength", GOOD.replace("stop_nm = 900", "stop_nm = inf"), "finite"),
    ("string in semi-axes", GOOD.replace('shape = "sphere"', 'shape = "ellipsoid"').replace(
        "radius_nm = 20", 'semi_axes_nm = [20, "x", 10]'), "must be a number"),
    ("bool in semi-axes", GOOD.replace('shape = "sphere"', 'shape = "ellipsoid"').replace(
        "radius_nm = 20", "semi_axes_nm = [20, true, 10]"), "must be a number"),
    ("string in sweep values", GOOD + SWEEP.replace("[10, 20, 30]", '[10, "a"]'), "must be a number"),
    ("inf in sweep values", GOOD + SWEEP.replace("[10, 20, 30]", "[10, inf]"), "finite"),
    ("empty sweep values", GOOD + SWEEP.replace("[10, 20, 30]", "[]"), "empty"),
    ("sweep values above bound", GOOD + SWEEP.replace("[10, 20, 30]", "[10, 1e9]"), "allowed range"),
    ("number in families", GOOD + '[search]\nband_nm = [700, 800]\nfamilies = [1]\n', "must be a string"),
    ("string in band", GOOD + '[search]\nband_nm = [700, "x"]\n', "must be a number"),
    ("inf in band", GOOD + '[search]\nband_nm = [700, inf]\n', "finite"),
    ("number in formats", GOOD + "[output]\nformats = [3]\n", "must be a string"),
]


@pytest.mark.parametrize("what,text,needle", STUDY_CASES, ids=[c[0] for c in STUDY_CASES])
def test_study_validation(what, text, needle, tmp_path):
    p = tmp_path / "s.toml"
    p.write_text(text)
    with pytest.raises(NanoabsError) as e:
        load_study(p)
    assert needle in str(e.value)


def test_byte_order_mark_is_accepted(tmp_path):
    p = tmp_path / "s.toml"
    p.write_bytes(b"\xef\xbb\xbf" + GOOD.encode())
    assert load_study(p)["particle"][0]["radius_nm"] == 20


RUN_CASES = [  # (what, study text, extra argv, message): validated before anything is written
    ("sweep parameter unknown", GOOD + SWEEP.replace('"radius_nm"', '"radius"'), [], "parameter"),
    ("sweep parameter of other shape", GOOD + SWEEP.replace('"radius_nm"', '"length_nm"'), [], "allowed for shape"),
    ("sweep material unknown", GOOD + SWEEP + 'material = "Xx"\n', [], "unknown material"),
    ("sweep outside data", GOOD.replace("start_nm = 500", "start_nm = 100") + SWEEP, [], "outside"),
    ("search band outside data", GOOD + "[search]\nband_nm = [100, 150]\n", [], "outside the wavelengths"),
    ("search family unknown", GOOD + '[search]\nband_nm = [700, 800]\nfamilies = ["cube"]\n', [], "family"),
    ("search objective unknown", GOOD + '[search]\nband_nm = [700, 800]\nobjective = "x"\n', [], "objective"),
    ("search top zero", GOOD + "[search]\nband_nm = [700, 800]\ntop = 0\n", [], "top"),
    ("output format", GOOD + '[output]\nformats = ["gif"]\n', [], "gif"),
    ("empty output", GOOD, ["-o", ""], "folder name"),
    ("output is a file", GOOD, ["-o", "afile"], "not a folder"),
    ("output parent missing", GOOD, ["-o", "no/such/dir"], "does not exist"),
    ("debug after command", GOOD.replace("radius_nm = 20", "radius_nm = -20"), ["--debug"], "radius"),
    ("particle material unknown", GOOD.replace('material = "Au"', 'material = "Xx"'), [], "unknown material"),
    ("sweep shell core unknown", GOOD + SWEEP.replace('"sphere"', '"shell"').replace('"radius_nm"',
                                 '"thickness_nm"') + 'core = "Xx"\ncore_radius_nm = 20\n', [], "unknown material"),
    ("injection without band source", GOOD + '[search]\nband_nm = [700, 800]\nobjective = "injection"\n', [],
     "monochromatic"),
]


@pytest.mark.parametrize("what,text,extra,needle", RUN_CASES, ids=[c[0] for c in RUN_CASES])
def test_run_validates_everything_before_writing(what, text, extra, needle, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "s.toml").write_text(text)
    (tmp_path / "afile").write_text("x")
    argv = ["run", "s.toml"] + (extra if "-o" in extra else ["-o", "rep"] + extra) + ["--quiet"]
    code = main(argv)
    err = capsys.readouterr().err
    assert code in (2, 3), err
    assert needle in err, err
    assert err.count("\n") == 1 and "Traceback" not in err
    assert sorted(p.name for p in tmp_path.iterdir()) == ["afile", "s.toml"]


@pytest.mark.parametrize("argv", [["sweep", "--shape", "sphere", "--param", "radius_nm=10", "-o", ""],
                                  ["sweep", "--shape", "sphere", "--param", "radius_nm=10", "--plot", ""],
                                  ["search", "--band", "700:800", "-o", ""],
                                  ["demo", "-o", ""]])
def test_empty_output_names_are_refused(argv, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main(argv + ["--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "''" in err, err
    assert list(tmp_path.iterdir()) == []


@pytest.mark.skipif(not __import__("os").path.isdir("/proc/self"), reason="needs the Linux /proc filesystem")
@pytest.mark.parametrize("argv", [["sweep", "--shape", "sphere", "--param", "radius_nm=10", "-o", "/proc/x.csv"],
                                  ["run", "s.toml", "-o", "/proc/rep"], ["run", "s.toml", "-o", "/dev/null"]])
def test_special_filesystems_give_one_line_errors(argv, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "s.toml").write_text(GOOD)
    assert main(argv + ["--quiet"]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "Traceback" not in err, err


@pytest.mark.skipif(not hasattr(__import__("os"), "geteuid") or __import__("os").geteuid() == 0,
                    reason="root can write into read-only folders")
def test_run_into_read_only_parent_is_one_line(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    (tmp_path / "s.toml").write_text(GOOD)
    ro = tmp_path / "ro"
    ro.mkdir(mode=0o500)
    assert main(["run", "s.toml", "-o", "ro/rep", "--quiet"]) == 2
    assert "not writable" in capsys.readouterr().err


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


# -- fuzz: the sweep CLI and the design constructors ------------------------------

_param_values = st.sampled_from(["10", "10,20", "5:25:10", "1e30", "nan", "inf", "-1", "0", "", "x", "1:2",
                                 "3:1:1", "1e-300", "Au", "Au,Ag", "Au,Xx", "1.33,1.5", "20:20.2:0.1"])
_param_names = st.sampled_from(["radius_nm", "core_radius_nm", "thickness_nm", "length_nm", "diameter_nm",
                                "aspect_ratio", "a_nm", "b_nm", "c_nm", "medium_index", "material", "core",
                                "shell", "radius", ""])


@settings(max_examples=60, deadline=None, suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(shape=st.sampled_from(["sphere", "shell", "spheroid", "ellipsoid", "cube"]),
       params=st.lists(st.tuples(_param_names, _param_values), max_size=4),
       extra=st.lists(st.sampled_from(["--polarization", "long", "--method", "mie", "--max-points", "3",
                                       "--no-surface-damping", "--material", "Ag", "--core", "x.csv"]),
                      max_size=3))
def test_fuzz_sweep_cli(shape, params, extra, tmp_path, capsys):
    # Either a result (exit 0) or the tool's own one-line error (exit 2 or 3); never an internal error.
    argv = ["sweep", "--shape", shape, "--wl", "500:540:20", "--quiet"] + extra
    for name, value in params:
        argv += ["--param", f"{name}={value}"]
    code = main(argv)
    err = capsys.readouterr().err
    assert code in (0, 2, 3), err
    if code:
        assert err.count("\n") == 1 and "internal error" not in err, err


_junk = st.one_of(st.none(), st.booleans(), st.integers(-3, 3), st.floats(allow_nan=True, allow_infinity=True),
                  st.text(max_size=4), st.lists(st.floats(-5, 80), max_size=3), st.dictionaries(st.text(max_size=2),
                                                                                                 st.integers(),
                                                                                                 max_size=2),
                  st.just(np.ones((2, 2))), st.just([[10.0, 20.0]]), st.just(["Au", 3]))


@settings(max_examples=80, deadline=None)
@given(shape=st.sampled_from(["sphere", "shell", "spheroid", "ellipsoid"]),
       names=st.lists(_param_names, min_size=1, max_size=3), values=st.lists(_junk, min_size=3, max_size=3),
       kw=st.sampled_from([{}, {"surface_damping": "no"}, {"material": None}, {"medium": [1.33]},
                           {"chunk_size": 2.5}, {"polarization": None}, {"method": 3}, {"core": {}}]))
def test_fuzz_design_constructors(shape, names, values, kw):
    # design.sweep / ensemble_average with junk: a frame or a NanoabsError, never another exception.
    params = dict(zip(names, values))
    for call in (lambda: nanoabs.design.sweep(shape, params, [500.0, 540.0], progress=False, **kw),
                 lambda: nanoabs.design.ensemble_average(shape, params, {}, [500.0, 540.0],
                                                         **{k: v for k, v in kw.items() if k != "chunk_size"})):
        try:
            res = call()
        except NanoabsError as exc:
            assert "\n" not in str(exc)
            continue
        assert np.all(np.isfinite(res.sigma_abs_m2 if hasattr(res, "sigma_abs_m2") else res["sigma_abs_m2"]))


@pytest.mark.parametrize("text,n,last", [("1936.9:1937:0.1", 2, 1937.0), ("0.1:0.3:0.1", 3, 0.3),
                                         ("400:401:0.3", 4, 400.9), ("400:1000:2", 301, 1000.0),
                                         ("1:2:0.1", 11, 2.0)])
def test_study_grids_are_proof_against_decimal_rounding(text, n, last):
    # Source: arithmetic. A step that divides the range up to rounding reaches STOP exactly;
    # no point lies beyond STOP (a point a rounding error past a table's end would fail there).
    from nanoabs.study import _wavelengths

    start, stop, step = (float(v) for v in text.split(":"))
    g = _wavelengths({"wavelengths": {"start_nm": start, "stop_nm": stop, "step_nm": step}})
    assert g.size == n and g[-1] == last and g.max() <= stop and g[0] == start
    np.testing.assert_allclose(np.diff(g), step, rtol=1e-9)
