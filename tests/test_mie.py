"""Checks of nanoabs.mie against published values, closed forms and miepython.

Every physics check names its reference and tolerance.  miepython (3.3) is used
as an independent general-purpose Mie code for the homogeneous sphere; its
refractive-index convention is m = n - ik (see ``miepython.efficiencies_mx``
docstring), ours is m = n + ik, so indices are conjugated before calling it.
"""

import warnings

import miepython
import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from nanoabs._errors import NanoabsError
from nanoabs.mie import (
    MieEfficiencies,
    absorption_profile,
    fraction_within_depth,
    internal_intensity_profile,
    mie_coefficients_layered,
    mie_layered,
    mie_sphere,
    n_terms,
)

N_WATER = 1.33  # refractive index of water (common practice)


def _mp_nterms(x):
    """miepython's own truncation int(x + 4.05 x^(1/3) + 2) (read from its source)."""
    return int(x + 4.05 * x**0.33333 + 2.0)


def _gl_volume_qabs(m, x, n_nodes=200):
    """(1/(pi x^2)) int q 4 pi rho^2 d rho by Gauss-Legendre per layer (numpy only)."""
    m = np.atleast_1d(np.asarray(m, complex))
    x = np.atleast_1d(np.asarray(x, float))
    t, w = np.polynomial.legendre.leggauss(n_nodes)
    edges = np.concatenate([[0.0], x])
    total = 0.0
    for a, b in zip(edges[:-1], edges[1:]):
        if b <= a:
            continue
        r = 0.5 * (a + b) + 0.5 * (b - a) * t
        q = absorption_profile(m, x, r)
        total += np.sum(0.5 * (b - a) * w * q * 4 * np.pi * r**2)
    return total / (np.pi * x[-1] ** 2)


def _qabs_coated_quasistatic(m1, m2, x1, x2):
    """Quasi-static coated sphere: Bohren & Huffman (1983), eq. 5.36 (from memory).

    alpha = 4 pi b^3 [(e2 - em)(e1 + 2 e2) + f (e1 - e2)(em + 2 e2)] /
                     [(e2 + 2 em)(e1 + 2 e2) + f (2 e2 - 2 em)(e1 - e2)],  f = (a/b)^3,
    and Q_abs = k Im(alpha) / (pi b^2) = 4 x Im[...] with em = 1 (relative indices).
    """
    e1, e2 = m1**2, m2**2
    f = (x1 / x2) ** 3
    br = ((e2 - 1) * (e1 + 2 * e2) + f * (e1 - e2) * (1 + 2 * e2)) / (
        (e2 + 2) * (e1 + 2 * e2) + f * (2 * e2 - 2) * (e1 - e2)
    )
    return 4 * x2 * br.imag


# ---------------------------------------------------------------------------
# published worked example
# ---------------------------------------------------------------------------


def test_bohren_huffman_bhmie_example():
    # Bohren & Huffman (1983), Appendix A, BHMIE sample output (from memory):
    # radius 0.525 um, wavelength 0.6328 um, refractive index 1.55 in vacuum,
    # x = 5.213, QSCA = 3.1054, QBACK = 2.9253; printed to 4 decimals -> tol 5e-5.
    x = 2 * np.pi * 0.525 / 0.6328
    r = mie_sphere(1.55, x)
    assert abs(r.qsca - 3.1054) < 5e-5
    assert abs(r.qback - 2.9253) < 5e-5
    assert abs(r.qext - r.qsca) < 1e-12  # no absorption for a real index
    # the same case against miepython, relative 1e-8
    qext, qsca, qback, g = miepython.efficiencies_mx(1.55, x)
    r = mie_sphere(1.55, x, n_max=_mp_nterms(x))
    np.testing.assert_allclose([r.qext, r.qsca, r.qback, r.g], [qext, qsca, qback, g], rtol=1e-8)


# ---------------------------------------------------------------------------
# homogeneous sphere vs miepython
# ---------------------------------------------------------------------------

M_LIST = [1.5 + 0j, 1.33 + 0.01j, 0.2 + 3j, 0.5 + 10j, 2 + 1j]


@pytest.mark.parametrize("m", M_LIST)
def test_homogeneous_vs_miepython(m):
    # miepython 3.3 efficiencies_mx (conjugated index); same truncation order as
    # miepython so that the comparison tests the coefficients, not the cut-off.
    # Tolerance: relative 1e-8 (qback, g: 1e-8 relative + 1e-12 absolute, since
    # both can pass through ~0).  For |m| x < 0.1 miepython switches to a
    # small-particle expansion, so there qext, qsca are compared with the sum of
    # its per-multipole results (n_pole=k), which use the full coefficients.
    for x in np.geomspace(0.01, 100, 41):
        n = _mp_nterms(x)
        r = mie_sphere(m, x, n_max=n)
        if abs(m) * x >= 0.1:
            qext, qsca, qback, g = miepython.efficiencies_mx(np.conj(m), x)
            assert abs(r.qback - qback) <= 1e-8 * abs(qback) + 1e-12, x
            assert abs(r.g - g) <= 1e-8 * abs(g) + 1e-12, x
        else:
            qext = qsca = 0.0
            for k in range(1, n + 1):
                for e_field in (True, False):
                    qe, qs, _, _ = miepython.efficiencies_mx(np.conj(m), x, n_pole=k, e_field=e_field)
                    qext += qe
                    qsca += qs
        assert r.qext == pytest.approx(qext, rel=1e-8), x
        assert r.qsca == pytest.approx(qsca, rel=1e-8), x


def test_vectorised_grid_matches_pointwise():
    # consistency of the broadcast implementation (no physics): a 2-D grid equals
    # point-by-point calls to 1e-13 relative
    lam = np.linspace(400.0, 900.0, 7)[:, None]
    r = np.array([10.0, 40.0, 120.0])[None, :]
    x = 2 * np.pi * N_WATER * r / lam
    m = ((0.3 + 3.0j) + 0.001j * lam) / N_WATER * np.ones_like(x)
    grid = mie_sphere(m, x)
    assert isinstance(grid, MieEfficiencies) and grid.qext.shape == (7, 3)
    for i in range(7):
        for j in range(3):
            p = mie_sphere(m[i, j], x[i, j])
            for a, b in zip(grid, p):
                assert a[i, j] == pytest.approx(float(b), rel=1e-13, abs=1e-300)


# ---------------------------------------------------------------------------
# layered sphere
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "m, xs",
    [
        (1.5 + 0j, [1.0, 2.0, 3.5]),
        (0.2 + 3j, [0.3, 0.31, 2.0, 2.5]),
        (0.5 + 10j, [4.0, 9.0]),
        (2 + 1j, [0.005, 0.01]),
        (1.33 + 0.01j, [10.0, 20.0, 29.0]),
    ],
)
def test_layers_of_one_material_equal_homogeneous(m, xs):
    # exact identity: identical layers are one sphere; relative 1e-10
    # (asymmetry and backscatter compared with an extra 1e-13 absolute floor)
    lay = mie_layered(np.full(len(xs), m), xs)
    hom = mie_sphere(m, xs[-1])
    for name in ("qext", "qsca", "qabs"):
        assert getattr(lay, name) == pytest.approx(float(getattr(hom, name)), rel=1e-10, abs=1e-300)
    assert abs(lay.qback - hom.qback) <= 1e-10 * hom.qback + 1e-13
    assert abs(lay.g - hom.g) <= 1e-10 * abs(hom.g) + 1e-13


def test_matching_layer_and_zero_thickness_layer():
    # exact identities: (i) a shell with m = 1 is invisible, so C = Q x^2 equals
    # that of the bare core; (ii) a zero-thickness layer changes nothing.  1e-10.
    core = mie_sphere(0.2 + 3j, 1.0)
    coated = mie_layered([0.2 + 3j, 1.0], [1.0, 2.0])
    for name in ("qext", "qsca", "qabs"):
        assert 4 * getattr(coated, name) == pytest.approx(float(getattr(core, name)), rel=1e-10)
    zero = mie_layered([0.2 + 3j, 1.5, 0.2 + 3j], [1.0, 1.0, 2.0])
    hom = mie_sphere(0.2 + 3j, 2.0)
    for a, b in zip(zero, hom):
        assert float(a) == pytest.approx(float(b), rel=1e-10)


@pytest.mark.parametrize("k", [1, 2, 3])
def test_lossless_shell_with_sin_of_inner_argument_near_zero(k):
    # Absorbing core (2 + 1i) in a lossless shell (1.5) with m_shell x_core within
    # d of k pi, where psi_0 = sin of the shell's inner argument nearly vanishes
    # and terms of size 1/sin must not be subtracted from each other.  The
    # efficiencies are smooth in x_core, so the value at d equals the mean of the
    # values at d -+ h up to O(h^2) (observed <= 6e-6 relative for h = 1e-4 and
    # d >= 1e-10, dominated by the conditioning ~1e-16/d; a cancellation there
    # gives 1e-3 .. 1e7).  Tolerance 1e-4.
    m_shell, h = 1.5, 1e-4

    def q(d):
        x1 = (k * np.pi + d) / m_shell
        r = mie_layered([2 + 1j, m_shell], [x1, x1 + 1.0])
        return np.array([r.qext, r.qsca, r.qabs, r.qback])

    for d in (1e-10, 1e-9, 1e-7):
        np.testing.assert_allclose(q(d), 0.5 * (q(d - h) + q(d + h)), rtol=1e-4, err_msg=f"d = {d}")


@pytest.mark.parametrize(
    "m1, m2, frac",
    [
        (1.5, 0.2 + 3j, 0.8),  # dielectric core, metal-like shell
        (0.2 + 3j, 1.5, 0.7),  # metal core, dielectric shell
        (1.45 / N_WATER, (0.2 + 5j) / N_WATER, 0.99),  # thin absorbing shell
        (2 + 1j, 1.0, 0.5),  # absorbing core, shell matching the medium
    ],
)
def test_small_coated_sphere_vs_quasistatic(m1, m2, frac):
    # Bohren & Huffman (1983) eq. 5.36 (from memory), quasi-static coated sphere.
    # x_outer = 0.01: relative 1e-3 (the dynamic correction is O(x^2 |m|^2)).
    x2 = 0.01
    r = mie_layered([m1, m2], [frac * x2, x2])
    ref = _qabs_coated_quasistatic(m1, m2, frac * x2, x2)
    assert r.qabs == pytest.approx(ref, rel=1e-3)
    # and the difference shrinks like x^2: at x = 0.001 it is below 1e-5
    x2 = 0.001
    r = mie_layered([m1, m2], [frac * x2, x2])
    assert r.qabs == pytest.approx(_qabs_coated_quasistatic(m1, m2, frac * x2, x2), rel=1e-5)


@settings(max_examples=120, deadline=None)
@given(
    layers=st.lists(
        st.tuples(
            st.floats(0.05, 5.0),  # Re m
            st.floats(0.0, 10.0),  # Im m
            st.floats(1e-3, 1.0),  # radius fraction of the outer radius
        ),
        min_size=1,
        max_size=4,
    ),
    x_outer=st.floats(0.05, 30.0),
)
def test_energy_conservation_property(layers, x_outer):
    # Optical theorem (Bohren & Huffman 1983, eq. 4.62 (from memory)):
    # Q_ext = (2/x^2) sum (2n+1) Re(a_n + b_n), computed here from the
    # coefficients, must equal Q_sca + Q_abs where mie_layered gets Q_abs from an
    # independent Wronskian expression; and Q_ext - Q_sca >= 0 for passive
    # layers.  Tolerance 1e-9 relative to Q_ext (observed ~1e-11).
    fr = np.sort([f for _, _, f in layers])
    fr[-1] = 1.0
    m = np.array([complex(a, b) for a, b, _ in layers])
    x = x_outer * fr
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        r = mie_layered(m, x)
        n = int(n_terms(x_outer))
        a, b = mie_coefficients_layered(m, x, n)
    k = np.arange(1, n + 1)
    qext_ot = 2 / x_outer**2 * np.sum((2 * k + 1) * (a + b).real)
    qsca_c = 2 / x_outer**2 * np.sum((2 * k + 1) * (abs(a) ** 2 + abs(b) ** 2))
    assert all(np.isfinite(v) for v in r)
    # Re(a_n) of the reference sum is rounded at ~eps |a_n|, which dominates when |a_n| << 1
    # (nearly index-matched or tiny lossless spheres, where Re a_n = |a_n|^2): allow that floor.
    floor = 1e-15 * 2 / x_outer**2 * np.sum((2 * k + 1) * (abs(a) + abs(b)))
    assert abs(qext_ot - (r.qsca + r.qabs)) <= 1e-9 * qext_ot + floor
    assert abs(qsca_c - r.qsca) <= 1e-12 * qext_ot
    assert qext_ot - qsca_c >= -1e-9 * qext_ot - floor
    assert r.qabs >= 0


# ---------------------------------------------------------------------------
# extremes
# ---------------------------------------------------------------------------


@pytest.mark.parametrize("m", [1.5 + 0j, 0.2 + 3j, 0.5 + 10j, 3 + 20j, 20 + 0j, 0.05 + 20j, 1.0 + 0j])
@pytest.mark.parametrize("x", [1e-4, 200.0])
def test_extreme_sizes_finite_and_warning_free(m, x):
    # robustness: finite, no numpy warning escapes, qext >= qsca >= 0; at x = 200
    # the extinction paradox Q_ext -> 2 (van de Hulst 1957, Sec. 8.22 (from
    # memory)) holds to within 5 %
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        r = mie_sphere(m, x)
    assert all(np.isfinite(v) for v in r)
    assert r.qext >= r.qsca >= 0 and r.qabs >= 0
    if x == 200.0 and m != 1:
        assert abs(r.qext - 2) < 0.1


def test_extreme_sizes_against_miepython():
    # miepython 3.3 at x = 200 for |m| = 20, relative 1e-8
    for m in (20 + 0j, 3 + 20j, 0.5 + 10j):
        x = 200.0
        r = mie_sphere(m, x, n_max=_mp_nterms(x))
        ref = miepython.efficiencies_mx(np.conj(m), x)
        np.testing.assert_allclose([r.qext, r.qsca, r.qback, r.g], ref, rtol=1e-8)


# ---------------------------------------------------------------------------
# logarithmic derivative D1 (complex and real-arithmetic downward recurrence)
# and single coefficients against independent references, small to large |m x|
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "z, tol",
    [
        (0.01 + 0j, 1e-12),
        (0.01 + 0.02j, 1e-12),
        (0.3 + 0.1j, 1e-12),
        (1.5 + 0j, 1e-12),
        (2 + 3j, 1e-12),
        (0.2 + 4j, 1e-12),
        (5.5 + 0.01j, 1e-12),
        (10 + 10j, 1e-12),
        (30 + 0j, 1e-12),
        (50 + 0.5j, 1e-12),
        (100 + 300j, 1e-11),
        (400 + 1j, 1e-11),
        (1000 + 0j, 1e-9),
    ],
)
def test_log_derivative_vs_scipy(z, tol):
    # Independent reference: scipy.special.spherical_jn (complex argument, with
    # derivative), D1_n = psi_n'/psi_n = 1/z + j_n'(z)/j_n(z), for n = 0..n_store
    # with n_store below, near and above |z|; a real z is also run through the
    # real-arithmetic path used for lossless layers.  Relative tolerance 1e-12 up
    # to |z| = 50 (observed <= 4e-14); for large nearly real z D1_n is
    # ill-conditioned near its poles and float64 recurrences agree with an
    # extended-precision one only to ~1e-12 (|z| = 400) and ~1e-11 (|z| = 1000),
    # hence the looser values (observed 6e-13 and 7e-11 against scipy).
    from scipy.special import spherical_jn

    from nanoabs.mie import _d1_down

    a = abs(z)
    for n_store in sorted({3, int(a) + 10, int(1.3 * a) + 5}):
        n = np.arange(n_store + 1)
        ref = 1 / z + spherical_jn(n, z, derivative=True) / spherical_jn(n, z)
        for arg in (np.array([z]), np.array([z.real]) if z.imag == 0 else None):
            if arg is None:
                continue
            d = _d1_down(arg, n_store)[:, 0]
            np.testing.assert_allclose(d, ref, rtol=tol, atol=0, err_msg=f"z = {arg[0]}, n_store = {n_store}")


@pytest.mark.parametrize(
    "m, x, tol",
    [
        (1.5 + 0j, 0.05, 1e-10),
        (0.2 + 3j, 0.05, 1e-10),
        (2 + 1j, 0.3, 1e-10),
        (1.33 + 0.01j, 2.0, 1e-10),
        (0.5 + 10j, 1.0, 1e-10),
        (0.3 + 2j, 5.0, 1e-10),
        (3 + 20j, 30.0, 1e-10),
        (1.5 + 0.001j, 300.0, 1e-9),
        (20 + 0j, 50.0, 1e-8),
    ],
)
def test_coefficients_vs_miepython(m, x, tol):
    # Every coefficient a_n, b_n (n = 1..miepython's own truncation) against
    # miepython 3.3 coefficients (conjugated index; it starts its downward D
    # recurrence from a continued-fraction value, not from 0), from |m x| = 0.075
    # (where the highest orders, ~1e-13, are the most sensitive to the D1 start)
    # to |m x| = 1000.  Relative per coefficient; observed <= 2e-12 up to |m x| = 10,
    # 7e-14 at |m x| = 607 (absorbing), 7e-12 at 450 and 1e-10 at 1000 (nearly
    # real, ill-conditioned).
    a_ref, b_ref = miepython.coefficients(np.conj(m), x)
    a, b = mie_coefficients_layered([m], [x], len(a_ref))
    np.testing.assert_allclose(a, a_ref, rtol=tol, atol=0)
    np.testing.assert_allclose(b, b_ref, rtol=tol, atol=0)


@pytest.mark.parametrize("m", [0.2 + 3j, 1.33 + 0.01j, 2 + 1j, 0.05 + 2j])
def test_tiny_sphere_absorption_vs_dipole(m):
    # Rayleigh limit: Q_abs = 4 x Im[(m^2 - 1)/(m^2 + 2)] (Bohren & Huffman 1983,
    # eq. 5.11 (from memory)); at x = 1e-4 the next term is O(x^2 |m|^2) ~ 1e-7,
    # tolerance 1e-6 relative.  Q_sca = (8/3) x^4 |...|^2, same tolerance.
    x = 1e-4
    alpha = (m * m - 1) / (m * m + 2)
    r = mie_sphere(m, x)
    assert r.qabs == pytest.approx(4 * x * alpha.imag, rel=1e-6)
    assert r.qsca == pytest.approx(8 / 3 * x**4 * abs(alpha) ** 2, rel=1e-6)


def test_thin_gold_like_shell():
    # SiO2 core (n = 1.45) of radius 50 nm with a gold-like shell n = 0.2 + 5i of
    # t = 0.125 .. 2 nm, in water at 600 nm.  Checks: finite and warning free,
    # Q_abs > 0 and increasing with t, and the thin-film limit Q_abs ~ t
    # (first-order perturbation in t, common practice): Q_abs(0.125)/Q_abs(0.25)
    # within 0.5 +- 0.05.  The 0.5 nm case is also checked against the volume
    # integral of the internal field (1e-6).
    k = 2 * np.pi * N_WATER / 600.0
    m = [1.45 / N_WATER, (0.2 + 5j) / N_WATER]
    qabs = []
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for t in (0.125, 0.25, 0.5, 1.0, 2.0):
            r = mie_layered(m, [k * 50.0, k * (50.0 + t)])
            assert all(np.isfinite(v) for v in r)
            qabs.append(r.qabs)
    assert qabs[0] > 0
    assert np.all(np.diff(qabs) > 0)
    assert 0.45 < qabs[0] / qabs[1] < 0.55
    x = [k * 50.0, k * 50.5]
    assert _gl_volume_qabs(m, x, 64) == pytest.approx(qabs[2], rel=1e-6)


# ---------------------------------------------------------------------------
# absorption profile
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "m, x",
    [
        ([0.2 + 3j], [1.0]),
        ([1.5 + 0.1j], [2.0]),
        ([0.5 + 10j], [5.0]),
        ([1.33 + 0.01j], [20.0]),
        ([1.45 / N_WATER, (0.2 + 3j) / N_WATER], [2 * np.pi * N_WATER * 50 / 600, 2 * np.pi * N_WATER * 60 / 600]),
        ([0.2 + 3j, 1.5, 1.2 + 0.5j], [1.0, 2.0, 3.5]),
    ],
)
def test_profile_volume_integral_equals_far_field(m, x):
    # Poynting theorem: the volume integral of the absorbed power equals the
    # far-field Q_abs (Bohren & Huffman 1983, Sec. 3.4 (from memory)).
    # Gauss-Legendre (200 nodes per layer); relative 1e-6.
    assert _gl_volume_qabs(m, x) == pytest.approx(float(mie_layered(m, x).qabs), rel=1e-6)


def test_profile_small_sphere_uniform():
    # Quasi-static internal field of a small sphere, E_in = 3/(m^2 + 2) E0
    # (Bohren & Huffman 1983, Sec. 5.2 (from memory)): q = Im(m^2) |3/(m^2+2)|^2,
    # uniform.  x = 0.01: relative variation < 1e-3 and value within 1e-3.
    m = 2 + 1j
    rho = np.linspace(1e-4, 0.01, 25)
    q = absorption_profile([m], [0.01], rho)
    assert q.shape == (25,)
    assert (q.max() - q.min()) / q.mean() < 1e-3
    np.testing.assert_allclose(q, (m * m).imag * abs(3 / (m * m + 2)) ** 2, rtol=1e-3)
    # fraction within depth d of a uniform sphere: 1 - (1 - d/x)^3, 1e-3
    for d in (0.001, 0.005):
        assert fraction_within_depth([m], [0.01], d) == pytest.approx(1 - (1 - d / 0.01) ** 3, rel=1e-3)


def test_profile_zero_in_transparent_layers_and_outside():
    # Im(m^2) = 0 in a loss-free layer -> q = 0 exactly; > 0 in absorbing layers
    m = [1.45, 0.2 + 3j, 1.5]
    x = [1.0, 1.5, 2.0]
    rho = np.array([0.2, 0.9, 1.2, 1.4, 1.7, 1.99, 2.5])
    q = absorption_profile(m, x, rho)
    assert np.all(q[[0, 1, 4, 5, 6]] == 0.0)
    assert np.all(q[[2, 3]] > 0)


def test_internal_intensity_of_plane_wave():
    # with every layer equal to the medium (m = 1) the "internal" field is the
    # incident plane wave, whose angle-averaged |E|^2 is exactly |E0|^2
    # (addition theorem sum (2n+1) j_n^2 = 1, Abramowitz & Stegun 1964,
    # eq. 10.1.50 (from memory)); 1e-10 absolute
    rho = np.linspace(0.05, 5.0, 12)
    inten = internal_intensity_profile([1.0, 1.0], [2.0, 5.0], rho)
    np.testing.assert_allclose(inten, 1.0, atol=1e-10)


def test_profile_grid_layout():
    # layout (*grid, R) and broadcasting of a 1-D per-layer m over a size grid;
    # each grid point equals its own single-point call (1e-12, consistency)
    x = np.array([[0.5, 1.0], [1.5, 3.0]]) * np.array([0.6, 1.0])[:, None, None]  # (L=2, 2, 2)
    m = np.array([1.5, 0.3 + 2j])
    rho = np.array([0.2, 0.4])
    q = absorption_profile(m, x, rho)
    assert q.shape == (2, 2, 2)
    for i in range(2):
        for j in range(2):
            np.testing.assert_allclose(q[i, j], absorption_profile(m, x[:, i, j], rho), rtol=1e-12)


# ---------------------------------------------------------------------------
# input errors
# ---------------------------------------------------------------------------


@pytest.mark.parametrize(
    "call, word",
    [
        (lambda: mie_layered([1.5, 2.0], [2.0, 1.0]), "non-decreasing"),
        (lambda: mie_layered([1.5, 2.0, 1.1], np.ones((2, 3))), "shape"),
        (lambda: mie_sphere(1.5 - 0.1j, 1.0), "k >= 0"),
        (lambda: mie_sphere(1.5, -1.0), "x ="),
        (lambda: mie_sphere(1.5, 1.0, n_max=0), "n_max"),
        (lambda: absorption_profile([1.5], [1.0], [0.0, 0.5]), "rho"),
        (lambda: fraction_within_depth([1.5 + 1j], [1.0], -0.1), "depth"),
    ],
)
def test_errors_are_one_line(call, word):
    with pytest.raises(NanoabsError) as e:
        call()
    assert word in str(e.value) and "\n" not in str(e.value)
