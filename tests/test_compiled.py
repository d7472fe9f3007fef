"""The compiled MLWA map (nanoabs._compiled) against the numpy formulas it fuses.

The numpy path is the reference here: it is itself checked against published
results in test_quasistatic.py (Bohren & Huffman 1983 eqs. 5.32-5.33, Moroz 2009,
Meier & Wokaun 1983, and Mie theory for spheres). These tests require the two
paths to agree to round-off, for every polarisation, with and without surface
damping, including the clipping of a damped eps'' at 0.
"""

import numpy as np
import pytest

import nanoabs
from nanoabs import _compiled
from nanoabs import quasistatic as qs
from nanoabs.drude_lorentz import surface_damping_correction, DrudeLorentz
from nanoabs.particles import Ellipsoid, spheroid

pytestmark = pytest.mark.skipif(not _compiled.available(), reason="numba not importable here")

RTOL = 1e-12


def _close(a, b, rtol=RTOL):
    a, b = np.asarray(a), np.asarray(b)
    assert a.shape == b.shape
    scale = np.max(np.abs(b))
    np.testing.assert_allclose(a, b, rtol=rtol, atol=1e-14 * scale)


@pytest.mark.parametrize("axes_idx,weights", [([0], [1.0]), ([2], [1.0]), ([0, 1], [1 / 3, 2 / 3]),
                                              ([0, 1, 2], [1 / 3, 1 / 3, 1 / 3])])
def test_kernel_matches_numpy_formulas(axes_idx, weights):
    rng = np.random.default_rng(7)
    S, W = 40, 60
    a = rng.uniform(5, 60, S)
    b = rng.uniform(3, 30, S)
    c = rng.uniform(2, 20, S)
    wl = np.linspace(450, 1600, W)
    energy = 1239.84198 / wl
    # synthetic bulk permittivity: a Drude-like metal whose tabulated loss is below the Drude
    # term at long wavelengths, so strong extra damping must be clipped there
    model = DrudeLorentz(eps_inf=4.0, plasma_energy_eV=8.5, damping_eV=0.08)
    eps_bulk = model.permittivity(wl)
    eps_bulk = eps_bulk.real + 0.3j * eps_bulk.imag
    extra = rng.uniform(0.0, 100.0, S)  # up to unphysically strong damping, to reach the clipping
    n_med = np.linspace(1.33, 1.5, W)
    k = 2 * np.pi * n_med / wl
    L = qs.depolarization_factors(a, b, c)
    D = qs.dynamic_depolarization_factors(a, b, c)
    semi = (a, b, c)
    depol = np.stack([L[i] for i in axes_idx])
    dyn = np.stack([D[i] / (4 * np.pi * semi[i]) for i in axes_idx])
    vol = 4 / 3 * np.pi * a * b * c
    sa, ss, se, n_clip, n_bad = _compiled.ellipsoid_mlwa_map(
        eps_bulk, energy, (model.plasma_energy_eV**2, model.damping_eV), extra, n_med**2, k,
        depol, dyn, np.array(weights), vol, 1.0)

    # numpy: damped permittivity (materials.damped_permittivity's formula) + B&H 5.32 + MLWA
    eps = eps_bulk + surface_damping_correction(model, energy, extra[:, None])
    assert n_clip == int(np.sum(eps.imag < 0)) > 0
    eps = eps.real + 1j * np.maximum(eps.imag, 0.0)
    ref = [0.0, 0.0, 0.0]
    for i, w in zip(axes_idx, weights):
        alpha = qs.polarizability_ellipsoid_mlwa(eps, n_med**2, a[:, None], b[:, None], c[:, None], k,
                                                 axis="xyz"[i])
        ref = [r + w * x for r, x in zip(ref, qs.cross_sections(alpha, k, corrected=True))]
    for got, want in zip((sa, ss, se), ref):
        _close(got, want, rtol=1e-11)
    assert np.all(sa >= 0) and n_bad == 0


CASES = [
    ("rod random", lambda: spheroid("Au", np.linspace(40, 200, 30)[:, None], 20.0), "random", "water"),
    ("rod long", lambda: spheroid("Au", np.linspace(40, 200, 30)[:, None], 20.0), "long", 1.5),
    ("disc short", lambda: spheroid("Ag", 10.0, np.linspace(30, 90, 7)[:, None]), "short", "SiO2"),
    ("disc random", lambda: spheroid("Al", 8.0, 40.0), "random", 1.0),
    ("triaxial x", lambda: Ellipsoid("Ag", (30, 15, 10)), "x", 1.5),
    ("triaxial z", lambda: Ellipsoid("Cu", (30, 15, 10)), "z", "water"),
    ("triaxial random", lambda: Ellipsoid("Au", (np.array([[20.0], [35.0]]), 12.0, 7.0)), "random", "Si"),
    ("TiN (no damping data)", lambda: spheroid("TiN", 80.0, 30.0), "random", "water"),
]


@pytest.mark.parametrize("name,make,pol,medium", CASES, ids=[c[0] for c in CASES])
@pytest.mark.parametrize("damping", [True, False])
def test_spectrum_compiled_equals_numpy(name, make, pol, medium, damping, monkeypatch):
    wl = np.linspace(1200, 1550, 71) if medium == "Si" else np.linspace(420, 1400, 99)
    fast = nanoabs.spectrum(make(), wl, method="mlwa", medium=medium, polarization=pol, surface_damping=damping)
    monkeypatch.setattr(_compiled, "ENABLED", False)
    slow = nanoabs.spectrum(make(), wl, method="mlwa", medium=medium, polarization=pol, surface_damping=damping)
    assert fast.metadata["solver_backend"] == "compiled (numba)"
    assert slow.metadata["solver_backend"] == "numpy"
    for attr in ("sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2", "geometric_cross_section_m2",
                 "equal_volume_area_m2", "q_abs", "q_abs_eqvol"):
        _close(getattr(fast, attr), getattr(slow, attr))
    for key in ("warnings", "surface_damping", "method", "efficiency_reference_area"):
        assert fast.metadata[key] == slow.metadata[key]
    assert len(fast.layer_eps) == len(slow.layer_eps) == 1
    _close(fast.layer_eps[0], slow.layer_eps[0])


def test_geometry_varying_with_wavelength_uses_numpy():
    wl = np.linspace(500, 900, 5)
    s = nanoabs.spectrum(spheroid("Au", np.linspace(40, 80, 5)[None, :], 20.0), wl, medium="water", method="mlwa")
    assert s.metadata["solver_backend"] == "numpy"
    assert s.sigma_abs_m2.shape == (1, 5)  # explicit (1, W): a 1-D size array is refused (particles.py)


def test_concurrent_calls_from_threads(in_threads):
    wl = np.linspace(500, 1500, 400)
    lengths = np.linspace(40, 200, 300)[:, None]

    def rods():
        return nanoabs.spectrum(spheroid("Au", lengths, 20.0), wl, medium="water", method="mlwa").sigma_abs_m2

    want = rods()
    for g in in_threads(rods):
        np.testing.assert_array_equal(g, want)


def test_unavailable_compiler_falls_back(monkeypatch):
    monkeypatch.setitem(_compiled._STATE, "kernel", None)
    monkeypatch.setitem(_compiled._STATE, "error", "ImportError: simulated")
    assert not _compiled.available()
    s = nanoabs.spectrum(spheroid("Au", 60.0, 20.0), np.linspace(500, 900, 11), medium="water", method="mlwa")
    assert s.metadata["solver_backend"] == "numpy"
    assert np.all(s.sigma_abs_m2 > 0)


def test_forked_sweep_after_compiled_call(fresh_python):
    """A process-pool sweep (fork) after the kernel ran in the parent must not be killed.

    numba terminates a forked child of a process that used GNU OpenMP; nanoabs selects
    numba's fork-safe workqueue pool. Run in a fresh interpreter so the pool state is clean.
    """
    p = fresh_python(
        "import numpy as np, nanoabs\n"
        "wl = np.linspace(500, 1500, 50)\n"
        "s = nanoabs.spectrum(nanoabs.spheroid('Au', np.linspace(40, 200, 20)[:, None], 20.0), wl, method='mlwa')\n"
        "assert s.metadata['solver_backend'] == 'compiled (numba)'\n"
        "r = nanoabs.design.sweep('spheroid', {'length_nm': np.linspace(40, 200, 40), 'diameter_nm': [20.0]},"
        " wl, executor='processes', chunk_size=10, progress=False)\n"
        "print(len(r))\n")
    assert p.stdout.strip().splitlines()[-1] == str(40 * 50)


def test_spectrum_with_deferred_eps_pickles():
    import pickle

    s = nanoabs.spectrum(spheroid("Au", np.array([[50.0], [80.0]]), 20.0), np.linspace(500, 900, 9), method="mlwa")
    assert s.metadata["solver_backend"] == "compiled (numba)"
    t = pickle.loads(pickle.dumps(s))
    np.testing.assert_array_equal(t.sigma_abs_m2, s.sigma_abs_m2)
    np.testing.assert_array_equal(t.layer_eps[0], s.layer_eps[0])


def test_index_matched_lossless_particle_gives_zero_in_both_paths(monkeypatch):
    """A lossless ellipsoid with the medium's own index has no polarisability (B&H eq. 5.32: alpha = 0)."""
    wl = np.linspace(500, 900, 5)
    fast = nanoabs.spectrum(spheroid(1.5, np.array([[60.0]]), 20.0), wl, medium=1.5, method="mlwa")
    monkeypatch.setattr(_compiled, "ENABLED", False)
    slow = nanoabs.spectrum(spheroid(1.5, np.array([[60.0]]), 20.0), wl, medium=1.5, method="mlwa")
    assert fast.metadata["solver_backend"] == "compiled (numba)"
    for s in (fast, slow):
        assert np.all(s.sigma_ext_m2 == 0) and not any("non-finite" in w for w in s.metadata["warnings"])
