"""The solver interface: what every optical method receives, returns and declares.

A particle knows its geometry (:mod:`nanoabs.particles`); a solver knows one
method; an environment knows where the particle sits and how it is lit.
:func:`nanoabs.spectrum` resolves the materials and the environment into a
:class:`Problem`, picks a solver from :data:`METHODS` (by name, or by the
``"auto"`` rule of :func:`choose`), lets the environment apply it, and wraps the
:class:`Response`. No step branches on the particle family.

A solver is a subclass of :class:`Solver` that sets

* ``name``, ``reference`` (citation for the metadata),
* ``shapes``: the ``particle.shape`` values it accepts, and optionally
  :meth:`Solver.accepts` for finer rules (a homogeneous particle only, ...),
* ``environments``: the environment kinds it can serve,
* ``max_ka``: the largest size parameter ``k a_max`` it is trusted for
  (``inf`` for exact methods), with ``advice`` for the caution,
* :meth:`Solver.solve`: cross-sections [nm²] of the particle in a homogeneous host.

Adding a method is one class and one line in :data:`METHODS` (see the
contributor guide, "How to add a solver").
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from ._errors import NanoabsError, check_choice
from .validity import Caution, size_check

__all__ = ["Problem", "Response", "Solver", "Homogeneous", "METHODS", "AUTO_ORDER", "AUTO_ORDER_PLANAR", "choose",
           "is_environment"]


def is_environment(value) -> bool:
    """True for an environment object (``homogeneous``, ``on_substrate``, ``buried``), not a material.

    Parameters
    ----------
    value : object
        A medium given by the caller: a material name, number, Material, or an environment.
    """
    return hasattr(value, "apply") and hasattr(value, "describe")


@dataclass
class Homogeneous:
    """A particle in one infinite, non-absorbing medium (the default environment).

    Parameters
    ----------
    medium : Material
        The host (resolved by :func:`nanoabs.materials.material`).
    """

    medium: object
    kind = "homogeneous"

    def host_index(self, wavelength_nm) -> tuple:
        """(real index of the host (W,), cautions): refuses a strongly absorbing host.

        Cross-sections in an absorbing host are ill-defined (the incident wave decays);
        a weakly absorbing one (k < 1e-2 n) is used with its real index and a caution.

        Parameters
        ----------
        wavelength_nm : (W,) array_like
            Vacuum wavelengths [nm].

        Returns
        -------
        n_host : (W,) ndarray
            Real refractive index of the host [1].
        cautions : list of Caution
            A ``medium-absorbs`` caution where k > 1e-5, else empty.
        """
        n = np.atleast_1d(self.medium.refractive_index(wavelength_nm)).astype(complex)
        worst = float(np.max(n.imag))
        if worst > 0.01 * float(np.min(n.real)):
            raise NanoabsError(f"medium {self.medium.label} absorbs strongly (k up to {worst:.3g}) at these "
                               "wavelengths: cross-sections need a (nearly) non-absorbing host; choose another "
                               "range or medium")
        cautions = []
        if worst > 1e-5:
            bad = np.asarray(wavelength_nm)[n.imag > 1e-5]
            cautions.append(Caution("medium-absorbs",
                                    f"medium {self.medium.label} absorbs weakly (k up to {worst:.2g}); its "
                                    "absorption is neglected (real part of its index used)",
                                    (float(bad.min()), float(bad.max()))))
        return n.real, cautions

    def host_material(self):
        """The material around the particle (the medium)."""
        return self.medium

    def apply(self, solver, problem) -> "Response":
        """The particle's cross-sections in this host: the solver's own answer.

        Parameters
        ----------
        solver : Solver
            The method to apply.
        problem : Problem
            The resolved problem.

        Returns
        -------
        Response
            Cross-sections [nm²].
        """
        return solver.solve(problem)

    def describe(self) -> dict:
        """The environment for the metadata: its ``kind`` and the medium's provenance."""
        return {"kind": self.kind, "medium": self.medium.metadata()}


@dataclass
class Problem:
    """Everything a solver needs, resolved on the wavelength grid.

    Parameters
    ----------
    particle : Sphere, LayeredSphere or Ellipsoid
        The particle (sizes [nm]).
    wavelength_nm : (W,) ndarray
        Vacuum wavelengths [nm].
    n_medium : (W,) ndarray
        Real refractive index of the particle's host [1].
    polarization : str
        Resolved field axis ("x", "y", "z") or "random"; "x" for spheres.
    environment : object
        The environment (``kind`` attribute, ``apply(solver, problem)``).
    damping_eV : list
        Extra Drude damping of each layer [eV] (core first), or None where none applies.
    clipped : list of str
        Filled while evaluating: labels of the layers whose surface-damped ε″ was
        clipped at 0 (reported as a ``damping-clipped`` caution).
    method_requested : str
        The caller's ``method`` ("auto" lets a planar environment fall back to the dipole
        method when the multipole order of a T-matrix particle does not converge); "" unknown.
    """

    particle: object
    wavelength_nm: np.ndarray
    n_medium: np.ndarray
    polarization: str
    environment: object
    damping_eV: list
    _eps: list | None = field(default=None, repr=False)
    clipped: list = field(default_factory=list, repr=False)
    method_requested: str = ""

    @property
    def k(self):
        """Wavenumber in the host [1/nm]."""
        return 2.0 * np.pi * self.n_medium / self.wavelength_nm

    @property
    def eps_medium(self):
        """Relative permittivity of the host n_medium² [1]."""
        return self.n_medium**2

    @property
    def eps_layers(self) -> list:
        """Permittivity of each layer (core first) with surface damping, broadcast (..., W).

        Evaluated on first use (a solver that computes damping itself never pays for it).
        """
        if self._eps is None:
            from .materials import damped_permittivity

            out = []
            for mat, extra, label in zip(self.particle.layer_materials(), self.damping_eV,
                                         self.particle.layer_labels()):
                if extra is None:
                    out.append(np.asarray(mat.permittivity(self.wavelength_nm), dtype=complex))
                    continue
                eps, clipped = damped_permittivity(mat, self.wavelength_nm, extra)
                if clipped:
                    self.clipped.append(label)
                out.append(eps)
            self._eps = out
        return self._eps


@dataclass
class Response:
    """Cross-sections [nm²] of one particle (or a family), shape (..., W), and how they were made.

    Parameters
    ----------
    sigma_abs_nm2, sigma_sca_nm2, sigma_ext_nm2 : ndarray
        Absorption, scattering and extinction cross-sections [nm²], shape (..., W).
    backend : str
        What computed them ("numpy", "compiled (numba)", ...), for the metadata.
    nonfinite : bool or None
        Whether any value is NaN or infinite; None when not known yet
        (:func:`nanoabs.spectrum` then checks).
    metadata : dict
        Extra facts for the spectrum's metadata (e.g. an environment's cross-section reference).
    """

    sigma_abs_nm2: np.ndarray
    sigma_sca_nm2: np.ndarray
    sigma_ext_nm2: np.ndarray
    backend: str = "numpy"
    nonfinite: bool | None = None  # None: not known yet (spectrum() checks)
    metadata: dict = field(default_factory=dict)


class Solver:
    """Base class of the optical methods (see the module docstring)."""

    name = ""
    reference = ""
    shapes: frozenset = frozenset()
    environments: frozenset = frozenset({"homogeneous"})
    max_ka = math.inf
    #: Largest k a_max for which the "auto" rule keeps this solver when a later one also accepts.
    auto_max_ka = math.inf
    advice = ""

    def accepts(self, particle) -> str | None:
        """None if the solver can treat ``particle``, else the reason it cannot (one phrase).

        Parameters
        ----------
        particle : Sphere, LayeredSphere or Ellipsoid
            The particle; its ``shape`` is compared with the solver's ``shapes``.

        Returns
        -------
        str or None
        """
        if particle.shape not in self.shapes:
            return f"it treats {', '.join(sorted(self.shapes))} particles only"
        return None

    def check(self, particle, environment) -> None:
        """Raise :class:`NanoabsError` if the particle or the environment is not accepted.

        Parameters
        ----------
        particle : Sphere, LayeredSphere or Ellipsoid
            The particle (see :meth:`accepts`).
        environment : object
            The environment; its ``kind`` must be in the solver's ``environments``.
        """
        reason = self.accepts(particle)
        if reason is None and environment.kind not in self.environments:
            reason = f"it handles {', '.join(sorted(self.environments))} environments only"
        if reason is not None:
            raise NanoabsError(f"method = {self.name!r} cannot treat a {particle.shape} in a "
                               f"{environment.kind} environment: {reason}")

    def validity(self, problem) -> list:
        """Cautions for the parts of the problem outside the method's validity.

        Parameters
        ----------
        problem : Problem
            The resolved problem (outer semi-axes [nm], wavelengths [nm], host index [1]).

        Returns
        -------
        list of Caution
            A ``size-beyond-method`` caution where k a_max > ``max_ka``
            (:func:`nanoabs.validity.size_check`), else empty.
        """
        if not math.isfinite(self.max_ka):
            return []
        return size_check(self.name, problem.particle.outer_semi_axes_nm(), problem.wavelength_nm,
                          problem.n_medium, self.max_ka, self.advice)

    def solve(self, problem) -> Response:  # pragma: no cover - every solver overrides it
        """Cross-sections of the particle in a homogeneous host.

        Parameters
        ----------
        problem : Problem
            The resolved problem; ``problem.eps_layers`` [1] and ``problem.k`` [1/nm].

        Returns
        -------
        Response
            σ_abs, σ_sca, σ_ext [nm²] of shape (..., W).
        """
        raise NotImplementedError


def _table():
    from . import dipole, mie, tmatrix

    solvers = [mie.MieSolver(), mie.MiepythonSolver(), dipole.StaticDipole(), dipole.CorrectedDipole(),
               tmatrix.TMatrixSolver()]
    return {s.name: s for s in solvers}


#: Method name → solver instance. ``"auto"`` is not a solver but the rule of :func:`choose`.
METHODS: dict = _table()

#: Preference order of the ``"auto"`` rule: exact methods first, dipole methods last.
AUTO_ORDER = ("mie", "mlwa", "tmatrix")
#: The order in a planar environment (on a substrate, buried): the multipole method of a
#: T-matrix before the point dipole, whose coupling to a close surface is poor for bodies
#: longer than their height (the environment falls back to ``mlwa`` if the order does not converge).
AUTO_ORDER_PLANAR = ("mie", "tmatrix", "mlwa")


def _ka_max(particle, wavelength_nm, n_medium) -> float:
    """Largest k a_max of the particle (family) over the wavelength grid [1]."""
    axes = particle.outer_semi_axes_nm()
    a = np.asarray(axes[0], dtype=float)
    for b in axes[1:]:
        a = np.maximum(a, b)
    return float(np.max(2.0 * np.pi * np.asarray(n_medium) / np.asarray(wavelength_nm)) * np.max(a))


def choose(method: str, particle, environment, *, wavelength_nm=None, n_medium=None) -> tuple:
    """(solver, reason): the solver for ``method``, or the ``"auto"`` rule's pick.

    The ``"auto"`` rule walks :data:`AUTO_ORDER` (exact Mie, the corrected quasi-static
    model, the T-matrix) and takes the first solver that accepts the particle and the
    environment, except that a solver is passed over when the particle is larger than its
    ``auto_max_ka`` and a later solver in the order accepts it. In effect: full Mie for
    spheres and layered spheres; for spheroids the corrected quasi-static model up to
    k a_max = 0.5 (its validity; peak within about 2 % of the T-matrix) and the T-matrix beyond; the
    T-matrix for cylinders, capped rods and rounded discs; the corrected model for coated and
    triaxial ellipsoids (with a caution beyond its range). In a planar environment the order
    is :data:`AUTO_ORDER_PLANAR`: the T-matrix (multipole method coupled to the stack) comes
    before the corrected dipole for every particle it accepts, and the environment falls
    back to the dipole method, with a caution, when the multipole order does not converge.
    The reason is recorded in the metadata.

    Parameters
    ----------
    method : str
        ``"auto"`` or a key of :data:`METHODS` (case-insensitive).
    particle : Sphere, LayeredSphere, Ellipsoid, Cylinder, CappedRod or RoundedDisc
        The particle.
    environment : object
        The environment (its ``kind`` must be served by the solver).
    wavelength_nm, n_medium : array, optional
        Vacuum wavelengths [nm] and host index [1]; without them the size rule is not applied.

    Returns
    -------
    solver : Solver
        The chosen solver.
    reason : str
        Why it was chosen (for ``metadata["method_reason"]``).

    Raises
    ------
    NanoabsError
        If the method is unknown, cannot treat the particle or the environment, or no
        method can ("auto").
    """
    names = ["auto", *METHODS]
    method = check_choice("method", method, names)
    if method != "auto":
        solver = METHODS[method]
        solver.check(particle, environment)
        return solver, "chosen by the caller"
    order = AUTO_ORDER if environment.kind == "homogeneous" else AUTO_ORDER_PLANAR
    able = [METHODS[n] for n in order
            if METHODS[n].accepts(particle) is None and environment.kind in METHODS[n].environments]
    if not able:
        why_not = [f"{METHODS[n].name}: {r}" for n in order if environment.kind in METHODS[n].environments
                   for r in [METHODS[n].accepts(particle)] if r is not None]
        raise NanoabsError(f"no method accepts a {particle.shape} in a {environment.kind} environment"
                           + (" (" + "; ".join(why_not) + ")" if why_not else ""))
    ka = None if wavelength_nm is None else _ka_max(particle, wavelength_nm, n_medium)
    for i, solver in enumerate(able):
        if ka is not None and ka > solver.auto_max_ka and i + 1 < len(able):
            continue
        why = (f"auto: k a_max = {ka:.2g} is above {able[i - 1].name}'s {able[i - 1].auto_max_ka:g}, so the next "
               f"method in the order that accepts a {particle.shape}" if i else
               f"auto: first method in the order {', '.join(order)} that accepts a {particle.shape} in a "
               f"{environment.kind} environment")
        return solver, why
