"""The solver table: every registered method honours the one interface; the "auto" rule;
cautions reach Python users as warnings.

These are interface checks (no physics values): each solver either refuses a particle with
the package's own one-line error, or returns finite, non-negative absorption with the
extinction = absorption + scattering bookkeeping the Spectrum promises.
"""

import warnings

import numpy as np
import pytest

import nanoabs
from nanoabs import LayeredSphere, NanoabsError, Sphere, spheroid
from nanoabs.solvers import AUTO_ORDER, METHODS, Homogeneous, choose
from nanoabs.validity import NanoabsWarning

WL = np.linspace(450.0, 900.0, 19)

PARTICLES = {
    "sphere": lambda: Sphere("Au", 15.0),
    "layered sphere": lambda: LayeredSphere("SiO2", 12.0, [("Au", 4.0)]),
    "rod": lambda: spheroid("Au", 40.0, 15.0),
    "coated rod": lambda: spheroid("Au", 40.0, 15.0, shell=("SiO2", 2.0)),
    "disc": lambda: spheroid("Ag", 10.0, 30.0),
}


@pytest.mark.parametrize("name", sorted(METHODS))
@pytest.mark.parametrize("kind", sorted(PARTICLES))
def test_every_solver_accepts_or_refuses_clearly(name, kind):
    particle = PARTICLES[kind]()
    solver = METHODS[name]
    reason = solver.accepts(particle)
    if reason is not None:
        with pytest.raises(NanoabsError) as exc:
            nanoabs.spectrum(particle, WL, medium="water", method=name)
        msg = str(exc.value)
        assert name in msg and particle.shape in msg and "\n" not in msg
        return
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", NanoabsWarning)
        s = nanoabs.spectrum(particle, WL, medium="water", method=name)
    assert s.metadata["method"] == name
    assert np.all(np.isfinite(s.sigma_abs_m2)) and np.all(s.sigma_abs_m2 >= 0)
    assert np.all(s.sigma_sca_m2 >= 0)
    np.testing.assert_allclose(s.sigma_ext_m2, s.sigma_abs_m2 + s.sigma_sca_m2, rtol=1e-12, atol=0)


def test_auto_rule_picks_the_first_accepting_solver_and_says_why():
    env = Homogeneous(nanoabs.material("water"))
    for kind, factory in PARTICLES.items():
        particle = factory()
        solver, reason = choose("auto", particle, env)
        first = next(n for n in AUTO_ORDER if METHODS[n].accepts(particle) is None)
        assert solver.name == first
        assert reason.startswith("auto:")
    s = nanoabs.spectrum(Sphere("Au", 10.0), WL)
    assert s.metadata["method"] == "mie" and "auto" in s.metadata["method_reason"]


def test_unknown_method_is_one_line_error_with_the_choices():
    with pytest.raises(NanoabsError) as exc:
        nanoabs.spectrum(Sphere("Au", 10.0), WL, method="fdtd")
    assert "method" in str(exc.value) and "mie" in str(exc.value)


def test_validity_caution_is_a_python_warning_and_structured():
    # a 200 nm gold rod is far outside the corrected quasi-static range (k a_max ~ 0.8-1.7 here)
    rod = spheroid("Au", 200.0, 40.0)
    with pytest.warns(NanoabsWarning, match="validity"):
        s = nanoabs.spectrum(rod, WL, medium="water", method="mlwa", polarization="long")
    codes = [c["code"] for c in s.metadata["cautions"]]
    assert "size-beyond-method" in codes
    c = next(c for c in s.metadata["cautions"] if c["code"] == "size-beyond-method")
    lo, hi = c["wavelength_nm"]
    assert WL[0] <= lo <= hi <= WL[-1]
    assert c["message"] in s.metadata["warnings"]


def test_small_sphere_gives_no_caution():
    with warnings.catch_warnings():
        warnings.simplefilter("error", NanoabsWarning)
        s = nanoabs.spectrum(Sphere("Au", 20.0), WL, medium=1.33)
    assert s.metadata["cautions"] == []
