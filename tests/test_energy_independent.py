"""Energy balance checked with quantities that do not share a formula.

The solver returns Q_ext = Q_sca + Q_abs with Q_abs from the far-field coefficients, so
that identity cannot fail. Here Q_abs is computed a second way, as the volume integral of
the absorbed power density Im(eps) <|E|^2> over the particle, from an internal field built
in this file from scipy's spherical Bessel functions (not from nanoabs.mie):

* in layer l the TE and TM radial functions are S = A psi_n(m_l rho) + B chi_n(m_l rho),
  T = C psi_n(m_l rho) + D chi_n(m_l rho) (psi_n = z j_n, chi_n = z y_n; B = D = 0 in the
  core); outside S = psi_n - b_n xi_n, T = psi_n - a_n xi_n (xi_n = z h_n^(1));
* continuity of tangential E and H at every interface: S/m, S', T, T'/m continuous
  (Bohren & Huffman 1983, sec. 4.4 and sec. 8.1 for the coated sphere; from memory);
  one small linear system per order;
* <|E|^2>/|E0|^2 = sum_n (n + 1/2) [|S|^2 + |T'|^2 + n(n+1)|T|^2/|w|^2] / |w|^2, w = m rho
  (angle integrals of |M_o1n|^2, |N_e1n|^2: B&H eqs. 4.40-4.45 and the orthogonality of
  pi_n, tau_n, sec. 4.1; from memory);
* Q_abs = (1 / (pi x^2)) int Im(m^2) <|E|^2> 4 pi rho^2 d rho (Poynting's theorem; Jackson
  1999 sec. 6.9), by Gauss-Legendre quadrature with N_GAUSS nodes per layer (the
  integrand is analytic inside each layer, so the quadrature converges exponentially).

Tolerances: Q_abs (volume integral) vs the solver's Q_abs, 1e-10 relative (observed: a few 1e-14;
8 nodes per layer already miss by 2e-5, so the check is sharp); the package's
own nanoabs.mie.absorption_profile integrated the same way, 1e-10; the optical theorem
Q_ext = (2/x^2) sum (2n+1) Re(a_n + b_n) vs the solver's Q_sca + Q_abs, 1e-10 relative;
the a_n, b_n solved here vs nanoabs.mie.mie_coefficients_layered, 1e-9 (absolute on
coefficients of size <= 1).
"""

import numpy as np
import pytest
from scipy.special import spherical_jn, spherical_yn

import nanoabs
from nanoabs.mie import absorption_profile, mie_coefficients_layered, mie_layered, n_terms

N_GAUSS = 80
RTOL_VOLUME = 1e-10


def _riccati(n, z):
    """psi_n, psi_n', chi_n, chi_n' at complex z (z j_n(z), z y_n(z) and their derivatives)."""
    j, jd = spherical_jn(n, z), spherical_jn(n, z, derivative=True)
    y, yd = spherical_yn(n, z), spherical_yn(n, z, derivative=True)
    return z * j, j + z * jd, z * y, y + z * yd


def _layer_coefficients(m, x, n):
    """Solve the interface conditions of order n: (TE amplitudes, TM amplitudes, a_n, b_n).

    Unknowns per mode: [A_1, (A_l, B_l) for l >= 2, scattering coefficient]. Each interface
    gives two equations (function/m and derivative for TE; function and derivative/m for TM).
    """
    L = len(m)
    out = {}
    for mode in ("TE", "TM"):
        size = 2 * L
        M = np.zeros((size, size), dtype=complex)
        rhs = np.zeros(size, dtype=complex)

        def cols(l):  # columns of the (psi, chi) amplitudes of layer l (core has no chi)
            return (0, None) if l == 0 else (2 * l - 1, 2 * l)

        for i in range(L):  # interface at x[i] between layer i and layer i+1 (or the host)
            inner = _riccati(n, m[i] * x[i])
            fi = (1 / m[i], 1.0) if mode == "TE" else (1.0, 1 / m[i])  # weights of (f, f')
            ca, cb = cols(i)
            for row, (k_f, w) in enumerate(((0, fi[0]), (1, fi[1]))):
                r = 2 * i + row
                M[r, ca] += w * inner[k_f]
                if cb is not None:
                    M[r, cb] += w * inner[k_f + 2]
                if i + 1 < L:
                    outer = _riccati(n, m[i + 1] * x[i])
                    fo = (1 / m[i + 1], 1.0) if mode == "TE" else (1.0, 1 / m[i + 1])
                    wo = fo[row]
                    oa, ob = cols(i + 1)
                    M[r, oa] -= wo * outer[k_f]
                    M[r, ob] -= wo * outer[k_f + 2]
                else:  # host: psi_n - s xi_n, xi = psi + i chi
                    psi, dpsi, chi, dchi = _riccati(n, complex(x[i]))
                    xi, dxi = (psi + 1j * chi, dpsi + 1j * dchi)
                    M[r, size - 1] += (xi, dxi)[row]
                    rhs[r] = (psi, dpsi)[row]
        out[mode] = np.linalg.solve(M, rhs)
    return out["TE"], out["TM"], out["TM"][-1], out["TE"][-1]


def _independent(m, x):
    """(Q_abs from the volume integral, a_n, b_n) for relative indices m and outer size parameters x."""
    m = np.asarray(m, dtype=complex)
    x = np.asarray(x, dtype=float)
    nmax = int(n_terms(x[-1]))
    coeffs = [_layer_coefficients(m, x, n) for n in range(1, nmax + 1)]
    t, w = np.polynomial.legendre.leggauss(N_GAUSS)
    total = 0.0
    lo = 0.0
    for l in range(len(m)):
        rho = lo + (x[l] - lo) * (t + 1) / 2
        wt = w * (x[l] - lo) / 2
        z = m[l] * rho
        inten = np.zeros(rho.shape)
        for n, (te, tm, _, _) in enumerate(coeffs, start=1):
            psi, dpsi, chi, dchi = _riccati(n, z)
            ia, ib = (0, None) if l == 0 else (2 * l - 1, 2 * l)
            S = te[ia] * psi + (0 if ib is None else te[ib] * chi)
            T = tm[ia] * psi + (0 if ib is None else tm[ib] * chi)
            dT = tm[ia] * dpsi + (0 if ib is None else tm[ib] * dchi)
            inten += (n + 0.5) * (abs(S) ** 2 + abs(dT) ** 2 + n * (n + 1) * abs(T) ** 2 / abs(z) ** 2) / abs(z) ** 2
        total += np.sum(wt * (m[l] ** 2).imag * inten * 4 * np.pi * rho**2)
        lo = x[l]
    a = np.array([c[2] for c in coeffs])
    b = np.array([c[3] for c in coeffs])
    return total / (np.pi * x[-1] ** 2), a, b


def _profile_integral(m, x):
    """Q_abs from nanoabs.mie.absorption_profile (the package's internal field), same quadrature."""
    t, w = np.polynomial.legendre.leggauss(N_GAUSS)
    total, lo = 0.0, 0.0
    for xl in x:
        rho = lo + (xl - lo) * (t + 1) / 2
        q = absorption_profile(np.asarray(m), np.asarray(x, dtype=float), rho)
        total += np.sum(w * (xl - lo) / 2 * q * 4 * np.pi * rho**2)
        lo = xl
    return total / (np.pi * x[-1] ** 2)


# (label, relative indices core first, outer size parameters). Invented but typical: a gold-like
# metal (m ~ 0.3 + 2.3i relative to water), silica-like (1.1), high-index (2.6 + 0.01i), a weak
# absorber, thin metal shells on dielectric cores and dielectric shells on metal cores.
CASES = [
    ("small absorbing sphere", [1.5 + 0.1j], [0.3]),
    ("metal sphere, x=1", [0.3 + 2.3j], [1.0]),
    ("metal sphere, x=3", [0.15 + 3.0j], [3.0]),
    ("weak absorber, x=6", [1.33 + 0.01j], [6.0]),
    ("high index, x=2", [2.6 + 0.01j], [2.0]),
    ("silica core, thin metal shell", [1.1 + 0j, 0.3 + 2.3j], [1.2, 1.35]),
    ("metal core, dielectric shell", [0.2 + 2.5j, 1.2 + 0j], [0.8, 1.1]),
    ("three layers", [1.1 + 0j, 0.3 + 2.3j, 1.5 + 0.05j], [0.5, 0.7, 1.4]),
    ("absorbing core, absorbing shell", [2.0 + 0.5j, 0.5 + 1.5j], [1.5, 2.5]),
]


@pytest.mark.parametrize("label,m,x", CASES, ids=[c[0] for c in CASES])
def test_volume_integral_matches_solver_qabs(label, m, x):
    q_vol, a, b = _independent(m, x)
    r = mie_layered(np.asarray(m), np.asarray(x, dtype=float))
    assert float(r.qabs) == pytest.approx(q_vol, rel=RTOL_VOLUME)
    # the package's own internal-field profile integrates to the same number
    assert _profile_integral(m, x) == pytest.approx(float(r.qabs), rel=RTOL_VOLUME)
    # coefficients from this file's interface solve vs the package's layer recursion
    a_pkg, b_pkg = mie_coefficients_layered(np.asarray(m), np.asarray(x, dtype=float), len(a))
    np.testing.assert_allclose(a_pkg, a, rtol=0, atol=1e-9)
    np.testing.assert_allclose(b_pkg, b, rtol=0, atol=1e-9)


@pytest.mark.parametrize("label,m,x", CASES, ids=[c[0] for c in CASES])
def test_optical_theorem_from_coefficients(label, m, x):
    # Q_ext from the forward amplitude (optical theorem, B&H eq. 4.62 (from memory))
    # vs the solver's Q_sca + Q_abs: they come from different sums and must agree.
    r = mie_layered(np.asarray(m), np.asarray(x, dtype=float))
    n = int(n_terms(x[-1]))
    a, b = mie_coefficients_layered(np.asarray(m), np.asarray(x, dtype=float), n)
    k = np.arange(1, n + 1)
    qext = 2 / x[-1] ** 2 * np.sum((2 * k + 1) * (a.real + b.real))
    qsca = 2 / x[-1] ** 2 * np.sum((2 * k + 1) * (abs(a) ** 2 + abs(b) ** 2))
    assert qext == pytest.approx(float(r.qsca + r.qabs), rel=1e-10)
    assert qsca == pytest.approx(float(r.qsca), rel=1e-10)


def test_energy_through_the_public_spectrum():
    # The same volume integral against nanoabs.spectrum for a 30 nm silica core with a 5 nm gold
    # shell in water (relative indices from the package's own tables and medium), i.e. through
    # surface damping, material interpolation and the solver table. Tolerance 1e-10 relative.
    wl = np.array([550.0, 700.0, 900.0])
    p = nanoabs.LayeredSphere("SiO2", 30.0, [("Au", 5.0)])
    s = nanoabs.spectrum(p, wl, medium="water", method="mie", surface_damping=False)
    n_med = nanoabs.material("water").refractive_index(wl).real
    for i, lam in enumerate(wl):
        m = [nanoabs.material("SiO2").refractive_index(lam) / n_med[i],
             nanoabs.material("Au").refractive_index(lam) / n_med[i]]
        x = [2 * np.pi * n_med[i] * r / lam for r in (30.0, 35.0)]
        q_vol, _, _ = _independent(m, x)
        assert s.q_abs[i] == pytest.approx(q_vol, rel=RTOL_VOLUME)
