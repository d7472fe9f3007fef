"""Bad inputs, edges and fuzzing of the Python constructors and the CLI argument parser.

Table-driven: every case is (what, call, text the one-line NanoabsError must contain).
Property-based (hypothesis): the constructors and ``nanoabs.cli.main`` either succeed or
give the package's own error (exit 2/3, one line), never another exception, never NaN in
an export. The physics references used by the edge tests are named beside them.
"""

import math
import os
import string
import warnings

import numpy as np
import pandas as pd
import pytest
from hypothesis import HealthCheck, event, given, settings, strategies as st

import nanoabs
from nanoabs import NanoabsError, illumination as il, quasistatic as q
from nanoabs._errors import check_flag, check_positive
from nanoabs.cli import MAX_POINTS, main, parse_range
from nanoabs.materials import MAX_USER_FILE_BYTES, load_table, material
from nanoabs.particles import MAX_SIZE_NM, Ellipsoid, LayeredSphere, Sphere, check_size_family, spheroid
from nanoabs.validity import NanoabsWarning

WL = np.arange(500, 901, 100.0)
SECRET = "hunter2-SECRET-token"


# -- helpers that build the singular (loss-free pole) permittivities -----------------------
# Static poles: B&H (1983) eq. 5.32 (ellipsoid: eps = -eps_m (1 - L)/L), eq. 5.36 (coated
# sphere) and eq. 5.35 (confocal coated ellipsoid), each solved for the core permittivity.

def _ellipsoid_pole(axes, axis, em=1.7689):
    L = q.depolarization_factors(*axes)["xyz".index(axis)]
    return -em * (1 - L) / L, em


def _coated_sphere_pole(e2=2.25, em=1.7689, r1=20.0, r2=25.0):
    f = (r1 / r2) ** 3
    e1 = -2 * e2 * (e2 * (1 - f) + em * (2 + f)) / (e2 * (1 + 2 * f) + 2 * em * (1 - f))
    return e1, e2, em, r1, r2


def _coated_ellipsoid_pole(e2=2.25, em=1.7689, core=(30.0, 10.0, 10.0), t=3.0, i=0):
    shell = q.confocal_shell_axes(core, thickness=t, axis="y")
    Lc, Ls = q.confocal_depolarization_factors(core, shell)
    L1, L2 = Lc[i], Ls[i]
    f = np.prod(core) / np.prod(shell)
    h = L1 - f * L2
    e1 = -(em * (1 - L2) * e2 * (1 - h) + L2 * e2**2 * (1 - h - f)) / (em * (1 - L2) * h + L2 * e2 * (h + f))
    return e1, e2, em, core, shell


def _pole_spectrum():
    # a constant material at the long-axis pole of a 60 x 20 nm rod in n = 1.33, through spectrum()
    eps, em = _ellipsoid_pole((30.0, 10.0, 10.0), "x")
    n = complex(1e-15, math.sqrt(-eps))
    return nanoabs.spectrum(spheroid(n, 60.0, 20.0), WL, medium=1.33, method="quasistatic",
                            polarization="long")


def _mutated_sphere(radius):
    p = Sphere("Au", 20.0)
    p.radius_nm = np.asarray(radius, dtype=float)  # bypasses the constructor on purpose
    return p


def _big_file(tmp, name):
    p = tmp / name
    with open(p, "wb") as fh:
        fh.truncate(MAX_USER_FILE_BYTES + 10)  # sparse: no real disk use
    return p


def _secret_file(tmp, name, text):
    p = tmp / name
    p.write_text(text.replace("SECRET", SECRET), encoding="utf-8")
    return p


API_CASES = [
    # strict types in the constructors
    ("radius True", lambda t: Sphere("Au", True), "boolean"),
    ("radius False", lambda t: Sphere("Au", False), "boolean"),
    ("radius numpy bool", lambda t: Sphere("Au", np.bool_(True)), "boolean"),
    ("radius bool array", lambda t: Sphere("Au", np.array([[True]])), "boolean"),
    ("radius string", lambda t: Sphere("Au", "10"), "real number"),
    ("radius None", lambda t: Sphere("Au", None), "real number"),
    ("radius complex", lambda t: Sphere("Au", 10 + 1j), "real number"),
    ("radius dict", lambda t: Sphere("Au", {"r": 10}), "real number"),
    ("radius set", lambda t: Sphere("Au", {10}), "real number"),
    ("radius ragged list", lambda t: Sphere("Au", [[10], [10, 20]]), "real number"),
    ("radius object", lambda t: Sphere("Au", object()), "real number"),
    ("radius list of str", lambda t: Sphere("Au", ["10", "20"]), "real number"),
    ("radius list with None", lambda t: Sphere("Au", [[10.0], [None]]), "real number"),
    ("radius 1-D list (diagonal)", lambda t: Sphere("Au", [10, 20]), "ambiguous"),
    ("radius 1-D Series (diagonal)", lambda t: Sphere("Au", pd.Series([10.0, 20.0, 30.0])), "ambiguous"),
    ("radius 1-D array (diagonal)", lambda t: Sphere("Au", np.linspace(10, 50, 5)), "ambiguous"),
    ("radius family with NaN", lambda t: Sphere("Au", [[10.0], [np.nan]]), "finite"),
    ("radius -inf", lambda t: Sphere("Au", -np.inf), "finite"),
    ("radius 1e30 nm", lambda t: Sphere("Au", 1e30), "allowed range"),
    ("radius 1e7 nm", lambda t: Sphere("Au", 1e7), "allowed range"),
    ("radius just above the bound", lambda t: Sphere("Au", MAX_SIZE_NM * (1 + 1e-12)), "allowed range"),
    ("material list", lambda t: Sphere(["Au"], 10), "material"),
    ("material set", lambda t: Sphere({"Au"}, 10), "material"),
    ("material dict", lambda t: Sphere({"name": "Au"}, 10), "material"),
    ("material None", lambda t: Sphere(None, 10), "material"),
    ("material True", lambda t: Sphere(True, 10), "material"),
    ("material array", lambda t: material(np.array([1.5])), "material"),
    ("material nan index", lambda t: material(float("nan")), "refractive index"),
    ("material gain index", lambda t: material(1.5 - 0.1j), "refractive index"),
    ("dataset not a str", lambda t: material("Au", 5), "source"),
    ("shells a string", lambda t: LayeredSphere("SiO2", 50, "Au"), "pairs"),
    ("shells None", lambda t: LayeredSphere("SiO2", 50, None), "pairs"),
    ("shells a dict", lambda t: LayeredSphere("SiO2", 50, {"Au": 5}), "pairs"),
    ("shell triple", lambda t: LayeredSphere("SiO2", 50, [("Au", 5, 6)]), "pair"),
    ("shell thickness True", lambda t: LayeredSphere("SiO2", 50, [("Au", True)]), "boolean"),
    ("shell thickness 1-D", lambda t: LayeredSphere("SiO2", 50, [("Au", [2, 3])]), "ambiguous"),
    ("shell thickness huge", lambda t: LayeredSphere("SiO2", 50, [("Au", 2e4)]), "allowed range"),
    ("outer radius over bound", lambda t: LayeredSphere("SiO2", 9e3, [("Au", 2e3)]), "outer radius"),
    ("shell material list", lambda t: LayeredSphere("SiO2", 50, [(["Au"], 5)]), "material"),
    ("core/shell families differ", lambda t: LayeredSphere("SiO2", np.ones((3, 1)) * 50,
                                                           [("Au", np.ones((4, 1)) * 5)]), "broadcast"),
    ("semi-axes a string", lambda t: Ellipsoid("Au", "abc"), "three"),
    ("semi-axes a set", lambda t: Ellipsoid("Au", {1, 2, 3}), "three"),
    ("semi-axes None", lambda t: Ellipsoid("Au", None), "three"),
    ("semi-axis True", lambda t: Ellipsoid("Au", (10, True, 5)), "boolean"),
    ("semi-axis string", lambda t: Ellipsoid("Au", (10, "5", 5)), "real number"),
    ("semi-axes families differ", lambda t: Ellipsoid("Au", (np.ones((3, 1)), np.ones((4, 1)), 5)), "broadcast"),
    ("ellipsoid outer axis over bound", lambda t: Ellipsoid("Au", (9e3, 10, 10), ("SiO2", 5e3)), "outer semi-axis"),
    ("ellipsoid shell a string", lambda t: Ellipsoid("Au", (30, 10, 10), "SiO2"), "pair"),
    ("ellipsoid shell one item", lambda t: Ellipsoid("Au", (30, 10, 10), ("SiO2",)), "pair"),
    ("spheroid length True", lambda t: spheroid("Au", True, 20), "boolean"),
    ("spheroid diameter 1-D", lambda t: spheroid("Au", 60, [20, 30]), "ambiguous"),
    ("spheroid length huge", lambda t: spheroid("Au", 1e5, 20), "allowed range"),
    ("spheroid families differ", lambda t: spheroid("Au", np.ones((3, 1)) * 60, np.ones((2, 1)) * 20), "broadcast"),
    ("mutated 1-D radius vs grid", lambda t: check_size_family(_mutated_sphere([10, 20, 30, 40, 50]), WL),
     "ambiguous"),
    ("mutated (2, 7) radius vs 5 wl", lambda t: check_size_family(_mutated_sphere(np.ones((2, 7))), WL),
     "neither 1"),
    ("(1, 3) geometry vs 5 wl", lambda t: check_size_family(spheroid("Au", np.array([[40.0, 50.0, 60.0]]), 20.0), WL),
     "neither 1"),
    # singular physics: every static pole is refused, not returned as Q ~ 1e26
    ("prolate pole, long axis", lambda t: q.polarizability_ellipsoid(
        *_ellipsoid_pole((30, 10, 10), "x"), 30, 10, 10, axis="x"), "singular"),
    ("prolate pole, short axis", lambda t: q.polarizability_ellipsoid(
        *_ellipsoid_pole((30, 10, 10), "y"), 30, 10, 10, axis="y"), "singular"),
    ("oblate pole", lambda t: q.polarizability_ellipsoid(
        *_ellipsoid_pole((20, 20, 4), "z"), 20, 20, 4, axis="z"), "singular"),
    ("triaxial pole", lambda t: q.polarizability_ellipsoid(
        *_ellipsoid_pole((25, 12, 7), "y"), 25, 12, 7, axis="y"), "singular"),
    ("pole from L", lambda t: q.polarizability_from_depolarization(-1.7689 * 4, 1.7689, 100.0, 0.2),
     "singular"),
    ("coated sphere pole", lambda t: q.polarizability_coated_sphere(*_coated_sphere_pole()), "singular"),
    ("coated sphere pole, metal shell", lambda t: q.polarizability_coated_sphere(
        *_coated_sphere_pole(e2=-3.0 + 0j)), "singular"),
    ("coated ellipsoid pole", lambda t: q.polarizability_coated_ellipsoid(
        *_coated_ellipsoid_pole(), axis="x"), "singular"),
    ("coated ellipsoid pole, y", lambda t: q.polarizability_coated_ellipsoid(
        *_coated_ellipsoid_pole(i=1), axis="y"), "singular"),
    ("pole within 1e-13", lambda t: q.polarizability_sphere(-3.0 + 3e-13j, 1.5, 10.0), "singular"),
    ("pole through spectrum()", lambda t: _pole_spectrum(), "singular"),
    ("eps True", lambda t: q.polarizability_sphere(True, 1.77, 10.0), "complex"),
    ("eps a string", lambda t: q.polarizability_sphere("-2", 1.77, 10.0), "complex"),
    ("eps None", lambda t: q.polarizability_ellipsoid(None, 1.77, 30, 10, 10), "complex"),
    ("depolarization above 1", lambda t: q.polarizability_from_depolarization(-5 + 1j, 1.77, 100.0, 1.5),
     "allowed range"),
    ("depolarization True", lambda t: q.polarizability_from_depolarization(-5 + 1j, 1.77, 100.0, True),
     "boolean"),
    ("static overflow", lambda t: q.polarizability_sphere(-5 + 1j, 1.77, 1e200), "overflows"),
    ("MLWA overflow", lambda t: q.polarizability_sphere_mlwa(-5 + 1j, 1.77, 1e200, 0.01), "overflows"),
    ("corrected 'no'", lambda t: q.cross_sections(1 + 1j, 0.01, corrected="no"), "True or False"),
    # table edges
    ("wavelength a string", lambda t: material("Au").permittivity("500"), "real number"),
    ("just past the table end", lambda t: material("Au").permittivity(material("Au").range_nm[1] * (1 + 1e-9)),
     "outside"),
    ("just before the table start", lambda t: material("Au").permittivity(material("Au").range_nm[0] * (1 - 1e-9)),
     "outside"),
    # illumination
    ("irradiance True", lambda t: il.monochromatic(True), "boolean"),
    ("irradiance an array", lambda t: il.monochromatic([1.0, 2.0]), "single number"),
    ("irradiance a string", lambda t: il.monochromatic("5"), "real number"),
    ("laser overflow", lambda t: il.laser(1e300, 1e-300), "overflow"),
    ("laser radius array", lambda t: il.laser(1.0, [1.0, 2.0]), "single number"),
    ("blackbody negligible T scaled", lambda t: il.blackbody(1e-30, total_irradiance_W_m2=1000), "allowed range"),
    ("blackbody 0.5 K", lambda t: il.blackbody(0.5), "allowed range"),
    ("blackbody 1e300 K", lambda t: il.blackbody(1e300), "allowed range"),
    ("blackbody total overflow", lambda t: il.blackbody(5000, total_irradiance_W_m2=1e308), "overflow"),
    ("flat integral overflow", lambda t: il.flat(1e308).integrated_irradiance_W_m2([400.0, 1e6]), "overflow"),
    ("flat None", lambda t: il.flat(None), "real number"),
    ("filter edge True", lambda t: il.solar().filtered(lo_nm=True), "boolean"),
    ("illumination None", lambda t: il.check_illumination(None), "Illumination"),
    ("illumination a string", lambda t: il.check_illumination("am1.5g"), "Illumination"),
    # flags and scalars
    ("flag 'no'", lambda t: check_flag("surface_damping", "no"), "True or False"),
    ("flag 0", lambda t: check_flag("surface_damping", 0), "True or False"),
    ("flag None", lambda t: check_flag("surface_damping", None), "True or False"),
    ("scalar wanted", lambda t: check_positive("density", np.array([1.0, 2.0]), scalar=True), "single number"),
    # user files: bounded, never quoted
    ("material table too big", lambda t: load_table(_big_file(t, "big.csv")), "MB"),
    ("spectrum file too big", lambda t: il.from_csv(_big_file(t, "big.csv")), "MB"),
    ("material table a folder", lambda t: load_table(t), "directory"),
    ("material table missing", lambda t: load_table(t / "nope.csv"), "not found"),
    ("material table bad header", lambda t: load_table(_secret_file(t, "h.csv", "SECRET,n,k\n400,1,1\n500,1,1\n")),
     "header"),
    ("material table bad row", lambda t: load_table(_secret_file(t, "r.csv", "wavelength_nm,n,k\n400,1,1\nSECRET\n")),
     "row 3"),
    ("spectrum file bad header", lambda t: il.from_csv(_secret_file(t, "s.csv", "SECRET,x\n1,2\n")), "missing column"),
    ("spectrum file bad cell", lambda t: il.from_csv(_secret_file(
        t, "c.csv", "wavelength_nm,irradiance_W_m2_nm\n400,1\n500,SECRET\n")), "not a number"),
    ("spectrum path None", lambda t: il.from_csv(None), "file path"),
    ("material table path a number", lambda t: load_table(3), "file path"),
    ("material table kind", lambda t: load_table(t / "x.csv", kind="banana"), "kind"),
    ("band integral of text", lambda t: il.band_integral([500.0, 600.0], ["a", "b"]), "real number"),
    ("band integral with NaN", lambda t: il.band_integral([500.0, 600.0], [1.0, np.nan]), "NaN"),
    # wavelength parsing
    ("wl list decreasing", lambda t: parse_range("1550,1310"), "increasing"),
    ("wl list with zero", lambda t: parse_range("0,1310"), "> 0"),
    ("wl list with inf", lambda t: parse_range("inf,1310"), "finite"),
    ("wl list text", lambda t: parse_range("1310,abc"), "number"),
    ("wl empty", lambda t: parse_range(""), "number"),
    ("wl four fields", lambda t: parse_range("400:900:2:3"), "START:STOP:STEP"),
    ("wl start 0", lambda t: parse_range("0:900:1"), "0 < START"),
    ("wl nan stop", lambda t: parse_range("400:nan:1"), "finite"),
    ("wl too many points", lambda t: parse_range("400:1e9:1e-4"), "at most"),
    ("wl tiny step", lambda t: parse_range("400:900:1e-300"), "at most"),
    ("wl list too long", lambda t: parse_range(",".join(["1"] * (MAX_POINTS + 1))), "at most"),
    ("wl step above span", lambda t: parse_range("400:401:2"), "STEP"),
]


@pytest.mark.parametrize("what,call,needle", API_CASES, ids=[c[0] for c in API_CASES])
def test_api_bad_input(what, call, needle, tmp_path):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", NanoabsWarning)
        with pytest.raises(NanoabsError) as e:
            call(tmp_path)
    msg = str(e.value)
    assert needle.lower() in msg.lower(), msg
    assert "\n" not in msg and SECRET not in msg and len(msg) < 400, msg


CLI_CASES = [
    ("radius 1e30", "spectrum --shape sphere --material Au --radius 1e30", "allowed range"),
    ("radius nan", "spectrum --shape sphere --material Au --radius nan", "radius"),
    ("wl decreasing list", "spectrum --shape sphere --material Au --radius 10 --wl 1550,1310", "increasing"),
    ("wl too many", "spectrum --shape sphere --material Au --radius 10 --wl 400:1e9:1e-4", "at most"),
    ("wl beyond table", "spectrum --shape sphere --material Au --radius 10 --wl 100,200", "outside"),
    ("semi-axes text", "spectrum --shape ellipsoid --material Au --semi-axes 10,x,5", "semi"),
    ("blackbody negligible T", "hot-carriers --shape sphere --material Au --radius 10 --barrier 0.8 "
                               "--spectrum blackbody:1e-30 --total-irradiance 1000", "allowed range"),
    ("laser overflow", "hot-carriers --shape sphere --material Au --radius 10 --barrier 0.8 "
                       "--laser-power 1e300 --beam-radius 1e-300", "overflow"),
    ("spectrum file quoted", "hot-carriers --shape sphere --material Au --radius 10 --barrier 0.8 "
                             "--spectrum SECRETFILE", "not a number"),
    ("spectrum file too big", "hot-carriers --shape sphere --material Au --radius 10 --barrier 0.8 "
                              "--spectrum BIGFILE", "MB"),
    ("materials show beyond table", "materials show Au --wl 1,2", "outside"),
]


@pytest.mark.parametrize("what,argv,needle", CLI_CASES, ids=[c[0] for c in CLI_CASES])
def test_cli_bad_input(what, argv, needle, tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    secret = _secret_file(tmp_path, "sec.csv", "wavelength_nm,irradiance_W_m2_nm\n400,1\n500,SECRET\n")
    big = _big_file(tmp_path, "big.csv")
    args = argv.replace("SECRETFILE", str(secret)).replace("BIGFILE", str(big)).split()
    code = main(args + (["-o", "o.csv"] if argv.startswith(("spectrum", "hot-carriers")) else []))
    err = capsys.readouterr().err
    assert code in (2, 3), err
    assert needle in err and err.count("\n") == 1 and SECRET not in err, err
    assert not (tmp_path / "o.csv").exists()


def test_at_least_eighty_cases():
    assert len(API_CASES) + len(CLI_CASES) >= 80


# -- what must work at the edges -------------------------------------------------------------

def test_range_parsing_keeps_both_ends():
    # 1937 - 1936.9 = 0.0999999999999091 in floating point: STOP must still be included.
    np.testing.assert_array_equal(parse_range("1936.9:1937:0.1"), [1936.9, 1937.0])
    w = parse_range("0.1:0.3:0.1")
    assert w.size == 3 and w[-1] == 0.3
    assert parse_range("400:1000:2")[-1] == 1000.0 and parse_range("400:1000:2").size == 301
    np.testing.assert_array_equal(parse_range("1310,1550"), [1310.0, 1550.0])
    assert parse_range("400:1000", need_step=False) == (400.0, 1000.0)


def test_cli_discrete_wavelengths_and_rounded_range(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    assert main("spectrum --shape sphere --material Au --radius 20 --wl 1310,1550 -o a.csv".split()) == 0
    df = pd.read_csv(tmp_path / "a.csv", comment="#")
    np.testing.assert_array_equal(df.wavelength_nm, [1310.0, 1550.0])
    assert main("spectrum --shape sphere --material Au:olmon-2012-evaporated --radius 20 "
                "--wl 1936.9:1937:0.1 -o b.csv".split()) == 0
    df = pd.read_csv(tmp_path / "b.csv", comment="#")
    assert df.wavelength_nm.tolist() == [1936.9, 1937.0]
    assert np.all(np.isfinite(df.select_dtypes("number").to_numpy()))


def test_table_edge_within_tolerance_is_the_end_value():
    # The range check accepts 1e-12 relative past the ends; the interpolant alone (NaN outside
    # its knots) would return NaN there, so the value must be the tabulated end point itself.
    au = material("Au")
    lo, hi = au.range_nm
    assert np.isnan(au._n_interp(np.log(hi * (1 + 5e-13))))  # what went wrong before
    for edge, past in ((hi, hi * (1 + 5e-13)), (lo, lo * (1 - 5e-13))):
        assert au.permittivity(past) == au.permittivity(edge)
        assert np.isfinite(au.permittivity(past))
    s = nanoabs.spectrum(Sphere("Au", 20), np.array([hi * 0.9, hi * (1 + 5e-13)]), medium="air")
    assert np.all(np.isfinite(s.sigma_abs_m2))


def test_byte_order_mark_accepted(tmp_path):
    p = tmp_path / "m.csv"
    p.write_bytes("\ufeffwavelength_nm,n,k\n400,1.5,0\n800,1.5,0\n".encode("utf-8"))
    assert load_table(p, kind="dielectric").refractive_index(600.0) == pytest.approx(1.5)
    s = tmp_path / "s.csv"
    s.write_bytes("\ufeffwavelength_nm,irradiance_W_m2_nm\n400,1\n800,1\n".encode("utf-8"))
    assert il.from_csv(s).spectral_irradiance(500.0) == 1.0


def test_sub_monolayer_radius_warns_and_families_work():
    with pytest.warns(NanoabsWarning, match="monolayer"):
        Sphere("Au", 5e-8)  # 50 nm typed in metres
    with warnings.catch_warnings():
        warnings.simplefilter("error", NanoabsWarning)
        Sphere("Au", 0.5)
    # an explicit (P, 1) family with P equal to the number of wavelengths is a family, not a diagonal
    radii = np.linspace(10, 40, WL.size)[:, None]
    s = nanoabs.spectrum(Sphere("Au", radii), WL, medium="water", method="mie")
    assert s.sigma_abs_m2.shape == (WL.size, WL.size)
    one = nanoabs.spectrum(Sphere("Au", float(radii[2, 0])), WL, medium="water", method="mie")
    np.testing.assert_allclose(s.sigma_abs_m2[2], one.sigma_abs_m2, rtol=1e-12)
    check_size_family(Sphere("Au", radii), WL)  # accepted
    assert Sphere("Au", MAX_SIZE_NM).radius_nm == MAX_SIZE_NM


def test_static_result_near_but_not_at_a_pole_is_kept():
    # Loss 1e-6 at the rod's long-axis pole: large but determined by the inputs, so returned;
    # sigma_abs = k Im(alpha) with alpha = V (eps - em)/(em + L (eps - em)) (B&H eq. 5.32):
    # at the pole Im(alpha) = V (eps' - em) / (L * 1e-6) to first order. Tolerance 1e-5.
    eps, em = _ellipsoid_pole((30.0, 10.0, 10.0), "x")
    L = q.depolarization_factors(30.0, 10.0, 10.0)[0]
    a = q.polarizability_ellipsoid(eps + 1e-6j, em, 30.0, 10.0, 10.0, axis="x")
    V = 4 / 3 * np.pi * 30 * 10 * 10
    assert abs(a.imag) == pytest.approx(V * abs(eps - em) / (L * 1e-6), rel=1e-5)
    # and the MLWA at the exact pole is finite (radiative damping)
    k = 2 * np.pi * 1.33 / 600
    assert np.isfinite(q.polarizability_ellipsoid_mlwa(eps, em, 30.0, 10.0, 10.0, k, axis="x"))


# -- property-based: constructors ----------------------------------------------------------

_numbers = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True), st.integers(-10**6, 10**30), st.booleans(),
    st.none(), st.text(max_size=5), st.complex_numbers(max_magnitude=1e3),
    st.lists(st.floats(0.1, 100), max_size=4), st.lists(st.lists(st.floats(0.1, 100), max_size=2), max_size=3),
    st.dictionaries(st.text(max_size=2), st.integers(), max_size=2),
    st.builds(lambda n: np.linspace(1, 50, n)[:, None], st.integers(1, 4)),
    st.builds(lambda n: pd.Series(np.linspace(1, 50, n)), st.integers(1, 3)),
)
_materials = st.one_of(st.sampled_from(["Au", "Ag", "SiO2", "gold", "Xx", "", "Au:nope", "1.5", "-2"]),
                       st.floats(allow_nan=True, allow_infinity=True), st.booleans(), st.none(),
                       st.lists(st.text(max_size=3), max_size=2), st.complex_numbers(max_magnitude=5))


def _check_sizes(*sizes):
    for s in sizes:
        a = np.asarray(s, dtype=float)
        assert a.ndim != 1 or a.size == 1
        assert np.all(np.isfinite(a)) and np.all(a > 0) and np.all(a <= MAX_SIZE_NM)


@settings(max_examples=300, deadline=None)
@given(kind=st.sampled_from(["sphere", "layered", "ellipsoid", "spheroid"]), mat=_materials,
       a=_numbers, b=_numbers, c=_numbers)
def test_fuzz_constructors(kind, mat, a, b, c):
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", NanoabsWarning)
        try:
            if kind == "sphere":
                p = Sphere(mat, a)
                _check_sizes(p.radius_nm)
            elif kind == "layered":
                p = LayeredSphere(mat, a, [("Au", b)])
                _check_sizes(p.core_radius_nm, p.shells[0][1])
            elif kind == "ellipsoid":
                p = Ellipsoid(mat, (a, b, c))
                _check_sizes(*p.semi_axes_nm)
            else:
                p = spheroid(mat, a, b)
                _check_sizes(*p.semi_axes_nm)
        except NanoabsError as e:
            assert "\n" not in str(e)
            return
    assert isinstance(p.describe(), dict)
    assert np.all(np.isfinite(np.asarray(p.volume_nm3(), dtype=float)))


# -- property-based: the CLI argument parser -------------------------------------------------

_values = st.sampled_from(["10", "0", "-5", "nan", "inf", "1e30", "1e-9", "1e4", "True", "", "abc", "1,2",
                           "20", "2.5", "1e308", "-0", "15", "30", "4"])
_wls = st.sampled_from(["500:700:100", "1310,1550", "1936.9:1937:0.1", "700,500", "400:900", "a:b:c",
                        "600", "0:1:0.5", "500:700:1e-9", "1e-3:1e-2:1e-3", "300:2000:850", "",
                        "450:850:200", "500,600,700"])
_BASE = {  # a valid command per shape; the fuzz then overrides some options
    "sphere": ["--material", "Au", "--radius", "20"],
    "shell": ["--core", "SiO2", "--core-radius", "30", "--shell", "Au", "--thickness", "5"],
    "spheroid": ["--material", "Au", "--length", "60", "--diameter", "20"],
    "ellipsoid": ["--material", "Ag", "--semi-axes", "30,15,10"],
}
_options = st.lists(st.one_of(
    st.tuples(st.sampled_from(["--radius", "--length", "--diameter", "--core-radius", "--thickness",
                               "--damping-a"]), _values),
    st.tuples(st.just("--semi-axes"), st.sampled_from(["30,10,10", "1,2", "a,b,c", "10,nan,5", "1e30,1,1",
                                                       "20,20,4"])),
    st.tuples(st.just("--material"), st.sampled_from(["Au", "Ag", "gold", "Xx", "1.5", "-1", "Au:nope"])),
    st.tuples(st.just("--medium"), st.sampled_from(["water", "1.33", "0", "air", "Si", "nan", "1.5"])),
    st.tuples(st.just("--method"), st.sampled_from(["auto", "mie", "quasistatic", "mlwa", "fem"])),
    st.tuples(st.just("--polarization"), st.sampled_from(["long", "short", "x", "random", "q"])),
    st.tuples(st.just("--wl"), _wls),
    st.tuples(st.just("--no-surface-damping"), st.just(None)),
), max_size=3)


@settings(max_examples=int(os.environ.get("NANOABS_FUZZ_EXAMPLES", 60)), deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(shape=st.sampled_from(["sphere", "shell", "spheroid", "ellipsoid", "cube"]), opts=_options,
       wl=_wls)
def test_fuzz_cli_spectrum(shape, opts, wl, tmp_path, capsys):
    out = tmp_path / "o.csv"
    for f in (out, tmp_path / "o.json"):
        if f.exists():
            f.unlink()
    argv = ["spectrum", "--shape", shape, "--wl", wl, "-o", str(out)] + _BASE.get(shape, [])
    for k, v in opts:
        argv += [k] + ([] if v is None else [v])
    try:
        code = main(argv)
    except SystemExit as e:  # argparse usage errors
        code = e.code
    event(f"exit {code}")
    err = capsys.readouterr().err
    assert code in (0, 2, 3), err
    assert "internal error" not in err and "Traceback" not in err
    if code:
        assert err.startswith("nanoabs: error:") or "usage:" in err, err
        assert not out.exists()
    else:
        df = pd.read_csv(out, comment="#")
        num = df.select_dtypes("number").to_numpy()
        assert num.size and np.all(np.isfinite(num)), "NaN or inf in an export"


@pytest.mark.parametrize("medium", ["water", "1.5"])
def test_export_of_metal_free_particle_has_no_nan(medium, tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    assert main(f"spectrum --shape sphere --material 1.5 --medium {medium} --radius 20 --wl 500:700:100 "
                "-o o.csv".split()) == 0
    df = pd.read_csv(tmp_path / "o.csv", comment="#")
    assert np.all(np.isfinite(df.select_dtypes("number").to_numpy()))


@settings(max_examples=200, deadline=None)
@given(text=st.text(string.digits + ".:,-+einf ", max_size=24))
def test_fuzz_wavelength_parser(text):
    try:
        w = parse_range(text)
    except NanoabsError as e:
        assert "\n" not in str(e) and len(str(e)) < 200
        return
    assert w.ndim == 1 and w.size >= 1 and np.all(np.isfinite(w)) and np.all(w > 0)
    assert np.all(np.diff(w) > 0) and w.size <= MAX_POINTS
    if text.count(":") == 2:  # START and STOP both kept when STOP lies on the grid
        start, stop, step = (float(v) for v in text.split(":"))
        assert w[0] == start
        k = (stop - start) / step
        if abs(k - round(k)) < 1e-10 * max(1.0, k):
            assert w[-1] == stop
