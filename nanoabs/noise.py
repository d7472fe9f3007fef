"""Detector noise: shot and Johnson noise, noise-equivalent power and specific detectivity.

Standard photodetector figures of merit (E. L. Dereniak and G. D. Boreman, *Infrared
Detectors and Systems*, Wiley 1996, ch. 3 and 5; Sze & Ng, *Physics of Semiconductor
Devices*, 3rd ed. 2007, Sec. 13.1): noise currents per root hertz, NEP = i_n / R and
D* = sqrt(A) / NEP in cm Hz^1/2 W^-1 (Jones).
"""

from __future__ import annotations

import numpy as np

from . import _si as _c
from ._errors import check_nonnegative, check_positive

__all__ = ["noise_current_A_Hz05", "noise_equivalent_power_W_Hz05", "specific_detectivity_Jones"]


def noise_current_A_Hz05(saturation_current_A, photocurrent_A, *, bias_V=0.0, temperature_K=300.0,
                         load_ohm=None):
    """Noise current spectral density of a Schottky photodiode [A Hz^-1/2].

    i_n^2 = 2 q (I_s (1 + exp(qV/kT)) + I_ph) + 4 k T / R_L

    Shot noise of the two opposing thermionic currents of the diode, I_s exp(qV/kT) and
    I_s (their sum is 2 I_s at zero bias, where it equals the Johnson noise 4kT/R_0 of the
    zero-bias resistance R_0 = kT/(q I_s)), plus shot noise of the photocurrent
    (Sze & Ng 2007, Sec. 13.1; Dereniak & Boreman 1996, ch. 5), plus the Johnson noise of a
    load resistor if one is given (J. B. Johnson, Phys. Rev. 32, 97 (1928)).

    Parameters
    ----------
    saturation_current_A : float or array_like
        Thermionic saturation current A J_s [A], >= 0.
    photocurrent_A : float or array_like
        Photocurrent [A], >= 0.
    bias_V : float, keyword-only
        Forward bias [V]; negative values are reverse bias.
    temperature_K : float, keyword-only
        Temperature of the diode and load [K], > 0.
    load_ohm : float, keyword-only, optional
        Load resistance [ohm], > 0; no Johnson term when omitted.
    """
    i_s = check_nonnegative("saturation_current_A", saturation_current_A, unit="A")
    i_ph = check_nonnegative("photocurrent_A", photocurrent_A, unit="A")
    T = check_positive("temperature_K", temperature_K, unit="K")
    v2 = 2 * _c.e * (i_s * (1 + np.exp(np.asarray(bias_V, dtype=float) * _c.e / (_c.k * T))) + i_ph)
    if load_ohm is not None:
        v2 = v2 + 4 * _c.k * T / check_positive("load_ohm", load_ohm, unit="ohm")
    return np.sqrt(v2)[()]


def noise_equivalent_power_W_Hz05(noise_current, responsivity_A_W):
    """NEP = i_n / R [W Hz^-1/2]; NaN where the responsivity is 0 (nothing is detected).

    Dereniak & Boreman (1996), ch. 3 (noise-equivalent power in a 1 Hz bandwidth).
    """
    i_n = check_nonnegative("noise_current", noise_current)
    r = np.asarray(responsivity_A_W, dtype=float)
    i_n, r = np.broadcast_arrays(i_n, r)
    out = np.full(r.shape, np.nan)
    np.divide(i_n, r, out=out, where=r > 0)
    return out[()]


def specific_detectivity_Jones(area_um2, nep_W_Hz05):
    """Specific detectivity D* = sqrt(A) / NEP [cm Hz^1/2 W^-1 = Jones]; 0 where NEP is NaN.

    R. C. Jones, Proc. IRE 47, 1495 (1959); Dereniak & Boreman (1996), ch. 3. The area is
    the detector area in um^2 (1 um^2 = 1e-8 cm^2).
    """
    a_cm2 = float(check_positive("area_um2", area_um2, unit="um^2")) * 1e-8
    nep = np.asarray(nep_W_Hz05, dtype=float)
    out = np.zeros(nep.shape)
    np.divide(np.sqrt(a_cm2), nep, out=out, where=np.isfinite(nep) & (nep > 0))
    return out[()]
