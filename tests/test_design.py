"""Design studies: sweeps (chunking, executors, streaming, resume), ensembles, search, errors."""

from __future__ import annotations

import json
from concurrent.futures import ProcessPoolExecutor
from pathlib import Path

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st
from numpy.testing import assert_allclose, assert_array_equal
from pandas.testing import assert_frame_equal
from scipy.constants import c as C_LIGHT, h as H_PLANCK
from scipy.optimize import brentq

import nanoabs
from nanoabs import NanoabsError, design
from nanoabs.design import _engine, _ensemble, _sweep
from nanoabs.drude_lorentz import HC_EV_NM, DrudeLorentz
from nanoabs.export import read_export
from nanoabs.particles import Sphere, spheroid

WL = np.linspace(400.0, 900.0, 126)
RADII = np.array([5.0, 12.0, 20.0, 33.0, 47.5, 60.0, 80.0])
ROD_PARAMS = {"aspect_ratio": np.linspace(1.5, 5.0, 8), "diameter_nm": [10.0, 20.0]}


def _sphere_sweep(**kw):
    kw.setdefault("progress", False)
    return design.sweep("sphere", {"radius_nm": RADII, "material": ["Au", "Ag"]}, WL, **kw)


def _assert_frames_close(a, b, rtol):
    assert list(a.columns) == list(b.columns)
    for c in a.columns:
        if a[c].dtype.kind == "f":
            assert_allclose(a[c].to_numpy(), b[c].to_numpy(), rtol=rtol, atol=0, err_msg=c)
        else:
            assert_array_equal(a[c].to_numpy(), b[c].to_numpy(), err_msg=c)


# --------------------------------------------------------------------------- sweep


def test_sweep_reproduces_single_spectra():
    # Source: nanoabs.spectrum of each particle on its own; rtol 1e-14 (batching rounds in the last bit).
    df = design.sweep("sphere", {"radius_nm": RADII}, WL, progress=False, chunk_size=3)
    assert list(df.columns) == ["design_id", "radius_nm", "material"] + design.RESULT_COLUMNS
    assert len(df) == RADII.size * WL.size
    for i, r in enumerate(RADII):
        s = nanoabs.spectrum(Sphere("Au", r), WL, medium="water")
        g = df[df.design_id == i]
        assert_array_equal(g.radius_nm, r)
        assert_array_equal(g.wavelength_nm, WL)
        for col in ("sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2", "q_abs", "q_sca", "q_ext",
                    "absorbed_fraction"):
            assert_allclose(g[col].to_numpy(), getattr(s, col), rtol=1e-14, atol=0, err_msg=col)


def test_sweep_spheroid_and_shell_reproduce_single_spectra():
    # Source: nanoabs.spectrum of the particle built directly; rtol 1e-14. Mixed rods and discs
    # (aspect ratio below and above 1) and a swept medium index in one sweep.
    df = design.sweep("spheroid", {"aspect_ratio": [0.5, 3.0], "diameter_nm": [16.0]}, WL,
                      polarization="long", progress=False)
    for i, (ar, kind) in enumerate([(0.5, "disc"), (3.0, "rod")]):
        p = spheroid("Au", ar * 16.0, 16.0)
        assert p.kind == kind
        s = nanoabs.spectrum(p, WL, polarization="long")
        g = df[df.design_id == i]
        assert_array_equal(g.length_nm, ar * 16.0)
        assert_allclose(g.sigma_abs_m2.to_numpy(), s.sigma_abs_m2, rtol=1e-14, atol=0)
    df = design.sweep("shell", {"core_radius_nm": [30.0], "thickness_nm": [6.0, 9.0],
                                "medium_index": [1.33, 1.5]}, WL, progress=False)
    assert list(df.columns[:6]) == ["design_id", "core_radius_nm", "thickness_nm", "core_material",
                                    "material", "medium_index"]
    g = df[df.design_id == 3]  # thickness 9, n = 1.5 (first parameter varies slowest)
    s = nanoabs.spectrum(nanoabs.LayeredSphere("SiO2", 30.0, [("Au", 9.0)]), WL, medium=1.5)
    assert (g.thickness_nm.iloc[0], g.medium_index.iloc[0]) == (9.0, 1.5)
    assert_allclose(g.sigma_abs_m2.to_numpy(), s.sigma_abs_m2, rtol=1e-14, atol=0)


def test_chunk_sizes_agree():
    # Source: the same sweep with chunk size 1, 7 and all designs in one chunk. Agreement to
    # rtol 1e-14: batches of different composition round differently in the last bit (module docs).
    frames = [_sphere_sweep(chunk_size=c) for c in (1, 7, 1000)]
    rods = [design.sweep("spheroid", ROD_PARAMS, WL, chunk_size=c, progress=False) for c in (1, 7, 1000)]
    for f in frames[1:]:
        _assert_frames_close(frames[0], f, 1e-14)
    for f in rods[1:]:
        _assert_frames_close(rods[0], f, 1e-14)


def test_executors_give_bit_identical_chunks():
    # Source: the in-process result; a chunk's result must not depend on who computed it (exact).
    ref = _sphere_sweep(chunk_size=3)
    with ProcessPoolExecutor(max_workers=2) as ex:
        pool = _sphere_sweep(chunk_size=3, executor=ex)
    own = _sphere_sweep(chunk_size=3, executor="processes")
    assert_frame_equal(ref, pool, check_exact=True)
    assert_frame_equal(ref, own, check_exact=True)
    assert pool.attrs["metadata"]["executor"] == "ProcessPoolExecutor"


def test_dask_client_gives_bit_identical_chunks():
    # Source: the in-process result (exact), with an in-process Dask cluster as the executor.
    distributed = pytest.importorskip("distributed")
    ref = _sphere_sweep(chunk_size=4)
    with distributed.Client(processes=False, n_workers=1, threads_per_worker=2,
                            dashboard_address=None) as client:
        got = _sphere_sweep(chunk_size=4, executor=client)
    assert_frame_equal(ref, got, check_exact=True)


def test_streamed_sweep_equals_in_memory(tmp_path):
    # Source: the in-memory frame (exact): returned frame, and the CSV + sidecar read back.
    ref = _sphere_sweep(chunk_size=3)
    out = tmp_path / "sw.csv"
    got = _sphere_sweep(chunk_size=3, out=out)
    assert_frame_equal(ref, got, check_exact=True)
    back, header = read_export(out)
    assert_frame_equal(ref, back, check_exact=True)
    units = {c["name"]: c["unit"] for c in header["columns"]}
    assert units["sigma_abs_m2"] == "m^2" and units["radius_nm"] == "nm" and units["q_abs"] == "1"
    assert header["metadata"]["shape"] == "sphere" and header["metadata"]["n_designs"] == 14
    assert not Path(str(out) + ".parts").exists()
    with pytest.raises(NanoabsError, match="exists"):
        _sphere_sweep(chunk_size=3, out=out)
    again = _sphere_sweep(chunk_size=3, out=out, force=True)
    assert_frame_equal(ref, again, check_exact=True)
    # an in-memory table exported afterwards carries the same units and metadata
    design.write(ref, tmp_path / "mem.csv")
    back2, header2 = read_export(tmp_path / "mem.csv")
    assert_frame_equal(ref, back2, check_exact=True)
    assert {c["name"]: c["unit"] for c in header2["columns"]} == units


def test_part_files_are_formatted_like_the_export():
    # Source: pandas to_csv as used by nanoabs.export.write_export (byte-identical text), on values
    # that break naive formatting (NaN, -0, extremes, text needing quotes).
    import pandas as pd

    f = pd.DataFrame({"design_id": np.arange(6, dtype=np.int64),
                      "x": [1 / 3, np.nan, -0.0, 1.7976931348623157e308, 5e-324, np.inf],
                      "material": ["Au", 'say "x"', "a,b", "", "Cu", "Al"]})
    assert _engine.csv_text(f) == f.to_csv(index=False, na_rep="nan", lineterminator="\n")


def test_interrupted_sweep_resumes_without_recomputing(tmp_path, monkeypatch):
    # Source: the uninterrupted in-memory sweep (exact); counts of chunk computations.
    ref = _sphere_sweep(chunk_size=2)
    n_chunks = 7  # 14 designs / 2
    real = _sweep._compute_chunk
    calls = []

    def interrupted(plan, index):
        if len(calls) == 3:
            raise KeyboardInterrupt
        calls.append(index)
        return real(plan, index)

    out = tmp_path / "run.csv"
    monkeypatch.setattr(_sweep, "_compute_chunk", interrupted)
    with pytest.raises(KeyboardInterrupt):
        _sphere_sweep(chunk_size=2, out=out)
    parts = Path(str(out) + ".parts")
    assert sorted(p.name for p in parts.glob("chunk_*.csv")) == [f"chunk_{i:06d}.csv" for i in range(3)]
    assert not out.exists()

    rerun = []

    def counting(plan, index):
        rerun.append(index)
        return real(plan, index)

    monkeypatch.setattr(_sweep, "_compute_chunk", counting)
    got = _sphere_sweep(chunk_size=2, out=out)
    assert rerun == list(range(3, n_chunks))  # finished chunks are not recomputed
    assert_frame_equal(ref, got, check_exact=True)
    assert_frame_equal(ref, read_export(out)[0], check_exact=True)
    assert json.loads(out.with_suffix(".json").read_text())["metadata"]["resumed_chunks"] == 3


def test_stale_work_directory_needs_force(tmp_path, monkeypatch):
    # Source: contract — parts of a sweep with other arguments are never mixed in silently.
    real = _sweep._compute_chunk

    def stop_after_first(plan, index):
        if index > 0:
            raise KeyboardInterrupt
        return real(plan, index)

    out = tmp_path / "s.csv"
    monkeypatch.setattr(_sweep, "_compute_chunk", stop_after_first)
    with pytest.raises(KeyboardInterrupt):
        _sphere_sweep(chunk_size=2, out=out)
    monkeypatch.setattr(_sweep, "_compute_chunk", real)
    with pytest.raises(NanoabsError, match="different arguments"):
        _sphere_sweep(chunk_size=5, out=out)
    got = _sphere_sweep(chunk_size=5, out=out, force=True)
    assert_frame_equal(_sphere_sweep(chunk_size=5), got, check_exact=True)


def test_over_memory_budget_returns_the_path(tmp_path):
    # Source: the in-memory frame (exact), read back from the path returned instead of a frame.
    out = tmp_path / "big.csv"
    got = _sphere_sweep(chunk_size=4, out=out, memory_budget_MB=1e-3)
    assert got == out
    assert_frame_equal(_sphere_sweep(chunk_size=4), read_export(out)[0], check_exact=True)


def test_progress_bar_on_stderr_and_silenced(capsys, monkeypatch):
    # Source: contract — progress on stderr only; progress=False prints nothing.
    monkeypatch.setattr(_engine, "_PROGRESS_DELAY_S", 0.0)
    _sphere_sweep(chunk_size=5, progress=True)
    cap = capsys.readouterr()
    assert "sweep sphere" in cap.err and "3/3" in cap.err and cap.out == ""
    _sphere_sweep(chunk_size=5, progress=False)
    assert capsys.readouterr().err == ""


def test_gold_rod_peak_red_shifts_about_100_nm_per_unit_aspect_ratio():
    # Fact of the trade (common practice; published: Link, Mohamed & El-Sayed, J. Phys. Chem. B
    # 103, 3073 (1999), from memory): the longitudinal peak of Au rods in water moves roughly
    # linearly with aspect ratio, ~100 nm per unit over 2-5. Check: slope 60-140 nm, r^2 > 0.98.
    ar = np.linspace(2.0, 5.0, 7)
    wl = np.linspace(500.0, 1300.0, 801)
    df = design.sweep("spheroid", {"aspect_ratio": ar, "diameter_nm": [15.0]}, wl, polarization="long",
                      progress=False)
    sig = df.sigma_abs_m2.to_numpy().reshape(ar.size, wl.size)
    peaks = wl[np.argmax(sig, axis=1)]
    slope, icpt = np.polyfit(ar, peaks, 1)
    r2 = 1 - np.sum((peaks - (slope * ar + icpt)) ** 2) / np.sum((peaks - peaks.mean()) ** 2)
    assert 60 <= slope <= 140
    assert r2 > 0.98


# --------------------------------------------------------------------------- ensembles


def test_delta_distribution_is_the_single_particle():
    # Source: nanoabs.spectrum of the nominal particle; exact (spread 0 is one node of weight 1).
    s = nanoabs.spectrum(Sphere("Au", 30.0), WL)
    e = design.ensemble_average("sphere", {"radius_nm": 30.0}, {"radius_nm": 0.0}, WL)
    for a in ("sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2", "q_abs"):
        assert_array_equal(getattr(e, a), getattr(s, a))
    r = nanoabs.spectrum(spheroid("Au", 45.0, 15.0), WL, polarization="random")
    e = design.ensemble_average("spheroid", {"aspect_ratio": 3.0, "diameter_nm": 15.0},
                                {"aspect_ratio": 0.0}, WL, distribution="lognormal")
    assert_array_equal(e.sigma_abs_m2, r.sigma_abs_m2)


def test_histogram_is_the_weighted_mean_of_single_spectra():
    # Source: explicit weighted sum of nanoabs.spectrum calls; rtol 1e-13.
    values, weights = np.array([20.0, 25.0, 32.0]), np.array([1.0, 3.0, 2.0])
    e = design.ensemble_average("sphere", {"radius_nm": 25.0}, {}, WL,
                                distribution={"radius_nm": (values, weights)})
    manual = sum(w * nanoabs.spectrum(Sphere("Au", v), WL).sigma_abs_m2 for v, w in zip(values, weights))
    assert_allclose(e.sigma_abs_m2, manual / weights.sum(), rtol=1e-13)


@pytest.mark.parametrize("kind", ["normal", "lognormal"])
def test_quadrature_reproduces_mean_and_relative_spread(kind):
    # Source: definition of the distributions — mean mu and E[x^2] = mu^2 (1 + s^2) for both
    # (log-normal: exp(2 mu_ln + 2 sigma_ln^2) with sigma_ln^2 = ln(1 + s^2)); rtol 1e-12.
    x, w, dropped = _ensemble._quadrature(kind, 30.0, 0.1, 25)
    assert dropped < 1e-13
    assert np.sum(w * x) == pytest.approx(30.0, rel=1e-12)
    assert np.sum(w * x**2) == pytest.approx(30.0**2 * (1 + 0.1**2), rel=1e-12)


@settings(max_examples=12, deadline=None)
@given(s1=st.floats(0.0, 0.15), ds=st.floats(0.03, 0.1))
def test_wider_aspect_ratio_spread_lowers_and_broadens_the_peak(s1, ds):
    # Property (inhomogeneous broadening; common practice): for Au rods (AR 3, D 15 nm, field along
    # the axis) a wider relative spread of the aspect ratio lowers the peak of the mean sigma_abs
    # and widens it.
    wl = np.linspace(500.0, 1100.0, 301)
    kw = dict(polarization="long")
    nom = {"aspect_ratio": 3.0, "diameter_nm": 15.0}
    a = design.ensemble_average("spheroid", nom, {"aspect_ratio": s1}, wl, **kw)
    b = design.ensemble_average("spheroid", nom, {"aspect_ratio": s1 + ds}, wl, **kw)
    assert b.sigma_abs_m2.max() < a.sigma_abs_m2.max()
    assert b.fwhm_nm() > a.fwhm_nm()


# --------------------------------------------------------------------------- search


class DrudeMetal:
    """A free-electron metal eps = eps_inf - wp^2/(w^2 + i g w) with the Material interface."""

    name, kind, is_metal, label, range_nm = "drude-test", "metal", True, "Drude test metal", (100.0, 5000.0)

    def __init__(self, eps_inf, plasma_eV, damping_eV):
        self.model = DrudeLorentz(eps_inf, plasma_eV, damping_eV)

    def permittivity(self, wl):
        return self.model.permittivity(wl)

    def refractive_index(self, wl):
        return np.sqrt(self.permittivity(wl))

    def metadata(self):
        return {"material": self.name, "model": "Drude, eps_inf=1, 9 eV, 0.07 eV"}


def _prolate_L(ar):
    """Depolarisation factor along the long axis of a prolate spheroid (B&H 1983, eq. 5.33)."""
    e = np.sqrt(1 - 1 / ar**2)
    return (1 - e**2) / e**2 * (-1 + np.log((1 + e) / (1 - e)) / (2 * e))


def test_search_finds_the_quasistatic_rod_resonance():
    # Independent solution: Re eps(l0) = -eps_m (1 - L)/L (Bohren & Huffman 1983, eq. 5.32) with
    # Re eps = eps_inf - wp^2/(w^2 + g^2) of the Drude metal gives L; eq. 5.33 gives the aspect
    # ratio. The searched rod's peak must sit at the band centre (+-2 nm) and its aspect ratio
    # agree with the solution within 1% (the band average and damping shift the optimum slightly).
    metal, n_med, lam0 = DrudeMetal(1.0, 9.0, 0.07), 1.33, 700.0
    w = HC_EV_NM / lam0
    L = n_med**2 / (n_med**2 - (1.0 - 9.0**2 / (w**2 + 0.07**2)))
    ar0 = brentq(lambda a: _prolate_L(a) - L, 1.01, 20.0)
    res = design.search(design.band(center_nm=lam0, width_nm=10.0), families=["rod"],
                        objective="sigma_abs_per_volume", materials=[metal], medium=n_med,
                        method="quasistatic", polarization="long", surface_damping=False, top=3,
                        progress=False)
    best = res.iloc[0]
    assert best.family == "rod" and best.stage == "refined"
    assert best.peak_wavelength_nm == pytest.approx(lam0, abs=2.0)
    assert best.aspect_ratio == pytest.approx(ar0, rel=0.01)
    assert best.length_nm == pytest.approx(best.aspect_ratio * best.diameter_nm, rel=1e-12)
    # a longer rod (fixed diameter) is red-shifted: positive sensitivity to the length
    assert best.dpeak_d_length_nm > 0 > best.dpeak_d_diameter_nm
    assert res.attrs["figure_of_merit"]["unit"] == "m^-1"


def test_search_injection_matches_the_hot_carrier_pipeline():
    # Source: nanoabs.hot_carrier_estimate for the found sphere with an attenuation length of 1e9 nm
    # (transport factor -> 1), band-integrated on its own grid (401 points plus the nodes of the
    # tabulated spectrum, which has sharp absorption bands); rtol 2e-3 (different trapezoid grids).
    lo, hi = 1000.0, 1200.0
    sun = nanoabs.illumination.solar("am1.5g")
    res = design.search((lo, hi), families=["sphere"], objective="injection", barrier_eV=0.8,
                        illumination=sun, top=2, progress=False)
    best = res.iloc[0]
    assert res.attrs["figure_of_merit"]["unit"] == "s^-1"
    p = Sphere("Au", best.radius_nm)
    wl = np.union1d(np.linspace(lo, hi, 401), sun.nodes_nm[(sun.nodes_nm > lo) & (sun.nodes_nm < hi)])
    hcr = nanoabs.hot_carrier_estimate(nanoabs.spectrum(p, wl), p, sun, barrier_eV=0.8,
                                       attenuation_length_nm=1e9)
    assert best.figure_of_merit == pytest.approx(hcr.totals["injected_electron_rate_per_s"], rel=2e-3)
    # the same integral written out: sigma E lambda/(hc) eta
    s = nanoabs.spectrum(p, wl)
    eta = nanoabs.hotcarriers.escape_cone_yield(HC_EV_NM / wl, 0.8, 5.53)
    direct = np.trapezoid(s.sigma_abs_m2 * sun.spectral_irradiance(wl) * wl * 1e-9 / (H_PLANCK * C_LIGHT)
                          * eta, wl)
    assert best.figure_of_merit == pytest.approx(direct, rel=2e-3)


def test_search_ranks_families_and_reports_columns(tmp_path):
    # Source: contract — ranked by figure of merit, best of every family present, units given.
    res = design.search(design.band(lo_nm=780.0, hi_nm=820.0), families=["sphere", "shell", "rod"],
                        objective="q_abs", top=6, progress=False)
    assert list(res["rank"]) == list(range(1, len(res) + 1))
    assert np.all(np.diff(res.figure_of_merit.to_numpy()) <= 0)
    assert set(res.family) == {"sphere", "shell", "rod"}
    for c in res.columns:
        assert c in res.attrs["units"]
    design.write(res, tmp_path / "search.json")
    back, header = read_export(tmp_path / "search.json")
    assert list(back.columns) == list(res.columns)
    assert header["metadata"]["figure_of_merit_definition"]["objective"] == "q_abs"
    shell = res[res.family == "shell"].iloc[0]
    assert shell.outer_size_nm <= 150.0 + 1e-6 and shell.thickness_nm >= 2.0 - 1e-9
    assert np.isnan(shell.radius_nm) and np.isfinite(shell.dpeak_d_thickness_nm)
    # an Au nanoshell red-shifts as the shell thins (Oldenburg et al., Chem. Phys. Lett. 288, 243
    # (1998), from memory): negative sensitivity to the thickness
    assert shell.dpeak_d_thickness_nm < 0


# --------------------------------------------------------------------------- bad inputs


@pytest.mark.parametrize("call,match", [
    (lambda: design.sweep("sphere", {"radius": [10.0]}, WL), "did you mean 'radius_nm'"),
    (lambda: design.sweep("sphere", {"radius_nm": []}, WL), "empty"),
    (lambda: design.sweep("sphere", {"radius_nm": [10.0, -2.0]}, WL), "must be > 0"),
    (lambda: design.sweep("sphere", {"radius_nm": [10.0], "material": []}, WL), "empty"),
    (lambda: design.sweep("sphear", {"radius_nm": [10.0]}, WL), "did you mean 'sphere'"),
    (lambda: design.sweep("spheroid", {"length_nm": [40.0]}, WL), "exactly two"),
    (lambda: design.sweep("shell", {"core_radius_nm": [20.0]}, WL), "lacks thickness_nm"),
    (lambda: design.sweep("sphere", {"radius_nm": [10.0]}, np.linspace(100, 900, 5)), "outside"),
    (lambda: design.sweep("sphere", {"radius_nm": [10.0]}, WL, chunk_size=0), "chunk_size"),
    (lambda: design.sweep("sphere", {"radius_nm": [10.0]}, WL, out="x.txt"), ".csv"),
    (lambda: design.search((700.0, 800.0), wavelength_nm=np.linspace(400, 600, 50)), "outside wavelength_nm"),
    (lambda: design.search((100.0, 150.0)), "outside the wavelengths"),
    (lambda: design.search((700.0, 800.0), objective="injection"), "barrier_eV"),
    (lambda: design.search((700.0, 800.0), families=["cube"]), "family"),
    (lambda: design.search((700.0, 800.0), bounds={"rod": {"diameter": (1, 2)}}), "did you mean .diameter_nm."),
    (lambda: design.band(center_nm=700.0), "both"),
    (lambda: design.band(lo_nm=800.0, hi_nm=700.0), "above"),
    (lambda: design.band(center_nm=700.0, width_nm=-5.0), "> 0"),
    (lambda: design.ensemble_average("sphere", {"radius_nm": 20.0}, {"radius_nm": 1.5}, WL), "0 to 1"),
    (lambda: design.ensemble_average("sphere", {"radius_nm": 20.0}, {"diameter_nm": 0.1}, WL), "not a geometry"),
    (lambda: design.ensemble_average("sphere", {"radius_nm": 20.0}, {"radius_nm": 0.6}, WL), "lognormal"),
])
def test_bad_inputs_raise_one_line_errors(call, match):
    with pytest.raises(NanoabsError, match=match) as err:
        call()
    assert "\n" not in str(err.value)


def test_unknown_name_error_lists_allowed_names():
    with pytest.raises(NanoabsError) as err:
        design.sweep("shell", {"core_radius_nm": [20.0], "thicknes_nm": [5.0]}, WL)
    msg = str(err.value)
    assert "thickness_nm" in msg and "core_material" in msg and "medium_index" in msg


# -- CLI -------------------------------------------------------------------------

def test_cli_sweep_and_search(tmp_path, monkeypatch, capsys):
    from nanoabs.cli import main

    monkeypatch.chdir(tmp_path)
    assert main("sweep --shape sphere --param radius_nm=10:30:10 --wl 450:650:5 -o s.csv --plot m.png "
                "--quiet".split()) == 0
    df, meta = nanoabs.read_export("s.csv")
    assert sorted(df.radius_nm.unique()) == [10.0, 20.0, 30.0]
    single = nanoabs.spectrum(nanoabs.Sphere("Au", 20.0), np.arange(450, 651, 5.0))
    np.testing.assert_allclose(df[df.radius_nm == 20.0].sigma_abs_m2.values, single.sigma_abs_m2, rtol=1e-14)
    assert main("search --band 700:800 --families rod --objective sigma_abs --top 3 -o r.csv --quiet".split()) == 0
    ranked, meta = nanoabs.read_export("r.csv")
    assert len(ranked) >= 1 and 650 < ranked.peak_wavelength_nm.iloc[0] < 850
    capsys.readouterr()
    assert main("search --band 700:800 --objective injection --quiet".split()) == 2
    assert "barrier" in capsys.readouterr().err
