"""From a spectrum and an illumination to absorbed power, hot-carrier injection and photocurrent.

:func:`hot_carrier_estimate` is the pipeline behind ``nanoabs hot-carriers``:

1. spectral absorbed power P(λ) = σ_abs(λ) E_λ(λ) and photon rate Γ = P λ/(hc);
2. split of P by loss mechanism of the metal (interband / bulk intraband /
   surface-assisted intraband) in proportion to the parts of ε″ of its
   Drude–Lorentz model (Khurgin, Faraday Discuss. 214, 35 (2019); Kreibig &
   Vollmer 1995) — every part sees the same field, so P_j/P = ε″_j/ε″;
3. energy-resolved generation per mechanism, one electron-hole pair per photon
   (:mod:`nanoabs.carriers`): intraband carriers flat over [0, hν], interband
   d-band holes and sp electrons from the band edge of Au, Ag, Cu;
4. barrier from a tabulated contact (:mod:`nanoabs.contacts`, image-force
   lowered at the bias, doping and temperature) or a value; electrons cross
   n-type barriers, holes p-type ones; cut-off hc/φ_B with warnings;
5. emission: escape cone at the curved wall where each straight path ends,
   survival exp(−s/ℓ(E)), over the Mie absorption profile of (layered) spheres
   or the uniform field of ellipsoids (``geometry="flat"``: flat-interface cone
   with the straight radial path); the surface-assisted share is instead emitted
   by the surface photoeffect of the normal field at the contact
   (:mod:`nanoabs.surface_emission`; volume and surface rates reported apart);
6. per particle: injected carrier rate by channel and photocurrent; for an
   array of N particles per µm²: absorptance N σ_abs (sparse limit),
   photocurrent density, responsivity and external quantum efficiency; with a
   device area: thermionic dark current, noise, NEP and D* (:mod:`nanoabs.noise`);
7. steady-state temperature rise of one particle ΔT = P/(4π κ R)
   (Govorov & Richardson, Nano Today 2, 30 (2007)).

This is an order-of-magnitude estimate of the kind used to compare designs; it
ignores carrier–carrier scattering cascades (attenuated carriers are lost),
reflections at the wall, interface roughness, image-force rounding of the step in
the surface channel and momentum-shaped distributions beyond the user factor ``momentum_factor``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import _si as _c
from ._version import version as _package_version
from . import carriers as cr
from . import hotcarriers as hc
from ._errors import NanoabsError, check_flag, check_nonnegative, check_positive
from .drude_lorentz import HC_EV_NM
from .illumination import band_integral, check_illumination
from .particles import Ellipsoid, LayeredSphere, Sphere

__all__ = ["HotCarrierResult", "hot_carrier_estimate", "absorbed_power_density", "export_names", "EXPORT_COLUMNS",
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
    """Per-wavelength table, band totals and metadata of a hot-carrier estimate.

    Parameters
    ----------
    frame : pandas.DataFrame
        One row per wavelength; column names carry the unit (``wavelength_nm``, ``absorbed_power_W``, ...).
    totals : dict
        Band totals and peak values (cut-off wavelength [nm], peak responsivity [A W^-1], ...),
        the unit in each key.
    metadata : dict
        Inputs, materials, Schottky contact, methods and warnings.
    units : dict, optional
        Column name of ``frame`` -> unit string (``"nm"``, ``"W"``, ``"1"``).
    """

    frame: object
    totals: dict
    metadata: dict
    units: dict = field(default_factory=dict)

    def write(self, path, *, force=False):
        """Export CSV + JSON sidecar (or one JSON) atomically; see :func:`nanoabs.export.write_export`.

        Parameters
        ----------
        path : str or os.PathLike
            Output file: ``.csv`` (plus a ``.json`` sidecar holding metadata and totals) or ``.json``.
        force : bool, keyword-only
            Replace files that already exist; without it an existing file is an error.
        """
        from .export import write_export

        meta = dict(self.metadata)
        meta["totals"] = self.totals
        frame, units, renamed = export_names(self.frame, self.units)
        if renamed:
            meta["column_names_in_python"] = renamed
        return write_export(frame, path, metadata=meta, units=units, force=force)

    def plot(self, ax=None):
        """Responsivity [mA/W] (and D* with a device area) against wavelength, cut-off marked.

        Parameters
        ----------
        ax : matplotlib.axes.Axes, optional
            Where to draw; a new figure through pyplot when omitted (shown inline in notebooks).

        Returns
        -------
        matplotlib.axes.Axes
            The responsivity axes (see :func:`nanoabs.plotting.plot_detector`).
        """
        from .plotting import plot_detector

        if ax is None:
            import matplotlib.pyplot as plt

            _, ax = plt.subplots(figsize=(6.4, 4.2), layout="constrained")
        return plot_detector(self, ax=ax)

    def __repr__(self) -> str:
        t, m = self.totals, self.metadata
        sch = m.get("schottky", {}) if isinstance(m.get("schottky"), dict) else {}
        parts = [f"HotCarrierResult({len(self.frame)} wavelengths",
                 f"barrier {sch.get('barrier_eV', '?')} eV", f"cut-off {t.get('cutoff_wavelength_nm', float('nan')):.0f} nm"]
        if "peak_responsivity_A_W" in t:
            parts.append(f"peak responsivity {t['peak_responsivity_A_W'] * 1e3:.3g} mA/W")
        if t.get("specific_detectivity_Jones_at_peak") is not None:
            parts.append(f"D* {t['specific_detectivity_Jones_at_peak']:.3g} Jones")
        n = len(m.get("warnings", []))
        return "; ".join(parts) + (f"; {n} warning(s))" if n else ")")

    def _repr_html_(self) -> str:
        import html

        return f"<div><b>nanoabs hot-carrier estimate</b><br>{html.escape(repr(self))}</div>"


def export_names(frame, units):
    """Column names for export format 2: a spectral density says so (``..._per_nm``).

    Under broadband light, powers, rates, currents and irradiances per wavelength are densities
    per nm; their exported names end in ``_per_nm``. Under monochromatic light the irradiance
    column holds W m⁻² and is exported as ``irradiance_W_m2``. Returns (frame, units, {new: old}).
    """
    mapping = {}
    for col in frame.columns:
        unit = units.get(col, "")
        base = col[:-3] if col.endswith("_nm") and col.startswith("irradiance_") else col
        if unit.endswith("nm^-1") and not col.endswith("_per_nm"):
            mapping[col] = base + "_per_nm"
        elif col == "irradiance_W_m2_nm":
            mapping[col] = "irradiance_W_m2"
    if not mapping:
        return frame, units, {}
    new_units = {mapping.get(c, c): u for c, u in units.items()}
    return frame.rename(columns=mapping), new_units, {v: k for k, v in mapping.items()}


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


def _profile_q(spec, particle, r_nm):
    """Dimensionless absorbed power density q (W, R) at radii ``r_nm`` of a (layered) sphere.

    p(r) = I₀ k q(k r), k = 2π n_medium/λ, I₀ the irradiance of the incident wave (in the
    incidence medium for a planar environment). In a homogeneous host q is the plane-wave
    Mie profile (`nanoabs.mie.absorption_profile`; Bohren & Huffman 1983, Sec. 4.4). On or
    in a planar stack the sphere is driven by the incident, reflected and scattered-back
    fields: the multipole solution (`nanoabs.surface.sphere_on_stack`) gives each order's
    exciting amplitude and `nanoabs.surface.sphere_absorption_profile` weights the orders,
    so the profile integrates to the σ_abs of that environment.
    """
    from .mie import absorption_profile

    wl = spec.wavelength_nm
    r = np.asarray(r_nm, dtype=float)
    k, m, x = _mie_inputs(spec, particle)
    env = getattr(spec, "_environment", None)
    q = np.empty((wl.size, r.size))
    if env is None or not hasattr(env, "resolve"):  # homogeneous host
        for j in range(wl.size):  # the profile is vectorised over the grid; rho differs per wavelength
            q[j] = absorption_profile(m[:, j], x[:, j], k[j] * r)
        return q
    from .surface import sphere_absorption_profile, sphere_on_stack

    eps = [np.broadcast_to(np.asarray(e, dtype=complex), wl.shape) for e in spec.layer_eps]
    radii = [float(np.asarray(rr, dtype=float).reshape(-1)[0]) for _, rr in particle.layers]
    out = getattr(spec, "_stack_solution", None) or sphere_on_stack(env, eps, radii, wl)
    for j in range(wl.size):
        one = {"n_max": out["n_max"], "e": {mm: e[j:j + 1] for mm, e in out["e"].items()}}
        q[j] = sphere_absorption_profile(env, one, [e[j:j + 1] for e in eps], radii, wl[j:j + 1], k[j] * r)[0]
    return q


def _sphere_weights(particle, spec, notes, n_rho=96):
    """Radii of the outermost metal layer, its inner radius and normalised absorption weights.

    Returns (r (n,), inner radius, weights (W, n)): the weights are q(r) r^2 dr of the Mie
    absorption profile, normalised over all metal layers, so carriers born in an inner metal
    layer (behind a dielectric layer) count as absorbed but not emitted. The profile is the
    one of the particle's environment (`_profile_q`).
    """
    layers = particle.layers
    metals = _metal_layers(particle)
    if not metals:
        raise NanoabsError("hot-carrier estimate: the particle has no metal part")
    if metals[-1][0] != len(layers) - 1:
        notes.append("the outermost metal layer is coated by a non-metal: injection assumes the carriers "
                     "cross that coating (thin tunnel barrier or the coating is the barrier partner)")
    if len(metals) > 1:
        notes.append("carriers absorbed in inner metal layers are taken as not emitted")
    wl = spec.wavelength_nm
    den = np.zeros(wl.shape)
    for _, _, r_in, r_out in metals:
        h = (float(r_out) - float(r_in)) / n_rho
        r = float(r_in) + h * (np.arange(n_rho) + 0.5)  # midpoint rule
        g = _profile_q(spec, particle, r) * r**2 * h
        den += g.sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        w = np.where(den[:, None] > 0, g / den[:, None], 0.0)
    return r, float(metals[-1][2]), w


def absorbed_power_density(spec, particle, r_nm, irradiance_W_m2=1.0):
    """Angle-averaged absorbed power density p(r) [W m⁻³] inside a (layered) sphere.

    p(r) = I₀ k q(k r) with q = Im(m²)⟨|E|²⟩/|E₀|² from the internal Mie fields
    (:func:`nanoabs.mie.absorption_profile`; Bohren & Huffman 1983, Sec. 4.4) and
    k = 2π n_medium/λ. Its volume integral ∫ p 4πr² dr equals σ_abs I₀. On or in a planar
    stack the internal field is the one the multipole method solves for (incident,
    reflected and scattered-back waves), I₀ is the irradiance of the incident wave in the
    incidence medium, and the integral equals that environment's σ_abs I₀.

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
    if not isinstance(particle, (Sphere, LayeredSphere)):
        raise NanoabsError("absorbed_power_density: the internal field of an ellipsoid in the quasi-static "
                           "limit is uniform; the profile is defined here for spheres and layered spheres")
    wl = spec.wavelength_nm
    r = check_positive("radius r", np.atleast_1d(np.asarray(r_nm, dtype=float)), unit="nm")
    k_nm = 2 * np.pi * spec.n_medium / wl
    q = _profile_q(spec, particle, r)
    I0 = np.broadcast_to(np.asarray(irradiance_W_m2, dtype=float), wl.shape)
    return I0[:, None] * (k_nm * 1e9)[:, None] * q


def _mechanism_fractions(mat, wl, extra_eV):
    """Fractions of ε″ of a metal's Drude–Lorentz model: interband, bulk and surface intraband."""
    model = mat.model.with_surface_damping(float(extra_eV)) if extra_eV else mat.model
    parts = model.parts_at_energy(HC_EV_NM / wl)
    im = {"interband": np.maximum(parts["lorentz"].imag, 0),
          "intraband_bulk": np.maximum(parts["drude_bulk"].imag, 0),
          "intraband_surface": np.maximum(parts["drude_surface"].imag, 0)}
    tot = sum(im.values())
    return {k: np.where(tot > 0, v / np.where(tot > 0, tot, 1), 0) for k, v in im.items()}


def _partition(spec, metal, wl, P, notes):
    """Absorbed power per mechanism; without a Drude-Lorentz model every part is NaN."""
    if metal.model is None:
        notes.append(f"no Drude-Lorentz model for {metal.label}: mechanism partition not available; all "
                     "absorbed power is given flat (intraband) carrier distributions")
        return None
    extra = 0.0
    sd = spec.metadata.get("surface_damping")
    if isinstance(sd, list):
        for entry in sd:
            if entry["material"] == metal.label and np.ndim(entry["extra_damping_eV"]) == 0:
                extra = entry["extra_damping_eV"]
    return hc.partition_by_mechanism(P, _mechanism_fractions(metal, wl, extra))


def _spherical(particle) -> bool:
    """Spheres and layered spheres (Mie internal fields); every other shape uses the uniform-field model."""
    return particle.shape in ("sphere", "layered sphere")


def _metal_axes(particle, notes):
    if not hasattr(particle, "semi_axes_nm"):  # a T-matrix body (cylinder, capped rod, rounded disc)
        notes.append(f"{particle.shape}: emission is computed for the spheroid of the same length and diameter "
                     "with uniform generation (a documented approximation; its internal field is not uniform)")
        if particle.shell is not None and particle.material.is_metal:  # metal core, coating not metal
            L, R = particle.length_nm / 2, particle.diameter_nm / 2
            return (L, R, R) if particle.kind == "rod" else (R, R, L)
        return particle.outer_semi_axes_nm()
    if particle.material.is_metal:
        return particle.semi_axes_nm
    notes.append("metal shell on a dielectric ellipsoid: emission is computed for a solid ellipsoid of the "
                 "shell's outer axes (uniform generation)")
    return particle.outer_axes_nm


def _escape_weights(particle, spec, E, c, ell_E, geometry, cf, notes):
    """Escape weight W(E) per wavelength without and with attenuation: arrays (L or 1, m)."""
    flat = 0.5 * (1.0 - c)
    if not _spherical(particle):
        axes = [float(a) for a in _metal_axes(particle, notes)]
        notes.append("ellipsoid: quasi-static internal field is uniform, so generation is uniform in the metal")
        if geometry == "flat":
            T = hc.transport_factor_uniform(float(hc.equal_volume_radius(*axes)), ell_E)
            return flat[None] * cf, (flat * T)[None] * cf
        # W is smooth in E: every 4th grid point, linear in between (yields change by < 1e-3)
        sub = np.unique(np.r_[np.arange(0, E.size, 4), E.size - 1])
        w = [np.interp(E, E[sub], cr.ellipsoid_escape(axes, c[sub], L, facet_fraction=cf))
             for L in (np.inf, ell_E[sub])]
        return w[0][None], w[1][None]
    r, a, wts = _sphere_weights(particle, spec, notes)
    R = float(r[-1] + (r[-1] - r[-2]) / 2)
    if geometry == "flat":
        T = wts @ np.exp(-(R - r)[:, None] / ell_E[None, :])
        return flat[None] * wts.sum(axis=1, keepdims=True) * cf, flat[None] * T * cf
    # spherically symmetric source: the flux is uniform over the surface, so a contact facet of
    # area fraction cf collects the fraction cf of it
    return (wts @ cr.sphere_escape(r, R, a, c, np.inf)) * cf, (wts @ cr.sphere_escape(r, R, a, c, ell_E)) * cf


def _injection(spec, particle, metal, E_ph, parts, P, opts, notes):
    """Injected carriers per absorbed photon: total (no attenuation, with it) and per channel."""
    wl, phi, ef, carrier = spec.wavelength_nm, opts["phi"], opts["ef"], opts["carrier"]
    L = wl.size
    # without a partition (no Drude-Lorentz model) all power goes to the flat intraband form;
    # rows with P = 0 take that split too (any split gives 0 there)
    fr = {k: np.zeros(L) if parts is None else np.divide(parts[k], P, out=np.zeros(L), where=P > 0)
          for k in cr.CHANNELS}
    fr["intraband_bulk"] = np.where((P > 0) & (parts is not None), fr["intraband_bulk"], 1.0)
    zero = {k: np.zeros(L) for k in cr.CHANNELS}
    kT = _c.k * opts["temperature_K"] / _c.e if opts["fermi_smearing"] else 0.0
    if phi >= E_ph.max() + 40 * kT:
        return np.zeros(L), np.ones(L), zero
    E = cr.energy_grid(phi, E_ph.max() + 40 * kT, n=240 if kT > 0 else 160)
    c = cr.cone_cosine(E, phi, ef, opts["yield_model"])
    ell = opts["ell"]
    ell_E = np.full(E.shape, ell) if opts["ell_fixed"] else cr.mean_free_path_nm(E, ell)
    W_inf, W_ell = _escape_weights(particle, spec, E, c, ell_E, opts["geometry"], opts["cf"], notes)
    eta_inf, eta_ell, per = np.zeros(L), np.zeros(L), {}
    name = metal.name if opts["generation"] == "band-edges" else ""
    if opts["surface_emission"] == "field":  # emitted by the surface photoeffect instead (_surface_rate)
        fr["intraband_surface"] = np.zeros(L)
    for k in cr.CHANNELS:
        lo, hi = cr.excess_energy_bounds(E_ph, name, k, carrier)
        y_inf, y_ell = (cr.channel_yield(W, E, lo, hi, kT_eV=kT) for W in (W_inf, W_ell))
        eta_inf += fr[k] * y_inf
        eta_ell += fr[k] * y_ell
        per[k] = fr[k] * y_ell
    mf = opts["mf"]
    scale = np.minimum(mf, np.divide(1.0, eta_inf, out=np.full(L, np.inf), where=eta_inf > 0))
    with np.errstate(invalid="ignore", divide="ignore"):
        T = np.where(eta_inf > 0, eta_ell / eta_inf, W_ell[:, 0] / np.maximum(W_inf[:, 0], 1e-300))
    return eta_inf * scale, np.clip(T, 0.0, 1.0), {k: v * scale for k, v in per.items()}


def _surface_rate(spec, particle, metal, P, E_ph, opts, notes):
    """Carriers per second emitted by the surface photoeffect (:mod:`nanoabs.surface_emission`) [s^-1].

    rate = R(h nu) int_contact |E_n|^2 dA, with the normal field just inside the metal scaled to the
    absorbed power P of the spectrum (so environments and solvers enter through P):

    * (layered) spheres: Mie normal field of the outer surface per absorbed power of the same Mie
      solution, S R^2 |E0|^2 / (sigma_abs^Mie I0) with I0 = n c eps0 |E0|^2 / 2
      (:func:`nanoabs.mie.normal_field_surface_integral`); a contact fraction multiplies it (exact
      on average over the particle's orientation relative to the light);
    * ellipsoids (and T-matrix bodies through their spheroid): uniform quasi-static internal field,
      |E|^2 = 2 P / (omega eps0 eps'' V) (absorbed power (omega/2) eps0 eps'' |E|^2 V), directed
      along the polarisation axis, or split over the axes in proportion to the absorption of each,
      |1/(eps_h + L_j (eps - eps_h))|^2 (quasi-static, static L_j), for random orientation;
      int |E_n|^2 dA = sum_j |E_j|^2 G_j over the contact facet
      (:func:`nanoabs.surface_emission.normal_field_factors_ellipsoid`).
    """
    from .surface_emission import normal_field_factors_ellipsoid, surface_emission_rate

    wl = spec.wavelength_nm
    T = opts["temperature_K"] if opts["fermi_smearing"] else 0.0
    R = surface_emission_rate(E_ph, opts["phi"], opts["ef"], temperature_K=T)  # m^-2 s^-1 (V/m)^-2
    P = np.asarray(P, dtype=float)
    if _spherical(particle):
        from .mie import mie_layered, normal_field_surface_integral

        if not particle.layer_materials()[-1].is_metal:
            notes.append("surface photoemission needs the metal to be the outer layer (the contact); not "
                         "computed for a coated particle")
            return np.zeros(wl.shape)
        k, m, x = _mie_inputs(spec, particle)
        r_m = float(particle.outer_radius_nm) * 1e-9
        sigma = np.asarray(mie_layered(m, x).qabs, dtype=float) * np.pi * r_m**2
        with np.errstate(divide="ignore", invalid="ignore"):
            e0sq = np.where(sigma > 0, 2 * P / (sigma * spec.n_medium * _c.c * _c.epsilon_0), 0.0)
        integral = normal_field_surface_integral(m, x) * r_m**2 * e0sq * opts["cf"]
        if "incidence_index" in spec.metadata:
            notes.append("surface photoemission in a planar environment: the shape of the normal field over "
                         "the surface is that of a plane wave in the host, scaled to the absorbed power")
    else:
        from .quasistatic import depolarization_factors

        axes = [float(a) for a in _metal_axes(particle, notes)]
        G = normal_field_factors_ellipsoid(axes, facet_fraction=opts["cf"]) * 1e-18  # m^2
        i_metal = [j for j, mat in enumerate(particle.layer_materials()) if mat.is_metal][-1]
        eps = np.broadcast_to(np.asarray(spec.layer_eps[i_metal], dtype=complex), wl.shape)
        pol = spec.metadata.get("polarization", "random")
        if pol in ("x", "y", "z"):
            share = np.zeros((3, wl.size))
            share["xyz".index(pol)] = 1.0
        else:
            eh = spec.n_medium**2
            Lf = depolarization_factors(*axes)
            share = np.stack([np.abs(1.0 / (eh + Lj * (eps - eh))) ** 2 for Lj in Lf])
            share /= share.sum(axis=0)
        V = 4.0 / 3.0 * np.pi * np.prod(axes) * 1e-27
        omega = 2 * np.pi * _c.c / (wl * 1e-9)
        with np.errstate(divide="ignore", invalid="ignore"):
            esq = np.where(eps.imag > 0, 2 * P / (omega * _c.epsilon_0 * eps.imag * V), 0.0)
        integral = esq * np.sum(share * G[:, None], axis=0)
    return R * integral


def _barrier_opts(contact, barrier_eV, carrier, bias_V, doping_cm3, temperature_K):
    """(phi_eff, carrier, schottky metadata, Contact or None) from a tabulated contact or a value."""
    from . import contacts as ct

    if (contact is None) == (barrier_eV is None):
        raise NanoabsError("give exactly one of barrier_eV (a value) or contact (a tabulated pair, e.g. 'Au/p-Si')")
    if contact is None:
        phi = float(check_positive("barrier", barrier_eV, unit="eV"))
        carrier = carrier or "electron"
        if carrier not in ("electron", "hole"):
            raise NanoabsError(f"carrier = {carrier!r}: allowed: electron (n-type contact), hole (p-type)")
        return phi, carrier, {"barrier_eV": phi, "barrier_source": "user value", "carrier": carrier}, None
    c = contact if isinstance(contact, ct.Contact) else ct.contact(contact)
    T = float(check_positive("temperature", temperature_K, unit="K"))
    if not np.isfinite(float(bias_V)) or abs(float(bias_V)) > 1e3:
        raise NanoabsError(f"bias = {bias_V!r} V: must be a finite number within +-1000 V (reverse bias < 0)")
    phi, low, field = ct.effective_barrier_eV(c, bias_V=float(bias_V), doping_cm3=doping_cm3, temperature_K=T)
    meta = {"contact": c.label, "barrier_eV": phi, "barrier_zero_field_eV": c.barrier_eV,
            "barrier_range_eV": list(c.range_eV), "barrier_source": c.source, "carrier": c.carrier,
            "image_force_lowering_eV": low, "interface_field_V_m": field, "bias_V": float(bias_V),
            "bias_sign": "forward bias > 0, reverse bias < 0", "doping_cm3": float(doping_cm3),
            "temperature_K": T}
    return phi, c.carrier, meta, c


def _contact_plausibility(c, metal, spec) -> list:
    """Warnings when the tabulated contact does not match the particle's metal or its host."""
    out = []
    if c.metal != metal.name and not (c.metal.endswith("Si") and c.metal.startswith(metal.name)):
        out.append(f"the Schottky pair {c.label} has metal {c.metal}, but the particle's metal is {metal.name}: "
                   "check the pair (the barrier belongs to the pair, not to the particle)")
    env = spec.metadata.get("environment") or {}
    host = (env.get("substrate") if env.get("kind") in ("on_substrate", "buried")
            else (env.get("medium") or {}).get("material", ""))
    if host and str(host).split()[0] != c.semiconductor:
        out.append(f"the Schottky pair {c.label} is on {c.semiconductor}, but the particle sits in or on {host}: "
                   "carriers cross only where the metal touches the contact semiconductor")
    return out


def _cutoff_warnings(wl, E_ph, P, E_lam, phi, warnings, smeared=False):
    """Cut-off wavelength hc/phi [nm]; warnings for rows beyond it and for a peak or band end near it."""
    lam_c = float(HC_EV_NM / phi)
    beyond = wl > lam_c
    if np.any(beyond):
        warnings.append(f"{int(beyond.sum())} wavelength(s) beyond the cut-off {lam_c:.0f} nm (hc/phi_B, "
                        f"phi_B = {phi:.3g} eV): " + (
                            "only the thermal (Fermi-Dirac) tail of the carriers crosses there" if smeared else
                            "no carrier can cross, injection is zero there"))
    margin = max(0.1, 0.1 * phi)  # our choice: within 0.1 eV or 10 % of the barrier
    near = f"within {margin:.2g} eV of the barrier {phi:.3g} eV (cut-off {lam_c:.0f} nm)"
    i_pk = int(np.argmax(P))
    if phi < E_ph[i_pk] < phi + margin:
        warnings.append(f"the absorption peak at {wl[i_pk]:g} nm ({E_ph[i_pk]:.3g} eV) lies {near}: the yield "
                        "there is small and very sensitive to the barrier")
    lit = (E_lam > 0) & ~beyond
    if np.any(lit) and E_ph[lit].min() < phi + margin:
        j = int(np.argmin(np.where(lit, E_ph, np.inf)))
        warnings.append(f"the long-wavelength end of the band, {wl[j]:g} nm ({E_ph[j]:.3g} eV), lies {near}: "
                        "the response there is small and very sensitive to the barrier")
    return lam_c


def _device(frame_data, c, opts, area_um2, load_ohm, mono, totals, warnings):
    """Dark current, noise, NEP and D* of a device of ``area_um2`` (needs the array columns)."""
    from . import contacts as ct
    from . import noise

    if "responsivity_A_W" not in frame_data:
        raise NanoabsError("area given without density: the device needs the areal density of particles")
    if c is None:
        raise NanoabsError("area given with a plain barrier value: dark current needs a tabulated contact "
                           "(its semiconductor's Richardson constant), e.g. contact='Au/p-Si'")
    A_m2 = float(check_positive("area", area_um2, unit="um^2")) * 1e-12
    T, V = opts["temperature_K"], opts["bias_V"]
    i_s = A_m2 * float(ct.thermionic_current_density_A_m2(opts["phi"], T, ct.richardson_constant(c), None))
    i_dark = abs(A_m2 * float(ct.thermionic_current_density_A_m2(opts["phi"], T, ct.richardson_constant(c), V)))
    J = np.asarray(frame_data["photocurrent_density_A_m2"], dtype=float)
    i_ph = J * A_m2 if mono else np.full(J.shape, totals.get("photocurrent_density_A_m2", 0.0) * A_m2)
    i_n = noise.noise_current_A_Hz05(i_s, i_ph, bias_V=V, temperature_K=T, load_ohm=load_ohm)
    nep = noise.noise_equivalent_power_W_Hz05(i_n, np.nan_to_num(frame_data["responsivity_A_W"]))
    dstar = noise.specific_detectivity_Jones(area_um2, nep)
    frame_data.update({"noise_equivalent_power_W_Hz05": nep, "specific_detectivity_Jones": dstar})
    totals.update({"device_area_um2": float(area_um2), "dark_current_A": i_dark, "saturation_current_A": i_s,
                   "load_ohm": load_ohm})
    if np.any(dstar > 0):
        j = int(np.argmax(dstar))
        totals.update({"peak_specific_detectivity_Jones": float(dstar[j]),
                       "peak_specific_detectivity_wavelength_nm": float(frame_data["wavelength_nm"][j]),
                       "noise_equivalent_power_at_peak_W_Hz05": float(nep[j])})
    return ["noise_equivalent_power_W_Hz05", "specific_detectivity_Jones"]


def _options(metal, fermi_energy_eV, attenuation_length_nm, momentum_factor, contact_fraction):
    """Checked emission options with the sources of the defaults."""
    ef, ef_src = ((float(check_positive("fermi energy", fermi_energy_eV, unit="eV")), "user value")
                  if fermi_energy_eV is not None else cr.fermi_energy(metal.name))
    if attenuation_length_nm is None:
        ell, ell_src = hc.attenuation_length_nm(metal.name)
        ell_src = f"{ell_src}; l(E) = l_1 min(1, (1 eV/E)^2) (nanoabs.carriers.mean_free_path_nm)"
    else:
        ell, ell_src = float(check_positive("attenuation length", attenuation_length_nm, unit="nm")), "user value"
    cf = float(check_positive("contact fraction", contact_fraction))
    if cf > 1:
        raise NanoabsError(f"contact fraction = {cf:g}: allowed range is 0 to 1")
    return {"ef": float(ef), "ef_src": ef_src, "ell": float(ell), "ell_src": ell_src,
            "ell_fixed": attenuation_length_nm is not None, "cf": cf,
            "mf": float(check_nonnegative("momentum factor", momentum_factor))}


#: Above this single-particle temperature rise [K] the result is flagged, not trusted: the
#: model keeps conductivity and optical constants at room temperature, and gold nanorods
#: reshape a few hundred kelvin above room temperature (Link & El-Sayed, J. Phys. Chem. B
#: 103, 8410 (1999); from memory). A documented choice.
TEMPERATURE_RISE_LIMIT_K = 100.0


def hot_carrier_estimate(spec, particle, illumination, *, barrier_eV=None, contact=None, carrier=None,
                         fermi_energy_eV=None, attenuation_length_nm=None, yield_model: str = "escape-cone",
                         geometry: str = "particle", generation: str = "band-edges",
                         momentum_factor: float = 1.0, contact_fraction: float = 1.0,
                         surface_emission: str = "field", fermi_smearing: bool = False,
                         density_per_um2=None, area_um2=None, temperature_K: float = 300.0,
                         bias_V: float = 0.0, doping_cm3: float = 1e15, load_ohm=None,
                         depth_nm: float = 10.0, thermal_conductivity_W_mK=None) -> HotCarrierResult:
    """Absorbed power, hot-carrier injection, photocurrent and (with an area) noise of one particle / array.

    Parameters
    ----------
    spec : Spectrum
        From :func:`nanoabs.spectrum` for ``particle``.
    particle : Sphere, LayeredSphere or Ellipsoid
    illumination : Illumination
        From :mod:`nanoabs.illumination` (monochromatic, laser, solar, blackbody, flat, CSV).
    barrier_eV : float, keyword-only
        Schottky barrier height φ_B [eV] (> 0), used as given; or give ``contact``.
    contact : str or nanoabs.contacts.Contact, keyword-only
        Tabulated pair ('Au/Si' = n-Si, 'Au/p-Si', 'PtSi/p-Si', ...): barrier after image-force
        lowering at ``bias_V``, ``doping_cm3``, ``temperature_K``; the carrier follows the doping.
    carrier : {"electron", "hole"}, keyword-only
        With ``barrier_eV``: electrons (n-type, default) or holes (p-type) cross.
    fermi_energy_eV : float, keyword-only
        E_F of the metal in the escape cone [eV]; default :func:`nanoabs.carriers.fermi_energy`.
    attenuation_length_nm : float, keyword-only
        Constant attenuation length ℓ [nm]; default the tabulated ℓ at 1 eV with the energy
        dependence of :func:`nanoabs.carriers.mean_free_path_nm`.
    yield_model : {"escape-cone", "fowler"}, keyword-only
        Escape-cone cosine (default) or its Fowler first-order form.
    geometry : {"particle", "flat"}, keyword-only
        Escape cone at the curved wall where each straight path ends (default), or the flat-interface
        form (1 - c)/2 with the straight-radial-path transport factor.
    generation : {"band-edges", "flat"}, keyword-only
        Interband carriers from the d-band edge (default) or every channel flat over [0, hν].
    momentum_factor : float, keyword-only
        Empirical multiplier of the emission probability (default 1).
    contact_fraction : float, keyword-only
        Fraction of the metal surface on the semiconductor (0, 1]; for an ellipsoid the facet with the
        lowest z (resting on a substrate), for (layered) spheres exact as a multiplier.
    surface_emission : {"field", "cone"}, keyword-only
        "field" (default): the surface-assisted share of absorption is emitted by the surface
        photoeffect, computed from the normal field at the contact (:mod:`nanoabs.surface_emission`,
        the package's own golden-rule derivation for a step barrier) and reported as the surface
        channel; the volume channels (bulk intraband, interband) use the escape cone. "cone": every
        channel through the escape cone (the model before the surface channel), surface rate 0.
    fermi_smearing : bool, keyword-only
        Fermi-Dirac occupation at ``temperature_K`` smears the threshold: the volume channels with
        Fowler's function (:func:`nanoabs.carriers.fowler_function`), the surface channel with the
        thermal occupation of its initial states. Off (default): the sharp T = 0 threshold, zero
        beyond the cut-off.
    density_per_um2 : float, keyword-only
        Areal density of particles [µm⁻²] for array quantities.
    area_um2 : float, keyword-only
        Device area [µm²]: adds dark current, noise-equivalent power and D* (needs ``contact``).
    temperature_K, bias_V, doping_cm3, load_ohm : keyword-only
        Temperature [K], bias [V] (forward > 0, reverse < 0), doping [cm⁻³] and load [Ω] (Johnson noise).
    depth_nm : float, keyword-only
        Depth [nm] for the reported fraction of power absorbed near the surface.
    thermal_conductivity_W_mK : float, keyword-only
        κ of the surroundings [W m⁻¹ K⁻¹]; default from the medium's name when tabulated.
    """
    import pandas as pd

    if not hasattr(particle, "layer_materials"):
        raise NanoabsError(f"particle = {type(particle).__name__}: expected a nanoabs particle (Sphere, "
                           "LayeredSphere, Ellipsoid, Cylinder, CappedRod, RoundedDisc)")
    fermi_smearing = check_flag("fermi_smearing", fermi_smearing)
    for name, value, allowed in (("geometry", geometry, ("particle", "flat")),
                                 ("surface emission", surface_emission, ("field", "cone")),
                                 ("generation", generation, ("band-edges", "flat")),
                                 ("yield model", yield_model, ("escape-cone", "fowler"))):
        if value not in allowed:
            raise NanoabsError(f"{name} = {value!r}: allowed: {', '.join(allowed)}")
    wl = spec.wavelength_nm
    phi, carrier, schottky, c = _barrier_opts(contact, barrier_eV, carrier, bias_V, doping_cm3, temperature_K)
    E_ph = hc.photon_energy_eV(wl)
    metal = _main_metal(particle)
    opts = _options(metal, fermi_energy_eV, attenuation_length_nm, momentum_factor, contact_fraction)
    opts.update({"phi": phi, "carrier": carrier, "yield_model": yield_model, "geometry": geometry,
                 "generation": generation, "temperature_K": float(check_positive("temperature", temperature_K,
                                                                                 unit="K", scalar=True)),
                 "bias_V": float(bias_V), "surface_emission": surface_emission, "fermi_smearing": fermi_smearing})
    warnings = list(spec.metadata.get("warnings", [])) + (_contact_plausibility(c, metal, spec) if c else [])
    notes = []

    E_lam = np.asarray(check_illumination(illumination).spectral_irradiance(wl), dtype=float)
    mono = bool(getattr(illumination, "is_monochromatic", False))
    P = hc.absorbed_power(spec.sigma_abs_m2, E_lam)
    gamma = hc.photon_rate(P, wl)
    parts = _partition(spec, metal, wl, P, notes)
    lam_c = _cutoff_warnings(wl, E_ph, P, E_lam, phi, warnings, smeared=fermi_smearing)
    eta, T, per = _injection(spec, particle, metal, E_ph, parts, P, opts, notes)
    rate_volume = gamma * eta * T
    rate_surface = (_surface_rate(spec, particle, metal, P, E_ph, opts, notes) if surface_emission == "field"
                    else np.zeros(wl.shape))
    rate = rate_volume + rate_surface
    with np.errstate(divide="ignore", invalid="ignore"):
        eta = eta + np.where(gamma > 0, rate_surface / gamma, 0.0)
        T = np.where((gamma > 0) & (eta > 0), rate / (gamma * eta), T)
    current = _c.e * rate
    if parts is None:
        parts = {k: np.full(wl.shape, np.nan) for k in cr.CHANNELS}
        per = {k: np.full(wl.shape, np.nan) for k in cr.CHANNELS}
    if surface_emission == "field":
        with np.errstate(divide="ignore", invalid="ignore"):
            per["intraband_surface"] = np.where(gamma > 0, rate_surface / gamma, 0.0)
    surface_fraction = _surface_fraction(particle, spec, depth_nm) if _spherical(particle) else None
    R = (float(particle.outer_radius_nm) if _spherical(particle)
         else float(hc.equal_volume_radius(*(float(a) for a in particle.outer_semi_axes_nm()))))

    rate_col = f"injected_{carrier}_rate_per_s"
    chan_cols = {k: f"injected_{carrier}_rate_{k}_per_s" for k in cr.CHANNELS}
    data = {"wavelength_nm": wl, "irradiance_W_m2_nm": E_lam, "sigma_abs_m2": spec.sigma_abs_m2,
            "absorbed_power_W": P, "absorbed_photon_rate_per_s": gamma, "emission_probability": eta,
            "transport_factor": T, rate_col: rate, "photocurrent_A": current}
    data.update({chan_cols[k]: gamma * per[k] for k in cr.CHANNELS})
    split_cols = {k: f"injected_{carrier}_rate_{k}_per_s" for k in ("volume", "surface")}
    data.update({split_cols["volume"]: rate_volume, split_cols["surface"]: rate_surface})
    cols = [rate_col if col == "injected_electron_rate_per_s" else col for col in EXPORT_COLUMNS]
    totals = {"peak_absorbed_power_wavelength_nm": float(wl[int(np.argmax(P))]), "cutoff_wavelength_nm": lam_c}
    if density_per_um2 is not None:
        N = check_positive("density", density_per_um2, unit="per um^2", scalar=True)
        A, w = hc.array_absorptance(spec.sigma_abs_m2, areal_density_per_um2=N, wavelength_nm=wl)
        warnings += list(w)
        J = hc.current_density_A_m2(current, areal_density_per_um2=N)
        Rr = hc.responsivity_A_W(J, E_lam)
        data.update({"absorptance": A, "photocurrent_density_A_m2": J, "responsivity_A_W": Rr,
                     "external_quantum_efficiency": hc.external_quantum_efficiency(Rr, wl)})
        cols += ARRAY_COLUMNS
        if "incidence_index" in spec.metadata:  # a planar environment: name both references
            drive = spec.field_factor * spec.n_medium / np.asarray(spec.metadata["incidence_index"], dtype=float)
            with np.errstate(divide="ignore", invalid="ignore"):
                data["responsivity_internal_A_W"] = np.where(drive > 0, Rr / drive, 0.0)
            cols.append("responsivity_internal_A_W")
            notes.append("responsivity_A_W and external_quantum_efficiency are external: per irradiance of the "
                         "light incident on the device (in the incidence medium, reflection at the surface "
                         "included); responsivity_internal_A_W is per irradiance of the drive field at the "
                         "particle, I_inc |E_drive/E_inc|^2 n_host/n_inc")
    data.update({"photon_energy_eV": E_ph, "power_interband_W": parts["interband"],
                 "power_intraband_bulk_W": parts["intraband_bulk"],
                 "power_intraband_surface_W": parts["intraband_surface"]})
    cols += EXTRA_COLUMNS + [chan_cols[k] for k in cr.CHANNELS] + list(split_cols.values())
    _band_totals(totals, wl, data, parts, rate_col, chan_cols, mono, density_per_um2 is not None)
    if not mono:
        totals.update({col: float(band_integral(wl, data[col])) for col in split_cols.values()})
    if area_um2 is not None:
        cols += _device(data, c, opts, area_um2, load_ohm, mono, totals, warnings)
    frame = pd.DataFrame({col: np.asarray(data[col], dtype=float) for col in cols}, columns=cols)
    units = _units(cols, mono)

    kappa, kappa_src = _kappa(spec, thermal_conductivity_W_mK)
    if kappa is not None:
        p_heat = totals.get("absorbed_power_W", totals.get("peak_absorbed_power_W"))
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
        i_pk = int(np.argmax(P))
        totals[f"fraction_absorbed_within_{depth_nm:g}_nm_of_surface_at_peak"] = float(surface_fraction[i_pk])

    schottky.update({"fermi_energy_eV": opts["ef"], "fermi_energy_source": opts["ef_src"],
                     "attenuation_length_nm": opts["ell"], "attenuation_length_source": opts["ell_src"],
                     "attenuation_energy_dependent": not opts["ell_fixed"], "yield_model": yield_model,
                     "geometry": geometry, "generation": generation, "momentum_factor": opts["mf"],
                     "surface_emission": surface_emission, "fermi_smearing": fermi_smearing,
                     "temperature_K": opts["temperature_K"],
                     "contact_fraction": opts["cf"], "cutoff_wavelength_nm": lam_c})
    meta = dict(spec.metadata)
    meta.update({
        "illumination": illumination.metadata(), "schottky": schottky, "cutoff_wavelength_nm": lam_c,
        "density_per_um2": density_per_um2,
        "thermal_conductivity_W_mK": kappa, "thermal_conductivity_source": kappa_src,
        "methods": _methods(geometry, generation, surface_emission, fermi_smearing), "notes": list(dict.fromkeys(notes)), "warnings": warnings,
        "safety_caution": hc.SAFETY_CAUTION, "package_version": _package_version(),
    })
    return HotCarrierResult(frame, totals, meta, units)


def _band_totals(totals, wl, data, parts, rate_col, chan_cols, mono, array):
    P, current = data["absorbed_power_W"], data["photocurrent_A"]
    i_pk = int(np.argmax(P))
    if mono:
        totals.update({"peak_absorbed_power_W": float(P[i_pk]), "peak_photocurrent_A": float(np.max(current)),
                       "note": "monochromatic illumination: each row is a separate measurement at that "
                               "wavelength and irradiance; band integrals are not meaningful"})
    else:
        totals.update({"absorbed_power_W": float(band_integral(wl, P)),
                       "absorbed_photon_rate_per_s": float(band_integral(wl, data["absorbed_photon_rate_per_s"])),
                       rate_col: float(band_integral(wl, data[rate_col])),
                       "photocurrent_A": float(band_integral(wl, current)),
                       "incident_irradiance_W_m2": float(band_integral(wl, data["irradiance_W_m2_nm"])),
                       "band_nm": [float(wl.min()), float(wl.max())]})
        for k, col in chan_cols.items():
            totals[col] = float(band_integral(wl, data[col]))
            totals[f"absorbed_power_{k}_W"] = float(band_integral(wl, parts[k]))
    if array:
        if not mono:
            totals["photocurrent_density_A_m2"] = float(band_integral(wl, data["photocurrent_density_A_m2"]))
            inc = totals["incident_irradiance_W_m2"]
            totals["band_responsivity_A_W"] = totals["photocurrent_density_A_m2"] / inc if inc > 0 else float("nan")
        resp = np.asarray(data["responsivity_A_W"], dtype=float)
        if np.any(resp > 0):
            j = int(np.nanargmax(resp))
            totals.update({"peak_responsivity_A_W": float(resp[j]), "peak_responsivity_wavelength_nm": float(wl[j])})
        else:
            totals.update({"peak_responsivity_A_W": 0.0, "peak_responsivity_wavelength_nm": float("nan")})


def _units(cols, mono):
    per = "" if mono else " nm^-1"
    fixed = {"wavelength_nm": "nm", "sigma_abs_m2": "m^2", "emission_probability": "1", "transport_factor": "1",
             "absorptance": "1", "responsivity_A_W": "A W^-1", "external_quantum_efficiency": "1",
             "responsivity_internal_A_W": "A W^-1",
             "photon_energy_eV": "eV", "noise_equivalent_power_W_Hz05": "W Hz^-1/2",
             "specific_detectivity_Jones": "cm Hz^1/2 W^-1", "irradiance_W_m2_nm": "W m^-2" + per,
             "photocurrent_density_A_m2": "A m^-2" + per, "photocurrent_A": "A" + per}
    out = {}
    for col in cols:
        if col in fixed:
            out[col] = fixed[col]
        elif col.endswith("_per_s"):
            out[col] = "s^-1" + per
        else:  # power columns
            out[col] = "W" + per
    return out


def _methods(geometry, generation, surface_emission="cone", fermi_smearing=False):
    return {
        "surface_emission": ("surface photoeffect of a step barrier driven by the normal field just inside the metal "
                             "at the contact (golden rule, acceleration form of the matrix element; the package's own "
                             "derivation in the Tamm-Schubin / Brodsky-Gurevich model family, nanoabs.surface_emission); "
                             "it replaces the escape-cone emission of the surface-assisted absorption share"
                             if surface_emission == "field" else
                             "none: surface-assisted absorption emitted through the escape cone like the volume channels"),
        "threshold": ("Fermi-Dirac smearing at the device temperature (Fowler, Phys. Rev. 38, 45 (1931))"
                      if fermi_smearing else "sharp (T = 0) threshold"),
        "generation": ("one electron-hole pair per absorbed photon; intraband (bulk and surface-assisted) carriers "
                       "flat over [0, hv] (Fowler 1931); interband: d-band holes below the band edge and sp "
                       "electrons within hv - E_d of E_F (flat boxes: a simplification of Manjavacas et al. 2014, "
                       "Sundararaman et al. 2014, Brown et al. 2016)" if generation == "band-edges" else
                       "every channel flat over [0, hv] (Fowler picture, no band edges)"),
        "emission": ("escape cone cos(theta) >= sqrt((E_F + phi)/(E_F + E)) about the normal of the curved wall "
                     "where each straight path ends, first wall hit, survival exp(-s/l(E)) (nanoabs.carriers)"
                     if geometry == "particle" else
                     "flat-interface escape cone (1 - c)/2 times the straight-radial-path transport factor "
                     "(Scales & Berini, IEEE J. Quantum Electron. 46, 633 (2010))"),
        "mechanisms": "split of absorbed power by parts of eps'' of the Drude-Lorentz model (Khurgin 2019; "
                      "Kreibig & Vollmer 1995)",
        "barrier": "image-force lowering in the depletion field, Sze & Ng (2007) Sec. 3.2.4; cut-off hc/phi_B",
        "dark_current": "thermionic emission A** T^2 exp(-q phi_B/kT), Sze & Ng (2007) Sec. 3.3.2",
        "heating": "Delta T = P/(4 pi kappa R), Govorov & Richardson, Nano Today 2, 30 (2007)",
        "array": "sparse non-interacting limit: absorptance = N sigma_abs",
    }


def _main_metal(particle):
    metals = [m for m in particle.layer_materials() if m.is_metal]
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
