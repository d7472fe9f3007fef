"""Tests of nanoabs.illumination: reference spectra, Planck's law, sources, CSV reader."""

from __future__ import annotations

import json

import numpy as np
import pytest
from scipy import constants
from scipy.integrate import quad
from scipy.optimize import minimize_scalar

from nanoabs import illumination as il
from nanoabs._errors import DataError, NanoabsError


# ---------------------------------------------------------------------------
# Planck / Stefan-Boltzmann
# ---------------------------------------------------------------------------

@pytest.mark.parametrize("temperature_K", [300.0, 1000.0, 5778.0])
def test_planck_integral_equals_stefan_boltzmann(temperature_K):
    # Source: Stefan-Boltzmann law, int pi B_lambda dlambda = sigma T^4, with sigma from
    # scipy.constants (CODATA). Tolerance 1e-4 relative: the grid (0.02-2000 x the Wien
    # peak, 20000 log-spaced points) leaves a truncation + trapezoid error < 1e-7.
    peak_nm = 2.897771955e6 / temperature_K
    wl = np.geomspace(0.02 * peak_nm, 2000.0 * peak_nm, 20000)
    source = il.blackbody(temperature_K)
    total = source.integrated_irradiance_W_m2(wl)
    expected = constants.Stefan_Boltzmann * temperature_K**4
    assert total == pytest.approx(expected, rel=1e-4)


def test_planck_peak_follows_wien_displacement_law():
    # Source: Wien's displacement law, lambda_max T = b with b from scipy.constants
    # (CODATA 'Wien wavelength displacement law constant'). Tolerance 1e-6 relative
    # (optimizer xatol 1e-4 nm on a ~500 nm peak).
    b_m_K = constants.physical_constants["Wien wavelength displacement law constant"][0]
    t = 5778.0
    res = minimize_scalar(
        lambda wl: -il.planck_spectral_radiance(wl, t),
        bounds=(300.0, 800.0), method="bounded", options={"xatol": 1e-4},
    )
    assert res.x * 1e-9 * t == pytest.approx(b_m_K, rel=1e-6)


def test_blackbody_normalisations():
    # total_irradiance_W_m2 rescales so the integral equals it (same 1e-4 quadrature
    # tolerance as above); solid_angle_sr gives Omega * B_lambda, i.e. Omega/pi times the
    # default hemisphere value (exact up to rounding, 1e-12).
    t = 5778.0
    peak_nm = 2.897771955e6 / t
    wl = np.geomspace(0.02 * peak_nm, 2000.0 * peak_nm, 20000)
    scaled = il.blackbody(t, total_irradiance_W_m2=1000.0)
    assert scaled.integrated_irradiance_W_m2(wl) == pytest.approx(1000.0, rel=1e-4)
    omega = 6.8e-5
    small = il.blackbody(t, solid_angle_sr=omega)
    ratio = small.spectral_irradiance(550.0) / il.blackbody(t).spectral_irradiance(550.0)
    assert ratio == pytest.approx(omega / np.pi, rel=1e-12)
    with pytest.raises(NanoabsError):
        il.blackbody(t, total_irradiance_W_m2=1.0, solid_angle_sr=1e-4)


def test_planck_extreme_wavelengths_are_finite():
    # exp(hc/lambda kT) overflows far in the Wien tail; the radiance must then be 0, not NaN.
    b = il.planck_spectral_radiance(np.array([1.0, 1e9]), 300.0)
    assert np.all(np.isfinite(b)) and b[0] == 0.0 and b[1] > 0


# ---------------------------------------------------------------------------
# ASTM G173-03
# ---------------------------------------------------------------------------

@pytest.mark.parametrize(
    "name, expected_W_m2",
    [("am1.5g", 1000.4), ("am1.5d", 900.1), ("am0", 1348.0)],
)
def test_astm_g173_band_integrals(name, expected_W_m2):
    # Source: integrated irradiances stated in ASTM G173-03 (global tilt 1000.4 W/m^2,
    # direct + circumsolar 900.1 W/m^2, extraterrestrial ~1348 W/m^2 over 280-4000 nm;
    # from memory). Tolerance 0.5 %.
    source = il.solar(name)
    total = il.band_integral(source.nodes_nm, source.spectral_irradiance(source.nodes_nm))
    assert total == pytest.approx(expected_W_m2, rel=5e-3)


def test_astm_table_shape_and_case_insensitive_names():
    # The standard tabulates 2002 wavelengths on 280-4000 nm (0.5 nm steps below 400 nm).
    s = il.solar("AM1.5G")
    assert s.nodes_nm.size == 2002
    assert s.range_nm == (280.0, 4000.0)
    assert s.nodes_nm[1] - s.nodes_nm[0] == 0.5
    assert il.solar(" Am0 ").parameters["name"] == "am0"


def test_astm_matches_pvlib_copy():
    # Independent: the shipped CSV against pvlib's own reader of its copy (exact values,
    # also at interpolated wavelengths: both are linear interpolation; 1e-12 relative).
    spectrum = pytest.importorskip("pvlib.spectrum")
    ref = spectrum.get_reference_spectra()
    wl = ref.index.to_numpy(dtype=float)
    for name, col in [("am1.5g", "global"), ("am1.5d", "direct"), ("am0", "extraterrestrial")]:
        np.testing.assert_allclose(il.solar(name).spectral_irradiance(wl), ref[col].to_numpy(), rtol=1e-12)
    between = np.array([300.25, 555.5, 1234.5, 3999.0])
    ref_i = spectrum.get_reference_spectra(between)
    np.testing.assert_allclose(il.solar("am1.5g").spectral_irradiance(between), ref_i["global"], rtol=1e-12)


def test_solar_linear_interpolation_between_nodes():
    # Linear interpolation: the midpoint of two table nodes is their mean (exact, 1e-14).
    s = il.solar("am1.5g")
    wl = s.nodes_nm[1000:1002]
    e = s.spectral_irradiance(wl)
    assert s.spectral_irradiance(wl.mean()) == pytest.approx(e.mean(), rel=1e-14)


def test_solar_out_of_range_and_unknown_name():
    s = il.solar("am1.5d")
    with pytest.raises(NanoabsError) as exc:
        s.spectral_irradiance([250.0, 500.0])
    msg = str(exc.value)
    assert "AM1.5D" in msg and "280-4000 nm" in msg and "250-500 nm" in msg and "\n" not in msg
    with pytest.raises(NanoabsError, match="4500"):
        s.spectral_irradiance(4500.0)
    with pytest.raises(NanoabsError, match="am1.5g"):
        il.solar("am15g")


def test_runtime_does_not_import_pvlib():
    # The runtime must work with pvlib unavailable: block it and evaluate a solar spectrum
    # in a fresh interpreter (an import of pvlib would raise ImportError there).
    import os
    import subprocess
    import sys

    code = (
        "import sys; sys.modules['pvlib'] = None\n"
        "from nanoabs import illumination as il\n"
        "print(il.solar('am1.5g').spectral_irradiance(500.0))\n"
    )
    env = dict(os.environ, PYTHONPATH=os.pathsep.join(sys.path))
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, env=env, timeout=60)
    assert out.returncode == 0, out.stderr
    assert float(out.stdout) == pytest.approx(1.5451, rel=1e-12)  # table value at 500 nm


# ---------------------------------------------------------------------------
# Monochromatic sources and lasers
# ---------------------------------------------------------------------------

def test_gaussian_beam_profile_integrates_to_power():
    # Source: Gaussian beam I(r) = 2P/(pi w^2) exp(-2 r^2/w^2) (Siegman, Lasers, 1986,
    # ch. 17); int_0^inf 2 pi r I(r) dr = P. Tolerance 1e-10 (quad).
    power_W, w_nm = 2.5e-3, 750.0
    integrand = lambda r_nm: 2 * np.pi * (r_nm * 1e-9) * il.gaussian_beam_irradiance(r_nm, power_W, w_nm) * 1e-9
    total, _ = quad(integrand, 0.0, 20 * w_nm, epsabs=0, epsrel=1e-12)
    assert total == pytest.approx(power_W, rel=1e-10)


def test_laser_peak_irradiance_value():
    # Hand value: P = 1 mW, w = 1 um -> I0 = 2e-3 / (pi 1e-12 m^2) = 6.3662e8 W/m^2 (1e-4).
    src = il.laser(1e-3, 1000.0)
    assert src.spectral_irradiance(633.0) == pytest.approx(6.3662e8, rel=1e-4)
    assert src.is_monochromatic and src.kind == "laser"


def test_monochromatic_is_flat_and_not_integrable():
    src = il.monochromatic(1e4)
    wl = np.array([400.0, 500.0, 600.0])
    np.testing.assert_array_equal(src.spectral_irradiance(wl), 1e4)
    assert src.is_monochromatic and src.unit == "W m^-2"
    with pytest.raises(NanoabsError, match="monochromatic"):
        src.integrated_irradiance_W_m2(wl)
    meta = src.metadata()
    json.dumps(meta)
    assert meta["is_monochromatic"] is True and meta["parameters"]["irradiance_W_m2"] == 1e4


def test_shapes_are_preserved():
    src = il.flat(2.0)
    assert np.shape(src.spectral_irradiance(500.0)) == ()
    assert src.spectral_irradiance(np.full((2, 3), 500.0)).shape == (2, 3)


@pytest.mark.parametrize(
    "make",
    [
        lambda: il.monochromatic(-1.0),
        lambda: il.laser(-1e-3, 500.0),
        lambda: il.laser(1e-3, 0.0),
        lambda: il.laser(1e-3, -5.0),
        lambda: il.blackbody(-300.0),
        lambda: il.blackbody(0.0),
        lambda: il.blackbody(300.0, total_irradiance_W_m2=-1.0),
        lambda: il.blackbody(300.0, solid_angle_sr=-1.0),
        lambda: il.flat(-0.1),
        lambda: il.flat(float("nan")),
        lambda: il.flat(1.0).spectral_irradiance(-500.0),
        lambda: il.flat(1.0).filtered(700.0, 400.0),
        lambda: il.flat(1.0).filtered(-1.0, None),
    ],
)
def test_invalid_inputs_raise_one_line_error(make):
    with pytest.raises(NanoabsError) as exc:
        make()
    assert "\n" not in str(exc.value)


# ---------------------------------------------------------------------------
# Filters
# ---------------------------------------------------------------------------

def test_filters_band_long_short_pass():
    base = il.flat(3.0)
    wl = np.array([300.0, 400.0, 550.0, 700.0, 800.0])
    np.testing.assert_array_equal(base.filtered(400.0, 700.0).spectral_irradiance(wl), [0, 3, 3, 3, 0])
    np.testing.assert_array_equal(base.filtered(lo_nm=550.0).spectral_irradiance(wl), [0, 0, 3, 3, 3])
    np.testing.assert_array_equal(base.filtered(hi_nm=550.0).spectral_irradiance(wl), [3, 3, 3, 0, 0])
    # Filtered solar spectrum: wavelengths blocked by the filter need not be in the table.
    s = il.solar("am1.5g").filtered(400.0, 700.0)
    assert s.spectral_irradiance(250.0) == 0.0
    assert s.kind == "solar+filter" and s.metadata()["parameters"]["filter_hi_nm"] == 700.0
    # Integral of a flat 3 W m^-2 nm^-1 through a 400-700 nm band is 900 W m^-2 (exact).
    band = np.linspace(400.0, 700.0, 31)
    assert base.filtered(400.0, 700.0).integrated_irradiance_W_m2(band) == pytest.approx(900.0, rel=1e-12)


def test_band_integral_checks():
    # Trapezoid rule is exact for a linear function: int_0^2 (x + 1) dx = 4.
    x = np.array([0.0, 0.5, 2.0])
    assert il.band_integral(x, x + 1) == pytest.approx(4.0, rel=1e-14)
    np.testing.assert_allclose(il.band_integral(x, np.vstack([x + 1, 2 * x])), [4.0, 4.0])
    with pytest.raises(NanoabsError):
        il.band_integral([1.0, 1.0, 2.0], [1, 2, 3])
    with pytest.raises(NanoabsError):
        il.band_integral([1.0, 2.0], [1, 2, 3])


# ---------------------------------------------------------------------------
# CSV reader
# ---------------------------------------------------------------------------

def _write(tmp_path, text, name="spec.csv", mode="w"):
    p = tmp_path / name
    if mode == "wb":
        p.write_bytes(text)
    else:
        p.write_text(text)
    return p


def test_csv_round_trip(tmp_path):
    # A valid table is reproduced at its nodes and linearly interpolated between them.
    wl = np.array([400.0, 450.0, 500.0, 600.0])
    e = np.array([0.5, 1.0, 1.25, 0.0])
    body = "\n".join(f"{a},{b}" for a, b in zip(wl, e))
    p = _write(tmp_path, f"# my lamp\n# measured 2024\nwavelength_nm,irradiance_W_m2_nm\n{body}\n\n")
    src = il.from_csv(p)
    np.testing.assert_array_equal(src.spectral_irradiance(wl), e)
    assert src.spectral_irradiance(425.0) == pytest.approx(0.75, rel=1e-14)
    assert src.range_nm == (400.0, 600.0) and src.kind == "csv"
    np.testing.assert_array_equal(src.nodes_nm, wl)
    json.dumps(src.metadata())
    # Column order and extra columns do not matter.
    p2 = _write(tmp_path, "irradiance_W_m2_nm,note,wavelength_nm\n1,a,500\n2,b,510\n", name="b.csv")
    assert il.from_csv(p2).spectral_irradiance(505.0) == pytest.approx(1.5)


BAD_CSV = {
    "missing_column": ("wavelength_nm,irradiance\n400,1\n500,2\n", "irradiance_W_m2_nm"),
    "no_header": ("400,1\n500,2\n", "missing column"),
    # raw cell text is never quoted (a file's contents stay out of messages): position + reason
    "non_numeric": ("wavelength_nm,irradiance_W_m2_nm\n400,1\n500,abc\n", "line 3, column 'irradiance_W_m2_nm': not a number"),
    "nan": ("wavelength_nm,irradiance_W_m2_nm\n400,nan\n500,2\n", "not finite"),
    "inf": ("wavelength_nm,irradiance_W_m2_nm\n400,1\ninf,2\n", "line 3, column 'wavelength_nm': not finite"),
    "negative": ("wavelength_nm,irradiance_W_m2_nm\n400,1\n500,-2\n", "-2"),
    "decreasing": ("wavelength_nm,irradiance_W_m2_nm\n400,1\n390,2\n", "390"),
    "duplicate": ("wavelength_nm,irradiance_W_m2_nm\n400,1\n400,2\n", "strictly increasing"),
    "one_row": ("wavelength_nm,irradiance_W_m2_nm\n400,1\n", "at least 2"),
    "header_only": ("# c\nwavelength_nm,irradiance_W_m2_nm\n", "at least 2"),
    "empty": ("", "empty"),
    "short_row": ("wavelength_nm,irradiance_W_m2_nm\n400,1\n500\n", "empty"),
    "zero_wavelength": ("wavelength_nm,irradiance_W_m2_nm\n0,1\n500,2\n", "> 0"),
}


@pytest.mark.parametrize("case", sorted(BAD_CSV))
def test_csv_bad_files_raise_data_error(tmp_path, case):
    text, needle = BAD_CSV[case]
    p = _write(tmp_path, text)
    with pytest.raises(DataError) as exc:
        il.from_csv(p)
    msg = str(exc.value)
    assert str(p) in msg and needle in msg and "\n" not in msg


def test_csv_error_names_line(tmp_path):
    p = _write(tmp_path, "# comment\nwavelength_nm,irradiance_W_m2_nm\n400,1\n500,x\n")
    with pytest.raises(DataError, match=r"line 4, column 'irradiance_W_m2_nm'"):
        il.from_csv(p)


def test_csv_missing_unreadable_and_out_of_range(tmp_path):
    with pytest.raises(DataError, match="not found"):
        il.from_csv(tmp_path / "nope.csv")
    with pytest.raises(DataError, match="directory"):
        il.from_csv(tmp_path)
    p = _write(tmp_path, b"wavelength_nm,irradiance_W_m2_nm\n400,\xff\xfe\n", mode="wb")
    with pytest.raises(DataError, match="cannot be read"):
        il.from_csv(p)
    good = _write(tmp_path, "wavelength_nm,irradiance_W_m2_nm\n400,1\n500,2\n", name="g.csv")
    with pytest.raises(NanoabsError, match="400-500 nm.*requested 350-450 nm"):
        il.from_csv(good).spectral_irradiance([350.0, 450.0])
