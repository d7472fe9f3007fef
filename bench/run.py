#!/usr/bin/env python
"""Speed benchmark of nanoabs against a miepython baseline measured in the same run.

Usage::

    python bench/run.py [--quick] [--repeats N] [--json out.json [--force]]

All cases run in one process and are INTERLEAVED: each repeat times the
baseline and every case once, in turn, so that machine drift (this is a
shared 2-core VM) hits them alike.  Ratios are reported for the best repeat
(best time over best baseline) and as the median of the per-repeat ratios.
N = 5 repeats, or 1 with ``--quick``, or ``--repeats N``.

baseline
    miepython (compiled numba backend, ``MIEPYTHON_USE_JIT=1``) on the 1e5
    (m, x) points of case (a): ``efficiencies_mx(m_array, x_array)``, which is
    miepython's own Python loop over the points, each a call of its compiled
    single-sphere kernel (m changes with the wavelength, so there is no
    vectorised form).  miepython uses n - ik, nanoabs n + ik: it gets ``conj(m)``.
(a) Au sphere map
    ``nanoabs.spectrum(Sphere("Au", r), wl, medium="water")``, 500 wavelengths
    (400-900 nm) x 200 radii (5-100 nm): the whole call (materials, surface
    damping, Mie, cross-sections).  Also the compiled kernel alone and the
    numpy Mie path alone (``mie_layered``) on the same (m, x).
(a') large spheres
    The same Au permittivities at fixed x = 50 and x = 200 (radius chosen per
    wavelength): ``mie_cross_sections_nm2`` against miepython on the same
    points, per point.
(b) SiO2 core / 10 nm Au shell
    The grid of (a) with ``LayeredSphere("SiO2", r, [("Au", 10.0)])``.
(c) Au spheroids, corrected quasi-static (compiled MLWA kernel), 1e6 points.
(d) ``design.search`` over sphere, shell and rod in Si, against the same search
    run by the code of an earlier revision (``--search-baseline REV``, default
    the commit before the issue-14 search work), each in fresh interpreters,
    interleaved (after one untimed warm-up search per interpreter).
(e) start-up, each in a fresh interpreter, interleaved with ``python -c
    "import numpy"``: ``python -c "import nanoabs"`` and the README's first
    ``nanoabs spectrum`` command (numba cache warm).
(f) first call of each compiled kernel in a fresh interpreter: with numba's
    on-disk cache present (warm) and, in a full run, with an empty cache
    directory (cold compile).

Correctness on the timed data: Q_ext of spectrum() (compiled) against the
numpy path and against miepython, largest relative difference (<= 1e-10).
The script is a measurement, not a test: it exits 0 whatever the verdicts.
``--quick`` times every case once, runs the baseline on every 10th radius
(scaled to the full grid) and skips the cold compile.
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
import warnings  # noqa: E402

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

# the nanoabs of the checkout this script lives in (not an installed copy elsewhere)
sys.path.insert(0, os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
import nanoabs  # noqa: E402
from nanoabs import _compiled_mie  # noqa: E402
from nanoabs.validity import NanoabsWarning  # noqa: E402

warnings.simplefilter("ignore", NanoabsWarning)  # validity cautions of the bench grids (known)
from nanoabs.mie import mie_cross_sections_nm2, mie_layered, n_terms  # noqa: E402

# ---------------------------------------------------------------------------
# grids and targets (the goals)
# ---------------------------------------------------------------------------
WL_A = np.linspace(400.0, 900.0, 500)  # vacuum wavelength [nm]
R_A = np.linspace(5.0, 100.0, 200)[:, None]  # radius / core radius [nm]
SHELL_NM = 10.0
WL_C = np.linspace(500.0, 1500.0, 1000)  # [nm]
L_C = np.linspace(40.0, 200.0, 1000)[:, None]  # spheroid length [nm]
D_C = 20.0  # spheroid diameter [nm]
X_LARGE = {50.0: 20000, 200.0: 20000}  # size parameter: number of wavelengths (400-900 nm), >= MIN_POINTS
MEDIUM = "water"
README_CLI = ["spectrum", "--shape", "sphere", "--material", "Au", "--radius", "20", "--medium",
              "water", "--wl", "400:900:1"]

TARGET_A, STRETCH_A = 0.33, 0.2  # (a) spectrum / baseline
TARGET_A_LARGE = 0.5  # (a') per point / miepython
TARGET_B = 1.5  # (b) / (a)
TARGET_C = 0.1  # (c) / baseline: today's 0.03-0.1 (1 Dec 2026), kept
TARGET_D = 0.5  # (d) / the same search by the code of SEARCH_BASELINE_REV, measured in this run
SEARCH_BASELINE_REV = "5179ea1"  # the search before the issue-14 work on it (2 Dec 2026)
TARGET_IMPORT, TARGET_CLI = 2.0, 3.0  # (e) / python -c "import numpy"
TOL_Q = 1e-10
FLOPS_PER_POINT = 1200  # estimate of the issue: ~1200 flops and ~100 divisions per point of (a)


def case_a(wl=WL_A, r=R_A):
    return nanoabs.spectrum(nanoabs.Sphere("Au", r), wl, medium=MEDIUM)


def case_b(wl=WL_A, r=R_A):
    return nanoabs.spectrum(nanoabs.LayeredSphere("SiO2", r, [("Au", SHELL_NM)]), wl, medium=MEDIUM)


def case_c(wl=WL_C, length=L_C):
    return nanoabs.spectrum(nanoabs.spheroid("Au", length, D_C), wl, medium=MEDIUM,
                            polarization="random", method="mlwa")


SEARCH_TIMER = (
    "import json, sys, time, warnings\n"
    "sys.path.insert(0, {root!r})\n"
    "import nanoabs\n"
    "from nanoabs.validity import NanoabsWarning\n"
    "warnings.simplefilter('ignore', NanoabsWarning)\n"
    "assert nanoabs.__file__.startswith({root!r}), nanoabs.__file__\n"
    "def run():\n"
    "    return nanoabs.design.search((1250.0, 1550.0), families=['sphere', 'shell', 'rod'], objective='sigma_abs',"
    " medium='Si', max_size_nm=200.0, min_shell_nm=5.0, progress=False)\n"
    "run()\n"
    "t0 = time.perf_counter(); r = run(); t = time.perf_counter() - t0\n"
    "print(json.dumps({{'s': t, 'designs': [[f, float(x), float(y)] for f, x, y in zip(r['family'], r['figure_of_merit'],"
    " r['recheck_figure_of_merit'])]}}))\n"
)


def search_baseline_tree(rev):
    """The nanoabs package and material tables of git revision ``rev``, unpacked once into a fixed folder
    under the temp directory (fixed, so that numba's cache of its kernels stays warm between runs).
    Returns the folder, or (None, reason)."""
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    try:
        full = subprocess.run(["git", "-C", root, "rev-parse", "--verify", rev + "^{commit}"], capture_output=True,
                              text=True, check=True).stdout.strip()
    except (OSError, subprocess.CalledProcessError) as exc:
        return None, f"revision {rev!r} not found ({type(exc).__name__}); not a git checkout?"
    dest = os.path.join(tempfile.gettempdir(), f"nanoabs-bench-search-{full[:12]}")
    if not os.path.isdir(os.path.join(dest, "nanoabs")):
        tmp = tempfile.mkdtemp(prefix=".nanoabs-bench-", dir=tempfile.gettempdir())
        arch = subprocess.run(["git", "-C", root, "archive", "--format=tar", full, "nanoabs", "materials"],
                              capture_output=True, check=True).stdout
        subprocess.run(["tar", "-x", "-C", tmp], input=arch, check=True)
        try:
            os.replace(tmp, dest)
        except OSError:  # another run unpacked it meanwhile
            pass
    return dest, None


def search_versus_baseline(rev, rounds):
    """(d): {"new": [s...], "old": [s...]} of the README search, fresh interpreters, interleaved; or a reason."""
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    old_root, why = search_baseline_tree(rev)
    if old_root is None:
        return None, why
    times, designs = {"new": [], "old": []}, {}
    for _ in range(rounds):
        for key, where in (("old", old_root), ("new", root)):
            _, p = _run([sys.executable, "-c", SEARCH_TIMER.format(root=where)])
            if p.returncode != 0:
                return None, f"{key} search failed: {p.stderr.strip().splitlines()[-1:]}"
            out = json.loads(p.stdout.strip().splitlines()[-1])
            times[key].append(out["s"])
            designs[key] = out["designs"]
    return {"times": times, "designs": designs}, None


def solver_inputs(spec, radii):
    """The (m, x) that ``spectrum`` handed to the Mie solver, flattened to (layers, points)."""
    n_med = spec.n_medium
    k = 2.0 * np.pi * n_med / spec.wavelength_nm
    L = len(radii)
    mx = np.broadcast_arrays(*[np.sqrt(e) / n_med for e in spec.layer_eps], *[k * r for r in radii])
    m, x = np.stack(mx[:L]), np.stack(mx[L:])
    return np.ascontiguousarray(m.reshape(L, -1)), np.ascontiguousarray(x.reshape(L, -1))


def interleaved(cases, repeats):
    """Time every case once per repeat, in turn; returns {name: [seconds...]} and the last results."""
    times = {name: [] for name in cases}
    out = {}
    for _ in range(repeats):
        for name, fn in cases.items():
            t0 = time.perf_counter()
            out[name] = fn()
            times[name].append(time.perf_counter() - t0)
    return times, out


def ratio(times, name, base):
    """(best / best baseline, median of the per-repeat ratios)."""
    t, b = np.array(times[name]), np.array(times[base])
    return float(t.min() / b.min()), float(np.median(t / b))


def _run(cmd, env=None, timeout=600):
    """Run ``cmd`` with this checkout's nanoabs first on the path (PYTHONPATH); (seconds, result)."""
    env = dict(os.environ if env is None else env)
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    env["PYTHONPATH"] = os.pathsep.join([root] + [v for v in [env.get("PYTHONPATH")] if v])
    t0 = time.perf_counter()
    p = subprocess.run(cmd, capture_output=True, text=True, env=env, timeout=timeout)
    return time.perf_counter() - t0, p


FIRST_CALL = (
    "import json, time, numpy as np\n"
    "t0 = time.perf_counter(); import nanoabs; from nanoabs import _compiled_mie\n"
    "t1 = time.perf_counter(); ok = _compiled_mie.available(); t2 = time.perf_counter()\n"
    "s = nanoabs.spectrum(nanoabs.Sphere('Au', np.linspace(5, 100, 40)[:, None]), np.linspace(400, 900, 500))\n"
    "t3 = time.perf_counter()\n"
    "e = nanoabs.spectrum(nanoabs.spheroid('Au', np.array([[60.0]]), 20.0), np.linspace(500, 900, 5),"
    " method='mlwa')\n"
    "t4 = time.perf_counter()\n"
    "print(json.dumps({'import_s': t1 - t0, 'numba_import_and_build_s': t2 - t1,"
    " 'mie_first_call_s': t3 - t2, 'mlwa_first_call_s': t4 - t3,"
    " 'backends': [s.metadata['solver_backend'], e.metadata['solver_backend']]}))\n"
)


def first_calls(cold):
    """(f): first calls of both kernels in a fresh interpreter (numba cache warm, or empty if cold)."""
    env = dict(os.environ)
    with tempfile.TemporaryDirectory(prefix="nanoabs-bench-numba-") as d:
        if cold:
            env["NUMBA_CACHE_DIR"] = d
        try:
            _, p = _run([sys.executable, "-c", FIRST_CALL], env=env)
            return json.loads(p.stdout.strip().splitlines()[-1])
        except Exception:
            return None


def startup(repeats):
    """(e): fresh-interpreter times of import numpy, import nanoabs and the README command, interleaved."""
    cli = [sys.executable, "-m", "nanoabs"] + README_CLI
    with tempfile.TemporaryDirectory(prefix="nanoabs-bench-cli-") as d:
        out = os.path.join(d, "au20.csv")
        cmds = {"numpy": [sys.executable, "-c", "import numpy"],
                "nanoabs": [sys.executable, "-c", "import nanoabs"],
                "cli": cli + ["-o", out, "--force"]}
        _run(cmds["cli"])  # numba cache and file system warm
        times = {k: [] for k in cmds}
        for _ in range(max(repeats, 3)):
            for k, c in cmds.items():
                t, p = _run(c)
                if p.returncode != 0:
                    return None
                times[k].append(t)
    return times


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
    ap = argparse.ArgumentParser(description=__doc__.split("\n")[1])
    ap.add_argument("--quick", action="store_true",
                    help="1 repeat; baseline on every 10th radius, scaled to the full grid; no cold compile")
    ap.add_argument("--repeats", type=int, metavar="N",
                    help="interleaved repeats (default 5, or 1 with --quick)")
    ap.add_argument("--json", metavar="PATH", help="write the numbers to PATH (JSON)")
    ap.add_argument("--force", action="store_true", help="overwrite an existing --json file")
    ap.add_argument("--search-baseline", default=SEARCH_BASELINE_REV, metavar="REV",
                    help=f"git revision whose design.search is the baseline of (d) (default {SEARCH_BASELINE_REV})")
    args = ap.parse_args(argv)
    if args.json and os.path.exists(args.json) and not args.force:
        ap.error(f"--json {args.json}: file exists; pass --force to overwrite it")
    if args.repeats is not None and args.repeats < 1:
        ap.error(f"--repeats {args.repeats}: must be an integer >= 1")
    repeats = args.repeats or (1 if args.quick else 5)
    stride = 10 if args.quick else 1
    t_start = time.perf_counter()
    facts = machine_facts()

    # -- one-time costs, excluded from the timings ----------------------------------------------
    MIEPYTHON.efficiencies_mx(1.5 - 0.1j, 1.0)
    t0 = time.perf_counter()
    kernel_ok = _compiled_mie.available()  # numba import; the kernel loads at the first call of case_a()
    case_a(WL_A[:5], R_A[:2])
    case_b(WL_A[:5], R_A[:2])
    case_c(WL_C[:5], L_C[:2])
    t_warm = time.perf_counter() - t0
    calls = {"warm": first_calls(cold=False), "cold": None if args.quick else first_calls(cold=True)}

    # -- inputs shared by the solver-only cases and the baseline ---------------------------------
    s_a = case_a()
    m_a, x_a = solver_inputs(s_a, [R_A])
    ns_a = n_terms(x_a[-1])
    sub = slice(None, None, stride)
    grid_idx = np.arange(m_a.shape[1]).reshape(R_A.size, WL_A.size)[sub].ravel()
    mc, xb = np.conj(m_a[0, grid_idx]), x_a[0, grid_idx].copy()
    scale = m_a.shape[1] / mc.size
    large = {}
    for xl, n_wl in X_LARGE.items():
        wl = np.linspace(400.0, 900.0, n_wl)
        n_med = nanoabs.material(MEDIUM).refractive_index(wl).real
        eps = nanoabs.material("Au").permittivity(wl)
        radius = xl * wl / (2 * np.pi * n_med)
        large[xl] = (eps, radius, n_med, wl, np.conj(np.sqrt(eps) / n_med), np.full(n_wl, xl))

    cases = {
        "baseline": lambda: MIEPYTHON.efficiencies_mx(mc, xb),
        "a": case_a,
        "a_kernel": lambda: _compiled_mie.mie_efficiencies(m_a, x_a, ns_a) if kernel_ok else None,
        "a_numpy": lambda: mie_layered(m_a, x_a),
        "b": case_b,
        "c": case_c,
    }
    for xl, (eps, radius, n_med, wl, mcl, xs) in large.items():
        cases[f"x{xl:g}_nanoabs"] = (lambda e=eps, r=radius, n=n_med, w=wl:
                                     mie_cross_sections_nm2([e], [r], n, w))
        cases[f"x{xl:g}_miepython"] = lambda m=mcl, x=xs: MIEPYTHON.efficiencies_mx(m, x)
    for name in [k for k in cases if k.startswith("x")]:
        cases[name]()  # first call of these input layouts (loads their compiled code), excluded
    times, out = interleaved(cases, repeats)
    times["baseline"] = [t * scale for t in times["baseline"]]
    for xl in X_LARGE:
        times[f"x{xl:g}_base"] = times[f"x{xl:g}_miepython"]
    search, search_note = search_versus_baseline(args.search_baseline, 1 if args.quick else max(2, repeats // 2 + 1))

    # -- correctness ----------------------------------------------------------------------------
    qext_fast = (out["a"].sigma_ext_m2 / (np.pi * R_A**2 * 1e-18)).ravel()
    q_mp = np.asarray(out["baseline"][0])
    rel_mp = float(np.max(np.abs(qext_fast[grid_idx] - q_mp) / q_mp))
    rel_np = float(np.max(np.abs(qext_fast - out["a_numpy"].qext) / out["a_numpy"].qext))
    rel_large, rel_large_np = [], []
    for xl, (eps, radius, n_med, wl, mcl, xs) in large.items():
        q = out[f"x{xl:g}_nanoabs"][2] / (np.pi * radius**2)
        q_ref = out[f"x{xl:g}_miepython"][0]
        rel_large.append(float(np.max(np.abs(q - q_ref) / q_ref)))
        q_np = mie_layered(np.conj(mcl)[None], xs[None]).qext
        rel_large_np.append(float(np.max(np.abs(q - q_np) / q_np)))

    # -- start-up ---------------------------------------------------------------------------------
    st = startup(1 if args.quick else repeats)

    # -- report -----------------------------------------------------------------------------------
    n_a = m_a.shape[1]
    rows = [("baseline: miepython loop" + (f" (x{scale:g} scaled)" if stride > 1 else ""), "baseline", n_a),
            ("(a) Au sphere, spectrum()", "a", n_a),
            ("(a) compiled kernel only", "a_kernel", n_a),
            ("(a) numpy Mie path only (mie_layered)", "a_numpy", n_a),
            ("(b) SiO2/Au shell, spectrum()", "b", n_a),
            (f"(c) Au spheroids MLWA, spectrum() [{out['c'].metadata['solver_backend']}]", "c",
             out["c"].sigma_abs_m2.size)]
    for xl, n_wl in X_LARGE.items():
        rows += [(f"(a') x = {xl:g}, mie_cross_sections_nm2 [{out[f'x{xl:g}_nanoabs'][3]}]",
                  f"x{xl:g}_nanoabs", n_wl),
                 (f"(a') x = {xl:g}, miepython loop", f"x{xl:g}_miepython", n_wl)]
    ra, rb = ratio(times, "a", "baseline"), ratio(times, "b", "a")
    rc = ratio(times, "c", "baseline")
    r_large = {xl: ratio(times, f"x{xl:g}_nanoabs", f"x{xl:g}_base") for xl in X_LARGE}
    base_best = min(times["baseline"])
    targets = [
        ("(a) spectrum / baseline", ra, f"<= {TARGET_A:g}", ra[0] <= TARGET_A),
        ("(a) stretch", ra, f"<= {STRETCH_A:g}", ra[0] <= STRETCH_A),
    ]
    for xl in X_LARGE:
        targets.append((f"(a') x = {xl:g} / miepython", r_large[xl], f"<= {TARGET_A_LARGE:g}",
                        r_large[xl][0] <= TARGET_A_LARGE))
    targets += [
        ("(b) shell / (a)", rb, f"<= {TARGET_B:g}", rb[0] <= TARGET_B),
        ("(c) spheroids / baseline", rc, f"<= {TARGET_C:g}", rc[0] <= TARGET_C),
    ]
    if search:
        rd = ratio(search["times"], "new", "old")
        targets.append((f"(d) search / the same search at {args.search_baseline}", rd, f"<= {TARGET_D:g}",
                        rd[0] <= TARGET_D))
    else:  # a goal that could not be measured is not met
        targets.append((f"(d) search / the same search at {args.search_baseline}", (float("nan"),) * 2,
                        f"<= {TARGET_D:g}", False))
    if st:
        ri = ratio(st, "nanoabs", "numpy")
        rcli = ratio(st, "cli", "numpy")
        targets += [("(e) import nanoabs / import numpy", ri, f"<= {TARGET_IMPORT:g}", ri[0] <= TARGET_IMPORT),
                    ("(e) README spectrum command / import numpy", rcli, f"<= {TARGET_CLI:g}",
                     rcli[0] <= TARGET_CLI)]
    worst = max(rel_mp, rel_np)
    targets.append(("(a) max rel. diff Q_ext vs numpy and miepython", (worst, worst), f"<= {TOL_Q:g}",
                    worst <= TOL_Q))

    print("nanoabs benchmark  " + facts["date"])
    print(f"machine: {facts['cpu']}; {facts['cores_usable']} usable cores "
          f"({facts['cores_logical']} logical); {facts['platform']}; load average "
          + " ".join(f"{v:.1f}" for v in os.getloadavg()))
    print(f"python {facts['python']}, numpy {facts['numpy']}, scipy {facts['scipy']}, "
          f"numba {facts['numba'] or 'absent'}, miepython {facts['miepython']}, nanoabs {facts['nanoabs']} "
          f"({os.path.dirname(nanoabs.__file__)})")
    print("miepython backend: " + ("numba JIT" if JIT_ON else "pure Python, NO JIT (the baseline is far slower) "
                                   + BACKEND_NOTE))
    print(f"nanoabs Mie backend: {out['a'].metadata['solver_backend']}; "
          f"{'--quick, ' if args.quick else ''}{repeats} interleaved repeat(s)")
    print()
    print("one-time costs (excluded): warm-up in this process (numba import, kernel loads) "
          f"{t_warm:.2f} s")
    for label, c in calls.items():
        if c:
            print(f"  (f) first call ({', '.join(c['backends'])}), fresh interpreter, {label} numba cache: "
                  "import nanoabs "
                  f"{c['import_s']:.2f} s, numba import + Mie kernel build {c['numba_import_and_build_s']:.2f} s, "
                  f"first Mie call {c['mie_first_call_s']:.2f} s, first MLWA call {c['mlwa_first_call_s']:.2f} s")
        elif label == "cold" and not args.quick:
            print("  (f) cold compile: not measured (subprocess failed)")
    print()
    w = max(len(r[0]) for r in rows)
    print(f"{'case':<{w}}  {'best s':>9}  {'median s':>9}  {'points':>7}  {'ns/point':>9}")
    print("-" * (w + 44))
    for name, key, n in rows:
        t = np.array(times[key])
        print(f"{name:<{w}}  {t.min():9.4f}  {np.median(t):9.4f}  {n:7d}  {t.min() / n * 1e9:9.0f}")
    if search:
        for key, label in (("new", "this code"), ("old", args.search_baseline)):
            t = np.array(search["times"][key])
            print(f"{'(d) design.search, 3 families, ' + label:<{w}}  {t.min():9.4f}  {np.median(t):9.4f}")
        same = [d[0] for d in search["designs"]["new"]] == [d[0] for d in search["designs"]["old"]]
        pairs = list(zip(search["designs"]["new"], search["designs"]["old"]))

        def worst(i):  # largest relative change of column i over the rows where both are finite
            return max((abs(a[i] - b[i]) / abs(b[i]) for a, b in pairs if b[i] and np.isfinite(a[i] + b[i])),
                       default=0.0)

        nan_same = all(np.isnan(a[2]) == np.isnan(b[2]) for a, b in pairs)
        print(f"    (d) ranked families {'equal' if same else 'DIFFER'}; largest relative change of a "
              f"figure of merit {worst(1):.1e}, of a recheck figure of merit {worst(2):.1e} "
              f"(NaN rechecks {'alike' if nan_same else 'DIFFER'})")
    else:
        print(f"(d) not measured: {search_note}")
    if kernel_ok:
        gflops = FLOPS_PER_POINT * n_a / min(times["a_kernel"]) / 1e9
        print(f"\n(a) kernel: {gflops:.2f} Gflop/s at the issue's estimate of {FLOPS_PER_POINT} flops per point "
              f"({min(times['a_kernel']) / n_a * 1e9:.0f} ns/point on {facts['cores_usable']} cores)")
    print(f"correctness: Q_ext spectrum() vs numpy path {rel_np:.1e}, vs miepython {rel_mp:.1e} "
          f"({mc.size} points)")
    print("             (a') Q_ext vs numpy path " + ", ".join(
        f"x = {xl:g}: {r:.1e}" for xl, r in zip(X_LARGE, rel_large_np)) + "; vs miepython " + ", ".join(
        f"x = {xl:g}: {r:.1e}" for xl, r in zip(X_LARGE, rel_large)))
    print()
    print("targets (ratios: best / best, and median of the per-repeat ratios):")
    wt = max(len(t[0]) for t in targets)
    for name, (best, med), lim, ok in targets:
        fmt = "{:.2e}" if "diff" in name else "{:.3f}"
        print(f"  {name:<{wt}}  best {fmt.format(best):>9}  median {fmt.format(med):>9}  "
              f"(target {lim:>7})  {verdict(ok)}")
    total = time.perf_counter() - t_start
    print(f"\ntotal run time {total:.1f} s (a measurement: exit status is 0 whatever the verdicts)")

    if args.json:
        data = {"machine": facts, "settings": {"quick": args.quick, "repeats": repeats, "baseline_stride": stride},
                "times_s": {k: list(v) for k, v in times.items()}, "search": search,
                "startup_s": st, "first_calls": calls, "warmup_s": t_warm,
                "targets": {name: {"best": v[0], "median": v[1], "target": lim, "pass": bool(ok)}
                            for name, v, lim, ok in targets},
                "correctness": {"vs_numpy": rel_np, "vs_miepython": rel_mp, "large_x_vs_miepython": rel_large,
                                "large_x_vs_numpy": rel_large_np},
                "total_run_s": total}
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
