"""Where the particle sits and how it is lit: homogeneous host, on a substrate, buried.

An environment resolves its materials on a wavelength grid and gives the
solvers what they need: the host index, the incidence-medium index (for the
irradiance reference), the stack seen from the particle (for the reflected
field), the stack seen from the light (for the field without the particle) and
the particle centre's height above / depth below the surface.

Geometry: the surface of the substrate (or of the spacer on it) is the plane
z = 0, the superstrate fills z > 0. ``on_substrate``: the particle's lowest
point is ``gap_nm`` above the top surface (the spacer's, if any); its centre is
at z = gap + half-height. ``buried``: the centre is ``depth_nm`` below the
surface, inside the substrate, and the particle must lie wholly below it.

Cross-section reference: sigma_abs = power absorbed in the particle /
irradiance of the incident plane wave in the incidence medium (front: the
superstrate, back: the substrate, taken just at the surface; absorption of a
thick wafer on the way in is not included).
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import NamedTuple

import numpy as np

from ._errors import NanoabsError, check_choice, check_positive, check_range
from .stack import plane_waves, stack_RT

__all__ = ["OnSubstrate", "Buried", "homogeneous", "on_substrate", "buried", "Resolved", "sparse_layer_absorptance"]

INCIDENCE = ("front", "back")
SIGMA_REFERENCE = ("power absorbed in the particle / irradiance of the incident plane wave in the "
                   "incidence medium (not the field at the particle)")
MAX_ANGLE_DEG = 89.0
MAX_LENGTH_NM = 1e6


def _mat(value):
    from .materials import material

    return value if hasattr(value, "permittivity") else material(value)


def _transparent(name, mat, wl, role):
    """Real index of a medium that must be (nearly) non-absorbing: the rule of a homogeneous host
    (`nanoabs.solvers.Homogeneous.host_index`: k <= 0.01 n, weak absorption neglected with a caution)."""
    from .solvers import Homogeneous

    try:
        return Homogeneous(mat).host_index(wl)
    except NanoabsError as err:
        raise NanoabsError(f"{name} = {mat.label} is the {role} here: {err}") from None


class Resolved(NamedTuple):
    """An environment on a wavelength grid (arrays of shape (W,)).

    Parameters
    ----------
    n_host : ndarray
        Real index of the medium around the particle [1].
    n_inc : ndarray
        Real index of the incidence medium [1].
    host_stack : list of ndarray
        Permittivities seen from the particle, host first [1].
    host_thickness_nm : list of float
        Inner-layer thicknesses in that order [nm].
    light_stack : list of ndarray
        Permittivities seen from the incident light, incidence medium first [1].
    light_thickness_nm : list of float
        Inner-layer thicknesses in that order [nm].
    particle_in_incidence_medium : bool
        True when the particle sits on the side the light comes from.
    """

    n_host: np.ndarray            # real index of the medium around the particle
    n_inc: np.ndarray             # real index of the incidence medium
    host_stack: list              # permittivities seen from the particle, host first
    host_thickness_nm: list
    light_stack: list             # permittivities seen from the incident light, incidence medium first
    light_thickness_nm: list
    particle_in_incidence_medium: bool


def _check_common(incidence, angle_deg, polarization):
    incidence = check_choice("incidence", incidence, INCIDENCE)
    angle = float(check_range("angle_deg", angle_deg, 0.0, MAX_ANGLE_DEG, unit="deg"))
    pol = check_choice("polarization", polarization, ("s", "p"))
    return incidence, angle, pol


@dataclass(frozen=True, kw_only=True)
class _Planar:
    """Shared fields and behaviour of the planar environments (see module docstring)."""

    substrate: object
    superstrate: object = "air"
    incidence: str = "front"
    angle_deg: float = 0.0
    polarization: str = "s"

    def host_material(self):
        """The material around the particle: the substrate (buried) or the superstrate."""
        return _mat(self.substrate if self.kind == "buried" else self.superstrate)

    def host_index(self, wavelength_nm) -> tuple:
        """(real index of the medium around the particle (W,), cautions) for `nanoabs.spectrum`.

        Parameters
        ----------
        wavelength_nm : float array_like
            Vacuum wavelengths [nm].
        """
        host = self.substrate if self.kind == "buried" else self.superstrate
        self.resolve(wavelength_nm)                      # validates every medium that must be transparent
        return _transparent("host", _mat(host), np.atleast_1d(np.asarray(wavelength_nm, float)), "host")

    def apply(self, solver, problem):
        """Cross-sections of the particle here (see `apply_planar`).

        Parameters
        ----------
        solver : nanoabs.solvers.Solver
            The chosen method.
        problem : nanoabs.solvers.Problem
            Particle, wavelengths, host index and permittivities.
        """
        return apply_planar(self, solver, problem)

    def field_factor(self, wavelength_nm, half_height_nm=0.0):
        """|E_drive/E_inc|^2 at the particle centre without the particle, shape (W,).

        Parameters
        ----------
        wavelength_nm : float array_like
            Vacuum wavelengths [nm].
        half_height_nm : float
            Particle extent below (on_substrate) or above (buried) its centre [nm].
        """
        return np.sum(np.abs(self.drive_field(wavelength_nm, half_height_nm)) ** 2, -1)

    def drive_field(self, wavelength_nm, half_height_nm=0.0, res=None):
        """E without the particle at the particle centre per unit incident amplitude, (W, 3).

        Parameters
        ----------
        wavelength_nm : float array_like
            Vacuum wavelengths [nm].
        half_height_nm : float
            Particle extent below (on_substrate) or above (buried) its centre [nm].
        res : Resolved, optional
            This environment already resolved on ``wavelength_nm``.
        """
        return sum(E for _, E in self.drive_waves(wavelength_nm, half_height_nm, res))

    def bare_RT(self, wavelength_nm):
        """Reflectance R and transmittance T (W,) of the bare stack for the incident wave (`stack.stack_RT`).

        Parameters
        ----------
        wavelength_nm : float array_like
            Vacuum wavelengths [nm].
        """
        wl = np.atleast_1d(np.asarray(wavelength_nm, float))
        res = self.resolve(wl)
        return stack_RT(res.light_stack, res.light_thickness_nm, wl, angle_deg=self.angle_deg, pol=self.polarization)

    def drive_waves(self, wavelength_nm, half_height_nm=0.0, res=None):
        """Plane waves (direction, amplitude at the centre) making up the drive field (`stack.plane_waves`).

        Parameters
        ----------
        wavelength_nm : float array_like
            Vacuum wavelengths [nm].
        half_height_nm : float
            Particle extent below (on_substrate) or above (buried) its centre [nm].
        res : Resolved, optional
            This environment already resolved on ``wavelength_nm``.
        """
        wl = np.atleast_1d(np.asarray(wavelength_nm, float))
        res = res or self.resolve(wl)
        h = self.center_height_nm(half_height_nm)
        z = h if res.particle_in_incidence_medium else -h
        return plane_waves(res.light_stack, res.light_thickness_nm, wl, z,
                           angle_deg=self.angle_deg, pol=self.polarization)

    def _light(self, top, inner, thick, bottom, n_top, n_bottom):
        front = self.incidence == "front"
        stack = [top, *inner, bottom] if front else [bottom, *inner[::-1], top]
        return (n_top if front else n_bottom), stack, (list(thick) if front else list(thick)[::-1])


@dataclass(frozen=True, kw_only=True)
class OnSubstrate(_Planar):
    """Particle in the superstrate, resting ``gap_nm`` above a substrate or a spacer layer on it.

    Made by `on_substrate`, which validates the inputs.

    Parameters
    ----------
    substrate, superstrate : str, float or Material
        Media below and above the surface.
    gap_nm : float
        Particle's lowest point to the top surface [nm].
    spacer : (material, thickness_nm) or None
        Planar layer between superstrate and substrate.
    incidence : {"front", "back"}
        Light from the superstrate side or through the substrate.
    angle_deg : float
        Angle of incidence in the incidence medium [deg].
    polarization : {"s", "p"}
        Polarisation of oblique light (plane of incidence x-z).
    """

    gap_nm: float = 0.0
    spacer: tuple | None = None

    kind = "on_substrate"

    def center_height_nm(self, half_height_nm):
        """Height of the particle centre above the top surface [nm].

        Parameters
        ----------
        half_height_nm : float
            Particle extent below its centre [nm].
        """
        return self.gap_nm + float(half_height_nm)

    def resolve(self, wavelength_nm) -> Resolved:
        """The environment on a wavelength grid (see `Resolved`).

        Parameters
        ----------
        wavelength_nm : float array_like
            Vacuum wavelengths [nm].
        """
        wl = np.atleast_1d(np.asarray(wavelength_nm, float))
        sup, sub = _mat(self.superstrate), _mat(self.substrate)
        n_h, _ = _transparent("superstrate", sup, wl, "medium around the particle")
        eps_sub = np.atleast_1d(sub.permittivity(wl)).astype(complex)
        inner, thick = [], []
        if self.spacer is not None:
            inner = [np.atleast_1d(_mat(self.spacer[0]).permittivity(wl)).astype(complex)]
            thick = [float(self.spacer[1])]
        n_sub = (_transparent("substrate", sub, wl, "incidence medium (incidence='back')")[0]
                 if self.incidence == "back" else None)
        eh = n_h ** 2 + 0j
        n_inc, light, lthick = self._light(eh, inner, thick, eps_sub, n_h, n_sub)
        return Resolved(n_h, n_inc, [eh, *inner, eps_sub], thick, light, lthick, self.incidence == "front")

    def describe(self) -> dict:
        d = {"kind": self.kind, "substrate": _mat(self.substrate).label,
             "superstrate": _mat(self.superstrate).label, "gap_nm": self.gap_nm,
             "spacer": None if self.spacer is None else {"material": _mat(self.spacer[0]).label,
                                                         "thickness_nm": float(self.spacer[1])}}
        return d | _light_meta(self)


@dataclass(frozen=True, kw_only=True)
class Buried(_Planar):
    """Particle inside the substrate, its centre ``depth_nm`` below the planar surface.

    Made by `buried`, which validates the inputs.

    Parameters
    ----------
    substrate, superstrate : str, float or Material
        Media below and above the surface.
    depth_nm : float
        Depth of the particle centre below the surface [nm].
    incidence : {"front", "back"}
        Light from the superstrate side or through the substrate.
    angle_deg : float
        Angle of incidence in the incidence medium [deg].
    polarization : {"s", "p"}
        Polarisation of oblique light (plane of incidence x-z).
    """

    depth_nm: float = 0.0

    kind = "buried"

    def center_height_nm(self, half_height_nm):
        """Depth of the particle centre below the surface [nm]; the particle must lie below it.

        Parameters
        ----------
        half_height_nm : float
            Particle extent above its centre [nm].
        """
        if self.depth_nm <= half_height_nm:
            raise NanoabsError(f"depth_nm = {self.depth_nm:g} nm: the particle (half-height {half_height_nm:g} nm) "
                               f"must lie below the surface; allowed: depth > {half_height_nm:g} nm")
        return self.depth_nm

    def resolve(self, wavelength_nm) -> Resolved:
        """The environment on a wavelength grid (see `Resolved`).

        Parameters
        ----------
        wavelength_nm : float array_like
            Vacuum wavelengths [nm].
        """
        wl = np.atleast_1d(np.asarray(wavelength_nm, float))
        sup, sub = _mat(self.superstrate), _mat(self.substrate)
        n_h, _ = _transparent("substrate", sub, wl, "medium around the particle (buried)")
        eps_sup = np.atleast_1d(sup.permittivity(wl)).astype(complex)
        n_sup = (_transparent("superstrate", sup, wl, "incidence medium (incidence='front')")[0]
                 if self.incidence == "front" else None)
        eh = n_h ** 2 + 0j
        n_inc, light, lthick = self._light(eps_sup, [], [], eh, n_sup, n_h)
        return Resolved(n_h, n_inc, [eh, eps_sup], [], light, lthick, self.incidence == "back")

    def describe(self) -> dict:
        return {"kind": self.kind, "substrate": _mat(self.substrate).label,
                "superstrate": _mat(self.superstrate).label, "depth_nm": self.depth_nm} | _light_meta(self)


def _light_meta(env) -> dict:
    return {"incidence": env.incidence, "angle_deg": env.angle_deg, "polarization": env.polarization,
            "sigma_reference": SIGMA_REFERENCE,
            "field_factor": "|E_drive/E_inc|^2 at the particle centre without the particle"}


def homogeneous(medium="water"):
    """Particle in one infinite medium: the default environment of `nanoabs.spectrum`.

    Parameters
    ----------
    medium : str, float or Material
        A store name, a number for a constant index, or a Material.

    Returns
    -------
    nanoabs.solvers.Homogeneous
    """
    from .solvers import Homogeneous

    return Homogeneous(_mat(medium))


def _check_spacer(spacer):
    if spacer is None:
        return None
    if isinstance(spacer, str) and ":" in spacer:
        name, _, t = spacer.rpartition(":")
        spacer = (name, t)
    try:
        name, t = spacer
    except (TypeError, ValueError):
        raise NanoabsError(f"spacer = {spacer!r}: must be (material, thickness_nm) or 'MATERIAL:THICKNESS_NM'") from None
    try:
        t = float(t)
    except (TypeError, ValueError):
        raise NanoabsError(f"spacer thickness = {t!r}: must be a number of nm (1e-3 to {MAX_LENGTH_NM:g})") from None
    t = float(check_range("spacer thickness", t, 1e-3, MAX_LENGTH_NM, unit="nm"))
    _mat(name)
    return (name, t)


def on_substrate(substrate, *, superstrate="air", gap_nm=0.0, spacer=None, incidence="front",
                 angle_deg=0.0, polarization="s") -> OnSubstrate:
    """Particle in ``superstrate`` resting ``gap_nm`` [nm] above ``substrate`` (or a spacer on it).

    Parameters
    ----------
    substrate, superstrate : str, float or Material
        Store names (``"Si"``, ``"SiO2"``, ``"air"``, ``"water"``) or constant indices.
    gap_nm : float, keyword-only
        Distance from the particle's lowest point to the surface [nm], >= 0.
    spacer : (material, thickness_nm) or "MATERIAL:THICKNESS_NM", keyword-only
        One planar layer between superstrate and substrate (native oxide, Ti/Cr adhesion film).
    incidence : {"front", "back"}, keyword-only
        Light from the superstrate side or through the substrate.
    angle_deg : float, keyword-only
        Angle of incidence in the incidence medium [deg], 0 to 89.
    polarization : {"s", "p"}, keyword-only
        For oblique light (plane of incidence x-z; s: E along y).
    """
    _mat(substrate), _mat(superstrate)
    gap = float(check_range("gap_nm", gap_nm, 0.0, MAX_LENGTH_NM, unit="nm"))
    inc, angle, pol = _check_common(incidence, angle_deg, polarization)
    return OnSubstrate(substrate=substrate, superstrate=superstrate, gap_nm=gap, spacer=_check_spacer(spacer),
                       incidence=inc, angle_deg=angle, polarization=pol)


def buried(substrate, *, superstrate="air", depth_nm, incidence="front", angle_deg=0.0,
           polarization="s") -> Buried:
    """Particle inside ``substrate``, its centre ``depth_nm`` [nm] below the surface.

    Parameters
    ----------
    substrate, superstrate : str, float or Material
        The medium around the particle (must be transparent) and the one above the surface.
    depth_nm : float, keyword-only
        Depth of the particle centre [nm]; must exceed the particle's half-height.
    incidence : {"front", "back"}, keyword-only
        Light from the superstrate side or from inside the substrate.
    angle_deg : float, keyword-only
        Angle of incidence in the incidence medium [deg], 0 to 89.
    polarization : {"s", "p"}, keyword-only
        For oblique light (plane of incidence x-z; s: E along y).
    """
    _mat(substrate), _mat(superstrate)
    depth = float(check_positive("depth_nm", depth_nm, unit="nm"))
    if depth > MAX_LENGTH_NM:
        raise NanoabsError(f"depth_nm = {depth:g} nm: allowed range is 0 to {MAX_LENGTH_NM:g} nm")
    inc, angle, pol = _check_common(incidence, angle_deg, polarization)
    return Buried(substrate=substrate, superstrate=superstrate, depth_nm=depth, incidence=inc, angle_deg=angle,
                  polarization=pol)


def _scalar_sizes(particle):
    axes = [np.asarray(a, float) for a in particle.outer_semi_axes_nm()]
    if any(a.size != 1 for a in axes):
        raise NanoabsError(f"particle size: an array of {max(a.size for a in axes)} sizes; allowed in a "
                           "substrate or buried environment: one size per call (loop over sizes)")
    return [float(a.reshape(-1)[0]) for a in axes]


def _lab_tensors(solver, problem, env, radiative):
    """[(weight, alpha (W,3,3))] in the lab frame for the requested in-plane orientation.

    The particle's axes (a, b, c) lie along (x, y, z) with c vertical (rods and discs lie
    flat). The in-plane field is along y (s) or x (p): polarization "x" puts the particle's
    x axis along it, "y" its y axis, "z" leaves it (only oblique p light has a z field),
    "random" averages the two in-plane orientations, which is the exact in-plane average
    because the stack's reflected field is isotropic in the plane (Gamma_xx = Gamma_yy).
    """
    k = problem.k
    if problem.particle.shape == "ellipsoid":
        ax, ay, az = (np.broadcast_to(solver.polarizability(problem, a), k.shape) for a in "xyz")
    else:
        ax = ay = az = np.broadcast_to(solver.polarizability(problem, "x"), k.shape)
    if radiative:   # static alpha0 -> alpha0 / (1 - i k^3 alpha0 / 6 pi) (Draine 1988, eq. 3, from memory)
        ax, ay, az = (a / (1 - 1j * k ** 3 * a / (6 * np.pi)) for a in (ax, ay, az))
    along_x = np.stack([np.diag([x, y, z]) for x, y, z in zip(ax, ay, az)])
    along_y = np.stack([np.diag([y, x, z]) for x, y, z in zip(ax, ay, az)])
    field_on_x = env.polarization == "p"
    pol = problem.polarization
    if pol == "random":
        return [(0.5, along_x), (0.5, along_y)]
    if pol == "y":
        return [(1.0, along_y if field_on_x else along_x)]
    return [(1.0, along_x if (field_on_x or pol == "z") else along_y)]


def apply_planar(env, solver, problem):
    """Response of a particle in a planar environment, from what the chosen solver exposes.

    * Mie solver (spheres, layered spheres): multipole method
      (`nanoabs.surface.sphere_on_stack`), order chosen by convergence.
    * Corrected dipole ("mlwa"): its polarisability with the retarded reflected
      Green's function (`nanoabs.surface.dipole_response`, Sommerfeld integrals).
    * Static dipole ("quasistatic"): its polarisability, radiatively corrected, with the
      quasi-static image dyadic (Yamaguchi et al. 1974; Wind et al. 1987).
    * T-matrix solver ("tmatrix": spheroids, cylinders, capped rods, rounded discs lying
      flat): multipole method with the full T-matrix (`nanoabs.surface_tmatrix.flat_on_stack`),
      order chosen by convergence; if it does not converge, an error, or under
      ``method="auto"`` the corrected dipole with a caution (see `_apply_body_tmatrix`).

    sigma_abs is per irradiance of the incident wave in the incidence medium;
    sigma_ext is the work of the drive field (the power taken from the specular
    beams) and sigma_sca = sigma_ext - sigma_abs the power scattered into both
    half-spaces (and into guided modes or absorbing layers of the stack).
    """
    from .solvers import Response
    from .surface import dipole_response, sphere_on_stack

    sizes = _scalar_sizes(problem.particle)
    wl = problem.wavelength_nm
    meta = {"sigma_reference": SIGMA_REFERENCE}
    if hasattr(solver, "polarizability"):
        method = "sommerfeld" if solver.corrected else "image"
        s_abs = s_rad = 0.0
        for weight, alpha in _lab_tensors(solver, problem, env, radiative=not solver.corrected):
            out = dipole_response(env, alpha, wl, half_height_nm=sizes[-1], method=method)
            s_abs = s_abs + weight * out["sigma_abs_nm2"]
            s_rad = s_rad + weight * out["sigma_rad_nm2"]
        meta |= {"environment_method": f"dipole + reflected Green's function ({method})",
                 "sommerfeld_error": float(np.max(out["integration_error"]))}
        s_ext = s_abs + s_rad
        h, a_max = env.center_height_nm(sizes[-1]), max(sizes)
        if a_max > h:  # the point dipole and its image overlap the particle: coupling far outside validity
            from .validity import Caution

            meta["environment_cautions"] = [Caution(
                "dipole-near-surface",
                f"the particle's longest semi-axis ({a_max:g} nm) exceeds the distance from its centre to the "
                f"interface ({h:g} nm): the point-dipole coupling to the substrate is outside its validity and the "
                "resonance can be far off (use a sphere or shell with the multipole method, or treat the result "
                "as qualitative)", (float(wl.min()), float(wl.max())))]
        elif problem.particle.shape in ("sphere", "layered sphere") and h < 2 * a_max:
            # gap < radius: the image's higher multipoles, which a point dipole lacks, matter (bench/substrate.md:
            # peak sigma_abs of Au spheres 1 nm above Si/SiO2/TiO2 off by ~3 % at r = 20 nm, ~20-25 % at 40 nm)
            from .validity import Caution

            meta["environment_cautions"] = [Caution(
                "dipole-near-surface",
                f"the gap ({h - a_max:g} nm) is smaller than the sphere's radius ({a_max:g} nm): the point-dipole "
                "coupling misses the higher multipoles of the image, which shift and change the resonance (about "
                "3 % in peak sigma_abs for a 20 nm gold sphere 1 nm above Si, 20-25 % at 40 nm; more for silver). "
                "The multipole method (method='auto' or 'mie') is exact here",
                (float(wl.min()), float(wl.max())))]
    elif hasattr(solver, "body_tmatrix"):
        return _apply_body_tmatrix(env, solver, problem, sizes, meta)
    else:
        radii = [float(np.asarray(r, float).reshape(-1)[0]) for _, r in problem.particle.layers]
        out = sphere_on_stack(env, problem.eps_layers, radii, wl)
        meta["_stack_solution"] = out  # spectrum() keeps it (not in the metadata) for the internal-field profile
        s_abs, s_ext = out["sigma_abs_nm2"], out["sigma_drive_nm2"]
        meta |= {"environment_method": "multipole (T-matrix coupled to the stack)",
                 "multipole_order": out["n_max"], "multipole_order_change": out["n_max_change"],
                 "multipole_converged": out["converged"],
                 "sommerfeld_error": float(np.max(out["integration_error"]))}
        if not out["converged"]:
            from .validity import Caution

            c = Caution("multipole-order", f"multipole order {out['n_max']} (the cap) still changes sigma_abs by "
                        f"{out['n_max_change']:.1g} when 4 degrees lower: a small gap to a strongly reflecting "
                        "substrate; treat the result as approximate or increase the gap",
                        (float(wl.min()), float(wl.max())))
            meta["environment_cautions"] = [c]  # spectrum() adds them to its cautions
    meta["field_factor"] = np.asarray(out["field_factor"]).tolist()
    meta["incidence_index"] = np.broadcast_to(np.real(env.resolve(wl).n_inc), wl.shape).tolist()
    return Response(s_abs, s_ext - s_abs, s_ext, metadata=meta)


def _apply_body_tmatrix(env, solver, problem, sizes, meta):
    """Multipole method with the particle's full T-matrix (`nanoabs.surface_tmatrix`); see `apply_planar`.

    When the order study does not converge with the full reflection integral (typically: the
    circumscribing sphere of a flat rod reaches below the interface, where the reflected-field
    expansion is not guaranteed to converge; Egel et al., Opt. Express 24, 25154 (2016), from
    memory), the study is repeated with the integral cut at
    `nanoabs.surface_tmatrix.CONTOUR_CUT` k_host (cautioned). If that does not converge either,
    no number is taken from it: under ``method="auto"`` a spheroid goes to the corrected
    dipole with the reflected Green's function (cautioned), anything else raises NanoabsError.
    """
    from .solvers import METHODS, Response
    from .surface_tmatrix import CONTOUR_CUT, flat_on_stack
    from .validity import Caution

    wl = problem.wavelength_nm
    tmatrix_at, axis, n_start, r_max, tol = solver.body_tmatrix(problem)
    # the study cannot resolve changes below the free particle's own EBCM tolerance (2e-2 with edges)
    kw = dict(half_height_nm=sizes[-1], r_max_nm=r_max, polarization=problem.polarization, n_start=n_start,
              conv_rtol=max(2e-3, tol))
    out = flat_on_stack(env, tmatrix_at, axis, wl, **kw)
    study = {"multipole_order_study": [{"n_max": n, "sigma_abs_nm2_at_samples": v} for n, v in out["order_study"]],
             "circumscribing_sphere_crosses_interface": out["circumscribing_sphere_crosses_interface"],
             "multipole_contour_cut": None}
    span = (float(wl.min()), float(wl.max()))
    cut_caution = []
    if not out["converged"]:    # the remedy: the reflection integral cut at CONTOUR_CUT k_h
        first = out
        out = flat_on_stack(env, tmatrix_at, axis, wl, s_max=CONTOUR_CUT, **kw)
        study["multipole_order_study_cut"] = [{"n_max": n, "sigma_abs_nm2_at_samples": v}
                                              for n, v in out["order_study"]]
        if out["converged"]:
            study["multipole_contour_cut"] = CONTOUR_CUT
            cut_caution = [Caution(
                "multipole-contour-cut", f"the multipole order does not converge with the full reflection integral "
                f"({first['reason']}); the integral was cut at k_par = {CONTOUR_CUT:g} k_host, where it converges "
                "(Egel et al. 2016). Checked against one full-wave case (a 100 x 30 nm Au rod 2 nm above SiO2: "
                "within 1 %), not a proven bound: treat as accurate to several per cent", span)]
        else:
            out["reason"] = f"{first['reason']}; with the integral cut at {CONTOUR_CUT:g} k_host: {out['reason']}"
    study["multipole_converged"] = out["converged"]
    if not out["converged"]:
        where = (f"{problem.particle.describe()['shape']} with its centre {out['center_height_nm']:g} nm from the "
                 f"interface and a circumscribing sphere of {r_max:g} nm")
        dipole = METHODS["mlwa"]
        if problem.method_requested != "auto" or dipole.accepts(problem.particle) is not None:
            raise NanoabsError(f"method = '{problem.method_requested or solver.name}' in the {env.kind} environment: "
                               f"the T-matrix multipole order does not converge for a {where} ({out['reason']}); "
                               "allowed: a particle whose circumscribing sphere stays above the interface (larger "
                               "gap), or a spheroid with method='mlwa' (point dipole, qualitative)")
        resp = apply_planar(env, dipole, problem)
        resp.metadata.setdefault("environment_cautions", [])
        resp.metadata["environment_cautions"] += [Caution(
            "multipole-not-converged", f"auto: the T-matrix multipole method does not converge for a {where} "
            f"({out['reason']}); the point dipole with the reflected Green's function was used instead", span)]
        resp.metadata["environment_cautions"] += dipole.validity(problem)
        resp.metadata |= study | {"method": dipole.name, "method_reference": dipole.reference,
                                  "method_reason": "auto: the T-matrix multipole method did not converge here "
                                                   "(multipole_order_study), so the corrected dipole"}
        return resp
    how = "" if study["multipole_contour_cut"] is None else f", reflection integral cut at {CONTOUR_CUT:g} k_host"
    meta |= study | {"environment_method": "multipole (full T-matrix of the particle lying flat, coupled to the "
                                           f"stack{how})",
                     "multipole_order": out["n_max"], "multipole_order_change": out["order_change"],
                     "multipole_truncation_change": out["n_max_change"],
                     "sommerfeld_error": float(np.max(out["integration_error"])),
                     "in_plane_orientations": len(np.atleast_1d(out["sigma_abs_each_nm2"][0]))}
    meta["environment_cautions"] = cut_caution
    if out["circumscribing_sphere_crosses_interface"] and not cut_caution:
        meta["environment_cautions"] = [Caution(
            "multipole-near-interface", f"the particle's circumscribing sphere ({r_max:g} nm) reaches below the "
            f"interface (centre {out['center_height_nm']:g} nm above it): the multipole order converged here, but "
            "this is outside the proven range of the method", span)]
    s_abs, s_ext = out["sigma_abs_nm2"], out["sigma_drive_nm2"]
    meta["field_factor"] = np.asarray(out["field_factor"]).tolist()
    meta["incidence_index"] = np.broadcast_to(np.real(env.resolve(wl).n_inc), wl.shape).tolist()
    return Response(s_abs, s_ext - s_abs, s_ext, metadata=meta)


def sparse_layer_absorptance(sigma_abs_nm2, density_per_um2, *, sigma_ext_nm2=None):
    """Fraction of the incident power absorbed by a sparse layer of particles on the surface.

    Parameters
    ----------
    sigma_abs_nm2 : array_like
        Absorption cross-section of one particle in the environment [nm^2], referred to
        the irradiance of the incident wave in the incidence medium (as returned here).
    density_per_um2 : float
        Areal density of particles [um^-2].
    sigma_ext_nm2 : array_like, optional, keyword-only
        Extinction in the same reference; used only for the sparseness check.

    Returns
    -------
    A : ndarray
        A = N sigma_abs: independent particles, each driven by the field of the bare stack
        (standing wave or transmitted wave, substrate reflection included through the
        cross-section's reference). Valid while N sigma_ext << 1 and the particles are far
        apart compared with their size (no inter-particle coupling, no change of the
        specular beams by the layer): the sparse limit (e.g. Bohren & Huffman 1983,
        Sec. 3.4, single scattering; from memory).
    sparse : bool
        True when N sigma_ext (or N sigma_abs) <= 0.1 everywhere; beyond it A is an
        overestimate and should not be used.
    """
    n = float(check_positive("density_per_um2", density_per_um2, unit="um^-2")) * 1e-6   # nm^-2
    a = n * np.asarray(sigma_abs_nm2, float)
    ext = n * np.asarray(sigma_ext_nm2 if sigma_ext_nm2 is not None else sigma_abs_nm2, float)
    return a, bool(np.all(ext <= 0.1))
