"""Compiled fast path for corrected quasi-static maps of homogeneous ellipsoids.

A map of thousands of rods or discs over a wavelength grid is the one place
where the numpy formulas in :mod:`nanoabs.quasistatic` spend most of their time
creating temporaries (about 80 ns per point).  This module fuses the whole
per-point calculation, surface-damped permittivity included, into one loop
compiled with numba (a dependency of miepython, hence always installed with
nanoabs) and run on all cores.

It is a twin of the numpy path, not a second model: ``optics.spectrum`` uses it
only for homogeneous ellipsoids in the MLWA whose geometry does not vary with
wavelength, and the tests require the two paths to agree to 1e-12 (relative).
When numba cannot be imported, or ``ENABLED`` is False, the numpy path runs.

The per-point algebra
---------------------
With ``w = eps - eps_m`` and ``u = eps_m / w``, the static polarisability
along principal axis ``j`` (Bohren & Huffman 1983, eq. 5.32) is
``alpha_s = V w / (eps_m + L_j w)``, so ``1/alpha_s = (L_j + u) / V``.  The
MLWA correction (Meier & Wokaun 1983; Moroz 2009 for spheroids) subtracts
``k^2 D_j / (4 pi a_j) + i k^3 / (6 pi)``:

    z_j = 1/alpha_j = (L_j + Re u)/V - k^2 D_j/(4 pi a_j) + i (Im u / V - k^3/(6 pi)).

With ``sigma_ext = k Im(alpha)`` (optical theorem) and
``sigma_sca = k^4 |alpha|^2 / (6 pi)``, the radiative term cancels in the
difference and

    sigma_abs_j = -k (Im u) / (V |z_j|^2),   sigma_sca_j = k^4 / (6 pi |z_j|^2),

both non-negative for a passive particle (``Im u <= 0``) with no cancellation.
An orientation average is the weighted sum over the distinct axes (weights
1/3 per axis, or 1/3 and 2/3 for a spheroid's unique and equal axes).

Surface damping replaces the Drude damping ``gamma`` by ``gamma + dgamma``:
``eps = eps_bulk + wp^2/(E^2 + i gamma E) - wp^2/(E^2 + i (gamma + dgamma) E)``
(Kreibig & Vollmer 1995, sec. 2.2.4), with ``eps''`` clipped at 0 as in
:func:`nanoabs.materials.damped_permittivity`.

Concurrency: the kernel runs on numba's "workqueue" thread pool (unless
``NUMBA_THREADING_LAYER`` says otherwise), which survives ``fork`` (design
sweeps fork worker processes); calls from several Python threads are
serialised by a lock, since that pool must not be entered twice at once.
"""

from __future__ import annotations

import os
import threading

import numpy as np

__all__ = ["ENABLED", "Unavailable", "available", "ellipsoid_mlwa_map"]

#: Set to False to force the numpy path everywhere (the tests compare the two).
ENABLED = True



class Unavailable(RuntimeError):
    """numba could not be imported or could not compile the kernel (callers use numpy)."""


_LOCK = threading.Lock()
_STATE = {"kernel": None, "error": None}


prange = range  # numba.prange once numba is imported (see _build)


def _mlwa_kernel(ar, ai, inv_e, e2, wp2, gamma0, extra, eps_m, k2, rad, k_sc, k4_sc, lj, cj, wj, vol,
                 sa, ss, se):
    """The per-point loop of :func:`ellipsoid_mlwa_map` (algebra in the module docstring).

    Per wavelength ``w``: ``ar + i ai = eps_bulk + wp^2/(E^2 + i gamma0 E) - eps_m``,
    ``inv_e = 1/E``, ``e2 = E^2``, ``k2 = k^2``, ``rad = k^3/(6 pi)``,
    ``k_sc = k * scale``, ``k4_sc = k^4/(6 pi) * scale``. Per size ``s``:
    ``extra`` (dgamma), ``vol`` and, for up to three field axes ``j``, ``lj``
    (L_j), ``cj`` (D_j/(4 pi a_j)) and the weights ``wj``.
    """
    n_size, n_wl = sa.shape
    n_axes = lj.shape[0]
    clipped = 0
    bad = 0
    for s in prange(n_size):
        g = gamma0 + extra[s]
        g2 = g * g
        inv_v = 1.0 / vol[s]
        l0, c0, w0 = lj[0, s] * inv_v, cj[0, s], wj[0]
        l1, c1, w1 = (lj[1, s] * inv_v, cj[1, s], wj[1]) if n_axes > 1 else (0.0, 0.0, 0.0)
        l2, c2, w2 = (lj[2, s] * inv_v, cj[2, s], wj[2]) if n_axes > 2 else (0.0, 0.0, 0.0)
        n_clip = 0
        n_bad = 0
        for w in range(n_wl):
            d = wp2 / (e2[w] + g2)  # Re of wp^2/(E^2 + i g E)
            wr = ar[w] - d  # Re(eps - eps_m)
            wi_raw = ai[w] + d * g * inv_e[w]  # Im(eps)
            n_clip += wi_raw < 0.0
            wi = max(wi_raw, 0.0)
            n2 = wr * wr + wi * wi
            matched = n2 == 0.0  # eps = eps_m exactly: alpha = 0 (u and z infinite)
            f = eps_m[w] * inv_v / (1.0 if matched else n2)
            ur = f * wr  # Re(u) / V
            ui = -f * wi  # Im(u) / V
            zi = ui - rad[w]
            zi2 = zi * zi
            kk2 = k2[w]
            zr = l0 + ur - c0 * kk2
            acc = w0 / (zr * zr + zi2)
            if n_axes > 1:
                zr = l1 + ur - c1 * kk2
                acc += w1 / (zr * zr + zi2)
            if n_axes > 2:
                zr = l2 + ur - c2 * kk2
                acc += w2 / (zr * zr + zi2)
            acc = 0.0 if matched else acc
            absn = -k_sc[w] * ui * acc
            sca = k4_sc[w] * acc
            sa[s, w] = absn
            ss[s, w] = sca
            se[s, w] = absn + sca
            n_bad += not np.isfinite(absn + sca)
        clipped += n_clip
        bad += n_bad
    return clipped, bad


def numba_module(state):
    """numba with the fork-safe thread pool selected, or None (and the reason in ``state``)."""
    try:
        import numba
    except Exception as exc:  # missing, or broken against this numpy
        state["error"] = f"{type(exc).__name__}: {exc}"
        return None
    if "NUMBA_THREADING_LAYER" not in os.environ and numba.config.THREADING_LAYER == "default":
        # numba's own thread pool: fork-safe (sweeps fork worker processes; a forked child of a
        # process that used GNU OpenMP is terminated by numba); it is not thread-safe, hence _LOCK
        numba.config.THREADING_LAYER = "workqueue"
    return numba


def jit(numba, fn, state, **options):
    """``fn`` compiled (or loaded from numba's on-disk cache) on all cores; a failure goes to ``state``."""
    try:
        # 'arcp' (x/y as x*(1/y)) and 'contract' (fused multiply-add) let the loop vectorise;
        # no flag that assumes finite values, so NaN/inf still propagate; nogil: other Python threads
        # (a search's worker threads) run while a kernel runs (kernels themselves are serialised by _LOCK)
        state["kernel"] = numba.njit(parallel=True, cache=True, nogil=True, fastmath={"arcp", "contract"},
                                     **options)(fn)
    except Exception as exc:
        state["error"] = f"{type(exc).__name__}: {exc}"
    return state["kernel"]


def _build():
    """Compile (or load from numba's on-disk cache) the kernel; remember a failure."""
    if _STATE["kernel"] is not None or _STATE["error"] is not None:
        return _STATE["kernel"]
    numba = numba_module(_STATE)
    if numba is None:
        return None
    global prange
    prange = numba.prange  # resolved when the kernel is compiled
    return jit(numba, _mlwa_kernel, _STATE)


#: Calls with fewer points than this run on one thread: waking numba's pool costs more than such a
#: call takes (on a loaded 2-core machine several milliseconds, against 0.1-1 ms of work).  Every
#: point is computed the same way on any number of threads, so the results do not depend on it.
SERIAL_POINTS = 20_000


def call(kernel, state, *args, n_points=None):
    """Run ``kernel(*args)`` under the lock; a first-call compile failure is remembered in ``state``.

    ``n_points`` below `SERIAL_POINTS`: on one thread.
    """
    with _LOCK:
        serial = n_points is not None and n_points < SERIAL_POINTS
        if serial:
            import numba

            threads = numba.get_num_threads()
            numba.set_num_threads(1)
        try:
            return kernel(*args)
        except Exception as exc:  # compilation failed on this platform: remember, use numpy
            if not getattr(kernel, "overloads", None):
                state["kernel"], state["error"] = None, f"{type(exc).__name__}: {exc}"
                raise Unavailable(f"compiled path unavailable: {state['error']}") from None
            raise
        finally:
            if serial:
                numba.set_num_threads(threads)


def available() -> bool:
    """Whether the compiled path is enabled and numba imports (compiles on first use)."""
    return ENABLED and _build() is not None


def ellipsoid_mlwa_map(eps_bulk, energy_eV, drude, extra_eV, eps_medium, k, depol, dyn_over_4pi_a,
                       weights, volume, scale):
    """Orientation-weighted MLWA cross-sections of homogeneous ellipsoids on a (size, wavelength) grid.

    Parameters
    ----------
    eps_bulk : (W,) complex
        Bulk permittivity of the particle material at each wavelength [-].
    energy_eV : (W,) float
        Photon energies [eV].
    drude : (float, float)
        ``(wp^2 [eV^2], gamma [eV])`` of the material's fitted Drude term;
        ``(0, 0)`` when no surface damping is applied.
    extra_eV : (S,) float
        Extra Drude damping per size [eV] (zeros for none).
    eps_medium : (W,) float
        Real permittivity of the medium [-].
    k : (W,) float
        Wavenumber in the medium [1/nm].
    depol, dyn_over_4pi_a : (J, S) float
        Static depolarisation factor ``L_j`` and ``D_j / (4 pi a_j)`` [1/nm] of
        each distinct field axis ``j``.
    weights : (J,) float
        Weight of each axis (sum 1 for an orientation average).
    volume : (S,) float
        Particle volume [nm^3].
    scale : float
        Factor applied to the cross-sections (1e-18 gives m^2 from nm^2).

    Returns
    -------
    sigma_abs, sigma_sca, sigma_ext : (S, W) float
        Cross-sections [nm^2 * scale].
    n_clipped : int
        Number of points where the damped ``eps''`` was clipped at 0.
    n_nonfinite : int
        Number of points with a NaN or infinite cross-section (e.g. a lossless
        particle index-matched to the medium).
    """
    kernel = _build()
    if kernel is None:
        raise Unavailable(f"compiled path unavailable: {_STATE['error']}")
    f64 = np.float64
    wp2, gamma0 = (float(v) for v in drude)
    eps_m = np.asarray(eps_medium, dtype=f64)
    e = np.asarray(energy_eV, dtype=f64)
    k = np.asarray(k, dtype=f64)
    with np.errstate(divide="ignore", invalid="ignore"):
        # per-wavelength part: eps_bulk + wp^2/(E^2 + i gamma E) - eps_m
        a = np.asarray(eps_bulk, dtype=complex) + (wp2 / (e * e + 1j * gamma0 * e) if wp2 > 0 else 0.0) - eps_m
    per_wl = [a.real, a.imag, 1.0 / e, e * e]
    k2 = k * k
    extra = np.asarray(extra_eV, dtype=f64)
    n_size, n_wl = extra.size, e.size
    sa, ss, se = (np.empty((n_size, n_wl)) for _ in range(3))
    c = np.ascontiguousarray
    n_clip, n_bad = call(kernel, _STATE, *(c(x, dtype=f64) for x in per_wl), wp2, gamma0, c(extra),
                         c(eps_m), c(k2), c(k2 * k / (6.0 * np.pi)), c(k * scale),
                         c(k2 * k2 / (6.0 * np.pi) * scale), c(depol, dtype=f64),
                         c(dyn_over_4pi_a, dtype=f64), c(weights, dtype=f64), c(volume, dtype=f64),
                         sa, ss, se, n_points=sa.size)
    return sa, ss, se, int(n_clip), int(n_bad)
