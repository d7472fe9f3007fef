"""From a spectrum and an illumination to absorbed power, hot-carrier injection and photocurrent.

:func:`hot_carrier_estimate` is the pipeline behind ``nanoabs hot-carriers``:

1. spectral absorbed power P(λ) = σ_abs(λ) E_λ(λ) and photon rate Γ = P λ/(hc);
2. split of P by loss mechanism of the metal (interband / bulk intraband /
   surface-assisted intraband) in proportion to the parts of ε″ of its
   Drude–Lorentz model (Khurgin, Faraday Discuss. 214, 35 (2019); Kreibig &
   Vollmer 1995) — every part sees the same field, so P_j/P = ε″_j/ε″;
3. emission probability over the Schottky barrier: the escape-cone integral
   for isotropic hot-electron momenta (default) or Fowler's small-excess form;
4. transport to the interface with attenuation length ℓ, over the radial
   absorption profile of (layered) spheres, or a uniform profile in the
   equal-volume sphere for ellipsoids (uniform internal field in the
   quasi-static limit);
5. per particle: injected electron rate and photocurrent I = q Γ η T; for an
   array of N particles per µm²: absorptance N σ_abs (sparse limit),
   photocurrent density, responsivity and external quantum efficiency;
6. steady-state temperature rise of one particle ΔT = P/(4π κ R)
   (Govorov & Richardson, Nano Today 2, 30 (2007)).

This is an order-of-magnitude estimate of the kind used to compare designs; it
ignores carrier–carrier scattering cascades, interface roughness and
momentum-relaxing surface absorption beyond the user factor ``momentum_factor``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import _si as _c
from . import __version__
from . import hotcarriers as hc
from ._errors import NanoabsError, check_nonnegative, check_positive
from .illumination import band_integral, check_illumination
from .particles import Ellipsoid, LayeredSphere, Sphere

__all__ = ["HotCarrierResult", "hot_carrier_estimate", "absorbed_power_density", "EXPORT_COLUMNS",
           "ARRAY_COLUMNS"]

EXPORT_COLUMNS = ["wavelength_nm", "irradiance_W_m2_nm", "sigma_abs_m2", "absorbed_power_W",
                  "absorbed_photon_rate_per_s", "emission_probability", "transport_factor",
                  "injected_electron_rate_per_s", "photocurrent_A"]
ARRAY_COLUMNS = ["absorptance", "photocurrent_density_A_m2", "responsivity_A_W",
                 "external_quantum_efficiency"]
EXTRA_COLUMNS = ["photon_energy_eV", "power_interband_W", "power_intraband_bulk_W",
                 "power_intraband_surface_W"]


@dataclass
class HotCarrierResult:
    """Per-wavelength table, band totals and metadata of a hot-carrier estimate."""

    frame: object
    totals: dict
    metadata: dict
    units: dict = field(default_factory=dict)

    def write(self, path, *, force=False):
        """Export CSV + JSON sidecar (or one JSON) atomically; see :func:`nanoabs.export.write_export`."""
        from .export import write_export

        meta = dict(self.metadata)
        meta["totals"] = self.totals
        return write_export(self.frame, path, metadata=meta, units=self.units, force=force)


def _metal_layers(particle):
    """[(index, material, r_in, r_out)] of metal layers of a (layered) sphere."""
    out, r_in = [], 0.0
    for i, (mat, r) in enumerate(particle.layers):
        if mat.is_metal:
            out.append((i, mat, r_in, r))
        r_in = r
    return out


def _mie_inputs(spec, particle):
    """(k [1/nm], m (L, W), x (L, W)) of a (layered) sphere from the permittivities its spectrum used."""
    wl = spec.wavelength_nm
    k = 2 * np.pi * spec.n_medium / wl
    m = np.stack([np.broadcast_to(np.sqrt(e) / spec.n_medium, wl.shape) for e in spec.layer_eps])
    x = np.stack([k * float(r) for _, r in particle.layers])
    return k, m, x


def _transport_sphere(particle, spec, ell_nm, contact_fraction, notes, n_rho=96):
    """Transport factor per wavelength from the Mie absorption profile in the metal layers."""
    from .mie import absorption_profile

    layers = particle.layers
    metals = _metal_layers(particle)
    if not metals:
        raise NanoabsError("hot-carrier estimate: the particle has no metal part")
    if metals[-1][0] != len(layers) - 1:
        notes.append("the outermost metal layer is coated by a non-metal: injection assumes the carriers "
                     "cross that coating (thin tunnel barrier or the coating is the barrier partner)")
    wl = spec.wavelength_nm
    k, m, x = _mie_inputs(spec, particle)
    R_out = float(metals[-1][3])
    num = np.zeros(wl.shape)
    den = np.zeros(wl.shape)
    for _, _, r_in, r_out in metals:
        r = np.linspace(float(r_in), float(r_out), n_rho + 1)[1:]  # avoid r = 0
        rho = k[:, None] * r[None, :]
        q = np.empty((wl.size, r.size))
        for j in range(wl.size):  # profile is vectorised over the grid; rho differs per wavelength
            q[j] = absorption_profile(m[:, j], x[:, j], rho[j])
        w = np.exp(-(R_out - r) / ell_nm)
        num += np.trapezoid(q * w * r**2, r, axis=1)
        den += np.trapezoid(q * r**2, r, axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        T = np.where(den > 0, num / den, 0.0)
    return np.clip(T * contact_fraction, 0.0, 1.0)


def absorbed_power_density(spec, particle, r_nm, irradiance_W_m2=1.0):
    """Angle-averaged absorbed power density p(r) [W m⁻³] inside a (layered) sphere.

    p(r) = I₀ k q(k r) with q = Im(m²)⟨|E|²⟩/|E₀|² from the internal Mie fields
    (:func:`nanoabs.mie.absorption_profile`; Bohren & Huffman 1983, Sec. 4.4) and
    k = 2π n_medium/λ. Its volume integral ∫ p 4πr² dr equals σ_abs I₀.

    Parameters
    ----------
    spec : Spectrum of ``particle`` (one particle, W wavelengths)
    particle : Sphere or LayeredSphere
    r_nm : array (R,)
        Radii [nm], 0 < r ≤ outer radius.
    irradiance_W_m2 : float or array (W,)
        Incident irradiance I₀ [W m⁻²] at each wavelength.

    Returns
    -------
    ndarray, shape (W, R)
    """
    from .mie import absorption_profile

    if not isinstance(particle, (Sphere, LayeredSphere)):
        raise NanoabsError("absorbed_power_density: the internal field of an ellipsoid in the quasi-static "
                           "limit is uniform; the profile is defined here for spheres and layered spheres")
    wl = spec.wavelength_nm
    r = check_positive("radius r", np.atleast_1d(np.asarray(r_nm, dtype=float)), unit="nm")
    k_nm, m, x = _mie_inputs(spec, particle)
    q = np.stack([absorption_profile(m[:, j], x[:, j], k_nm[j] * r) for j in range(wl.size)])
    I0 = np.broadcast_to(np.asarray(irradiance_W_m2, dtype=float), wl.shape)
    return I0[:, None] * (k_nm * 1e9)[:, None] * q


def _mechanism_fractions(mat, wl, extra_eV):
    """Fractions of ε″ of a metal's Drude–Lorentz model: interband, bulk and surface intraband."""
    from .drude_lorentz import HC_EV_NM

    model = mat.model.with_surface_damping(float(extra_eV)) if extra_eV else mat.model
    parts = model.parts_at_energy(HC_EV_NM / wl)
    im = {"interband": np.maximum(parts["lorentz"].imag, 0),
          "intraband_bulk": np.maximum(parts["drude_bulk"].imag, 0),
          "intraband_surface": np.maximum(parts["drude_surface"].imag, 0)}
    tot = sum(im.values())
    return {k: np.where(tot > 0, v / np.where(tot > 0, tot, 1), 0) for k, v in im.items()}


#: Above this single-particle temperature rise [K] the result is flagged, not trusted: the
#: model keeps conductivity and optical constants at room temperature, and gold nanorods
#: reshape a few hundred kelvin above room temperature (Link & El-Sayed, J. Phys. Chem. B
#: 103, 8410 (1999); from memory). A documented choice.
TEMPERATURE_RISE_LIMIT_K = 100.0


def hot_carrier_estimate(spec, particle, illumination, *, barrier_eV, fermi_energy_eV=None,
                         attenuation_length_nm=None, yield_model: str = "escape-cone",
                         momentum_factor: float = 1.0, contact_fraction: float = 1.0,
                         density_per_um2=None, depth_nm: float = 10.0,
                         thermal_conductivity_W_mK=None) -> HotCarrierResult:
    """Absorbed power, hot-electron injection and photocurrent of one particle (and an array).

    Parameters
    ----------
    spec : Spectrum
        From :func:`nanoabs.spectrum` for ``particle``.
    particle : Sphere, LayeredSphere or Ellipsoid
    illumination : Illumination
        From :mod:`nanoabs.illumination` (monochromatic, laser, solar, blackbody, flat, CSV).
    barrier_eV : float, keyword-only
        Schottky barrier height φ_B [eV] (> 0).
    fermi_energy_eV : float, keyword-only
        Fermi energy of the metal from the band bottom [eV]; default from
        Ashcroft & Mermin (1976) Table 2.1 for Au, Ag, Cu, Al.
    attenuation_length_nm : float, keyword-only
        Hot-electron attenuation length ℓ [nm]; default per metal (see
        :data:`nanoabs.hotcarriers.ATTENUATION_LENGTH_NM`, order-of-magnitude values).
    yield_model : {"escape-cone", "fowler"}, keyword-only
        Exact escape-cone integral (default) or Fowler's (hν − φ)²/(8 E_F hν).
    momentum_factor : float, keyword-only
        Empirical multiplier of the emission probability for non-isotropic
        (plasmon-shaped) momentum distributions (default 1).
    contact_fraction : float, keyword-only
        Fraction of the metal surface in contact with the semiconductor (default 1).
    density_per_um2 : float, keyword-only
        Areal density of particles [µm⁻²] for array quantities.
    depth_nm : float, keyword-only
        Depth [nm] for the reported fraction of power absorbed near the surface.
    thermal_conductivity_W_mK : float, keyword-only
        κ of the surroundings [W m⁻¹ K⁻¹]; default from the medium's name when tabulated.
    """
    import pandas as pd

    if not isinstance(particle, (Sphere, LayeredSphere, Ellipsoid)):
        raise NanoabsError(f"particle = {type(particle).__name__}: expected Sphere, LayeredSphere or Ellipsoid")
    wl = spec.wavelength_nm
    phi = float(check_positive("barrier", barrier_eV, unit="eV"))
    E_ph = hc.photon_energy_eV(wl)
    if phi >= E_ph.max():
        raise NanoabsError(f"barrier = {phi:g} eV: must be below the largest photon energy asked, "
                           f"{E_ph.max():.4g} eV (at {wl.min():g} nm); no photon can cross it")
    metal = _main_metal(particle)
    if fermi_energy_eV is None:
        fermi_energy_eV = hc.free_electron(metal.name).fermi_energy_eV
        ef_src = hc.free_electron(metal.name).source
    else:
        ef_src = "user value"
    ef = float(check_positive("fermi energy", fermi_energy_eV, unit="eV"))
    if attenuation_length_nm is None:
        ell, ell_src = hc.attenuation_length_nm(metal.name)
    else:
        ell, ell_src = float(check_positive("attenuation length", attenuation_length_nm, unit="nm")), "user value"
    mf = float(check_nonnegative("momentum factor", momentum_factor))
    cf = float(check_positive("contact fraction", contact_fraction))
    if cf > 1:
        raise NanoabsError(f"contact fraction = {cf:g}: allowed range is 0 to 1")
    warnings = list(spec.metadata.get("warnings", []))
    notes = []

    E_lam = np.asarray(check_illumination(illumination).spectral_irradiance(wl), dtype=float)
    mono = bool(getattr(illumination, "is_monochromatic", False))
    P = hc.absorbed_power(spec.sigma_abs_m2, E_lam)
    gamma = hc.photon_rate(P, wl)
    if yield_model == "escape-cone":
        eta = hc.escape_cone_yield(E_ph, phi, ef, momentum_factor=mf)
    elif yield_model == "fowler":
        eta = np.minimum(hc.fowler_yield(E_ph, phi, ef) * mf, 1.0)
    else:
        raise NanoabsError(f"yield model = {yield_model!r}: allowed: escape-cone, fowler")
    if isinstance(particle, Ellipsoid):
        R = hc.equal_volume_radius(*particle.outer_axes_nm)
        T = np.full(wl.shape, hc.transport_factor_uniform(float(R), ell, contact_fraction=cf))
        notes.append("ellipsoid: quasi-static internal field is uniform, so the absorbed power is uniform "
                     "in the metal; transport uses the equal-volume sphere")
        surface_fraction = None
    else:
        T = _transport_sphere(particle, spec, ell, cf, notes)
        R = float(particle.outer_radius_nm)
        surface_fraction = _surface_fraction(particle, spec, depth_nm)
    rate = gamma * eta * T
    current = _c.e * rate

    sd = spec.metadata.get("surface_damping")
    extra = 0.0
    if isinstance(sd, list):
        for entry in sd:
            if entry["material"] == metal.label and np.ndim(entry["extra_damping_eV"]) == 0:
                extra = entry["extra_damping_eV"]
    if metal.model is not None:
        frac = _mechanism_fractions(metal, wl, extra)
        parts = hc.partition_by_mechanism(P, frac)
    else:
        parts = {k: np.full(wl.shape, np.nan) for k in ("interband", "intraband_bulk", "intraband_surface")}
        notes.append(f"no Drude-Lorentz model for {metal.label}: mechanism partition not available")

    data = {"wavelength_nm": wl, "irradiance_W_m2_nm": E_lam, "sigma_abs_m2": spec.sigma_abs_m2,
            "absorbed_power_W": P, "absorbed_photon_rate_per_s": gamma, "emission_probability": eta,
            "transport_factor": T, "injected_electron_rate_per_s": rate, "photocurrent_A": current}
    cols = list(EXPORT_COLUMNS)
    if density_per_um2 is not None:
        N = check_positive("density", density_per_um2, unit="per um^2", scalar=True)
        A, w = hc.array_absorptance(spec.sigma_abs_m2, areal_density_per_um2=N, wavelength_nm=wl)
        warnings += list(w)
        J = hc.current_density_A_m2(current, areal_density_per_um2=N)
        Rr = hc.responsivity_A_W(J, E_lam)
        data.update({"absorptance": A, "photocurrent_density_A_m2": J, "responsivity_A_W": Rr,
                     "external_quantum_efficiency": hc.external_quantum_efficiency(Rr, wl)})
        cols += ARRAY_COLUMNS
    data.update({"photon_energy_eV": E_ph, "power_interband_W": parts["interband"],
                 "power_intraband_bulk_W": parts["intraband_bulk"],
                 "power_intraband_surface_W": parts["intraband_surface"]})
    cols += EXTRA_COLUMNS
    frame = pd.DataFrame({c: np.asarray(data[c], dtype=float) for c in cols}, columns=cols)

    per = "" if mono else " nm^-1"
    units = {"wavelength_nm": "nm", "irradiance_W_m2_nm": "W m^-2" + per, "sigma_abs_m2": "m^2",
             "absorbed_power_W": "W" + per, "absorbed_photon_rate_per_s": "s^-1" + per,
             "emission_probability": "1", "transport_factor": "1",
             "injected_electron_rate_per_s": "s^-1" + per, "photocurrent_A": "A" + per,
             "absorptance": "1", "photocurrent_density_A_m2": "A m^-2" + per,
             "responsivity_A_W": "A W^-1", "external_quantum_efficiency": "1",
             "photon_energy_eV": "eV", "power_interband_W": "W" + per,
             "power_intraband_bulk_W": "W" + per, "power_intraband_surface_W": "W" + per}

    i_pk = int(np.argmax(P))
    kappa, kappa_src = _kappa(spec, thermal_conductivity_W_mK)
    totals = {"peak_absorbed_power_wavelength_nm": float(wl[i_pk])}
    if mono:
        totals.update({"peak_absorbed_power_W": float(P[i_pk]),
                       "peak_photocurrent_A": float(np.max(current)),
                       "note": "monochromatic illumination: each row is a separate measurement at that "
                               "wavelength and irradiance; band integrals are not meaningful"})
        p_heat = float(P[i_pk])
    else:
        totals.update({"absorbed_power_W": float(band_integral(wl, P)),
                       "absorbed_photon_rate_per_s": float(band_integral(wl, gamma)),
                       "injected_electron_rate_per_s": float(band_integral(wl, rate)),
                       "photocurrent_A": float(band_integral(wl, current)),
                       "incident_irradiance_W_m2": float(band_integral(wl, E_lam)),
                       "band_nm": [float(wl.min()), float(wl.max())]})
        p_heat = totals["absorbed_power_W"]
        for k in ("interband", "intraband_bulk", "intraband_surface"):
            totals[f"absorbed_power_{k}_W"] = float(band_integral(wl, parts[k]))
    if density_per_um2 is not None:
        if mono:
            j = int(np.nanargmax(data["responsivity_A_W"]))
            totals.update({"peak_responsivity_A_W": float(data["responsivity_A_W"][j]),
                           "peak_responsivity_wavelength_nm": float(wl[j])})
        else:
            totals["photocurrent_density_A_m2"] = float(band_integral(wl, data["photocurrent_density_A_m2"]))
            inc = totals["incident_irradiance_W_m2"]
            totals["band_responsivity_A_W"] = totals["photocurrent_density_A_m2"] / inc if inc > 0 else float("nan")
            j = int(np.nanargmax(data["responsivity_A_W"]))
            totals.update({"peak_responsivity_A_W": float(data["responsivity_A_W"][j]),
                           "peak_responsivity_wavelength_nm": float(wl[j])})
    if kappa is not None:
        dT = float(hc.temperature_rise(p_heat, R, kappa))
        if not np.isfinite(dT):
            raise NanoabsError("temperature rise: not finite (overflowing absorbed power); check the illumination")
        totals["temperature_rise_K"] = dT
        if dT > TEMPERATURE_RISE_LIMIT_K:
            totals["temperature_rise_flag"] = "beyond the linear steady-state model"
            warnings.append(
                f"temperature rise {dT:.3g} K exceeds {TEMPERATURE_RISE_LIMIT_K:g} K: outside the linear "
                "steady-state model (temperature-dependent conductivity and optical constants, reshaping "
                "or melting of the particle); treat it as a flag, not a value, and follow local "
                "laser-safety rules")
        totals["temperature_rise_basis"] = ("absorbed power at the peak wavelength" if mono
                                            else "band-integrated absorbed power")
    if surface_fraction is not None:
        totals[f"fraction_absorbed_within_{depth_nm:g}_nm_of_surface_at_peak"] = float(surface_fraction[i_pk])

    meta = dict(spec.metadata)
    meta.update({
        "illumination": illumination.metadata(),
        "schottky": {"barrier_eV": phi, "fermi_energy_eV": ef, "fermi_energy_source": ef_src,
                     "attenuation_length_nm": ell, "attenuation_length_source": ell_src,
                     "yield_model": yield_model, "momentum_factor": mf, "contact_fraction": cf},
        "density_per_um2": density_per_um2,
        "thermal_conductivity_W_mK": kappa, "thermal_conductivity_source": kappa_src,
        "methods": {
            "emission": ("escape-cone integral for isotropic momenta and uniformly distributed excited "
                         "electron energies; small-excess limit (hv - phi)^2/(8 E_F hv): Fowler, Phys. Rev. 38, "
                         "45 (1931); Scales & Berini, IEEE J. Quantum Electron. 46, 633 (2010); Leenheer et al., "
                         "J. Appl. Phys. 115, 134301 (2014)"),
            "transport": "exp(-(R - r)/l) over the radial absorption profile (straight radial path to the surface)",
            "mechanisms": "split of absorbed power by parts of eps'' of the Drude-Lorentz model (Khurgin 2019; "
                          "Kreibig & Vollmer 1995)",
            "heating": "Delta T = P/(4 pi kappa R), Govorov & Richardson, Nano Today 2, 30 (2007)",
            "array": "sparse non-interacting limit: absorptance = N sigma_abs",
        },
        "notes": notes,
        "warnings": warnings,
        "safety_caution": hc.SAFETY_CAUTION,
        "package_version": __version__,
    })
    return HotCarrierResult(frame, totals, meta, units)


def _main_metal(particle):
    if isinstance(particle, Ellipsoid):
        mats = [particle.material] + ([particle.shell[0]] if particle.shell else [])
    else:
        mats = [m for m, _ in particle.layers]
    metals = [m for m in mats if m.is_metal]
    if not metals:
        raise NanoabsError("hot-carrier estimate: the particle has no metal part")
    return metals[-1]


def _surface_fraction(particle, spec, depth_nm):
    from .mie import fraction_within_depth

    k, m, x = _mie_inputs(spec, particle)
    return fraction_within_depth(m, x, k * float(depth_nm))


def _kappa(spec, user):
    if user is not None:
        return float(check_positive("thermal conductivity", user, unit="W/(m K)")), "user value"
    med = spec.metadata.get("medium", {}).get("material", "")
    name = {"H2O": "water"}.get(med, med)
    try:
        value, src = hc.thermal_conductivity(name)
        return float(value), src
    except NanoabsError:
        return None, f"no tabulated thermal conductivity for medium {med!r}: temperature rise not estimated"
