"""T-matrix of axisymmetric particles by the extended boundary condition method (EBCM).

A :class:`TMatrix` holds the T matrix of one particle on a grid of W
wavelengths (vectorised over wavelengths) in a homogeneous, lossless host.
Constructors: :meth:`TMatrix.axisymmetric` (spheroid, cylinder with flat ends,
rod with hemispherical caps; EBCM, Waterman 1965, Barber & Yeh 1975) and
:meth:`TMatrix.sphere` (Mie coefficients).  Cross-sections for a fixed
direction and polarisation, the analytic orientation average and the dense
matrix in any orientation (:meth:`TMatrix.dense`, :meth:`TMatrix.rotated`) are
methods, so an environment (substrate, cluster) can consume the object.

Convention
----------
* Time dependence exp(-iωt); ε = ε' + iε'' with ε'' ≥ 0; the host is real.
* VSWFs normalised as in Mishchenko, Travis & Lacis (2002), eqs. 5.14–5.17
  and C.19–C.20 (from memory): ``M_mn(kr) = γ_n z_n(kr) C_mn(θ) e^{imφ}``,
  ``N_mn = γ_n [n(n+1) z_n/(kr) d r̂ + (kr z_n)'/(kr) B_mn] e^{imφ}`` with
  ``C = iπ θ̂ − τ φ̂``, ``B = τ θ̂ + iπ φ̂``, ``d = d^n_{0m}(θ)`` (Wigner),
  ``π = m d/sinθ``, ``τ = dd/dθ``, ``γ_n² = (2n+1)/(4π n(n+1))``; outgoing
  waves use h_n = h_n^(1).  The tangential harmonics γ C e^{imφ}, γ B e^{imφ}
  are orthonormal on the unit sphere.
* ``p`` = 1 for M ("magnetic", TE), 2 for N ("electric", TM).  For a sphere
  ``T^{11}_n = −b_n`` and ``T^{22}_n = −a_n`` (Bohren & Huffman 1983, eq. 4.53).
* Storage: the particle's symmetry axis is z; T is block diagonal in m and
  ``blocks[m]`` (m = 0..n_max) has shape (W, 2K, 2K), K = n_max − max(m,1) + 1,
  rows/columns ordered (p = 1, n = max(m,1)..n_max) then (p = 2, same n).
  Negative m follow from ``T^{pq}_{-m} = (−1)^{p+q} T^{pq}_m`` (Mishchenko et
  al. 2002, eq. 5.37, from memory; the tests check fixed orientations against
  pytmatrix).
* Dense order (:meth:`dense`, :meth:`rotated`): n = 1..n_max outermost, then
  m = −n..n, then p = 1, 2; index ``2 (n² − 1 + n + m) + p − 1``.
* Plane wave ``E0 e^{ik·r}`` with ``|E0| = 1``: ``a_mn = 4π i^n C*_mn(k̂)·E0 γ_n``,
  ``b_mn = 4π i^(n−1) B*_mn(k̂)·E0 γ_n``; then ``C_ext = −Re(a† T a)/k²`` and
  ``C_sca = |T a|²/k²`` (our derivation from the orthonormality above; the
  average over directions and polarisations gives Mishchenko 1991's
  ``<C_ext> = −(2π/k²) Re tr T``, ``<C_sca> = (2π/k²) Σ|T|²``).

Convergence and validity
------------------------
``n_max`` grows from ``x_max + 4 x_max^{1/3} + 2`` (x_max = k r_max; Wiscombe
1980's rule) in steps of 2, with ``n_quad = 2 n_max + 8`` Gauss points on
[0, π/2] for spheroids and ``4 n_max + 8`` for cylinders and capped rods
(split at the corner / cap junction), until the orientation-averaged C_ext
and C_sca of a sample of wavelengths change by less than ``tol`` (one step
for spheroids, two successive steps for the shapes with edges); then
``n_quad`` is raised by half and must change them by less than ``tol`` too.
The grid is computed once with the result; the loop over m stops when two
successive orders add less than 0.01 ``tol``.  If the changes blow up (the
ill-conditioning of Q for elongated particles), ``n_max`` would pass
:data:`N_MAX_LIMIT`, or the result violates passivity, NanoabsError is
raised.  See notes/tmatrix.md for the validated range.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import _ebcm
from ._errors import NanoabsError, check_choice, check_positive
from .solvers import Response, Solver

__all__ = ["TMatrix", "SHAPES", "N_MAX_LIMIT", "cross_sections_nm2", "plane_wave"]

SHAPES = ("spheroid", "cylinder", "capped-rod", "rounded-disc")
#: Largest multipole order tried before a case is declared non-convergent.
N_MAX_LIMIT = 32
# (N+1) x wavelengths x quadrature points held per chunk of the wavelength grid
_CHUNK_ELEMENTS = 400_000


def _block_index(m: int, n_max: int) -> np.ndarray:
    """Dense indices (module docstring) of the block order of azimuthal order m."""
    n = np.arange(max(abs(m), 1), n_max + 1)
    base = 2 * (n * n - 1 + n + m)
    return np.concatenate([base, base + 1])


def plane_wave(n_max: int, theta_inc: float, phi_inc: float, e_theta: complex, e_phi: complex):
    """Coefficients (a_mn, b_mn) of a plane wave, dense order, length 2 n_max (n_max + 2).

    Parameters
    ----------
    n_max : int
        Highest multipole order.
    theta_inc, phi_inc : float
        Direction of propagation k̂ [rad] in the particle frame (z = symmetry axis).
    e_theta, e_phi : complex
        Components of the unit field E0 along θ̂ and φ̂ at k̂ [1].

    Notes
    -----
    ``a_mn = 4π i^n γ_n C*_mn(k̂)·E0``, ``b_mn = 4π i^(n−1) γ_n B*_mn(k̂)·E0``
    (Mishchenko et al. 2002, eqs. 5.40–5.41 with C*_mn = (−1)^m C_{−mn},
    from memory; checked in the tests by summing the series against e^{ik·r}).
    """
    out = np.zeros(2 * n_max * (n_max + 2), dtype=complex)
    th = np.array([theta_inc])
    for m in range(0, n_max + 1):
        _, pi, tau = _ebcm.wigner_d_all(n_max, m, th)
        n = np.arange(max(m, 1), n_max + 1)
        for sgn in ((1, -1) if m else (1,)):
            # d^n_{0,-m} = (-1)^m d^n_{0m}: π picks up (-1)^(m+1), τ (-1)^m
            p_, t_ = (pi[:, 0], tau[:, 0]) if sgn > 0 else ((-1) ** (m + 1) * pi[:, 0], (-1) ** m * tau[:, 0])
            ph = np.exp(-1j * sgn * m * phi_inc)
            a = 4 * np.pi * 1j**n * ph * (-1j * p_ * e_theta - t_ * e_phi)
            b = 4 * np.pi * 1j ** (n - 1) * ph * (t_ * e_theta - 1j * p_ * e_phi)
            out[_block_index(sgn * m, n_max)] = np.concatenate([a, b])
    return out


@dataclass
class TMatrix:
    """T matrix of one axisymmetric particle (axis z) on a wavelength grid; see module docstring.

    Attributes
    ----------
    wavelength_nm : (W,) vacuum wavelengths [nm]
    k_nm : (W,) wavenumber in the host, 2π n_host/λ [1/nm]
    n_max : highest multipole order
    blocks : list of (W, 2K, 2K) complex arrays, m = 0..n_max
    info : convergence report (n_max, n_quad, achieved relative change, ...)
    """

    wavelength_nm: np.ndarray
    k_nm: np.ndarray
    n_max: int
    blocks: list
    info: dict = field(default_factory=dict)

    # ----------------------------------------------------------- constructors
    @classmethod
    def sphere(cls, eps, eps_medium, radius_nm, wavelength_nm, *, n_max: int | None = None):
        """Diagonal T of a homogeneous sphere from its Mie coefficients.

        ``T^{11}_n = −b_n``, ``T^{22}_n = −a_n`` for every m (Bohren & Huffman
        1983, eq. 4.53; Mishchenko et al. 2002, eq. 5.42, from memory).
        """
        from .mie import mie_coefficients_layered, n_terms

        wl, eps, k = _prepare_optics(eps, eps_medium, wavelength_nm)
        r = float(check_positive("radius", radius_nm, unit="nm"))
        m_rel = np.sqrt(eps / (k * wl / (2 * np.pi)) ** 2)
        n_max = int(n_max or np.max(n_terms(k * r)))
        a, b = mie_coefficients_layered(m_rel[None, :], (k * r)[None, :], n_max)
        blocks = []
        for m in range(n_max + 1):
            n0 = max(m, 1) - 1
            diag = np.concatenate([-b[n0:], -a[n0:]]).T  # (W, 2K)
            blocks.append(diag[:, :, None] * np.eye(diag.shape[1]))
        return cls(wl, k, n_max, blocks, {"method": "mie", "n_max": n_max})

    @classmethod
    def axisymmetric(cls, shape: str, eps, eps_medium, length_nm, diameter_nm, wavelength_nm, *,
                     tol: float = 1e-4, n_max: int | None = None, n_quad: int | None = None):
        """EBCM T matrix of a spheroid, flat-ended cylinder or capped rod (axis z).

        Parameters
        ----------
        shape : {"spheroid", "cylinder", "capped-rod", "rounded-disc"}
        eps : complex array_like, shape (W,)
            Particle permittivity on the grid [1].
        eps_medium : float or array_like (W,)
            Real permittivity of the host [1].
        length_nm, diameter_nm : float
            Extent along the axis (tip to tip) and across it [nm].
        wavelength_nm : array_like (W,)
            Vacuum wavelengths [nm].
        tol : float
            Relative change of the orientation-averaged C_ext, C_sca accepted as
            converged (module docstring).
        n_max, n_quad : int, optional
            Fix the multipole order and the Gauss points on [0, π/2] (no
            convergence loop; ``info["achieved_change"]`` is then None).

        Notes
        -----
        Waterman, Proc. IEEE 53, 805 (1965); Barber & Yeh, Appl. Opt. 14, 2864
        (1975); Mishchenko, Travis & Lacis (2002), §5.8; formulas in
        :mod:`nanoabs._ebcm`.
        """
        shape = check_choice("shape", shape, SHAPES)
        L = float(check_positive("length", length_nm, unit="nm"))
        D = float(check_positive("diameter", diameter_nm, unit="nm"))
        dims = (L / 2, D / 2)
        _ebcm.check_shape_args(shape, dims)
        check_positive("tol", tol)
        wl, eps, k = _prepare_optics(eps, eps_medium, wavelength_nm)
        m_rel = np.sqrt(eps) / (k * wl / (2 * np.pi))
        if n_max is None:
            n_max, n_quad, info = _converge(shape, dims, k, m_rel, tol)
        else:
            n_quad = int(n_quad or _quad_points(shape, n_max))
            info = {"achieved_change": None}
        blocks = _compute(shape, dims, k, m_rel, n_max, n_quad, m_tol=0.01 * tol)
        info.update(method="ebcm", shape=shape, n_max=n_max, n_quad=n_quad,
                    x_max=float(np.max(k) * _r_max(shape, dims)))
        tm = cls(wl, k, n_max, blocks, info)
        _check_passive(tm, eps, shape, L, D)
        return tm

    # ------------------------------------------------------- cross-sections
    def block(self, m: int) -> np.ndarray:
        """T of azimuthal order m (negative m by the symmetry in the module docstring)."""
        T = self.blocks[abs(m)]
        if m >= 0:
            return T
        K = T.shape[-1] // 2
        s = np.concatenate([np.ones(K), -np.ones(K)])
        return T * s[:, None] * s[None, :]

    def cross_sections(self, theta_inc: float, psi: float = 0.0):
        """(C_abs, C_sca, C_ext) [nm²], shape (W,), for one direction and linear polarisation.

        Parameters
        ----------
        theta_inc : float
            Angle between the propagation direction and the symmetry axis [rad].
        psi : float
            Polarisation angle [rad]: E0 = cos ψ θ̂ + sin ψ φ̂ (ψ = 0: field in the
            plane of k̂ and the axis; with θ_inc = π/2 that is along the axis).

        Notes
        -----
        ``C_ext = −Re(a† T a)/k²``, ``C_sca = |T a|²/k²`` (module docstring),
        ``C_abs = C_ext − C_sca``.
        """
        a = plane_wave(self.n_max, theta_inc, 0.0, np.cos(psi), np.sin(psi))
        ext = np.zeros(self.k_nm.shape)
        sca = np.zeros(self.k_nm.shape)
        for m in range(-self.n_max, self.n_max + 1):
            am = a[_block_index(m, self.n_max)]
            if not (np.any(am) and np.any(self.blocks[abs(m)])):  # blocks past the m truncation are 0
                continue
            ta = np.einsum("wij,j->wi", self.block(m), am)
            ext -= np.real(ta @ am.conj())
            sca += np.sum(np.abs(ta) ** 2, axis=-1)
        return _finish(ext, sca, self.k_nm)

    def orientation_average(self):
        """(<C_abs>, <C_sca>, <C_ext>) [nm²] over random orientations, shape (W,).

        ``<C_ext> = −(2π/k²) Re tr T``, ``<C_sca> = (2π/k²) Σ|T_ij|²``
        (Mishchenko, J. Opt. Soc. Am. A 8, 871 (1991), eqs. 31–32, from memory).
        """
        return _average(self.blocks, self.k_nm)

    # ------------------------------------------------------ dense / rotated
    def dense(self, index: int = 0) -> np.ndarray:
        """The full T at wavelength ``index``, shape (2 n_max (n_max+2),)², dense order."""
        size = 2 * self.n_max * (self.n_max + 2)
        out = np.zeros((size, size), dtype=complex)
        for m in range(-self.n_max, self.n_max + 1):
            idx = _block_index(m, self.n_max)
            out[np.ix_(idx, idx)] = self.block(m)[index]
        return out

    def rotated(self, alpha: float, beta: float, gamma: float, index: int = 0) -> np.ndarray:
        """Dense T of the particle turned by Euler angles (α, β, γ) [rad] (z-y-z, active).

        ``T' = 𝔇 T 𝔇†`` with ``𝔇_{m'm} = (−1)^{m+m'} D^n_{m'm}(α, β, γ)`` on each
        (n, p) block, ``D^n_{m'm} = e^{−im'α} d^n_{m'm}(β) e^{−imγ}`` (Mishchenko et
        al. 2002, eqs. 5.29 and B.38, from memory; the (−1)^{m+m'} because our
        angular functions carry d^n_{0m} = (−1)^m d^n_{m0}).  A particle whose
        axis was z then has its axis along (sinβ cosα, sinβ sinα, cosβ); the
        tests check this against :meth:`cross_sections` for the turned wave.
        Use the result with :func:`plane_wave` in any lab direction.
        """
        T = self.dense(index)
        R = _rotation(self.n_max, alpha, beta, gamma)
        return R @ T @ R.conj().T


# --------------------------------------------------------------------------- #
# helpers
# --------------------------------------------------------------------------- #


def _prepare_optics(eps, eps_medium, wavelength_nm):
    wl = np.atleast_1d(check_positive("wavelength", wavelength_nm, unit="nm")).astype(float)
    eps = np.asarray(eps, dtype=complex)
    if eps.ndim > 1 or eps.size not in (1, wl.size):
        raise NanoabsError(f"eps has shape {eps.shape}: give one value or one per wavelength ({wl.size})")
    eps = np.broadcast_to(eps, wl.shape).copy()
    em = np.asarray(eps_medium, dtype=complex)
    if np.any(np.abs(em.imag) > 1e-12 * np.abs(em)) or np.any(em.real <= 0):
        raise NanoabsError(f"eps_medium = {complex(em.ravel()[0]):g}: the host must be real and > 0 "
                           "(a lossless medium)")
    if np.any(eps.imag < 0) or not np.all(np.isfinite(eps)):
        raise NanoabsError("eps: must be finite with Im(eps) >= 0 (passive, exp(-i omega t))")
    k = 2 * np.pi * np.sqrt(np.broadcast_to(em.real, wl.shape)) / wl
    return wl, eps, k


def _r_max(shape, dims):
    c, R = dims
    return float(np.hypot(c, R)) if shape == "cylinder" else max(c, R)


def _compute(shape, dims, k, m_rel, n_max, n_quad, *, m_tol=0.0):
    """The blocks m = 0..n_max on the whole grid, in chunks of wavelengths.

    With ``m_tol`` > 0, the loop over m stops once two successive orders each
    add less than ``m_tol`` (relative) to the orientation-averaged C_ext and
    C_sca at every wavelength of the chunk; the higher blocks are set to zero
    (Mishchenko et al. 2002, §5.11 do the same over m, from memory).
    """
    theta, w = _ebcm.quadrature(shape, dims, n_quad)
    r, rho = _ebcm.surface(shape, dims, theta)
    step = max(1, _CHUNK_ELEMENTS // ((n_max + 2) * n_quad))
    blocks = [[] for _ in range(n_max + 1)]
    for s in range(0, k.size, step):
        sl = slice(s, s + step)
        x = k[sl, None] * r[None, :]
        x1 = m_rel[sl, None] * x
        rad = _ebcm.radial(n_max, x, x1)
        total, small = 0.0, 0
        for m in range(n_max + 1):
            K = n_max - max(m, 1) + 1
            if small >= 2:
                blocks[m].append(np.zeros((x.shape[0], 2 * K, 2 * K), dtype=complex))
                continue
            systems = _ebcm.q_systems(m, n_max, rad, x, x1, m_rel[sl], rho, w, theta)
            T = _ebcm.solve_t(systems, K)
            blocks[m].append(T)
            part = np.abs(np.trace(T, axis1=1, axis2=2).real) + np.sum(np.abs(T) ** 2, axis=(1, 2))
            total = total + part
            small = small + 1 if m > 0 and np.all(part < m_tol * total) else 0
    return [np.concatenate(b) for b in blocks]


def _average(blocks, k):
    tr = sum((1 if m == 0 else 2) * np.trace(T, axis1=1, axis2=2) for m, T in enumerate(blocks))
    s2 = sum((1 if m == 0 else 2) * np.sum(np.abs(T) ** 2, axis=(1, 2)) for m, T in enumerate(blocks))
    return _finish(-2 * np.pi * tr.real, 2 * np.pi * s2, k)


def _finish(ext_k2, sca_k2, k):
    ext, sca = ext_k2 / k**2, sca_k2 / k**2
    return ext - sca, sca, ext


def _sample(k, m_rel):
    """Wavelength indices used in the convergence loop: extremes of k, |m| k and an even spread."""
    W = k.size
    idx = {int(np.argmax(k)), int(np.argmax(np.abs(m_rel) * k)), int(np.argmax(np.abs(m_rel)))}
    idx.update(np.linspace(0, W - 1, min(W, 6)).round().astype(int).tolist())
    return np.array(sorted(idx))


def _quad_points(shape, n):
    """Gauss points on [0, π/2] for multipole order n: more where a corner breaks smoothness."""
    return (2 if shape == "spheroid" else 4) * n + 8


def _converge(shape, dims, k, m_rel, tol):
    """Find (n_max, n_quad) on a sample of wavelengths (module docstring); raise if none.

    Converged means that the step n -> n + 2 changes the averaged C_ext and
    C_sca by less than ``tol`` (spheroids, whose convergence is fast and
    monotone), or two successive steps do (cylinders and capped rods: one small
    step can be a stationary point of their slow, oscillating convergence);
    the lower order of the last agreeing step is returned.
    """
    s = _sample(k, m_rel)
    ks, ms = k[s], m_rel[s]
    x_max = float(np.max(ks)) * _r_max(shape, dims)
    n = max(3, int(np.ceil(x_max + 4.0 * x_max ** (1 / 3) + 2)))
    label = f"{shape} {2 * dims[0]:g} x {2 * dims[1]:g} nm"
    floor = 1e-12 * _r_max(shape, dims) ** 2
    hint = "allowed: aspect ratio, size and |m| within the validated range (notes/tmatrix.md) or a larger tol"

    def average(n_, n_quad_):
        return _average(_compute(shape, dims, ks, ms, n_, n_quad_, m_tol=0.01 * tol), ks)

    cur = average(n, _quad_points(shape, n))
    history = []
    steps = 1 if shape == "spheroid" else 2
    while len(history) < steps or max(history[-steps:]) >= tol:
        if n + 2 > N_MAX_LIMIT:
            raise NanoabsError(f"{label}: T-matrix not converged to tol = {tol:g} by n_max = {N_MAX_LIMIT} "
                               f"(last relative changes {history[-2]:.1e}, {history[-1]:.1e}); {hint}")
        n += 2
        prev, cur = cur, average(n, _quad_points(shape, n))
        history.append(_change(prev, cur, floor))
        if (len(history) >= 3 and history[-1] > history[-2] > history[-3]
                and history[-1] > max(tol, 10 * min(history))):  # not an oscillation: a blow-up
            raise NanoabsError(f"{label}: T-matrix diverges from n_max = {n - 4} (relative change "
                               f"{history[-3]:.1e} -> {history[-1]:.1e}, ill-conditioned Q) before "
                               f"reaching tol = {tol:g}; {hint}")
    n -= 2  # the last step n -> n + 2 bounds the change of the lower order
    n_quad = _quad_points(shape, n)
    q_change = _change(prev, average(n, n_quad + n_quad // 2), floor)
    if q_change >= tol:
        raise NanoabsError(f"{label}: T-matrix changes by {q_change:.1e} > tol = {tol:g} when the "
                           f"quadrature grows from {n_quad} to {n_quad + n_quad // 2} points; {hint}")
    return n, n_quad, {"achieved_change": history[-1], "quadrature_change": q_change,
                       "sample_wavelength_index": s.tolist()}


def _change(a, b, floor):
    """Largest relative change of C_ext and C_sca between two (abs, sca, ext) results.

    Cross-sections below ``floor`` [nm²] (1e-12 of the particle's size squared: an
    index-matched particle, T = 0 up to rounding) count as ``floor``.
    """
    def rel(u, v):
        return np.max(np.abs(v - u) / np.maximum(np.abs(v), floor))

    return float(max(rel(a[2], b[2]), rel(a[1], b[1])))


def _check_passive(tm, eps, shape, L, D):
    """Raise if a passive particle shows negative absorption beyond rounding (a wrong number)."""
    c_abs, c_sca, c_ext = tm.orientation_average()
    lossy = eps.imag > 0
    tol = max(10 * (tm.info.get("achieved_change") or 1e-6), 1e-8)
    bad = (c_sca < 0) | (lossy & (c_abs < -tol * c_ext)) | ~np.isfinite(c_ext)
    if np.any(bad):
        i = int(np.argmax(bad))
        raise NanoabsError(
            f"{shape} {L:g} x {D:g} nm at {tm.wavelength_nm[i]:g} nm: T-matrix result is not passive "
            "(C_abs < 0), the EBCM system is too ill-conditioned here; allowed: aspect ratio and size "
            "within the validated range (notes/tmatrix.md)")


def _rotation(n_max, alpha, beta, gamma):
    """Block-diagonal rotation of dense coefficients (see :meth:`TMatrix.rotated`)."""
    from scipy.linalg import expm

    size = 2 * n_max * (n_max + 2)
    R = np.zeros((size, size), dtype=complex)
    for n in range(1, n_max + 1):
        m = np.arange(-n, n + 1)
        # J_y in the |n m> basis; d^n(β) = exp(−iβ J_y) (Edmonds 1957, eq. 4.1.12, from memory)
        jp = np.sqrt(n * (n + 1) - m[:-1] * (m[:-1] + 1))  # <m+1|J+|m>
        Jy = (np.diag(jp, -1) - np.diag(jp, 1)) / 2j
        d = expm(-1j * beta * Jy).real
        D = np.exp(-1j * m[:, None] * alpha) * d * np.exp(-1j * m[None, :] * gamma)
        D *= (-1.0) ** (m[:, None] + m[None, :])
        base = 2 * (n * n - 1)
        for p in (0, 1):
            idx = base + 2 * np.arange(2 * n + 1) + p
            R[np.ix_(idx, idx)] = D
    return R


# --------------------------------------------------------------------------- #
# adaptor for the solver table
# --------------------------------------------------------------------------- #


def _incidence(axis: int, field_axis: str):
    """(θ_inc, ψ) of the project's illumination for a symmetry axis along x/y/z (0/1/2).

    Convention of :mod:`nanoabs.particles`: light along z for a field along x or
    y, along x for a field along z.  Field on the axis: θ = π/2, ψ = 0; light on
    the axis: θ = 0; otherwise both perpendicular to the axis: θ = ψ = π/2.
    """
    f = "xyz".index(field_axis)
    light = 2 if f < 2 else 0
    if f == axis:
        return np.pi / 2, 0.0
    return (0.0, 0.0) if light == axis else (np.pi / 2, np.pi / 2)


def _sections(tm, axis, polarization):
    return tm.orientation_average() if polarization == "random" else tm.cross_sections(
        *_incidence(axis, polarization))


def cross_sections_nm2(shape, eps_particle, eps_medium, dims_nm, wavelength_nm, polarization="random",
                       tol: float = 1e-4):
    """(σ_abs, σ_sca, σ_ext) [nm²] on the grid and a convergence/validity dict.

    Parameters
    ----------
    shape : {"spheroid", "cylinder", "capped-rod", "rounded-disc"}
    eps_particle : complex array_like (W,)
        Particle permittivity [1] (surface damping, if any, already applied).
    eps_medium : float or array_like (W,)
        Real host permittivity [1].
    dims_nm : (length_nm, diameter_nm)
        Extent along the symmetry axis (tip to tip) and across it [nm].
    wavelength_nm : array_like (W,)
        Vacuum wavelengths [nm].
    polarization : {"long", "short", "random"}
        The project's convention (nanoabs.particles): for a rod (length ≥
        diameter) "long" is the field along the axis with light perpendicular
        to it, "short" a field and light both perpendicular to the axis; for a
        disc (length < diameter) "long" is a field in the plane of the disc
        with light along its axis, "short" the field along the axis.
        "random" is the analytic orientation average.
    tol : float
        Convergence tolerance (see :meth:`TMatrix.axisymmetric`).

    Returns
    -------
    sigma_abs, sigma_sca, sigma_ext : (W,) ndarray [nm²]
    info : dict
        ``n_max``, ``n_quad``, ``achieved_change``, ``quadrature_change``, ``x_max``, ``method``.
    """
    pol = check_choice("polarization", polarization, ["long", "short", "random"])
    L, D = (float(v) for v in dims_nm)
    tm = TMatrix.axisymmetric(shape, eps_particle, eps_medium, L, D, wavelength_nm, tol=tol)
    rod = L >= D
    field = {"long": "x", "short": "y" if rod else "z", "random": "random"}[pol]
    out = _sections(tm, 0 if rod else 2, field)
    return out[0], out[1], out[2], _report(tm)


def _report(tm):
    info = {k: tm.info[k] for k in ("n_max", "n_quad", "achieved_change", "quadrature_change", "x_max")}
    info["method"] = "tmatrix"
    return info


class TMatrixSolver(Solver):
    """Solver-table entry ``"tmatrix"`` (see :mod:`nanoabs.solvers`): EBCM T matrix of a body of revolution.

    Accepts homogeneous spheroids (ellipsoids with two equal semi-axes),
    :class:`~nanoabs.particles.Cylinder` and :class:`~nanoabs.particles.CappedRod`
    in a homogeneous host (a family of sizes is solved one size at a time), and, through
    :meth:`body_tmatrix`, in the planar environments (multipole method of
    :mod:`nanoabs.surface_tmatrix`, one size per call).
    """

    name = "tmatrix"
    reference = ("T-matrix, extended boundary condition method: Waterman, Proc. IEEE 53, 805 (1965); "
                 "Barber & Yeh, Appl. Opt. 14, 2864 (1975); orientation average: Mishchenko, "
                 "J. Opt. Soc. Am. A 8, 871 (1991)")
    shapes = frozenset({"ellipsoid", "cylinder", "capped-rod", "rounded-disc"})
    environments = frozenset({"homogeneous", "on_substrate", "buried"})  # planar: nanoabs.surface_tmatrix
    #: Convergence tolerance per shape: the EBCM series of bodies with edges converges
    #: slowly and oscillates (notes/tmatrix.md), so they get a looser one and a caution.
    tol = {"spheroid": 1e-4, "cylinder": 2e-2, "capped-rod": 2e-2, "rounded-disc": 2e-2}

    def accepts(self, particle) -> str | None:
        reason = super().accepts(particle)
        if reason is not None:
            return reason
        if len(particle.layer_materials()) > 1:
            return "it treats homogeneous particles only (no shell)"
        if particle.shape == "ellipsoid" and _symmetry_axis(particle.semi_axes_nm) is None:
            return "it treats spheroids (two equal semi-axes) only"
        return None

    def solve(self, problem) -> Response:
        shape, axis, L, D = _body(problem.particle)
        W = problem.wavelength_nm.size
        grid = np.broadcast_shapes(np.shape(L), np.shape(D))
        grid = grid[:-1] if grid and grid[-1] == 1 else grid  # sizes of shape (..., 1) against W
        eps = np.broadcast_to(problem.eps_layers[0], grid + (W,))
        out = np.zeros((3,) + grid + (W,))
        reports = []
        for idx in np.ndindex(*grid):
            Li, Di = (float(np.broadcast_to(v, grid + (1,) * (len(grid) < np.ndim(v)))[idx].ravel()[0])
                      for v in (L, D))
            tm = TMatrix.axisymmetric(shape, eps[idx], problem.eps_medium, Li, Di, problem.wavelength_nm,
                                      tol=self.tol[shape])
            out[(slice(None),) + idx] = _sections(tm, axis, problem.polarization)
            reports.append(_report(tm))
        meta = {"tmatrix": reports[0] if len(reports) == 1 else {
            "n_max": max(r["n_max"] for r in reports),
            "achieved_change": max(r["achieved_change"] for r in reports)}}
        return Response(out[0], out[1], out[2], backend="numpy (EBCM)", metadata=meta)


    def body_tmatrix(self, problem):
        """What a planar environment needs: the T-matrix of the particle at any degree (one size).

        Parameters
        ----------
        problem : Problem
            One particle (scalar sizes), its damped permittivity and host on the grid.

        Returns
        -------
        tmatrix_at : callable
            ``tmatrix_at(n_max, wavelength_nm)`` -> :class:`TMatrix` (axis z) at that fixed
            degree on a subset of the problem's grid (EBCM, quadrature of :func:`_quad_points`).
        axis : (3,) ndarray
            Lab direction of the symmetry axis (the particle's own frame: x for a rod, z for a disc).
        n_start : int
            Degree at which the free particle's T converges to this solver's tolerance.
        r_max_nm : float
            Radius of the circumscribing sphere [nm].
        tol : float
            This solver's convergence tolerance for the shape (:attr:`tol`).
        """
        shape, axis, L, D = _body(problem.particle)
        L, D = float(np.ravel(L)[0]), float(np.ravel(D)[0])
        wl_all = problem.wavelength_nm
        eps = np.broadcast_to(problem.eps_layers[0], wl_all.shape)
        em = np.broadcast_to(problem.eps_medium, wl_all.shape)
        free = TMatrix.axisymmetric(shape, eps, em, L, D, wl_all, tol=self.tol[shape])

        def tmatrix_at(n_max, wavelength_nm):
            i = np.searchsorted(wl_all, wavelength_nm)
            return TMatrix.axisymmetric(shape, eps[i], em[i], L, D, wl_all[i], n_max=int(n_max))
        return tmatrix_at, np.eye(3)[axis], int(free.n_max), _r_max(shape, (L / 2, D / 2)), self.tol[shape]

    def validity(self, problem) -> list:
        """A caution for cylinders and capped rods: their series is converged to 2e-2 only."""
        from .validity import Caution

        if problem.particle.shape == "ellipsoid":
            return []
        return [Caution("tmatrix-edges", f"tmatrix: a {problem.particle.shape} has edges or curvature jumps, where the EBCM series "
                        f"converges slowly; cross-sections converged to {self.tol[problem.particle.shape]:g} "
                        "relative (spheroids: 1e-4)")]


def _body(p):
    """(EBCM shape name, symmetry-axis index 0/1/2, length, diameter [nm]) of a particle the solver accepts."""
    if p.shape == "ellipsoid":
        axes = [np.asarray(a, dtype=float) for a in p.semi_axes_nm]
        axis = _symmetry_axis(p.semi_axes_nm)
        return "spheroid", axis, 2 * axes[axis], 2 * axes[(axis + 1) % 3]
    return p.shape, (0 if p.kind == "rod" else 2), np.asarray(p.length_nm, dtype=float), np.asarray(
        p.diameter_nm, dtype=float)


def _symmetry_axis(semi_axes):
    """Index of the symmetry axis of a spheroid (z for a sphere), or None if all three differ."""
    a, b, c = (np.asarray(v, dtype=float) for v in semi_axes)
    if np.array_equal(*np.broadcast_arrays(a, b)):
        return 2
    if np.array_equal(*np.broadcast_arrays(b, c)):
        return 0
    if np.array_equal(*np.broadcast_arrays(a, c)):
        return 1
    return None
