"""Particle geometries: sphere, layered sphere, ellipsoid (optionally with a confocal shell), spheroid,
finite cylinder, capped rod and rounded disc (optionally with a uniform coating).

Sizes are in nm. A size is a real number, or an explicitly shaped array of two or
more axes: a *family* with a last axis of length 1 (e.g. radius of shape (P, 1)),
which the solvers broadcast against the W wavelengths to a (P, W) result, or a
geometry that deliberately varies with wavelength (shape (1, W)). A 1-D array of
several sizes is refused, because against a grid of as many wavelengths it would
broadcast into a "diagonal" spectrum (size i at wavelength i) instead of a family;
write ``sizes[:, None]``. Every size must lie in (0, ``MAX_SIZE_NM``]; a size below
``MONOLAYER_NM`` is accepted with a :class:`~nanoabs.validity.NanoabsWarning`
(it usually means metres or micrometres were typed as nanometres).
Materials are names, numbers (constant index) or :class:`~nanoabs.materials.Material`.

Orientation convention for non-spherical particles: semi-axes (a, b, c) lie
along x, y, z. Light is taken to travel along z (normal incidence on a
substrate carrying the particle in the x–y plane) when the field is along x or
y, and along x when the field is along z. A rod from :func:`spheroid` with
length > diameter lies along x; a disc (length < diameter) has its symmetry axis
along z. "long" and "short" pick the field along the long or a short axis.
Cylinders, capped rods and rounded discs follow the same rule (rod along x, disc axis along z).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass
from typing import Sequence

import numpy as np

from ._errors import NanoabsError, _fmt, check_choice, check_positive

__all__ = ["Sphere", "LayeredSphere", "Ellipsoid", "spheroid", "Cylinder", "CappedRod", "RoundedDisc",
           "MONOLAYER_NM", "MAX_SIZE_NM", "check_size_family"]

#: Thinnest shell accepted [nm]: about one atomic monolayer of gold/silver
#: (lattice constant 0.408 nm; (111) spacing 0.236 nm; common practice to call
#: ~0.2-0.3 nm a monolayer). Thinner "shells" are outside any continuum model.
MONOLAYER_NM = 0.2

#: Largest size accepted [nm] (radius, thickness, semi-axis): 10 um. nanoabs is for nano- and
#: sub-micron particles; at 10 um the Mie series already needs ~1e3 orders per wavelength in a
#: high-index host (cost grows linearly with size; 1e7 nm took 45 s per spectrum), and ray
#: optics is the right model well before. A documented bound, not a physical limit.
MAX_SIZE_NM = 1.0e4


def _mat(value):
    from .materials import Material, material

    if isinstance(value, Material) or hasattr(value, "permittivity"):
        return value
    return material(value)


def _size(name: str, value) -> np.ndarray:
    """A size [nm]: real, finite, in (0, MAX_SIZE_NM], scalar or a family with a last axis of 1."""
    arr = check_positive(name, value, unit="nm")
    if arr.size == 0:
        raise NanoabsError(f"{name}: an empty array; give a size in nm or a family of shape (P, 1)")
    if arr.ndim == 1 and arr.size > 1:
        raise NanoabsError(
            f"{name}: a 1-D array of {arr.size} sizes is ambiguous (against {arr.size} wavelengths it "
            "would pair size i with wavelength i); give a scalar or a family of shape (P, 1), "
            "e.g. sizes[:, None]")
    if np.any(arr > MAX_SIZE_NM):
        raise NanoabsError(f"{name} = {float(np.max(arr)):g} nm: allowed range is 0 to {MAX_SIZE_NM:g} nm "
                           "(nanoabs models nano- and sub-micron particles)")
    if np.any(arr < MONOLAYER_NM):
        from .validity import NanoabsWarning

        warnings.warn(f"{name} = {float(np.min(arr)):g} nm is below one atomic monolayer "
                      f"({MONOLAYER_NM:g} nm): sizes are in nanometres (were metres or micrometres "
                      "typed?)", NanoabsWarning, stacklevel=4)
    return arr


def _common_shape(what: str, *sizes) -> None:
    """Refuse size families that do not broadcast together (e.g. (3, 1) with (4, 1))."""
    try:
        np.broadcast_shapes(*(np.shape(v) for v in sizes))
    except ValueError:
        shapes = ", ".join(str(np.shape(v)) for v in sizes)
        raise NanoabsError(f"{what}: size families of shapes {shapes} do not broadcast together; "
                           "give equal family lengths P (each of shape (P, 1)) or scalars") from None


def _check_outer(name: str, value) -> None:
    """The outer size of a coated particle obeys the same bound as every size."""
    if np.any(np.asarray(value) > MAX_SIZE_NM):
        raise NanoabsError(f"{name} = {float(np.max(value)):g} nm: allowed range is 0 to {MAX_SIZE_NM:g} nm")


def _pair(name: str, item) -> tuple:
    """A (material, thickness_nm) pair; a one-line error for anything else."""
    if isinstance(item, (str, bytes, dict)) or not hasattr(item, "__len__") or len(item) != 2:
        raise NanoabsError(f"{name} = {_fmt(item)}: must be a (material, thickness_nm) pair")
    mat, t = item
    return _mat(mat), _check_thickness(f"{name} thickness", t)


def check_size_family(particle, wavelength_nm) -> None:
    """Refuse sizes that would broadcast against the wavelength grid into a "diagonal".

    The rule (module docstring): a size is a scalar or an explicitly shaped array of two or
    more axes whose last axis is 1 (a family, shape (P, 1)) or the number of wavelengths W
    (a geometry that deliberately varies with wavelength, shape (1, W) or (P, W)). A 1-D array
    of several sizes is refused. The constructors enforce the 1-D part; this re-checks a
    particle (attributes may be changed after construction) against the grid it is about to
    be evaluated on: call it at the top of ``spectrum()``.
    """
    n = np.size(wavelength_nm)
    for label, size in zip(particle.layer_labels(), particle.damping_lengths_nm()):
        shape = np.shape(size)
        if len(shape) == 1 and shape[0] > 1:
            raise NanoabsError(
                f"particle {label} size: a 1-D array of shape {shape} against {n} wavelengths is "
                "ambiguous; give a scalar or a family of shape (P, 1), e.g. sizes[:, None]")
        if len(shape) > 1 and shape[-1] not in (1, n):
            raise NanoabsError(
                f"particle {label} size: shape {shape} has a last axis of {shape[-1]}, neither 1 (a "
                f"family of shape (P, 1)) nor the number of wavelengths ({n})")


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
    """Homogeneous sphere of ``radius_nm`` [nm].

    Parameters
    ----------
    material : str, number or Material
        Material name, constant refractive index [1], or a :class:`~nanoabs.materials.Material`.
    radius_nm : float or array_like
        Radius [nm]: a number or a family of shape (P, 1) (see the module docstring).
    """

    material: object
    radius_nm: object

    def __post_init__(self):
        self.material = _mat(self.material)
        self.radius_nm = _size("radius", self.radius_nm)

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
    """Core of ``core_radius_nm`` [nm] with shells [(material, thickness_nm), ...] outward.

    Parameters
    ----------
    core : str, number or Material
        Core material: name, constant refractive index [1], or a Material.
    core_radius_nm : float or array_like
        Core radius [nm]: a number or a family of shape (P, 1).
    shells : sequence of (material, thickness_nm)
        At least one shell, from the core outward; each thickness [nm] is at least
        ``MONOLAYER_NM``.
    """

    core: object
    core_radius_nm: object
    shells: Sequence

    def __post_init__(self):
        self.core = _mat(self.core)
        self.core_radius_nm = _size("core radius", self.core_radius_nm)
        if isinstance(self.shells, (str, bytes, dict)) or not hasattr(self.shells, "__len__"):
            raise NanoabsError(f"shells = {_fmt(self.shells)}: give a list of (material, thickness_nm) pairs")
        if len(self.shells) == 0:
            raise NanoabsError("shells: give at least one (material, thickness_nm) pair")
        self.shells = [_pair(f"shell {i}", item) for i, item in enumerate(self.shells, 1)]
        _common_shape("layered sphere", self.core_radius_nm, *(t for _, t in self.shells))
        _check_outer("outer radius", self.outer_radius_nm)

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
    return _size(name, t)


@dataclass
class Ellipsoid:
    """Ellipsoid with semi-axes (a, b, c) [nm] along x, y, z; optional confocal shell.

    ``shell`` = (material, thickness_nm): a confocal coating whose thickness is
    measured along the shortest semi-axis (the confocal family then fixes the
    thickness along the others; they are thinner along longer axes).

    Parameters
    ----------
    material : str, number or Material
        Core material: name, constant refractive index [1], or a Material.
    semi_axes_nm : sequence of 3 float
        Semi-axes (a, b, c) [nm] along x, y, z.
    shell : (material, thickness_nm) or None, optional
        Confocal coating; thickness [nm] along the shortest semi-axis.
    kind : str, optional
        Label in outputs: ``'ellipsoid'``, or ``'rod'`` / ``'disc'`` when built by :func:`spheroid`.
    """

    material: object
    semi_axes_nm: Sequence
    shell: tuple | None = None
    kind: str = "ellipsoid"  # "rod" / "disc" when built by spheroid()

    def __post_init__(self):
        self.material = _mat(self.material)
        axes = self.semi_axes_nm
        if isinstance(axes, (str, bytes, dict, set)) or not hasattr(axes, "__len__") or len(axes) != 3:
            raise NanoabsError(f"semi-axes = {_fmt(axes)}: give exactly three lengths a,b,c in nm")
        self.semi_axes_nm = tuple(_size(f"semi-axis {n}", v) for n, v in zip("abc", axes))
        _common_shape("ellipsoid semi-axes", *self.semi_axes_nm)
        if self.shell is not None:
            self.shell = _pair("shell", self.shell)
            _common_shape("ellipsoid with shell", *self.semi_axes_nm, self.shell[1])
            for n, v in zip("abc", self.shell_axes_nm()):
                _check_outer(f"outer semi-axis {n}", v)

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
        """Surface area of an ellipsoid [nm²].

        Parameters
        ----------
        axes : tuple of 3 float, optional
            Semi-axes [nm]; by default the outer semi-axes (of the shell, if any).
        """
        from .quasistatic import ellipsoid_surface_area

        return ellipsoid_surface_area(*(axes or self.outer_axes_nm))

    def projected_area_nm2(self, axis: str):
        """Geometric cross-section [nm²] for the field along ``axis`` (module docstring convention).

        Parameters
        ----------
        axis : str
            Field direction ``'x'``, ``'y'`` (light along z: π a b) or ``'z'`` (light along x: π b c).
        """
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

        Parameters
        ----------
        polarization : str
            Field direction ``'x'``, ``'y'`` or ``'z'``, or ``'random'`` for random orientation.
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
    material : str, number or Material
        Material name, constant refractive index [1], or a Material.
    length_nm : float
        Extent along the symmetry axis [nm].
    diameter_nm : float
        Extent across it [nm].
    shell : (material, thickness_nm) or None, keyword-only
        Confocal coating; thickness [nm] along the shortest semi-axis (see :class:`Ellipsoid`).
    """
    L = _size("length", length_nm)
    D = _size("diameter", diameter_nm)
    _common_shape("spheroid", L, D)
    if np.ndim(L) == 0 and np.ndim(D) == 0 and float(L) < float(D):
        return Ellipsoid(material, (D / 2, D / 2, L / 2), shell, kind="disc")
    if np.ndim(L) or np.ndim(D):
        if np.any(L < D) and np.any(L >= D):
            raise NanoabsError("length/diameter arrays must be all rods (length >= diameter) or all discs")
        if np.all(L < D):
            return Ellipsoid(material, (D / 2, D / 2, L / 2), shell, kind="disc")
    return Ellipsoid(material, (L / 2, D / 2, D / 2), shell, kind="rod")


@dataclass
class _RoundBody:
    """Body of revolution with flat or rounded ends (subclasses set ``shape``), bare or coated.

    ``length_nm`` is the extent of the body (the core, if coated) along the symmetry axis
    (tip to tip), ``diameter_nm`` across it [nm]. A rod (length >= diameter) lies along x,
    a disc along z. ``shell`` = (material, thickness_nm) is a uniform coating: its outer
    surface is the same shape with length + 2t and diameter + 2t (for a capped rod and a
    rounded disc that is the exact offset surface, the same thickness everywhere; for a
    cylinder the coating is t thick on the faces and the side and squared off at the edges).
    """

    material: object
    length_nm: object
    diameter_nm: object
    shell: tuple | None = None

    def __post_init__(self):
        self.material = _mat(self.material)
        self.length_nm = _size("length", self.length_nm)
        self.diameter_nm = _size("diameter", self.diameter_nm)
        _common_shape(self.shape, self.length_nm, self.diameter_nm)
        rods = self.length_nm >= self.diameter_nm
        if np.any(rods) and not np.all(rods):
            raise NanoabsError("length/diameter arrays must be all rods (length >= diameter) or all discs")
        self.kind = "rod" if np.all(rods) else "disc"
        if self.shell is not None:
            self.shell = _pair("shell", self.shell)
            _common_shape(f"{self.shape} with shell", self.length_nm, self.diameter_nm, self.shell[1])
            _check_outer("outer length", self.outer_length_nm)
            _check_outer("outer diameter", self.outer_diameter_nm)

    @property
    def outer_length_nm(self):
        """Length of the outer surface [nm] (of the coating, if any)."""
        return self.length_nm + (2 * self.shell[1] if self.shell is not None else 0.0)

    @property
    def outer_diameter_nm(self):
        """Diameter of the outer surface [nm] (of the coating, if any)."""
        return self.diameter_nm + (2 * self.shell[1] if self.shell is not None else 0.0)

    def _volume(self, L, D):  # pragma: no cover - each shape defines its own
        raise NotImplementedError

    def _surface(self, L, D):  # pragma: no cover
        raise NotImplementedError

    def _side_area(self, L, D):  # pragma: no cover
        """Projected area seen from the side (light perpendicular to the axis) [nm²]."""
        raise NotImplementedError

    def volume_nm3(self):
        """Volume inside the outer surface [nm³] (core plus coating, as for :class:`Ellipsoid`)."""
        return self._volume(self.outer_length_nm, self.outer_diameter_nm)

    def core_volume_nm3(self):
        """Volume of the body without its coating [nm³]."""
        return self._volume(self.length_nm, self.diameter_nm)

    def surface_nm2(self):
        """Area of the outer surface [nm²]."""
        return self._surface(self.outer_length_nm, self.outer_diameter_nm)

    def side_area_nm2(self):
        """Side-on projected area of the outer surface [nm²]."""
        return self._side_area(self.outer_length_nm, self.outer_diameter_nm)

    def layer_materials(self) -> list:
        return [self.material] + ([self.shell[0]] if self.shell is not None else [])

    def layer_labels(self) -> list:
        return ["core", "shell"] if self.shell is not None else [self.shape]

    def damping_lengths_nm(self) -> list:
        """4V/S of the core (Coronado & Schatz, J. Chem. Phys. 119, 3926 (2003)); the thickness
        of a coating (documented approximation, as for :class:`Ellipsoid`)."""
        core = 4.0 * self.core_volume_nm3() / self._surface(self.length_nm, self.diameter_nm)
        return [core] + ([np.asarray(self.shell[1], dtype=float)] if self.shell is not None else [])

    def outer_semi_axes_nm(self) -> tuple:
        L, R = self.outer_length_nm / 2, self.outer_diameter_nm / 2
        return (L, R, R) if self.kind == "rod" else (R, R, L)

    def reference_area_nm2(self, polarization):
        """(geometric cross-section [nm²] of the outer surface, description), as for :class:`Ellipsoid`."""
        if polarization == "random":
            return self.surface_nm2() / 4.0, "surface area / 4 (random orientation, Cauchy's theorem)"
        along_axis = (polarization == "z") == (self.kind == "rod")  # light along the symmetry axis
        if along_axis:
            return np.pi * (self.outer_diameter_nm / 2) ** 2, "end-on projected area pi D^2/4 (light along the axis)"
        return self.side_area_nm2(), "side-on projected area (light perpendicular to the axis)"

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
        d = {"shape": self.shape, "material": self.material.label, "length_nm": _plain(self.length_nm),
             "diameter_nm": _plain(self.diameter_nm), "kind": self.kind}
        if self.shell is not None:
            d["shell"] = {"material": self.shell[0].label, "thickness_nm": _plain(self.shell[1]),
                          "outer_length_nm": _plain(self.outer_length_nm),
                          "outer_diameter_nm": _plain(self.outer_diameter_nm)}
        return d


_BODY_PARAMETERS = """
    Parameters
    ----------
    material : str, float or Material
        Particle material (name, constant refractive index or a material object).
    length_nm : float or array_like
        Extent along the symmetry axis, tip to tip [nm]; a family has shape (P, 1).
    diameter_nm : float or array_like
        Extent across the axis [nm].
    shell : (material, thickness_nm) or None, optional
        Uniform coating (oxide or ligand shell) of thickness t [nm]; its outer surface is the
        same shape with length + 2t and diameter + 2t (the exact offset surface of a capped rod
        or a rounded disc; a cylinder's coating is squared off at the edges).
    """


class Cylinder(_RoundBody):
    __doc__ = ("Finite homogeneous cylinder with flat ends: ``Cylinder(material, length_nm, diameter_nm)``.\n"
               + _BODY_PARAMETERS)

    shape = "cylinder"

    def _volume(self, L, D):
        return np.pi * (D / 2) ** 2 * L

    def _surface(self, L, D):
        R = D / 2
        return 2 * np.pi * R * (R + L)

    def _side_area(self, L, D):
        return L * D


class CappedRod(_RoundBody):
    __doc__ = "Rod with hemispherical caps, ``length_nm`` tip to tip (>= ``diameter_nm``).\n" + _BODY_PARAMETERS

    shape = "capped-rod"

    def __post_init__(self):
        super().__post_init__()
        if self.kind != "rod":
            raise NanoabsError(f"length = {_plain(self.length_nm)} nm: a capped rod needs length >= diameter "
                               f"({_plain(self.diameter_nm)} nm)")

    def _volume(self, L, D):
        R = D / 2
        return np.pi * R**2 * (L - 2 * R) + 4.0 / 3.0 * np.pi * R**3

    def _surface(self, L, D):
        R = D / 2
        return 2 * np.pi * R * (L - 2 * R) + 4 * np.pi * R**2

    def _side_area(self, L, D):
        R = D / 2
        return 2 * R * (L - 2 * R) + np.pi * R**2


class RoundedDisc(_RoundBody):
    """Disc with a rounded rim (a half-torus of radius length/2), ``length_nm`` <= ``diameter_nm``.

    Volume and area by Pappus's theorems: the rim is a half-disc (area π a²/2,
    centroid at ρ0 + 4a/3π) or a half-circle (length π a, centroid at ρ0 + 2a/π)
    turned about the axis, with a = length/2 and ρ0 = diameter/2 − a.

    Parameters
    ----------
    material : str, float or Material
        Particle material (name, constant refractive index or a material object).
    length_nm : float or array_like
        Thickness of the disc (<= ``diameter_nm``) [nm]; a family has shape (P, 1).
    diameter_nm : float or array_like
        Extent across the axis, rim included [nm].
    shell : (material, thickness_nm) or None, optional
        Uniform coating of thickness t [nm]: its outer surface is the rounded disc of
        length + 2t and diameter + 2t (the exact offset surface).
    """

    shape = "rounded-disc"

    def __post_init__(self):
        super().__post_init__()
        if np.any(self.length_nm > self.diameter_nm):
            raise NanoabsError(f"length = {_plain(self.length_nm)} nm: a rounded disc needs length <= diameter "
                               f"({_plain(self.diameter_nm)} nm)")

    @staticmethod
    def _a_rho0(L, D):
        a = L / 2
        return a, D / 2 - a

    def _volume(self, L, D):
        a, p0 = self._a_rho0(L, D)
        return 2 * np.pi * a * p0**2 + np.pi**2 * a**2 * p0 + 4.0 / 3.0 * np.pi * a**3

    def _surface(self, L, D):
        a, p0 = self._a_rho0(L, D)
        return 2 * np.pi * p0**2 + 2 * np.pi**2 * a * p0 + 4 * np.pi * a**2

    def _side_area(self, L, D):
        a, p0 = self._a_rho0(L, D)
        return 4 * a * p0 + np.pi * a**2


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
