"""Figures: written headless as PNG and SVG, axes labelled with units, atomic and no overwrite."""

import numpy as np
import pytest

import nanoabs
from nanoabs import NanoabsError
from nanoabs.plotting import plot_curves, plot_map, plot_material, plot_spectra, save_figure


def _labels(fig):
    return [(a.get_xlabel(), a.get_ylabel()) for a in fig.axes if a.get_label() != "<colorbar>"]


def test_figures_have_units_and_save(tmp_path):
    wl = np.arange(400, 901, 5.0)
    s = nanoabs.spectrum(nanoabs.Sphere("Au", 20), wl)
    figs = {
        "material": plot_material(nanoabs.material("Au")),
        "spectra": plot_spectra([("a", wl, s.sigma_abs_m2)], scale=1e18, band=(500, 600)),
        "map": plot_map(wl, [10, 20, 30], np.vstack([s.sigma_abs_m2] * 3), param_label="radius [nm]",
                        value_label="σ_abs [nm²]"),
        "curves": plot_curves(wl, [("y", wl * 0 + 1)], xlabel="wavelength [nm]", ylabel="yield [1]"),
    }
    for name, fig in figs.items():
        for xl, yl in _labels(fig)[:1]:
            assert "[" in xl and "]" in xl, (name, xl)
        for fmt in ("png", "svg"):
            p = save_figure(fig, tmp_path / f"{name}.{fmt}")
            assert p.stat().st_size > 500
    with pytest.raises(NanoabsError, match="exists"):
        save_figure(figs["map"], tmp_path / "map.png")
    with pytest.raises(NanoabsError, match=".png or .svg"):
        save_figure(figs["map"], tmp_path / "map.jpg")
    assert not [p for p in tmp_path.iterdir() if p.name.endswith(".tmp")]


def test_map_uses_perceptually_uniform_colormap():
    wl = np.arange(400, 901, 50.0)
    fig = plot_map(wl, [1, 2], np.ones((2, wl.size)), param_label="p [nm]", value_label="v [1]")
    mesh = fig.axes[0].collections[0]
    assert mesh.get_cmap().name in ("viridis", "cividis", "magma", "inferno", "plasma")
