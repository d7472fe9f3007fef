"""Convergence guard of the T-matrix for bodies with edges (nanoabs.tmatrix._converge).

Measured behaviour (notes/tmatrix.md): the EBCM series of a capped rod or cylinder converges
slowly and not monotonically; successive orders can change the averaged cross-sections by up
to ~6e-2 before settling below 2e-2, while lost precision shows as jumps of 40 % to 1e3.
Checks: a thin gold capped rod (69 x 17 nm, aspect ratio 4.2) that the former rule declared
diverging converges at the solver tolerance 2e-2, and two higher fixed orders stay within
that tolerance of it (3e-2: one more step of the same oscillation); a rod beyond the range
(150 x 25 nm) still raises one line.
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


def test_rod_beyond_the_range_still_raises():
    wl = np.linspace(450.0, 1350.0, 7)
    eps = nanoabs.material("Au").permittivity(wl)
    with pytest.raises(NanoabsError, match="diverges|not converged|not passive") as err:
        TMatrix.axisymmetric("capped-rod", eps, N_WATER**2, 150.0, 25.0, wl, tol=2e-2)
    assert "\n" not in str(err.value)
