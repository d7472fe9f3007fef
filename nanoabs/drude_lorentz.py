"""Drude–Lorentz permittivity models: evaluation, passive least-squares fits, surface damping.

Model (time dependence exp(−iωt), so ε″ ≥ 0 for a passive medium), with all
frequencies written as photon energies ħω in eV::

    ε(ω) = ε∞ − ω_p² / (ω² + iγω) + Σ_j f_j ω_j² / (ω_j² − ω² − iγ_j ω)

``f_j`` is the dimensionless strength of oscillator j (its contribution to the
static permittivity). With ε∞ ≥ 0, ω_p, γ, f_j, γ_j ≥ 0 every term has ε″ ≥ 0 at
all ω > 0, so any model built from non-negative parameters is passive.

References
----------
.. [1] A. D. Rakić, A. B. Djurišić, J. M. Elazar, M. L. Majewski, "Optical
   properties of metallic films for vertical-cavity optoelectronic devices",
   Appl. Opt. 37, 5271–5283 (1998), eqs. (1)–(3) and Table 1 (written there
   for exp(+iωt); conjugated here).
.. [2] U. Kreibig, M. Vollmer, *Optical Properties of Metal Clusters*,
   Springer (1995), Sec. 2.2.4 (size-dependent damping γ(L) = γ + A v_F / L).
.. [3] E. A. Coronado, G. C. Schatz, J. Chem. Phys. 119, 3926 (2003)
   (effective mean free path L = 4V/S for a convex particle).
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Sequence

import numpy as np

from . import _si as _c
from ._errors import NanoabsError, check_positive

__all__ = [
    "DrudeLorentz",
    "Oscillator",
    "FitResult",
    "fit_drude_lorentz",
    "rakic_1998",
    "energy_eV_from_wavelength_nm",
    "surface_damping_eV",
    "surface_damping_correction",
]

HC_EV_NM = _c.h * _c.c / _c.e * 1e9  # h c [eV nm] (exact SI constants, nanoabs._si)
HBAR_EV_S = _c.hbar / _c.e  # ħ [eV s]


def energy_eV_from_wavelength_nm(wavelength_nm):
    """Photon energy ħω = hc/λ [eV] for a vacuum wavelength [nm]."""
    return HC_EV_NM / np.asarray(wavelength_nm, dtype=float)


def surface_damping_eV(length_nm, fermi_velocity_m_s, *, A: float = 1.0):
    """Extra damping ħ A v_F / L [eV] from electron scattering at the particle surface.

    Parameters
    ----------
    length_nm : float or array
        Effective mean free path L [nm] (L = 4V/S for a convex particle [3]_).
    fermi_velocity_m_s : float
        Fermi velocity v_F [m/s].
    A : float, keyword-only
        Dimensionless surface-scattering parameter (≈ 1 for diffuse scattering
        in the classical limit; published values for noble metals range about
        0.1–2 depending on the surroundings) [2]_.

    References
    ----------
    .. [2] Kreibig & Vollmer (1995), eq. (2.54): γ(L) = γ_bulk + A v_F / L.
    .. [3] Coronado & Schatz (2003).
    """
    L = check_positive("surface-damping length L", length_nm, unit="nm")
    if not np.isfinite(A) or A < 0:
        raise NanoabsError(f"surface-damping parameter A = {A!r}: must be a finite number >= 0")
    return HBAR_EV_S * A * fermi_velocity_m_s / (L * 1e-9)


def surface_damping_correction(model: "DrudeLorentz", energy_eV, extra_damping_eV):
    """Δε = ω_p²/(ω² + iγω) − ω_p²/(ω² + i(γ + Δγ)ω), broadcasting Δγ [eV] against ħω [eV].

    Added to the bulk permittivity, it replaces the Drude damping γ by γ + Δγ
    (Kreibig & Vollmer 1995, Sec. 2.2.4). For Δγ ≥ 0 it raises ε″ wherever
    ħω > γ + Δγ, and vanishes as Δγ → 0.
    """
    w = np.asarray(energy_eV, dtype=float)
    wp2 = model.plasma_energy_eV**2
    g = model.damping_eV
    dg = np.asarray(extra_damping_eV, dtype=float)
    return wp2 / (w * w + 1j * g * w) - wp2 / (w * w + 1j * (g + dg) * w)


@dataclass(frozen=True)
class Oscillator:
    """One Lorentz oscillator: resonance energy [eV], dimensionless strength, damping [eV].

    Its term in the permittivity is f ω₀² / (ω₀² − ω² − iγω) (module docstring; Rakić
    et al. 1998, eq. (3), conjugated to exp(−iωt)).

    Parameters
    ----------
    energy_eV : float
        Resonance energy ħω₀ [eV].
    strength : float
        Oscillator strength f, its contribution to the static permittivity [1].
    damping_eV : float
        Damping ħγ [eV].
    """

    energy_eV: float
    strength: float
    damping_eV: float


@dataclass(frozen=True)
class DrudeLorentz:
    """Drude–Lorentz permittivity model (module docstring gives the formula).

    Parameters
    ----------
    eps_inf : float
        High-frequency background permittivity ε∞ [-].
    plasma_energy_eV : float
        Drude plasma energy ħω_p [eV] (0 for a dielectric).
    damping_eV : float
        Drude damping ħγ [eV].
    oscillators : sequence of Oscillator
        Lorentz terms (interband transitions for a metal).
    surface_damping_eV : float
        Extra Drude damping added by surface scattering [eV]; the model then
        uses γ + surface_damping_eV. Kept separate so that absorbed power can
        be split into bulk and surface-assisted intraband parts.
    meta : dict
        Provenance stored with the model (reference, fit range, ...); not
        compared and not used in any evaluation.
    """

    eps_inf: float = 1.0
    plasma_energy_eV: float = 0.0
    damping_eV: float = 0.0
    oscillators: tuple = ()
    surface_damping_eV: float = 0.0
    meta: dict = field(default_factory=dict, compare=False, repr=False)

    def __post_init__(self):
        vals = [self.eps_inf, self.plasma_energy_eV, self.damping_eV, self.surface_damping_eV]
        for o in self.oscillators:
            vals += [o.energy_eV, o.strength, o.damping_eV]
        if not all(np.isfinite(v) and v >= 0 for v in vals):
            raise NanoabsError(
                "Drude-Lorentz parameters must all be finite and >= 0 (a passive model); got "
                f"eps_inf={self.eps_inf}, plasma={self.plasma_energy_eV}, damping={self.damping_eV}, "
                f"oscillators={[(o.energy_eV, o.strength, o.damping_eV) for o in self.oscillators]}"
            )
        object.__setattr__(self, "oscillators", tuple(self.oscillators))

    # -- evaluation -------------------------------------------------------
    def parts_at_energy(self, energy_eV) -> dict:
        """The model's terms at photon energies [eV]: background, drude_bulk, drude_surface, lorentz.

        ``drude_surface`` is the change of the Drude term caused by surface
        damping (zero when ``surface_damping_eV`` is 0); the four parts sum to ε.

        Parameters
        ----------
        energy_eV : float or array_like
            Photon energies ħω [eV].

        Returns
        -------
        dict of str to ndarray
            Complex contributions to ε [1], each of the shape of ``energy_eV``.
        """
        w = np.asarray(energy_eV, dtype=float)
        wp2 = self.plasma_energy_eV**2
        g = self.damping_eV
        gs = g + self.surface_damping_eV
        with np.errstate(divide="ignore", invalid="ignore"):
            d_bulk = -wp2 / (w * w + 1j * g * w)
            d_surf = -wp2 / (w * w + 1j * gs * w) - d_bulk
        lor = np.zeros(np.shape(w), dtype=complex)
        for o in self.oscillators:
            w0 = o.energy_eV
            lor = lor + o.strength * w0 * w0 / (w0 * w0 - w * w - 1j * o.damping_eV * w)
        return {
            "background": np.full(np.shape(w), self.eps_inf, dtype=complex),
            "drude_bulk": d_bulk,
            "drude_surface": d_surf,
            "lorentz": lor,
        }

    def permittivity_at_energy(self, energy_eV):
        """Complex permittivity ε at photon energies ħω [eV] (exp(−iωt): ε″ ≥ 0).

        Parameters
        ----------
        energy_eV : float or array_like
            Photon energies ħω [eV].

        Returns
        -------
        complex ndarray
            Relative permittivity ε [1], of the shape of ``energy_eV``.
        """
        p = self.parts_at_energy(energy_eV)
        return p["background"] + p["drude_bulk"] + p["drude_surface"] + p["lorentz"]

    def permittivity(self, wavelength_nm):
        """Complex permittivity ε at vacuum wavelengths [nm].

        Parameters
        ----------
        wavelength_nm : float or array_like
            Vacuum wavelengths [nm].

        Returns
        -------
        complex ndarray
            Relative permittivity ε [1] (ε″ ≥ 0).
        """
        return self.permittivity_at_energy(energy_eV_from_wavelength_nm(wavelength_nm))

    def refractive_index(self, wavelength_nm):
        """Complex refractive index n + ik (k ≥ 0) at vacuum wavelengths [nm].

        Parameters
        ----------
        wavelength_nm : float or array_like
            Vacuum wavelengths [nm].

        Returns
        -------
        complex ndarray
            n + ik = √ε [1], principal branch (k ≥ 0 for a passive model).
        """
        return np.sqrt(self.permittivity(wavelength_nm))

    def with_surface_damping(self, extra_damping_eV: float) -> "DrudeLorentz":
        """A copy whose Drude damping is increased by ``extra_damping_eV`` [eV] (Kreibig & Vollmer 1995).

        Parameters
        ----------
        extra_damping_eV : float
            Surface-scattering damping ħ A v_F / L [eV] (see :func:`surface_damping_eV`);
            it replaces any surface damping the model already had.

        Returns
        -------
        DrudeLorentz
        """
        return replace(self, surface_damping_eV=float(extra_damping_eV), meta=dict(self.meta))

    # -- storage ------------------------------------------------------------
    def to_dict(self) -> dict:
        """The parameters as a JSON-ready dict (energies [eV]), with ``meta`` merged in."""
        return {
            "eps_inf": self.eps_inf,
            "drude": {"plasma_energy_eV": self.plasma_energy_eV, "damping_eV": self.damping_eV},
            "oscillators": [
                {"energy_eV": o.energy_eV, "strength": o.strength, "damping_eV": o.damping_eV}
                for o in self.oscillators
            ],
            **self.meta,
        }

    @classmethod
    def from_dict(cls, d: dict) -> "DrudeLorentz":
        """The model from a dict in the form of :meth:`to_dict`.

        Parameters
        ----------
        d : dict
            ``eps_inf`` [1], ``drude`` {``plasma_energy_eV``, ``damping_eV``} [eV],
            ``oscillators`` (list of {``energy_eV`` [eV], ``strength`` [1], ``damping_eV`` [eV]});
            other keys become ``meta``.

        Returns
        -------
        DrudeLorentz
        """
        try:
            oscs = tuple(Oscillator(float(o["energy_eV"]), float(o["strength"]), float(o["damping_eV"]))
                         for o in d.get("oscillators", []))
            drude = d.get("drude", {})
            meta = {k: v for k, v in d.items() if k not in ("eps_inf", "drude", "oscillators")}
            return cls(float(d.get("eps_inf", 1.0)), float(drude.get("plasma_energy_eV", 0.0)),
                       float(drude.get("damping_eV", 0.0)), oscs, meta=meta)
        except (KeyError, TypeError, ValueError) as exc:
            raise NanoabsError(f"Drude-Lorentz parameter set is malformed: {exc}") from None

    def save(self, path) -> None:
        """Write the parameters as JSON (:meth:`to_dict`).

        Parameters
        ----------
        path : str or os.PathLike
            Output file (overwritten if it exists).
        """
        Path(path).write_text(json.dumps(self.to_dict(), indent=2) + "\n", encoding="utf-8")

    @classmethod
    def load(cls, path) -> "DrudeLorentz":
        """Read a model written by :meth:`save`.

        Parameters
        ----------
        path : str or os.PathLike
            JSON file in the form of :meth:`to_dict`.

        Returns
        -------
        DrudeLorentz
        """
        return cls.from_dict(json.loads(Path(path).read_text(encoding="utf-8")))


def rakic_1998(metal: str) -> DrudeLorentz:
    """Lorentz–Drude parameters of Rakić et al., Appl. Opt. 37, 5271 (1998), Table 1.

    The values below are written from memory and checked in the test suite
    against the model values tabulated in the open refractiveindex.info
    dataset (entries ``*/Rakic-LD``). Rakić's form
    ε = 1 − f₀ω_p²/(ω(ω − iΓ₀)) + Σ f_j ω_p²/(ω_j² − ω² + iωΓ_j) (exp(+iωt)) maps to
    ours with ħω_p,Drude = √f₀ ħω_p, strength_j = f_j ω_p²/ω_j², and complex conjugation.

    Parameters
    ----------
    metal : {"Au", "Ag", "Cu", "Al"}
        Chemical symbol of the metal.

    Returns
    -------
    DrudeLorentz
        Model with photon energies in [eV] and ``meta["reference"]`` naming the source.
    """
    table = {  # ω_p [eV]; (f, Γ [eV], ω [eV]) with the Drude term first (ω = 0)
        "Ag": (9.01, [(0.845, 0.048, 0.0), (0.065, 3.886, 0.816), (0.124, 0.452, 4.481),
                      (0.011, 0.065, 8.185), (0.840, 0.916, 9.083), (5.646, 2.419, 20.29)]),
        "Au": (9.03, [(0.760, 0.053, 0.0), (0.024, 0.241, 0.415), (0.010, 0.345, 0.830),
                      (0.071, 0.870, 2.969), (0.601, 2.494, 4.304), (4.384, 2.214, 13.32)]),
        "Cu": (10.83, [(0.575, 0.030, 0.0), (0.061, 0.378, 0.291), (0.104, 1.056, 2.957),
                       (0.723, 3.213, 5.300), (0.638, 4.305, 11.18)]),
        "Al": (14.98, [(0.523, 0.047, 0.0), (0.227, 0.333, 0.162), (0.050, 0.312, 1.544),
                       (0.166, 1.351, 1.808), (0.030, 3.382, 3.473)]),
    }
    if metal not in table:
        raise NanoabsError(f"metal = {metal!r}: Rakic 1998 parameters exist for {', '.join(table)}")
    wp, terms = table[metal]
    f0, g0, _ = terms[0]
    oscs = tuple(Oscillator(w, f * wp**2 / w**2, g) for f, g, w in terms[1:])
    return DrudeLorentz(1.0, float(np.sqrt(f0) * wp), g0, oscs,
                        meta={"reference": "Rakic et al., Appl. Opt. 37, 5271 (1998), Table 1 (from memory)"})


# -- fitting ------------------------------------------------------------------


@dataclass(frozen=True)
class FitResult:
    """Outcome of :func:`fit_drude_lorentz`."""

    model: DrudeLorentz
    rms_relative_error: float
    range_nm: tuple
    n_points: int
    success: bool
    message: str


def _unpack(p: np.ndarray, n_osc: int, drude: bool) -> DrudeLorentz:
    i = 0
    eps_inf = p[i]; i += 1
    wp = g = 0.0
    if drude:
        wp, g = p[i], p[i + 1]; i += 2
    oscs = tuple(Oscillator(p[i + 3 * j], p[i + 3 * j + 1], p[i + 3 * j + 2]) for j in range(n_osc))
    return DrudeLorentz(float(eps_inf), float(wp), float(g), oscs)


def _rms_rel(model: DrudeLorentz, E: np.ndarray, eps: np.ndarray) -> float:
    r = np.abs(model.permittivity_at_energy(E) - eps) / np.abs(eps)
    return float(np.sqrt(np.mean(r * r)))


def fit_drude_lorentz(wavelength_nm, eps, *, oscillators: int = 2, drude: bool = True,
                      range_nm: Sequence[float] | None = None, starts: int = 6,
                      seed: int = 0, min_oscillator_eV: float | None = None) -> FitResult:
    """Fit a passive Drude–Lorentz model to tabulated permittivity by bounded least squares.

    The residual is the complex relative error ``(ε_model − ε_data)/|ε_data|``
    (real and imaginary parts) at every tabulated point in ``range_nm``. All
    parameters are bounded below by 0 (Drude damping by 1 meV; oscillator energies
    by ``min_oscillator_eV``), which
    keeps the model passive at all ω > 0 (module docstring). Several starting
    points are tried (a deterministic physical guess and ``starts`` − 1
    seeded random perturbations) and the best is kept.

    Parameters
    ----------
    wavelength_nm : array
        Vacuum wavelengths [nm] of the table.
    eps : complex array
        Tabulated permittivity (ε″ ≥ 0 convention).
    oscillators : int, keyword-only
        Number of Lorentz terms (0–8).
    drude : bool, keyword-only
        Include the free-electron (Drude) term (metals: True).
    range_nm : (lo, hi), keyword-only
        Wavelength window [nm] to fit; default the whole table.
    starts : int, keyword-only
        Number of starting points (≥ 1).
    seed : int, keyword-only
        Seed of the random starts (results are reproducible).
    min_oscillator_eV : float, keyword-only
        Lower bound of the oscillator energies [eV]; default the lowest photon
        energy of the window, so Lorentz terms describe interband structure
        inside the data rather than imitating the Drude tail.

    Returns
    -------
    FitResult
        ``model``, ``rms_relative_error`` = ``sqrt(mean |Δε|²/|ε|²)`` over the fitted points,
        ``range_nm``, ``n_points``, ``success`` and scipy's ``message``.

    References
    ----------
    Model as Rakić et al., Appl. Opt. 37, 5271 (1998), eqs. (1)–(3); solver
    scipy.optimize.least_squares (trust-region reflective, bounded).
    """
    from scipy.optimize import least_squares

    wl = np.asarray(wavelength_nm, dtype=float).ravel()
    eps = np.asarray(eps, dtype=complex).ravel()
    if wl.shape != eps.shape:
        raise NanoabsError(f"wavelength_nm and eps must have the same length: {wl.size} vs {eps.size}")
    if not (0 <= int(oscillators) <= 8):
        raise NanoabsError(f"oscillators = {oscillators}: allowed range is 0 to 8")
    oscillators = int(oscillators)
    if int(starts) < 1:
        raise NanoabsError(f"starts = {starts}: must be >= 1")
    if range_nm is not None:
        lo, hi = float(range_nm[0]), float(range_nm[1])
        if not (np.isfinite(lo) and np.isfinite(hi) and 0 < lo < hi):
            raise NanoabsError(f"range_nm = {lo:g}:{hi:g}: need 0 < start < stop")
        if lo < wl.min() * (1 - 1e-9) or hi > wl.max() * (1 + 1e-9):
            raise NanoabsError(
                f"range_nm = {lo:g}:{hi:g} nm lies outside the data's range {wl.min():g}:{wl.max():g} nm")
        sel = (wl >= lo * (1 - 1e-12)) & (wl <= hi * (1 + 1e-12))
        wl, eps = wl[sel], eps[sel]
    n_par = 1 + 2 * drude + 3 * oscillators
    if wl.size < max(n_par, 3):
        raise NanoabsError(
            f"only {wl.size} tabulated points in the fit range: need at least {max(n_par, 3)} "
            f"for {oscillators} oscillators; widen range_nm or use fewer oscillators")
    E = energy_eV_from_wavelength_nm(wl)
    scale = np.abs(eps)

    def resid(p):
        d = (_unpack(p, oscillators, drude).permittivity_at_energy(E) - eps) / scale
        return np.concatenate([d.real, d.imag])

    # Oscillators are kept at or above the lowest photon energy of the window so
    # that they describe interband structure seen in the data and cannot mimic a
    # free-electron tail (which would leave the Drude damping meaningless).
    Emin, Emax = E.min(), E.max()
    e_lo = float(Emin) if min_oscillator_eV is None else float(min_oscillator_eV)
    lower = [0.0] + ([0.0, 1e-3] if drude else []) + [e_lo, 0.0, 0.0] * oscillators
    upper = [50.0] + ([40.0, 10.0] if drude else []) + [60.0, 500.0, 30.0] * oscillators

    # deterministic physical guess
    guess = [max(1.0, min(10.0, eps.real[np.argmax(E)] if not drude else 1.0))]
    if drude:
        i = np.argmin(E)
        wp_guess = float(np.sqrt(max(1.0, (1.0 - eps.real[i]) * E[i] ** 2)))
        g_guess = float(np.clip(eps.imag[i] * E[i] ** 3 / wp_guess**2, 0.01, 1.0))
        guess += [min(wp_guess, 39.0), g_guess]
    centres = np.geomspace(max(e_lo * 1.05, 0.05), Emax * 1.5, oscillators) if oscillators else []
    for c in centres:
        guess += [float(c), 1.0, float(max(0.1, 0.3 * c))]
    guess = np.clip(np.array(guess, dtype=float), np.array(lower) + 1e-9, np.array(upper) - 1e-9)

    rng = np.random.default_rng(seed)
    best = None
    for s in range(int(starts)):
        if s == 0:
            p0 = guess
        else:  # random restart: Drude part near the guess, oscillators anywhere in the window
            p0 = guess * np.exp(rng.normal(0, 0.3, guess.size))
            k = 1 + 2 * drude
            for j in range(oscillators):
                p0[k + 3 * j] = np.exp(rng.uniform(np.log(max(e_lo, 0.05)), np.log(1.5 * Emax)))
                p0[k + 3 * j + 1] = np.exp(rng.uniform(np.log(0.1), np.log(10.0)))
                p0[k + 3 * j + 2] = p0[k + 3 * j] * rng.uniform(0.05, 0.8)
            p0 = np.clip(p0, np.array(lower) + 1e-9, np.array(upper) - 1e-9)
        try:
            sol = least_squares(resid, p0, bounds=(lower, upper), method="trf",
                                x_scale="jac", max_nfev=4000)
        except (ValueError, FloatingPointError) as exc:  # pragma: no cover - scipy edge cases
            sol = None
            msg = str(exc)
            continue
        if best is None or sol.cost < best.cost:
            best = sol
    if best is None:
        raise NanoabsError(f"Drude-Lorentz fit failed from every start: {msg}")
    model = _unpack(best.x, oscillators, drude)
    rms = _rms_rel(model, E, eps)
    model = replace(model, meta={"range_nm": [float(wl.min()), float(wl.max())],
                                 "rms_relative_error": rms, "n_points": int(wl.size)})
    return FitResult(model, rms, (float(wl.min()), float(wl.max())), int(wl.size),
                     bool(best.success), str(best.message))
