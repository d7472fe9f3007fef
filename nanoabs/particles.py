"""Particle geometries: sphere, layered sphere, ellipsoid (optionally with a confocal shell), spheroid.

Sizes are in nm and may be numpy arrays (they broadcast against the wavelength
grid in the solvers, e.g. radius of shape (P, 1) against W wavelengths).
Materials are names, numbers (constant index) or :class:`~nanoabs.materials.Material`.

Orientation convention for non-spherical particles: semi-axes (a, b, c) lie
along x, y, z. Light is taken to travel along z (normal incidence on a
substrate carrying the particle in the x–y plane) when the field is along x or
y, and along x when the field is along z. A rod from :func:`spheroid` with
length > diameter lies along x; a disc (length < diameter) has its symmetry axis
along z. "long" and "short" pick the field along the long or a short axis.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ._errors import NanoabsError, check_choice, check_positive

__all__ = ["Sphere", "LayeredSphere", "Ellipsoid", "spheroid", "MONOLAYER_NM"]

#: Thinnest shell accepted [nm]: about one atomic monolayer of gold/silver
#: (lattice constant 0.408 nm; (111) spacing 0.236 nm; common practice to call
#: ~0.2-0.3 nm a monolayer). Thinner "shells" are outside any continuum model.
MONOLAYER_NM = 0.2


def _mat(value):
    from .materials import Material, material

    if isinstance(value, Material) or hasattr(value, "permittivity"):
        return value
    return material(value)


class _Spherical:
    """Geometry facts shared by homogeneous and layered spheres (from ``layers``)."""

    @property
    def outer_radius_nm(self):
        return self.layers[-1][1]

    def volume_nm3(self):
        return 4.0 / 3.0 * np.pi * self.outer_radius_nm**3

    def surface_nm2(self):
        return 4.0 * np.pi * self.outer_radius_nm**2

    def layer_materials(self) -> list:
        """Materials of the layers, core first."""
        return [m for m, _ in self.layers]

    def layer_labels(self) -> list:
        return ["sphere"] if len(self.layers) == 1 else ["core"] + [f"shell {i}" for i in
                                                                    range(1, len(self.layers))]

    def damping_lengths_nm(self) -> list:
        """Effective electron mean-free-path limit of each layer [nm]: 4V/S = 4r/3 for the core
        (Coronado & Schatz, J. Chem. Phys. 119, 3926 (2003)), the thickness for a shell (a
        documented approximation)."""
        radii = [np.asarray(r, dtype=float) for _, r in self.layers]
        return [4.0 / 3.0 * radii[0]] + [radii[i] - radii[i - 1] for i in range(1, len(radii))]

    def outer_semi_axes_nm(self) -> tuple:
        return (np.asarray(self.outer_radius_nm, dtype=float),)

    def reference_area_nm2(self, polarization=None):
        """(geometric cross-section π r_outer² [nm²], its description)."""
        return np.pi * np.asarray(self.outer_radius_nm, dtype=float) ** 2, "pi r_outer^2"

    def equal_volume_area_nm2(self):
        return np.pi * np.asarray(self.outer_radius_nm, dtype=float) ** 2

    def metal_volume_nm3(self):
        """Volume of the metal layers [nm³]."""
        out, r_in = 0.0, 0.0
        for mat, r in self.layers:
            if mat.is_metal:
                out = out + 4.0 / 3.0 * np.pi * (np.asarray(r, dtype=float) ** 3 - r_in**3)
            r_in = np.asarray(r, dtype=float)
        return out


@dataclass
class Sphere(_Spherical):
    """Homogeneous sphere of ``radius_nm`` [nm]."""

    material: object
    radius_nm: object

    def __post_init__(self):
        self.material = _mat(self.material)
        self.radius_nm = check_positive("radius", self.radius_nm, unit="nm")

    shape = "sphere"

    @property
    def layers(self):
        """[(material, outer radius [nm])] from the centre outward."""
        return [(self.material, self.radius_nm)]

    def describe(self) -> dict:
        return {"shape": "sphere", "material": self.material.label,
                "radius_nm": _plain(self.radius_nm)}


@dataclass
class LayeredSphere(_Spherical):
    """Core of ``core_radius_nm`` [nm] with shells [(material, thickness_nm), ...] outward."""

    core: object
    core_radius_nm: object
    shells: Sequence

    def __post_init__(self):
        self.core = _mat(self.core)
        self.core_radius_nm = check_positive("core radius", self.core_radius_nm, unit="nm")
        if len(self.shells) == 0:
            raise NanoabsError("shells: give at least one (material, thickness_nm) pair")
        out = []
        for i, item in enumerate(self.shells, 1):
            if isinstance(item, str) or not hasattr(item, "__len__") or len(item) != 2:
                raise NanoabsError(f"shell {i} = {item!r}: must be a (material, thickness_nm) pair")
            mat, t = item
            out.append((_mat(mat), _check_thickness(f"shell {i} thickness", t)))
        self.shells = out

    shape = "layered sphere"

    @property
    def layers(self):
        r = self.core_radius_nm
        out = [(self.core, r)]
        for mat, t in self.shells:
            r = r + t
            out.append((mat, r))
        return out

    def describe(self) -> dict:
        return {"shape": "layered sphere", "core": self.core.label,
                "core_radius_nm": _plain(self.core_radius_nm),
                "shells": [{"material": m.label, "thickness_nm": _plain(t)} for m, t in self.shells]}


def _check_thickness(name, t):
    t = check_positive(name, t, unit="nm")
    if np.any(t < MONOLAYER_NM):
        raise NanoabsError(f"{name} = {float(np.min(t)):g} nm: must be at least "
                           f"{MONOLAYER_NM:g} nm (about one atomic monolayer)")
    return t


@dataclass
class Ellipsoid:
    """Ellipsoid with semi-axes (a, b, c) [nm] along x, y, z; optional confocal shell.

    ``shell`` = (material, thickness_nm): a confocal coating whose thickness is
    measured along the shortest semi-axis (the confocal family then fixes the
    thickness along the others; they are thinner along longer axes).
    """

    material: object
    semi_axes_nm: Sequence
    shell: tuple | None = None
    kind: str = "ellipsoid"  # "rod" / "disc" when built by spheroid()

    def __post_init__(self):
        self.material = _mat(self.material)
        try:
            axes = tuple(self.semi_axes_nm)
        except TypeError:
            raise NanoabsError(f"semi-axes = {self.semi_axes_nm!r}: give three lengths a,b,c in nm") from None
        if len(axes) != 3:
            raise NanoabsError(f"semi-axes = {self.semi_axes_nm!r}: give exactly three lengths a,b,c in nm")
        self.semi_axes_nm = tuple(check_positive(f"semi-axis {n}", v, unit="nm") for n, v in zip("abc", axes))
        if self.shell is not None:
            if isinstance(self.shell, str) or not hasattr(self.shell, "__len__") or len(self.shell) != 2:
                raise NanoabsError(f"shell = {self.shell!r}: must be a (material, thickness_nm) pair")
            mat, t = self.shell
            self.shell = (_mat(mat), _check_thickness("shell thickness", t))

    shape = "ellipsoid"

    def shell_axes_nm(self):
        """Outer semi-axes of the confocal shell: a_i² + t_conf with t_conf from the thinnest axis."""
        a = self.semi_axes_nm
        t = self.shell[1]
        amin = np.minimum(np.minimum(a[0], a[1]), a[2])
        tconf = (amin + t) ** 2 - amin**2
        return tuple(np.sqrt(ai**2 + tconf) for ai in a)

    @property
    def outer_axes_nm(self):
        return self.shell_axes_nm() if self.shell is not None else self.semi_axes_nm

    def volume_nm3(self):
        a, b, c = self.outer_axes_nm
        return 4.0 / 3.0 * np.pi * a * b * c

    def core_volume_nm3(self):
        a, b, c = self.semi_axes_nm
        return 4.0 / 3.0 * np.pi * a * b * c

    def surface_nm2(self, axes=None):
        from .quasistatic import ellipsoid_surface_area

        return ellipsoid_surface_area(*(axes or self.outer_axes_nm))

    def projected_area_nm2(self, axis: str):
        """Geometric cross-section for the field along ``axis`` (module docstring convention)."""
        a, b, c = self.outer_axes_nm
        return np.pi * a * b if axis in ("x", "y") else np.pi * b * c

    def layer_materials(self) -> list:
        return [self.material] + ([self.shell[0]] if self.shell is not None else [])

    def layer_labels(self) -> list:
        return ["core", "shell"] if self.shell is not None else [self.kind]

    def damping_lengths_nm(self) -> list:
        """Effective mean-free-path limit per layer [nm]: 4V/S of the core (Coronado & Schatz,
        J. Chem. Phys. 119, 3926 (2003)), the thickness of a shell (documented approximation)."""
        core = tuple(np.asarray(a, dtype=float) for a in self.semi_axes_nm)
        out = [4.0 * self.core_volume_nm3() / self.surface_nm2(core)]
        return out + ([np.asarray(self.shell[1], dtype=float)] if self.shell is not None else [])

    def outer_semi_axes_nm(self) -> tuple:
        return tuple(np.asarray(a, dtype=float) for a in self.outer_axes_nm)

    def reference_area_nm2(self, polarization):
        """(geometric cross-section [nm²], its description) for a resolved polarisation axis.

        Fixed field: the projected area for the light direction of the module convention;
        random orientation: surface area / 4 (Cauchy's theorem for convex bodies).
        """
        if polarization == "random":
            return self.surface_nm2() / 4.0, "surface area / 4 (random orientation, Cauchy's theorem)"
        text = ("projected area pi a b (light along z)" if polarization in ("x", "y")
                else "projected area pi b c (light along x)")
        return self.projected_area_nm2(polarization), text

    def equal_volume_area_nm2(self):
        return np.pi * (3 * self.volume_nm3() / (4 * np.pi)) ** (2.0 / 3.0)

    def metal_volume_nm3(self):
        """Volume of the metal parts [nm³]."""
        core = self.core_volume_nm3()
        out = core if self.material.is_metal else 0.0
        if self.shell is not None and self.shell[0].is_metal:
            out = out + (self.volume_nm3() - core)
        return out

    def describe(self) -> dict:
        d = {"shape": self.kind, "material": self.material.label,
             "semi_axes_nm": [_plain(v) for v in self.semi_axes_nm]}
        if self.shell is not None:
            d["shell"] = {"material": self.shell[0].label, "thickness_nm": _plain(self.shell[1]),
                          "outer_semi_axes_nm": [_plain(v) for v in self.shell_axes_nm()]}
        return d


def spheroid(material, length_nm, diameter_nm, *, shell=None) -> Ellipsoid:
    """Rod (length > diameter, axis along x) or disc (length < diameter, axis along z).

    Parameters
    ----------
    length_nm : float
        Extent along the symmetry axis [nm].
    diameter_nm : float
        Extent across it [nm].
    """
    L = check_positive("length", length_nm, unit="nm")
    D = check_positive("diameter", diameter_nm, unit="nm")
    if np.ndim(L) == 0 and np.ndim(D) == 0 and float(L) < float(D):
        return Ellipsoid(material, (D / 2, D / 2, L / 2), shell, kind="disc")
    if np.ndim(L) or np.ndim(D):
        if np.any(L < D) and np.any(L >= D):
            raise NanoabsError("length/diameter arrays must be all rods (length >= diameter) or all discs")
        if np.all(L < D):
            return Ellipsoid(material, (D / 2, D / 2, L / 2), shell, kind="disc")
    return Ellipsoid(material, (L / 2, D / 2, D / 2), shell, kind="rod")


def resolve_polarization(particle, polarization: str) -> str:
    """Map 'long'/'short'/'x'/'y'/'z'/'random' to an axis letter or 'random'."""
    if isinstance(particle, (Sphere, LayeredSphere)):
        return "x"
    kind = getattr(particle, "kind", "ellipsoid")
    if kind in ("rod", "disc"):
        p = check_choice("polarization", polarization, ["long", "short", "random", "x", "y", "z"])
        if p == "long":
            return "x"
        if p == "short":
            return "y" if kind == "rod" else "z"
        return p
    return check_choice("polarization", polarization, ["x", "y", "z", "random"])


def _plain(v):
    """A size for metadata: a float for one value (any shape), else a flat list."""
    a = np.asarray(v, dtype=float)
    return float(a.reshape(-1)[0]) if a.size == 1 else a.ravel().tolist()
