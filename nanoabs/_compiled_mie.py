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


def layer_order0(d1a, d1b, z1, z2):
    """w_0 = i/(psi_0 xi_0) at z1 and z2, Q_0 and e(z1)/e(z2) with e = exp(2iz) - 1, from D1_0 = cot z.

    ``d1a``, ``d1b`` are D1_0 = psi_0'/psi_0 = cot z at z1 and z2, which the
    downward D1 recurrence gives anyway.  psi_0 xi_0 = -e/2 (Yang 2003, eq. 20
    (from memory)) and cot z = i (e + 2)/e, so w_0 = -2i/e = i - cot z, with no
    cancellation for Im z >= 0 (there cot z -> -i, w_0 -> 2i) and no
    transcendental call.  Q_0 = [psi_0/xi_0](z1) / [psi_0/xi_0](z2) =
    exp(2i (z2 - z1)) e(z1)/e(z2) (Yang 2003, eq. 19 (from memory)), since
    psi_0/xi_0 = psi_0 xi_0 / xi_0^2 and xi_0^2 = -exp(2iz); e(z1)/e(z2) =
    w_0(z2)/w_0(z1).
    """
    w1 = 1j - d1a
    w2 = 1j - d1b
    r = w2 * recip(w1)
    return w1, w2, np.exp(2j * (z2 - z1)) * r, r


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


# How the loops vectorise.  LLVM vectorises a loop over the points j of a block only if it
# can prove that its stores never overwrite what another point's iteration reads.  It can
# when the loop indexes 1-D arrays as a[OFFSET + j], where OFFSET is fixed during the loop:
# every block quantity is a row of _BLOCK values (a compile-time constant), and row r of a
# table sits at offset r * _BLOCK.  (Rows of 2-D numba arrays, whose row length the index
# arithmetic reads from the array at run time, defeat the proof: "too many memory checks".)
# Complex values are (real, imaginary) row pairs, rebuilt as complex scalars, so the formulas
# above run on them unchanged; arrays are indexed in place, not handed to helper functions
# inside a loop (their reference counting adds calls, which do not vectorise).  The loop
# functions are inlined into `_block` (numba's ``inline="always"``).

_IM = _BLOCK  # offset of the imaginary part of a complex row pair
# rows of `st`: the outer argument, its medium ratio, the sums, the last order of each point
_INV_X, _D3, _RX, _IX, _MO, _IMO, _SSCA, _SABS, _NSTOP = (k * _BLOCK for k in (0, 1, 3, 5, 7, 9, 11, 12, 13))
_N_ST = 14 * _BLOCK
# rows of `ly` (the layer l >= 1 being computed): carried w_n(z1), w_n(z2), Q_n; the constants
# m_l/m_{l-1}, its inverse, B_1(z1), B_1(z2)
_W1, _W2, _Q, _MU, _IMU, _B11, _B21 = (k * _BLOCK for k in (0, 2, 4, 6, 8, 10, 12))
_N_LY = 14 * _BLOCK
# rows of order n of the table `tab` (n_rows rows per order, order n from row n * n_rows): D1_n
# and R_n = psi_n/psi_{n-1} (n >= 1) of each argument as (re, im) pairs, D1 in rows r, r + 1 and
# R in r + 2, r + 3: the outer x (r = _TX), the core m_1 x_1 (_TC), then for each layer l >= 1
# z1 = m_l x_{l-1} (`_tl(l)`) and z2 = m_l x_l (`_tl(l) + 4`).  The table `h` holds H^a_n, H^b_n
# (re, im: 4 rows per order) of the layer last computed.
_TX, _TC, _T1 = 0, 4, 8
# rows of the scratch `wk` of `_d1_table`: z (re, im), 1/z (re, im), the carried D (re, im)
_ZR, _ZI, _IZR, _IZI, _DR, _DI = (k * _BLOCK for k in range(6))


def _tl(l):
    """First row of layer l >= 1 in an order of the table."""
    return _T1 + 8 * (l - 1)


def _d1_table(tab, n_rows, row, wk, nb, nmx):
    """D1_n and R_n of the block's arguments z_j = wk[_ZR + j] + i wk[_ZI + j] into the order table.

    Downward recurrence R_n = 1/(D_n + n/z), D_{n-1} = n/z - R_n (Bohren &
    Huffman 1983, eq. 4.89, as in mie._d1_down) from D = 0 at the block's
    `d1_start`; D1_n -> rows ``row``, ``row + 1`` of order n (n = 0..nmx), R_n ->
    rows ``row + 2``, ``row + 3`` (n = 1..nmx).  All points advance together and
    the inner loops have no branches, so they vectorise; a lossless argument
    (every z real) runs in real arithmetic.
    """
    az = 0.0
    lossless = True
    for j in range(nb):
        zr, zi = wk[_ZR + j], wk[_ZI + j]
        a2 = zr * zr + zi * zi
        az = max(az, np.sqrt(a2))
        wk[_IZR + j] = zr / a2
        wk[_IZI + j] = -zi / a2
        wk[_DR + j] = 0.0
        wk[_DI + j] = 0.0
        lossless = lossless and zi == 0.0
    n0 = d1_start(az, nmx)
    for n in range(n0, 0, -1):
        # steps n > nmx store into order nmx, which step nmx then overwrites
        o = (min(n, nmx) * n_rows + row) * _BLOCK
        t = tab[o:o + 4 * _BLOCK]
        if lossless:
            for j in range(nb):
                nz = n * wk[_IZR + j]
                t[j] = wk[_DR + j]
                t[_IM + j] = 0.0
                r = 1.0 / (wk[_DR + j] + nz)
                t[2 * _BLOCK + j] = r
                t[3 * _BLOCK + j] = 0.0
                wk[_DR + j] = nz - r
        else:
            for j in range(nb):  # one step of the recurrence, the reciprocal written out
                nzr = n * wk[_IZR + j]
                nzi = n * wk[_IZI + j]
                t[j] = wk[_DR + j]
                t[_IM + j] = wk[_DI + j]
                tr = wk[_DR + j] + nzr
                ti = wk[_DI + j] + nzi
                sc = 1.0 / (tr * tr + ti * ti)
                t[2 * _BLOCK + j] = tr * sc  # R_n = 1/(D_n + n/z)
                t[3 * _BLOCK + j] = -ti * sc
                wk[_DR + j] = nzr - tr * sc  # D_{n-1} = n/z - R_n
                wk[_DI + j] = nzi + ti * sc
    t = tab[row * _BLOCK:(row + 2) * _BLOCK]
    for j in range(nb):
        t[j] = wk[_DR + j]
        t[_IM + j] = wk[_DI + j]


def _mie_kernel(m, x, n_stop, qsca, qabs):
    """Q_sca and Q_abs of the points ``p`` of ``m``, ``x`` (L, P); orders 1..n_stop[p]."""
    n_pts = m.shape[1]
    n_blocks = (n_pts + _BLOCK - 1) // _BLOCK
    for blk in prange(n_blocks):
        lo = blk * _BLOCK
        _block(m, x, n_stop, lo, min(n_pts, lo + _BLOCK), qsca, qabs)


def _block(m, x, n_stop, lo, hi, qsca, qabs):
    """Q_sca and Q_abs of the points lo..hi-1 (at most _BLOCK), in lockstep."""
    n_layers = m.shape[0]
    nb = hi - lo
    nmx = 1
    for p in range(lo, hi):
        nmx = max(nmx, n_stop[p])
    n_rows = _T1 + 8 * (n_layers - 1)
    tab = np.empty((nmx + 1) * n_rows * _BLOCK)
    wk = np.empty(6 * _BLOCK)
    # D1 and R tables: the outer x, the core, z1 and z2 of every further layer
    for j in range(nb):
        wk[_ZR + j] = x[n_layers - 1, lo + j]
        wk[_ZI + j] = 0.0
    _d1_table(tab, n_rows, _TX, wk, nb, nmx)
    for l in range(n_layers):
        for side in range(1 if l == 0 else 0, 2):
            for j in range(nb):
                z = m[l, lo + j] * x[l - 1 + side, lo + j]
                wk[_ZR + j] = z.real
                wk[_ZI + j] = z.imag
            _d1_table(tab, n_rows, _TC if l == 0 else _tl(l) + 4 * side, wk, nb, nmx)
    # order-0 values of the outer argument
    st = np.empty(_N_ST)
    for j in range(nb):
        p = lo + j
        xo = x[n_layers - 1, p]
        rx, ix = outer_order0(xo)
        mo = m[n_layers - 1, p]
        imo = recip(mo)
        st[_INV_X + j] = 1.0 / xo
        st[_RX + j], st[_RX + _IM + j] = rx.real, rx.imag
        st[_IX + j], st[_IX + _IM + j] = ix.real, ix.imag
        st[_D3 + j], st[_D3 + _IM + j] = 0.0, 1.0  # D3_0 = i
        st[_MO + j], st[_MO + _IM + j] = mo.real, mo.imag
        st[_IMO + j], st[_IMO + _IM + j] = imo.real, imo.imag
        st[_SSCA + j] = 0.0
        st[_SABS + j] = 0.0
        st[_NSTOP + j] = n_stop[p]
    # H of the core (H^a = H^b = D1_n(m_1 x_1), Yang 2003, eq. 11), then of each layer in turn
    h = np.empty((nmx + 1) * 4 * _BLOCK)
    for n in range(1, nmx + 1):
        for k in range(4):
            o, oc = (n * 4 + k) * _BLOCK, (n * n_rows + _TC + k % 2) * _BLOCK
            hk, tk = h[o:o + _BLOCK], tab[oc:oc + _BLOCK]
            for j in range(nb):
                hk[j] = tk[j]
    ly = np.empty(_N_LY)
    for l in range(1, n_layers):
        _layer(m, x, lo, tab, n_rows, h, ly, l, nb, nmx)
    _sums(tab, n_rows, h, st, nb, nmx)
    for j in range(nb):
        p = lo + j
        x2 = x[n_layers - 1, p] ** 2
        qsca[p] = 2.0 * st[_SSCA + j] / x2
        lossless = True
        for l in range(n_layers):
            lossless = lossless and m[l, p].imag == 0.0
        qabs[p] = 0.0 if lossless else max(2.0 * st[_SABS + j] / x2, 0.0)


def _layer(m, x, lo, tab, n_rows, h, ly, l, nb, nmx):
    """H^a_n, H^b_n of layer l >= 1 for n = 1..nmx from those of layer l - 1 (in ``h``, overwritten)."""
    r = _tl(l)
    for j in range(nb):  # order 0
        p = lo + j
        ml, mp = m[l, p], m[l - 1, p]
        z1, z2 = ml * x[l - 1, p], ml * x[l, p]
        w1, w2, q, _ = layer_order0(complex(tab[r * _BLOCK + j], tab[(r + 1) * _BLOCK + j]),
                                    complex(tab[(r + 4) * _BLOCK + j], tab[(r + 5) * _BLOCK + j]), z1, z2)
        mu, imu = ml * recip(mp), mp * recip(ml)
        b11, b21 = recip(z1) - 1j, recip(z2) - 1j  # B_1 = xi_1/xi_0 = 1/z - D3_0, D3_0 = i
        ly[_W1 + j], ly[_W1 + _IM + j] = w1.real, w1.imag
        ly[_W2 + j], ly[_W2 + _IM + j] = w2.real, w2.imag
        ly[_Q + j], ly[_Q + _IM + j] = q.real, q.imag
        ly[_MU + j], ly[_MU + _IM + j] = mu.real, mu.imag
        ly[_IMU + j], ly[_IMU + _IM + j] = imu.real, imu.imag
        ly[_B11 + j], ly[_B11 + _IM + j] = b11.real, b11.imag
        ly[_B21 + j], ly[_B21 + _IM + j] = b21.real, b21.imag
    for n in range(1, nmx + 1):
        ot, oh = (n * n_rows + r) * _BLOCK, n * 4 * _BLOCK
        if n == 1:  # layer_step with a literal order: a branch on a variable one stops vectorisation
            _layer_points(tab[ot:ot + 8 * _BLOCK], h[oh:oh + 4 * _BLOCK], ly, nb, 1)
        else:
            _layer_points(tab[ot:ot + 8 * _BLOCK], h[oh:oh + 4 * _BLOCK], ly, nb, 2)


def _layer_points(t, hn, ly, nb, n):
    """One order of `_layer` at the points of the block; ``n`` is 1 or a literal > 1 (see `layer_step`).

    ``t``: the layer's 8 rows of this order of the table; ``hn``: this order's H (4 rows).
    """
    for j in range(nb):
        out = layer_step(n, complex(hn[j], hn[_IM + j]),
                         complex(hn[2 * _BLOCK + j], hn[3 * _BLOCK + j]),
                         complex(t[j], t[_IM + j]),
                         complex(t[4 * _BLOCK + j], t[5 * _BLOCK + j]),
                         complex(t[2 * _BLOCK + j], t[3 * _BLOCK + j]),
                         complex(t[6 * _BLOCK + j], t[7 * _BLOCK + j]),
                         complex(ly[_W1 + j], ly[_W1 + _IM + j]), complex(ly[_W2 + j], ly[_W2 + _IM + j]),
                         complex(ly[_Q + j], ly[_Q + _IM + j]), complex(ly[_MU + j], ly[_MU + _IM + j]),
                         complex(ly[_IMU + j], ly[_IMU + _IM + j]), complex(ly[_B11 + j], ly[_B11 + _IM + j]),
                         complex(ly[_B21 + j], ly[_B21 + _IM + j]))
        hn[j], hn[_IM + j] = out[0].real, out[0].imag
        hn[2 * _BLOCK + j], hn[3 * _BLOCK + j] = out[1].real, out[1].imag
        ly[_W1 + j], ly[_W1 + _IM + j] = out[2].real, out[2].imag
        ly[_W2 + j], ly[_W2 + _IM + j] = out[3].real, out[3].imag
        ly[_Q + j], ly[_Q + _IM + j] = out[4].real, out[4].imag


def _sums(tab, n_rows, h, st, nb, nmx):
    """The outer argument's recurrences and the sums over orders (orders above a point's n_stop are not summed)."""
    for n in range(1, nmx + 1):
        ox, oh = (n * n_rows + _TX) * _BLOCK, n * 4 * _BLOCK
        tx, hn = tab[ox:ox + _BLOCK], h[oh:oh + 4 * _BLOCK]
        for j in range(nb):
            d3, rx, ix = outer_step(n, st[_INV_X + j], tx[j], complex(st[_D3 + j], st[_D3 + _IM + j]),
                                    complex(st[_RX + j], st[_RX + _IM + j]), complex(st[_IX + j], st[_IX + _IM + j]))
            st[_D3 + j], st[_D3 + _IM + j] = d3.real, d3.imag
            st[_RX + j], st[_RX + _IM + j] = rx.real, rx.imag
            st[_IX + j], st[_IX + _IM + j] = ix.real, ix.imag
        c = 2 * n + 1
        for j in range(nb):
            mo = complex(st[_MO + j], st[_MO + _IM + j])
            ha = complex(hn[j], hn[_IM + j]) * complex(st[_IMO + j], st[_IMO + _IM + j])
            hb = mo * complex(hn[2 * _BLOCK + j], hn[3 * _BLOCK + j])
            an, bn, t_abs, _, _ = coefficients(complex(st[_RX + j], st[_RX + _IM + j]), ha, hb, tx[j],
                                               complex(st[_D3 + j], st[_D3 + _IM + j]),
                                               complex(st[_IX + j], st[_IX + _IM + j]))
            keep = n <= st[_NSTOP + j]  # a select, not a product: orders past n_stop may overflow
            s_sca = an.real * an.real + an.imag * an.imag + bn.real * bn.real + bn.imag * bn.imag
            st[_SSCA + j] += c * s_sca if keep else 0.0
            st[_SABS + j] += c * t_abs if keep else 0.0


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

        @overload(recip, inline="always")
        def _recip(z):  # one real division instead of numba's three (CPython's complex division)
            if isinstance(z, types.Complex):
                def impl(z):
                    s = 1.0 / (z.real * z.real + z.imag * z.imag)
                    return complex(z.real * s, -z.imag * s)
                return impl
            return lambda z: 1.0 / z

        for fn in (d1_start, layer_order0, outer_order0, _d1_table, _block):
            register_jitable(fn)
        # inlined into `_block` before typing, so that its loops see constant strides and vectorise
        for fn in (outer_step, layer_step, coefficients, _tl, _layer, _layer_points, _sums):
            register_jitable(inline="always")(fn)
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
