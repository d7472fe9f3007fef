"""Quasi-static (dipole-limit) optics of small spheres, ellipsoids and coated particles.

Everything here is a pure numpy/scipy function that broadcasts over its
arguments (for example permittivities of shape ``(n_wavelength, 1)`` against
sizes of shape ``(1, n_size)``) and keeps the broadcast shape.

Conventions
-----------
* Time dependence ``exp(-i omega t)``: a passive material has ``Im(eps) >= 0``.
* ``eps`` arguments are the complex permittivities of the materials themselves
  (relative to vacuum, dimensionless), not ratios ``eps / eps_medium``;
  ``eps_medium`` may be real or complex (``Re > 0``, ``Im >= 0``), but the
  cross-sections assume a lossless medium and a real wavenumber ``k``.
* Lengths are in any one unit (callers pass nm); cross-sections come out in that
  unit squared; ``k = 2 pi n_medium / lambda`` [1/length] is the wavenumber in
  the medium.
* The polarisability ``alpha`` is in volume units [length^3]: the induced dipole
  is ``p = eps0 * eps_medium * alpha * E``. For a sphere
  ``alpha = 4 pi a^3 (eps - eps_m) / (eps + 2 eps_m)`` (Bohren & Huffman 1983,
  eq. 5.7), and ``sigma_abs = k Im(alpha)``, ``sigma_sca = k^4 |alpha|^2 / (6 pi)``
  (B&H sec. 5.2).

Corrected ("modified long-wavelength", MLWA) polarisabilities add the radiative
reaction ``i k^3 / (6 pi)`` and the dynamic depolarisation ``k^2 D_i / (4 pi a_i)``
to ``1/alpha``; see :func:`radiative_correction`.

References
----------
C. F. Bohren and D. R. Huffman, *Absorption and Scattering of Light by Small
Particles* (Wiley, 1983), chapter 5 and section 12.1 (cited as B&H).

M. Meier and A. Wokaun, Opt. Lett. 8, 581 (1983).

A. Moroz, J. Opt. Soc. Am. B 26, 517 (2009).

B. C. Carlson, Numer. Algorithms 10, 13 (1995) (symmetric elliptic integrals
R_F, R_D, R_G as implemented in ``scipy.special``).
"""

from __future__ import annotations

import numpy as np

from nanoabs._errors import (NanoabsError, _fmt, check_choice, check_flag, check_nonnegative, check_positive,
                             check_range)

__all__ = [
    "STRICT_VALIDITY",
    "CORRECTED_VALIDITY",
    "POLE_RTOL",
    "depolarization_factors",
    "spheroid_depolarization",
    "dynamic_depolarization_factors",
    "ellipsoid_volume",
    "ellipsoid_surface_area",
    "confocal_shell_axes",
    "confocal_depolarization_factors",
    "polarizability_sphere",
    "polarizability_coated_sphere",
    "polarizability_ellipsoid",
    "polarizability_from_depolarization",
    "polarizability_coated_ellipsoid",
    "radiative_correction",
    "polarizability_sphere_mlwa",
    "polarizability_coated_sphere_mlwa",
    "polarizability_ellipsoid_mlwa",
    "polarizability_coated_ellipsoid_mlwa",
    "size_parameter",
    "validity_ratio",
    "cross_sections",
    "orientation_average",
]

_AXES = ("x", "y", "z")
_TINY_EPS = 1e-100  # |eps_shell| below this is treated as exactly 0 (limit values used)

#: ``validity_ratio`` up to which the static dipole is used without reservation:
#: the largest dimension ``2 a_max`` is at most a tenth of the wavelength in the
#: medium, i.e. ``k a_max <= pi/10 ~ 0.31`` (common practice).
STRICT_VALIDITY = 1.0

#: ``validity_ratio`` up to which the corrected (MLWA) dipole is still usable for a
#: sphere: ``k a_max <= 0.5`` (about ``2 a_max <= lambda_medium / 6``). Compared
#: with Mie theory for a Drude gold-like sphere in water the MLWA absorption peak
#: is then within about 2 % in wavelength (1 % at ``k a = 0.4``, 4 % at 0.62: the
#: MLWA over-estimates the red shift) and the peak value within about 10 %;
#: beyond it the quadrupole and higher-order size terms grow quickly (see the
#: module tests). Elongated particles degrade earlier, since ``a_max`` is then
#: the long semi-axis and the size terms beyond ``k^2`` are larger.
CORRECTED_VALIDITY = 0.5 / (np.pi / 10.0)

#: Static polarisabilities are refused where the denominator of B&H eqs. 5.7, 5.32, 5.35,
#: 5.36 is below this fraction of the sum of the magnitudes of its terms: a loss-free
#: material at a pole, where rounding alone decides the value (a documented choice; 1e-12
#: is ~4500 rounding units, above the few units that eps, L and the algebra contribute).
POLE_RTOL = 1e-12


# --------------------------------------------------------------------------- #
# input checks
# --------------------------------------------------------------------------- #
def _fmt_c(z) -> str:
    z = complex(z)
    return f"{z.real:g}{z.imag:+g}j"


def _check_eps(name: str, value) -> np.ndarray:
    """Return ``value`` as a complex array; raise on NaN/inf or non-numbers (booleans and
    strings included: ``True`` or ``"-2"`` is not a permittivity)."""
    try:
        arr = None if value is None else np.asarray(value)
        if arr is not None and arr.dtype.kind == "O":
            arr = arr.astype(complex)
    except (TypeError, ValueError):
        arr = None
    if arr is None or arr.dtype.kind not in "iufc":
        raise NanoabsError(f"{name} = {_fmt(value)}: must be a (complex) number or an array of them") from None
    arr = arr.astype(complex, copy=False)
    bad = ~np.isfinite(arr)
    if np.any(bad):
        raise NanoabsError(f"{name} = {_fmt_c(arr[bad].flat[0])}: must be finite")
    return arr


def _check_eps_medium(value) -> np.ndarray:
    arr = _check_eps("eps_medium", value)
    bad = (arr.real <= 0) | (arr.imag < 0)
    if np.any(bad):
        raise NanoabsError(
            f"eps_medium = {_fmt_c(arr[bad].flat[0])}: must have real part > 0 and imaginary part >= 0"
        )
    return arr


def _check_axes(name: str, axes) -> tuple:
    try:
        a, b, c = axes
    except (TypeError, ValueError):
        raise NanoabsError(f"{name} = {axes!r}: must be three semi-axes (a, b, c)") from None
    return tuple(check_positive(f"{name}[{i}]", v) for i, v in enumerate((a, b, c)))


def _axis_index(axis) -> int:
    return _AXES.index(check_choice("axis", axis, _AXES))


def _static_ratio(num, den, eps, what: str, name: str = "eps", *, scale):
    """``num / den`` for a static polarisability; raise at a (loss-free) pole.

    ``scale`` is the sum of the magnitudes of the terms that make up ``den``. Where
    ``|den| <= POLE_RTOL * scale`` the denominator is zero to within the rounding of its
    inputs: the result (Q up to ~1e26) would be set by the last digits of eps, so it is
    refused rather than returned (the same rule for every shape and every layer).
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        out = num / den
        pole = np.abs(den) <= POLE_RTOL * scale
    _check_finite_alpha(out, pole)
    bad = pole | ~np.isfinite(out)
    if np.any(bad):
        e = np.broadcast_to(eps, bad.shape)[bad].flat[0]
        raise NanoabsError(
            f"{name} = {_fmt_c(e)}: the static {what} polarisability is singular here "
            f"(loss-free material at a dipole resonance, |denominator| <= {POLE_RTOL:g} of its terms); "
            "add loss or use the MLWA-corrected polarisability"
        )
    return out


def _corrected_ratio(num, den, correction):
    """``num / (den - num * correction)``: the MLWA form of ``alpha = num / den``.

    Written without ``1/alpha`` so that it stays finite both at the static pole
    (``den = 0``, where it equals ``-1/correction``) and where ``alpha = 0``.
    """
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        out = num / (den - num * correction)
    _check_finite_alpha(out, False)
    return out


def _check_finite_alpha(alpha, pole):
    """Raise if ``alpha`` overflowed away from a pole (sizes or permittivities out of scale)."""
    over = ~np.isfinite(alpha) & ~np.asarray(pole)
    if np.any(over):
        raise NanoabsError("polarisability: the result overflows (not finite) for some inputs; "
                           "check the units of sizes [length] and permittivities (dimensionless)")


# --------------------------------------------------------------------------- #
# geometry
# --------------------------------------------------------------------------- #
def depolarization_factors(a, b, c):
    """Static depolarisation factors of a triaxial ellipsoid.

    Parameters
    ----------
    a, b, c : float or array_like
        Semi-axes along x, y, z [length]; broadcast together.

    Returns
    -------
    L_a, L_b, L_c : ndarray or float
        Depolarisation (geometrical) factors along x, y, z [dimensionless];
        ``L_a + L_b + L_c = 1``; 1/3 each for a sphere.

    Notes
    -----
    ``L_a = (abc/2) int_0^inf ds / ((s + a^2) f(s))`` with
    ``f(s) = sqrt((s+a^2)(s+b^2)(s+c^2))`` (B&H eq. 5.33, integral form) equals
    ``(abc/3) R_D(b^2, c^2, a^2)`` with Carlson's symmetric integral ``R_D``
    (``scipy.special.elliprd``); cyclically for ``L_b``, ``L_c``. The axes are
    first scaled by the largest one (the factors depend only on ratios).

    References
    ----------
    B&H eq. 5.33; B. C. Carlson, Numer. Algorithms 10, 13 (1995) (R_D).
    """
    from scipy import special

    a = check_positive("a", a)
    b = check_positive("b", b)
    c = check_positive("c", c)
    s = np.maximum(np.maximum(a, b), c)
    a, b, c = a / s, b / s, c / s
    abc3 = a * b * c / 3.0
    a2, b2, c2 = a * a, b * b, c * c

    def factor(i):
        return abc3 * special.elliprd(*((b2, c2, a2), (c2, a2, b2), (a2, b2, c2))[i])

    # a spheroid's two equal axes share one factor: evaluate each distinct axis once
    La = factor(0)
    Lb = La if np.array_equal(*np.broadcast_arrays(a, b)) else factor(1)
    if np.array_equal(*np.broadcast_arrays(c, b)):
        Lc = Lb
    elif np.array_equal(*np.broadcast_arrays(c, a)):
        Lc = La
    else:
        Lc = factor(2)
    return La, Lb, Lc


def spheroid_depolarization(aspect_ratio):
    """Depolarisation factor of a spheroid along its symmetry axis (closed form).

    Parameters
    ----------
    aspect_ratio : float or array_like
        Symmetry semi-axis divided by equatorial semi-axis [dimensionless], > 0:
        > 1 prolate (rod), < 1 oblate (disc), = 1 sphere.

    Returns
    -------
    L : ndarray or float
        Factor along the symmetry axis [dimensionless]; each equatorial factor is
        ``(1 - L) / 2``. Tends to 0 for long needles and to 1 for flat discs.

    Notes
    -----
    With ``r`` the aspect ratio:

    * prolate, ``e^2 = 1 - 1/r^2``:
      ``L = (1 - e^2)/e^2 * (artanh(e)/e - 1)`` (B&H's prolate ``L_1``),
    * oblate, ``e^2 = 1 - r^2``:
      ``L = (1 - sqrt(1 - e^2) arcsin(e)/e) / e^2``, which is ``1 - 2 L_1`` with
      B&H's equatorial oblate factor ``L_1``, written for the symmetry axis.

    Both forms are 0/0 at ``r = 1``. For ``e^2 < 0.1`` their Taylor series are
    used instead (30 terms, error < 1e-30): prolate
    ``L = (1 - e^2) sum_n e^(2n) / (2n + 3)``, oblate
    ``L = sum_n d_n e^(2n) / (2n + 3)`` with ``d_0 = 1``,
    ``d_(n+1) = d_n (2n + 2)/(2n + 3)`` (series of ``arcsin(e)/(e sqrt(1-e^2))``).
    ``artanh(e)`` is evaluated as ``ln(1 + e) + ln(r)`` and ``arcsin(e)`` as
    ``atan2(e, r)`` to stay accurate for extreme aspect ratios.

    References
    ----------
    B&H, closed forms following eq. 5.33 (prolate and oblate spheroids).
    """
    r = check_positive("aspect_ratio", aspect_ratio)
    prolate = r >= 1.0
    with np.errstate(divide="ignore", invalid="ignore"):
        e2 = np.where(prolate, 1.0 - 1.0 / r**2, 1.0 - r**2)
        e = np.sqrt(e2)
        closed_pro = (1.0 - e2) / e2 * ((np.log1p(e) + np.log(r)) / e - 1.0)
        closed_obl = (1.0 - r * np.arctan2(e, r) / e) / e2
    # Taylor series near the sphere
    n = np.arange(30)
    powers = np.asarray(e2)[..., None] ** n
    ser_pro = (1.0 - e2) * np.sum(powers / (2 * n + 3), axis=-1)
    d = np.cumprod(np.concatenate(([1.0], (2 * n[:-1] + 2) / (2 * n[:-1] + 3))))
    ser_obl = np.sum(powers * d / (2 * n + 3), axis=-1)
    small = e2 < 0.1
    out = np.where(
        prolate,
        np.where(small, ser_pro, closed_pro),
        np.where(small, ser_obl, closed_obl),
    )
    return out[()] if out.ndim == 0 else out


def dynamic_depolarization_factors(a, b, c, *, depolarization=None):
    """Dynamic depolarisation factors ``D_i`` of a triaxial ellipsoid (MLWA term).

    Parameters
    ----------
    a, b, c : float or array_like
        Semi-axes along x, y, z [length].
    depolarization : tuple of 3 array_like, optional
        The static factors ``depolarization_factors(a, b, c)`` when already
        computed (saves recomputing them).

    Returns
    -------
    D_a, D_b, D_c : ndarray or float
        Dimensionless factors such that the dynamic depolarisation field along
        axis ``i`` is ``k^2 D_i p / (4 pi eps0 eps_m a_i)``; ``D = 1`` for a sphere.

    Notes
    -----
    Following the argument of Meier & Wokaun (1983) for the sphere, the
    order-``k^2`` part of the retarded field of a uniformly polarised particle
    at its centre is ``(k^2 / 8 pi) int dV (P + (P.n) n) / r``. Evaluating the
    integral over an ellipsoid in closed form (Gaussian-integral representation
    of ``1 / (n.Q n)``) gives

    ``D_i = (3 a_i / 4) [R_F(a^2, b^2, c^2) + a_i^2 L_i / (a b c)]``

    with Carlson's ``R_F`` and the static factor ``L_i``. For a prolate spheroid
    along its long semi-axis this equals
    ``D = (3/4) [1 + (1 + e^2) L / (1 - e^2)]`` (Moroz 2009, from memory); the
    tests check both that form and a direct numerical quadrature.

    References
    ----------
    M. Meier and A. Wokaun, Opt. Lett. 8, 581 (1983) (radiation-corrected
    field of a sphere); A. Moroz, J. Opt. Soc. Am. B 26, 517 (2009) (spheroids).
    """
    from scipy import special

    La, Lb, Lc = depolarization_factors(a, b, c) if depolarization is None else depolarization
    a = np.asarray(a, dtype=float)
    b = np.asarray(b, dtype=float)
    c = np.asarray(c, dtype=float)
    s = np.maximum(np.maximum(a, b), c)
    a, b, c = a / s, b / s, c / s
    rf = special.elliprf(a * a, b * b, c * c)
    abc = a * b * c
    return tuple(0.75 * x * (rf + x * x * L / abc) for x, L in ((a, La), (b, Lb), (c, Lc)))


def ellipsoid_volume(a, b, c):
    """Volume of an ellipsoid.

    Parameters
    ----------
    a, b, c : float or array_like
        Semi-axes [length].

    Returns
    -------
    V : ndarray or float
        ``4 pi a b c / 3`` [length^3].

    References
    ----------
    Common practice (elementary geometry); B&H eq. 5.32 uses it as ``v``.
    """
    a = check_positive("a", a)
    b = check_positive("b", b)
    c = check_positive("c", c)
    return 4.0 * np.pi * a * b * c / 3.0


def ellipsoid_surface_area(a, b, c):
    """Surface area of a triaxial ellipsoid.

    Parameters
    ----------
    a, b, c : float or array_like
        Semi-axes [length].

    Returns
    -------
    S : ndarray or float
        Surface area [length^2].

    Notes
    -----
    ``S = 4 pi R_G(a^2 b^2, b^2 c^2, c^2 a^2) = 4 pi a b c R_G(1/a^2, 1/b^2, 1/c^2)``
    (``R_G`` is homogeneous of degree 1/2). Checked in the tests against
    ``4 pi r^2`` and the closed forms for prolate and oblate spheroids.

    References
    ----------
    NIST Digital Library of Mathematical Functions, sec. 19.33 (surface area of
    a triaxial ellipsoid via R_G; equation number from memory: 19.33.1).
    """
    from scipy import special

    a = check_positive("a", a)
    b = check_positive("b", b)
    c = check_positive("c", c)
    s = np.maximum(np.maximum(a, b), c)
    an, bn, cn = a / s, b / s, c / s
    return 4.0 * np.pi * s**2 * an * bn * cn * special.elliprg(an**-2, bn**-2, cn**-2)


def confocal_shell_axes(core_axes, *, thickness=None, axis="x", t_conf=None):
    """Outer semi-axes of a shell confocal with an ellipsoidal core.

    Give exactly one of ``thickness`` (shell thickness measured along ``axis``)
    or ``t_conf`` (the confocal parameter).

    Parameters
    ----------
    core_axes : tuple of 3 float or array_like
        Core semi-axes ``(a1, b1, c1)`` [length].
    thickness : float or array_like, optional
        Shell thickness along ``axis`` [length], >= 0.
    axis : {'x', 'y', 'z'}, optional
        Axis along which ``thickness`` is measured (default 'x').
    t_conf : float or array_like, optional
        Confocal parameter [length^2], >= 0.

    Returns
    -------
    a2, b2, c2 : ndarray or float
        Outer semi-axes ``sqrt(a1_i^2 + t_conf)`` [length]. The shell is thickest
        along the shortest axis: a confocal shell is not of uniform thickness.

    References
    ----------
    B&H text at eq. 5.35 (confocal coated ellipsoid, outer surface from the confocal family).
    """
    core = _check_axes("core_axes", core_axes)
    if (thickness is None) == (t_conf is None):
        raise NanoabsError("thickness / t_conf: give exactly one of them (got "
                           f"{'both' if thickness is not None else 'neither'})")
    if thickness is not None:
        d = check_nonnegative("thickness", thickness)
        a1 = core[_axis_index(axis)]
        t = d * (2.0 * a1 + d)
    else:
        t = check_nonnegative("t_conf", t_conf)
    return tuple(np.sqrt(x * x + t) for x in core)


def confocal_depolarization_factors(core_axes, shell_axes, *, rtol=1e-6):
    """Depolarisation factors of the core and of the outer surface of a confocal shell.

    Parameters
    ----------
    core_axes, shell_axes : tuple of 3 float or array_like
        Semi-axes ``(a1, b1, c1)`` and ``(a2, b2, c2)`` [length].
    rtol : float, optional
        Allowed relative mismatch of ``a2_i^2 - a1_i^2`` between axes (relative to
        ``max a2_i^2``); default 1e-6.

    Returns
    -------
    L_core, L_shell : tuple of 3 ndarray
        ``depolarization_factors`` of the core and of the outer ellipsoid.

    Raises
    ------
    NanoabsError
        If the shell is not confocal with the core or does not enclose it.

    References
    ----------
    B&H eqs. 5.33 and 5.35.
    """
    core = _check_axes("core_axes", core_axes)
    shell = _check_axes("shell_axes", shell_axes)
    t = np.broadcast_arrays(*[s * s - c * c for s, c in zip(shell, core)])
    scale = np.maximum(np.maximum(shell[0], shell[1]), shell[2]) ** 2
    mismatch = np.maximum(np.abs(t[0] - t[1]), np.abs(t[1] - t[2])) / scale
    bad = (mismatch > rtol) | (np.minimum(np.minimum(t[0], t[1]), t[2]) < -rtol * scale)
    if np.any(bad):
        j = np.argmax(np.broadcast_to(bad, t[0].shape))
        tv = ", ".join(f"{x.flat[j]:g}" for x in t)
        raise NanoabsError(
            f"shell_axes: a2^2 - a1^2 = ({tv}) along x, y, z must be equal and >= 0 "
            "(confocal shell enclosing the core); build it with confocal_shell_axes"
        )
    return depolarization_factors(*core), depolarization_factors(*shell)


# --------------------------------------------------------------------------- #
# static polarisabilities: (numerator, denominator) pairs
# --------------------------------------------------------------------------- #
def _sphere_nd(eps, eps_medium, radius):
    eps = _check_eps("eps", eps)
    em = _check_eps_medium(eps_medium)
    r = check_positive("radius", radius)
    with np.errstate(over="ignore", invalid="ignore"):  # an overflow is reported by the callers
        num = 4.0 * np.pi * r**3 * (eps - em)
    return num, eps + 2.0 * em, eps, np.abs(eps) + 2.0 * np.abs(em)


def _depol_nd(eps, eps_medium, volume, L):
    eps = _check_eps("eps", eps)
    em = _check_eps_medium(eps_medium)
    return volume * (eps - em), em + L * (eps - em), eps, (1 - L) * np.abs(em) + L * np.abs(eps)


def _coated_sphere_nd(eps_core, eps_shell, eps_medium, core_radius, outer_radius):
    e1 = _check_eps("eps_core", eps_core)
    e2 = _check_eps("eps_shell", eps_shell)
    em = _check_eps_medium(eps_medium)
    r1 = check_positive("core_radius", core_radius)
    r2 = check_positive("outer_radius", outer_radius)
    if np.any(r1 > r2):
        bad = np.broadcast_arrays(r1, r2)
        i = np.argmax(bad[0] > bad[1])
        raise NanoabsError(
            f"core_radius = {bad[0].flat[i]:g}: must not exceed outer_radius = {bad[1].flat[i]:g}"
        )
    f = (r1 / r2) ** 3
    # B&H eq. 5.36 regrouped as num = e2 P - em Q, den = e2 P + 2 em Q (i.e. a sphere of
    # eps_eff = e2 P / Q) so that no O(1) terms cancel when e2 -> 0 or f -> 1.
    P = e1 * (1 + 2 * f) + 2 * e2 * (1 - f)
    Q = e1 * (1 - f) + e2 * (2 + f)
    num = e2 * P - em * Q
    den = e2 * P + 2 * em * Q
    # eps_shell = 0 (|eps_shell| < 1e-100 is taken as 0, which also avoids underflow)
    # with eps_core = 0 or f = 1 makes num = den = 0 (the determinant of
    # this Moebius map in eps_core is 27 f eps_shell^2 eps_m): use the limit instead,
    # the core sphere if there is no shell (f = 1), else the eps = 0 sphere.
    enz = np.abs(e2) < _TINY_EPS
    a1, a2, am = np.abs(e1), np.abs(e2), np.abs(em)  # scale: magnitudes of every term of den
    scale = a2 * (a1 * (1 + 2 * f) + 2 * a2 * (1 - f)) + 2 * am * (a1 * (1 - f) + a2 * (2 + f))
    if np.any(enz):
        num = np.where(enz, np.where(f == 1, e1 - em, -em), num)
        den = np.where(enz, np.where(f == 1, e1 + 2 * em, 2 * em), den)
        scale = np.where(enz, np.where(f == 1, np.abs(e1) + 2 * np.abs(em), 2 * np.abs(em)), scale)
    return 4.0 * np.pi * r2**3 * num, den, e1, scale


def _coated_ellipsoid_nd(eps_core, eps_shell, eps_medium, core_axes, shell_axes, i):
    e1 = _check_eps("eps_core", eps_core)
    e2 = _check_eps("eps_shell", eps_shell)
    em = _check_eps_medium(eps_medium)
    L_in, L_out = confocal_depolarization_factors(core_axes, shell_axes)
    L1, L2 = L_in[i], L_out[i]
    core = [np.asarray(x, float) for x in core_axes]
    shell = [np.asarray(x, float) for x in shell_axes]
    f = (core[0] * core[1] * core[2]) / (shell[0] * shell[1] * shell[2])
    v = 4.0 * np.pi * shell[0] * shell[1] * shell[2] / 3.0
    h = L1 - f * L2  # = (a1 b1 c1 / 2) int_0^t ds / ((s + a1_i^2) f1(s)) >= 0
    # B&H eq. 5.35 regrouped: with g = e2 + (e1 - e2) h and P = g + f (e1 - e2),
    # num = e2 P - em g and den = em g (1 - L2) + L2 e2 P (an outer ellipsoid of
    # eps_eff = e2 P / g); written so that no O(1) terms cancel when e2 -> 0 or t -> 0.
    g = e2 * (1 - h) + e1 * h
    P = e1 * (h + f) + e2 * (1 - h - f)
    num = e2 * P - em * g
    den = em * g * (1 - L2) + L2 * e2 * P
    # eps_shell = 0 (|eps_shell| < 1e-100 is taken as 0, which also avoids underflow)
    # with eps_core = 0 or t = 0 makes num = den = 0 (the determinant of
    # this Moebius map in eps_core is f eps_shell^2 eps_m): use the limit instead, the
    # core ellipsoid if there is no shell (t = 0), else the eps = 0 outer ellipsoid.
    enz = np.abs(e2) < _TINY_EPS
    a1, a2, am = np.abs(e1), np.abs(e2), np.abs(em)  # scale: magnitudes of every term of den
    scale = am * (1 - L2) * (a2 * (1 - h) + a1 * h) + L2 * a2 * (a1 * (h + f) + a2 * np.abs(1 - h - f))
    if np.any(enz):
        num = np.where(enz, np.where(h == 0, e1 - em, -em), num)
        den = np.where(enz, np.where(h == 0, em + L1 * (e1 - em), em * (1 - L2)), den)
        scale = np.where(enz, np.where(h == 0, (1 - L1) * np.abs(em) + L1 * np.abs(e1),
                                       np.abs(em) * (1 - L2)), scale)
    return v * num, den, e1, scale


def polarizability_sphere(eps, eps_medium, radius):
    """Static (Clausius-Mossotti) polarisability of a homogeneous sphere.

    Parameters
    ----------
    eps : complex or array_like
        Particle permittivity [dimensionless].
    eps_medium : float, complex or array_like
        Medium permittivity [dimensionless].
    radius : float or array_like
        Sphere radius [length].

    Returns
    -------
    alpha : ndarray or complex
        ``4 pi a^3 (eps - eps_m) / (eps + 2 eps_m)`` [length^3]
        (``p = eps0 eps_m alpha E``).

    Raises
    ------
    NanoabsError
        At the exact pole ``eps = -2 eps_m`` (loss-free material), where the
        static result is infinite.

    References
    ----------
    B&H eq. 5.7.
    """
    num, den, e, scale = _sphere_nd(eps, eps_medium, radius)
    return _static_ratio(num, den, e, "sphere", scale=scale)


def polarizability_coated_sphere(eps_core, eps_shell, eps_medium, core_radius, outer_radius):
    """Static polarisability of a concentric coated sphere.

    Parameters
    ----------
    eps_core, eps_shell : complex or array_like
        Core and shell permittivities [dimensionless].
    eps_medium : float, complex or array_like
        Medium permittivity [dimensionless].
    core_radius, outer_radius : float or array_like
        Core radius and outer (shell) radius [length]; ``core_radius <= outer_radius``.

    Returns
    -------
    alpha : ndarray or complex
        Polarisability [length^3], ``4 pi b^3 N / D`` with ``f = (a/b)^3``,
        ``N = (e2 - em)(e1 + 2 e2) + f (e1 - e2)(em + 2 e2)``,
        ``D = (e2 + 2 em)(e1 + 2 e2) + f (2 e2 - 2 em)(e1 - e2)``.

    Raises
    ------
    NanoabsError
        At an exact pole (loss-free materials at a resonance).

    References
    ----------
    B&H eq. 5.36.
    """
    num, den, e, scale = _coated_sphere_nd(eps_core, eps_shell, eps_medium, core_radius, outer_radius)
    return _static_ratio(num, den, e, "coated-sphere", "eps_core", scale=scale)


def polarizability_from_depolarization(eps, eps_medium, volume, depolarization):
    """Static polarisability of an ellipsoid along a principal axis, from its factor.

    Parameters
    ----------
    eps : complex or array_like
        Particle permittivity [dimensionless].
    eps_medium : float, complex or array_like
        Medium permittivity [dimensionless].
    volume : float or array_like
        Particle volume [length^3].
    depolarization : float or array_like
        Depolarisation factor along the field, 0 to 1 [dimensionless].

    Returns
    -------
    alpha : ndarray or complex
        ``V (eps - eps_m) / (eps_m + L (eps - eps_m))`` [length^3].

    References
    ----------
    B&H eq. 5.32.
    """
    v = check_positive("volume", volume)
    L = check_range("depolarization", depolarization, 0.0, 1.0)
    num, den, e, scale = _depol_nd(eps, eps_medium, v, L)
    return _static_ratio(num, den, e, "ellipsoid", scale=scale)


def polarizability_ellipsoid(eps, eps_medium, a, b, c, *, axis="x"):
    """Static polarisability of a homogeneous ellipsoid along a principal axis.

    Parameters
    ----------
    eps : complex or array_like
        Particle permittivity [dimensionless].
    eps_medium : float, complex or array_like
        Medium permittivity [dimensionless].
    a, b, c : float or array_like
        Semi-axes along x, y, z [length].
    axis : {'x', 'y', 'z'}, optional
        Direction of the applied field (default 'x').

    Returns
    -------
    alpha : ndarray or complex
        ``4 pi a b c (eps - eps_m) / (3 eps_m + 3 L_i (eps - eps_m))`` [length^3].

    References
    ----------
    B&H eq. 5.32.
    """
    i = _axis_index(axis)
    L = depolarization_factors(a, b, c)[i]
    num, den, e, scale = _depol_nd(eps, eps_medium, ellipsoid_volume(a, b, c), L)
    return _static_ratio(num, den, e, "ellipsoid", scale=scale)


def polarizability_coated_ellipsoid(eps_core, eps_shell, eps_medium, core_axes, shell_axes, *, axis="x"):
    """Static polarisability of a confocal coated ellipsoid along a principal axis.

    Parameters
    ----------
    eps_core, eps_shell : complex or array_like
        Core and shell permittivities [dimensionless].
    eps_medium : float, complex or array_like
        Medium permittivity [dimensionless].
    core_axes, shell_axes : tuple of 3 float or array_like
        Core and outer semi-axes along x, y, z [length]; the outer surface must
        be confocal with the core (see :func:`confocal_shell_axes`).
    axis : {'x', 'y', 'z'}, optional
        Direction of the applied field (default 'x').

    Returns
    -------
    alpha : ndarray or complex
        ``v N / D`` [length^3] with ``v`` the outer volume, ``f`` the core volume
        fraction, ``L1``, ``L2`` the core and outer factors along ``axis``,
        ``g = e2 + (e1 - e2)(L1 - f L2)``, ``N = (e2 - em) g + f e2 (e1 - e2)``,
        ``D = g (em + (e2 - em) L2) + f L2 e2 (e1 - e2)``.

    References
    ----------
    B&H eq. 5.35.
    """
    i = _axis_index(axis)
    num, den, e, scale = _coated_ellipsoid_nd(eps_core, eps_shell, eps_medium, core_axes, shell_axes, i)
    return _static_ratio(num, den, e, "coated-ellipsoid", "eps_core", scale=scale)


# --------------------------------------------------------------------------- #
# corrected (MLWA) polarisabilities
# --------------------------------------------------------------------------- #
def _correction_term(k, semi_axis, dynamic_factor):
    k = check_positive("k", k)
    a = check_positive("semi_axis", semi_axis)
    return k**2 * dynamic_factor / (4.0 * np.pi * a) + 1j * k**3 / (6.0 * np.pi)


def radiative_correction(alpha_static, k, *, semi_axis, dynamic_factor=1.0):
    """Apply the modified long-wavelength approximation (MLWA) to a static polarisability.

    Parameters
    ----------
    alpha_static : complex or array_like
        Static polarisability [length^3] (finite).
    k : float or array_like
        Wavenumber in the medium, ``2 pi n_m / lambda`` [1/length].
    semi_axis : float or array_like
        Semi-axis of the (outer) particle along the field [length].
    dynamic_factor : float or array_like, optional
        Dynamic depolarisation factor ``D`` along the field (1 for a sphere; see
        :func:`dynamic_depolarization_factors`).

    Returns
    -------
    alpha : ndarray or complex
        ``alpha_s / (1 - alpha_s (k^2 D / (4 pi a) + i k^3 / (6 pi)))`` [length^3].

    Notes
    -----
    Meier & Wokaun (1983) write, in Gaussian units, the field acting on a sphere
    as ``E_0 + (k^2/a + 2 i k^3/3) p``; with ``p = eps0 eps_m alpha E`` (our
    volume units) the same field is ``E_0 + (k^2/(4 pi a) + i k^3/(6 pi)) alpha E``,
    i.e. ``1/alpha = 1/alpha_s - k^2 D/(4 pi a) - i k^3/(6 pi)`` with ``D = 1``.
    The radiative-reaction part makes ``alpha`` obey the optical theorem:
    ``k Im(alpha) >= k^4 |alpha|^2 / (6 pi)`` whenever ``Im(alpha_s) >= 0``.

    References
    ----------
    M. Meier and A. Wokaun, Opt. Lett. 8, 581 (1983); A. Moroz, J. Opt. Soc. Am.
    B 26, 517 (2009) (``D`` for spheroids).
    """
    alpha_s = _check_eps("alpha_static", alpha_static)
    return _corrected_ratio(alpha_s, 1.0, _correction_term(k, semi_axis, dynamic_factor))


def polarizability_sphere_mlwa(eps, eps_medium, radius, k):
    """MLWA-corrected polarisability of a sphere (Meier-Wokaun).

    Parameters
    ----------
    eps : complex or array_like
        Particle permittivity [dimensionless].
    eps_medium : float, complex or array_like
        Medium permittivity [dimensionless].
    radius : float or array_like
        Radius [length].
    k : float or array_like
        Wavenumber in the medium [1/length].

    Returns
    -------
    alpha : ndarray or complex
        ``alpha_s / (1 - k^2 alpha_s / (4 pi a) - i k^3 alpha_s / (6 pi))``
        [length^3], with ``alpha_s`` from :func:`polarizability_sphere`. Finite
        for a loss-free material at the static pole (radiative damping).

    Notes
    -----
    Valid for ``k a`` up to about 0.5 (``validity_ratio <= CORRECTED_VALIDITY``).
    It reproduces the red shift and broadening of the dipole resonance with
    size; it does not contain the quadrupole.

    References
    ----------
    M. Meier and A. Wokaun, Opt. Lett. 8, 581 (1983); B&H eq. 5.7.
    """
    num, den, _, _ = _sphere_nd(eps, eps_medium, radius)
    return _corrected_ratio(num, den, _correction_term(k, radius, 1.0))


def polarizability_coated_sphere_mlwa(eps_core, eps_shell, eps_medium, core_radius, outer_radius, k):
    """MLWA-corrected polarisability of a coated sphere (approximation).

    Parameters
    ----------
    eps_core, eps_shell : complex or array_like
        Core and shell permittivities [dimensionless].
    eps_medium : float, complex or array_like
        Medium permittivity [dimensionless].
    core_radius, outer_radius : float or array_like
        Radii [length].
    k : float or array_like
        Wavenumber in the medium [1/length].

    Returns
    -------
    alpha : ndarray or complex
        B&H eq. 5.36 corrected as in :func:`radiative_correction` with the outer
        radius and ``D = 1`` [length^3].

    Notes
    -----
    The radiative reaction is exact for any dipole; the dynamic-depolarisation
    term with the outer radius is an approximation (the polarisation of a
    coated particle is not uniform).

    References
    ----------
    B&H eq. 5.36; M. Meier and A. Wokaun, Opt. Lett. 8, 581 (1983).
    """
    num, den, _, _ = _coated_sphere_nd(eps_core, eps_shell, eps_medium, core_radius, outer_radius)
    return _corrected_ratio(num, den, _correction_term(k, outer_radius, 1.0))


def polarizability_ellipsoid_mlwa(eps, eps_medium, a, b, c, k, *, axis="x"):
    """MLWA-corrected polarisability of an ellipsoid along a principal axis.

    Parameters
    ----------
    eps : complex or array_like
        Particle permittivity [dimensionless].
    eps_medium : float, complex or array_like
        Medium permittivity [dimensionless].
    a, b, c : float or array_like
        Semi-axes along x, y, z [length].
    k : float or array_like
        Wavenumber in the medium [1/length].
    axis : {'x', 'y', 'z'}, optional
        Field direction (default 'x').

    Returns
    -------
    alpha : ndarray or complex
        ``1/alpha = 1/alpha_s - k^2 D_i / (4 pi a_i) - i k^3 / (6 pi)`` [length^3],
        ``alpha_s`` from B&H eq. 5.32, ``a_i`` the semi-axis along the field and
        ``D_i`` from :func:`dynamic_depolarization_factors`.

    Notes
    -----
    The dynamic term is the centre field of a uniformly polarised ellipsoid
    (Meier-Wokaun argument); for spheroids it is the form of Moroz (2009). Use
    only while the largest semi-axis satisfies ``k a_max <~ 0.5``; for rods
    along the long axis the error grows earlier (the size terms beyond ``k^2``
    are larger for elongated shapes).

    References
    ----------
    B&H eq. 5.32; M. Meier and A. Wokaun, Opt. Lett. 8, 581 (1983); A. Moroz,
    J. Opt. Soc. Am. B 26, 517 (2009).
    """
    i = _axis_index(axis)
    L = depolarization_factors(a, b, c)[i]
    D = dynamic_depolarization_factors(a, b, c)[i]
    num, den, _, _ = _depol_nd(eps, eps_medium, ellipsoid_volume(a, b, c), L)
    return _corrected_ratio(num, den, _correction_term(k, (a, b, c)[i], D))


def polarizability_coated_ellipsoid_mlwa(eps_core, eps_shell, eps_medium, core_axes, shell_axes, k, *, axis="x"):
    """MLWA-corrected polarisability of a confocal coated ellipsoid (approximation).

    Parameters
    ----------
    eps_core, eps_shell : complex or array_like
        Core and shell permittivities [dimensionless].
    eps_medium : float, complex or array_like
        Medium permittivity [dimensionless].
    core_axes, shell_axes : tuple of 3 float or array_like
        Core and outer (confocal) semi-axes [length].
    k : float or array_like
        Wavenumber in the medium [1/length].
    axis : {'x', 'y', 'z'}, optional
        Field direction (default 'x').

    Returns
    -------
    alpha : ndarray or complex
        B&H eq. 5.35 corrected as in :func:`radiative_correction` with the outer
        semi-axis along the field and the outer ellipsoid's ``D_i`` [length^3].

    Notes
    -----
    Approximation: the dynamic term assumes uniform polarisation of the outer
    ellipsoid.

    References
    ----------
    B&H eq. 5.35; M. Meier and A. Wokaun, Opt. Lett. 8, 581 (1983); A. Moroz,
    J. Opt. Soc. Am. B 26, 517 (2009).
    """
    i = _axis_index(axis)
    num, den, _, _ = _coated_ellipsoid_nd(eps_core, eps_shell, eps_medium, core_axes, shell_axes, i)
    D = dynamic_depolarization_factors(*shell_axes)[i]
    return _corrected_ratio(num, den, _correction_term(k, shell_axes[i], D))


# --------------------------------------------------------------------------- #
# validity and cross-sections
# --------------------------------------------------------------------------- #
def size_parameter(semi_axes, wavelength, *, n_medium=1.0):
    """Size parameter ``k a_max`` of the largest semi-axis.

    Parameters
    ----------
    semi_axes : float, array_like or tuple of them
        A radius, or a tuple ``(a, b, c)`` of semi-axes [length].
    wavelength : float or array_like
        Vacuum wavelength [length].
    n_medium : float or array_like, optional
        Refractive index of the medium (default 1).

    Returns
    -------
    x : ndarray or float
        ``2 pi n_medium a_max / wavelength`` [dimensionless].

    References
    ----------
    B&H ch. 4 (size parameter ``x = k a``).
    """
    axes = semi_axes if isinstance(semi_axes, tuple) else (semi_axes,)
    a_max = check_positive("semi_axes[0]", axes[0])
    for j, x in enumerate(axes[1:], 1):
        a_max = np.maximum(a_max, check_positive(f"semi_axes[{j}]", x))
    lam = check_positive("wavelength", wavelength)
    n = check_positive("n_medium", n_medium)
    return 2.0 * np.pi * n * a_max / lam


def validity_ratio(semi_axes, wavelength, *, n_medium=1.0):
    """Largest dimension relative to a tenth of the wavelength in the medium.

    Parameters
    ----------
    semi_axes : float, array_like or tuple of them
        A radius, or a tuple ``(a, b, c)`` of semi-axes [length].
    wavelength : float or array_like
        Vacuum wavelength [length].
    n_medium : float or array_like, optional
        Refractive index of the medium (default 1).

    Returns
    -------
    ratio : ndarray or float
        ``2 a_max / (lambda / (10 n_medium)) = k a_max / (pi/10)`` [dimensionless].
        ``<= STRICT_VALIDITY`` (1): static dipole regime; up to
        ``CORRECTED_VALIDITY`` (about 1.6, ``k a_max = 0.5``): use the MLWA
        polarisabilities; beyond: outside the dipole limit, use Mie theory (or a
        full-wave method for non-spheres); callers should warn.

    References
    ----------
    Common practice (the ``lambda/10`` rule); M. Meier and A. Wokaun,
    Opt. Lett. 8, 581 (1983) for the corrected range.
    """
    return size_parameter(semi_axes, wavelength, n_medium=n_medium) / (np.pi / 10.0)


def cross_sections(alpha, k, *, corrected=False):
    """Absorption, scattering and extinction cross-sections of a dipole.

    Parameters
    ----------
    alpha : complex or array_like
        Polarisability [length^3] (``p = eps0 eps_m alpha E``).
    k : float or array_like
        Wavenumber in the (lossless) medium [1/length].
    corrected : bool, optional
        False (default) for a static polarisability, True for an MLWA-corrected
        one (which already contains the radiative reaction).

    Returns
    -------
    sigma_abs, sigma_sca, sigma_ext : ndarray or float
        Cross-sections [length^2]. Always ``sigma_sca = k^4 |alpha|^2 / (6 pi)``.
        Static: ``sigma_abs = k Im(alpha)``, ``sigma_ext = sigma_abs + sigma_sca``
        (B&H sec. 5.2). Corrected: ``sigma_ext = k Im(alpha)`` (optical
        theorem) and ``sigma_abs = sigma_ext - sigma_sca``, which equals
        ``k |alpha|^2 (-Im(1/alpha_s)) >= 0`` for a passive particle.
        In both cases a negative ``sigma_abs`` no larger in magnitude than 16
        machine epsilons times ``k |alpha|`` (the rounding level of
        ``k Im(alpha)``) is returned as 0, so a passive particle never gets a
        negative value from rounding; larger negative values (gain media,
        ``Im(eps) < 0``) are kept.

    References
    ----------
    B&H sec. 5.2 (dipole cross-sections) and ch. 3 (optical theorem; from memory).
    """
    alpha = _check_eps("alpha", alpha)
    k = check_positive("k", k)
    corrected = check_flag("corrected", corrected)
    sca = k**4 * np.abs(alpha) ** 2 / (6.0 * np.pi)
    im = k * alpha.imag
    absn = im if not corrected else im - sca
    noise = 16.0 * np.finfo(float).eps * k * np.abs(alpha)
    absn = np.where((absn < 0) & (absn >= -noise), 0.0, absn)
    absn = absn[()] if absn.ndim == 0 else absn
    ext = absn + sca if not corrected else im
    return absn, sca, ext


def orientation_average(sections_x, sections_y, sections_z):
    """Average over random orientation of the cross-sections for the three principal axes.

    Parameters
    ----------
    sections_x, sections_y, sections_z : tuple of ndarray
        ``(sigma_abs, sigma_sca, sigma_ext)`` from :func:`cross_sections` for
        the field along x, y and z [length^2].

    Returns
    -------
    sigma_abs, sigma_sca, sigma_ext : ndarray or float
        Orientation-averaged cross-sections [length^2].

    Notes
    -----
    In the dipole limit the polarisability tensor is diagonal in the principal
    frame, so for a field along the unit vector ``e`` each cross-section is
    ``sum_i e_i^2 sigma_i`` (no cross terms, also for ``|alpha . e|^2``).
    Averaging over random orientations, ``<e_i^2> = 1/3``, gives the arithmetic
    mean of the three principal values.

    References
    ----------
    B&H ch. 5 (ellipsoids; section number from memory: 5.3); common practice.
    """
    return tuple((x + y + z) / 3.0 for x, y, z in zip(sections_x, sections_y, sections_z))
