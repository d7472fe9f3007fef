"""The compiled Mie kernel (nanoabs._compiled_mie) against the numpy recursion and miepython.

The numpy path (nanoabs.mie.mie_layered) is the oracle: it is checked against
miepython, scipy's spherical Bessel functions, published limits and identities
in test_mie.py.  Both paths run the same per-order formulas
(nanoabs._compiled_mie), so they must agree to round-off: 1e-12 of Q_ext here,
over size parameters 1e-4 to 200, |m| up to 20, lossless and absorbing layers
and thin shells, except at points where the problem itself is ill-conditioned
(a 2-ulp change of x moves the numpy result by more than 1e-13; sharp
resonances of lossless high-index spheres), where the tolerance is 10 times
that change.  miepython (Prahl, the PyPI package, called as
``miepython.efficiencies_mx(conj(m), x)``, since it uses n - ik) is the
outside reference for homogeneous spheres, to 1e-10.
"""

import pickle

import numpy as np
import pytest

import nanoabs
from nanoabs import _compiled, _compiled_mie, mie

pytestmark = pytest.mark.skipif(not _compiled_mie.available(), reason="numba not importable here")

RTOL = 1e-12


@pytest.fixture(autouse=True)
def _kernel_for_every_grid(monkeypatch):
    """The kernel also for the small grids of these tests (spectrum() uses it from MIN_POINTS on)."""
    monkeypatch.setattr(_compiled_mie, "MIN_POINTS", 0)


def _kernel(m, x):
    m = np.asarray(m, dtype=complex)
    x = np.asarray(x, dtype=float)
    return _compiled_mie.mie_efficiencies(m, x, mie.n_terms(x[-1]))


def _assert_agree(m, x, rtol=RTOL):
    """Kernel vs numpy: Q_sca and Q_abs each within rtol of Q_ext, widened where the problem itself
    is ill-conditioned (sharp resonances of lossless high-index layers) by 10 times the numpy
    result's change under a 2-ulp change of x or m; returns the fraction of points so widened."""
    qsca, qabs = _kernel(m, x)
    ref = mie.mie_layered(m, x)
    eps2 = 2 * np.finfo(float).eps
    cond = np.zeros(ref.qext.shape)
    for other in (mie.mie_layered(m, x * (1 + eps2)), mie.mie_layered(m * (1 + eps2), x)):
        for q in ("qsca", "qabs"):
            cond = np.maximum(cond, np.abs(getattr(other, q) - getattr(ref, q)) / ref.qext)
    tol = (rtol + 10 * cond) * ref.qext + 1e-300
    np.testing.assert_array_less(np.abs(qsca - ref.qsca), tol)
    np.testing.assert_array_less(np.abs(qabs - ref.qabs), tol)
    assert np.all(qabs[np.all(np.imag(m) == 0, axis=0)] == 0.0)
    return float(np.mean(10 * cond > rtol))


def _random_m(rng, n, lossless_fraction=0.3):
    m = rng.uniform(0.05, 20, n) + 1j * rng.uniform(0, 20, n) * (rng.uniform(0, 1, n) > lossless_fraction)
    return m / np.maximum(1.0, np.abs(m) / 20.0)  # |m| <= 20


def test_homogeneous_spheres_over_the_range():
    rng = np.random.default_rng(11)
    n = 3000
    x = 10 ** rng.uniform(-4, np.log10(200), n)
    assert _assert_agree(_random_m(rng, n)[None], x[None]) < 0.1  # most points at plain 1e-12


@pytest.mark.parametrize("x", [1e-4, 0.1, 1.0, 50.0, 200.0])
def test_metals_and_dielectrics_at_fixed_size(x):
    # Au near 500 nm and 900 nm, Ag at 400 nm, water-like and Si-like dielectrics (in water, from memory)
    m = np.array([0.98 + 1.41j, 0.15 + 4.2j, 0.06 + 1.52j, 1.01, 1.5, 2.6 + 0.01j, 20.0, 0.3 + 19.9j])
    _assert_agree(m[None], np.full((1, m.size), x))


def test_nearly_index_matched_tiny_sphere():
    # h_b - D1_n(x) ~ (m^2 - 1) x / 3 cancels against D1 ~ 1/x: both paths (and miepython) keep
    # only about 1e-11 there, so the tolerance is 1e-10 (Q_sca ~ 1e-24)
    _assert_agree(np.array([[1.0001, 1.0001 + 1e-6j]]), np.array([[1e-4, 1e-4]]), rtol=1e-10)


@pytest.mark.parametrize("n_layers", [2, 3])
def test_layered_spheres_with_thin_shells(n_layers):
    rng = np.random.default_rng(20 + n_layers)
    n = 1500
    x_out = 10 ** rng.uniform(-3, np.log10(100), n)
    fracs = np.sort(rng.uniform(0.3, 1.0, (n_layers - 1, n)), axis=0)
    thin = rng.uniform(0, 1, n) < 0.3  # a shell of 1e-3 of the outer radius
    fracs[-1, thin] = 1.0 - 1e-3
    x = np.vstack([fracs * x_out, x_out])
    m = np.stack([_random_m(rng, n) for _ in range(n_layers)])
    assert _assert_agree(m, x) < 0.1


def test_zero_thickness_shell_gives_the_core_sphere():
    # Yang (2003): a layer of zero thickness drops out of the recursion
    m, x = np.array([[0.2 + 3.0j], [1.5 + 0.0j]]), np.array([[2.0], [2.0]])
    qsca, qabs = _kernel(m, x)
    qs1, qa1 = _kernel(m[:1], x[:1])
    assert qsca[0] == pytest.approx(qs1[0], rel=1e-13) and qabs[0] == pytest.approx(qa1[0], rel=1e-13)


def test_gold_map_against_miepython():
    miepython = pytest.importorskip("miepython")
    wl = np.linspace(400, 900, 60)
    r = np.linspace(5, 100, 12)[:, None]
    s = nanoabs.spectrum(nanoabs.Sphere("Au", r), wl, medium="water")
    assert s.metadata["solver_backend"] == "compiled (numba)"
    k = 2 * np.pi * s.n_medium / wl
    m = np.broadcast_to(np.sqrt(s.layer_eps[0]) / s.n_medium, (r.size, wl.size)).ravel()
    x = np.broadcast_to(k * r, (r.size, wl.size)).ravel()
    qext, qsca, _, _ = miepython.efficiencies_mx(np.conj(m), x)
    area = np.pi * np.broadcast_to(r, (r.size, wl.size)).ravel() ** 2 * 1e-18
    np.testing.assert_allclose(s.sigma_ext_m2.ravel() / area, qext, rtol=1e-10)
    np.testing.assert_allclose(s.sigma_sca_m2.ravel() / area, qsca, rtol=1e-10)


CASES = [
    ("Au sphere", lambda: nanoabs.Sphere("Au", np.linspace(5, 80, 9)[:, None]), "water"),
    ("Ag sphere in SiO2", lambda: nanoabs.Sphere("Ag", 30.0), "SiO2"),
    ("SiO2/Au shell", lambda: nanoabs.LayeredSphere("SiO2", np.linspace(20, 60, 5)[:, None], [("Au", 8.0)]),
     "water"),
    ("Au/SiO2/Ag", lambda: nanoabs.LayeredSphere("Au", 15.0, [("SiO2", 3.0), ("Ag", 2.0)]), 1.5),
]


@pytest.mark.parametrize("name,make,medium", CASES, ids=[c[0] for c in CASES])
@pytest.mark.parametrize("damping", [True, False])
def test_spectrum_compiled_equals_numpy(name, make, medium, damping, monkeypatch):
    wl = np.linspace(400, 1200, 81)
    fast = nanoabs.spectrum(make(), wl, medium=medium, surface_damping=damping)
    monkeypatch.setattr(_compiled, "ENABLED", False)
    slow = nanoabs.spectrum(make(), wl, medium=medium, surface_damping=damping)
    assert fast.metadata["solver_backend"] == "compiled (numba)"
    assert slow.metadata["solver_backend"] == "numpy"
    for attr in ("sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2"):
        got, want = getattr(fast, attr), getattr(slow, attr)
        assert got.shape == want.shape
        np.testing.assert_allclose(got, want, rtol=RTOL, atol=1e-14 * np.max(slow.sigma_ext_m2))
    assert fast.metadata["warnings"] == slow.metadata["warnings"]


def test_bad_input_raises_the_same_error_in_both_paths(monkeypatch):
    with pytest.raises(nanoabs.NanoabsError, match="non-decreasing"):
        mie.mie_cross_sections_nm2([2.0 + 1j, 1.5], [np.array(5.0), np.array(4.0)], np.array([1.33]),
                                   np.array([500.0]))


def test_unavailable_compiler_falls_back(monkeypatch):
    monkeypatch.setitem(_compiled_mie._STATE, "kernel", None)
    monkeypatch.setitem(_compiled_mie._STATE, "error", "ImportError: simulated")
    s = nanoabs.spectrum(nanoabs.Sphere("Au", np.linspace(5, 100, 200)[:, None]), np.linspace(400, 900, 101))
    assert s.metadata["solver_backend"] == "numpy"
    assert np.all(s.sigma_abs_m2 > 0)


def test_concurrent_calls_from_threads(in_threads):
    wl = np.linspace(400, 900, 300)
    r = np.linspace(5, 100, 100)[:, None]

    def shell():
        return nanoabs.spectrum(nanoabs.LayeredSphere("SiO2", r, [("Au", 10.0)]), wl).sigma_abs_m2

    want = shell()
    for g in in_threads(shell):
        np.testing.assert_array_equal(g, want)


def test_forked_sweep_after_compiled_mie_call(fresh_python):
    """A process-pool sweep (fork) after the Mie kernel ran in the parent must not be killed."""
    p = fresh_python(
        "import numpy as np, nanoabs\n"
        "wl = np.linspace(400, 900, 50)\n"
        "s = nanoabs.spectrum(nanoabs.Sphere('Au', np.linspace(5, 100, 500)[:, None]), wl)\n"
        "assert s.metadata['solver_backend'] == 'compiled (numba)'\n"
        "r = nanoabs.design.sweep('sphere', {'radius_nm': np.linspace(5, 100, 40)}, wl,"
        " executor='processes', chunk_size=10, progress=False)\n"
        "print(len(r))\n")
    assert p.stdout.strip().splitlines()[-1] == str(40 * 50)


def test_spectrum_pickles():
    s = nanoabs.spectrum(nanoabs.Sphere("Au", np.array([[20.0], [40.0]])), np.linspace(400, 900, 11))
    assert s.metadata["solver_backend"] == "compiled (numba)"
    t = pickle.loads(pickle.dumps(s))
    np.testing.assert_array_equal(t.sigma_abs_m2, s.sigma_abs_m2)
    assert t.metadata == s.metadata


@pytest.mark.parametrize("z", [0.5 + 3.0j, 40.0 + 0.0j, 150.0 + 30.0j, 800.0 + 0.0j, 1e-4 + 2e-4j])
def test_later_d1_start_gives_identical_values(z, monkeypatch):
    """d1_start is the point past which a later start no longer changes D1 (bit for bit)."""
    n_store = int(mie.n_terms(abs(z) / 2))
    z = np.array([z]) if np.imag(z) else np.array([np.real(z)])
    d = mie._d1_down(z, n_store)
    start = mie.d1_start
    monkeypatch.setattr(mie, "d1_start", lambda az, ns: start(az, ns) + 60)
    np.testing.assert_array_equal(mie._d1_down(z, n_store), d)


def test_any_size_scope_and_one_thread_small_calls(monkeypatch):
    # Reference: the numpy path (the oracle of this file), 1e-12. Below MIN_POINTS spectrum() uses
    # numpy unless the caller opened _compiled_mie.any_size() (the band search does); small calls run
    # the kernel on one thread (_compiled.SERIAL_POINTS), which must not change a single bit.
    monkeypatch.setattr(_compiled_mie, "MIN_POINTS", 20_000)
    shell = nanoabs.LayeredSphere("SiO2", np.array([[30.0], [60.0]]), [("Au", 8.0)])
    wl = np.linspace(500.0, 1200.0, 71)
    ref = nanoabs.spectrum(shell, wl, medium="water")
    assert ref.metadata["solver_backend"] == "numpy"
    with _compiled_mie.any_size():
        fast = nanoabs.spectrum(shell, wl, medium="water")
    assert fast.metadata["solver_backend"] == "compiled (numba)"
    assert nanoabs.spectrum(shell, wl, medium="water").metadata["solver_backend"] == "numpy"  # scope closed
    np.testing.assert_allclose(fast.sigma_ext_m2, ref.sigma_ext_m2, rtol=RTOL, atol=0)
    np.testing.assert_allclose(fast.sigma_abs_m2, ref.sigma_abs_m2, rtol=RTOL, atol=0)
    m = np.array([[1.2 + 0.0j] * 300, [0.4 + 3.0j] * 300])
    x = np.array([np.linspace(0.5, 3.0, 300), np.linspace(0.8, 4.0, 300)])
    serial = _kernel(m, x)
    monkeypatch.setattr(_compiled, "SERIAL_POINTS", 0)
    threaded = _kernel(m, x)
    assert all(np.array_equal(a, b) for a, b in zip(serial, threaded))
