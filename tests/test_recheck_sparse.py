"""The search's T-matrix recheck on a subset of its grid (nanoabs.design._search._sparse_spectra).

The recheck solves the body at nodes about RECHECK_STEP_NM apart, refines intervals whose midpoint
misses the cubic spline by more than RECHECK_TOL (2e-3 of the largest cross-section) and
interpolates the rest.  Checks:

* against the direct T-matrix spectrum on the whole grid with the same orders (n_max, n_quad):
  exact at the nodes (1e-6: the early stop over m, 1e-2 of the solver tolerance), everywhere within
  RECHECK_TOL of the largest cross-section; band figure of merit within 1e-3, peak within 0.5 nm;
* against the direct converged spectrum (its own orders): within RECHECK_TOL plus the solver's
  tolerance for spheroids (1e-4);
* external reference: a gold sphere (spheroid with equal axes) in silicon against miepython
  (Prahl, PyPI package, ``efficiencies_mx(conj(m), x)``; Bohren & Huffman 1983, eqs. 4.61-4.62),
  Q_abs within 3e-3 of the largest Q_abs (RECHECK_TOL plus the T-matrix tolerance);
* the orders scope: inside ``reuse_orders`` a second solve of the same body reuses the recorded
  orders, a different body converges on its own.
"""

from __future__ import annotations

import numpy as np
import pytest

import nanoabs
from nanoabs import tmatrix
from nanoabs.design import _search

pytestmark = pytest.mark.filterwarnings("ignore")

SETTINGS = {"method": "tmatrix", "polarization": "random", "surface_damping": False}


def _problem(lo=1250.0, hi=1550.0, medium="Si"):
    window = _search._search_window(lo, hi, _search._ranges(nanoabs.material("Au"), nanoabs.material(medium)))
    band = np.linspace(lo, hi, 151)
    return _search._Problem("rod", nanoabs.material("Au"), None, nanoabs.material(medium), SETTINGS,
                            [(lo, hi, band, None)], window, "sigma_abs", "worst", True)


def _rod(length, diameter):
    return {"length_nm": np.array([length]), "diameter_nm": np.array([diameter]),
            "aspect_ratio": np.array([length / diameter])}


@pytest.mark.parametrize("dims", [(89.8, 45.2), (69.4, 29.5)])
def test_sparse_recheck_equals_the_direct_spectrum(dims):
    prob = _problem()
    g = _rod(*dims)
    with tmatrix.reuse_orders():
        sparse = _search._sparse_spectra(prob, g)
        same = prob.spectra(g, prob.grid)  # whole grid, the orders of the sparse solve
    own = prob.spectra(g, prob.grid)  # converged on its own sample of the grid
    assert 8 <= sparse["recheck_nodes"] < prob.grid.size / 2  # the point: fewer solves
    for k in ("sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2"):
        scale = np.max(same[k])
        assert np.max(np.abs(sparse[k] - same[k])) <= _search.RECHECK_TOL * scale
        assert np.max(np.abs(sparse[k] - own[k])) <= (_search.RECHECK_TOL + 1e-4) * scale
    ev_s, ev_d = prob.evaluate(g, spectra=sparse), prob.evaluate(g, spectra=same)
    assert ev_s["per_band"][0, 0] == pytest.approx(ev_d["per_band"][0, 0], rel=1e-3)
    from nanoabs.optics import _peak

    p_s, p_d = _peak(prob.grid, sparse["sigma_abs_m2"][0]), _peak(prob.grid, same["sigma_abs_m2"][0])
    assert abs(p_s - p_d) < 0.5 or (np.isnan(p_s) and np.isnan(p_d))


def test_sparse_recheck_of_a_sphere_matches_miepython():
    miepython = pytest.importorskip("miepython")
    prob = _problem()
    g = _rod(80.0, 80.0)
    sparse = _search._sparse_spectra(prob, g)
    wl = prob.grid
    n_med = nanoabs.material("Si").refractive_index(wl).real
    m = np.sqrt(nanoabs.material("Au").permittivity(wl)) / n_med
    x = 2 * np.pi * n_med * 40.0 / wl
    qext, qsca = (np.asarray(v) for v in miepython.efficiencies_mx(np.conj(m), x)[:2])
    q_abs = sparse["sigma_abs_m2"][0] / (np.pi * 40e-9 ** 2)
    assert np.max(np.abs(q_abs - (qext - qsca))) <= 3e-3 * np.max(qext - qsca)


def test_reuse_orders_records_each_body_once():
    wl = np.linspace(1000.0, 1800.0, 9)
    eps = nanoabs.material("Au").permittivity(wl)
    with tmatrix.reuse_orders():
        a = tmatrix.solver_tmatrix("spheroid", eps, 12.0, 90.0, 45.0, wl)
        b = tmatrix.solver_tmatrix("spheroid", eps[::2], 12.0, 90.0, 45.0, wl[::2])
        c = tmatrix.solver_tmatrix("spheroid", eps, 12.0, 60.0, 45.0, wl)
    assert b.info["n_max"] == a.info["n_max"] and b.info["n_quad"] == a.info["n_quad"]
    assert np.allclose(b.orientation_average()[2], a.orientation_average()[2][::2], rtol=1e-6, atol=0)
    plain = tmatrix.solver_tmatrix("spheroid", eps, 12.0, 60.0, 45.0, wl)
    assert c.info["n_max"] == plain.info["n_max"]
    assert not getattr(tmatrix._ORDERS, "memo", None)  # the scope is closed


def test_stack_recheck_is_one_call_on_nodes_and_a_spline(monkeypatch):
    # On a stack the recheck solves once, at nodes STACK_RECHECK_STEP_NM apart, and fills the grid with a
    # not-a-knot cubic spline (de Boor 1978, ch. IV-V). Checked with a stand-in spectrum: a Lorentzian
    # resonance 120 nm wide (FWHM, typical of a gold rod on silicon, common practice), which the spline
    # must reproduce within 2e-3 of its maximum between the nodes; exact at the nodes.
    env = nanoabs.on_substrate("Si", superstrate="air", gap_nm=2.0)
    prob = _problem()
    prob.medium = env
    calls = []

    def lorentz(wl):
        return 1e-14 / (1 + ((wl - 1400.0) / 60.0) ** 2)

    def fake(g, wl):
        calls.append(wl.size)
        one = lorentz(wl)[None, :]
        return {"sigma_abs_m2": one, "sigma_sca_m2": 0.1 * one, "sigma_ext_m2": 1.1 * one,
                "geometric_cross_section_m2": np.full_like(one, 1e-15), "equal_volume_area_m2": np.full_like(one, 1e-15),
                "n_medium": np.full_like(one, 3.5), "metal_volume_m3": np.array([1e-22])}

    monkeypatch.setattr(prob, "spectra", fake)
    out = _search._recheck_spectra(prob, None, "tmatrix")
    assert len(calls) == 1 and calls[0] == out["recheck_nodes"] < prob.grid.size / 2
    err = np.max(np.abs(out["sigma_abs_m2"][0] - lorentz(prob.grid))) / 1e-14
    assert err < 2e-3
