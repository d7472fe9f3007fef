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

import contextlib
import threading
from dataclasses import dataclass, field

import numpy as np

from . import _ebcm
from ._errors import NanoabsError, check_choice, check_positive
from .solvers import Response, Solver

__all__ = ["TMatrix", "SHAPES", "N_MAX_LIMIT", "COATED_MAX_ASPECT", "absorption_cells", "cross_sections_nm2", "plane_wave"]

SHAPES = ("spheroid", "cylinder", "capped-rod", "rounded-disc")
#: Largest multipole order tried before a case is declared non-convergent.
N_MAX_LIMIT = 32
#: Largest aspect ratio (long / short extent of the core and of the coating) of a coated body the
#: solver accepts: the layered EBCM series converges for nearly round bodies only (notes/tmatrix.md).
COATED_MAX_ASPECT = 2.0
#: Relative change between successive orders above which the oscillating series of a body
#: with edges is taken to have lost precision (its slow convergence stays below ~6e-2).
_EDGED_BLOWUP = 0.2
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
    #: internal-field data of a homogeneous EBCM particle built with ``internal=True``, else None
    internal: dict | None = None

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
                     tol: float = 1e-4, n_max: int | None = None, n_quad: int | None = None,
                     coating=None, internal: bool = False, extended: bool | None = None):
        """EBCM T matrix of a spheroid, flat-ended cylinder or capped rod (axis z), bare or coated.

        Parameters
        ----------
        shape : {"spheroid", "cylinder", "capped-rod", "rounded-disc"}
        eps : complex array_like, shape (W,)
            Particle (core) permittivity on the grid [1].
        eps_medium : float or array_like (W,)
            Real permittivity of the host [1].
        length_nm, diameter_nm : float
            Extent of the particle (the core, if coated) along the axis (tip to tip) and across it [nm].
        wavelength_nm : array_like (W,)
            Vacuum wavelengths [nm].
        tol : float
            Relative change of the orientation-averaged C_ext, C_sca accepted as
            converged (module docstring).
        n_max, n_quad : int, optional
            Fix the multipole order and the Gauss points on [0, π/2] (no
            convergence loop; ``info["achieved_change"]`` is then None).
        coating : (eps_shell, outer_length_nm, outer_diameter_nm), optional
            A uniform coating of permittivity ``eps_shell`` [1] (scalar or (W,)) whose
            outer surface is the same shape with the outer length and diameter [nm]
            (each larger than the core's).  Layered EBCM (Peterson & Ström 1974):
            :func:`nanoabs._ebcm.coated_systems`.
        internal : bool
            Keep the internal-field coefficients (homogeneous particles only), for
            :meth:`internal_field` and :meth:`absorbed_cross_section`.
        extended : bool or None
            Sum the Q integrals in extended precision (``numpy.longdouble``, about three more
            digits; several times slower).  None (default): double precision, and extended
            precision when the convergence loop fails or the result is not passive in double
            (``info["precision"]`` says which ran).

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
        coat, eps_all = None, [eps]
        if coating is not None:
            if internal:
                raise NanoabsError("internal = True: the internal field is implemented for homogeneous "
                                   "particles only (no coating)")
            coat, eps_shell = _coating(coating, shape, L, D, wl, k)
            eps_all.append(eps_shell)
        if n_max is None:
            n_max, n_quad, info = _converge(shape, dims, k, m_rel, tol, coat, extended)
        else:
            n_quad = int(n_quad or _quad_points(shape, n_max))
            info = {"achieved_change": None, "precision": "extended" if extended else "double"}
        outer = dims if coat is None else coat[0]
        info.update(method="ebcm", shape=shape, n_max=n_max, n_quad=n_quad,
                    x_max=float(np.max(k) * _r_max(shape, outer)))
        if coat is not None:
            info.update(coated=True, outer_length_nm=2 * outer[0], outer_diameter_nm=2 * outer[1])

        def build(ext):
            out = _compute(shape, dims, k, m_rel, n_max, n_quad, m_tol=0.01 * tol, coat=coat,
                           keep_internal=internal, extended=ext)
            blocks, inverse = out if internal else (out, None)
            tm = cls(wl, k, n_max, blocks, dict(info, precision="extended" if ext else "double"))
            if internal:
                tm.internal = {"blocks": inverse, "m_rel": m_rel, "shape": shape, "dims": dims}
            _check_passive(tm, eps_all, shape, L, D)
            return tm

        ext = info["precision"] == "extended"
        if ext or extended is not None:
            return build(ext)
        try:
            return build(False)
        except NanoabsError:  # not passive in double: the same orders summed in extended precision
            return build(True)

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


    # -------------------------------------------------------- internal field
    def internal_coefficients(self, theta_inc: float, psi: float = 0.0):
        """Internal-field coefficients per azimuthal order: {m: (W, 2K)} for a plane wave.

        ``E_int = Σ c_mn RgM_mn(k₁r) + d_mn RgN_mn(k₁r)`` (module docstring VSWFs with j_n of
        k₁ = m_rel k), ``(c, d) = (i/4π) Q⁻¹ a``: the null-field equations a = Q (c, d) up to
        the factor dropped in :mod:`nanoabs._ebcm`, which the sphere fixes (Bohren & Huffman
        1983, eq. 4.52: c_n = i/(x² (ζ_h j₁ − m h ζ₁)) against the code's Q^{11} = x² (ζ_h j₁
        − m h ζ₁)/4π; the tests check the field against Mie to 1e-8).  Negative m by
        the symmetry of T (module docstring).  Needs ``internal=True`` at construction.

        Parameters
        ----------
        theta_inc : float
            Angle between the propagation direction and the symmetry axis [rad].
        psi : float
            Polarisation angle [rad] (as in :meth:`cross_sections`).

        Returns
        -------
        dict
            m -> (W, 2K) complex coefficients in block order (c for p = 1, then d for p = 2).
        """
        if self.internal is None:
            raise NanoabsError("internal field: build the TMatrix with internal=True (homogeneous EBCM particles)")
        a = plane_wave(self.n_max, theta_inc, 0.0, np.cos(psi), np.sin(psi))
        out = {}
        for m in range(-self.n_max, self.n_max + 1):
            Qi = self.internal["blocks"][abs(m)]
            if m < 0:
                K = Qi.shape[-1] // 2
                sgn = np.concatenate([np.ones(K), -np.ones(K)])
                Qi = Qi * sgn[:, None] * sgn[None, :]
            out[m] = (1j / (4 * np.pi)) * np.einsum("wij,j->wi", Qi, a[_block_index(m, self.n_max)])
        return out

    def _field_orders(self, coeffs, r_nm, theta):
        """Spherical components [r̂, θ̂, φ̂] of each order m of the internal field, without e^{imφ}.

        ``coeffs[m]`` of shape (W, 2K) (one field) or (W, 2K, C) (C fields at once); returns
        {m: (W, N, 3) or (W, N, 3, C)}.  RgM = γ j_n(k₁r) (iπ θ̂ − τ φ̂), RgN = γ [n(n+1) j_n/(k₁r)
        d r̂ + ζ_n (τ θ̂ + iπ φ̂)] (module docstring).
        """
        k1 = (self.k_nm * self.internal["m_rel"])[:, None]  # (W, 1)
        z = k1 * np.maximum(np.asarray(r_nm, dtype=float), 1e-9)[None, :]  # (W, N); the centre as r = 1e-9 nm
        j = _ebcm.spherical_jn_all(self.n_max, z)  # (n_max+1, W, N)
        nn = np.arange(1, self.n_max + 1)[:, None, None]
        zeta = j[:-1] - nn * j[1:] / z  # ζ_n = j_(n-1) − n j_n / z (A&S 10.1.22), n = 1..n_max
        j = j[1:]
        out = {}
        for m, c in coeffs.items():
            single = c.ndim == 2
            c = c[..., None] if single else c
            am = abs(m)
            d, pi, tau = _ebcm.wigner_d_all(self.n_max, am, theta)  # (K, N), with γ_n
            if m < 0:  # d^n_{0,-m} = (-1)^m d^n_{0m}
                d, pi, tau = (-1) ** am * d, (-1) ** (am + 1) * pi, (-1) ** am * tau
            n0 = max(am, 1)
            K = self.n_max - n0 + 1
            cm, dm = c[:, :K], c[:, K:]  # (W, K, C)
            jn, zn = j[n0 - 1:], zeta[n0 - 1:]  # (K, W, N)
            n = np.arange(n0, self.n_max + 1)[:, None, None]
            e_r = np.einsum("wkc,kwn->wnc", dm, n * (n + 1) * jn / z * d[:, None, :])
            e_t = (np.einsum("wkc,kwn->wnc", cm, 1j * jn * pi[:, None, :])
                   + np.einsum("wkc,kwn->wnc", dm, zn * tau[:, None, :]))
            e_p = (np.einsum("wkc,kwn->wnc", cm, -jn * tau[:, None, :])
                   + np.einsum("wkc,kwn->wnc", dm, 1j * zn * pi[:, None, :]))
            f = np.stack([e_r, e_t, e_p], axis=2)
            out[m] = f[..., 0] if single else f
        return out

    def internal_field(self, points_nm, theta_inc: float, psi: float = 0.0):
        """Internal field E/E0 (W, N, 3), Cartesian, at points (N, 3) [nm] inside the particle (axis z).

        Incidence as in :meth:`cross_sections` (k̂ in the x–z plane at θ_inc from the axis, E0 =
        cos ψ θ̂ + sin ψ φ̂).  The regular-wave series of the internal field (coefficients from
        :meth:`internal_coefficients`) converges inside the particle for the nearly round and
        moderately elongated bodies of the validated range; the tests hold its volume integral
        to C_abs = C_ext − C_sca.

        Parameters
        ----------
        points_nm : array_like (N, 3)
            Points inside the particle, particle frame (symmetry axis z) [nm].
        theta_inc : float
            Angle between the propagation direction and the symmetry axis [rad].
        psi : float
            Polarisation angle [rad].

        Returns
        -------
        ndarray (W, N, 3) complex
            E/E0 (Cartesian x, y, z) [1].
        """
        pts = np.atleast_2d(np.asarray(points_nm, dtype=float))
        x, y, zc = pts[:, 0], pts[:, 1], pts[:, 2]
        r = np.sqrt(x**2 + y**2 + zc**2)
        th = np.arctan2(np.hypot(x, y), zc)
        ph = np.arctan2(y, x)
        orders = self._field_orders(self.internal_coefficients(theta_inc, psi), r, th)
        sph = sum(v * np.exp(1j * m * ph)[None, :, None] for m, v in orders.items())
        st, ct, sp, cp = np.sin(th), np.cos(th), np.sin(ph), np.cos(ph)
        rh = np.stack([st * cp, st * sp, ct], -1)
        thh = np.stack([ct * cp, ct * sp, -st], -1)
        phh = np.stack([-sp, cp, np.zeros_like(sp)], -1)
        return sph[..., :1] * rh + sph[..., 1:2] * thh + sph[..., 2:3] * phh

    def absorption_density(self, points_nm, theta_inc: float | None = None, psi: float = 0.0):
        """Absorbed power per volume per incident irradiance, ``q = k Im(m²) |E/E0|²`` [1/nm], (W, N).

        The absorbed power density is p = I₀ q (Bohren & Huffman 1983, sec. 2.8, from memory: the power
        absorbed per volume is ``½ ω ε₀ ε″ |E|²``, and ``I₀ = ½ c ε₀ n_host |E0|²``, so
        ``q = k_vac ε″ |E/E0|² / n_host = k Im(m²) |E/E0|²`` with k the host wavenumber).  ``theta_inc``
        None gives the average over orientations and polarisations, ⟨a a†⟩ = 2π·1 for the
        normalised VSWFs (the same average as the trace formula of :meth:`orientation_average`).
        Its volume integral is C_abs (:meth:`absorbed_cross_section`).

        Parameters
        ----------
        points_nm : array_like (N, 3)
            Points inside the particle, particle frame (symmetry axis z) [nm].
        theta_inc : float or None
            Angle between the propagation direction and the symmetry axis [rad]; None:
            orientation average.
        psi : float
            Polarisation angle [rad].

        Returns
        -------
        ndarray (W, N)
            q [1/nm]; multiply by I₀ [W m⁻²] and 1e9 for W m⁻³.
        """
        pts = np.atleast_2d(np.asarray(points_nm, dtype=float))
        if theta_inc is not None:
            e2 = np.sum(np.abs(self.internal_field(pts, theta_inc, psi)) ** 2, axis=-1)
        else:
            r = np.linalg.norm(pts, axis=1)
            th = np.arctan2(np.hypot(pts[:, 0], pts[:, 1]), pts[:, 2])
            e2 = self._average_e2(r, th)
        return (self.k_nm * np.imag(self.internal["m_rel"] ** 2))[:, None] * e2

    def _average_e2(self, r, th):
        """Orientation- and polarisation-averaged Σ_m |E_m|² at points (r, θ), (W, N).

        ⟨a a†⟩ = 2π·1 for the normalised VSWFs (average of the plane-wave coefficients over
        directions and polarisations), so ⟨|E|²⟩ = 2π Σ over the columns of (i/4π) Q⁻¹ of
        the squared field of each column.
        """
        total = 0.0
        for m in range(-self.n_max, self.n_max + 1):
            Qi = self.internal["blocks"][abs(m)]
            if not np.any(Qi):
                continue
            if m < 0:
                K = Qi.shape[-1] // 2
                sgn = np.concatenate([np.ones(K), -np.ones(K)])
                Qi = Qi * sgn[:, None] * sgn[None, :]
            f = self._field_orders({m: (1j / (4 * np.pi)) * Qi}, r, th)[m]
            total = total + np.sum(np.abs(f) ** 2, axis=(2, 3))
        return 2 * np.pi * total

    def absorbed_cross_section(self, theta_inc: float | None = None, psi: float = 0.0, *, n_points: int = 24):
        """C_abs [nm²] (W,) as the volume integral of :meth:`absorption_density` over the particle.

        Gauss–Legendre in θ on [0, π] (split at the corners of the shape), in r on [0, r(θ)]
        with ``n_points`` nodes each; the φ integral is exact, ``∫ |Σ_m E_m e^{imφ}|² dφ = 2π Σ_m
        |E_m|²``.  An independent path to C_ext − C_sca (the tests compare the two).

        Parameters
        ----------
        theta_inc : float or None
            Angle between the propagation direction and the symmetry axis [rad]; None:
            orientation average.
        psi : float
            Polarisation angle [rad].
        n_points : int
            Gauss points in r and (per half) in θ [1].

        Returns
        -------
        ndarray (W,)
            C_abs [nm²].
        """
        shape, dims = self.internal["shape"], self.internal["dims"]
        t, wt = _ebcm.quadrature(shape, dims, 2 * n_points)
        t, wt = np.concatenate([t, np.pi - t[::-1]]), np.concatenate([wt, wt[::-1]])
        rs, _ = _ebcm.surface(shape, dims, np.minimum(t, np.pi - t))
        xg, wg = np.polynomial.legendre.leggauss(n_points)
        r = 0.5 * rs[:, None] * (xg[None, :] + 1)  # (T, R)
        w = (0.5 * rs[:, None] * wg[None, :]) * r**2 * (wt * np.sin(t))[:, None]
        th = np.broadcast_to(t[:, None], r.shape).ravel()
        if theta_inc is None:
            e2 = self._average_e2(r.ravel(), th)
        else:
            orders = self._field_orders(self.internal_coefficients(theta_inc, psi), r.ravel(), th)
            e2 = sum(np.sum(np.abs(v) ** 2, axis=-1) for v in orders.values())
        return 2 * np.pi * (self.k_nm * np.imag(self.internal["m_rel"] ** 2)) * (e2 @ w.ravel())


def absorption_cells(tm, theta_inc: float | None, psi: float = 0.0, n_points: int = 20):
    """Cell averages of :meth:`TMatrix.absorption_density` on a body-fitted grid of the particle.

    Cells are bins of the polar angle θ ∈ [0, π] (edges at the corners of the shape, the
    rest equal in width) times bins of the fraction s = r/r(θ) ∈ [0, 1] (equal width), turned
    about the axis (the azimuth is integrated exactly).  Each cell is integrated with 4 × 4
    Gauss–Legendre points, so Σ q V over the cells is :meth:`TMatrix.absorbed_cross_section`.

    Parameters
    ----------
    tm : TMatrix
        Built with ``internal=True``.
    theta_inc, psi : float or None
        Incidence as in :meth:`TMatrix.cross_sections` [rad]; ``theta_inc=None`` averages over
        orientations.
    n_points : int
        Bins in θ and in s [1].

    Returns
    -------
    dict
        ``z_nm``, ``rho_nm`` (C,) cell centre (z along the symmetry axis, ρ from it) [nm],
        ``cell_volume_nm3`` (C,) [nm³], ``q_per_nm`` (W, C) cell-average absorption density [1/nm].
    """
    shape, dims = tm.internal["shape"], tm.internal["dims"]
    tc = _ebcm._corner(shape, dims)
    cuts = [0.0, np.pi] if tc <= 1e-12 or tc >= np.pi / 2 - 1e-12 else [0.0, tc, np.pi - tc, np.pi]
    widths = np.diff(cuts)
    counts = np.maximum(1, np.round(n_points * widths / np.pi).astype(int))
    t_edges = np.unique(np.concatenate([np.linspace(a, b, c + 1) for a, b, c in zip(cuts[:-1], cuts[1:], counts)]))
    s_edges = np.linspace(0.0, 1.0, n_points + 1)
    g, gw = np.polynomial.legendre.leggauss(4)
    tl, th_ = t_edges[:-1], t_edges[1:]
    t = 0.5 * (tl + th_)[:, None] + 0.5 * (th_ - tl)[:, None] * g  # (T, 4)
    wt = 0.5 * (th_ - tl)[:, None] * gw
    sl, sh = s_edges[:-1], s_edges[1:]
    sq = 0.5 * (sl + sh)[:, None] + 0.5 * (sh - sl)[:, None] * g  # (S, 4)
    ws = 0.5 * (sh - sl)[:, None] * gw
    rs, _ = _ebcm.surface(shape, dims, np.minimum(t, np.pi - t))  # (T, 4)
    # points (T, 4, S, 4): r = s r(θ); weight 2π r² sinθ r(θ) ds dθ
    r = sq[None, None, :, :] * rs[:, :, None, None]
    theta = np.broadcast_to(t[:, :, None, None], r.shape)
    w = 2 * np.pi * r**2 * (np.sin(t) * rs * wt)[:, :, None, None] * ws[None, None, :, :]
    flat_r, flat_t = r.ravel(), theta.ravel()
    W = tm.k_nm.size
    e2 = np.empty((W, flat_r.size))
    step = max(64, 200_000 // max(W, 1))
    coeffs = None if theta_inc is None else tm.internal_coefficients(theta_inc, psi)
    for a in range(0, flat_r.size, step):
        sl_ = slice(a, a + step)
        if coeffs is None:
            e2[:, sl_] = tm._average_e2(flat_r[sl_], flat_t[sl_])
        else:
            e2[:, sl_] = sum(np.sum(np.abs(v) ** 2, axis=-1)
                             for v in tm._field_orders(coeffs, flat_r[sl_], flat_t[sl_]).values())
    q = (tm.k_nm * np.imag(tm.internal["m_rel"] ** 2))[:, None] * e2
    q = q.reshape((W,) + r.shape)
    vol = w.sum(axis=(1, 3))  # (T, S)
    q_cell = np.einsum("wiajb,iajb->wij", q, w) / vol
    tc_, sc_ = 0.5 * (tl + th_), 0.5 * (sl + sh)
    rc = sc_[None, :] * _ebcm.surface(shape, dims, np.minimum(tc_, np.pi - tc_))[0][:, None]
    return {"z_nm": (rc * np.cos(tc_)[:, None]).ravel(), "rho_nm": (rc * np.sin(tc_)[:, None]).ravel(),
            "cell_volume_nm3": vol.ravel(), "q_per_nm": q_cell.reshape(W, -1)}


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


def _compute(shape, dims, k, m_rel, n_max, n_quad, *, m_tol=0.0, coat=None, keep_internal=False,
             extended=False):
    """The blocks m = 0..n_max on the whole grid, in chunks of wavelengths.

    With ``m_tol`` > 0, the loop over m stops once two successive orders each
    add less than ``m_tol`` (relative) to the orientation-averaged C_ext and
    C_sca at every wavelength of the chunk; the higher blocks are set to zero
    (Mishchenko et al. 2002, §5.11 do the same over m, from memory).

    ``coat`` = (outer dims, m_shell (W,)): a coating of relative index m_shell
    whose outer surface is the same shape with the outer dims; ``m_rel`` is then
    the core's index relative to the host, and the core's T matrix is computed
    inside the coating material (complex wavenumber) and combined by
    :func:`nanoabs._ebcm.coated_systems`.  With ``keep_internal`` (homogeneous
    only) the blocks of Q⁻¹ are returned as well (internal field coefficients).  With
    ``extended`` the quadrature, the surface, the Bessel and Wigner functions and the Q sums
    are in ``numpy.longdouble``; Q is rounded to double for the LU solve (the precision of
    the EBCM is lost in the cancelling Q integrals, not in the solve: notes/tmatrix.md).
    """
    theta, w = _ebcm.quadrature(shape, dims, n_quad, extended=extended)
    r, rho = _ebcm.surface(shape, dims, theta)
    if coat is not None:
        theta_o, w_o = _ebcm.quadrature(shape, coat[0], n_quad, extended=extended)
        r_o, rho_o = _ebcm.surface(shape, coat[0], theta_o)
    n_pts = n_quad if coat is None else 2 * n_quad
    step = max(1, _CHUNK_ELEMENTS // ((n_max + 2) * n_pts))
    blocks = [[] for _ in range(n_max + 1)]
    inverse = [[] for _ in range(n_max + 1)]
    for s in range(0, k.size, step):
        sl = slice(s, s + step)
        W = k[sl].size
        if coat is None:
            x = k[sl, None] * r[None, :]
            x1 = m_rel[sl, None] * x
            rad = _ebcm.radial(n_max, x, x1)
        else:
            m_sh = coat[1][sl]
            xc = (m_sh * k[sl])[:, None] * r[None, :]  # core surface, wavenumber of the coating
            m_core = m_rel[sl] / m_sh
            xc1 = m_core[:, None] * xc
            rad_c = _ebcm.radial(n_max, xc, xc1)
            xo = k[sl, None] * r_o[None, :]
            xo1 = m_sh[:, None] * xo
            rad_o = _ebcm.radial(n_max, xo, xo1, inner_outgoing=True)
            rad_oh = _ebcm.outgoing_inside(rad_o)
        total, small = 0.0, 0
        for m in range(n_max + 1):
            K = n_max - max(m, 1) + 1
            if small >= 2:
                blocks[m].append(np.zeros((W, 2 * K, 2 * K), dtype=complex))
                inverse[m].append(np.zeros((W, 2 * K, 2 * K), dtype=complex))
                continue
            if coat is None:
                systems = _ebcm.q_systems(m, n_max, rad, x, x1, m_rel[sl], rho, w, theta)
            else:
                T1 = _ebcm.solve_t(_ebcm.q_systems(m, n_max, rad_c, xc, xc1, m_core, rho, w, theta), K)
                systems = _ebcm.coated_systems(
                    _ebcm.q_systems(m, n_max, rad_o, xo, xo1, m_sh, rho_o, w_o, theta_o),
                    _ebcm.q_systems(m, n_max, rad_oh, xo, xo1, m_sh, rho_o, w_o, theta_o), T1)
            if keep_internal:
                T, Qi = _ebcm.solve_t(systems, K, keep_inverse=True)
                inverse[m].append(Qi)
            else:
                T = _ebcm.solve_t(systems, K)
            blocks[m].append(T)
            part = np.abs(np.trace(T, axis1=1, axis2=2).real) + np.sum(np.abs(T) ** 2, axis=(1, 2))
            total = total + part
            small = small + 1 if m > 0 and np.all(part < m_tol * total) else 0
    out = [np.concatenate(b) for b in blocks]
    return (out, [np.concatenate(b) for b in inverse]) if keep_internal else out


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


def _converge(shape, dims, k, m_rel, tol, coat=None, extended=None):
    """(n_max, n_quad, info) by :func:`_converge_at`, in double precision first; if that fails
    (blow-up, order limit, quadrature check), once more with the Q integrals summed in extended
    precision (``info["precision"]`` says which).  ``extended`` True/False forces one."""
    if extended is not None:
        out = _converge_at(shape, dims, k, m_rel, tol, coat, extended)
        out[2]["precision"] = "extended" if extended else "double"
        return out
    try:
        out = _converge_at(shape, dims, k, m_rel, tol, coat, False)
        out[2]["precision"] = "double"
    except NanoabsError as first:
        try:
            out = _converge_at(shape, dims, k, m_rel, tol, coat, True)
        except NanoabsError as second:
            raise NanoabsError(f"{second} (also in extended precision)") from first
        out[2]["precision"] = "extended"
    return out


def _converge_at(shape, dims, k, m_rel, tol, coat, extended):
    """Find (n_max, n_quad) on a sample of wavelengths (module docstring); raise if none.

    Converged means that the step n -> n + 2 changes the averaged C_ext and
    C_sca by less than ``tol`` (spheroids, whose convergence is fast and
    monotone), or two successive steps do (cylinders and capped rods: one small
    step can be a stationary point of their slow, oscillating convergence);
    the lower order of the last agreeing step is returned.
    """
    s = _sample(k, m_rel)
    ks, ms = k[s], m_rel[s]
    coat_s = None if coat is None else (coat[0], coat[1][s])
    outer = dims if coat is None else coat[0]
    x_max = float(np.max(ks)) * _r_max(shape, outer)
    n = max(3, int(np.ceil(x_max + 4.0 * x_max ** (1 / 3) + 2)))
    label = f"{shape} {2 * dims[0]:g} x {2 * dims[1]:g} nm" + (
        "" if coat is None else f" coated to {2 * outer[0]:g} x {2 * outer[1]:g} nm")
    floor = 1e-12 * _r_max(shape, outer) ** 2
    hint = "allowed: aspect ratio, size and |m| within the validated range (notes/tmatrix.md) or a larger tol"
    if coat is not None:
        hint += ("; a coated body converges only while it is nearly round (aspect ratio up to about 1.5-2, "
                 "notes/tmatrix.md)")

    def average(n_, n_quad_):
        return _average(_compute(shape, dims, ks, ms, n_, n_quad_, m_tol=0.01 * tol, coat=coat_s,
                                 extended=extended), ks)

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
        rising = (len(history) >= 3 and history[-1] > history[-2] > history[-3]
                  and history[-1] > max(tol, 10 * min(history)))
        # edged shapes oscillate: a rise of their changes up to ~6e-2 is the slow series (measured,
        # notes/tmatrix.md); lost precision shows as a jump past 20 % between successive orders
        if rising and (shape == "spheroid" or history[-1] > _EDGED_BLOWUP):  # a blow-up
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


def _check_passive(tm, eps_all, shape, L, D):
    """Raise if a passive particle shows negative absorption beyond rounding (a wrong number)."""
    c_abs, c_sca, c_ext = tm.orientation_average()
    lossy = np.any([e.imag > 0 for e in eps_all], axis=0)
    tol = max(10 * (tm.info.get("achieved_change") or 1e-6), 1e-8)
    bad = (c_sca < 0) | (lossy & (c_abs < -tol * c_ext)) | ~np.isfinite(c_ext)
    if np.any(bad):
        i = int(np.argmax(bad))
        raise NanoabsError(
            f"{shape} {L:g} x {D:g} nm at {tm.wavelength_nm[i]:g} nm: T-matrix result is not passive "
            "(C_abs < 0), the EBCM system is too ill-conditioned here; allowed: aspect ratio and size "
            "within the validated range (notes/tmatrix.md)")


def _coating(coating, shape, L, D, wl, k):
    """(coat = (outer dims, m_shell (W,)), eps_shell (W,)) from a user's ``coating`` triple."""
    if isinstance(coating, (str, bytes, dict)) or not hasattr(coating, "__len__") or len(coating) != 3:
        raise NanoabsError(f"coating = {coating!r}: give (eps_shell, outer_length_nm, outer_diameter_nm)")
    eps_shell, Lo, Do = coating
    Lo = float(check_positive("outer length", Lo, unit="nm"))
    Do = float(check_positive("outer diameter", Do, unit="nm"))
    if Lo <= L or Do <= D:
        raise NanoabsError(f"coating outer size = {Lo:g} x {Do:g} nm: must exceed the core's {L:g} x {D:g} nm "
                           "in both length and diameter")
    _ebcm.check_shape_args(shape, (Lo / 2, Do / 2))
    _, eps_shell, _ = _prepare_optics(eps_shell, (k * wl / (2 * np.pi)) ** 2, wl)
    return ((Lo / 2, Do / 2), np.sqrt(eps_shell) / (k * wl / (2 * np.pi))), eps_shell


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
    info = {k: tm.info.get(k) for k in ("n_max", "n_quad", "achieved_change", "quadrature_change", "x_max",
                                        "precision", "tolerance")}
    info["method"] = "tmatrix"
    return info


def solver_tmatrix(shape, eps, eps_medium, length_nm, diameter_nm, wavelength_nm, *, coating=None,
                   internal=False):
    """The T matrix the ``"tmatrix"`` solver uses: :attr:`TMatrixSolver.fine_tol` in double precision
    for bodies with edges when their series gets there, else :attr:`TMatrixSolver.tol` (spheroids:
    1e-4), with the automatic extended-precision fallback of :meth:`TMatrix.axisymmetric`.
    ``info["tolerance"]`` records the target that was met.

    Parameters
    ----------
    shape : {"spheroid", "cylinder", "capped-rod", "rounded-disc"}
    eps : complex array_like (W,)
        Particle (core) permittivity [1].
    eps_medium : float or array_like (W,)
        Real host permittivity [1].
    length_nm, diameter_nm : float
        Extent along and across the symmetry axis [nm].
    wavelength_nm : array_like (W,)
        Vacuum wavelengths [nm].
    coating : tuple, optional
        As in :meth:`TMatrix.axisymmetric`.
    internal : bool
        Keep the internal-field coefficients (then only :attr:`TMatrixSolver.tol`: the internal
        series of a capped rod loses accuracy at the higher orders of the tighter target).
    """
    args = (shape, eps, eps_medium, length_nm, diameter_nm, wavelength_nm)
    memo = getattr(_ORDERS, "memo", None)
    key = (shape, float(length_nm), float(diameter_nm), None if coating is None else
           (float(coating[1]), float(coating[2])), bool(internal))
    if memo is not None and key in memo:  # the same body again, inside reuse_orders()
        first = memo[key]
        tm = TMatrix.axisymmetric(*args, n_max=first["n_max"], n_quad=first["n_quad"], coating=coating,
                                  internal=internal, extended=first["precision"] == "extended")
        tm.info.update(first)
        return tm
    tm = _solver_tmatrix(args, coating, internal)
    if memo is not None:
        memo[key] = {k: tm.info.get(k) for k in ("n_max", "n_quad", "precision", "tolerance", "achieved_change",
                                                 "quadrature_change")}
    return tm


_ORDERS = threading.local()


@contextlib.contextmanager
def reuse_orders():
    """Within this scope (this thread only), :func:`solver_tmatrix` converges a body the first time it
    meets it and solves the same body (shape, sizes, coating sizes) again with the orders found then
    (n_max, n_quad, precision), without a new convergence loop.  For a caller that completes one
    body's spectrum at more wavelengths in several calls: the values at a wavelength then do not
    depend on which wavelengths each call held (apart from the early stop over m, 1e-2 of the
    tolerance, module docstring of :func:`_compute`).  The recorded orders met the tolerance on the
    first call's wavelengths only."""
    outer = getattr(_ORDERS, "memo", None)
    _ORDERS.memo = {} if outer is None else outer
    try:
        yield
    finally:
        _ORDERS.memo = outer


def _solver_tmatrix(args, coating, internal):
    shape = args[0]
    fine = TMatrixSolver.fine_tol.get(shape)
    if fine is not None and not internal:  # the internal-field series of edged bodies degrades at high orders
        try:
            tm = TMatrix.axisymmetric(*args, tol=fine, coating=coating, internal=internal, extended=False)
            tm.info["tolerance"] = fine
            return tm
        except NanoabsError:
            pass
    tm = TMatrix.axisymmetric(*args, tol=TMatrixSolver.tol[shape], coating=coating, internal=internal)
    tm.info["tolerance"] = TMatrixSolver.tol[shape]
    return tm


class TMatrixSolver(Solver):
    """Solver-table entry ``"tmatrix"`` (see :mod:`nanoabs.solvers`): EBCM T matrix of a body of revolution.

    Accepts spheroids (ellipsoids with two equal semi-axes, bare or with their confocal
    shell), :class:`~nanoabs.particles.Cylinder`, :class:`~nanoabs.particles.CappedRod`
    and :class:`~nanoabs.particles.RoundedDisc` (bare or with a uniform coating) in a
    homogeneous host (a family of sizes is solved one size at a time), and, through
    :meth:`body_tmatrix`, bare bodies in the planar environments (multipole method of
    :mod:`nanoabs.surface_tmatrix`, one size per call).
    """

    name = "tmatrix"
    reference = ("T-matrix, extended boundary condition method: Waterman, Proc. IEEE 53, 805 (1965); "
                 "Barber & Yeh, Appl. Opt. 14, 2864 (1975); coated particles: Peterson & Strom, Phys. Rev. D "
                 "10, 2670 (1974); orientation average: Mishchenko, J. Opt. Soc. Am. A 8, 871 (1991)")
    shapes = frozenset({"ellipsoid", "cylinder", "capped-rod", "rounded-disc"})
    environments = frozenset({"homogeneous", "on_substrate", "buried"})  # planar: nanoabs.surface_tmatrix
    #: Convergence tolerance per shape: the EBCM series of bodies with edges converges
    #: slowly and oscillates (notes/tmatrix.md), so they get a looser one and a caution.
    tol = {"spheroid": 1e-4, "cylinder": 2e-2, "capped-rod": 2e-2, "rounded-disc": 2e-2}
    #: Bodies with edges are first converged to this tighter tolerance in double precision
    #: (reached by e.g. a 100 x 40 nm gold cylinder or 80 x 40 nm capped rod); where their series
    #: does not get there, :attr:`tol` applies (with extended precision if needed).
    fine_tol = {"cylinder": 5e-3, "capped-rod": 5e-3, "rounded-disc": 5e-3}

    def accepts(self, particle) -> str | None:
        reason = super().accepts(particle)
        if reason is not None:
            return reason
        if len(particle.layer_materials()) > 2:
            return "it treats a core with at most one coating"
        if particle.shape == "ellipsoid" and _symmetry_axis(particle.semi_axes_nm) is None:
            return "it treats spheroids (two equal semi-axes) only"
        if len(particle.layer_materials()) == 2:
            core = (particle.semi_axes_nm if particle.shape == "ellipsoid"
                    else (particle.length_nm / 2, particle.diameter_nm / 2))
            ar = 0.0
            for sizes in (particle.outer_semi_axes_nm(), core):
                arr = np.stack(np.broadcast_arrays(*(np.asarray(v, dtype=float) for v in sizes)))
                ar = max(ar, float(np.max(arr.max(axis=0) / arr.min(axis=0))))
            if ar > COATED_MAX_ASPECT:
                return (f"it treats coated bodies up to aspect ratio {COATED_MAX_ASPECT:g} (this one: {ar:.3g}; "
                        "the layered series diverges beyond)")
        return None

    def solve(self, problem) -> Response:
        p = problem.particle
        if p.shape == "ellipsoid":
            axis = _symmetry_axis(p.semi_axes_nm)
            sizes = []
            for axes in (p.semi_axes_nm, p.outer_semi_axes_nm()):
                axes = [np.asarray(a, dtype=float) for a in axes]
                sizes += [2 * axes[axis], 2 * axes[(axis + 1) % 3]]
            shape = "spheroid"
        else:
            axis = 0 if p.kind == "rod" else 2
            sizes = [np.asarray(v, dtype=float) for v in
                     (p.length_nm, p.diameter_nm, p.outer_length_nm, p.outer_diameter_nm)]
            shape = p.shape
        coated = len(problem.eps_layers) > 1
        W = problem.wavelength_nm.size
        grid = np.broadcast_shapes(*(np.shape(v) for v in sizes))
        grid = grid[:-1] if grid and grid[-1] == 1 else grid  # sizes of shape (..., 1) against W
        eps = [np.broadcast_to(e, grid + (W,)) for e in problem.eps_layers]
        out = np.zeros((3,) + grid + (W,))
        reports = []
        for idx in np.ndindex(*grid):
            L, D, Lo, Do = (float(np.broadcast_to(v, grid + (1,) * (len(grid) < np.ndim(v)))[idx].ravel()[0])
                            for v in sizes)
            coating = (eps[1][idx], Lo, Do) if coated else None
            tm = solver_tmatrix(shape, eps[0][idx], problem.eps_medium, L, D, problem.wavelength_nm,
                                coating=coating)
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
        if len(problem.eps_layers) > 1:
            raise NanoabsError(f"particle = coated {problem.particle.shape}: in a substrate or buried environment "
                               "the T-matrix multipole method takes bare bodies only (coated bodies: homogeneous "
                               "host)")
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
        shape = problem.particle.shape
        return [Caution("tmatrix-edges", f"tmatrix: a {shape} has edges or curvature jumps, where the EBCM series "
                        f"converges slowly; cross-sections converged to {self.fine_tol[shape]:g} relative where the "
                        f"series allows, else {self.tol[shape]:g} (spheroids: 1e-4; metadata['tmatrix'] gives the "
                        "achieved change)")]


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
