"""Design tables: validated parameters, the Cartesian plan, and their vectorised evaluation.

Shared by sweeps, ensembles and the band search. A *plan* holds the validated
inputs of a Cartesian product of design parameters; a *design table* holds the
parameter values of a set of designs (by id); :func:`evaluate` computes their
spectra with one :func:`nanoabs.spectrum` call per (material, core, medium,
spheroid kind) group.
"""

from __future__ import annotations

import warnings as _warnings

from collections.abc import Mapping

import math

import numpy as np

from .._errors import NanoabsError, check_choice, check_finite_array, suggest
from ..optics import METHODS, spectrum
from ..solvers import is_environment
from ..validity import NanoabsWarning
from ..particles import (MAX_SIZE_NM, MONOLAYER_NM, CappedRod, Cylinder, Ellipsoid, LayeredSphere,
                         RoundedDisc, Sphere, spheroid)
from ._engine import unique

#: Shape families of :func:`nanoabs.design.sweep` and :func:`nanoabs.design.ensemble_average`.
SHAPES = ("sphere", "shell", "spheroid", "ellipsoid", "cylinder", "capped-rod", "rounded-disc")
#: Bodies of revolution given by length and diameter (rods and discs), and their constructors.
AXIAL = ("spheroid", "cylinder", "capped-rod", "rounded-disc")

_GEOMETRY = {
    "sphere": ("radius_nm",),
    "shell": ("core_radius_nm", "thickness_nm"),
    "spheroid": ("length_nm", "diameter_nm", "aspect_ratio"),
    "cylinder": ("length_nm", "diameter_nm", "aspect_ratio"),
    "capped-rod": ("length_nm", "diameter_nm", "aspect_ratio"),
    "rounded-disc": ("length_nm", "diameter_nm", "aspect_ratio"),
    "ellipsoid": ("a_nm", "b_nm", "c_nm"),
}
_ALIASES = {"shell": {"shell": "material", "core": "core_material"}}
#: The method a sweep uses for method="auto": the fast method of each shape, so that a design gets
#: the same method whatever chunk or family it is computed in (the single-particle "auto" rule of
#: nanoabs.solvers.choose depends on the largest particle of a call). Rows beyond the method's
#: validity carry its caution; pass method="tmatrix" to sweep spheroids with the exact solver.
SWEEP_AUTO = {"sphere": "mie", "shell": "mie", "spheroid": "mlwa", "ellipsoid": "mlwa", "cylinder": "tmatrix",
              "capped-rod": "tmatrix", "rounded-disc": "tmatrix"}
_GEOMETRY_UNITS = {"radius_nm": "nm", "core_radius_nm": "nm", "thickness_nm": "nm", "length_nm": "nm",
                   "diameter_nm": "nm", "aspect_ratio": "1", "a_nm": "nm", "b_nm": "nm", "c_nm": "nm"}
_TEXT_UNIT = "1"  # unit recorded for text columns (material labels)


def _resolve_material(value):
    from ..materials import material

    return value if hasattr(value, "permittivity") else material(value)


def _material_label(value) -> str:
    if isinstance(value, str):
        return value
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return f"n={float(value):g}"
    return str(getattr(value, "label", getattr(value, "name", type(value).__name__)))


def _material_meta(value) -> dict:
    if is_environment(value):
        return value.describe()
    m = _resolve_material(value)
    meta = m.metadata() if callable(getattr(m, "metadata", None)) else {}
    return meta if isinstance(meta, dict) else {"description": str(meta)}


def _material_list(what, value):
    """One material (name, index or object) or a list/tuple of them, as a list."""
    if isinstance(value, (str, int, float)) or hasattr(value, "permittivity"):
        return [value]
    if isinstance(value, (list, tuple, np.ndarray)) and all(
            isinstance(v, (str, int, float)) or hasattr(v, "permittivity") for v in list(value)):
        return list(value)
    raise NanoabsError(f"{what} = {type(value).__name__}: give a material name (or index, or material object) "
                       "or a list of them")


def check_flag(name, value) -> bool:
    """``value`` if it is a bool (numpy bools too); strings such as "no" are refused, not read as true."""
    if not isinstance(value, (bool, np.bool_)):
        raise NanoabsError(f"{name} = {value!r}: must be True or False")
    return bool(value)


def _allowed_names(shape):
    extra = ["material", "medium_index"] + (["core_material"] if shape == "shell" else [])
    return list(_GEOMETRY[shape]) + extra


def _canonical_params(shape, params, *, what="params"):
    """Validated {canonical name: 1-D float array or list of materials} in the user's order."""
    if not isinstance(params, Mapping) or len(params) == 0:
        raise NanoabsError(f"{what} = {params!r}: give a dict of parameter name -> values; allowed names for "
                           f"shape {shape!r}: {', '.join(_allowed_names(shape))}")
    allowed = _allowed_names(shape)
    aliases = _ALIASES.get(shape, {})
    out = {}
    for key, value in params.items():
        name = aliases.get(key, key)
        if name not in allowed:
            raise NanoabsError(f"{what} name {key!r} is not known for shape {shape!r}"
                               f"{suggest(key, allowed + list(aliases))}; allowed: {', '.join(allowed)}")
        if name in out:
            raise NanoabsError(f"{what}: {name!r} is given twice (also as an alias); give it once")
        if name in ("material", "core_material"):
            vals = _material_list(f"{what}[{key!r}]", value)
            if not vals:
                raise NanoabsError(f"{what}[{key!r}] is empty: give at least one material")
            for v in vals:
                _resolve_material(v)  # raises NanoabsError for unknown names
            out[name] = vals
            continue
        arr = check_finite_array(f"{what}[{key!r}]", value)
        if arr.ndim != 1:
            raise NanoabsError(f"{what}[{key!r}] has shape {arr.shape}: give a 1-D array of values")
        if np.any(arr <= 0):
            raise NanoabsError(f"{what}[{key!r}] = {float(arr[arr <= 0][0]):g}: must be > 0"
                               f"{' nm' if name.endswith('_nm') else ''}")
        if name.endswith("_nm") and np.any(arr > MAX_SIZE_NM):
            raise NanoabsError(f"{what}[{key!r}] = {float(arr.max()):g} nm: allowed range is up to "
                               f"{MAX_SIZE_NM:g} nm (larger particles are outside what these solvers are for)")
        if name == "thickness_nm" and np.any(arr < MONOLAYER_NM):
            raise NanoabsError(f"{what}[{key!r}] = {float(arr.min()):g} nm: allowed range is at least "
                               f"{MONOLAYER_NM:g} nm (about one atomic monolayer)")
        out[name] = arr
    geo = [n for n in _GEOMETRY[shape] if n in out]
    if shape in AXIAL:
        if len(geo) != 2:
            raise NanoabsError(f"{what} for shape {shape!r} give {', '.join(geo) or 'no size'}: give exactly "
                               "two of length_nm, diameter_nm, aspect_ratio")
    else:
        missing = [n for n in _GEOMETRY[shape] if n not in out]
        if missing:
            raise NanoabsError(f"{what} for shape {shape!r} lacks {', '.join(missing)}: required are "
                               f"{', '.join(_GEOMETRY[shape])}")
    return out


def _make_plan(shape, params, wavelength_nm, *, material, core, medium, polarization, method,
               surface_damping, chunk_size, what="params"):
    shape = check_choice("shape", shape, SHAPES)
    canon = _canonical_params(shape, params, what=what)
    wl = check_finite_array("wavelength_nm", wavelength_nm, increasing=True)
    if np.any(wl <= 0):
        raise NanoabsError(f"wavelength_nm = {float(wl.min()):g} nm: must be > 0")
    method = check_choice("method", method, ["auto", *METHODS])
    if shape in AXIAL:
        polarization = check_choice("polarization", polarization, ["long", "short", "random", "x", "y", "z"])
    elif shape == "ellipsoid":
        polarization = check_choice("polarization", polarization, ["x", "y", "z", "random"])
    if isinstance(chunk_size, bool) or not isinstance(chunk_size, (int, np.integer)) or chunk_size < 1:
        raise NanoabsError(f"chunk_size = {chunk_size!r}: must be an integer >= 1")
    for v in (material,) + ((core,) if shape == "shell" else ()):
        _resolve_material(v)
    if "medium_index" not in canon:
        from ..materials import material as _m

        if not hasattr(medium, "permittivity") and not is_environment(medium):
            _m(medium)
    elif is_environment(medium):
        raise NanoabsError("medium_index cannot be swept in a planar environment (the environment names the host)")
    names = list(canon)
    lengths = [len(canon[n]) for n in names]
    plan = {
        "shape": shape, "names": names, "values": [canon[n] for n in names], "lengths": lengths,
        "n_designs": math.prod(lengths), "wavelength_nm": wl,
        "material": material, "core": core, "medium": medium, "polarization": polarization,
        "method": method, "surface_damping": check_flag("surface_damping", surface_damping),
        "chunk_size": int(chunk_size),
    }
    return plan


def _design_columns(plan):
    shape = plan["shape"]
    cols = ["design_id"] + list(_GEOMETRY[shape])
    if shape == "shell":
        cols.append("core_material")
    cols.append("material")
    if "medium_index" in plan["names"]:
        cols.append("medium_index")
    return cols


def _designs(plan, ids):
    """The design table of designs ``ids`` (C order of the Cartesian product: first name slowest)."""
    ids = np.asarray(ids, dtype=np.int64)
    idx = np.unravel_index(ids, plan["lengths"]) if ids.size else [np.zeros(0, int)] * len(plan["names"])
    vals = {n: v for n, v in zip(plan["names"], plan["values"])}
    pos = dict(zip(plan["names"], idx))
    n = ids.size
    t = {"design_id": ids}
    for g in _GEOMETRY[plan["shape"]]:
        if g in vals:
            t[g] = np.asarray(vals[g], dtype=float)[pos[g]]
    if plan["shape"] in AXIAL:
        if "aspect_ratio" not in t:
            t["aspect_ratio"] = t["length_nm"] / t["diameter_nm"]
        elif "diameter_nm" in t:
            t["length_nm"] = t["aspect_ratio"] * t["diameter_nm"]
        else:
            t["diameter_nm"] = t["length_nm"] / t["aspect_ratio"]
    for key, default in (("material", plan["material"]), ("core_material", plan["core"])):
        if key == "core_material" and plan["shape"] != "shell":
            continue
        options = vals.get(key, [default])
        t[key + "_options"] = options
        t[key + "_code"] = pos[key] if key in vals else np.zeros(n, dtype=np.int64)
    if "medium_index" in vals:
        t["medium_index"] = np.asarray(vals["medium_index"], dtype=float)[pos["medium_index"]]
        t["medium_options"] = [float(v) for v in vals["medium_index"]]
        t["medium_code"] = pos["medium_index"]
    else:
        t["medium_options"] = [plan["medium"]]
        t["medium_code"] = np.zeros(n, dtype=np.int64)
    return t


def _particle(shape, t, sel, mat, core):
    """The particle of designs ``sel``: sizes of shape (G, 1), or scalars for a single design.

    (A single design is passed as scalars, so its metadata holds plain numbers.)
    """
    def col(k):
        return t[k][sel][:, None] if sel.size > 1 else float(t[k][sel][0])

    if shape == "sphere":
        return Sphere(mat, col("radius_nm"))
    if shape == "shell":
        return LayeredSphere(core, col("core_radius_nm"), [(mat, col("thickness_nm"))])
    if shape == "spheroid":
        return spheroid(mat, col("length_nm"), col("diameter_nm"))
    if shape in AXIAL:
        return {"cylinder": Cylinder, "capped-rod": CappedRod, "rounded-disc": RoundedDisc}[shape](
            mat, col("length_nm"), col("diameter_nm"))
    return Ellipsoid(mat, tuple(col(k) for k in ("a_nm", "b_nm", "c_nm")))


def _evaluate(shape, t, wl, settings):
    """Spectra of every design in table ``t``; one ``spectrum`` call per (material, core, medium, kind) group.

    Returns a dict of (n, W) arrays (cross-sections [m²], reference areas [m²], n_medium),
    metal volume (n,) [m³], the warnings and the solver methods used.
    """
    n = t["design_id"].size
    W = wl.size
    out = {k: np.empty((n, W)) for k in ("sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2",
                                         "geometric_cross_section_m2", "equal_volume_area_m2", "n_medium")}
    out["metal_volume_m3"] = np.empty(n)
    warnings, methods = [], []
    kind = (t["length_nm"] < t["diameter_nm"]).astype(np.int64) if shape in AXIAL else np.zeros(n, np.int64)
    core_code = t.get("core_material_code", np.zeros(n, np.int64))
    keys = np.stack([t["material_code"], core_code, t["medium_code"], kind], axis=1) if n else np.zeros((0, 4))
    cache = {}
    for key in unique([tuple(int(v) for v in k) for k in keys]):
        sel = np.flatnonzero(np.all(keys == np.asarray(key), axis=1))
        mi, ci, di, _ = key
        if ("m", mi) not in cache:
            cache[("m", mi)] = _resolve_material(t["material_options"][mi])
        mat = cache[("m", mi)]
        core = None
        if shape == "shell":
            if ("c", ci) not in cache:
                cache[("c", ci)] = _resolve_material(t["core_material_options"][ci])
            core = cache[("c", ci)]
        where = t["medium_options"][di]
        planar = is_environment(where)
        # a planar environment takes one particle per call: its designs are computed one by one
        for part in ([sel[i:i + 1] for i in range(sel.size)] if planar else [sel]):
            with _warnings.catch_warnings():  # gathered here, issued once per sweep by its caller
                _warnings.simplefilter("ignore", NanoabsWarning)
                s = spectrum(_particle(shape, t, part, mat, core), wl,
                             **({"environment": where} if planar else {"medium": where}),
                             method=(SWEEP_AUTO[shape] if settings["method"] == "auto" else settings["method"]),
                             polarization=settings["polarization"],
                             surface_damping=settings["surface_damping"])
            for k in ("sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2", "geometric_cross_section_m2",
                      "equal_volume_area_m2"):
                out[k][part] = np.broadcast_to(getattr(s, k), (part.size, W))
            out["n_medium"][part] = np.broadcast_to(s.n_medium, (part.size, W))
            mv = np.asarray(s.metal_volume_m3, dtype=float).reshape(-1)  # (G,) or one value (no metal: 0)
            out["metal_volume_m3"][part] = mv if mv.size == part.size else mv[0]
            warnings += list(s.metadata.get("warnings", []))
            methods.append(s.metadata.get("method"))
    out["warnings"] = sorted(set(warnings))
    out["methods"] = sorted({m for m in methods if m})
    return out


def _settings(plan):
    return {k: plan[k] for k in ("method", "polarization", "surface_damping")}

