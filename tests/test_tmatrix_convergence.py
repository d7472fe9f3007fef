"""Convergence guard of the T-matrix for bodies with edges (nanoabs.tmatrix._converge).

Measured behaviour (notes/tmatrix.md): the EBCM series of a capped rod or cylinder converges
slowly and not monotonically; successive orders can change the averaged cross-sections by up
to ~6e-2 before settling below 2e-2, while lost precision shows as jumps of 40 % to 1e3.
Checks: a thin gold capped rod (69 x 17 nm, aspect ratio 4.2) that the former rule declared
diverging converges at the solver tolerance 2e-2, and two higher fixed orders stay within
that tolerance of it (3e-2: one more step of the same oscillation); extended precision of the
Q assembly (below).
"""

from __future__ import annotations

import numpy as np
import pytest

import nanoabs
from nanoabs._errors import NanoabsError
from nanoabs.tmatrix import TMatrix

N_WATER = 1.333  # refractive index of water in the visible (from memory)


def test_thin_capped_rod_converges_and_higher_orders_agree():
    wl = np.linspace(450.0, 1350.0, 7)
    eps = nanoabs.material("Au").permittivity(wl)
    tm = TMatrix.axisymmetric("capped-rod", eps, N_WATER**2, 69.4, 16.7, wl, tol=2e-2)
    assert tm.info["achieved_change"] < 2e-2
    ref = tm.orientation_average()[2]
    for n in (tm.info["n_max"] + 2, tm.info["n_max"] + 4):
        other = TMatrix.axisymmetric("capped-rod", eps, N_WATER**2, 69.4, 16.7, wl, n_max=n).orientation_average()[2]
        assert np.max(np.abs(other / ref - 1)) < 3e-2


def test_extended_precision_rescues_thin_rods_and_keeps_double_results():
    # Measured (notes/tmatrix.md): EBCM precision is lost in the cancelling Q integrals; summing
    # them in numpy.longdouble gives about three more digits.  (1) Where double precision is
    # accurate (a 100 x 40 gold spheroid at n_max 10) both agree to 1e-10; (2) a 150 x 25 nm
    # capped rod that blows up in double converges in extended precision at tol 2e-2 and the
    # next order agrees within 3e-2; (3) an AR-8 gold spheroid (200 x 25 nm) converges to 1e-4
    # in extended precision, and the next order agrees within 1e-4; (4) a 200 x 25 nm capped rod
    # still raises one line ("also in extended precision").
    wl = np.linspace(450.0, 1350.0, 7)
    eps = nanoabs.material("Au").permittivity(wl)
    em = N_WATER**2
    a = TMatrix.axisymmetric("spheroid", eps, em, 100.0, 40.0, wl, n_max=10).orientation_average()[2]
    b = TMatrix.axisymmetric("spheroid", eps, em, 100.0, 40.0, wl, n_max=10, extended=True).orientation_average()[2]
    assert np.max(np.abs(a / b - 1)) < 1e-10
    rod = TMatrix.axisymmetric("capped-rod", eps, em, 150.0, 25.0, wl, tol=2e-2)
    assert rod.info["precision"] == "extended"
    nxt = TMatrix.axisymmetric("capped-rod", eps, em, 150.0, 25.0, wl, n_max=rod.info["n_max"] + 2, extended=True)
    assert np.max(np.abs(rod.orientation_average()[2] / nxt.orientation_average()[2] - 1)) < 3e-2
    sph = TMatrix.axisymmetric("spheroid", eps, em, 200.0, 25.0, wl, tol=1e-4)
    assert sph.info["precision"] == "extended"
    nxt = TMatrix.axisymmetric("spheroid", eps, em, 200.0, 25.0, wl, n_max=sph.info["n_max"] + 2, extended=True)
    s = sph.info["sample_wavelength_index"]  # the wavelengths the loop checks (at most 9 of the grid)
    assert np.max(np.abs(sph.orientation_average()[2][s] / nxt.orientation_average()[2][s] - 1)) < 1e-4
    with pytest.raises(NanoabsError, match="also in extended precision") as err:
        TMatrix.axisymmetric("capped-rod", eps, em, 200.0, 25.0, wl, tol=2e-2)
    assert "\n" not in str(err.value)


def test_extended_special_functions_match_double_references():
    # References: numpy's Gauss-Legendre rule (nodes 1e-15, weights 1e-14) and exactness on x^38
    # (2/39, calculus) to 1e-17; scipy.special.spherical_jn / spherical_yn for real x (1e-13).
    from scipy import special

    from nanoabs import _ebcm

    x, w = _ebcm.leggauss_extended(20)
    x0, w0 = np.polynomial.legendre.leggauss(20)
    assert x.dtype == np.longdouble and np.max(np.abs(x - x0)) < 1e-15 and np.max(np.abs(w - w0)) < 1e-14
    assert abs(float(np.sum(w * x**38) - np.longdouble(2) / 39)) < 1e-17
    z = np.array([0.05, 0.7, 3.14159, 4.493409, 9.0], dtype=np.longdouble)
    n = np.arange(16)[:, None]
    j = _ebcm.spherical_jn_all(15, z)
    y = _ebcm.spherical_yn_all(15, z)
    ref_j = special.spherical_jn(n, z.astype(float))
    ref_y = special.spherical_yn(n, z.astype(float))
    # relative 1e-13, or 1e-15 absolute next to a zero of j_0 (x = pi) or j_1 (x = 4.493409)
    assert np.all(np.abs(j.real.astype(float) - ref_j) <= 1e-13 * np.abs(ref_j) + 1e-15)
    assert np.max(np.abs(y.astype(float) - ref_y) / np.abs(ref_y)) < 1e-13
