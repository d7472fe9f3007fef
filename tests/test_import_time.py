"""``import nanoabs`` stays light: heavy modules load where they are first needed.

Not a timing test (speed lives in bench/): it checks, in a fresh interpreter,
which modules the import pulls in.  The constants nanoabs keeps instead of
importing scipy.constants are checked against scipy.constants (CODATA 2022,
the exact SI defining constants).
"""

import json

import pytest

HEAVY = ("scipy.interpolate", "scipy.constants", "scipy.special", "scipy.integrate", "scipy.optimize",
         "pandas", "matplotlib", "numba", "miepython")


def _modules_after(run, code):
    p = run(code + "\nimport sys, json\nprint(json.dumps(sorted(sys.modules)))\n")
    return set(json.loads(p.stdout.strip().splitlines()[-1]))


def test_import_nanoabs_loads_no_heavy_module(fresh_python):
    loaded = _modules_after(fresh_python, "import nanoabs")
    assert "nanoabs" in loaded and "nanoabs.design" in loaded  # the probe did import the package
    assert sorted(m for m in HEAVY if m in loaded) == []


def test_small_sphere_spectrum_does_not_load_numba(fresh_python):
    """A grid below MIN_POINTS uses the numpy Mie path, so a small CLI command never imports numba."""
    loaded = _modules_after(
        fresh_python,
        "import numpy as np, nanoabs\n"
        "s = nanoabs.spectrum(nanoabs.Sphere('Au', 20.0), np.linspace(400, 900, 51))\n"
        "assert s.metadata['solver_backend'] == 'numpy', s.metadata['solver_backend']\n")
    assert "numba" not in loaded and "pandas" not in loaded


@pytest.mark.parametrize("name", ["h", "c", "e", "k", "hbar", "Stefan_Boltzmann", "m_e", "epsilon_0"])
def test_constants_match_scipy(name):
    from scipy import constants

    from nanoabs import _si

    # reference: scipy.constants. h, c, e, k (and hbar) are exact in the 2019 SI: equal to round-off.
    # m_e and epsilon_0 are measured (CODATA 2022 here; scipy < 1.15 carries CODATA 2018, which differs
    # by ~1e-9 relative) and Stefan-Boltzmann is tabulated to 10 digits: 1e-8 relative for those.
    exact = name in ("h", "c", "e", "k", "hbar")
    assert getattr(_si, name) == pytest.approx(getattr(constants, name), rel=1e-15 if exact else 1e-8, abs=0.0)


def test_spectrum_command_loads_neither_pandas_nor_scipy_interpolate(fresh_python, tmp_path):
    """The README's single-sphere `nanoabs spectrum` command with a CSV export: numpy PCHIP of the
    tables and the pandas-free writer (start-up of the command line)."""
    out = tmp_path / "au.csv"
    loaded = _modules_after(
        fresh_python,
        "from nanoabs.cli import main\n"
        f"assert main(['spectrum', '--shape', 'sphere', '--material', 'Au', '--radius', '20', '--medium',"
        f" 'water', '--wl', '400:900:1', '-o', {str(out)!r}]) == 0\n")
    assert out.exists()
    assert sorted(m for m in ("pandas", "scipy.interpolate") if m in loaded) == []
