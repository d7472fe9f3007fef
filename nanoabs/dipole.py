"""Dipole-limit solvers: the static dipole and the corrected quasi-static model.

Both build the particle's polarisability along each field axis from the
formulas of :mod:`nanoabs.quasistatic` and turn it into cross-sections:

* spheres: B&H (1983) eq. 5.7; layered spheres: eq. 5.36, applied outward
  layer by layer (:func:`nested_eps`);
* ellipsoids, optionally with a confocal shell: eqs. 5.32, 5.35 (B&H 1983);
* the corrected model adds the radiative reaction and the dynamic
  depolarisation (Meier & Wokaun, Opt. Lett. 8, 581 (1983); Moroz, J. Opt. Soc.
  Am. B 26, 517 (2009)).

Random orientation averages the principal cross-sections (each distinct axis is
computed once). The polarisability along each principal axis
(:meth:`StaticDipole.polarizability`) is what an environment other than a
homogeneous host consumes.
"""

from __future__ import annotations

import numpy as np

from . import quasistatic as qs
from .quasistatic import CORRECTED_VALIDITY, STRICT_VALIDITY
from .solvers import Response, Solver

__all__ = ["StaticDipole", "CorrectedDipole", "nested_eps", "field_axes"]


def nested_eps(eps_layers, radii):
    """Quasi-static equivalent permittivity of a multi-layer sphere (exact in the dipole limit).

    A coated sphere polarises like a homogeneous sphere of its outer radius with
    ε_eq = ε₂ [ε₁ + 2ε₂ + 2f(ε₁ − ε₂)] / [ε₁ + 2ε₂ − f(ε₁ − ε₂)], f = (r₁/r₂)³, which is
    B&H (1983) eq. 5.36 rewritten; applied outward layer by layer.

    Parameters
    ----------
    eps_layers : sequence of complex array_like
        Relative permittivity of each layer [1], core first (broadcast together).
    radii : sequence of array_like
        Outer radius of each layer [nm], core first.

    Returns
    -------
    complex ndarray
        Equivalent permittivity [1] of a homogeneous sphere of radius ``radii[-1]``.

    References
    ----------
    C. F. Bohren, D. R. Huffman, *Absorption and Scattering of Light by Small
    Particles*, Wiley (1983), eq. 5.36.
    """
    e_in, r_in = eps_layers[0], radii[0]
    for e_out, r_out in zip(eps_layers[1:], radii[1:]):
        f = (r_in / r_out) ** 3
        e_in = e_out * (e_in + 2 * e_out + 2 * f * (e_in - e_out)) / (e_in + 2 * e_out - f * (e_in - e_out))
        r_in = r_out
    return e_in


def field_axes(pol, core_axes, shell_axes=None):
    """[(axis, weight)]: the distinct principal axes a field samples, with their weights.

    A fixed polarisation samples one axis. Random orientation averages the three
    principal cross-sections with weight 1/3 each (see
    :func:`~nanoabs.quasistatic.orientation_average`); a spheroid's two equal
    axes give equal cross-sections, so each distinct axis is computed once.

    Parameters
    ----------
    pol : str
        Field axis ("x", "y", "z") or "random".
    core_axes : tuple of three array_like
        Semi-axes of the core [nm].
    shell_axes : tuple of three array_like, optional
        Outer semi-axes of a confocal shell [nm].

    Returns
    -------
    list of (str, float)
        Axis names and weights [1] summing to 1.
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


class StaticDipole(Solver):
    """Static dipole limit (B&H 1983 eqs. 5.7, 5.32, 5.35, 5.36)."""

    name = "quasistatic"
    reference = "dipole limit, Bohren & Huffman (1983) eqs. 5.7, 5.32, 5.35, 5.36"
    shapes = frozenset({"sphere", "layered sphere", "ellipsoid"})
    environments = frozenset({"homogeneous", "on_substrate", "buried"})  # planar: nanoabs.surface
    corrected = False
    max_ka = STRICT_VALIDITY * np.pi / 10.0  # largest dimension = a tenth of the wavelength in the host
    advice = "use method='mie' for spheres; treat ellipsoid results as indicative"

    def polarizability(self, problem, axis):
        """Polarisability [nm³] along principal axis ``axis`` (p = ε₀ ε_host α E).

        Parameters
        ----------
        problem : Problem
            The resolved problem (damped layer permittivities [1], host permittivity [1],
            wavenumber [1/nm]).
        axis : str
            Principal axis "x", "y" or "z" (ignored for spheres).

        Returns
        -------
        complex ndarray
            α [nm³], shape (..., W): B&H (1983) eqs. 5.7, 5.32, 5.35, 5.36, with the
            Meier & Wokaun (1983) corrections when ``corrected``.
        """
        p, eps, em, k = problem.particle, problem.eps_layers, problem.eps_medium, problem.k
        c = self.corrected
        if p.shape != "ellipsoid":
            radii = [np.asarray(r, dtype=float) for _, r in p.layers]
            if len(eps) == 2:
                return (qs.polarizability_coated_sphere_mlwa(eps[0], eps[1], em, radii[0], radii[1], k) if c
                        else qs.polarizability_coated_sphere(eps[0], eps[1], em, radii[0], radii[1]))
            e = nested_eps(eps, radii)
            return qs.polarizability_sphere_mlwa(e, em, radii[-1], k) if c else qs.polarizability_sphere(
                e, em, radii[-1])
        core = tuple(np.asarray(a, dtype=float) for a in p.semi_axes_nm)
        if p.shell is None:
            return (qs.polarizability_ellipsoid_mlwa(eps[0], em, *core, k, axis=axis) if c
                    else qs.polarizability_ellipsoid(eps[0], em, *core, axis=axis))
        shell = p.outer_semi_axes_nm()
        return (qs.polarizability_coated_ellipsoid_mlwa(eps[0], eps[1], em, core, shell, k, axis=axis) if c
                else qs.polarizability_coated_ellipsoid(eps[0], eps[1], em, core, shell, axis=axis))

    def solve(self, problem) -> Response:
        """Cross-sections from the polarisability along each sampled field axis.

        Parameters
        ----------
        problem : Problem
            The resolved problem.

        Returns
        -------
        Response
            σ_abs, σ_sca, σ_ext [nm²] (B&H 1983 sec. 5.2, via
            :func:`nanoabs.quasistatic.cross_sections`), orientation-averaged for "random".
        """
        p = problem.particle
        axes = [("x", 1.0)]
        if p.shape == "ellipsoid":
            shell = p.outer_semi_axes_nm() if p.shell is not None else None
            axes = field_axes(problem.polarization, p.semi_axes_nm, shell)
        total = None
        for ax, weight in axes:
            alpha = self.polarizability(problem, ax)
            parts = [weight * x for x in qs.cross_sections(alpha, problem.k, corrected=self.corrected)]
            total = parts if total is None else [t + x for t, x in zip(total, parts)]
        return Response(*total)


class CorrectedDipole(StaticDipole):
    """Corrected quasi-static model (radiative reaction + dynamic depolarisation)."""

    name = "mlwa"
    reference = ("corrected quasi-static (radiative reaction + dynamic depolarisation): Meier & Wokaun, "
                 "Opt. Lett. 8, 581 (1983); Moroz, J. Opt. Soc. Am. B 26, 517 (2009)")
    corrected = True
    max_ka = CORRECTED_VALIDITY * np.pi / 10.0  # k a_max = 0.5
    #: "auto" hands a spheroid beyond the corrected model's validity to the T-matrix (its peak is
    #: within about 1 % of the T-matrix up to k a 0.3 and 2 % up to 0.5; 2.6 % off at 0.6, Au and Ag)
    auto_max_ka = max_ka
    advice = "use method='mie' for spheres; treat ellipsoid results as indicative"

    def solve(self, problem) -> Response:
        """As :meth:`StaticDipole.solve`; a homogeneous ellipsoid family uses the compiled kernel.

        Parameters
        ----------
        problem : Problem
            The resolved problem.

        Returns
        -------
        Response
            σ_abs, σ_sca, σ_ext [nm²]; ``backend`` says whether the compiled kernel ran.
        """
        p = problem.particle
        if p.shape == "ellipsoid" and p.shell is None:
            fast = _compiled_map(problem)
            if fast is not None:
                return fast
        return super().solve(problem)


def _compiled_map(problem):
    """MLWA cross-sections [nm²] of a homogeneous ellipsoid family by the compiled kernel, or None.

    Used when numba is available and the geometry does not vary with wavelength
    (semi-axes scalars or of shape (..., 1)). The kernel applies the surface damping
    itself, so the problem's permittivities are left unevaluated.
    """
    from . import _compiled
    from .drude_lorentz import HC_EV_NM

    p, wl, n_med = problem.particle, problem.wavelength_nm, problem.n_medium
    core_axes = tuple(np.asarray(a, dtype=float) for a in p.semi_axes_nm)
    G = np.broadcast_shapes(*(np.shape(a) for a in core_axes))
    if (G and G[-1] != 1) or not _compiled.available():
        return None
    axes = [np.broadcast_to(a, G).reshape(-1) for a in core_axes]
    L_all = qs.depolarization_factors(*axes)
    D_all = qs.dynamic_depolarization_factors(*axes, depolarization=L_all)
    picks = [("xyz".index(ax), w) for ax, w in field_axes(problem.polarization, core_axes)]
    depol = np.stack([np.broadcast_to(L_all[i], axes[0].shape) for i, _ in picks])
    dyn = np.stack([np.broadcast_to(D_all[i] / (4.0 * np.pi * axes[i]), axes[0].shape) for i, _ in picks])
    weights = np.array([w for _, w in picks])
    volume = 4.0 / 3.0 * np.pi * axes[0] * axes[1] * axes[2]
    extra_G = problem.damping_eV[0]
    mat = p.material
    if extra_G is None:
        drude, extra = (0.0, 0.0), np.zeros(volume.shape)
    else:
        drude = (mat.model.plasma_energy_eV**2, mat.model.damping_eV)
        extra = np.broadcast_to(extra_G, G).reshape(-1)
    try:
        sa, ss, se, n_clip, n_bad = _compiled.ellipsoid_mlwa_map(
            mat.permittivity(wl), HC_EV_NM / wl, drude, extra, n_med**2, problem.k,
            depol, dyn, weights, volume, 1.0)
    except _compiled.Unavailable:
        return None
    if n_clip:
        problem.clipped.append(p.layer_labels()[0])
    shape = G[:-1] + wl.shape if G else wl.shape
    sa, ss, se = (x.reshape(shape) for x in (sa, ss, se))
    return Response(sa, ss, se, backend="compiled (numba)", nonfinite=n_bad > 0)
