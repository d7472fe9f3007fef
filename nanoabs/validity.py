"""Cautions: one structured form for every validity, data-range and plausibility warning.

Solvers, environments, materials and the hot-carrier estimate report what a
user should know about a result as :class:`Caution` objects: a short code, a
one-line message and, where it applies, the wavelength range affected. The
same objects feed ``metadata["cautions"]`` (as dicts), ``metadata["warnings"]``
(their messages, as before), the CLI's ``warning:`` lines, ``warnings.warn``
with :class:`NanoabsWarning`, and the validity flags of ranked designs.

Codes in use
------------
``size-beyond-method``   the particle is larger than the method's validity range
``medium-absorbs``       a weakly absorbing host treated as lossless
``damping-unavailable``  surface damping not applied to a metal part
``damping-clipped``      surface-damped ε″ clipped at 0
``non-finite``           NaN or infinite cross-sections
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np

__all__ = ["Caution", "NanoabsWarning", "emit", "emit_messages", "size_check"]


class NanoabsWarning(UserWarning):
    """Category of every warning nanoabs issues about a result (filter it with ``warnings``)."""


@dataclass(frozen=True)
class Caution:
    """One thing a user should know about a result.

    Parameters
    ----------
    code : str
        Short machine-readable code (see the module docstring).
    message : str
        One line for a person.
    wavelength_nm : (float, float) or None
        Range of vacuum wavelengths affected [nm], or None when not wavelength-specific.
    """

    code: str
    message: str
    wavelength_nm: tuple | None = None

    def to_dict(self) -> dict:
        """JSON-ready form for ``metadata["cautions"]`` (wavelengths [nm] as a 2-list)."""
        d = {"code": self.code, "message": self.message}
        if self.wavelength_nm is not None:
            d["wavelength_nm"] = [float(self.wavelength_nm[0]), float(self.wavelength_nm[1])]
        return d


def emit(cautions, *, stacklevel: int = 3) -> None:
    """Issue each caution once through :func:`warnings.warn` as a :class:`NanoabsWarning`.

    Parameters
    ----------
    cautions : iterable of Caution
        The cautions to issue (their ``message`` is the warning text).
    stacklevel : int, keyword-only
        Passed to :func:`warnings.warn`: 3 points at the caller of the function that
        calls ``emit``.
    """
    for c in cautions:
        warnings.warn(c.message, NanoabsWarning, stacklevel=stacklevel)


def emit_messages(messages, *, stacklevel: int = 3) -> None:
    """Issue already-collected caution messages (e.g. the collapsed list of a sweep) as warnings.

    Parameters
    ----------
    messages : iterable of str
        One line each.
    stacklevel : int
        Passed to :func:`warnings.warn` (3: the caller of the function that emits).
    """
    for m in messages:
        warnings.warn(m, NanoabsWarning, stacklevel=stacklevel)


def size_check(method: str, semi_axes_nm, wavelength_nm, n_medium, limit_ka: float,
               advice: str) -> list:
    """Caution when ``k a_max`` of the largest particle exceeds a method's validity limit.

    Parameters
    ----------
    method : str
        Name of the method, for the message.
    semi_axes_nm : tuple of array_like
        Outer semi-axes (or one radius) [nm]; arrays are a family of sizes, and the
        largest particle at each wavelength decides (the last axis is the wavelength
        axis only when the geometry varies with wavelength).
    wavelength_nm : (W,) ndarray
        Vacuum wavelengths [nm].
    n_medium : (W,) ndarray
        Real refractive index of the host [1].
    limit_ka : float
        Largest ``k a_max = 2π n a_max / λ`` the method is trusted for [1].
    advice : str
        What to use instead (appended to the message).

    Returns
    -------
    list of Caution
        Empty, or one ``size-beyond-method`` caution with the affected wavelength range.

    References
    ----------
    Size parameter ``x = k a``: Bohren & Huffman (1983), ch. 4. The limits are the
    solvers' own (see their ``max_ka``).
    """
    wl = np.asarray(wavelength_nm, dtype=float)
    a_max = np.asarray(semi_axes_nm[0], dtype=float)
    for a in semi_axes_nm[1:]:
        a_max = np.maximum(a_max, a)
    if a_max.ndim and a_max.shape[-1] == wl.size and wl.size > 1:
        a_max = a_max.reshape(-1, wl.size).max(axis=0)
    else:
        a_max = a_max.max()
    ka = 2.0 * np.pi * np.asarray(n_medium) * a_max / wl
    bad = np.broadcast_to(ka > limit_ka, wl.shape)
    if not np.any(bad):
        return []
    lo, hi = float(wl[bad].min()), float(wl[bad].max())
    return [Caution("size-beyond-method",
                    f"{method}: k a_max up to {float(np.max(ka)):.2g} (above {limit_ka:.2g}) for wavelengths "
                    f"{lo:g}-{hi:g} nm; outside the method's validity ({advice})", (lo, hi))]
