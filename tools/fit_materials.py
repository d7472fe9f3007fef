"""Fit and store the shipped Drude-Lorentz parameter sets beside the metal tables.

Run from the repository root after changing a metal table or the fitter::

    python tools/fit_materials.py

Each fit is written to ``materials/<metal>__<source>.dl.json`` with the range and
the RMS relative error of eps it was fitted for. The fit window covers the part of
each table that matters for visible-to-infrared detectors; the Drude term is what
the surface-damping correction and the absorbed-power partition use.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parents[1]))


from nanoabs import __version__, fit_drude_lorentz, material  # noqa: E402

OUT = Path(__file__).resolve().parents[1] / "materials"

# (metal, source, window [nm], oscillators, lowest oscillator energy [eV]).
# The lowest oscillator energy sits just below the interband onset of each metal
# (Au, Cu ~2 eV; Ag ~3.9 eV; Al's parallel-band transition at ~1.5 eV; common
# practice), so that below it the losses are carried by the Drude term alone, as
# the surface-damping correction and the absorbed-power partition assume.
FITS = [
    ("Au", "johnson-christy-1972", (300, 1937), 4, 1.6),
    ("Au", "mcpeak-2015", (300, 1700), 4, 1.6),
    ("Au", "olmon-2012-evaporated", (300, 5000), 4, 1.6),
    ("Ag", "johnson-christy-1972", (300, 1937), 4, 3.0),
    ("Ag", "yang-2015", (300, 5000), 4, 3.0),
    ("Ag", "mcpeak-2015", (300, 1700), 4, 3.0),
    ("Cu", "johnson-christy-1972", (300, 1937), 4, 1.6),
    ("Cu", "mcpeak-2015", (300, 1700), 4, 1.6),
    ("Al", "rakic-1995", (200, 5000), 4, 1.0),
    ("Al", "mcpeak-2015", (200, 1700), 4, 1.0),
    ("TiN", "beliaev-2023-sputtered", (300, 5000), 3, 1.5),
    # Transition metals: d bands cross E_F, so interband absorption reaches into the infrared;
    # the lowest oscillator may sit at 0.3 eV and the Drude term is only the free-carrier part.
    ("Pt", "rakic-1998-ld", (300, 5000), 4, 0.3),
    ("Pd", "rakic-1998-ld", (300, 5000), 4, 0.3),
    ("Ni", "rakic-1998-ld", (300, 5000), 4, 0.3),
    ("Ti", "rakic-1998-ld", (300, 5000), 4, 0.3),
    ("Cr", "rakic-1998-ld", (300, 5000), 4, 0.3),
    ("W", "rakic-1998-ld", (300, 5000), 4, 0.3),
]


def main() -> None:
    for metal, src, window, nosc, e_min in FITS:
        m = material(metal, src)
        wl = m._wl
        res = fit_drude_lorentz(wl, m._n**2, oscillators=nosc, range_nm=window, starts=8,
                                min_oscillator_eV=e_min)
        d = res.model.to_dict()
        d.update({
            "material": metal, "source": src, "range_nm": list(res.range_nm),
            "rms_relative_error": res.rms_relative_error, "n_points": res.n_points,
            "oscillators_requested": nosc, "min_oscillator_eV": e_min,
            "fitted_by": f"nanoabs {__version__} fit_drude_lorentz (tools/fit_materials.py)",
        })
        path = OUT / f"{metal}__{src}.dl.json"
        path.write_text(json.dumps(d, indent=2) + "\n", encoding="utf-8")
        print(f"{metal:4s} {src:24s} {window} osc={nosc} rms={res.rms_relative_error:.3%} "
              f"wp={res.model.plasma_energy_eV:.3f} eV g={res.model.damping_eV:.4f} eV {res.success}")


if __name__ == "__main__":
    main()
