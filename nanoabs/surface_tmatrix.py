"""A particle with a full T-matrix (rods, discs lying flat) near a planar stack: the multipole method.

`nanoabs.surface.multipole_response` couples a T-matrix that is block-diagonal in
the azimuthal order m (a sphere, a body of revolution standing upright) to the
stack. A rod lying flat has its symmetry axis in the plane of the surface: its
T-matrix in the lab frame couples every m to every m', while the stack's
reflection matrix R stays diagonal in m (the stack is invariant under rotations
about z). This module

* converts the T-matrix of `nanoabs.tmatrix` (Mishchenko et al. 2002
  normalisation, dense order n, m, p) to the convention and order of
  `nanoabs.vswf` / `nanoabs.surface` (Jackson normalisation, blocks of m,
  [M_n..., N_n...] inside each block) -- the only place where the two meet
  (`to_surface_convention`);
* solves (1 - T R) b = T a on the full matrix, factorised once per wavelength,
  for many right-hand sides: turning the particle by phi about z is the same as
  multiplying the incident coefficients a_m by exp(i m phi) (R commutes with the
  rotation), so an in-plane orientation average is a quadrature over phi with
  one factorisation (`full_multipole_response`);
* chooses the multipole order by convergence, or reports that it does not
  converge (`flat_on_stack`), with the full or the cut reflection integral.

Convergence near a surface (Egel, Theobald, Donie & Lemmer, Opt. Express 24, 25154
(2016), from memory): the expansion of the reflected field in regular waves about
the particle centre converges inside the sphere through the particle's mirror
image; the particle's outgoing-wave expansion is valid outside its circumscribing
sphere. When the circumscribing sphere of a flat particle reaches below the
interface (a 100 nm rod 17 nm above the surface), the two regions do not overlap
and the plain method with a Sommerfeld integral taken to infinity is not
guaranteed to converge in the multipole order (for a 100 x 30 nm gold rod 2 nm
above SiO2 it diverges). The order study is therefore reported; where it fails,
the reflection integral is cut at `CONTOUR_CUT` k_host, where the series
converges and, for that rod, matches a full-wave finite-element solution within
0.6 % (notes/flatrods.md); failing that, no number is returned from this module.
"""

from __future__ import annotations

import numpy as np

from ._errors import NanoabsError

__all__ = ["surface_order", "to_surface_convention", "lab_tmatrix", "stack_reflection", "full_multipole_response",
           "orientation", "orientation_nodes", "flat_on_stack", "uniform_absorbed_power_density", "CONTOUR_CUT"]


def surface_order(n_max):
    """Index map from the dense order of `nanoabs.tmatrix` to the m-block order of `nanoabs.surface`.

    Parameters
    ----------
    n_max : int
        Largest degree.

    Returns
    -------
    perm : (N,) int
        ``T_surface = T_dense[perm][:, perm]`` (before the phase of `to_surface_convention`),
        N = 2 n_max (n_max + 2). The surface order runs over m = -n_max..n_max; inside a
        block, [M_n..., N_n...] for n = max(1, |m|)..n_max.
    m : (N,) int
        Azimuthal order of each surface-order index.
    blocks : list of (m, slice)
        The slice of each m block in the surface order.
    """
    perm, ms, blocks, start = [], [], [], 0
    for m in range(-n_max, n_max + 1):
        n = np.arange(max(1, abs(m)), n_max + 1)
        base = 2 * (n * n - 1 + n + m)           # dense index of (n, m, p = 1); p = 2 is base + 1
        idx = np.concatenate([base, base + 1])
        perm.append(idx)
        ms.append(np.full(idx.size, m))
        blocks.append((m, slice(start, start + idx.size)))
        start += idx.size
    return np.concatenate(perm), np.concatenate(ms), blocks


def to_surface_convention(T_dense, n_max):
    """T-matrix of `nanoabs.tmatrix` (dense order) in the `nanoabs.vswf` convention and m-block order.

    Parameters
    ----------
    T_dense : (..., N, N) complex
        Dense T (`nanoabs.tmatrix.TMatrix.dense` / ``rotated``), N = 2 n_max (n_max + 2).
    n_max : int

    Returns
    -------
    (..., N, N) complex

    Notes
    -----
    The two normalisations differ by a phase per azimuthal order only: the regular and
    outgoing waves of `nanoabs.tmatrix` (Mishchenko, Travis & Lacis 2002, eqs. C.19-C.20,
    gamma_n C_mn and gamma_n B_mn with Wigner d^n_{0m}) equal those of `nanoabs.vswf`
    (Jackson 1999, X_nm with the Condon-Shortley phase) divided by kappa_m = -i (-1)^m,
    for M and N and every n alike, because gamma_n d^n_{0m} sqrt(n(n+1)) and the
    normalised P_n^m differ by (-1)^m sqrt(4 pi / (2n+1)) sqrt((2n+1)/4pi). Coefficients
    then scale as a_surface = kappa_m a_dense, so T_surface[m, m'] = kappa_m T[m, m'] /
    kappa_m' = (-1)^(m+m') T[m, m']. Checked in tests/test_surface_tmatrix.py by comparing
    the plane-wave coefficients of the two modules for random directions and fields.
    """
    perm, m, _ = surface_order(n_max)
    sign = (-1.0) ** np.abs(m)
    return np.asarray(T_dense)[..., perm[:, None], perm[None, :]] * sign[:, None] * sign[None, :]


def lab_tmatrix(tm, axis, n_max=None):
    """T of a body of revolution with its symmetry axis along a lab direction, surface convention.

    Parameters
    ----------
    tm : nanoabs.tmatrix.TMatrix
        T-matrix with the symmetry axis along z (on W wavelengths).
    axis : (3,) float
        Unit vector of the symmetry axis in the lab frame (x, y in the surface plane).
    n_max : int, optional
        Truncation (default the T-matrix's own; larger values pad with zeros).

    Returns
    -------
    (W, N, N) complex
        Rotated T (Mishchenko et al. 2002, eq. 5.29: T' = D T D^+, via
        `nanoabs.tmatrix.TMatrix.rotated`'s rotation) in the `nanoabs.vswf` convention.
    """
    from .tmatrix import _block_index, _rotation

    n_max = tm.n_max if n_max is None else int(n_max)
    u = np.asarray(axis, float)
    ux, uy, uz = u / np.linalg.norm(u)
    beta = float(np.arccos(np.clip(uz, -1, 1)))
    alpha = float(np.arctan2(uy, ux)) if np.hypot(ux, uy) > 1e-12 else 0.0
    W = tm.k_nm.size
    size = 2 * n_max * (n_max + 2)
    dense = np.zeros((W, size, size), complex)
    for m in range(-min(tm.n_max, n_max), min(tm.n_max, n_max) + 1):
        keep = np.tile(np.arange(max(1, abs(m)), tm.n_max + 1) <= n_max, 2)
        idx = _block_index(m, n_max)[np.tile(np.arange(max(1, abs(m)), n_max + 1) <= tm.n_max, 2)]
        dense[:, idx[:, None], idx[None, :]] = tm.block(m)[:, keep][:, :, keep]
    if beta != 0.0 or alpha != 0.0:
        rot = _rotation(n_max, alpha, beta, 0.0)
        dense = rot @ dense @ rot.conj().T
    return to_surface_convention(dense, n_max)


def orientation_nodes(m_excited):
    """Uniform in-plane angles phi_j = 2 pi j / N, N = 2 m_excited + 1, and equal weights.

    Parameters
    ----------
    m_excited : int
        Largest |m| of the incident coefficients.

    Notes
    -----
    With a_m(phi) = a_m exp(i m phi) and |m| <= m_excited, the absorbed power
    (a Hermitian form in a) is a trigonometric polynomial of degree 2 m_excited in phi;
    the N-point rectangle rule is exact for degree < N (e.g. Davis & Rabinowitz 1984,
    Sec. 2.9, trapezoidal rule for periodic functions, from memory).
    """
    N = 2 * int(m_excited) + 1
    return 2 * np.pi * np.arange(N) / N, np.full(N, 1.0 / N)


def _incident(environment, wl, half_height_nm, n_max, res):
    """Regular-wave coefficients (W, N) of the field without the particle, surface order."""
    from .vswf import plane_wave_coefficients

    waves = environment.drive_waves(wl, half_height_nm, res)
    _, _, blocks = surface_order(n_max)
    parts = [sum(np.concatenate(plane_wave_coefficients(k, E, m, n_max), 1) for k, E in waves) for m, _ in blocks]
    return np.concatenate(parts, 1), waves


def stack_reflection(environment, wl, half_height_nm, n_max, *, rtol=1e-9, res=None, s_max=None):
    """Block-diagonal reflection matrix R (W, N, N) of the stack in the surface order, and its error (W,).

    Parameters
    ----------
    environment : OnSubstrate or Buried
    wl : (W,) float
        Vacuum wavelengths [nm].
    half_height_nm : float
        Particle extent below its centre [nm] (sets the centre height).
    n_max : int
        Largest degree.
    rtol : float, keyword-only
        Accuracy of the Sommerfeld integrals (`nanoabs.surface.reflection_matrix`).
    res : Resolved, optional
        The environment already resolved on ``wl``.
    s_max : float, optional
        Truncated contour (order studies only, `nanoabs.surface.sommerfeld`).

    Notes
    -----
    Block m from `nanoabs.surface.reflection_matrix` (Bobbert & Vlieger 1986, Sec. 3);
    R(-m) = S R(m) S with S = diag(1 (M), -1 (N)) (`nanoabs.surface.multipole_response`).
    """
    from .surface import WAVELENGTH_CHUNK, reflection_matrix

    res = res or environment.resolve(wl)
    h = environment.center_height_nm(half_height_nm)
    _, _, blocks = surface_order(n_max)
    N = blocks[-1][1].stop
    R = np.zeros((len(wl), N, N), complex)
    err = np.zeros(len(wl))
    done = {}
    for m, sl in blocks:
        if -m in done:
            half = (sl.stop - sl.start) // 2
            sgn = np.concatenate([np.ones(half), -np.ones(half)])
            R[:, sl, sl] = done[-m] * sgn[:, None] * sgn[None, :]
            continue
        Rm = np.empty((len(wl), sl.stop - sl.start, sl.stop - sl.start), complex)
        for i in range(0, len(wl), WAVELENGTH_CHUNK):
            c = slice(i, i + WAVELENGTH_CHUNK)
            stack_i = [np.broadcast_to(x, wl.shape)[c] for x in res.host_stack]
            Rm[c], e_i = reflection_matrix(stack_i, res.host_thickness_nm, wl[c], h, m, n_max, rtol=rtol,
                                               s_max=s_max)
            err[c] = np.maximum(err[c], e_i)
        R[:, sl, sl] = done[m] = Rm
    return R, err


def _solve(T, R, A):
    """B = (1 - T R)^-1 T A for many right-hand sides A (W, N, P): one factorisation per wavelength.

    Balanced as `nanoabs.surface._solve_order`, with D_i = sqrt(max(max_j |T_ij|, max_j |T_ji|)) for
    a T that is not diagonal (T_n ~ x^(2n+1), R ~ (k h)^-(n+n'+1) span many decades).
    """
    d = np.sqrt(np.maximum(np.max(np.abs(T), 2), np.max(np.abs(T), 1))) + 1e-300
    M = np.eye(T.shape[1]) - (T @ R) / d[:, :, None] * d[:, None, :]
    return d[:, :, None] * np.linalg.solve(M, (T @ A) / d[:, :, None])


def _powers(A, B, R):
    """Absorbed and drive terms (W, P) before scaling: sum(-Re(conj(e) b) - |b|^2), sum(-Re(conj(a) b))."""
    E = A + R @ B
    return (np.sum(-np.real(np.conj(E) * B) - np.abs(B) ** 2, 1), np.sum(-np.real(np.conj(A) * B), 1), E)


def full_multipole_response(environment, T, wavelength_nm, *, half_height_nm, n_max, phis=(0.0,), weights=None,
                            rtol=1e-9, check_order=4, R=None, s_max=None):
    """Absorption of a particle with a full T-matrix in a planar environment, for in-plane turns phi.

    Parameters
    ----------
    environment : OnSubstrate or Buried
    T : (W, N, N) complex
        T-matrix in the lab frame at phi = 0, `nanoabs.vswf` convention, surface order
        (`lab_tmatrix`), N = 2 n_max (n_max + 2).
    wavelength_nm : (W,) float
        Vacuum wavelengths [nm].
    half_height_nm : float, keyword-only
        Particle extent below its centre [nm].
    n_max : int, keyword-only
    phis : sequence of float, keyword-only
        Turns of the particle about the surface normal [rad].
    weights : sequence of float, keyword-only
        Weights of the turns in ``sigma_abs_nm2`` (default: equal, summing to 1).
    rtol : float, keyword-only
        Accuracy of the Sommerfeld integrals.
    check_order : int, keyword-only
        Also solve truncated at n_max - check_order (same T, R, a): ``n_max_change``.
    R : (W, N, N) complex, optional
        A reflection matrix already computed (`stack_reflection`, same n_max and height).
    s_max : float, optional, keyword-only
        Cut the reflection integral at k_par = s_max k_h (`stack_reflection`; see `CONTOUR_CUT`).

    Returns
    -------
    dict
        ``sigma_abs_nm2`` (W,), weighted over the turns; ``sigma_abs_each_nm2`` (W, P);
        ``sigma_drive_nm2`` (W,) (weighted work of the drive field = absorbed + scattered);
        ``field_factor``; ``integration_error`` (W,); ``n_max``; ``n_max_change``; ``b``, ``e``
        (dict m -> (W, 2nn)) of the first turn, for `nanoabs.surface.scattered_powers`.

    Notes
    -----
    (1 - T R) b = T a (Bobbert & Vlieger 1986, Sec. 3, from memory) with R block-diagonal in m.
    The particle turned by phi has T' = P T P^+, P = diag(exp(-i m phi)) (the rotation of
    `nanoabs.tmatrix.TMatrix.rotated` with beta = 0); P commutes with R, so
    (1 - T R) (P^+ b') = T (P^+ a): the same matrix for every turn, with a_m exp(i m phi)
    on the right. The absorbed power sum(-Re(conj(e) b) - |b|^2) (power flux of
    `nanoabs.vswf`) is unchanged by the diagonal unitary P.
    """
    wl = np.atleast_1d(np.asarray(wavelength_nm, float))
    res = environment.resolve(wl)
    a, waves = _incident(environment, wl, half_height_nm, n_max, res)
    perm, m_of, blocks = surface_order(n_max)
    if T.shape[-1] != perm.size:
        raise NanoabsError(f"T has size {T.shape[-1]}: expected {perm.size} for n_max = {n_max}")
    if R is None:
        R, err = stack_reflection(environment, wl, half_height_nm, n_max, rtol=rtol, res=res, s_max=s_max)
    else:
        err = np.zeros(wl.shape)
    phis = np.atleast_1d(np.asarray(phis, float))
    w = np.full(phis.size, 1.0 / phis.size) if weights is None else np.asarray(weights, float)
    A = a[:, :, None] * np.exp(1j * m_of[None, :, None] * phis[None, None, :])
    B = _solve(T, R, A)
    ab, dr, E = _powers(A, B, R)
    k_h = 2 * np.pi * res.n_host / wl
    scale = (res.n_host / res.n_inc / k_h ** 2)[:, None]
    out = {"sigma_abs_each_nm2": scale * ab, "sigma_abs_nm2": (scale * ab) @ w,
           "sigma_drive_nm2": (scale * dr) @ w,
           "field_factor": np.sum(np.abs(sum(E_ for _, E_ in waves)) ** 2, -1),
           "integration_error": err, "n_max": n_max,
           "b": {m: B[:, sl, 0] for m, sl in blocks}, "e": {m: E[:, sl, 0] for m, sl in blocks}}
    n_of = np.concatenate([np.tile(np.arange(max(1, abs(m)), n_max + 1), 2) for m, _ in blocks])
    keep = n_of <= n_max - check_order
    change = float("nan")
    if check_order and np.any(keep):
        ix = np.ix_(keep, keep)
        Bl = _solve(T[:, ix[0], ix[1]], R[:, ix[0], ix[1]], A[:, keep])
        low = (scale * _powers(A[:, keep], Bl, R[:, ix[0], ix[1]])[0]) @ w
        with np.errstate(invalid="ignore", divide="ignore"):
            change = float(np.nanmax(np.abs(low / out["sigma_abs_nm2"] - 1)))
    out["n_max_change"] = change
    return out


#: Largest multipole degree of the order study (the EBCM T of elongated metal bodies loses
#: precision beyond about 28, notes/tmatrix.md; the dense solve costs N^3 with N = 2 n (n + 2)).
MAX_FULL_ORDER = 24
ORDER_STEP = 4
#: Cut of the reflection integral, k_par <= CONTOUR_CUT k_h, used when the full contour does not
#: converge in the multipole order (a circumscribing sphere that crosses the interface). The
#: remedy studied by Egel et al., Opt. Express 24, 25154 (2016) (from memory): for a fixed cut the
#: order series converges. The value 20 is set by the one full-wave comparison available
#: (bench/flatrods_fem.py, notes/flatrods.md: a 100 x 30 nm Au rod 2 nm above SiO2, 650-1050 nm,
#: finite elements: within 0.6 %; cuts of 10 and 40 were 1-8 % off there). Not a proven bound.
CONTOUR_CUT = 20.0


def _sample_indices(W, n=5):
    """Up to ``n`` wavelength indices evenly spread over the grid (ends included)."""
    return np.unique(np.linspace(0, W - 1, min(W, n)).round().astype(int))


def orientation(environment, polarization, m_excited):
    """In-plane turns phi [rad] of a body whose symmetry axis lies along lab x at phi = 0, and weights.

    Parameters
    ----------
    environment : OnSubstrate or Buried
        Its ``polarization`` puts the in-plane field along y ("s") or x ("p").
    polarization : {"x", "y", "z", "random"}
        The particle axis put along the in-plane field ("x": the rod's long axis, the
        project's "long"; "y": a short axis, "short"); "z" keeps phi = 0; "random" is the
        uniform average over turns about the surface normal (`orientation_nodes`), which
        is not the 3-D orientation average.
    m_excited : int
        Largest |m| of the incident coefficients.
    """
    field_on_x = environment.polarization == "p"
    if polarization == "random":
        return orientation_nodes(m_excited)
    along_x = {"x": field_on_x, "y": not field_on_x, "z": True}[polarization]
    return np.array([0.0 if along_x else 0.5 * np.pi]), np.array([1.0])


def flat_on_stack(environment, tmatrix_at, axis, wavelength_nm, *, half_height_nm, r_max_nm, polarization="x",
                  n_start, conv_rtol=2e-3, rtol=1e-9, s_max=None):
    """Multipole method for a body of revolution lying in a planar environment, order chosen by convergence.

    Parameters
    ----------
    environment : OnSubstrate or Buried
    tmatrix_at : callable
        ``tmatrix_at(n_max, wavelength_nm)`` -> `nanoabs.tmatrix.TMatrix` of the particle
        (axis z) computed at that degree (raises NanoabsError where EBCM fails).
    axis : (3,) float
        Lab direction of the symmetry axis at phi = 0 (x for a rod, z for a disc).
    wavelength_nm : (W,) float
    half_height_nm : float, keyword-only
        Extent below the centre [nm].
    r_max_nm : float, keyword-only
        Radius of the circumscribing sphere [nm] (reported with the centre height).
    polarization : {"x", "y", "z", "random"}, keyword-only
        See `orientation`.
    n_start : int, keyword-only
        First degree of the study (the EBCM order of the free particle, or more).
    conv_rtol : float, keyword-only
        Converged when sigma_abs at degrees n and n + 4 (each with its own EBCM T) agree
        to this relative change at up to 5 sample wavelengths.
    rtol : float, keyword-only
        Accuracy of the Sommerfeld integrals.
    s_max : float, optional, keyword-only
        Cut the reflection integral at k_par = s_max k_h (the remedy, `CONTOUR_CUT`);
        None: the full contour.

    Returns
    -------
    dict
        As `full_multipole_response` on the whole grid at the chosen degree, plus
        ``converged`` (bool), ``order_study`` (list of (n_max, sigma_abs at the samples)),
        ``order_change`` (relative change of the last step), ``reason`` (why the study
        stopped, when not converged), ``circumscribing_sphere_crosses_interface`` (bool).
        When the study does not converge no full-grid result is computed
        (``sigma_abs_nm2`` is None): the caller must not use a number from it.
    """
    wl = np.atleast_1d(np.asarray(wavelength_nm, float))
    h = environment.center_height_nm(half_height_nm)
    s = _sample_indices(wl.size)
    ws = wl[s]
    study, prev, change, reason = [], None, float("inf"), ""
    n = max(int(n_start), 2)
    waves = environment.drive_waves(ws, half_height_nm)
    oblique = any(np.any(np.abs(k[:, 0]) > 0) for k, _ in waves)   # normal incidence excites m = +-1 only

    def turns(n_):
        return orientation(environment, polarization, n_ if oblique else 1)
    while True:
        phis, weights = turns(n)
        try:
            T = lab_tmatrix(tmatrix_at(n, ws), axis)
        except NanoabsError as err:
            reason = f"the free particle's T-matrix fails at degree {n} ({err})"
            break
        cur = full_multipole_response(environment, T, ws, half_height_nm=half_height_nm, n_max=n, phis=phis,
                                      weights=weights, rtol=rtol, check_order=0, s_max=s_max)["sigma_abs_nm2"]
        study.append((n, cur.tolist()))
        if np.any(cur < 0):      # a passive particle cannot: the expansion diverges (or lost precision)
            reason = f"sigma_abs < 0 at degree {n}: the expansion diverges"
            break
        if prev is not None:
            with np.errstate(invalid="ignore", divide="ignore"):
                change = float(np.max(np.abs(cur - prev) / np.maximum(np.abs(cur), 1e-300)))
            if change < conv_rtol:
                n -= ORDER_STEP          # the last step bounds the change of the lower degree
                break
        if n + ORDER_STEP > MAX_FULL_ORDER:
            reason = (f"degree {n} (the cap) still changes sigma_abs by {change:.2g} relative from degree "
                      f"{n - ORDER_STEP}")
            break
        prev, n = cur, n + ORDER_STEP
    meta = {"order_study": study, "order_change": change, "reason": reason,
            "center_height_nm": h, "r_max_nm": float(r_max_nm),
            "circumscribing_sphere_crosses_interface": bool(r_max_nm >= h)}
    if reason:
        return meta | {"converged": False, "sigma_abs_nm2": None, "n_max": n}
    T = lab_tmatrix(tmatrix_at(n, wl), axis)
    phis, weights = turns(n)
    out = full_multipole_response(environment, T, wl, half_height_nm=half_height_nm, n_max=n, phis=phis,
                                  weights=weights, rtol=rtol, check_order=ORDER_STEP, s_max=s_max)
    return out | meta | {"converged": True}


def uniform_absorbed_power_density(spec, irradiance_W_m2=1.0):
    """Absorbed power density [W m^-3] inside a homogeneous non-spherical particle: a uniform approximation.

    Parameters
    ----------
    spec : nanoabs.Spectrum
        Spectrum of one homogeneous metal particle (spheroid, cylinder, capped rod, rounded
        disc) in any environment (homogeneous host, on a substrate, buried).
    irradiance_W_m2 : float or array (W,)
        Irradiance I0 of the incident wave [W m^-2] in the spectrum's reference (the
        incidence medium, for a planar environment).

    Returns
    -------
    (W,) ndarray
        p = I0 sigma_abs / V, the same at every point of the particle.

    Notes
    -----
    A documented approximation: in the quasi-static limit the internal field of a homogeneous
    ellipsoid in a uniform field is uniform (Bohren & Huffman 1983, Sec. 5.3), so the profile
    shape is flat and its level follows from the volume integral, int p dV = I0 sigma_abs.
    In a planar environment sigma_abs already carries the substrate's effect (standing wave,
    coupling), so this is the homogeneous profile shape scaled by
    sigma_abs(env) / sigma_abs(homogeneous). It ignores the field gradients of a particle
    comparable to the wavelength, the hot spots at the tips of a rod, and the non-uniform
    field a close substrate induces (its image field is strongest on the side facing it);
    for spheres use the exact profiles (`nanoabs.detector.absorbed_power_density`,
    `nanoabs.surface.sphere_absorption_profile`).
    """
    V = float(np.ravel(spec.metal_volume_m3)[0])
    if V <= 0:
        raise NanoabsError("uniform_absorbed_power_density: the particle has no metal volume")
    I0 = np.broadcast_to(np.asarray(irradiance_W_m2, float), spec.wavelength_nm.shape)
    return I0 * np.asarray(spec.sigma_abs_m2, float).reshape(spec.wavelength_nm.shape) / V
