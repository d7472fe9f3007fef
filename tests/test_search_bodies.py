"""Band search over the T-matrix rod families (cylinder, capped rod).

The coarse stage uses the fast method on a stand-in spheroid of the same aspect ratio and
volume; every ranked row carries its method and validity flag, and the recheck solves the rod
itself with the T-matrix.  Checks:

* identity: the recheck columns equal a direct ``nanoabs.spectrum(..., method="tmatrix")`` of
  the same rod on the search's grid (peak to 0.5 nm, figure of merit to 1e-6);
* stand-in geometry (calculus): the stand-in spheroid has the rod's volume and aspect ratio;
* common practice (Link, Mohamed & El-Sayed 1999, from memory, as in test_tmatrix): a gold rod's
  longitudinal resonance in water sits in the red for aspect ratios 2-3, so a 700-800 nm band
  is reachable and both the coarse and the exact peak fall within 10 % of each other.
"""

from __future__ import annotations

import numpy as np
import pytest

import nanoabs
from nanoabs import design
from nanoabs.cli import main
from nanoabs.design._search import _proxy_scale

pytestmark = pytest.mark.filterwarnings("ignore:tmatrix")


@pytest.mark.parametrize("family, cls", [("capped-rod", nanoabs.CappedRod), ("cylinder", nanoabs.Cylinder)])
def test_stand_in_spheroid_has_the_body_volume(family, cls):
    for L, D in ((100.0, 40.0), (60.0, 30.0)):
        f = float(_proxy_scale(family, L / D))
        sph = nanoabs.spheroid("Au", f * L, f * D)
        assert sph.volume_nm3() == pytest.approx(float(cls("Au", L, D).volume_nm3()), rel=1e-12)


def test_capped_rod_search_ranks_rows_with_method_validity_and_exact_recheck():
    res = design.search((720.0, 780.0), families=["capped-rod"], top=2, n_starts=1, progress=False,
                        polarization="long", bounds={"capped-rod": {"aspect_ratio": (2.0, 3.0),
                                                                    "diameter_nm": (30.0, 40.0)}})
    assert len(res) >= 1 and set(res.family) == {"capped-rod"}
    for _, row in res.iterrows():
        assert row.method == "mlwa" and "spheroid-stand-in" in row.validity
        assert row.recheck_method == "tmatrix"
        assert np.isfinite(row.recheck_peak_wavelength_nm) and np.isfinite(row.recheck_figure_of_merit)
        assert abs(row.recheck_peak_wavelength_nm / row.peak_wavelength_nm - 1) < 0.1
    best = res.iloc[0]
    window = np.array(res.attrs["metadata"]["window_nm"])
    # identity: the recheck is the T-matrix spectrum of the rod itself (band average of sigma_abs)
    band = np.linspace(720.0, 780.0, 41)
    s = nanoabs.spectrum(nanoabs.CappedRod("Au", best.length_nm, best.diameter_nm), band, medium="water",
                         polarization="long", method="tmatrix")
    fom = np.trapezoid(s.sigma_abs_m2, band) / 60.0
    assert best.recheck_figure_of_merit == pytest.approx(fom, rel=1e-6)
    assert window[0] < best.recheck_peak_wavelength_nm < window[1]


def test_cli_search_accepts_the_rod_families(capsys):
    code = main(["search", "--band", "720:780", "--families", "cylinder", "--top", "1", "--quiet"])
    out = capsys.readouterr().out
    assert code == 0 and "cylinder" in out and "spheroid-stand-in" in out
