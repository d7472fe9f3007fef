"""Results people look at: short reprs, Spectrum.plot returning Axes, N-D datasets with units.

The round-trip references are the values themselves (written, read back, compared exactly);
the units attributes follow the CF conventions' UDUNITS spelling (common practice).
"""

import matplotlib

matplotlib.use("Agg")

import numpy as np  # noqa: E402
import pytest  # noqa: E402

import nanoabs  # noqa: E402
from nanoabs import NanoabsError  # noqa: E402

WL = np.linspace(400.0, 800.0, 501)


def test_repr_is_short_and_html_summary_escapes():
    s = nanoabs.spectrum(nanoabs.Sphere("Au", 20.0), WL)
    r = repr(s)
    assert len(r) < 400 and "peak" in r and "mie" in r
    h = s._repr_html_()
    assert h.startswith("<div>") and "<script" not in h


def test_plot_returns_axes_with_units_and_draws_family():
    import matplotlib.pyplot as plt

    s = nanoabs.spectrum(nanoabs.Sphere("Au", np.array([[10.0], [20.0], [30.0]])), WL)
    ax = s.plot(quantity="q_abs")
    assert isinstance(ax, matplotlib.axes.Axes)
    assert len(ax.get_lines()) == 3 and "[1]" in ax.get_ylabel()
    fig, ax2 = plt.subplots()
    assert s.plot(ax=ax2) is ax2 and "nm²" in ax2.get_ylabel()
    plt.close("all")
    with pytest.raises(NanoabsError):
        s.plot(quantity="colour")


def test_xarray_dataset_and_netcdf_round_trip(tmp_path):
    pytest.importorskip("xarray")
    from nanoabs.dataset import read_netcdf, write_netcdf

    radii = np.array([[10.0], [20.0]])
    s = nanoabs.spectrum(nanoabs.Sphere("Au", radii), WL)
    ds = s.to_xarray(dims=["radius"])
    assert ds.sigma_abs_m2.dims == ("radius", "wavelength_nm")
    assert ds.sigma_abs_m2.attrs["units"] == "m2" and ds.wavelength_nm.attrs["units"] == "nm"
    p = write_netcdf(ds, tmp_path / "s.nc")
    back = read_netcdf(p)
    np.testing.assert_array_equal(back.sigma_abs_m2.values, s.sigma_abs_m2)
    assert back.q_abs.attrs["units"] == "1"
    with pytest.raises(NanoabsError):
        write_netcdf(ds, tmp_path / "s.nc")  # never overwrite unless asked
    with pytest.raises(NanoabsError, match="dims"):
        s.to_xarray(dims=["a", "b"])


def test_sweep_as_dataset_and_cli_netcdf(tmp_path):
    pytest.importorskip("xarray")
    from nanoabs import design
    from nanoabs.cli import main
    from nanoabs.dataset import read_netcdf

    wl = np.linspace(500.0, 1200.0, 71)
    frame = design.sweep("spheroid", {"diameter_nm": [20.0], "length_nm": [40.0, 80.0, 120.0]}, wl,
                         polarization="long", progress=False)
    ds = design.sweep("spheroid", {"diameter_nm": [20.0], "length_nm": [40.0, 80.0, 120.0]}, wl,
                      polarization="long", progress=False, as_dataset=True)
    assert ds.sigma_abs_m2.dims == ("length_nm", "wavelength_nm") and float(ds.diameter_nm) == 20.0
    for L in (40.0, 80.0, 120.0):  # the same numbers as the tidy table
        rows = frame[frame.length_nm == L].sort_values("wavelength_nm")
        np.testing.assert_array_equal(ds.sigma_abs_m2.sel(length_nm=L).values, rows.sigma_abs_m2.values)
    assert ds.sigma_abs_m2.attrs["units"] == "m2"
    out = tmp_path / "rods.nc"
    code = main(["sweep", "--shape", "spheroid", "--material", "Au", "--param", "diameter_nm=20", "--param",
                 "length_nm=40:120:40", "--medium", "water", "--polarization", "long", "--wl", "500:1200:10",
                 "-o", str(out), "--quiet"])
    assert code == 0
    back = read_netcdf(out)
    assert back.sigma_abs_m2.shape == (3, 71) and back.wavelength_nm.attrs["units"] == "nm"
    assert main(["sweep", "--shape", "sphere", "--param", "radius_nm=10", "--wl", "500:600:10", "-o",
                 str(out), "--quiet"]) == 2  # exists: never overwritten without --force


def test_material_and_hot_carrier_reprs_are_short():
    m = nanoabs.material("Au")
    assert len(repr(m)) < 120 and "Au" in repr(m) and "nm" in repr(m)
    assert "<div>" in m._repr_html_()
    from nanoabs import illumination as il

    s = nanoabs.spectrum(nanoabs.Sphere("Au", 20.0), np.linspace(500.0, 700.0, 21))
    r = nanoabs.hot_carrier_estimate(s, nanoabs.Sphere("Au", 20.0), il.monochromatic(10.0), barrier_eV=0.8,
                                     density_per_um2=10)
    assert len(repr(r)) < 300 and "mA/W" in repr(r)
    import matplotlib.pyplot as plt

    ax = r.plot()
    assert "mA/W" in ax.get_ylabel()
    plt.close("all")


def test_sweep_map_returns_axes_and_keeps_every_design():
    import matplotlib.pyplot as plt
    from nanoabs import design
    from nanoabs.plotting import sweep_axes

    wl = np.linspace(450.0, 700.0, 26)
    one = design.sweep("sphere", {"radius_nm": [10.0, 20.0, 30.0]}, wl, progress=False)
    ax = sweep_axes(one)
    assert isinstance(ax, matplotlib.axes.Axes) and "radius" in ax.get_ylabel()
    two = design.sweep("sphere", {"radius_nm": [10.0, 20.0], "material": ["Au", "Ag"]}, wl, progress=False)
    ax2 = sweep_axes(two, quantity="q_abs")
    assert "design_id" in ax2.get_ylabel() and "material" in ax2.get_ylabel()
    plt.close("all")
