"""The material store: shipped tables, interpolation, ranges, user tables, surface damping."""

import numpy as np
import pytest
from hypothesis import given, settings, strategies as st

from nanoabs import NanoabsError, material
from nanoabs.hotcarriers import FREE_ELECTRON
from nanoabs.materials import catalog, default_source, load_table

REQUIRED = ["Au", "Ag", "Cu", "Al", "TiN", "SiO2", "TiO2", "Al2O3", "ZnO", "Si", "GaN", "H2O", "air"]


def test_required_materials_and_datasets_present():
    cat = catalog()
    for name in REQUIRED:
        assert name in cat, name
    # Johnson & Christy (1972) is the default for the noble metals; a second modern set exists
    for metal in ("Au", "Ag", "Cu"):
        assert default_source(metal) == "johnson-christy-1972"
    assert len(cat["Au"]) >= 2 and len(cat["Ag"]) >= 2
    for name, srcs in cat.items():
        for src, h in srcs.items():
            for key in ("material", "reference", "dataset", "range_nm", "convention"):
                assert h.get(key), (name, src, key)
            assert "CC0" in h["dataset"] or name == "air"


def _raw_rows(name, source):
    """Read the shipped CSV directly, independent of the loader."""
    import csv

    path = catalog()[name][source]["path"]
    rows = [r for r in csv.reader(l for l in open(path, encoding="utf-8") if not l.startswith("#"))]
    a = np.array(rows[1:], dtype=float)
    return a[:, 0], a[:, 1], a[:, 2]


@pytest.mark.parametrize("name,source", [("Au", "johnson-christy-1972"), ("Ag", "yang-2015"),
                                         ("Si", "green-2008"), ("H2O", "hale-querry-1973")])
def test_tabulated_points_reproduced(name, source):
    wl, n, k = _raw_rows(name, source)
    got = material(name, source).refractive_index(wl)
    np.testing.assert_allclose(got.real, n, rtol=1e-12)
    np.testing.assert_allclose(got.imag, k, rtol=1e-12, atol=1e-15)


def test_johnson_christy_gold_value():
    # Johnson & Christy, Phys. Rev. B 6, 4370 (1972), Table I, Au at 1.51 eV (821.1 nm):
    # n = 0.16, k = 5.08 (from memory; tolerance 0.01, the printed precision).
    n = material("Au").refractive_index(821.1)
    assert n.real == pytest.approx(0.16, abs=0.01) and n.imag == pytest.approx(5.08, abs=0.01)


def test_interpolation_no_overshoot():
    # Shape-preserving PCHIP (Fritsch & Carlson 1980): between two tabulated points the
    # interpolant stays inside the interval spanned by their values.
    for name in ("Au", "Ag", "Cu", "Al", "TiN"):
        m = material(name)
        wl, n, k = _raw_rows(name, m.source)
        sel = (wl > m.range_nm[0]) & (wl < m.range_nm[1])
        for i in np.flatnonzero(sel)[:-1]:
            x = np.linspace(wl[i], wl[i + 1], 9)[1:-1]
            y = m.refractive_index(x)
            for col, got in ((n, y.real), (k, y.imag)):
                lo, hi = min(col[i], col[i + 1]), max(col[i], col[i + 1])
                assert np.all(got >= lo - 1e-12) and np.all(got <= hi + 1e-12)


def test_smooth_first_derivative():
    m = material("Au")
    x = np.linspace(450, 900, 4001)
    d = np.diff(m.refractive_index(x).imag) / np.diff(x)
    # C1: no jumps in slope larger than the data's own curvature allows
    assert np.max(np.abs(np.diff(d))) < 5e-4


def test_vectorised_and_scalar():
    m = material("Au")
    assert np.isscalar(m.permittivity(600.0)) or np.ndim(m.permittivity(600.0)) == 0
    grid = np.linspace(400, 900, 12).reshape(3, 4)
    assert m.permittivity(grid).shape == (3, 4)
    np.testing.assert_allclose(m.permittivity(grid), m.refractive_index(grid) ** 2)
    assert np.all(m.permittivity(grid).imag >= 0)


def test_constant_medium_and_aliases():
    assert material(1.33).refractive_index(500.0) == pytest.approx(1.33)
    assert material("1.5").permittivity([400.0, 800.0]) == pytest.approx([2.25, 2.25])
    assert material("water").name == "H2O"
    assert material("air").refractive_index(1234.0) == 1.0
    with pytest.raises(NanoabsError, match="refractive index"):
        material(-1.0)


def test_out_of_range_error_names_everything():
    with pytest.raises(NanoabsError) as e:
        material("Au").permittivity([100.0, 500.0])
    msg = str(e.value)
    for part in ("Au", "johnson-christy-1972", "187.9", "1937", "100"):
        assert part in msg
    assert "\n" not in msg


def test_extrapolation_uses_fit_and_is_recorded():
    m = material("Au", extrapolate=True)
    eps = m.permittivity(3000.0)
    assert eps == pytest.approx(m.model.permittivity(3000.0))
    assert eps.real < -100 and eps.imag > 0  # Drude metal far in the infrared (common practice)
    assert "extrapolation" in m.metadata()


def test_unknown_names():
    with pytest.raises(NanoabsError, match="did you mean"):
        material("Aux")
    with pytest.raises(NanoabsError, match="available"):
        material("Au", source="nobody-1900")


def test_user_table_sign_convention(tmp_path):
    p = tmp_path / "film.csv"
    p.write_text("wavelength_nm,n,k\n400,1.5,-2.0\n500,1.0,-2.5\n600,0.3,-3.0\n")
    m = load_table(p, name="myAu")
    assert m.refractive_index(500.0) == pytest.approx(1.0 + 2.5j)
    assert "converted" in m.metadata()["note"]
    p2 = tmp_path / "eps.csv"
    p2.write_text("wavelength_nm,eps_real,eps_imag\n400,-1,5\n600,-9,1.5\n")
    assert load_table(p2).permittivity(600.0) == pytest.approx(-9 + 1.5j)
    bad = tmp_path / "bad.csv"
    bad.write_text("wavelength_nm,n,k\n500,1,1\n400,1,1\n")
    with pytest.raises(NanoabsError, match="increase"):
        load_table(bad)
    with pytest.raises(NanoabsError, match="not found"):
        load_table(tmp_path / "missing.csv")


# -- surface damping (Kreibig & Vollmer 1995, Sec. 2.2.4) ------------------------

def test_surface_damping_vanishes_for_large_L():
    au = material("Au")
    wl = np.linspace(450, 1000, 50)
    big = au.with_surface_damping(1e9)
    np.testing.assert_allclose(big.permittivity(wl), au.permittivity(wl), rtol=1e-7)


def test_surface_damping_increases_eps_imag_as_L_shrinks():
    # dε″/dγ > 0 for ħω > γ(L) (Drude term); holds across 450-1500 nm for L >= 2 nm.
    au = material("Au")
    wl = np.linspace(450, 1500, 60)
    prev = au.permittivity(wl).imag
    for L in (100.0, 30.0, 10.0, 5.0, 2.0):
        cur = au.with_surface_damping(L).permittivity(wl).imag
        assert np.all(cur > prev)
        prev = cur
    # the extra damping is hbar*A*v_F/L: Au, L = 10 nm -> 6.582e-16 eV s * 1.40e6 / 1e-8 = 0.0921 eV
    assert au.with_surface_damping(10.0).extra_damping_eV == pytest.approx(0.09215, rel=1e-3)


def test_free_electron_table():
    # Ashcroft & Mermin (1976) Table 2.1 (from memory): v_F = hbar k_F / m, E_F = m v_F^2 / 2
    from scipy import constants as c

    for metal, row in FREE_ELECTRON.items():
        ef = 0.5 * c.m_e * row.fermi_velocity_m_s ** 2 / c.e
        assert ef == pytest.approx(row.fermi_energy_eV, rel=0.02), metal
        # free-electron gas: n = k_F^3 / (3 pi^2)
        kf = c.m_e * row.fermi_velocity_m_s / c.hbar
        assert kf**3 / (3 * np.pi**2) == pytest.approx(row.electron_density_m3, rel=0.03), metal


@settings(max_examples=40, deadline=None)
@given(L=st.floats(0.3, 1e4), A=st.floats(0.0, 3.0), metal=st.sampled_from(["Au", "Ag", "Cu", "Al"]))
def test_corrected_model_passive(L, A, metal):
    # Property: the surface-damped Drude-Lorentz model is passive over 0.1-10 eV.
    m = material(metal).with_surface_damping(L, A=A)
    E = np.linspace(0.1, 10, 300)
    assert np.all(m.model.permittivity_at_energy(E).imag >= 0)


def _all_datasets():
    return [(n, s) for n, srcs in catalog().items() for s in srcs]


@pytest.mark.parametrize("name,source", _all_datasets())
def test_range_check_and_interpolation_agree_at_both_ends(name, source):
    # Every shipped dataset: a wavelength a rounding error (5e-13 relative) past either end passes
    # the range check and must give the tabulated end value (the first/last row of the CSV),
    # never NaN; 1e-9 past the end is refused. Reference: the table rows themselves (the
    # interpolant reproduces its knots to 1e-14 relative). Constant tables (air) have no range.
    m = material(name, source)
    lo, hi = m.range_nm
    if m._n is None:
        return
    for end, past in ((lo, lo * (1 - 5e-13)), (hi, hi * (1 + 5e-13))):
        n_end = m.refractive_index(end)
        assert np.isfinite(n_end) and m.refractive_index(past) == n_end
        assert n_end == pytest.approx(m._n[0 if end == lo else -1], rel=1e-14)
    for past in (lo * (1 - 1e-9), hi * (1 + 1e-9)):
        with pytest.raises(NanoabsError, match="outside"):
            m.refractive_index(past)


_MARK = "Zq7-private-line"


@settings(max_examples=150, deadline=None)
@given(lines=st.lists(st.sampled_from([
    "wavelength_nm,n,k", "wavelength_nm,eps_real,eps_imag", "400,1.5,0", "500,1.4,0.1", "600,0.2,3",
    "450,1,-0.1", "nan,1,1", "300,1", "# material: x", _MARK, f"{_MARK},1,2", f"500,{_MARK},1", "",
    "\ufeffwavelength_nm,n,k", "1e400,1,1", "-5,1,1"]), max_size=8))
def test_fuzz_user_material_table(lines, tmp_path_factory):
    # A user table either loads (finite constants on its own range) or gives one DataError line
    # that names the file and never quotes its contents.
    p = tmp_path_factory.mktemp("t") / "m.csv"
    p.write_text("\n".join(lines) + "\n", encoding="utf-8")
    try:
        m = load_table(p)
    except NanoabsError as e:
        assert "\n" not in str(e) and _MARK not in str(e) and str(p) in str(e)
        return
    lo, hi = m.range_nm
    assert np.all(np.isfinite(m.permittivity(np.linspace(lo, hi, 7))))


def _pchip_pair(x, y, xq):
    from scipy.interpolate import PchipInterpolator

    from nanoabs.materials import _Pchip

    with np.errstate(all="ignore"):
        return PchipInterpolator(x, y, extrapolate=False)(xq), _Pchip(x, y)(xq)


def test_numpy_pchip_equals_scipy_on_every_shipped_table():
    # reference: scipy.interpolate.PchipInterpolator (Fritsch & Carlson 1980 derivatives, scipy's
    # end conditions), used only in tests; tolerance 1e-12 relative (agrees bit for bit in practice).
    from nanoabs.materials import _load_cached

    rng = np.random.default_rng(3)
    for key, sources in catalog().items():
        for src in sources:
            _, wl, n, _, _ = _load_cached(key, src)
            x = np.log(wl)
            xq = np.concatenate([x, rng.uniform(x[0], x[-1], 500), [x[0] - 1e-9, x[-1] + 1e-9]])
            for y in (n.real, n.imag):
                ref, got = _pchip_pair(x, y, xq)
                assert np.array_equal(np.isnan(ref), np.isnan(got)), (key, src)
                ok = ~np.isnan(ref)
                np.testing.assert_allclose(got[ok], ref[ok], rtol=1e-12, atol=1e-300, err_msg=f"{key} {src}")


@settings(max_examples=60, deadline=None)
@given(st.integers(2, 12), st.integers(0, 2**32 - 1))
def test_numpy_pchip_equals_scipy_on_awkward_data(npts, seed):
    # reference: scipy.interpolate.PchipInterpolator; 1e-12 relative. Flat runs, sign changes,
    # uneven spacing, two and three points.
    rng = np.random.default_rng(seed)
    x = np.cumsum(rng.uniform(0.01, 2.0, npts))
    y = rng.choice([0.0, 1.0, -1.0], npts) * rng.integers(0, 3, npts) + rng.choice([0.0, 1e-3], npts)
    xq = np.concatenate([x, rng.uniform(x[0], x[-1], 200)])
    ref, got = _pchip_pair(x, y, xq)
    np.testing.assert_allclose(got, ref, rtol=1e-12, atol=1e-15)
