"""Numerical core of the extended boundary condition method (EBCM) for axisymmetric particles.

Private module behind :mod:`nanoabs.tmatrix`: surface parametrisations r(θ),
Gauss–Legendre rules split at corners, spherical Bessel and Wigner-d
functions, and the assembly and solution of the Q matrices of one azimuthal
order m, vectorised over wavelengths.

Formulation
-----------
Time dependence exp(-iωt), μ = 1 everywhere.  With the reciprocity bracket
``[E, W] = ∮_S n̂·(E × ∇×W − W × ∇×E) dS`` (Waterman 1965; Mishchenko, Travis &
Lacis 2002, §5.8), the internal field E = Σ c RgM(k_s r) + d RgN(k_s r) and
the surface S of the particle, the null-field equations are

    a_ν = [E, X_{-ν}] / K,     p_ν = -[E, RgX_{-ν}] / K,     K = i(-1)^m / k,

for X = M, N (outgoing) and the normalised VSWFs of the module docstring of
:mod:`nanoabs.tmatrix`, so that ``T = -RgQ Q⁻¹`` (Mishchenko et al. 2002,
eq. 5.193, from memory).  On r = r(θ), n̂ dS = r² sinθ (r̂ − (r'/r) θ̂) dθ dφ;
the φ-integral leaves one m.  Writing the angular factors π = m d/sinθ,
τ = dd/dθ, d = γ_n d^n_{0m}(θ) (γ_n² = (2n+1)/(4π n(n+1))), ζ_n(x) =
(x z_n)'/x, the four blocks (W-type, E-type) of one m are, up to a common
factor that cancels in T, with external order n (function z of x = kr),
internal order n' (j of x₁ = m_r x), ρ = r'/r:

    S_a = Σ_q w [ζ π·j₁π' + ζ τ·j₁τ' + ρ n(n+1) (z/x) d·j₁τ']
    S_b = Σ_q w [z π·ζ₁π' + z τ·ζ₁τ' + ρ z τ·n'(n'+1)(j₁/x₁) d']
    U   = Σ_q w [z τ·j₁π' + z π·j₁τ']
    V   = Σ_q w [ζ τ·ζ₁π' + ζ π·ζ₁τ' + ρ ζ π·n'(n'+1)(j₁/x₁) d' + ρ n(n+1)(z/x) d·ζ₁π']

    (M,M) = S_a − m_r S_b,    (N,N) = m_r S_a − S_b,
    (M,N) = −i(V + m_r U),    (N,M) = −i(U + m_r V)

with w = quadrature weight × x² sinθ.  These come from expanding the cross
products component by component (our derivation; the same structure as
Barber & Yeh 1975, eqs. 13–16, and Mishchenko et al. 2002, eqs. 5.184–5.187,
from memory).  For a sphere (ρ = 0) they give T^{11}_n = −b_n, T^{22}_n = −a_n
(Bohren & Huffman 1983, eq. 4.53), which the tests check to 1e-10.

Mirror symmetry z → −z (all shapes here) makes (M,M), (N,N) vanish for odd
n + n' and (M,N), (N,M) for even n + n' (Mishchenko et al. 2002, §5.8.3):
θ is integrated over [0, π/2] only and each m splits into two independent
half-size systems (smaller LU solves, no entries that should vanish but hold rounding).
"""

from __future__ import annotations

import numpy as np

from ._errors import NanoabsError

# --------------------------------------------------------------------------- #
# surfaces
# --------------------------------------------------------------------------- #


def surface(shape: str, dims, theta):
    """r(θ) and r'(θ)/r on θ ∈ (0, π/2] for a body symmetric about z and about z = 0.

    ``dims`` = (half length along z, radius across) = (c, R) [any length unit]:

    * spheroid: r = (sin²θ/R² + cos²θ/c²)^(-1/2)
    * cylinder (flat ends): r = c/cosθ on the end, R/sinθ on the side
    * capped-rod (hemispherical caps of radius R centred at z = h = c − R):
      r = h cosθ + sqrt(R² − h² sin²θ) on a cap, R/sinθ on the side
    * rounded-disc (flat faces, rim a half-torus of radius c centred at ρ0 = R − c):
      r = c/cosθ on a face, ρ0 sinθ + sqrt(c² − ρ0² cos²θ) on the rim
    """
    c, R = dims
    s, co = np.sin(theta), np.cos(theta)
    if shape == "spheroid":
        r = 1.0 / np.sqrt((s / R) ** 2 + (co / c) ** 2)
        return r, -(r**2) * s * co * (1.0 / R**2 - 1.0 / c**2)
    side = theta >= _corner(shape, dims)
    if shape == "cylinder":
        r = np.where(side, R / s, c / co)
        return r, np.where(side, -co / s, s / co)
    if shape == "rounded-disc":
        p0 = R - c
        root = np.sqrt(np.maximum(c**2 - (p0 * co) ** 2, 0.0))
        r_rim = p0 * s + root
        dr_rim = p0 * co + p0**2 * s * co / np.where(root > 0, root, 1.0)
        return np.where(side, r_rim, c / co), np.where(side, dr_rim / r_rim, s / co)
    h = c - R  # capped rod: centre of the cap
    root = np.sqrt(np.maximum(R**2 - (h * s) ** 2, 0.0))
    r_cap = h * co + root
    dr_cap = -h * s - h**2 * s * co / np.where(root > 0, root, 1.0)
    r = np.where(side, R / s, r_cap)
    return r, np.where(side, -co / s, dr_cap / r_cap)


def _corner(shape: str, dims, *, extended: bool = False):
    """θ of the corner (cylinder) or of the junction of two smooth pieces; π/2 when there is none."""
    c, R = (LD(v) for v in dims) if extended else dims
    cast = (lambda v: v) if extended else float
    half = np.arctan2(LD(1), LD(0)) if extended else np.pi / 2
    if shape == "cylinder":
        return cast(np.arctan2(R, c))
    if shape == "capped-rod":
        return cast(np.arctan2(R, c - R)) if c > R else half
    if shape == "rounded-disc":
        return cast(np.arctan2(R - c, c)) if R > c else 0.0 * half
    return half


def quadrature(shape: str, dims, n_quad: int, *, extended: bool = False):
    """Gauss–Legendre nodes and weights on [0, π/2], split at the corner of the shape.

    Points are shared between the two pieces in proportion to their angular
    width (at least 4 each), so each piece integrates a smooth function.  With
    ``extended`` the nodes, weights and the corner are in ``numpy.longdouble``
    (:func:`leggauss_extended`), so that the Q integrals can be summed in extended
    precision (module docstring of :mod:`nanoabs.tmatrix`).
    """
    tc = _corner(shape, dims, extended=extended)
    half = np.arctan2(LD(1), LD(0)) if extended else np.pi / 2
    if tc >= half - 1e-12 or tc <= 1e-12:
        pieces = [(0.0 * half, half, n_quad)]
    else:
        n1 = int(np.clip(round(n_quad * float(tc) / (np.pi / 2)), 4, n_quad - 4))
        pieces = [(0.0 * half, tc, n1), (tc, half, n_quad - n1)]
    nodes, weights = [], []
    for lo, hi, n in pieces:
        x, w = leggauss_extended(n) if extended else np.polynomial.legendre.leggauss(n)
        nodes.append(0.5 * (hi - lo) * x + 0.5 * (hi + lo))
        weights.append(0.5 * (hi - lo) * w)
    return np.concatenate(nodes), np.concatenate(weights)


#: Extended precision of the Q assembly (80-bit x87 on x86-64: 64-bit mantissa, ~19 digits).
LD = np.longdouble


def leggauss_extended(n: int):
    """Gauss–Legendre nodes and weights in ``numpy.longdouble``.

    numpy's double-precision rule refined by three Newton steps on P_n (three-term
    recurrence, A&S 22.7.10) and the weights 2/((1 − x²) P_n'(x)²) (A&S 25.4.29).
    """
    x = np.polynomial.legendre.leggauss(n)[0].astype(LD)

    def legendre(x):
        p0, p1 = np.ones_like(x), x.copy()
        for k in range(2, n + 1):
            p0, p1 = p1, ((2 * k - 1) * x * p1 - (k - 1) * p0) / k
        return p1, n * (x * p1 - p0) / (x * x - 1)

    for _ in range(3):
        p, dp = legendre(x)
        x = x - p / dp
    _, dp = legendre(x)
    return x, 2 / ((1 - x * x) * dp * dp)


# --------------------------------------------------------------------------- #
# special functions
# --------------------------------------------------------------------------- #


def spherical_jn_all(n_max: int, z):
    """j_n(z), n = 0..n_max, stacked on a leading axis; z complex or real array.

    Real z: scipy.special.spherical_jn.  Complex z: the ratios j_n/j_(n-1) by
    downward recurrence (A&S 10.1.19; started 25 + |z| orders above n_max
    with ratio 0, as in Wiscombe 1980), multiplied up from j_0 = sin z / z
    (A&S 10.1.11).  Off the real axis j_n has no zeros, so no ratio blows up.
    """
    z = np.asarray(z)
    if not np.iscomplexobj(z) or np.all(z.imag == 0):
        if z.real.dtype == LD:
            return _jn_real_extended(n_max, z.real).astype(np.clongdouble)
        from scipy import special

        n = np.arange(n_max + 1).reshape((-1,) + (1,) * z.ndim)
        return special.spherical_jn(n, z.real).astype(complex)
    start = n_max + 25 + int(np.max(np.abs(z)))
    ratio = np.zeros_like(z)
    out = np.empty((n_max + 1,) + z.shape, dtype=np.result_type(z.dtype, complex))
    inv_z = 1.0 / z
    for n in range(start, 0, -1):
        ratio = 1.0 / ((2 * n + 1) * inv_z - ratio)
        if n <= n_max:
            out[n] = ratio
    out[0] = np.sin(z) * inv_z
    for n in range(1, n_max + 1):
        out[n] *= out[n - 1]
    return out


def _jn_real_extended(n_max: int, x):
    """j_n(x), real ``longdouble`` x > 0, by Miller's downward recurrence (A&S 10.1.19, started
    30 + x orders above n_max), normalised to j_0 = sin x/x or j_1 (A&S 10.1.11), whichever
    is larger in size (so a zero of one of them does not spoil the scale)."""
    start = n_max + 30 + int(np.max(x))
    f_next, f = np.zeros_like(x), np.full_like(x, 1e-300)
    out = np.empty((n_max + 1,) + x.shape, dtype=x.dtype)
    for n in range(start, -1, -1):
        if n <= n_max:
            out[n] = f
        f, f_next = (2 * n + 1) / x * f - f_next, f
        big = np.abs(f) > 1e200
        if np.any(big):  # rescale to stay in range; the stored orders rescale with them
            sc = np.where(big, 1e-200, 1.0)
            f, f_next, out[n:] = f * sc, f_next * sc, out[n:] * sc
    j0 = np.sin(x) / x
    j1 = np.sin(x) / x**2 - np.cos(x) / x
    return out * np.where(np.abs(j0) >= np.abs(j1), j0 / out[0], j1 / out[1])


def spherical_hn_all(n_max: int, z):
    """h_n^(1)(z), n = 0..n_max, complex z, by upward recurrence (A&S 10.1.19; h_n grows with n,
    so the recurrence is stable) from h_0 = −i e^{iz}/z and h_1 = −e^{iz}(z + i)/z² (A&S 10.1.11–12)."""
    z = np.asarray(z)
    z = z.astype(np.result_type(z.dtype, complex))
    out = np.empty((n_max + 1,) + z.shape, dtype=z.dtype)
    e = np.exp(1j * z)
    out[0] = -1j * e / z
    if n_max >= 1:
        out[1] = -e * (z + 1j) / z**2
    for n in range(1, n_max):
        out[n + 1] = (2 * n + 1) / z * out[n] - out[n - 1]
    return out


def spherical_yn_all(n_max: int, x):
    """y_n(x), n = 0..n_max, for real x > 0 by upward recurrence (A&S 10.1.19; stable for y_n)."""
    out = np.empty((n_max + 1,) + np.shape(x), dtype=np.result_type(np.asarray(x).dtype, float))
    out[0] = -np.cos(x) / x
    if n_max >= 1:
        out[1] = out[0] / x - np.sin(x) / x
    for n in range(1, n_max):
        out[n + 1] = (2 * n + 1) / x * out[n] - out[n - 1]
    return out


def wigner_d_all(n_max: int, m: int, theta):
    """Normalised angular functions of order m >= 0: γ_n d, γ_n m d/sinθ, γ_n dd/dθ.

    d = d^n_{0m}(θ) (Wigner; Mishchenko et al. 2002, app. B, from memory) by the
    upward recurrence sqrt((n+1)²−m²) d^{n+1} = (2n+1) cosθ d^n − sqrt(n²−m²)
    d^{n−1} from d^m_{0m} = sqrt((2m)!)/(2^m m!) sin^m θ.  The same recurrence
    runs for d/sinθ (from sin^(m−1) θ) and, differentiated, for dd/dθ, so
    nothing is divided by sinθ and the poles θ = 0, π are exact.  Returns
    arrays (K, Q) for n = max(m, 1)..n_max.
    """
    from scipy import special

    theta = np.atleast_1d(np.asarray(theta))
    dt = LD if theta.dtype == LD else float  # extended precision is kept (quadrature(extended=True))
    theta = theta.astype(dt)
    s, c = np.sin(theta), np.cos(theta)
    # the leading factor is common to every entry of one m block: its rounding cancels in T
    lead = np.exp(0.5 * special.gammaln(2 * m + 1) - m * np.log(2.0) - special.gammaln(m + 1))
    e = np.zeros((n_max + 2, theta.size), dtype=dt)  # d / sin(theta) for m >= 1, d itself for m = 0
    dd = np.zeros((n_max + 2, theta.size), dtype=dt)
    e[m] = lead * s ** max(m - 1, 0) if m else 1.0
    dd[m] = lead * m * s ** max(m - 1, 0) * c if m else 0.0
    base = s if m else 1.0
    for n in range(m, n_max + 1):
        a, b = np.sqrt(dt((n + 1) ** 2 - m * m)), np.sqrt(dt(n * n - m * m))
        e_prev = e[n - 1] if n >= 1 else 0.0
        dd_prev = dd[n - 1] if n >= 1 else 0.0
        e[n + 1] = ((2 * n + 1) * c * e[n] - b * e_prev) / a
        dd[n + 1] = ((2 * n + 1) * (c * dd[n] - s * base * e[n]) - b * dd_prev) / a
    n = np.arange(max(m, 1), n_max + 1)
    gamma = np.sqrt((2 * n + 1).astype(dt) / (4 * (np.arctan2(dt(1), dt(0)) * 2) * n * (n + 1)))[:, None]
    return gamma * e[n] * base, gamma * m * e[n], gamma * dd[n]


# --------------------------------------------------------------------------- #
# Q matrices and T
# --------------------------------------------------------------------------- #


def radial(n_max: int, x, x1, *, inner_outgoing: bool = False):
    """Radial factors on the surface, arrays (W, n_max+1, Q): j, h, ζ_j, ζ_h of x and j, ζ of x₁.

    ζ_n(z) = (z z_n(z))'/z = z_(n-1) − n z_n / z (A&S 10.1.22); order 0 rows are padding.
    ``x`` may be complex (a core inside an absorbing coating): h_n then comes from
    :func:`spherical_hn_all`.  With ``inner_outgoing`` the keys ``h1``, ``zh1`` also hold
    h_n(x₁) and its ζ (the outgoing waves of a coated particle's shell, layered EBCM).
    """
    j = spherical_jn_all(n_max, x)
    if np.iscomplexobj(x) and np.any(np.imag(x) != 0):
        h = spherical_hn_all(n_max, x)
    else:
        h = j + 1j * spherical_yn_all(n_max, np.real(x))
    j1 = spherical_jn_all(n_max, x1)
    n = np.arange(1, n_max + 1).reshape((-1,) + (1,) * np.ndim(x))

    def zeta(f, arg):
        out = np.zeros_like(f)
        out[1:] = f[:-1] - n * f[1:] / arg
        return out

    out = {"j": j, "h": h, "zj": zeta(j, x), "zh": zeta(h, x), "j1": j1, "z1": zeta(j1, x1)}
    if inner_outgoing:
        h1 = spherical_hn_all(n_max, x1)
        out.update(h1=h1, zh1=zeta(h1, x1))
    return {key: v.transpose(1, 0, 2) for key, v in out.items()}


def outgoing_inside(rad):
    """``rad`` with the internal regular waves j_n(x₁) replaced by the outgoing h_n(x₁)."""
    return dict(rad, j1=rad["h1"], z1=rad["zh1"])


def coated_systems(outer_j, outer_h, T_core):
    """Q and RgQ of a coated particle, per parity class (layered EBCM).

    In the coating the field is Σ c RgΨ(k₁r) + d Ψ(k₁r) with d = T₁ c, T₁ the T
    matrix of the core embedded in the coating material.  The null-field
    equations on the outer surface then give a = (Q^{hj} + Q^{hh} T₁) c and
    p = −(RgQ^{jj} + RgQ^{jh} T₁) c, so that T = −(RgQ^{jj} + RgQ^{jh} T₁)
    (Q^{hj} + Q^{hh} T₁)⁻¹ (Peterson & Ström, Phys. Rev. D 10, 2670 (1974);
    Mishchenko, Travis & Lacis 2002, §5.8, from memory).  ``outer_j``,
    ``outer_h`` are :func:`q_systems` of the outer surface with regular and
    outgoing internal waves (:func:`outgoing_inside`); ``T_core`` (W, 2K, 2K)
    in block order.  The core and the coating share the mirror symmetry, so
    T₁ keeps each parity class.
    """
    out = []
    for (idx, qj), (_, qh) in zip(outer_j, outer_h):
        t1 = T_core[:, idx[:, None], idx]
        out.append((idx, qj + qh @ t1))
    return out


def q_systems(m: int, n_max: int, rad, x, x1, m_rel, rho, w_theta, theta):
    """Q and RgQ of azimuthal order m, one system per mirror-parity class.

    Returns [(idx, QQ), ...]: ``idx`` the positions in the block order (rows
    (M, N) × n, module docstring of :mod:`nanoabs.tmatrix`) and ``QQ`` of shape
    (2, W, S, S) holding Q (h_n) and RgQ (j_n) of that class; the entries
    between classes vanish by symmetry and are never formed.  Formulas in the
    module docstring; ``rad`` from :func:`radial`, ``x``, ``x1`` of shape (W, Q).
    """
    d, pi, tau = wigner_d_all(n_max, m, theta)
    nn = np.arange(max(m, 1), n_max + 1)
    K = nn.size
    order = np.argsort(nn % 2, kind="stable")  # even n first, then odd n
    ne = int(np.sum(nn % 2 == 0))
    ns = nn[order]
    d, pi, tau = d[order], pi[order], tau[order]
    nn1 = (ns * (ns + 1))[:, None]
    x, x1 = x[:, None, :], x1[:, None, :]
    w = (w_theta * np.sin(theta))[None, None, :] * x**2  # (W, 1, Q)
    j1, z1 = rad["j1"][:, ns], rad["z1"][:, ns]  # internal factors (W, K, Q), index n'
    Q = theta.size
    cat = np.concatenate
    # pairings (module docstring): Sa = [ζτ, ζπ, e_d]·[τj₁, πj₁, τj₁]; Sb = [zπ, zτ, zρτ]·[πζ₁, τζ₁, d j₁];
    # U = [zπ, zτ]·[τj₁, πj₁] and V = [ζτ, ζπ]·[πζ₁, τζ₁] + e_d·πζ₁ + ζρπ·d j₁ reuse their pieces
    B_a = cat([tau * j1, pi * j1, tau * j1], -1).transpose(0, 2, 1)  # (W, 3Q, K)
    B_b = cat([pi * z1, tau * z1, d * nn1 * j1 / x1], -1).transpose(0, 2, 1)
    z = np.stack([rad["h"][:, ns], rad["j"][:, ns]])  # external (2, W, K, Q): [h_n, j_n], index n
    zeta = np.stack([rad["zh"][:, ns], rad["zj"][:, ns]])
    wz, wzeta = w * z, w * zeta
    A_a = cat([wzeta * tau, wzeta * pi, (w * rho / x) * nn1 * z * d], -1)  # (2, W, K, 3Q)
    A_b = cat([wz * pi, wz * tau, wz * (rho * tau)], -1)
    A_rho = wzeta * (rho * pi)
    par = (slice(0, ne), slice(ne, K))
    two, three = slice(0, 2 * Q), slice(2 * Q, 3 * Q)

    def mm(A, B, r, c, s=slice(None), t=None):
        return A[:, :, par[r], s] @ B[:, s if t is None else t, par[c]]

    mr = m_rel[:, None, None]
    diag = {p: (mm(A_a, B_a, p, p), mm(A_b, B_b, p, p)) for p in (0, 1)}
    systems = []
    for a, b in ((0, 1), (1, 0)):  # class: M rows of parity a, N rows of parity b
        (sa_a, sb_a), (sa_b, sb_b) = diag[a], diag[b]
        U_ba, U_ab = mm(A_b, B_a, b, a, two), mm(A_b, B_a, a, b, two)
        V_ba, V_ab = (mm(A_a, B_b, r, c, two) + mm(A_a, B_b, r, c, three, slice(0, Q))
                      + A_rho[:, :, par[r]] @ B_b[:, three, par[c]] for r, c in ((b, a), (a, b)))
        ka = sa_a.shape[-1]
        QQ = np.empty((2, x.shape[0], ka + sa_b.shape[-1], ka + sa_b.shape[-1]), dtype=complex)
        QQ[:, :, :ka, :ka] = sa_a - mr * sb_a
        QQ[:, :, ka:, ka:] = mr * sa_b - sb_b
        QQ[:, :, ka:, :ka] = -1j * (U_ba + mr * V_ba)
        QQ[:, :, :ka, ka:] = -1j * (V_ab + mr * U_ab)
        idx = np.concatenate([order[par[a]], K + order[par[b]]])
        if idx.size:
            systems.append((idx, QQ))
    return systems


def solve_t(systems, K: int, *, keep_inverse: bool = False):
    """T = −RgQ Q⁻¹ per parity class, by LU (LAPACK gesv) on equilibrated matrices.

    ``systems`` from :func:`q_systems`.  Row and column scalings of Q cancel in
    T exactly and keep the pivoting meaningful when h_n spans many decades.
    Returns T (W, 2K, 2K) in block order; with ``keep_inverse`` also Q⁻¹ in
    block order (rows: internal waves, columns: incident waves), from the same
    equilibrated matrix, ``Q⁻¹ = C qs⁻¹ R`` (C, R the column and row scalings).
    """
    T = Qi = None
    for idx, QQ in systems:
        q, rg = QQ[0], QQ[1]
        if T is None:
            T = np.zeros((q.shape[0], 2 * K, 2 * K), dtype=complex)
            Qi = np.zeros_like(T) if keep_inverse else None
        col = 1.0 / np.max(np.abs(q), axis=1, keepdims=True)
        row = 1.0 / np.max(np.abs(q * col), axis=2, keepdims=True)
        qs = q * col * row
        # T = −(rg·col) (row·q·col)⁻¹ row  ->  Tᵀ = −row (qsᵀ)⁻¹ (rg·col)ᵀ
        tt = np.linalg.solve(qs.transpose(0, 2, 1), (rg * col).transpose(0, 2, 1))
        T[:, idx[:, None], idx] = -(tt * row).transpose(0, 2, 1)
        if keep_inverse:
            Qi[:, idx[:, None], idx] = col.transpose(0, 2, 1) * np.linalg.inv(qs) * row.transpose(0, 2, 1)
    return (T, Qi) if keep_inverse else T


def check_shape_args(shape: str, dims) -> None:
    c, R = dims
    if shape == "capped-rod" and c < R:
        raise NanoabsError(f"length = {2 * c:g} nm: a capped rod needs length >= diameter ({2 * R:g} nm)")
    if shape == "rounded-disc" and c > R:
        raise NanoabsError(f"length = {2 * c:g} nm: a rounded disc needs length <= diameter ({2 * R:g} nm)")
