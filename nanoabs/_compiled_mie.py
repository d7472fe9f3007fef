"""The per-order formulas of the Mie recursion, written once, and their compiled kernel.

The functions ``outer_order0``, ``outer_step``, ``layer_order0``,
``layer_step``, ``coefficients``, ``expm1_2iz``, ``recip`` and ``d1_start`` use
only arithmetic and numpy ufuncs, so they run unchanged on numpy arrays
(:func:`nanoabs.mie._recursion`, the numpy path, vectorised over points) and on
scalars inside the numba kernel ``_mie_kernel`` below (registered with numba's
``register_jitable`` when the kernel is built).  There is one source of the
formulas; the kernel adds only the loops: over blocks of 64 points in parallel,
and within a block, in lockstep over its points (typically the wavelengths of
one size), the downward D1 recurrences and the orders n and layers.  The only
formula written twice is the one-line D1 step of Bohren & Huffman eq. 4.89
(here and in ``mie._d1_down``).  The formulas and their references are in
:func:`nanoabs.mie.mie_layered` (Notes) and :func:`nanoabs.mie._recursion`.

What the kernel does differently from the numpy path, and why the two still agree
to round-off (tests/test_compiled_mie.py holds them to 1e-12):

* each point runs its own orders n = 1..n_stop (Wiscombe's criterion,
  :func:`nanoabs.mie.n_terms`), and a block of points starts its downward D1
  recurrence at the `d1_start` of its largest order and |z| (the numpy path
  uses that of its chunk: a later start gives the same values);
* the D1 recurrence of a real argument (the outer x, lossless layers) runs in
  real arithmetic, and the reciprocal in the complex one is written out
  (``conj(t) / |t|^2``), which is safe for the magnitudes met here (|t| between
  about 1e-8 and 1e8 for size parameters >= 1e-4);
* only the scattering and absorption sums are formed (no asymmetry or
  backscattering sums, which spectra do not use);
* complex reciprocals are ``conj(z)/|z|^2`` (`recip`; numba's own complex
  division is CPython's, three divisions and branches), and divisions by zero
  give inf/nan as in numpy (``error_model="numpy"``).

All points share numba's thread pool; calls are serialised by the lock of
:mod:`nanoabs._compiled`, and the kernel is cached on disk (``cache=True``).  The
cache is keyed on this file, which holds every function the kernel compiles.
"""

from __future__ import annotations

import threading
from contextlib import contextmanager

import numpy as np

from . import _compiled

# Points per parallel block (the scratch arrays are allocated once per block).
_BLOCK = 64

_STATE = {"kernel": None, "error": None}
#: Grids smaller than this use the numpy path: importing numba and loading the cached kernel
#: (0.5-3 s) costs more than numpy takes there. A fixed size rule, not "once the kernel is
#: loaded", so that a result never depends on what the process ran before (a resumed sweep
#: equals a fresh one bit for bit).
MIN_POINTS = 20_000

prange = range  # numba.prange once numba is imported (see _build)


# --------------------------------------------------------------------------
# formulas shared by the numpy path (arrays) and the kernel (scalars)
# --------------------------------------------------------------------------


def recip(z):
    """1/z: numpy's division on the numpy path; ``conj(z)/|z|^2`` in the kernel (see `_build`)."""
    return 1.0 / z


def d1_start(abs_z, n_store):
    """First index K of the downward D1 recurrence, started with D_K = 0, for |z| and orders <= n_store.

    A start error at K reaches order n multiplied by prod_{k=n+1..K} |R_k|^2,
    R_k = psi_k/psi_{k-1} (the derivative of one downward step).  Above the
    turning point (k + 1/2 > |z|) the uniform asymptotic form of psi_k (Debye;
    Abramowitz & Stegun 1964, eq. 9.3.7 (from memory)) gives
    |R_k| <= |z| / (nu + sqrt(nu^2 - |z|^2)), nu = k + 1/2, with equality for
    real z and a smaller value for absorbing z.  K is the first index past
    max(n_store, |z|) where the product of these bounds is below 1e-20: starts
    past it give bit-identical D1 over 1e-4 <= x <= 200, |m| <= 20
    (tests/test_compiled_mie.py), starts well short of it do not.  (It replaces
    the start max(n_store, |z|) + 8 |z|^(1/3) + 16 used before, equally accurate
    but 10-15 steps longer for small particles.)
    """
    k = int(max(n_store, abs_z)) + 1
    decay = 1.0
    while decay > 1e-20:
        nu = k + 0.5
        r = abs_z / (nu + np.sqrt(max(nu * nu - abs_z * abs_z, 0.0)))
        decay *= r * r
        k += 1
    return k


def expm1_2iz(a, b):
    """exp(2iz) - 1 = -2 psi_0(z) xi_0(z) for z = a + ib, b >= 0, from real functions.

    exp(2iz) - 1 = expm1(-2b) cos 2a - 2 sin^2 a + i exp(-2b) sin 2a: as accurate
    as the complex ``expm1`` (both real terms are <= 0 for small |z|, so nothing
    cancels) and less than half its cost.
    """
    s, c = np.sin(a), np.cos(a)
    s2 = s * s
    return (np.expm1(-2.0 * b) * (1.0 - 2.0 * s2) - 2.0 * s2) + 2j * (np.exp(-2.0 * b) * (s * c))


def layer_order0(z1, z2):
    """w_0 = i/(psi_0 xi_0) at z1 and z2, Q_0 and e(z1)/e(z2) with e = exp(2iz) - 1.

    psi_0 xi_0 = -e/2 (Yang 2003, eq. 20 (from memory)); Q_0 = [psi_0/xi_0](z1) /
    [psi_0/xi_0](z2) = exp(2i (z2 - z1)) e(z1)/e(z2) (Yang 2003, eq. 19 (from
    memory)), since psi_0/xi_0 = psi_0 xi_0 / xi_0^2 and xi_0^2 = -exp(2iz).
    """
    e1 = expm1_2iz(z1.real, z1.imag)
    e2 = expm1_2iz(z2.real, z2.imag)
    inv_e2 = recip(e2)
    r = e1 * inv_e2
    return -2j * recip(e1), -2j * inv_e2, np.exp(2j * (z2 - z1)) * r, r


def outer_order0(x):
    """Order-0 values at the real outer argument x: psi_0/xi_0 and 1/xi_0 (xi_0 = -i exp(ix))."""
    e = np.exp(-1j * x)
    return 1j * np.sin(x) * e, 1j * e


def outer_step(n, inv_x, d1x, d3x, rx, inv_xix):
    """Order n at the real outer argument x from order n - 1.

    ``d1x`` = D1_n(x); carried: D3_{n-1} = xi'/xi, psi/xi and 1/xi; returns them at
    order n.  With fac = xi_n/xi_{n-1} = n/x - D3_{n-1} (from xi_n' = xi_{n-1} -
    n xi_n/x, Abramowitz & Stegun 1964, eq. 10.1.22 (from memory)),
    D3_n = 1/fac - n/x: the upward recurrence of the dominant solution, stable for
    real x.  (Yang's (2003, eqs. 18-21) D3_n = D1_n + i/(psi_n xi_n) cancels near
    the zeros of psi_n(x), which cost up to 1e-10 in Q at x ~ 100.)
    """
    inv_fac = recip(n * inv_x - d3x)  # xi_{n-1}/xi_n
    psr = 1.0 / (d1x + n * inv_x)  # psi_n/psi_{n-1}, no cancellation for small x
    return inv_fac - n * inv_x, rx * (psr * inv_fac), inv_xix * inv_fac


def layer_step(n, ha, hb, d1a, d1b, r1, r2, w1, w2, q, mu, inv_mu, b1_1, b2_1):
    """One layer l >= 2 at order n: Yang's (2003) eqs. 12-19 as rearranged in mie._recursion.

    ``d1a``, ``r1`` (``d1b``, ``r2``) are D1_n and psi_n/psi_{n-1} at z1 = m_l x_{l-1}
    (z2 = m_l x_l); ``w1``, ``w2`` = i/(psi_{n-1} xi_{n-1}) and ``q`` = Q_{n-1} are
    carried; ``mu`` = m_l/m_{l-1}; ``b1_1``, ``b2_1`` = B_1 = 1/z - i.  Returns
    (H^a_l, H^b_l, w1, w2, Q_n, G1a, G2a, G1b, G2b, G2a - Q G1a, G2b - Q G1b).
    """
    b1 = r1 - w1 if n > 1 else b1_1  # xi_n/xi_{n-1}; R_1 - w_0 cancels near zeros of sin z
    b2 = r2 - w2 if n > 1 else b2_1
    q = q * ((b2 * r1) * recip(b1 * r2))
    w1 = w1 * recip(b1 * r1)  # w_n = i/(psi_n xi_n)
    w2 = w2 * recip(b2 * r2)
    # interface recursion for the TM (a) and TE (b) modes, G1, G2 divided by m_{l-1} (TM), m_l (TE)
    g1a = mu * ha - d1a
    g1b = inv_mu * hb - d1a
    g2a = g1a - w1
    g2b = g1b - w1
    qg1a = q * g1a
    qg1b = q * g1b
    dena = g2a - qg1a
    denb = g2b - qg1b
    return (d1b - w2 * qg1a * recip(dena), d1b - w2 * qg1b * recip(denb), w1, w2, q, g1a, g2a, g1b,
            g2b, dena, denb)


def coefficients(rx, ha, hb, d1x, d3x, inv_xix):
    """a_n, b_n, the absorption term Re a_n - |a_n|^2 + Re b_n - |b_n|^2, h_a - D3_n, h_b - D3_n.

    a_n = (psi_n/xi_n)(x) (h_a - D1_n(x)) / (h_a - D3_n(x)) (Yang 2003, eq. 16) and
    Re a_n - |a_n|^2 = -Im(h_a) / (|h_a - D3_n(x)|^2 |xi_n(x)|^2) (see mie.mie_layered, Notes).
    """
    da = ha - d3x
    db = hb - d3x
    ia = 1.0 / (da.real ** 2 + da.imag ** 2)
    ib = 1.0 / (db.real ** 2 + db.imag ** 2)
    im3 = inv_xix.real ** 2 + inv_xix.imag ** 2  # = Im D3_n(x) = 1/|xi_n(x)|^2
    t_abs = -(ha.imag * ia + hb.imag * ib) * im3
    return rx * (ha - d1x) * (da.conjugate() * ia), rx * (hb - d1x) * (db.conjugate() * ib), t_abs, da, db


# --------------------------------------------------------------------------
# the kernel (loops only)
# --------------------------------------------------------------------------


def _d1_block(zr, zi, n_store, dr, di, rr, ri):
    """D1_n(z_j) and R_n = psi_n/psi_{n-1}(z_j), n <= n_store, for a block of z = zr + i zi.

    Downward recurrence D_{n-1} = n/z - R_n, R_n = 1/(D_n + n/z) (Bohren &
    Huffman 1983, eq. 4.89, as in mie._d1_down) from D = 0 at the block's
    `d1_start`, with the reciprocal written out.  All points advance together
    and the inner loops have no branches, so they vectorise.  Results:
    ``dr[n, j] + i di[n, j]`` (n <= n_store + 1), ``rr + i ri`` (1 <= n <= n_store + 1).
    """
    nb = zr.size
    izr = np.empty(nb)
    izi = np.empty(nb)
    az = 0.0
    for j in range(nb):
        a2 = zr[j] * zr[j] + zi[j] * zi[j]
        az = max(az, np.sqrt(a2))
        izr[j] = zr[j] / a2
        izi[j] = -zi[j] / a2
    d_r = np.zeros(nb)
    d_i = np.zeros(nb)
    for n in range(d1_start(az, n_store), n_store + 1, -1):
        for j in range(nb):
            _d1_step(n, izr, izi, d_r, d_i, j)
    for n in range(n_store + 1, 0, -1):
        for j in range(nb):
            rr[n, j], ri[n, j] = _d1_step(n, izr, izi, d_r, d_i, j)
            dr[n - 1, j] = d_r[j]
            di[n - 1, j] = d_i[j]


def _d1_step(n, izr, izi, d_r, d_i, j):
    """One step of `_d1_block` at point j: D_n -> D_{n-1} in place; returns R_n (real, imaginary)."""
    nzr = n * izr[j]
    nzi = n * izi[j]
    tr = d_r[j] + nzr
    ti = d_i[j] + nzi
    sc = 1.0 / (tr * tr + ti * ti)
    d_r[j] = nzr - tr * sc
    d_i[j] = nzi + ti * sc
    return tr * sc, -ti * sc


def _d1_block_real(z, n_store, dr, rr):
    """`_d1_block` for real arguments, in real arithmetic (the imaginary parts stay 0)."""
    nb = z.size
    iz = np.empty(nb)
    az = 0.0
    for j in range(nb):
        az = max(az, abs(z[j]))
        iz[j] = 1.0 / z[j]
    d = np.zeros(nb)
    for n in range(d1_start(az, n_store), n_store + 1, -1):
        for j in range(nb):
            nz = n * iz[j]
            d[j] = nz - 1.0 / (d[j] + nz)
    for n in range(n_store + 1, 0, -1):
        for j in range(nb):
            nz = n * iz[j]
            r = 1.0 / (d[j] + nz)
            rr[n, j] = r
            d[j] = nz - r
            dr[n - 1, j] = d[j]


def _mie_kernel(m, x, n_stop, qsca, qabs):
    """Q_sca and Q_abs of the points ``p`` of ``m``, ``x`` (L, P); orders 1..n_stop[p]."""
    n_layers, n_pts = m.shape
    n_blocks = (n_pts + _BLOCK - 1) // _BLOCK
    for blk in prange(n_blocks):
        lo = blk * _BLOCK
        hi = min(n_pts, lo + _BLOCK)
        nb = hi - lo
        nmx = 1
        for p in range(lo, hi):
            nmx = max(nmx, n_stop[p])
        # D1 and psi ratios: [layer, 0 = z1 (m_l x_{l-1}) or 1 = z2 (m_l x_l), n, point];
        # the core's D1_n(m_1 x_1) is [0, 1]; the outer x is [0, 0]
        dr = np.zeros((n_layers, 2, nmx + 2, nb))
        di = np.zeros((n_layers, 2, nmx + 2, nb))
        rr = np.zeros((n_layers, 2, nmx + 2, nb))
        ri = np.zeros((n_layers, 2, nmx + 2, nb))
        zr = np.empty(nb)
        zi = np.empty(nb)
        _d1_block_real(x[n_layers - 1, lo:hi].copy(), nmx, dr[0, 0], rr[0, 0])
        for l in range(n_layers):
            for side in range(1 if l == 0 else 0, 2):
                lossless = True
                for j in range(nb):
                    z = m[l, lo + j] * x[l - 1 + side, lo + j]
                    zr[j] = z.real
                    zi[j] = z.imag
                    lossless = lossless and z.imag == 0.0
                if lossless:  # a lossless layer: real arithmetic
                    _d1_block_real(zr, nmx, dr[l, side], rr[l, side])
                else:
                    _d1_block(zr, zi, nmx, dr[l, side], di[l, side], rr[l, side], ri[l, side])
        _orders(m[:, lo:hi], x[:, lo:hi], n_stop[lo:hi], nmx, dr, di, rr, ri, qsca[lo:hi], qabs[lo:hi])


def _orders(m, x, n_stop, nmx, dr, di, rr, ri, qsca, qabs):
    """The order loop of one block of points in lockstep (orders above a point's n_stop are not summed).

    The points of a block advance together, order by order and layer by layer,
    so that the divisions of different points overlap (each point's recursion
    is a chain of dependent divisions).
    """
    n_layers, nb = m.shape
    c16 = np.complex128
    inv_x = np.empty(nb)
    rx = np.empty(nb, dtype=c16)
    ix = np.empty(nb, dtype=c16)
    d3 = np.full(nb, 1j)  # D3_0 = i
    mo = np.empty(nb, dtype=c16)
    inv_mo = np.empty(nb, dtype=c16)
    ha = np.empty(nb, dtype=c16)
    hb = np.empty(nb, dtype=c16)
    s_sca = np.zeros(nb)
    s_abs = np.zeros(nb)
    w1 = np.empty((n_layers, nb), dtype=c16)
    w2 = np.empty((n_layers, nb), dtype=c16)
    q = np.empty((n_layers, nb), dtype=c16)
    per_layer = np.empty((4, n_layers, nb), dtype=c16)  # mu, 1/mu, B_1(z1), B_1(z2)
    for j in range(nb):
        xo = x[n_layers - 1, j]
        inv_x[j] = 1.0 / xo
        rx[j], ix[j] = outer_order0(xo)
        mo[j] = m[n_layers - 1, j]
        inv_mo[j] = recip(mo[j])
        for l in range(1, n_layers):
            ml = m[l, j]
            z1 = ml * x[l - 1, j]
            z2 = ml * x[l, j]
            w1[l, j], w2[l, j], q[l, j], _ = layer_order0(z1, z2)
            per_layer[0, l, j] = ml * recip(m[l - 1, j])
            per_layer[1, l, j] = m[l - 1, j] * recip(ml)
            per_layer[2, l, j] = recip(z1) - 1j  # B_1 = xi_1/xi_0 = 1/z - D3_0, D3_0 = i
            per_layer[3, l, j] = recip(z2) - 1j
    for n in range(1, nmx + 1):
        for j in range(nb):
            d3[j], rx[j], ix[j] = outer_step(n, inv_x[j], dr[0, 0, n, j], d3[j], rx[j], ix[j])
            ha[j] = complex(dr[0, 1, n, j], di[0, 1, n, j])  # core: H = D1_n(m_1 x_1)
            hb[j] = ha[j]
        for l in range(1, n_layers):
            for j in range(nb):
                out = layer_step(n, ha[j], hb[j], complex(dr[l, 0, n, j], di[l, 0, n, j]),
                                 complex(dr[l, 1, n, j], di[l, 1, n, j]),
                                 complex(rr[l, 0, n, j], ri[l, 0, n, j]),
                                 complex(rr[l, 1, n, j], ri[l, 1, n, j]), w1[l, j], w2[l, j], q[l, j],
                                 per_layer[0, l, j], per_layer[1, l, j], per_layer[2, l, j],
                                 per_layer[3, l, j])
                ha[j], hb[j], w1[l, j], w2[l, j], q[l, j] = out[0], out[1], out[2], out[3], out[4]
        c = 2 * n + 1
        for j in range(nb):
            an, bn, t_abs, _, _ = coefficients(rx[j], ha[j] * inv_mo[j], mo[j] * hb[j], dr[0, 0, n, j], d3[j],
                                               ix[j])
            keep = n <= n_stop[j]  # a select, not a product: orders past n_stop may overflow
            s_sca[j] += c * (an.real ** 2 + an.imag ** 2 + bn.real ** 2 + bn.imag ** 2) if keep else 0.0
            s_abs[j] += c * t_abs if keep else 0.0
    for j in range(nb):
        x2 = x[n_layers - 1, j] ** 2
        qsca[j] = 2.0 * s_sca[j] / x2
        lossless = True
        for l in range(n_layers):
            lossless = lossless and m[l, j].imag == 0.0
        qabs[j] = 0.0 if lossless else max(2.0 * s_abs[j] / x2, 0.0)


def _build():
    """Compile (or load from numba's on-disk cache) the kernel; remember a failure."""
    if _STATE["kernel"] is not None or _STATE["error"] is not None:
        return _STATE["kernel"]
    numba = _compiled.numba_module(_STATE)
    if numba is None:
        return None
    global prange
    prange = numba.prange  # resolved when the kernel is compiled
    try:
        from numba.core import types
        from numba.extending import overload, register_jitable

        @overload(recip)
        def _recip(z):  # one real division instead of numba's three (CPython's complex division)
            if isinstance(z, types.Complex):
                def impl(z):
                    s = 1.0 / (z.real * z.real + z.imag * z.imag)
                    return complex(z.real * s, -z.imag * s)
                return impl
            return lambda z: 1.0 / z

        for fn in (d1_start, expm1_2iz, layer_order0, outer_order0, outer_step, layer_step,
                   coefficients, _d1_block, _d1_block_real, _orders):
            register_jitable(fn)
        register_jitable(inline="always")(_d1_step)  # inlined before typing: the loops still vectorise
    except Exception as exc:
        _STATE["error"] = f"{type(exc).__name__}: {exc}"
        return None
    # error_model="numpy": a division by zero gives inf/nan as in numpy, with no check per division
    return _compiled.jit(numba, _mie_kernel, _STATE, error_model="numpy")


_SCOPE = threading.local()


@contextmanager
def any_size():
    """Within this block (in this thread) the kernel serves grids of any size, not only >= `MIN_POINTS`.

    For callers that compute many small spectra in one process (the band search), where the
    kernel's load is paid once.  A rule fixed by the caller, like `MIN_POINTS`: what ran before
    never changes which path a result takes.
    """
    _SCOPE.depth = getattr(_SCOPE, "depth", 0) + 1
    try:
        yield
    finally:
        _SCOPE.depth -= 1


def available(n_points=None) -> bool:
    """Whether the compiled Mie path is enabled (``nanoabs._compiled.ENABLED``) and numba imports.

    With ``n_points``: also whether a grid of that size should use it (see `MIN_POINTS`, `any_size`).
    """
    if n_points is not None and n_points < MIN_POINTS and not getattr(_SCOPE, "depth", 0):
        return False
    return _compiled.ENABLED and _build() is not None


def mie_efficiencies(m, x, n_stop):
    """Q_sca, Q_abs of flattened, validated points: ``m`` complex, ``x`` float, (L, P); ``n_stop`` (P,).

    Raises :class:`nanoabs._compiled.Unavailable` when the kernel cannot be built.
    """
    kernel = _build()
    if kernel is None:
        raise _compiled.Unavailable(f"compiled path unavailable: {_STATE['error']}")
    n_pts = m.shape[1]
    qsca, qabs = np.empty(n_pts), np.empty(n_pts)
    c = np.ascontiguousarray
    _compiled.call(kernel, _STATE, c(m, dtype=np.complex128), c(x, dtype=np.float64),
                   c(n_stop, dtype=np.int64), qsca, qabs, n_points=n_pts)
    return qsca, qabs
