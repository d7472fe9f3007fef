#!/usr/bin/env python
"""Speed benchmark of nanoabs against a miepython baseline measured in the same run.

Usage::

    python bench/run.py [--quick] [--repeats N] [--json out.json [--force]]

Cases (all in one run, ``time.perf_counter``, best of N repeats; N = 5, or 1
with ``--quick``, or ``--repeats N``):

baseline
    miepython (compiled numba backend, ``MIEPYTHON_USE_JIT=1``) on the 1e5
    (m, x) points of case (a), one point at a time from Python.  Two forms are
    timed and the faster is the baseline: ``efficiencies_mx(m_array, x_array)``
    (miepython's own Python loop over the points, each point a call of its
    compiled single-sphere kernel) and a Python loop in this script calling
    ``efficiencies_mx(m_i, x_i)`` per point.  ``efficiencies_mx`` has no faster
    form: with arrays it loops over points itself, and vectorising over x for
    one m does not apply because m changes with the wavelength.  miepython
    uses n - ik, nanoabs n + ik, so the baseline gets ``np.conj(m)``.  Numba's
    compile time (at import, the kernels have explicit signatures) and the
    first call are excluded and reported separately.
(a) Au sphere map
    ``nanoabs.spectrum(Sphere("Au", r), wl, medium="water")``, 500 wavelengths
    (400-900 nm) x 200 radii (5-100 nm) = 1e5 points: the whole call
    (materials, surface damping, Mie solver, cross-sections), and separately
    the solver ``nanoabs.mie.mie_layered(m, x)`` on the precomputed m, x that
    the call used (the same m, x the baseline gets).
(b) SiO2 core / 10 nm Au shell
    The same grid with ``LayeredSphere("SiO2", r, [("Au", 10.0)])``: the whole
    call, and the solver alone.
(c) Au spheroids, corrected quasi-static
    ``spectrum(spheroid("Au", L, 20.0), wl, polarization="random")``, 1000
    lengths (40-200 nm) x 1000 wavelengths (500-1500 nm) = 1e6 points.  This
    runs nanoabs' compiled MLWA kernel (numba, all cores) when numba imports,
    else the numpy formulas; the output says which.  The kernel's compile (or
    cache load) happens in the warm-up and is excluded; a full run also
    measures a cold compile in a subprocess with an empty numba cache.

Correctness is checked on the timed data: the largest relative difference of
nanoabs Q_ext against miepython Q_ext over the baseline points (expected
<= 1e-8).

Targets (from the project issue), printed PASS/MISS: (a) / baseline <= 1;
(b) <= 2 x (a); (c) < 0.1 x (a), all with the whole ``spectrum`` calls.  The
script is a measurement, not a test: it exits 0 whatever the verdicts.

``--quick`` times every case once and runs the baseline on every 10th radius
only (1e4 points), scaling its time to the 1e5 points; the correctness check
then covers those points only.  Without numba, miepython's pure-Python
backend is used and the output says so.
"""

from __future__ import annotations

# ---------------------------------------------------------------------------
# The miepython backend is chosen when miepython is first imported, from the
# environment: select it before anything else can import miepython.
# ---------------------------------------------------------------------------
import os
import sys

try:
    import numba  # noqa: F401

    _NUMBA_NOTE = ""
except Exception as exc:  # missing, or broken against this numpy
    _NUMBA_NOTE = f"numba not importable ({type(exc).__name__}: {exc})"
os.environ["MIEPYTHON_USE_JIT"] = "0" if _NUMBA_NOTE else "1"

import argparse  # noqa: E402
import datetime  # noqa: E402
import glob  # noqa: E402
import json  # noqa: E402
import platform  # noqa: E402
import subprocess  # noqa: E402
import tempfile  # noqa: E402
import time  # noqa: E402

import numpy as np  # noqa: E402


def _import_miepython():
    """Import miepython with the selected backend; fall back to no-JIT if that fails.

    Returns (module, jit_on, import_seconds, cache_present_before, note).
    """
    import importlib.util

    spec = importlib.util.find_spec("miepython")
    pkg_dir = os.path.dirname(spec.origin) if spec and spec.origin else ""
    cache_before = bool(glob.glob(os.path.join(pkg_dir, "__pycache__", "mie_jit.*.nbi")))
    note = _NUMBA_NOTE
    t0 = time.perf_counter()
    try:
        import miepython
    except Exception as exc:
        if os.environ["MIEPYTHON_USE_JIT"] != "1":
            raise
        note = f"miepython failed to import with its JIT backend ({type(exc).__name__}: {exc})"
        for name in [n for n in sys.modules if n == "miepython" or n.startswith("miepython.")]:
            del sys.modules[name]
        os.environ["MIEPYTHON_USE_JIT"] = "0"
        t0 = time.perf_counter()
        import miepython
    t_import = time.perf_counter() - t0
    from miepython import _backend

    # the backend module says what it chose; a numba dispatcher has .signatures
    jit_on = bool(_backend.USE_JIT) and hasattr(_backend.single_sphere, "signatures")
    return miepython, jit_on, t_import, cache_before, note


MIEPYTHON, JIT_ON, T_IMPORT_MIEPYTHON, NUMBA_CACHE_BEFORE, BACKEND_NOTE = _import_miepython()

import scipy  # noqa: E402

import nanoabs  # noqa: E402
from nanoabs.mie import mie_layered  # noqa: E402

# ---------------------------------------------------------------------------
# grids
# ---------------------------------------------------------------------------
WL_A = np.linspace(400.0, 900.0, 500)  # vacuum wavelength [nm]
R_A = np.linspace(5.0, 100.0, 200)[:, None]  # radius / core radius [nm]
SHELL_NM = 10.0
WL_C = np.linspace(500.0, 1500.0, 1000)  # [nm]
L_C = np.linspace(40.0, 200.0, 1000)[:, None]  # spheroid length [nm]
D_C = 20.0  # spheroid diameter [nm]
MEDIUM = "water"

TARGET_A = 1.0  # (a) / baseline <= 1
TARGET_B = 2.0  # (b) / (a) <= 2
TARGET_C = 0.1  # (c) / (a) < 0.1
TOL_QEXT = 1e-8


def case_a(wl=WL_A, r=R_A):
    return nanoabs.spectrum(nanoabs.Sphere("Au", r), wl, medium=MEDIUM)


def case_b(wl=WL_A, r=R_A):
    return nanoabs.spectrum(nanoabs.LayeredSphere("SiO2", r, [("Au", SHELL_NM)]), wl, medium=MEDIUM)


def case_c(wl=WL_C, length=L_C):
    return nanoabs.spectrum(nanoabs.spheroid("Au", length, D_C), wl, medium=MEDIUM,
                            polarization="random")


def best_of(fn, repeats):
    """Best wall time of ``repeats`` calls of ``fn`` [s], and the last result."""
    best = float("inf")
    out = None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        best = min(best, time.perf_counter() - t0)
    return best, out


def solver_inputs(spec, radii):
    """The (m, x) that ``spectrum`` handed to the Mie solver, shape (layers, R, W).

    Same construction as ``nanoabs.optics`` (relative index sqrt(eps)/n_medium
    of the permittivities it used, surface damping included; x = k r).
    """
    n_med = spec.n_medium
    k = 2.0 * np.pi * n_med / spec.wavelength_nm
    m = np.stack(np.broadcast_arrays(*[np.sqrt(e) / n_med for e in spec.layer_eps]))
    x = np.stack(np.broadcast_arrays(*[k * r for r in radii]))
    m, x = np.broadcast_arrays(m, x)
    return np.ascontiguousarray(m), np.ascontiguousarray(x)


def cold_jit_compile_seconds():
    """Numba compile time of miepython in a subprocess with an empty cache directory.

    Returns a dict of timings [s] or None when it could not be measured.
    """
    code = (
        "import json, time\n"
        "t0 = time.perf_counter(); import numba; t1 = time.perf_counter()\n"
        "import miepython; t2 = time.perf_counter()\n"
        "miepython.efficiencies_mx(1.5 - 0.1j, 1.0); t3 = time.perf_counter()\n"
        "import numpy as np, nanoabs; t4 = time.perf_counter()\n"
        "s = nanoabs.spectrum(nanoabs.spheroid('Au', np.array([[60.0]]), 20.0), np.linspace(500, 900, 5))\n"
        "t5 = time.perf_counter()\n"
        "print(json.dumps({'numba_import_s': t1 - t0, 'miepython_import_compile_s': t2 - t1,"
        " 'first_call_s': t3 - t2, 'nanoabs_kernel_compile_s': t5 - t4,"
        " 'nanoabs_backend': s.metadata['solver_backend']}))\n"
    )
    with tempfile.TemporaryDirectory(prefix="nanoabs-bench-numba-") as d:
        env = dict(os.environ, MIEPYTHON_USE_JIT="1", NUMBA_CACHE_DIR=d)
        try:
            p = subprocess.run([sys.executable, "-c", code], env=env, capture_output=True,
                               text=True, timeout=300)
            return json.loads(p.stdout.strip().splitlines()[-1])
        except Exception:
            return None


def machine_facts():
    try:
        usable = len(os.sched_getaffinity(0))
    except AttributeError:
        usable = os.cpu_count()
    cpu = platform.processor() or ""
    try:
        with open("/proc/cpuinfo") as fh:
            for line in fh:
                if line.startswith("model name"):
                    cpu = line.split(":", 1)[1].strip()
                    break
    except OSError:
        pass
    try:
        numba_version = sys.modules["numba"].__version__
    except (KeyError, AttributeError):
        numba_version = None
    return {
        "date": datetime.datetime.now().astimezone().isoformat(timespec="seconds"),
        "cpu": cpu,
        "cores_logical": os.cpu_count(),
        "cores_usable": usable,
        "platform": platform.platform(),
        "python": platform.python_version(),
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "numba": numba_version,
        "miepython": getattr(MIEPYTHON, "__version__", "?"),
        "nanoabs": nanoabs.__version__,
        "miepython_jit": JIT_ON,
        "miepython_backend_note": BACKEND_NOTE,
    }


def verdict(ok):
    return "PASS" if ok else "MISS"


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[0])
    ap.add_argument("--quick", action="store_true",
                    help="1 repeat; baseline on every 10th radius, scaled to the full grid")
    ap.add_argument("--repeats", type=int, metavar="N",
                    help="repeats per case, best kept (default 5, or 1 with --quick)")
    ap.add_argument("--json", metavar="PATH", help="write the numbers to PATH (JSON)")
    ap.add_argument("--force", action="store_true", help="overwrite an existing --json file")
    args = ap.parse_args(argv)
    if args.json and os.path.exists(args.json) and not args.force:
        ap.error(f"--json {args.json}: file exists; pass --force to overwrite it")

    if args.repeats is not None and args.repeats < 1:
        ap.error(f"--repeats {args.repeats}: must be an integer >= 1")
    repeats = args.repeats or (1 if args.quick else 5)
    stride = 10 if args.quick else 1
    t_start = time.perf_counter()
    facts = machine_facts()

    # -- one-time costs, excluded from the timings --------------------------------------
    t0 = time.perf_counter()
    MIEPYTHON.efficiencies_mx(1.5 - 0.1j, 1.0)
    t_first_call = time.perf_counter() - t0
    t0 = time.perf_counter()
    case_a(WL_A[:5], R_A[:2])
    case_b(WL_A[:5], R_A[:2])
    case_c(WL_C[:5], L_C[:2])
    t_nanoabs_warm = time.perf_counter() - t0
    cold = cold_jit_compile_seconds() if (JIT_ON and not args.quick) else None

    # -- (a) --------------------------------------------------------------------------------
    t_a, s_a = best_of(case_a, repeats)
    m_a, x_a = solver_inputs(s_a, [R_A])
    t_a_solver, res_a = best_of(lambda: mie_layered(m_a, x_a), repeats)
    n_a = m_a[0].size
    # the precomputed (m, x) reproduce what spectrum() computed
    consistency_a = float(np.max(np.abs(res_a.qext * np.pi * R_A**2 * 1e-18 - s_a.sigma_ext_m2)
                                 / s_a.sigma_ext_m2))

    # -- baseline -----------------------------------------------------------------------------
    sub = (slice(None, None, stride), slice(None))
    mc = np.conj(m_a[0][sub]).ravel()  # miepython: n - ik
    xb = x_a[0][sub].ravel().copy()
    n_base = mc.size
    scale = n_a / n_base
    effs = MIEPYTHON.efficiencies_mx

    def base_array():
        return effs(mc, xb)

    def base_points():
        qext = np.empty(n_base)
        for i in range(n_base):
            qext[i] = effs(mc[i], xb[i])[0]
        return qext

    t_arr, out_arr = best_of(base_array, repeats)
    t_pts, out_pts = best_of(base_points, repeats)
    forms = {"array": t_arr * scale, "per_point": t_pts * scale}
    base_form = min(forms, key=forms.get)
    t_base = forms[base_form]
    q_mp = np.asarray(out_arr[0])
    q_na = res_a.qext[sub].ravel()
    rel = np.abs(q_na - q_mp) / np.abs(q_mp)
    worst = int(np.argmax(rel))
    max_rel_qext = float(rel[worst])
    r_sub = R_A[sub[0]]
    worst_r = float(np.broadcast_to(r_sub, (r_sub.shape[0], WL_A.size)).ravel()[worst])
    worst_wl = float(np.broadcast_to(WL_A, (r_sub.shape[0], WL_A.size)).ravel()[worst])
    same_forms = float(np.max(np.abs(out_pts - q_mp) / np.abs(q_mp)))

    # -- (b) ----------------------------------------------------------------------------------
    t_b, s_b = best_of(case_b, repeats)
    m_b, x_b = solver_inputs(s_b, [R_A, R_A + SHELL_NM])
    t_b_solver, _ = best_of(lambda: mie_layered(m_b, x_b), repeats)
    n_b = m_b[0].size

    # -- (c) ----------------------------------------------------------------------------------
    t_c, s_c = best_of(case_c, repeats)
    n_c = s_c.sigma_abs_m2.size
    backend_c = s_c.metadata["solver_backend"]

    # -- (d) band search over three shape families (issue: "finishes in seconds") ---------------
    def case_d():
        return nanoabs.design.search((1250.0, 1550.0), families=["sphere", "shell", "rod"],
                                     objective="sigma_abs", medium="Si", max_size_nm=200.0,
                                     min_shell_nm=5.0, progress=False)

    t_d, _ = best_of(case_d, repeats)

    # -- report -------------------------------------------------------------------------------
    scaled = f" (x{scale:g} scaled)" if stride > 1 else ""
    rows = [
        ("baseline: miepython " + base_form.replace("_", "-") + " loop" + scaled, t_base, n_a),
        ("  other form: " + ("per-point" if base_form == "array" else "array") + " loop" + scaled,
         forms["per_point" if base_form == "array" else "array"], n_a),
        ("(a) Au sphere, spectrum()", t_a, n_a),
        ("(a) Au sphere, mie_layered() only", t_a_solver, n_a),
        ("(b) SiO2/Au shell, spectrum()", t_b, n_b),
        ("(b) SiO2/Au shell, mie_layered() only", t_b_solver, n_b),
        (f"(c) Au spheroids MLWA, spectrum() [{backend_c}]", t_c, n_c),
        ("(d) design.search, 3 families, 1250-1550 nm", t_d, 1),
    ]
    ra = t_a / t_base
    ra_solver = t_a_solver / t_base
    rb = t_b / t_a
    rc = t_c / t_a
    targets = [
        ("(a) spectrum / baseline", ra, f"<= {TARGET_A:g}", ra <= TARGET_A),
        ("(b) / (a)", rb, f"<= {TARGET_B:g}", rb <= TARGET_B),
        ("(c) / (a)", rc, f"< {TARGET_C:g}", rc < TARGET_C),
        ("max rel. diff Q_ext nanoabs vs miepython", max_rel_qext, f"<= {TOL_QEXT:g}",
         max_rel_qext <= TOL_QEXT),
        ("(d) search seconds", t_d, "<= 10", t_d <= 10.0),
    ]

    print("nanoabs benchmark  " + facts["date"])
    print(f"machine: {facts['cpu']}; {facts['cores_usable']} usable cores "
          f"({facts['cores_logical']} logical); {facts['platform']}")
    print(f"python {facts['python']}, numpy {facts['numpy']}, scipy {facts['scipy']}, "
          f"numba {facts['numba'] or 'absent'}, miepython {facts['miepython']}, "
          f"nanoabs {facts['nanoabs']}")
    if JIT_ON:
        print("miepython backend: numba JIT (MIEPYTHON_USE_JIT=1)")
    else:
        print("miepython backend: pure Python, NO JIT"
              + (f" -- {BACKEND_NOTE}" if BACKEND_NOTE else "")
              + "; the baseline is then far slower than with the compiled backend")
    print(f"mode: {'--quick' if args.quick else 'full'}, best of {repeats} "
          f"repeat{'s' if repeats > 1 else ''}, time.perf_counter")
    if stride > 1:
        print(f"--quick: baseline timed on every {stride}th radius ({n_base} of {n_a} points) "
              f"and scaled x{scale:g}; correctness checked on those points only")
    print()
    print("excluded one-time costs:")
    print(f"  import miepython {T_IMPORT_MIEPYTHON:.3f} s "
          + ("(numba import + loading its on-disk kernel cache)" if JIT_ON and NUMBA_CACHE_BEFORE
             else "(numba import + JIT compile)" if JIT_ON else "(pure Python)")
          + f"; first call {t_first_call * 1e3:.2f} ms")
    if cold:
        print(f"  cold JIT compile, fresh cache dir in a subprocess: "
              f"{cold['miepython_import_compile_s'] + cold['first_call_s']:.2f} s "
              f"(+ numba import {cold['numba_import_s']:.2f} s)")
        if "nanoabs_kernel_compile_s" in cold:
            print(f"  nanoabs MLWA kernel, cold compile + first call in that subprocess: "
                  f"{cold['nanoabs_kernel_compile_s']:.2f} s ({cold['nanoabs_backend']})")
    elif JIT_ON:
        print("  cold JIT compile: not measured (--quick, or the subprocess failed)")
    print(f"  nanoabs warm-up on tiny grids (imports, material tables) {t_nanoabs_warm:.3f} s")
    print()
    w = max(len(r[0]) for r in rows)
    print(f"{'case':<{w}}  {'seconds':>9}  {'points':>9}  {'us/point':>9}  {'/ baseline':>10}")
    print("-" * (w + 45))
    for name, t, n in rows:
        print(f"{name:<{w}}  {t:9.4f}  {n:9d}  {t / n * 1e6:9.3f}  {t / t_base:10.3f}")
    print()
    print(f"(a) solver only / baseline = {ra_solver:.3f};  (c) / (a) per point = "
          f"{(t_c / n_c) / (t_a / n_a):.3f}")
    print(f"correctness: max |Q_ext(nanoabs) - Q_ext(miepython)| / Q_ext(miepython) = "
          f"{max_rel_qext:.2e} over {n_base} points (worst at lambda = {worst_wl:.1f} nm, "
          f"r = {worst_r:.2f} nm)")
    print(f"             the two miepython forms agree to {same_forms:.1e}; precomputed (m, x) "
          f"reproduce spectrum()'s sigma_ext to {consistency_a:.1e}")
    print()
    print("targets:")
    wt = max(len(t[0]) for t in targets)
    for name, val, lim, ok in targets:
        sval = f"{val:.3e}" if "diff" in name else f"{val:.3f}"
        print(f"  {name:<{wt}}  {sval:>9}  (target {lim:>7})  {verdict(ok)}")
    if not JIT_ON:
        print("  note: the baseline ran WITHOUT the JIT, so the (a) verdict is not the project's target")
    total = time.perf_counter() - t_start
    print()
    print(f"total run time {total:.1f} s (a measurement: exit status is 0 whatever the verdicts)")

    if args.json:
        data = {
            "machine": facts,
            "settings": {"quick": args.quick, "repeats": repeats, "baseline_stride": stride,
                         "baseline_points_timed": n_base, "baseline_scale": scale,
                         "baseline_form": base_form},
            "one_time_s": {"miepython_import": T_IMPORT_MIEPYTHON,
                           "numba_cache_present_before_import": NUMBA_CACHE_BEFORE,
                           "miepython_first_call": t_first_call, "cold_jit": cold,
                           "nanoabs_warmup": t_nanoabs_warm},
            "cases": {
                "baseline": {"seconds": t_base, "points": n_a, "form": base_form},
                "baseline_array_form": {"seconds": forms["array"], "points": n_a},
                "baseline_per_point_form": {"seconds": forms["per_point"], "points": n_a},
                "a_spectrum": {"seconds": t_a, "points": n_a},
                "a_solver": {"seconds": t_a_solver, "points": n_a},
                "b_spectrum": {"seconds": t_b, "points": n_b},
                "b_solver": {"seconds": t_b_solver, "points": n_b},
                "c_spectrum": {"seconds": t_c, "points": n_c, "backend": backend_c},
            },
            "ratios": {"a_over_baseline": ra, "a_solver_over_baseline": ra_solver,
                       "b_over_a": rb, "c_over_a": rc},
            "targets": {name: {"value": val, "target": lim, "pass": bool(ok)}
                        for name, val, lim, ok in targets},
            "correctness": {"max_rel_diff_qext": max_rel_qext, "points_compared": n_base,
                            "miepython_forms_max_rel_diff": same_forms,
                            "precomputed_inputs_max_rel_diff": consistency_a},
            "total_run_s": total,
        }
        path = os.path.abspath(args.json)
        fd, tmp = tempfile.mkstemp(prefix=".bench-", suffix=".json", dir=os.path.dirname(path))
        try:
            with os.fdopen(fd, "w") as fh:
                json.dump(data, fh, indent=2)
                fh.write("\n")
            os.replace(tmp, path)
        except BaseException:
            if os.path.exists(tmp):
                os.unlink(tmp)
            raise
        print(f"numbers written to {args.json}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
