"""Spectra of one particle (or a broadcast family of sizes): cross-sections, efficiencies, summaries.

:func:`spectrum` looks up permittivities, applies surface damping to the metal
parts, dispatches to the solver (full Mie for spheres and layered spheres,
dipole-limit or corrected quasi-static for ellipsoids) and returns a
:class:`Spectrum` with SI cross-sections, efficiencies, derived quantities and
metadata.

Methods
-------
``"mie"``         full Mie series (homogeneous or layered sphere; :mod:`nanoabs.mie`)
``"miepython"``   homogeneous sphere through miepython (reference implementation)
``"quasistatic"`` static dipole limit (B&H 1983 eqs. 5.7, 5.32, 5.35, 5.36)
``"mlwa"``        corrected quasi-static: radiative reaction and dynamic
                  depolarisation (Meier & Wokaun 1983; Moroz 2009 for ellipsoids)
``"auto"``        ``mie`` for spheres and layered spheres, ``mlwa`` for ellipsoids

Validity of the dipole methods: the largest dimension should stay below about a
tenth of the wavelength in the medium (static) or ``k a_max ≲ 0.5`` (corrected);
beyond that the result carries a warning in ``metadata["warnings"]``.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from . import __version__
from ._errors import NanoabsError, check_choice, check_finite_array
from .drude_lorentz import surface_damping_eV
from .materials import damped_permittivity
from .particles import Ellipsoid, LayeredSphere, Sphere, _plain, resolve_polarization

__all__ = ["Spectrum", "spectrum", "METHODS", "FRAME_COLUMNS", "UNITS"]

METHODS = ("auto", "mie", "miepython", "quasistatic", "mlwa")

FRAME_COLUMNS = ["wavelength_nm", "sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2",
                 "q_abs", "q_sca", "q_ext", "q_abs_eqvol", "sigma_abs_per_metal_volume_m_1",
                 "absorbed_fraction", "dipole_bound_ratio"]
UNITS = {"wavelength_nm": "nm", "sigma_abs_m2": "m^2", "sigma_sca_m2": "m^2",
         "sigma_ext_m2": "m^2", "q_abs": "1", "q_sca": "1", "q_ext": "1", "q_abs_eqvol": "1",
         "sigma_abs_per_metal_volume_m_1": "m^-1", "absorbed_fraction": "1",
         "dipole_bound_ratio": "1"}

NM2_TO_M2 = 1e-18


@dataclass
class Spectrum:
    """Result of :func:`spectrum`. Arrays have shape (..., W) for W wavelengths.

    Attributes
    ----------
    wavelength_nm : (W,) vacuum wavelengths [nm]
    sigma_abs_m2, sigma_sca_m2, sigma_ext_m2 : cross-sections [m²]
    geometric_cross_section_m2 : the reference area of q_* [m²] (see metadata)
    equal_volume_area_m2 : π r_v² of the equal-volume sphere [m²]
    metal_volume_m3 : volume of the metal parts [m³]
    n_medium : (W,) real refractive index of the medium
    metadata : dict (method, materials, medium, damping lengths, warnings, version)
    """

    wavelength_nm: np.ndarray
    sigma_abs_m2: np.ndarray
    sigma_sca_m2: np.ndarray
    sigma_ext_m2: np.ndarray
    geometric_cross_section_m2: np.ndarray
    equal_volume_area_m2: np.ndarray
    metal_volume_m3: np.ndarray
    n_medium: np.ndarray
    metadata: dict = field(default_factory=dict)
    _layer_eps: object = field(default_factory=list, repr=False)  # list, or a callable returning it

    @property
    def layer_eps(self) -> list:
        """Permittivity used for each layer (core first), broadcastable against the cross-sections.

        Computed on first access when the solver did not need it as an array.
        """
        if callable(self._layer_eps):
            self._layer_eps = self._layer_eps()
        return self._layer_eps

    def __getstate__(self):  # pickling (process pools, caches): evaluate the deferred ε first
        state = dict(self.__dict__)
        state["_layer_eps"] = self.layer_eps
        return state

    # -- derived quantities --------------------------------------------------
    @property
    def q_abs(self):
        return self.sigma_abs_m2 / self.geometric_cross_section_m2

    @property
    def q_sca(self):
        return self.sigma_sca_m2 / self.geometric_cross_section_m2

    @property
    def q_ext(self):
        return self.sigma_ext_m2 / self.geometric_cross_section_m2

    @property
    def q_abs_eqvol(self):
        """σ_abs / (π r_v²) with r_v the radius of the equal-volume sphere."""
        return self.sigma_abs_m2 / self.equal_volume_area_m2

    @property
    def sigma_abs_per_metal_volume_m_1(self):
        """σ_abs per metal volume [m⁻¹] (absorption per unit of metal used)."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(self.metal_volume_m3 > 0, self.sigma_abs_m2 / self.metal_volume_m3, np.nan)

    @property
    def absorbed_fraction(self):
        """σ_abs / σ_ext: the part of the removed light a detector keeps as absorption."""
        with np.errstate(divide="ignore", invalid="ignore"):
            return np.where(self.sigma_ext_m2 > 0, self.sigma_abs_m2 / self.sigma_ext_m2, np.nan)

    @property
    def dipole_bound_ratio(self):
        """σ_abs / (3λ²/(8π)), λ in the medium: the single-channel electric-dipole absorption bound.

        The maximum absorption cross-section of a single electric-dipole channel
        is 3λ²/(8π) (Tretyakov, Plasmonics 9, 935 (2014), eq. 8; from memory).
        Values above 1 mean several multipole channels absorb.
        """
        lam_m = self.wavelength_nm * 1e-9 / self.n_medium
        return self.sigma_abs_m2 / (3.0 * lam_m**2 / (8.0 * np.pi))

    def peak_wavelength_nm(self):
        """Wavelength of maximum σ_abs on the grid, refined by a parabola through the top 3 points."""
        return _peak(self.wavelength_nm, self.sigma_abs_m2)

    def fwhm_nm(self):
        """Full width at half maximum of σ_abs [nm]; NaN when the half maximum is not reached inside
        the grid on both sides of the peak (the peak is cut by the grid edge)."""
        return _fwhm(self.wavelength_nm, self.sigma_abs_m2)

    def summary(self) -> dict:
        """Scalar summary of a single-particle spectrum."""
        if np.ndim(self.sigma_abs_m2) != 1:
            raise NanoabsError("summary() is for one particle; index the family first")
        i = int(np.argmax(self.sigma_abs_m2))
        return {
            "peak_wavelength_nm": float(self.peak_wavelength_nm()),
            "fwhm_nm": float(self.fwhm_nm()),
            "peak_sigma_abs_m2": float(self.sigma_abs_m2[i]),
            "peak_q_abs": float(self.q_abs[i]),
            "absorbed_fraction_at_peak": float(self.absorbed_fraction[i]),
            "dipole_bound_ratio_at_peak": float(self.dipole_bound_ratio[i]),
        }

    def write(self, path, *, force: bool = False):
        """Export :meth:`to_frame` with :data:`UNITS`, the metadata and :meth:`summary` (CSV + JSON)."""
        from .export import write_export

        meta = dict(self.metadata)
        meta["summary"] = self.summary()
        return write_export(self.to_frame(), path, metadata=meta, units=UNITS, force=force)

    def to_frame(self):
        """pandas DataFrame with :data:`FRAME_COLUMNS` (one particle: one row per wavelength)."""
        import pandas as pd

        if np.ndim(self.sigma_abs_m2) != 1:
            raise NanoabsError("to_frame() is for one particle; use nanoabs.design.sweep for families")
        data = {"wavelength_nm": self.wavelength_nm}
        for c in FRAME_COLUMNS[1:]:
            data[c] = np.broadcast_to(np.asarray(getattr(self, c), dtype=float), self.wavelength_nm.shape)
        return pd.DataFrame(data, columns=FRAME_COLUMNS)


def _peak(wl, y):
    y = np.asarray(y)
    i = np.argmax(y, axis=-1)
    if y.ndim == 1:
        if 0 < i < len(wl) - 1:
            x0, x1, x2 = wl[i - 1:i + 2]
            y0, y1, y2 = y[i - 1:i + 2]
            den = (x0 - x1) * (x0 - x2) * (x1 - x2)
            A = (x2 * (y1 - y0) + x1 * (y0 - y2) + x0 * (y2 - y1)) / den
            B = (x2**2 * (y0 - y1) + x1**2 * (y2 - y0) + x0**2 * (y1 - y2)) / den
            if A < 0:
                return float(np.clip(-B / (2 * A), x0, x2))
        return float(wl[i])
    return np.apply_along_axis(lambda r: _peak(wl, r), -1, y)


def _fwhm(wl, y):
    y = np.asarray(y)
    if y.ndim > 1:
        return np.apply_along_axis(lambda r: _fwhm(wl, r), -1, y)
    i = int(np.argmax(y))
    half = y[i] / 2.0
    left = np.flatnonzero(y[:i] < half)
    right = np.flatnonzero(y[i:] < half)
    if left.size == 0 or right.size == 0 or half <= 0:
        return float("nan")
    j = left[-1]
    xl = np.interp(half, [y[j], y[j + 1]], [wl[j], wl[j + 1]])
    k = i + right[0]
    xr = np.interp(half, [y[k], y[k - 1]], [wl[k], wl[k - 1]])
    return float(xr - xl)


# -- permittivities ------------------------------------------------------------


def _damping_extra_eV(mat, length_nm, on, A, notes, label):
    """Extra Drude damping Δγ [eV] of a metal part of mean free path L [nm], or None if not applied.

    Records what was applied (or why not) in ``notes``.
    """
    if not (on and getattr(mat, "is_metal", False)):
        return None
    from .hotcarriers import FREE_ELECTRON

    model = getattr(mat, "model", None)
    if model is None or model.plasma_energy_eV <= 0 or mat.name not in FREE_ELECTRON:
        notes["warnings"].append(f"surface damping not applied to {label} ({mat.label}): no fitted "
                                 "Drude term or tabulated Fermi velocity")
        return None
    vf = FREE_ELECTRON[mat.name].fermi_velocity_m_s
    L = np.asarray(length_nm, dtype=float)
    extra = surface_damping_eV(L, vf, A=A)
    notes["surface_damping"].append({
        "part": label, "material": mat.label, "effective_length_nm": _plain(L),
        "extra_damping_eV": _plain(extra), "A": A, "fermi_velocity_m_s": vf,
        "drude_from": "shipped Drude-Lorentz fit of the dataset",
    })
    return extra


_CLIP_NOTE = "surface-damped eps'' of {} clipped at 0 at some wavelengths"


def _eps_with_damping(mat, wl, length_nm, on, A, notes, label):
    """ε of ``mat`` on ``wl``, with the surface-damping correction for mean free path L [nm]."""
    extra = _damping_extra_eV(mat, length_nm, on, A, notes, label)
    if extra is None:
        return np.asarray(mat.permittivity(wl), dtype=complex)
    out, clipped = damped_permittivity(mat, wl, extra)
    if clipped:
        notes["warnings"].append(_CLIP_NOTE.format(label))
    return out


# -- the solvers ---------------------------------------------------------------


def _mie_layers(eps_layers, radii, n_med, wl):
    from .mie import mie_cross_sections_nm2

    return mie_cross_sections_nm2(eps_layers, radii, n_med, wl)


def _miepython_sphere(eps, radius, n_med, wl):
    import miepython

    k = 2 * np.pi * n_med / wl
    m = np.sqrt(eps) / n_med
    x = k * radius
    m, x = np.broadcast_arrays(m, x)
    qext = np.empty(m.shape)
    qsca = np.empty(m.shape)
    for idx in np.ndindex(m.shape):
        # miepython uses m = n - ik (exp(+iwt)): pass the conjugate
        e, s, _, _ = miepython.efficiencies_mx(np.conj(m[idx]), x[idx])
        qext[idx], qsca[idx] = e, s
    area = np.pi * np.asarray(radius) ** 2
    return (qext - qsca) * area, qsca * area, qext * area


def _nested_eps(eps_layers, radii):
    """Quasi-static equivalent permittivity of a multi-layer sphere (exact in the dipole limit).

    A coated sphere polarises like a homogeneous sphere of its outer radius with
    ε_eq = ε₂ [ε₁ + 2ε₂ + 2f(ε₁ − ε₂)] / [ε₁ + 2ε₂ − f(ε₁ − ε₂)], f = (r₁/r₂)³, which is
    B&H (1983) eq. 5.36 rewritten; applied outward layer by layer.
    """
    e_in, r_in = eps_layers[0], radii[0]
    for e_out, r_out in zip(eps_layers[1:], radii[1:]):
        f = (r_in / r_out) ** 3
        e_in = e_out * (e_in + 2 * e_out + 2 * f * (e_in - e_out)) / (e_in + 2 * e_out - f * (e_in - e_out))
        r_in = r_out
    return e_in


def _dipole_sphere(eps_layers, radii, n_med, wl, corrected):
    from . import quasistatic as qs

    k = 2 * np.pi * n_med / wl
    eps_m = n_med**2
    if len(eps_layers) == 2:
        if corrected:
            alpha = qs.polarizability_coated_sphere_mlwa(eps_layers[0], eps_layers[1], eps_m,
                                                         radii[0], radii[1], k)
        else:
            alpha = qs.polarizability_coated_sphere(eps_layers[0], eps_layers[1], eps_m, radii[0], radii[1])
    else:
        e = _nested_eps(eps_layers, radii)
        alpha = (qs.polarizability_sphere_mlwa(e, eps_m, radii[-1], k) if corrected
                 else qs.polarizability_sphere(e, eps_m, radii[-1]))
    return qs.cross_sections(alpha, k, corrected=corrected)


def _field_axes(pol, core_axes, shell_axes):
    """[(axis, weight)]: the distinct principal axes a field samples, with their weights.

    A fixed polarisation samples one axis. Random orientation averages the three
    principal cross-sections with weight 1/3 each (see
    :func:`~nanoabs.quasistatic.orientation_average`); a spheroid's two equal
    axes give equal cross-sections, so each distinct axis is computed once.
    """
    if pol != "random":
        return [(pol, 1.0)]

    def same(i, j):
        return (np.array_equal(*np.broadcast_arrays(core_axes[i], core_axes[j])) and
                (shell_axes is None or np.array_equal(*np.broadcast_arrays(shell_axes[i], shell_axes[j]))))

    if same(1, 2):
        return [("x", 1.0 / 3.0), ("y", 2.0 / 3.0)]
    if same(0, 1):
        return [("x", 2.0 / 3.0), ("z", 1.0 / 3.0)]
    return [("x", 1.0 / 3.0), ("y", 1.0 / 3.0), ("z", 1.0 / 3.0)]


def _dipole_ellipsoid(eps_core, eps_shell, core_axes, shell_axes, n_med, wl, pol, corrected):
    """Cross-sections [nm²] of a (coated) ellipsoid in the dipole limit (numpy path)."""
    from . import quasistatic as qs

    k = 2 * np.pi * n_med / wl
    eps_m = n_med**2
    total = None
    for ax, weight in _field_axes(pol, core_axes, shell_axes):
        if eps_shell is None:
            alpha = (qs.polarizability_ellipsoid_mlwa(eps_core, eps_m, *core_axes, k, axis=ax) if corrected
                     else qs.polarizability_ellipsoid(eps_core, eps_m, *core_axes, axis=ax))
        else:
            alpha = (qs.polarizability_coated_ellipsoid_mlwa(eps_core, eps_shell, eps_m, core_axes,
                                                             shell_axes, k, axis=ax) if corrected
                     else qs.polarizability_coated_ellipsoid(eps_core, eps_shell, eps_m, core_axes,
                                                             shell_axes, axis=ax))
        sections = [weight * x for x in qs.cross_sections(alpha, k, corrected=corrected)]
        total = sections if total is None else [t + x for t, x in zip(total, sections)]
    return tuple(total)


def _dipole_ellipsoid_compiled(mat, core_axes, core_L, wl, n_med, pol, surface_damping, damping_A,
                               notes, label):
    """MLWA cross-sections [m²] of a homogeneous ellipsoid family by the compiled kernel, or None.

    Used when numba is available and the geometry does not vary with wavelength
    (semi-axes scalars or of shape (..., 1)); returns ``(sa, ss, se, eps_thunk,
    nonfinite)`` with ``eps_thunk()`` giving the permittivity list the numpy path
    would have produced (evaluated only when asked for) and ``nonfinite`` whether
    any cross-section is NaN or infinite.
    """
    from . import _compiled
    from . import quasistatic as qs
    from .drude_lorentz import HC_EV_NM

    G = np.broadcast_shapes(*(np.shape(a) for a in core_axes))
    if (G and G[-1] != 1) or not _compiled.available():
        return None
    axes = [np.broadcast_to(a, G).reshape(-1) for a in core_axes]
    L_all = qs.depolarization_factors(*axes)
    D_all = qs.dynamic_depolarization_factors(*axes, depolarization=L_all)
    picks = [("xyz".index(ax), w) for ax, w in _field_axes(pol, core_axes, None)]
    depol = np.stack([np.broadcast_to(L_all[i], axes[0].shape) for i, _ in picks])
    dyn = np.stack([np.broadcast_to(D_all[i] / (4.0 * np.pi * axes[i]), axes[0].shape) for i, _ in picks])
    weights = np.array([w for _, w in picks])
    volume = 4.0 / 3.0 * np.pi * axes[0] * axes[1] * axes[2]
    local = {"warnings": [], "surface_damping": []}  # merged into notes only if this path is taken
    extra_G = _damping_extra_eV(mat, core_L, surface_damping, damping_A, local, label)
    if extra_G is None:
        drude, extra = (0.0, 0.0), np.zeros(volume.shape)
    else:
        drude = (mat.model.plasma_energy_eV**2, mat.model.damping_eV)
        extra = np.broadcast_to(extra_G, G).reshape(-1)
    try:
        sa, ss, se, n_clip, n_bad = _compiled.ellipsoid_mlwa_map(
            mat.permittivity(wl), HC_EV_NM / wl, drude, extra, n_med**2, 2 * np.pi * n_med / wl,
            depol, dyn, weights, volume, NM2_TO_M2)
    except _compiled.Unavailable:
        return None
    if n_clip:
        local["warnings"].append(_CLIP_NOTE.format(label))
    for key in local:
        notes[key] += local[key]
    shape = G[:-1] + wl.shape if G else wl.shape
    sa, ss, se = (x.reshape(shape) for x in (sa, ss, se))

    def eps_thunk():  # the permittivity the numpy path would have used (notes already made)
        if extra_G is None:
            return [np.asarray(mat.permittivity(wl), dtype=complex)]
        return [damped_permittivity(mat, wl, extra_G)[0]]

    return sa, ss, se, eps_thunk, n_bad > 0


def spectrum(particle, wavelength_nm, *, medium="water", method: str = "auto",
             polarization: str = "random", surface_damping: bool = True,
             damping_A: float = 1.0) -> Spectrum:
    """Absorption, scattering and extinction spectra of one particle in a medium.

    Parameters
    ----------
    particle : Sphere, LayeredSphere or Ellipsoid (see :mod:`nanoabs.particles`)
    wavelength_nm : array
        Vacuum wavelengths [nm], strictly increasing.
    medium : str, float or Material, keyword-only
        Embedding medium (default water). Must be non-absorbing at the
        wavelengths used (cross-sections in an absorbing host are ill-defined).
    method : {"auto", "mie", "miepython", "quasistatic", "mlwa"}, keyword-only
    polarization : str, keyword-only
        Ellipsoids: "x", "y", "z" or "random"; rods/discs: "long", "short" or
        "random" (orientation average). Ignored for spheres.
    surface_damping : bool, keyword-only
        Add the size-dependent surface-scattering damping to metal parts (on by
        default; its effect matters for metal parts below a few tens of nm).
        Effective lengths: 4V/S for solid particles (Coronado & Schatz 2003), the
        thickness for shells (a documented approximation).
    damping_A : float, keyword-only
        Surface-scattering parameter A in γ(L) = γ + A v_F/L (Kreibig & Vollmer
        1995); default 1 (isotropic diffuse scattering in the classical limit).

    Returns
    -------
    Spectrum
    """
    from .materials import material

    wl = check_finite_array("wavelength_nm", wavelength_nm, increasing=True)
    if np.any(wl <= 0):
        raise NanoabsError(f"wavelength = {wl.min():g} nm: must be > 0")
    method = check_choice("method", method, METHODS)
    med = material(medium) if not hasattr(medium, "permittivity") else medium
    n_med_c = np.atleast_1d(med.refractive_index(wl)).astype(complex)
    notes = {"warnings": [], "surface_damping": []}
    worst = float(np.max(n_med_c.imag))
    if worst > 0.01 * float(np.min(n_med_c.real)):
        raise NanoabsError(f"medium {med.label} absorbs strongly (k up to {worst:.3g}) at these wavelengths: "
                           "cross-sections need a (nearly) non-absorbing host; choose another range or medium")
    if worst > 1e-5:
        notes["warnings"].append(f"medium {med.label} absorbs weakly (k up to {worst:.2g}); its absorption "
                                 "is neglected (real part of its index used)")
    n_med = n_med_c.real
    backend = "numpy"
    nonfinite = None  # a solver that already knows sets it

    if isinstance(particle, (Sphere, LayeredSphere)):
        layers = particle.layers
        radii = [np.asarray(r, dtype=float) for _, r in layers]
        eps_layers = []
        for i, (mat, r) in enumerate(layers):
            if i == 0:
                L = 4.0 / 3.0 * r
                label = "sphere" if isinstance(particle, Sphere) else "core"
            else:
                L = r - radii[i - 1]
                label = f"shell {i}"
            eps_layers.append(_eps_with_damping(mat, wl, L, surface_damping, damping_A, notes, label))
        if method == "auto":
            method = "mie"
        if method == "mie":
            sa, ss, se, backend = _mie_layers(eps_layers, radii, n_med, wl)
        elif method == "miepython":
            if len(layers) != 1:
                raise NanoabsError("method = 'miepython' handles homogeneous spheres only; use 'mie'")
            sa, ss, se = _miepython_sphere(eps_layers[0], radii[0], n_med, wl)
        else:
            corrected = method == "mlwa"
            sa, ss, se = _dipole_sphere(eps_layers, radii, n_med, wl, corrected)
            _check_dipole_validity(radii[-1], wl, n_med, method, notes)
        sa, ss, se = (np.asarray(x) * NM2_TO_M2 for x in (sa, ss, se))
        geo = eqv = np.pi * radii[-1] ** 2
        metal_vol = sum(4.0 / 3.0 * np.pi * (r**3 - (radii[i - 1] ** 3 if i else 0.0))
                        for i, ((mat, _), r) in enumerate(zip(layers, radii)) if mat.is_metal)
        ref_area = "pi r_outer^2"
        pol = None
        used_eps = eps_layers
    elif isinstance(particle, Ellipsoid):
        pol = resolve_polarization(particle, polarization)
        core_axes = tuple(np.asarray(a, dtype=float) for a in particle.semi_axes_nm)
        from .quasistatic import ellipsoid_surface_area

        core_surface = ellipsoid_surface_area(*core_axes)
        core_L = 4.0 * (4.0 / 3.0 * np.pi * (core_axes[0] * core_axes[1] * core_axes[2])) / core_surface
        label = "core" if particle.shell else particle.kind
        if method == "auto":
            method = "mlwa"
        if method in ("mie", "miepython"):
            raise NanoabsError(f"method = {method!r} needs a sphere; ellipsoids allow 'quasistatic' or 'mlwa'")
        fast = None
        if method == "mlwa" and particle.shell is None:
            fast = _dipole_ellipsoid_compiled(particle.material, core_axes, core_L, wl, n_med, pol,
                                              surface_damping, damping_A, notes, label)
        shell_axes = None
        if fast is not None:
            sa, ss, se, used_eps, nonfinite = fast
            backend = "compiled (numba)"
        else:
            eps_core = _eps_with_damping(particle.material, wl, core_L, surface_damping, damping_A, notes,
                                         label)
            eps_shell = None
            if particle.shell is not None:
                shell_axes = tuple(np.asarray(a, dtype=float) for a in particle.shell_axes_nm())
                eps_shell = _eps_with_damping(particle.shell[0], wl, particle.shell[1], surface_damping,
                                              damping_A, notes, "shell")
            used_eps = [eps_core] + ([eps_shell] if eps_shell is not None else [])
            sa, ss, se = (np.asarray(x) * NM2_TO_M2 for x in
                          _dipole_ellipsoid(eps_core, eps_shell, core_axes, shell_axes, n_med, wl, pol,
                                            method == "mlwa"))
        outer = shell_axes or core_axes
        _check_dipole_validity(outer, wl, n_med, method, notes)
        vol = 4.0 / 3.0 * np.pi * (outer[0] * outer[1] * outer[2])
        if pol == "random":
            geo = (core_surface if shell_axes is None else ellipsoid_surface_area(*outer)) / 4.0
            ref_area = "surface area / 4 (random orientation, Cauchy's theorem)"
        else:
            geo = particle.projected_area_nm2(pol)
            ref_area = ("projected area pi a b (light along z)" if pol in ("x", "y")
                        else "projected area pi b c (light along x)")
        eqv = np.pi * (3 * vol / (4 * np.pi)) ** (2.0 / 3.0)
        core_vol = 4.0 / 3.0 * np.pi * (core_axes[0] * core_axes[1] * core_axes[2])
        metal_vol = (core_vol if particle.material.is_metal else 0.0)
        if particle.shell is not None and particle.shell[0].is_metal:
            metal_vol = metal_vol + (vol - core_vol)
    else:
        raise NanoabsError(f"particle = {type(particle).__name__}: expected Sphere, LayeredSphere or Ellipsoid")

    if nonfinite is None:
        nonfinite = not (np.isfinite(np.sum(sa)) and np.isfinite(np.sum(se)))  # one pass, no temporaries
    if nonfinite:
        notes["warnings"].append("non-finite cross-sections at some wavelengths (check inputs)")
    meta = {
        "particle": particle.describe(),
        "method": method,
        "solver_backend": backend,
        "method_reference": _METHOD_REFS[method],
        "polarization": pol if pol else "any (sphere)",
        "efficiency_reference_area": ref_area,
        "q_abs_eqvol_reference_area": "pi r_v^2 of the equal-volume sphere",
        "medium": med.metadata(),
        "materials": _materials_meta(particle),
        "surface_damping": notes["surface_damping"] if surface_damping else "off",
        "warnings": notes["warnings"],
        "package_version": __version__,
    }
    shape = np.shape(sa)  # reference areas: read-only broadcast views, not copies
    return Spectrum(wl, sa, ss, se, np.broadcast_to(np.asarray(geo) * NM2_TO_M2, shape),
                    np.broadcast_to(np.asarray(eqv) * NM2_TO_M2, shape),
                    np.asarray(metal_vol, dtype=float) * 1e-27, n_med, meta, used_eps)


_METHOD_REFS = {
    "mie": "Mie series for (layered) spheres, nanoabs.mie (Yang, Appl. Opt. 42, 1710 (2003))",
    "miepython": "miepython (S. Prahl) homogeneous-sphere Mie series",
    "quasistatic": "dipole limit, Bohren & Huffman (1983) eqs. 5.7, 5.32, 5.35, 5.36",
    "mlwa": "corrected quasi-static (radiative reaction + dynamic depolarisation): Meier & Wokaun, "
            "Opt. Lett. 8, 581 (1983); Moroz, J. Opt. Soc. Am. B 26, 517 (2009)",
}


def _materials_meta(particle):
    if isinstance(particle, Sphere):
        return [particle.material.metadata()]
    if isinstance(particle, LayeredSphere):
        return [particle.core.metadata()] + [m.metadata() for m, _ in particle.shells]
    out = [particle.material.metadata()]
    if particle.shell is not None:
        out.append(particle.shell[0].metadata())
    return out


def _check_dipole_validity(axes, wl, n_med, method, notes):
    from .quasistatic import CORRECTED_VALIDITY, STRICT_VALIDITY, validity_ratio

    axes = axes if isinstance(axes, tuple) else (axes,)
    a_max = np.asarray(axes[0], dtype=float)
    for a in axes[1:]:
        a_max = np.maximum(a_max, a)
    # the largest particle at each wavelength decides (the last axis is the wavelength axis only
    # when the geometry varies with wavelength)
    if a_max.ndim and a_max.shape[-1] == wl.size:
        a_max = a_max.reshape(-1, wl.size).max(axis=0)
    else:
        a_max = a_max.max()
    ratio = np.asarray(validity_ratio(a_max, wl, n_medium=n_med))
    limit = STRICT_VALIDITY if method == "quasistatic" else CORRECTED_VALIDITY
    if np.any(ratio > limit):
        bad = wl[np.broadcast_to(ratio > limit, wl.shape)]
        what = ("largest dimension above a tenth of the wavelength in the medium" if method == "quasistatic"
                else "k a_max above 0.5")
        notes["warnings"].append(
            f"{method}: {what} for wavelengths up to {bad.max():g} nm; outside the method's validity "
            "(use method='mie' for spheres, treat ellipsoid results as indicative)")
