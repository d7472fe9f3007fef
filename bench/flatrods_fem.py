"""Hold the flat-rod methods against a full-wave rod spectrum (a CSV of wavelength_nm, sigma_abs_nm2).

A measurement, not a test (always exits 0 when its input exists). For a gold spheroid lying along
x, ``gap`` nm above a substrate, lit from the front at normal incidence with the field along the
rod (the case ``aurod100x30_sio2_front`` of the full-wave helper's FEM script: bulk permittivity,
no surface damping), it prints sigma_abs [nm^2] of

* dipole      - ``method="mlwa"``: corrected dipole with the reflected Green's function
* cut20/n16   - multipole method with the full T-matrix, reflection integral cut at k_par = 20 k_h,
                degree 16 (`nanoabs.surface_tmatrix`, order-converged for this cut, notes/flatrods.md)
* cut40/n24   - the same cut at 40 k_h, degree 24
* full/n12    - the package's full contour at degree 12 (does NOT converge here; for scale)

and each one's deviation from the reference, so that the truncated-contour remedy can be judged.

Usage: python bench/flatrods_fem.py PATH.csv [--substrate SiO2] [--length 100] [--diameter 30] [--gap 2]
"""

from __future__ import annotations

import argparse
import sys
import warnings

import numpy as np

import nanoabs
from nanoabs.environments import on_substrate
from nanoabs.surface_tmatrix import full_multipole_response, lab_tmatrix, stack_reflection
from nanoabs.tmatrix import TMatrix


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("csv")
    ap.add_argument("--substrate", default="SiO2")
    ap.add_argument("--length", type=float, default=100.0)
    ap.add_argument("--diameter", type=float, default=30.0)
    ap.add_argument("--gap", type=float, default=2.0)
    args = ap.parse_args(argv)
    warnings.simplefilter("ignore")
    with open(args.csv, encoding="utf-8") as f:
        rows = [line.strip().split(",") for line in f if line.strip() and not line.startswith("#")]
    ref = np.array(rows[1:], float)[:, :2]      # first row: the column names
    wl, fem = ref[:, 0], ref[:, 1]
    L, D = args.length, args.diameter
    env = on_substrate(args.substrate, gap_nm=args.gap, polarization="p")   # field along x = the rod
    rod = nanoabs.spheroid("Au", L, D)
    cols = {"dipole": nanoabs.spectrum(rod, wl, environment=env, polarization="long", method="mlwa",
                                       surface_damping=False).sigma_abs_m2 * 1e18}
    eps = nanoabs.material("Au").permittivity(wl)
    for label, n, cut in (("cut20/n16", 16, 20.0), ("cut40/n24", 24, 40.0), ("full/n12", 12, None)):
        T = lab_tmatrix(TMatrix.axisymmetric("spheroid", eps, 1.0, L, D, wl, n_max=n), [1, 0, 0])
        R, _ = stack_reflection(env, wl, D / 2, n, s_max=cut)
        cols[label] = full_multipole_response(env, T, wl, half_height_nm=D / 2, n_max=n, R=R,
                                              check_order=0)["sigma_abs_nm2"]
    print("| wavelength_nm | FEM | " + " | ".join(f"{k} (dev)" for k in cols) + " |")
    print("|---|---|" + "---|" * len(cols))
    for i, w in enumerate(wl):
        cells = [f"{v[i]:.4g} ({v[i] / fem[i] - 1:+.1%})" for v in cols.values()]
        print(f"| {w:g} | {fem[i]:.4g} | " + " | ".join(cells) + " |")
    j = int(np.argmax(fem))
    print(f"\nFEM maximum on the grid: {fem[j]:.4g} nm^2 at {wl[j]:g} nm; "
          + "; ".join(f"{k}: {v.max():.4g} at {wl[int(np.argmax(v))]:g} nm" for k, v in cols.items()))
    return 0


if __name__ == "__main__":
    sys.exit(main())
