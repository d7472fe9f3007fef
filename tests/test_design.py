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
        s = nanoabs.spectrum(p, WL, polarization="long", method="mlwa")  # a sweep's "auto" for spheroids
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


def test_sweep_of_dielectric_shells_reproduces_single_spectra():
    # Regression: the layer permittivities of an array-sized LayeredSphere without size-dependent
    # damping were once stacked against the size axis (wrong numbers when designs = layers).
    # Source: nanoabs.spectrum of each particle built on its own; rtol 1e-12. A shell with a
    # constant-index (non-metal) shell layer: no surface damping, so every layer's permittivity
    # is one row per wavelength.
    df = design.sweep("shell", {"core_radius_nm": [20.0, 30.0], "thickness_nm": [5.0]}, WL, material=2.5,
                      progress=False)
    for i, r in enumerate((20.0, 30.0)):
        s = nanoabs.spectrum(nanoabs.LayeredSphere("SiO2", r, [(nanoabs.material(2.5), 5.0)]), WL)
        assert_allclose(df[df.design_id == i].sigma_sca_m2.to_numpy(), s.sigma_sca_m2, rtol=1e-12, atol=0)


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


def _count_chunks(monkeypatch, real):
    """Replace the chunk function by ``real`` plus a record of the chunk indices computed."""
    calls = []

    def counting(plan, index):
        calls.append(index)
        return real(plan, index)

    monkeypatch.setattr(_sweep, "_compute_chunk", counting)
    return calls


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

    rerun = _count_chunks(monkeypatch, real)
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


def _user_table(path, scale=1.0):
    """A user material table: the shipped Au data on 41 wavelengths, n + ik scaled by ``scale``."""
    wl = np.linspace(400.0, 900.0, 41)
    n = nanoabs.material("Au").refractive_index(wl) * scale
    rows = [f"{float(w)!r},{float(v.real)!r},{float(v.imag)!r}\n" for w, v in zip(wl, n)]
    path.write_text("wavelength_nm,n,k\n" + "".join(rows))
    return path


_SLOW_SWEEP = """
import sys, time
import numpy as np
import nanoabs
from nanoabs import design
from nanoabs.design import _sweep
real = _sweep._compute_chunk
def slow(plan, index):  # 0.2 s per chunk, so that the test can act while the sweep runs
    time.sleep(0.2)
    return real(plan, index)
_sweep._compute_chunk = slow
table, out = sys.argv[1], sys.argv[2]
design.sweep("sphere", {"radius_nm": np.linspace(5.0, 80.0, 60)}, np.linspace(400.0, 900.0, 101),
             material=nanoabs.load_table(table), chunk_size=1, progress=False, out=out,
             executor=sys.argv[3] if len(sys.argv) > 3 else None)
"""


def _start_slow_sweep(tmp_path, table, out, *executor):
    import subprocess
    import sys
    import time

    proc = subprocess.Popen([sys.executable, "-c", _SLOW_SWEEP, str(table), str(out), *executor],
                            stdout=subprocess.DEVNULL, stderr=subprocess.PIPE)
    parts = Path(str(out) + ".parts")
    for _ in range(1200):  # wait (at most ~2 min) until a few chunks are on disk
        if len(list(parts.glob("chunk_*.csv"))) >= 3 or proc.poll() is not None:
            break
        time.sleep(0.1)
    assert proc.poll() is None, proc.stderr.read().decode()[-2000:]
    return proc


def _kill(proc):
    proc.kill()
    proc.wait()
    proc.stderr.close()


def _slow_sweep_here(table, out=None, **kw):
    return design.sweep("sphere", {"radius_nm": np.linspace(5.0, 80.0, 60)}, np.linspace(400.0, 900.0, 101),
                        material=nanoabs.load_table(table), chunk_size=1, progress=False, out=out, **kw)


def test_killed_sweep_with_edited_material_file_is_refused_then_resumes(tmp_path):
    # Source: contract (resume rule). A sweep process is killed (SIGKILL) mid-run; the user
    # table it reads is edited; the resume must be refused, never mix rows of the old table.
    # With the original content restored the resume is accepted and equals a fresh run exactly.
    table, out = _user_table(tmp_path / "gold.csv"), tmp_path / "s.csv"
    original = table.read_text()
    proc = _start_slow_sweep(tmp_path, table, out)
    _kill(proc)
    assert not out.exists() and Path(str(out) + ".parts").is_dir()
    _user_table(table, scale=1.01)
    with pytest.raises(NanoabsError, match="different arguments or input data"):
        _slow_sweep_here(table, out)
    table.write_text(original)
    got = _slow_sweep_here(table, out)
    assert got.attrs["metadata"]["resumed_chunks"] >= 3
    assert_frame_equal(_slow_sweep_here(table), got, check_exact=True)


def test_second_writer_is_refused_and_a_killed_writers_lock_does_not_block(tmp_path, capsys):
    # Source: contract. While one process streams a sweep into s.csv, a second writer (CLI,
    # even with --force) gets a one-line error and exit code 2. After the first is killed,
    # its lock (flock) is gone with it and the next run resumes.
    from nanoabs.cli import main

    table, out = _user_table(tmp_path / "gold.csv"), tmp_path / "s.csv"
    proc = _start_slow_sweep(tmp_path, table, out)
    try:
        code = main(["sweep", "--shape", "sphere", "--param", "radius_nm=10", "--material", str(table),
                     "--wl", "400:900:10", "-o", str(out), "--force", "--quiet"])
        err = capsys.readouterr().err
        assert code == 2 and "being written by another nanoabs process" in err and err.count("\n") == 1
        assert Path(str(out) + ".parts").is_dir() and not out.exists()
    finally:
        _kill(proc)
    got = _slow_sweep_here(table, out)
    assert got.attrs["metadata"]["resumed_chunks"] >= 3
    assert not Path(str(out) + ".lock").exists()


def _alive(pid):
    try:
        with open(f"/proc/{pid}/stat") as fh:
            return fh.read().split(")")[-1].split()[0] != "Z"  # a zombie has exited
    except FileNotFoundError:
        return False


@pytest.mark.skipif(not Path("/proc/self/task").is_dir(), reason="reads the process tree from /proc")
def test_killed_sweep_leaves_no_pool_workers(tmp_path):
    # Source: contract. The two workers of executor="processes" exit on their own when the
    # sweep process that owns them is killed (SIGKILL, so no shutdown runs).
    import time

    table, out = _user_table(tmp_path / "gold.csv"), tmp_path / "s.csv"
    proc = _start_slow_sweep(tmp_path, table, out, "processes")
    try:
        kids = [int(k) for k in Path(f"/proc/{proc.pid}/task/{proc.pid}/children").read_text().split()]
    finally:
        _kill(proc)
    assert len(kids) == 2
    for _ in range(100):
        if not any(_alive(k) for k in kids):
            break
        time.sleep(0.1)
    assert not any(_alive(k) for k in kids)


def test_stale_or_damaged_parts_are_recomputed_and_temporaries_cleaned(tmp_path, monkeypatch):
    # Source: the uninterrupted in-memory sweep (exact). Parts of the same run that are truncated,
    # edited or lack their sidecar are recomputed; temporaries of a killed writer are removed.
    ref = _sphere_sweep(chunk_size=2)
    real = _sweep._compute_chunk
    out = tmp_path / "run.csv"

    def stop(plan, index):
        if index >= 5:
            raise KeyboardInterrupt
        return real(plan, index)

    monkeypatch.setattr(_sweep, "_compute_chunk", stop)
    with pytest.raises(KeyboardInterrupt):
        _sphere_sweep(chunk_size=2, out=out)
    parts = Path(str(out) + ".parts")
    p0, p1, p2 = (parts / f"chunk_{i:06d}.csv" for i in range(3))
    p0.write_text(p0.read_text()[:-40])  # truncated
    p1.write_text(p1.read_text().replace("Au", "Ag", 1))  # edited, same length
    (parts / "chunk_000002.json").unlink()  # no sidecar
    info = json.loads((parts / "chunk_000003.json").read_text())
    info["identity"] = "0" * 64  # written by another run
    (parts / "chunk_000003.json").write_text(json.dumps(info))
    for junk in (tmp_path / ".run.csv.x1.tmp", tmp_path / ".run.json.x2.tmp", parts / ".chunk_000009.csv.x.tmp"):
        junk.write_text("junk")
    rerun = _count_chunks(monkeypatch, real)
    got = _sphere_sweep(chunk_size=2, out=out)
    assert rerun == [0, 1, 2, 3, 5, 6]
    assert_frame_equal(ref, got, check_exact=True)
    assert_frame_equal(ref, read_export(out)[0], check_exact=True)
    assert not list(tmp_path.glob(".*.tmp")) and not parts.exists()


def test_identity_changes_with_material_content_and_settings():
    # Source: contract. The sweep identity differs whenever something that sets the numbers differs.
    base = dict(material="Au", core="SiO2", medium="water", polarization="random", method="auto",
                surface_damping=True, chunk_size=4)

    def digest(**kw):
        plan, _ = _sweep.validated_plan("sphere", {"radius_nm": [10.0, 20.0]}, WL, **{**base, **kw})
        return _sweep._plan_hash(plan)

    ref = digest()
    assert digest() == ref
    for change in ({"material": "Au:mcpeak-2015"}, {"medium": 1.34}, {"surface_damping": False},
                   {"method": "quasistatic"}, {"chunk_size": 5}):
        assert digest(**change) != ref, change


def test_lock_without_flock_uses_an_exclusive_lock_file(tmp_path, monkeypatch):
    # Source: contract of the fallback for platforms without fcntl.
    from nanoabs import export

    monkeypatch.setattr(export, "_HAVE_FLOCK", False)
    target = tmp_path / "x.csv"
    with export.exclusive_lock(target):
        with pytest.raises(NanoabsError, match="another nanoabs process.*remove the lock file"):
            with export.exclusive_lock(target):
                pass
    with export.exclusive_lock(target):
        pass
    assert not (tmp_path / "x.csv.lock").exists()


def test_sizes_as_long_as_the_wavelength_grid_are_designs_not_a_diagonal():
    # Source: nanoabs.spectrum of each particle on its own (rtol 1e-14). A size list with as many
    # values as there are wavelengths is a list of designs; each gets its full spectrum.
    wl = np.linspace(450.0, 700.0, 6)
    radii = np.linspace(10.0, 60.0, wl.size)
    df = design.sweep("sphere", {"radius_nm": radii}, wl, progress=False)
    assert len(df) == radii.size * wl.size
    for i, r in enumerate(radii):
        s = nanoabs.spectrum(Sphere("Au", r), wl)
        assert_allclose(df[df.design_id == i].sigma_abs_m2.to_numpy(), s.sigma_abs_m2, rtol=1e-14, atol=0)


def test_cli_multi_parameter_sweep_reports_every_design(tmp_path, monkeypatch, capsys):
    # Source: contract. Two swept parameters: one peak line per design, nothing averaged away.
    from nanoabs.cli import main

    monkeypatch.chdir(tmp_path)
    assert main("sweep --shape sphere --param radius_nm=10,30 --param material=Au,Ag --wl 400:700:5 "
                "--quiet --plot m.png".split()) == 0
    lines = [x for x in capsys.readouterr().out.splitlines() if x.startswith("design ")]
    assert len(lines) == 4
    # a 10 nm silver sphere peaks near 395 nm, below the window: reported as such, not as a peak
    assert lines[1].startswith("design 1 (radius_nm = 10, material = Ag): rises beyond the short end")
    assert (tmp_path / "m.png").exists()


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
    # Source: nanoabs.hot_carrier_estimate (energy-resolved generation, curved-wall escape, surface
    # emission; defaults) for the found sphere, band-integrated with the trapezoid rule on the search's
    # band grid (one point per 2 nm, 101 here, plus the nodes of the tabulated spectrum, which has sharp
    # absorption bands; the grid's point count is checked through the metadata);
    # rtol 1e-9: the ranked value IS the pipeline's (issue 13), not the old flat escape-cone yield.
    lo, hi = 1000.0, 1200.0
    sun = nanoabs.illumination.solar("am1.5g")
    # a gold sphere in water peaks near 530 nm, far from this band: peak_in_band=False keeps it ranked
    res = design.search((lo, hi), families=["sphere"], objective="injection", barrier_eV=0.8,
                        illumination=sun, top=2, progress=False, peak_in_band=False, recheck=False)
    best = res.iloc[0]
    assert res.attrs["figure_of_merit"]["unit"] == "s^-1"
    assert "hot_carrier_estimate" in res.attrs["figure_of_merit"]["name"]
    assert list(res.figure_of_merit) == sorted(res.figure_of_merit, reverse=True)
    p = Sphere("Au", best.radius_nm)
    wl = np.union1d(np.linspace(lo, hi, 101), sun.nodes_nm[(sun.nodes_nm > lo) & (sun.nodes_nm < hi)])
    assert res.attrs["metadata"]["band_grid_points"] == wl.size
    hcr = nanoabs.hot_carrier_estimate(nanoabs.spectrum(p, wl), p, sun, barrier_eV=0.8)
    direct = np.trapezoid(hcr.frame["injected_electron_rate_per_s"].to_numpy(), wl)
    assert direct > 0
    assert best.figure_of_merit == pytest.approx(direct, rel=1e-9)


def test_search_injection_counts_holes_over_a_p_type_barrier(tmp_path):
    # A p-type contact (Au/p-Si) passes holes (issue 13): the ranked value is the pipeline's hole rate
    # (rtol 1e-9, as above), and gold's d-band holes at 500-600 nm (interband, ~2 eV below E_F: from
    # memory) can cross a 0.3 eV hole barrier, so the hole rate is not the electron rate.
    lo, hi = 520.0, 600.0
    sun = nanoabs.illumination.solar("am1.5g")
    kw = dict(families=["sphere"], objective="injection", barrier_eV=0.3, illumination=sun, top=1,
              progress=False, peak_in_band=False, recheck=False, bounds={"sphere": {"radius_nm": (10.0, 30.0)}})
    holes = design.search((lo, hi), carrier="hole", **kw)
    electrons = design.search((lo, hi), **kw)
    best = holes.iloc[0]
    assert holes.attrs["metadata"]["injection"]["carrier"] == "hole"
    p = Sphere("Au", best.radius_nm)
    wl = np.union1d(np.linspace(lo, hi, 41), sun.nodes_nm[(sun.nodes_nm > lo) & (sun.nodes_nm < hi)])
    hcr = nanoabs.hot_carrier_estimate(nanoabs.spectrum(p, wl), p, sun, barrier_eV=0.3, carrier="hole")
    direct = np.trapezoid(hcr.frame["injected_hole_rate_per_s"].to_numpy(), wl)
    assert best.figure_of_merit == pytest.approx(direct, rel=1e-9)
    assert abs(best.figure_of_merit / electrons.iloc[0].figure_of_merit - 1) > 0.05
    with pytest.raises(NanoabsError, match="carrier"):
        design.search((lo, hi), carrier="positron", **kw)
    # the CLI takes the carrier from the pair
    from nanoabs.cli import main

    out = tmp_path / "p.csv"
    assert main(["search", "--band", "520:600", "--families", "sphere", "--objective", "injection", "--schottky",
                 "Au/p-Si", "--top", "1", "--quiet", "--any-peak", "-o", str(out)]) == 0


def test_search_injection_screening_yield_band_edges():
    # The exploration screen of the "injection" objective: gold at 500 nm over an n-type 0.8 eV barrier
    # gets nothing from interband absorption (d-band edge ~2 eV, from memory; issue 13), so the screen
    # equals the intraband share of eps'' times the uniform-sphere escape 1 - c^3 of flat carriers
    # (identity, 1e-12), less than half of what flat distributions in every channel would give.
    from nanoabs import carriers as cr
    from nanoabs.design._search import _screening_yield
    from nanoabs.detector import _mechanism_fractions

    au = nanoabs.material("Au")
    wl = np.array([500.0])
    eta = _screening_yield(au, wl, 0.8, 5.53)
    fr = _mechanism_fractions(au, wl, 0.0)
    E_ph = HC_EV_NM / wl
    E = cr.energy_grid(0.8, E_ph.max())
    W = 1 - cr.cone_cosine(E, 0.8, 5.53) ** 3
    intra = (fr["intraband_bulk"] + fr["intraband_surface"]) * cr.channel_yield(W, E, np.zeros(1), E_ph)
    assert fr["interband"][0] > 0.5  # most of gold's absorption at 500 nm is interband
    assert eta[0] == pytest.approx(intra[0], rel=1e-12)
    assert eta[0] < 0.5 * cr.channel_yield(W, E, np.zeros(1), E_ph)[0]


def test_search_ranks_families_and_reports_columns(tmp_path):
    # Source: contract — ranked by figure of merit, best of every family present, units given.
    res = design.search(design.band(lo_nm=780.0, hi_nm=820.0), families=["sphere", "shell", "rod"],
                        objective="q_abs", top=6, progress=False, peak_in_band=False)
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


def test_search_on_worker_threads_equals_the_search_in_one_thread(monkeypatch):
    # Source: contract — the worker threads run the same tasks as the one-thread loop, so the
    # ranked table (every number, the warnings) is identical whatever the number of workers; the
    # caller's warning filters are left as they were (catch_warnings is not thread-safe).
    import warnings

    from nanoabs.design import _search

    def run():
        return design.search((780.0, 820.0), families=["sphere", "shell", "rod"], objective="sigma_abs",
                             top=5, n_starts=1, progress=False, peak_in_band=False)

    monkeypatch.setattr(_search, "WORKERS", 1)
    alone = run()
    monkeypatch.setattr(_search, "WORKERS", 2)
    filters = list(warnings.filters)
    pooled = run()
    assert warnings.filters == filters
    assert_frame_equal(pooled, alone, check_exact=True)
    assert pooled.attrs["metadata"]["warnings"] == alone.attrs["metadata"]["warnings"]


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


# -- issue: the search answers the real question (peaks in the band, several bands, validity) --------


def test_search_rows_peak_inside_the_band_and_carry_method_validity_and_recheck():
    # Contract: with the default peak_in_band=True every ranked row's refined absorption peak lies
    # in the band; each row names its coarse method, its validity and the recheck by the best solver.
    lo, hi = 1250.0, 1550.0
    res = design.search((lo, hi), families=["sphere", "shell", "rod"], medium="Si", top=6, progress=False)
    assert len(res) > 0
    assert ((res.peak_wavelength_nm >= lo) & (res.peak_wavelength_nm <= hi)).all()
    assert (res.peak_in_band == "yes").all()
    assert set(res.method) <= {"mie", "mlwa"} and res.validity.str.len().gt(0).all()
    spheres = res[res.family.isin(["sphere", "shell"])]
    # spheres and shells: coarse and recheck are the same exact method, so the recheck reproduces the row
    np.testing.assert_allclose(spheres.recheck_figure_of_merit, spheres.figure_of_merit, rtol=1e-9)


def test_search_two_bands_worst_band_is_the_minimum():
    bands = [(1260.0, 1360.0), (1530.0, 1565.0)]
    res = design.search(bands, families=["shell"], medium="Si", top=4, progress=False, peak_in_band=False,
                        objective="selectivity")
    per = res[["figure_of_merit_band_1", "figure_of_merit_band_2"]].to_numpy()
    np.testing.assert_allclose(res.figure_of_merit, per.min(axis=1), rtol=1e-12)
    assert res.attrs["metadata"]["bands_nm"] == [list(b) for b in bands]
    mean = design.search(bands, families=["shell"], medium="Si", top=4, progress=False, peak_in_band=False,
                         objective="selectivity", combine="mean")
    per = mean[["figure_of_merit_band_1", "figure_of_merit_band_2"]].to_numpy()
    np.testing.assert_allclose(mean.figure_of_merit, per.mean(axis=1), rtol=1e-12)


@pytest.mark.parametrize("bad, needle", [
    ([(1260.0, 1360.0), (1300.0, 1565.0)], "overlap"),
    ([], "band_nm"),
    ("1260:1360", "band_nm"),
])
def test_search_band_inputs_refused(bad, needle):
    with pytest.raises(NanoabsError, match=needle):
        design.search(bad, families=["sphere"], progress=False)


def test_cli_search_contract_two_bands(tmp_path, capsys):
    from nanoabs.cli import main

    out = tmp_path / "ranked.csv"
    code = main(["search", "--band", "1260:1360", "--band", "1530:1565", "--families", "sphere,shell,rod",
                 "--medium", "Si", "--objective", "selectivity", "-o", str(out), "--top", "4", "--quiet"])
    assert code == 0 and out.exists()
    frame, meta = nanoabs.read_export(out)
    assert {"figure_of_merit_band_1", "figure_of_merit_band_2", "validity", "method"} <= set(frame.columns)
