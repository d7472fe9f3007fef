"""Spectra of one particle (or a broadcast family of sizes): cross-sections, efficiencies, summaries.

:func:`spectrum` resolves the materials (with surface damping for metal parts)
and the environment into a :class:`nanoabs.solvers.Problem`, picks a solver from
:data:`nanoabs.solvers.METHODS` and wraps its answer in a :class:`Spectrum` with SI
cross-sections, efficiencies, derived quantities, cautions and metadata.

Methods
-------
``"mie"``         full Mie series (homogeneous or layered sphere; :mod:`nanoabs.mie`)
``"miepython"``   homogeneous sphere through miepython (reference implementation)
``"quasistatic"`` static dipole limit (B&H 1983 eqs. 5.7, 5.32, 5.35, 5.36; :mod:`nanoabs.dipole`)
``"mlwa"``        corrected quasi-static: radiative reaction and dynamic
                  depolarisation (Meier & Wokaun 1983; Moroz 2009 for ellipsoids)
``"auto"``        the rule of :func:`nanoabs.solvers.choose`: exact methods first

Validity of the dipole methods: the largest dimension should stay below about a
tenth of the wavelength in the medium (static) or ``k a_max ≲ 0.5`` (corrected);
beyond that the result carries a caution (:mod:`nanoabs.validity`).
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from ._version import version as _package_version
from ._errors import NanoabsError, check_finite_array, check_flag
from .drude_lorentz import surface_damping_eV
from .particles import _plain, check_size_family, resolve_polarization
from .solvers import METHODS, Homogeneous, Problem, choose, is_environment
from .validity import Caution, emit

__all__ = ["Spectrum", "spectrum", "METHODS", "FRAME_COLUMNS", "UNITS"]

FRAME_COLUMNS = ["wavelength_nm", "sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2",
                 "q_abs", "q_sca", "q_ext", "q_abs_eqvol", "sigma_abs_per_metal_volume_m_1",
                 "absorbed_fraction", "dipole_bound_ratio", "field_factor"]
UNITS = {"wavelength_nm": "nm", "sigma_abs_m2": "m^2", "sigma_sca_m2": "m^2",
         "sigma_ext_m2": "m^2", "q_abs": "1", "q_sca": "1", "q_ext": "1", "q_abs_eqvol": "1",
         "sigma_abs_per_metal_volume_m_1": "m^-1", "absorbed_fraction": "1",
         "dipole_bound_ratio": "1", "field_factor": "1"}

NM2_TO_M2 = 1e-18


@dataclass
class Spectrum:
    """Result of :func:`spectrum`. Arrays have shape (..., W) for W wavelengths.

    Parameters
    ----------
    wavelength_nm : numpy.ndarray
        (W,) vacuum wavelengths [nm].
    sigma_abs_m2 : numpy.ndarray
        Absorption cross-section [m²].
    sigma_sca_m2 : numpy.ndarray
        Scattering cross-section [m²].
    sigma_ext_m2 : numpy.ndarray
        Extinction cross-section [m²].
    geometric_cross_section_m2 : numpy.ndarray
        The reference area of the efficiencies ``q_abs``, ``q_sca``, ``q_ext`` [m²] (see metadata).
    equal_volume_area_m2 : numpy.ndarray
        π r_v² of the sphere of equal volume [m²].
    metal_volume_m3 : numpy.ndarray
        Volume of the metal parts [m³].
    n_medium : numpy.ndarray
        (W,) real refractive index of the surrounding medium [1].
    metadata : dict, optional
        Method, materials, medium, damping lengths, warnings, version.
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
    _environment: object = field(default=None, repr=False)  # the environment object that was solved in
    _stack_solution: object = field(default=None, repr=False)  # multipole solution of a sphere on a stack

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
        with np.errstate(divide="ignore", invalid="ignore"):  # 0 for a particle without metal, never NaN
            return np.where(self.metal_volume_m3 > 0, self.sigma_abs_m2 / self.metal_volume_m3, 0.0)

    @property
    def absorbed_fraction(self):
        """σ_abs / σ_ext: the part of the removed light a detector keeps as absorption."""
        with np.errstate(divide="ignore", invalid="ignore"):  # nothing removed: nothing absorbed (0, not NaN)
            return np.where(self.sigma_ext_m2 > 0, self.sigma_abs_m2 / self.sigma_ext_m2, 0.0)

    @property
    def dipole_bound_ratio(self):
        """σ_abs / (3λ²/(8π)), λ in the medium: the single-channel electric-dipole absorption bound.

        The maximum absorption cross-section of a single electric-dipole channel
        is 3λ²/(8π) (Tretyakov, Plasmonics 9, 935 (2014), eq. 8; from memory).
        Values above 1 mean several multipole channels absorb.
        """
        lam_m = self.wavelength_nm * 1e-9 / self.n_medium
        return self.sigma_abs_m2 / (3.0 * lam_m**2 / (8.0 * np.pi))

    @property
    def field_factor(self):
        """Field factor ``|E_drive/E_inc|^2`` at the particle centre without the particle [1] (W,).

        1 in a homogeneous host; the standing-wave or transmission factor of a planar environment.
        """
        ff = self.metadata.get("field_factor")
        return np.ones(self.wavelength_nm.shape) if ff is None else np.asarray(ff, dtype=float)

    def peak_wavelength_nm(self):
        """Wavelength of maximum σ_abs [nm], refined by a parabola through the top 3 points.

        NaN when the maximum sits on the first or last grid point: that is not a peak
        (the absorption rises beyond the window); :meth:`summary` says which end.
        """
        return _peak(self.wavelength_nm, self.sigma_abs_m2)

    def fwhm_nm(self):
        """Full width at half maximum of σ_abs [nm]; NaN when there is no peak inside the window or
        the half maximum is not reached inside it on one side (:meth:`summary` says which)."""
        return _fwhm(self.wavelength_nm, self.sigma_abs_m2)

    def summary(self) -> dict:
        """Scalar summary of a single-particle spectrum.

        ``peak_status`` is "peak" or says that the absorption rises beyond one end of the
        window (then ``peak_wavelength_nm`` is NaN); ``fwhm_status`` is "resolved" or says why
        ``fwhm_nm`` is NaN. The ``*_at_peak`` values are taken at the largest σ_abs in the window.
        """
        if np.ndim(self.sigma_abs_m2) != 1:
            raise NanoabsError("summary() is for one particle; index the family first")
        i = int(np.argmax(self.sigma_abs_m2))
        return {
            "peak_wavelength_nm": float(self.peak_wavelength_nm()),
            "peak_status": _peak_status(self.wavelength_nm, self.sigma_abs_m2),
            "fwhm_nm": float(self.fwhm_nm()),
            "fwhm_status": _fwhm_status(self.wavelength_nm, self.sigma_abs_m2),
            "peak_sigma_abs_m2": float(self.sigma_abs_m2[i]),
            "peak_q_abs": float(self.q_abs[i]),
            "absorbed_fraction_at_peak": float(self.absorbed_fraction[i]),
            "dipole_bound_ratio_at_peak": float(self.dipole_bound_ratio[i]),
        }

    # -- looking at it ----------------------------------------------------------
    def _headline(self) -> str:
        m = self.metadata
        part = m.get("particle", {})
        env = m.get("environment", {})
        host = (env.get("medium") or {}).get("material", env.get("kind", "?")) if isinstance(env, dict) else "?"
        fam = "" if np.ndim(self.sigma_abs_m2) == 1 else f", family of shape {np.shape(self.sigma_abs_m2)[:-1]}"
        return (f"{part.get('shape', 'particle')} of {part.get('material', part.get('core', '?'))} in {host}; "
                f"method {m.get('method', '?')}; {self.wavelength_nm.size} wavelengths "
                f"{self.wavelength_nm[0]:g}-{self.wavelength_nm[-1]:g} nm{fam}")

    def __repr__(self) -> str:
        lines = [f"Spectrum({self._headline()})"]
        if np.ndim(self.sigma_abs_m2) == 1:
            sm = self.summary()
            peak = (f"peak {sm['peak_wavelength_nm']:.1f} nm" if sm["peak_status"] == "peak"
                    else sm["peak_status"])
            lines.append(f"  {peak}; largest sigma_abs {sm['peak_sigma_abs_m2']:.3g} m^2, "
                         f"Q_abs {sm['peak_q_abs']:.3g}")
        n = len(self.metadata.get("cautions", []))
        if n:
            lines.append(f"  {n} caution(s): see .metadata['cautions']")
        return "\n".join(lines)

    def _repr_html_(self) -> str:
        import html

        rows = "".join(f"<li>{html.escape(c['message'])}</li>" for c in self.metadata.get("cautions", []))
        body = html.escape(repr(self)).replace("\n", "<br>")
        return f"<div><b>nanoabs Spectrum</b><br>{body}" + (f"<ul>{rows}</ul>" if rows else "") + "</div>"

    def plot(self, ax=None, quantity: str = "sigma_abs_m2", **line_kw):
        """Plot one quantity against wavelength; returns the matplotlib Axes.

        Parameters
        ----------
        ax : matplotlib Axes, optional
            Where to draw (a new figure through pyplot when omitted, so notebooks show it).
        quantity : str
            A column of :data:`FRAME_COLUMNS` (default ``"sigma_abs_m2"``); cross-sections
            are drawn in nm².
        **line_kw
            Passed to ``Axes.plot`` (``label``, ``color``, ...).
        """
        from .plotting import spectrum_axes

        return spectrum_axes(self, quantity, ax=ax, **line_kw)

    def to_xarray(self, dims=None):
        """The spectrum (or family) as an :class:`xarray.Dataset` with CF-style ``units`` attributes.

        Parameters
        ----------
        dims : sequence of str, optional
            Names of the leading (family) dimensions; ``index_0, index_1, ...`` by default.
            The last dimension is always ``wavelength_nm``.
        """
        from .dataset import spectrum_dataset

        return spectrum_dataset(self, dims)

    def write(self, path, *, force: bool = False):
        """Export :meth:`to_frame` with :data:`UNITS`, the metadata and :meth:`summary` (CSV + JSON).

        Parameters
        ----------
        path : str or os.PathLike
            ``*.csv`` writes the table and a ``.json`` sidecar; ``*.json`` writes one file.
        force : bool, keyword-only
            Overwrite existing files (refused otherwise).
        """
        from .export import write_export

        meta = dict(self.metadata)
        meta["summary"] = self.summary()
        return write_export(self.to_arrays(), path, metadata=meta, units=UNITS, force=force)

    def to_arrays(self) -> dict:
        """The columns of :meth:`to_frame` as a dict of 1-D numpy arrays (no pandas needed)."""
        if np.ndim(self.sigma_abs_m2) != 1:
            raise NanoabsError("to_frame() and to_arrays() are for one particle; use nanoabs.design.sweep for families")
        data = {"wavelength_nm": np.asarray(self.wavelength_nm, dtype=float)}
        for c in FRAME_COLUMNS[1:]:
            data[c] = np.broadcast_to(np.asarray(getattr(self, c), dtype=float), self.wavelength_nm.shape)
        return data

    def to_frame(self):
        """pandas DataFrame with :data:`FRAME_COLUMNS` (one particle: one row per wavelength)."""
        import pandas as pd

        return pd.DataFrame(self.to_arrays(), columns=FRAME_COLUMNS)


PEAK_STATUS = ("peak", "rises beyond the short end of the window", "rises beyond the long end of the window",
               "no maximum")


def _peak_status(wl, y) -> str:
    """Where the maximum of ``y`` sits: a peak inside the window, or a rise beyond one of its ends.

    A maximum on the first or last grid point is not a peak: the curve may keep rising
    outside the window (common practice in reporting resonances).
    """
    y = np.asarray(y, dtype=float)
    if y.size == 0 or not np.any(np.isfinite(y)) or np.nanmax(y) <= np.nanmin(y):
        return PEAK_STATUS[3]
    i = int(np.nanargmax(y))
    if i == 0:
        return PEAK_STATUS[1]
    if i == y.size - 1:
        return PEAK_STATUS[2]
    return PEAK_STATUS[0]


def _peak(wl, y):
    """Wavelength of the maximum, refined by a parabola through the top 3 points; NaN unless it is a
    peak inside the window (see :func:`_peak_status`). Works along the last axis."""
    y = np.asarray(y)
    if y.ndim > 1:
        return np.apply_along_axis(lambda r: _peak(wl, r), -1, y)
    if _peak_status(wl, y) != PEAK_STATUS[0]:
        return float("nan")
    i = int(np.nanargmax(y))
    x0, x1, x2 = wl[i - 1:i + 2]
    y0, y1, y2 = y[i - 1:i + 2]
    den = (x0 - x1) * (x0 - x2) * (x1 - x2)
    A = (x2 * (y1 - y0) + x1 * (y0 - y2) + x0 * (y2 - y1)) / den
    B = (x2**2 * (y0 - y1) + x1**2 * (y2 - y0) + x0**2 * (y1 - y2)) / den
    return float(np.clip(-B / (2 * A), x0, x2)) if A < 0 else float(x1)


def _half_max_crossings(wl, y):
    """(short-side crossing, long-side crossing) of half the peak [nm], NaN where not reached."""
    i = int(np.nanargmax(y))
    half = y[i] / 2.0
    left = np.flatnonzero(y[:i] < half)
    right = np.flatnonzero(y[i:] < half)
    xl = xr = float("nan")
    if left.size:
        j = left[-1]
        xl = float(np.interp(half, [y[j], y[j + 1]], [wl[j], wl[j + 1]]))
    if right.size:
        k = i + right[0]
        xr = float(np.interp(half, [y[k], y[k - 1]], [wl[k], wl[k - 1]]))
    return xl, xr


def _fwhm_status(wl, y) -> str:
    """Why a width is or is not given: "resolved", the peak status, or the side where the half
    maximum is never reached inside the window."""
    y = np.asarray(y, dtype=float)
    status = _peak_status(wl, y)
    if status != PEAK_STATUS[0]:
        return status
    xl, xr = _half_max_crossings(wl, y)
    if xl == xl and xr == xr:
        return "resolved"
    side = ("both sides" if xl != xl and xr != xr else "the short-wavelength side" if xl != xl
            else "the long-wavelength side")
    return f"half maximum not reached on {side} inside the window"


def _fwhm(wl, y):
    """Full width at half maximum [nm]; NaN unless resolved (see :func:`_fwhm_status`)."""
    y = np.asarray(y, dtype=float)
    if y.ndim > 1:
        return np.apply_along_axis(lambda r: _fwhm(wl, r), -1, y)
    if _peak_status(wl, y) != PEAK_STATUS[0]:
        return float("nan")
    xl, xr = _half_max_crossings(wl, y)
    return xr - xl


# -- surface damping -----------------------------------------------------------


def _damping_extra_eV(mat, length_nm, on, A, notes, label):
    """Extra Drude damping Δγ [eV] of a metal part of mean free path L [nm], or None if not applied.

    Records what was applied in ``notes["surface_damping"]`` (or why not, as a caution).
    """
    if not (on and getattr(mat, "is_metal", False)):
        return None
    from .hotcarriers import FREE_ELECTRON

    model = getattr(mat, "model", None)
    if model is None or model.plasma_energy_eV <= 0 or mat.name not in FREE_ELECTRON:
        notes["cautions"].append(Caution("damping-unavailable", f"surface damping not applied to {label} "
                                         f"({mat.label}): no fitted Drude term or tabulated Fermi velocity"))
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


def _check_particle(particle):
    if not hasattr(particle, "layer_materials"):
        raise NanoabsError(f"particle = {type(particle).__name__}: expected Sphere, LayeredSphere, Ellipsoid, "
                           "Cylinder or CappedRod")


def _environment(medium, environment):
    """The environment object: ``environment`` as given, or a homogeneous host of ``medium``."""
    from .materials import material

    if environment is not None:
        if medium is not None:
            raise NanoabsError("medium and environment: give one or the other (the environment names the "
                               "particle's host)")
        if not is_environment(environment):
            raise NanoabsError(f"environment = {environment!r}: expected an environment object such as "
                               "nanoabs.solvers.Homogeneous")
        return environment
    medium = "water" if medium is None else medium
    return Homogeneous(material(medium) if not hasattr(medium, "permittivity") else medium)


def spectrum(particle, wavelength_nm, *, medium=None, environment=None, method: str = "auto",
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
    environment : environment object, keyword-only
        Where the particle sits and how it is lit (instead of ``medium``); the
        default is a homogeneous host of ``medium``.
    method : str, keyword-only
        A name in :data:`nanoabs.solvers.METHODS` ("mie", "miepython",
        "quasistatic", "mlwa", ...) or "auto" (the rule of
        :func:`nanoabs.solvers.choose`; the metadata says which ran and why).
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
        Cautions (validity, data, damping) are in ``metadata["cautions"]`` and are
        also issued as :class:`nanoabs.validity.NanoabsWarning`.
    """
    wl = check_finite_array("wavelength_nm", wavelength_nm, increasing=True)
    if np.any(wl <= 0):
        raise NanoabsError(f"wavelength = {wl.min():g} nm: must be > 0")
    _check_particle(particle)
    check_size_family(particle, wl)
    surface_damping = check_flag("surface_damping", surface_damping)
    env = _environment(medium, environment)
    n_med, cautions = env.host_index(wl)
    solver, reason = choose(method, particle, env, wavelength_nm=wl, n_medium=n_med)
    pol = resolve_polarization(particle, polarization)
    notes = {"cautions": cautions, "surface_damping": []}
    damping = [_damping_extra_eV(mat, L, surface_damping, damping_A, notes, label)
               for mat, L, label in zip(particle.layer_materials(), particle.damping_lengths_nm(),
                                        particle.layer_labels())]
    problem = Problem(particle, wl, n_med, pol, env, damping, method_requested=str(method).lower())
    resp = env.apply(solver, problem)
    sa, ss, se = (np.asarray(x) * NM2_TO_M2 for x in (resp.sigma_abs_nm2, resp.sigma_sca_nm2,
                                                      resp.sigma_ext_nm2))
    cautions += [Caution("damping-clipped", _CLIP_NOTE.format(label)) for label in problem.clipped]
    cautions += resp.metadata.pop("environment_cautions", [])
    stack_solution = resp.metadata.pop("_stack_solution", None)
    cautions += solver.validity(problem)
    nonfinite = resp.nonfinite
    if nonfinite is None:
        nonfinite = not (np.isfinite(np.sum(sa)) and np.isfinite(np.sum(se)))  # one pass, no temporaries
    if nonfinite:
        raise NanoabsError("spectrum: non-finite cross-sections at some wavelengths; no result is returned "
                           "(check the inputs; report it if they are physical)")
    geo, ref_area = particle.reference_area_nm2(pol)
    meta = {
        "particle": particle.describe(),
        "method": solver.name,
        "method_reason": reason,
        "solver_backend": resp.backend,
        "method_reference": solver.reference,
        "polarization": "any (sphere)" if particle.shape in ("sphere", "layered sphere") else pol,
        "efficiency_reference_area": ref_area,
        "q_abs_eqvol_reference_area": "pi r_v^2 of the equal-volume sphere",
        "environment": env.describe(),
        "medium": env.host_material().metadata(),
        "materials": [m.metadata() for m in particle.layer_materials()],
        "surface_damping": notes["surface_damping"] if surface_damping else "off",
        "warnings": [c.message for c in cautions],
        "cautions": [c.to_dict() for c in cautions],
        "package_version": _package_version(),
        **resp.metadata,
    }
    emit(cautions)
    shape = np.shape(sa)  # reference areas: read-only broadcast views, not copies
    eps = problem._eps if problem._eps is not None else (lambda: problem.eps_layers)
    return Spectrum(wl, sa, ss, se, np.broadcast_to(np.asarray(geo) * NM2_TO_M2, shape),
                    np.broadcast_to(np.asarray(particle.equal_volume_area_nm2()) * NM2_TO_M2, shape),
                    np.asarray(particle.metal_volume_nm3(), dtype=float) * 1e-27, n_med, meta, eps, env, stack_solution)


_CLIP_NOTE = "surface-damped eps'' of {} clipped at 0 at some wavelengths"
