"""Build the notebooks in notebooks/ from the cell sources below (run after editing them).

    python tools/make_notebooks.py

Keeping the cells here makes the notebooks reviewable as plain text; the
committed .ipynb files carry no outputs. tests/test_notebooks.py executes them.
"""

from __future__ import annotations

from pathlib import Path

import nbformat

HERE = Path(__file__).resolve().parents[1] / "notebooks"

SIZING = [
    ("md", """# Sizing gold particles for a 1250–1550 nm band

A worked example in an invented scenario: the *Marrowfield Photonics Lab* (fictional) wants gold
particles buried in n-type silicon to absorb between 1250 and 1550 nm, where silicon is transparent.
We compare shape families, map how the resonance moves with size, rank designs for the band, and
look at how a realistic size spread (5–15 %, common practice) broadens and lowers the peak."""),
    ("code", """%matplotlib inline
import numpy as np
import matplotlib.pyplot as plt
import nanoabs
from nanoabs import design

band = (1250.0, 1550.0)
wl = np.arange(1150.0, 1701.0, 5.0)
si = nanoabs.material("Si")"""),
    ("md", "## 1. Spheres do not reach the band; rods and shells do"),
    ("code", """cands = {
    "sphere r=40": nanoabs.Sphere("Au", 40.0),
    "rod 60x20 (long axis)": nanoabs.spheroid("Au", 60.0, 20.0),
    "SiO2 40 / Au 8 shell": nanoabs.LayeredSphere("SiO2", 40.0, [("Au", 8.0)]),
}
fig, ax = plt.subplots()
for label, p in cands.items():
    s = nanoabs.spectrum(p, wl, medium=si, polarization="long")
    ax.plot(wl, s.sigma_abs_m2 * 1e18, label=f"{label}: peak {s.peak_wavelength_nm():.0f} nm")
ax.axvspan(*band, color="0.9")
ax.set_xlabel("wavelength [nm]"); ax.set_ylabel("absorption cross-section [nm²]"); ax.legend()"""),
    ("md", "## 2. Map of the rod resonance against length"),
    ("code", """res = design.sweep("spheroid", {"length_nm": np.arange(40, 101, 5.0), "diameter_nm": [20.0]},
                   wl, material="Au", medium=si, polarization="long", progress=False)
frame = res.frame if hasattr(res, "frame") else res
grid = frame.pivot_table(index="length_nm", columns="wavelength_nm", values="sigma_abs_m2")
from nanoabs.plotting import plot_map
fig, ax = plt.subplots()
plot_map(grid.columns.values, grid.index.values, grid.values * 1e18, param_label="rod length [nm]",
         value_label="σ_abs [nm²]", band=band, ax=ax)
ax.set_title("Au rods (20 nm diameter) in Si, field along the rod");"""),
    ("md", "## 3. Ranked designs for the band"),
    ("code", """ranked = design.search(band, families=["sphere", "shell", "rod"], objective="absorbed_fraction",
                       materials=["Au"], medium=si, max_size_nm=200, min_shell_nm=5, top=5, progress=False)
ranked"""),
    ("md", "## 4. What a 10 % length spread does"),
    ("code", """fig, ax = plt.subplots()
for spread in (0.0, 0.05, 0.10, 0.15):
    avg = design.ensemble_average("spheroid", {"length_nm": 60.0, "diameter_nm": 20.0},
                                  {"length_nm": spread}, wl, material="Au", medium=si,
                                  polarization="long")
    sig = avg["sigma_abs_m2"] if isinstance(avg, dict) else avg.sigma_abs_m2
    ax.plot(wl, np.asarray(sig) * 1e18, label=f"{spread:.0%} spread")
ax.set_xlabel("wavelength [nm]"); ax.set_ylabel("mean absorption cross-section [nm²]"); ax.legend()"""),
]

EXPORT = [
    ("md", """# Handing a spectrum to a device model

The `hot-carriers` export is a CSV (SI units in the column names) with a JSON sidecar that
records every input. Here we write one for an invented design — gold rods in silicon under an
invented 1310 nm test laser — read it back, and use it in a toy device model: photocurrent into
a transimpedance amplifier, and the array responsivity across the band."""),
    ("code", """%matplotlib inline
import json, tempfile
from pathlib import Path
import numpy as np
import matplotlib.pyplot as plt
import nanoabs
from nanoabs import illumination as il

work = Path(tempfile.mkdtemp())
rod = nanoabs.spheroid("Au", 60.0, 20.0)
wl = np.arange(1150.0, 1701.0, 5.0)
spec = nanoabs.spectrum(rod, wl, medium="Si", polarization="long")
res = nanoabs.hot_carrier_estimate(spec, rod, il.monochromatic(2.0e3), barrier_eV=0.8,
                                   density_per_um2=15)
files = res.write(work / "tern_rods.csv")
print([f.name for f in files])"""),
    ("md", "## Read it back: same numbers, units and provenance"),
    ("code", """frame, sidecar = nanoabs.read_export(work / "tern_rods.csv")
units = {c["name"]: c["unit"] for c in sidecar["columns"]}
print(units["responsivity_A_W"], units["photocurrent_density_A_m2"])
print(sidecar["metadata"]["schottky"])
assert np.allclose(frame["responsivity_A_W"], res.frame["responsivity_A_W"])"""),
    ("md", """## A toy device model
A 1 mm² detector behind a transimpedance amplifier with 1 MΩ feedback (invented values). The
export's responsivity gives the current for any incident power at each wavelength."""),
    ("code", """area_m2 = 1e-6
feedback_ohm = 1e6
power_W = 2.0e3 * area_m2                       # the same 2 kW/m^2 as the export
i13 = np.interp(1310.0, frame.wavelength_nm, frame.responsivity_A_W) * power_W
print(f"photocurrent at 1310 nm: {i13:.3e} A -> output {i13 * feedback_ohm * 1e3:.3f} mV")
band = (frame.wavelength_nm >= 1250) & (frame.wavelength_nm <= 1550)
print(f"mean responsivity 1250-1550 nm: {frame.responsivity_A_W[band].mean():.3e} A/W")
fig, ax = plt.subplots()
ax.plot(frame.wavelength_nm, frame.responsivity_A_W * 1e3)
ax.axvspan(1250, 1550, color="0.9", zorder=0, label="target band")
ax.set_xlabel("wavelength [nm]"); ax.set_ylabel("array responsivity [mA/W]"); ax.legend();"""),
    ("md", """## A lookup table for a circuit simulator
Two columns, one header line: most circuit simulators read this as a piecewise-linear table."""),
    ("code", """from nanoabs.handoff import responsivity_table
table = responsivity_table(frame.wavelength_nm, frame.responsivity_A_W, work / "responsivity.csv")
print(table.read_text().splitlines()[:3])"""),
]

FIT = [
    ("md", """# Fitting a Drude–Lorentz model to your own ellipsometry table

Films grown in your own lab rarely match handbook data. Here we fit a passive Drude–Lorentz model
to an ellipsometry table (`data/film_ellipsometry.csv`, an invented gold film: values made by
`tools/make_notebooks.py` from a model plus 1 % noise, not a measurement), compare it with Johnson &
Christy, and use the fitted film in a spectrum."""),
    ("code", """%matplotlib inline
from pathlib import Path
import numpy as np
import matplotlib.pyplot as plt
import nanoabs

here = Path.cwd()
table = here / "data" / "film_ellipsometry.csv"
if not table.exists():                      # when run from the repository root
    table = here / "notebooks" / "data" / "film_ellipsometry.csv"
film = nanoabs.load_table(table, name="Au-film")
print(film.metadata())"""),
    ("code", """wl = film._wl
res = nanoabs.fit_drude_lorentz(wl, film.permittivity(wl), oscillators=2, range_nm=(450, 1000))
print(f"RMS relative error of eps: {res.rms_relative_error:.2%}")
print(res.model)"""),
    ("code", """jc = nanoabs.material("Au")
grid = np.linspace(500, 1000, 6)
for w, a, b in zip(grid, res.model.permittivity(grid), jc.permittivity(grid)):
    print(f"{w:6.0f} nm  film eps = {a.real:8.2f}{a.imag:+7.2f}i   J&C eps = {b.real:8.2f}{b.imag:+7.2f}i")"""),
    ("code", """s_film = nanoabs.spectrum(nanoabs.Sphere(film, 20.0), np.arange(460, 901, 2.0), medium="water",
                          surface_damping=False)
s_jc = nanoabs.spectrum(nanoabs.Sphere("Au", 20.0), np.arange(460, 901, 2.0), medium="water",
                        surface_damping=False)
print(f"peak with film data: {s_film.peak_wavelength_nm():.1f} nm; with J&C: {s_jc.peak_wavelength_nm():.1f} nm")
ax = s_film.plot(label="fitted film")
s_jc.plot(ax=ax, label="Johnson & Christy");"""),
]


def _nb(cells):
    nb = nbformat.v4.new_notebook()
    nb.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    for kind, src in cells:
        nb.cells.append(nbformat.v4.new_markdown_cell(src) if kind == "md" else nbformat.v4.new_code_cell(src))
    return nb


def _film_table(path: Path) -> None:
    """Invented ellipsometry table: a Drude-Lorentz gold-like film plus 1 % noise (seeded)."""
    from nanoabs import DrudeLorentz, Oscillator

    model = DrudeLorentz(1.8, 8.4, 0.085, (Oscillator(2.75, 1.1, 0.75), Oscillator(3.9, 2.6, 1.3)))
    wl = np.arange(400.0, 1101.0, 10.0)
    rng = np.random.default_rng(7)
    eps = model.permittivity(wl) * (1 + 0.01 * rng.standard_normal(wl.size))
    lines = ["# invented demo data (not a measurement): gold-like film, Drude-Lorentz model + 1 % noise",
             "# convention: exp(-i omega t), eps'' >= 0", "wavelength_nm,eps_real,eps_imag"]
    lines += [f"{w:g},{e.real:.6g},{abs(e.imag):.6g}" for w, e in zip(wl, eps)]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")


import numpy as np  # noqa: E402


def main() -> None:
    HERE.mkdir(exist_ok=True)
    (HERE / "data").mkdir(exist_ok=True)
    _film_table(HERE / "data" / "film_ellipsometry.csv")
    for name, cells in (("01_sizing_for_a_band", SIZING), ("02_export_to_a_device_model", EXPORT),
                        ("03_fit_your_own_material", FIT)):
        nbformat.write(_nb(cells), HERE / f"{name}.ipynb")
        print("wrote", name)


if __name__ == "__main__":
    import sys

    sys.path.insert(0, str(Path(__file__).resolve().parents[1]))
    main()
