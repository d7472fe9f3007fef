"""Metal/semiconductor contacts: barrier heights, barrier lowering, cut-off and thermionic dark current.

* :data:`SEMICONDUCTORS`: band gap (Varshni form), permittivity, effective Richardson
  constants A** for electrons and holes and density-of-states masses;
* :data:`CONTACTS`: Schottky barrier heights of metal / n- and p-type semiconductor pairs,
  each with a source, a range and the carrier that crosses (electrons over an n-type
  barrier, holes over a p-type one);
* image-force lowering with bias and doping (Sze & Ng 2007, Sec. 3.2.4), the effective
  barrier and the cut-off wavelength hc/phi_B;
* thermionic-emission dark current J = A** T^2 exp(-q phi_B / kT) (exp(qV/kT) - 1)
  (Sze & Ng 2007, Sec. 3.3.2).

Barrier heights depend strongly on surface preparation, interface layers and annealing:
the tabulated values are typical measured values (or, where marked, estimates) with the
range seen in practice. Values typed from memory say so.
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np

from . import _si as _c
from ._errors import NanoabsError, check_nonnegative, check_positive, suggest
from .drude_lorentz import HC_EV_NM

__all__ = ["Semiconductor", "Contact", "SEMICONDUCTORS", "CONTACTS", "RICHARDSON_A_CM2_K2",
           "contact", "schottky_barrier", "band_gap_eV", "image_force_lowering_eV",
           "depletion_field_V_m", "effective_barrier_eV", "cutoff_wavelength_nm",
           "thermionic_current_density_A_m2", "richardson_constant"]

#: Richardson constant for free electrons A = 4 pi q m k^2 / h^3 [A cm^-2 K^-2]
#: (Sze & Ng 2007, Sec. 3.3.2: about 120 A cm^-2 K^-2), from CODATA constants.
RICHARDSON_A_CM2_K2 = 4 * np.pi * _c.e * _c.m_e * _c.k**2 / _c.h**3 * 1e-4

_SZE = "S. M. Sze and K. K. Ng, Physics of Semiconductor Devices, 3rd ed. (Wiley, 2007)"


class Semiconductor(NamedTuple):
    """Parameters of a semiconductor used for barriers and dark current."""

    name: str
    gap_0K_eV: float  # Varshni E_g(0) [eV]
    varshni_alpha_eV_K: float  # Varshni alpha [eV K^-1]
    varshni_beta_K: float  # Varshni beta [K]
    permittivity: float  # static relative permittivity eps_s [-]
    richardson_n: float  # A** for electrons [A cm^-2 K^-2]
    richardson_p: float  # A** for holes [A cm^-2 K^-2] (nan: no p-type contacts)
    dos_mass_n: float  # density-of-states effective mass of electrons [m_e]
    dos_mass_p: float  # density-of-states effective mass of holes [m_e]
    source: str


#: Semiconductors for contacts. Varshni parameters: E_g(T) = E_g(0) - alpha T^2 / (T + beta).
SEMICONDUCTORS = {
    "Si": Semiconductor("Si", 1.170, 4.73e-4, 636.0, 11.9, 112.0, 32.0, 1.08, 0.81,
                        _SZE + ": Varshni parameters (ch. 1), eps_s and DOS masses (Appendix), "
                        "A** = 112 (n) and 32 (p) A cm^-2 K^-2 (Sec. 3.3.2) (from memory)"),
    "GaAs": Semiconductor("GaAs", 1.519, 5.405e-4, 204.0, 12.9, 8.16, 74.4, 0.063, 0.53,
                          _SZE + ": Varshni parameters (ch. 1), eps_s, DOS masses, A**/A = 0.068 (n) "
                          "and 0.62 (p) (Sec. 3.3.2) (from memory)"),
    "TiO2": Semiconductor("TiO2", 3.2, 0.0, 1.0, 31.0, 1200.0, float("nan"), 10.0, float("nan"),
                          "estimate (from memory): anatase E_g ~3.2 eV, eps_s 31-55 (rutile 86-170), "
                          "electron mass ~1-10 m_e so A** ~120-1200; n-type only"),
    "ZnO": Semiconductor("ZnO", 3.37, 0.0, 1.0, 8.5, 32.0, float("nan"), 0.27, float("nan"),
                         "estimate (from memory): E_g 3.37 eV, eps_s 8.5-8.9, m_e* 0.24-0.28 so "
                         "A** ~ 32 A cm^-2 K^-2; n-type only"),
    "GaN": Semiconductor("GaN", 3.47, 7.7e-4, 600.0, 8.9, 26.4, float("nan"), 0.22, float("nan"),
                         "estimate (from memory): E_g(0) 3.47 eV, eps_s 8.9, m_e* 0.20-0.22 so "
                         "A** ~ 24-26 A cm^-2 K^-2; n-type only"),
}


class Contact(NamedTuple):
    """A metal/semiconductor pair: barrier height, its range, the crossing carrier and the source."""

    metal: str
    semiconductor: str
    doping: str  # "n" or "p"
    barrier_eV: float
    range_eV: tuple
    source: str

    @property
    def carrier(self) -> str:
        """'electron' over an n-type barrier, 'hole' over a p-type barrier."""
        return "electron" if self.doping == "n" else "hole"

    @property
    def label(self) -> str:
        return f"{self.metal}/{self.doping}-{self.semiconductor}"


_T_SZE = _SZE + ", ch. 3, table of measured barrier heights (from memory)"
_T_TUNG = ("R. T. Tung, Appl. Phys. Rev. 1, 011304 (2014), compilation of barrier heights "
           "(from memory)")
_SUM = ("estimate from phi_Bn + phi_Bp ~ E_g (" + _SZE + ", Sec. 3.2; from memory) with the n-type "
        "value of this table at 300 K")
_IR = ("low-temperature infrared-detector value (77 K): B.-Y. Tsaur, M. M. Weeks, R. Trubiano, "
       "P. W. Pellegrini and T.-R. Yew, IEEE Electron Device Lett. 9, 650 (1988) for IrSi; "
       "F. D. Shepherd, Proc. SPIE (1980s) for PtSi and Pd2Si (from memory)")
_PROC = "estimate (from memory); strongly process dependent (surface preparation, interface layers)"
_OHMIC = _PROC + "; often near-ohmic in practice"
_PIN = "GaAs is Fermi-level pinned: most metals give 0.7-0.95 eV. " + _T_SZE

# (metal, semiconductor, doping, barrier [eV], (low, high) [eV], source)
_ROWS = [
    # n-Si
    ("Au", "Si", "n", 0.80, (0.76, 0.83), _T_SZE), ("Ag", "Si", "n", 0.78, (0.65, 0.80), _T_SZE),
    ("Cu", "Si", "n", 0.58, (0.55, 0.80), _T_SZE), ("Al", "Si", "n", 0.72, (0.55, 0.80), _T_SZE),
    ("Pt", "Si", "n", 0.90, (0.85, 0.90), _T_SZE), ("Pd", "Si", "n", 0.81, (0.72, 0.81), _T_SZE),
    ("Ni", "Si", "n", 0.61, (0.61, 0.70), _T_SZE), ("Ti", "Si", "n", 0.50, (0.50, 0.60), _T_SZE),
    ("Cr", "Si", "n", 0.61, (0.57, 0.61), _T_SZE), ("W", "Si", "n", 0.67, (0.65, 0.67), _T_SZE),
    ("TiN", "Si", "n", 0.55, (0.45, 0.65), _PROC), ("PtSi", "Si", "n", 0.84, (0.84, 0.87), _T_SZE),
    ("Pd2Si", "Si", "n", 0.74, (0.72, 0.75), _T_SZE), ("IrSi", "Si", "n", 0.93, (0.90, 0.95), _T_TUNG),
    # p-Si
    ("Au", "Si", "p", 0.34, (0.25, 0.35), _T_SZE), ("Ag", "Si", "p", 0.54, (0.40, 0.54), _T_SZE),
    ("Cu", "Si", "p", 0.46, (0.40, 0.50), _T_SZE), ("Al", "Si", "p", 0.58, (0.40, 0.60), _T_SZE),
    ("Pt", "Si", "p", 0.22, (0.15, 0.30), _SUM), ("Pd", "Si", "p", 0.31, (0.30, 0.40), _SUM),
    ("Ni", "Si", "p", 0.51, (0.45, 0.55), _T_SZE), ("Ti", "Si", "p", 0.61, (0.55, 0.65), _T_SZE),
    ("Cr", "Si", "p", 0.50, (0.45, 0.55), _T_SZE), ("W", "Si", "p", 0.45, (0.40, 0.50), _T_SZE),
    ("TiN", "Si", "p", 0.57, (0.45, 0.65), _SUM),
    ("PtSi", "Si", "p", 0.22, (0.20, 0.25), _IR), ("Pd2Si", "Si", "p", 0.34, (0.30, 0.36), _IR),
    ("IrSi", "Si", "p", 0.15, (0.13, 0.18), _IR),
    # n-GaAs
    ("Au", "GaAs", "n", 0.90, (0.80, 0.95), _PIN), ("Ag", "GaAs", "n", 0.88, (0.80, 0.93), _PIN),
    ("Cu", "GaAs", "n", 0.82, (0.75, 0.90), _PIN), ("Al", "GaAs", "n", 0.80, (0.70, 0.90), _PIN),
    ("Pt", "GaAs", "n", 0.84, (0.80, 0.95), _PIN), ("Pd", "GaAs", "n", 0.85, (0.80, 0.95), _PIN),
    ("Ni", "GaAs", "n", 0.83, (0.75, 0.90), _PIN), ("Ti", "GaAs", "n", 0.83, (0.75, 0.90), _PIN),
    ("Cr", "GaAs", "n", 0.82, (0.75, 0.90), _PIN), ("W", "GaAs", "n", 0.80, (0.70, 0.90), _PIN),
    ("TiN", "GaAs", "n", 0.70, (0.60, 0.85), _PROC), ("PtSi", "GaAs", "n", 0.85, (0.75, 0.95), _PROC),
    # TiO2 (n-type)
    ("Au", "TiO2", "n", 1.00, (0.80, 1.20), _PROC), ("Ag", "TiO2", "n", 0.90, (0.60, 1.00), _PROC),
    ("Cu", "TiO2", "n", 0.70, (0.50, 0.90), _PROC), ("Al", "TiO2", "n", 0.30, (0.10, 0.40), _OHMIC),
    ("Pt", "TiO2", "n", 1.10, (0.90, 1.40), _PROC), ("Pd", "TiO2", "n", 1.00, (0.80, 1.20), _PROC),
    ("Ni", "TiO2", "n", 0.80, (0.60, 1.00), _PROC), ("Ti", "TiO2", "n", 0.20, (0.05, 0.40), _OHMIC),
    ("Cr", "TiO2", "n", 0.50, (0.30, 0.70), _PROC), ("W", "TiO2", "n", 0.60, (0.40, 0.80), _PROC),
    ("TiN", "TiO2", "n", 0.60, (0.40, 0.80), _PROC), ("PtSi", "TiO2", "n", 0.90, (0.60, 1.20), _PROC),
    # ZnO (n-type)
    ("Au", "ZnO", "n", 0.70, (0.60, 0.90), _PROC), ("Ag", "ZnO", "n", 0.75, (0.60, 1.00), _PROC),
    ("Cu", "ZnO", "n", 0.50, (0.40, 0.70), _PROC), ("Al", "ZnO", "n", 0.30, (0.10, 0.40), _OHMIC),
    ("Pt", "ZnO", "n", 0.75, (0.60, 0.95), _PROC), ("Pd", "ZnO", "n", 0.68, (0.55, 0.85), _PROC),
    ("Ni", "ZnO", "n", 0.50, (0.40, 0.70), _PROC), ("Ti", "ZnO", "n", 0.20, (0.05, 0.35), _OHMIC),
    ("Cr", "ZnO", "n", 0.40, (0.30, 0.60), _PROC), ("W", "ZnO", "n", 0.45, (0.30, 0.60), _PROC),
    ("TiN", "ZnO", "n", 0.40, (0.30, 0.60), _PROC), ("PtSi", "ZnO", "n", 0.70, (0.50, 0.90), _PROC),
    # GaN (n-type), kept from the first table
    ("Au", "GaN", "n", 0.90, (0.80, 1.10), _PROC), ("Ag", "GaN", "n", 0.70, (0.50, 0.90), _PROC),
    ("Al", "GaN", "n", 0.50, (0.30, 0.60), _OHMIC), ("Cu", "GaN", "n", 0.80, (0.60, 1.00), _PROC),
    ("TiN", "GaN", "n", 0.30, (0.20, 0.50), _PROC),
]

#: Tabulated contacts keyed 'Metal/n-Semi' or 'Metal/p-Semi'.
CONTACTS = {f"{m}/{d}-{s}": Contact(m, s, d, v, r, src) for m, s, d, v, r, src in _ROWS}


def _normalise_pair(pair: str) -> str:
    text = "".join(str(pair).split())
    metal, sep, semi = text.partition("/")
    if not sep:
        return text
    low = semi.lower()
    if low.startswith(("n-", "p-")):
        return f"{metal}/{low[0]}-{semi[2:]}"
    return f"{metal}/n-{semi}"  # a bare semiconductor means n-type


def contact(pair: str) -> Contact:
    """The tabulated contact of a metal/semiconductor pair.

    Parameters
    ----------
    pair : str
        ``'Metal/Semiconductor'``: ``'Au/Si'`` and ``'Au/n-Si'`` mean n-type silicon,
        ``'Au/p-Si'`` p-type; case-insensitive, spaces ignored.

    Returns
    -------
    Contact
        With ``barrier_eV``, ``range_eV``, ``source`` and the crossing ``carrier``.
    """
    key = _normalise_pair(pair)
    lower = {k.lower(): k for k in CONTACTS}
    if key.lower() in lower:
        return CONTACTS[lower[key.lower()]]
    plain = [k.replace("/n-", "/") for k in CONTACTS]
    raise NanoabsError(f"metal/semiconductor pair = {pair!r} is not tabulated"
                       f"{suggest(str(pair).strip(), plain + list(CONTACTS))}; known e.g. Au/Si, "
                       f"Au/p-Si, PtSi/p-Si (see nanoabs.contacts.CONTACTS, {len(CONTACTS)} pairs)")


def schottky_barrier(pair: str):
    """Barrier height of a tabulated pair as ``(value_eV, source)`` (see :func:`contact`).

    Parameters
    ----------
    pair : str
        ``"METAL/SEMICONDUCTOR"``, e.g. ``"Au/Si"`` (n-type), ``"Au/p-Si"``, ``"PtSi/p-Si"``.

    Returns
    -------
    Sourced
        ``(value, source)``: barrier height [eV] and its citation with the published range.
    """
    from .hotcarriers import Sourced

    c = contact(pair)
    return Sourced(c.barrier_eV, f"{c.label}: {c.source}; range {c.range_eV[0]:g}-{c.range_eV[1]:g} eV")


def _semi(name) -> Semiconductor:
    if isinstance(name, Semiconductor):
        return name
    if name in SEMICONDUCTORS:
        return SEMICONDUCTORS[name]
    raise NanoabsError(f"semiconductor = {name!r} not tabulated; known: {', '.join(SEMICONDUCTORS)}")


def band_gap_eV(semiconductor, temperature_K=300.0):
    """Band gap E_g(T) = E_g(0) - alpha T^2 / (T + beta) [eV].

    Y. P. Varshni, Physica 34, 149 (1967), eq. (1); parameters from Sze & Ng (2007), ch. 1.
    """
    s = _semi(semiconductor)
    T = check_nonnegative("temperature_K", temperature_K, unit="K")
    return np.asarray(s.gap_0K_eV - s.varshni_alpha_eV_K * T**2 / (T + s.varshni_beta_K))[()]


def image_force_lowering_eV(field_V_m, permittivity):
    """Schottky (image-force) barrier lowering Delta phi = sqrt(q E / (4 pi eps_s eps_0)) [eV].

    Sze & Ng (2007), Sec. 3.2.4, eq. for Delta phi; the maximum of the barrier sits at
    x_m = sqrt(q / (16 pi eps_s eps_0 E)).

    Parameters
    ----------
    field_V_m : float or array_like
        Electric field at the interface [V m^-1], >= 0.
    permittivity : float
        Relative image-force permittivity eps_s [-], > 0 (1 for a metal-vacuum interface).
    """
    E = check_nonnegative("field_V_m", field_V_m, unit="V/m")
    eps = check_positive("permittivity", permittivity)
    return np.asarray(np.sqrt(_c.e * E / (4 * np.pi * eps * _c.epsilon_0)))[()]


def _thermal_V(T):
    return _c.k * T / _c.e


def depletion_field_V_m(barrier_eV, doping_cm3, bias_V, temperature_K, semiconductor, doping="n"):
    """Maximum field of a Schottky depletion layer E_m = sqrt(2 q N (psi_bi - V - kT/q) / eps_s) [V m^-1].

    Depletion approximation, Sze & Ng (2007), Sec. 3.2.3; built-in potential
    psi_bi = phi_B - (kT/q) ln(N_C / N) (n-type; N_V for p-type) with the effective density
    of states N_C = 2 (2 pi m* k T / h^2)^(3/2) (Sze & Ng, ch. 1). ``bias_V`` is the forward
    bias: negative values are reverse bias. Zero where the layer is flat (large forward bias).
    """
    s = _semi(semiconductor)
    N = float(check_positive("doping", doping_cm3, unit="cm^-3")) * 1e6
    T = float(check_positive("temperature", temperature_K, unit="K"))
    mass = s.dos_mass_n if doping == "n" else s.dos_mass_p
    Nc = 2 * (2 * np.pi * mass * _c.m_e * _c.k * T / _c.h**2) ** 1.5
    vt = _thermal_V(T)
    psi = float(barrier_eV) - vt * np.log(max(Nc / N, 1.0))
    arg = np.clip(psi - np.asarray(bias_V, dtype=float) - vt, 0.0, None)
    return np.sqrt(2 * _c.e * N * arg / (s.permittivity * _c.epsilon_0))[()]


def effective_barrier_eV(c: Contact, *, bias_V=0.0, doping_cm3=1e15, temperature_K=300.0):
    """Barrier height after image-force lowering at the given bias and doping [eV].

    phi_eff = phi_B - Delta phi(E_m) with E_m from :func:`depletion_field_V_m` and Delta phi
    from :func:`image_force_lowering_eV` (Sze & Ng 2007, Sec. 3.2.4).

    Returns
    -------
    (phi_eff_eV, lowering_eV, field_V_m)
    """
    s = _semi(c.semiconductor)
    E = depletion_field_V_m(c.barrier_eV, doping_cm3, bias_V, temperature_K, s, c.doping)
    d = float(image_force_lowering_eV(E, s.permittivity))
    return c.barrier_eV - d, d, float(E)


def cutoff_wavelength_nm(barrier_eV):
    """Cut-off wavelength of internal photoemission lambda_c = h c / phi_B [nm] (common practice)."""
    return np.asarray(HC_EV_NM / check_positive("barrier_eV", barrier_eV, unit="eV"))[()]


def thermionic_current_density_A_m2(barrier_eV, temperature_K, richardson_A_cm2_K2, bias_V=0.0):
    """Thermionic-emission current density J = A** T^2 exp(-q phi_B/kT) (exp(qV/kT) - 1) [A m^-2].

    Sze & Ng (2007), Sec. 3.3.2 (thermionic-emission theory, with the effective Richardson
    constant A**). ``bias_V`` is the forward bias (negative: reverse); at reverse bias
    J -> -J_s with J_s = A** T^2 exp(-q phi_B/kT). ``bias_V=None`` returns J_s.

    Parameters
    ----------
    barrier_eV : float or array_like
        Barrier height [eV] (after image-force lowering), > 0.
    temperature_K : float or array_like
        Temperature [K], > 0.
    richardson_A_cm2_K2 : float
        Effective Richardson constant A** [A cm^-2 K^-2], > 0.
    """
    phi = check_positive("barrier_eV", barrier_eV, unit="eV")
    T = check_positive("temperature_K", temperature_K, unit="K")
    A = check_positive("richardson_A_cm2_K2", richardson_A_cm2_K2, unit="A cm^-2 K^-2")
    js = A * 1e4 * T**2 * np.exp(-phi / _thermal_V(T))
    if bias_V is None:
        return np.asarray(js)[()]
    return np.asarray(js * np.expm1(np.asarray(bias_V, dtype=float) / _thermal_V(T)))[()]


def richardson_constant(c: Contact) -> float:
    """A** [A cm^-2 K^-2] of the contact's semiconductor for its crossing carrier."""
    s = _semi(c.semiconductor)
    value = s.richardson_n if c.doping == "n" else s.richardson_p
    if not np.isfinite(value):
        raise NanoabsError(f"contact = {c.label}: no Richardson constant for {c.carrier}s in {s.name}")
    return float(value)
