"""Design studies: parameter sweeps, size-distribution ensembles and a band-targeted search.

The designer's question — which particle, of which size, shape and coating,
puts strong absorption in my band, and how sensitive is that to the size
spread I will actually get? — is answered with:

:func:`sweep`
    Spectra of the Cartesian product of design parameters as one tidy table
    (one row per design and wavelength). Designs are processed in chunks; each
    chunk of one shape family is one vectorised :func:`nanoabs.spectrum` call
    per material/medium group. Chunks run in-process, in a process pool or on
    any executor with ``submit`` (a Dask ``distributed.Client`` works
    unchanged), can be streamed to disk and resumed after an interruption.
:func:`ensemble_average`
    The per-particle average spectrum over a size (or aspect-ratio)
    distribution: Gauss–Hermite quadrature for normal and log-normal
    distributions, or a user histogram.
:func:`search`
    A coarse vectorised grid per particle family followed by bounded local
    refinement (Nelder–Mead) of the best designs for a band-averaged figure of
    merit, with the sensitivity of the absorption peak to a 1 nm change of each
    dimension.
:func:`band`
    A validated (lo, hi) target band from its edges or its centre and width.
:func:`write`
    Export a sweep or search table (CSV + JSON sidecar with the unit of every
    column, as :func:`nanoabs.export.write_export`).

Parameter names (sizes in nm; ``aspect_ratio`` = length / diameter)
-------------------------------------------------------------------
=============  ===============================================================
``sphere``     ``radius_nm``
``shell``      ``core_radius_nm``, ``thickness_nm``; core material
               ``core_material`` (alias ``core``), shell material ``material``
               (alias ``shell``)
``spheroid``   two of ``length_nm``, ``diameter_nm``, ``aspect_ratio``
               (rods: length > diameter; discs: length < diameter)
``ellipsoid``  ``a_nm``, ``b_nm``, ``c_nm`` (semi-axes along x, y, z)
all shapes     ``material`` (material names or material objects) and
               ``medium_index`` (a constant, real refractive index that
               replaces ``medium``)
=============  ===============================================================

Reproducibility
---------------
A chunk's result depends only on the sweep's arguments and the chunk index:
it is bit-for-bit the same whichever executor computes it (in-process, process
pool, Dask). Different chunk sizes group designs differently inside the
vectorised solvers (the Mie solver starts its downward recurrence from the
largest size parameter of a batch; numpy's vectorised and scalar loops round
differently in the last bit), so sweeps with different chunk sizes agree to
about 1e-15 relative, not bit-for-bit.
"""

from __future__ import annotations

import hashlib
import itertools
import json
import math
import shutil
import sys
import time
from collections import deque
from collections.abc import Mapping
from contextlib import closing
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from . import __version__
from ._errors import NanoabsError, check_choice, check_finite_array, suggest
from .optics import METHODS, UNITS as _SPECTRUM_UNITS, Spectrum, _peak, spectrum
from .particles import MONOLAYER_NM, Ellipsoid, LayeredSphere, Sphere, spheroid

__all__ = ["SHAPES", "FAMILIES", "OBJECTIVES", "RESULT_COLUMNS", "sweep", "ensemble_average",
           "search", "band", "write"]

#: Shape families of :func:`sweep` and :func:`ensemble_average`.
SHAPES = ("sphere", "shell", "spheroid", "ellipsoid")
#: Particle families of :func:`search`.
FAMILIES = ("sphere", "shell", "rod", "disc")
#: Figures of merit of :func:`search`.
OBJECTIVES = ("sigma_abs", "sigma_abs_per_volume", "q_abs", "absorbed_fraction", "injection")
#: Spectral columns of a sweep table, after the design columns.
RESULT_COLUMNS = ["wavelength_nm", "sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2",
                  "q_abs", "q_sca", "q_ext", "absorbed_fraction"]

_GEOMETRY = {
    "sphere": ("radius_nm",),
    "shell": ("core_radius_nm", "thickness_nm"),
    "spheroid": ("length_nm", "diameter_nm", "aspect_ratio"),
    "ellipsoid": ("a_nm", "b_nm", "c_nm"),
}
_ALIASES = {"shell": {"shell": "material", "core": "core_material"}}
_GEOMETRY_UNITS = {"radius_nm": "nm", "core_radius_nm": "nm", "thickness_nm": "nm", "length_nm": "nm",
                   "diameter_nm": "nm", "aspect_ratio": "1", "a_nm": "nm", "b_nm": "nm", "c_nm": "nm"}
_TEXT_UNIT = "1"  # unit recorded for text columns (material labels)
_PARTS_FORMAT = "nanoabs-sweep-parts"
#: Seconds a sweep or search must run before the progress bar appears.
_PROGRESS_DELAY_S = 0.5


# =============================================================================
# small helpers
# =============================================================================


class _Progress:
    """A one-line text progress bar on stderr, shown only for runs longer than ``_PROGRESS_DELAY_S``."""

    def __init__(self, total, label, enabled=True, stream=None):
        self.total = max(int(total), 1)
        self.label = label
        self.enabled = bool(enabled)
        self.stream = stream if stream is not None else sys.stderr
        self.done = 0
        self.t0 = time.monotonic()
        self.shown = False

    def update(self, n=1):
        self.done = min(self.done + n, self.total)
        if self.enabled and (self.shown or time.monotonic() - self.t0 >= _PROGRESS_DELAY_S):
            self._draw()

    def _draw(self):
        frac = self.done / self.total
        bar = "#" * int(round(24 * frac))
        el = time.monotonic() - self.t0
        self.stream.write(f"\r{self.label} [{bar:<24}] {self.done}/{self.total} {el:6.1f} s")
        self.stream.flush()
        self.shown = True

    def close(self):
        if self.shown:
            self._draw()
            self.stream.write("\n")
            self.stream.flush()


def _resolve_material(value):
    from .materials import material

    return value if hasattr(value, "permittivity") else material(value)


def _material_label(value) -> str:
    if isinstance(value, str):
        return value
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return f"n={float(value):g}"
    return str(getattr(value, "label", getattr(value, "name", type(value).__name__)))


def _material_meta(value) -> dict:
    m = _resolve_material(value)
    meta = m.metadata() if callable(getattr(m, "metadata", None)) else {}
    return meta if isinstance(meta, dict) else {"description": str(meta)}


def _token(value) -> str:
    """Stable text identifying a material/medium for the argument hash."""
    if isinstance(value, (str, int, float)) and not isinstance(value, bool):
        return repr(value)
    try:
        meta = json.dumps(_material_meta(value), sort_keys=True, default=str)
    except Exception:  # noqa: BLE001 - any user object: fall back on its repr
        meta = ""
    return f"{type(value).__name__}|{_material_label(value)}|{meta}|{getattr(value, 'model', None)!r}"


def _unique(items):
    out = []
    for x in items:
        if x not in out:
            out.append(x)
    return out


def _collapse(warnings, limit=30):
    """Unique warnings; messages that differ only in their numbers are kept once with a count."""
    import re

    groups = {}
    for w in warnings:
        groups.setdefault(re.sub(r"\d+(\.\d+)?(e[-+]?\d+)?", "#", w), []).append(w)
    out = []
    for ws in groups.values():
        ws = sorted(set(ws))
        out.append(ws[0] + (f" (and {len(ws) - 1} similar)" if len(ws) > 1 else ""))
    out.sort()
    return out[:limit] + ([f"... {len(out) - limit} more kinds of warning"] if len(out) > limit else [])


def _atomic_write_text(path: Path, text: str):
    from .export import write_file_atomic

    write_file_atomic(path, lambda fh: fh.write(text), force=True)


# =============================================================================
# parameters, plans and the vectorised evaluation
# =============================================================================


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
            vals = [value] if isinstance(value, str) or hasattr(value, "permittivity") else list(value)
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
        if name == "thickness_nm" and np.any(arr < MONOLAYER_NM):
            raise NanoabsError(f"{what}[{key!r}] = {float(arr.min()):g} nm: allowed range is at least "
                               f"{MONOLAYER_NM:g} nm (about one atomic monolayer)")
        out[name] = arr
    geo = [n for n in _GEOMETRY[shape] if n in out]
    if shape == "spheroid":
        if len(geo) != 2:
            raise NanoabsError(f"{what} for shape 'spheroid' give {', '.join(geo) or 'no size'}: give exactly "
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
    if shape == "spheroid":
        polarization = check_choice("polarization", polarization, ["long", "short", "random", "x", "y", "z"])
    elif shape == "ellipsoid":
        polarization = check_choice("polarization", polarization, ["x", "y", "z", "random"])
    if isinstance(chunk_size, bool) or not isinstance(chunk_size, (int, np.integer)) or chunk_size < 1:
        raise NanoabsError(f"chunk_size = {chunk_size!r}: must be an integer >= 1")
    for v in (material,) + ((core,) if shape == "shell" else ()):
        _resolve_material(v)
    if "medium_index" not in canon:
        from .materials import material as _m

        if not hasattr(medium, "permittivity"):
            _m(medium)
    names = list(canon)
    lengths = [len(canon[n]) for n in names]
    plan = {
        "shape": shape, "names": names, "values": [canon[n] for n in names], "lengths": lengths,
        "n_designs": int(np.prod(lengths, dtype=np.int64)), "wavelength_nm": wl,
        "material": material, "core": core, "medium": medium, "polarization": polarization,
        "method": method, "surface_damping": bool(surface_damping), "chunk_size": int(chunk_size),
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
    if plan["shape"] == "spheroid":
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
    kind = (t["length_nm"] < t["diameter_nm"]).astype(np.int64) if shape == "spheroid" else np.zeros(n, np.int64)
    core_code = t.get("core_material_code", np.zeros(n, np.int64))
    keys = np.stack([t["material_code"], core_code, t["medium_code"], kind], axis=1) if n else np.zeros((0, 4))
    cache = {}
    for key in _unique([tuple(int(v) for v in k) for k in keys]):
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
        s = spectrum(_particle(shape, t, sel, mat, core), wl, medium=t["medium_options"][di],
                     method=settings["method"], polarization=settings["polarization"],
                     surface_damping=settings["surface_damping"])
        for k in ("sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2", "geometric_cross_section_m2",
                  "equal_volume_area_m2"):
            out[k][sel] = np.broadcast_to(getattr(s, k), (sel.size, W))
        out["n_medium"][sel] = np.broadcast_to(s.n_medium, (sel.size, W))
        mv = np.asarray(s.metal_volume_m3, dtype=float).reshape(-1)  # (G,) or one value (no metal: 0)
        out["metal_volume_m3"][sel] = mv if mv.size == sel.size else mv[0]
        warnings += list(s.metadata.get("warnings", []))
        methods.append(s.metadata.get("method"))
    out["warnings"] = sorted(set(warnings))
    out["methods"] = sorted({m for m in methods if m})
    return out


def _settings(plan):
    return {k: plan[k] for k in ("method", "polarization", "surface_damping")}


def _tidy(plan, ids, res):
    """Tidy frame: design columns (repeated per wavelength), then :data:`RESULT_COLUMNS`."""
    import pandas as pd

    t = _designs(plan, ids)
    wl = plan["wavelength_nm"]
    W = wl.size
    n = len(ids)
    data = {"design_id": np.repeat(np.asarray(ids, dtype=np.int64), W)}
    for g in _GEOMETRY[plan["shape"]]:
        data[g] = np.repeat(t[g], W)
    for key in ("core_material", "material"):
        if key + "_code" in t:
            labels = np.array([_material_label(v) for v in t[key + "_options"]], dtype=object)
            data[key] = np.repeat(labels[t[key + "_code"]], W)
    if "medium_index" in t:
        data["medium_index"] = np.repeat(t["medium_index"], W)
    sa, ss, se = res["sigma_abs_m2"], res["sigma_sca_m2"], res["sigma_ext_m2"]
    geo = res["geometric_cross_section_m2"]
    data["wavelength_nm"] = np.tile(wl, n)
    data["sigma_abs_m2"] = sa.ravel()
    data["sigma_sca_m2"] = ss.ravel()
    data["sigma_ext_m2"] = se.ravel()
    data["q_abs"] = (sa / geo).ravel()
    data["q_sca"] = (ss / geo).ravel()
    data["q_ext"] = (se / geo).ravel()
    with np.errstate(divide="ignore", invalid="ignore"):
        data["absorbed_fraction"] = np.where(se > 0, sa / se, np.nan).ravel()
    cols = _design_columns(plan) + RESULT_COLUMNS
    frame = pd.DataFrame({c: data[c] for c in cols}, columns=cols)
    for key in ("core_material", "material"):
        if key in frame:
            frame[key] = frame[key].astype(str)
    return frame


def _chunk_ids(plan, index):
    c = plan["chunk_size"]
    return np.arange(index * c, min((index + 1) * c, plan["n_designs"]), dtype=np.int64)


def _csv_text(frame) -> str:
    """The frame as CSV text, byte-identical to ``frame.to_csv(index=False, na_rep="nan",
    lineterminator="\n")`` for numeric and text columns (shortest round-trip float repr,
    minimal quoting) and about twice as fast."""
    def quote(x):
        return '"' + x.replace('"', '""') + '"' if any(ch in x for ch in ',"\n\r') else x

    header = ",".join(quote(str(c)) for c in frame.columns) + "\n"
    if len(frame) == 0:
        return header
    cols = []
    for c in frame.columns:
        v = frame[c].to_numpy()
        if v.dtype.kind in "fiu":
            cols.append(map(repr, v.tolist()))
        else:
            text = list(map(str, v.tolist()))
            quoted = {x: quote(x) for x in set(text)}
            cols.append(map(quoted.__getitem__, text))
    return header + "\n".join(map(",".join, zip(*cols))) + "\n"


def _compute_chunk(plan, index):
    """Compute chunk ``index`` of a sweep plan: (tidy frame, {"warnings", "methods"}, CSV text or None).

    A module-level function so that process pools and Dask can run it; its
    result depends only on ``plan`` and ``index``. For a streamed sweep the CSV
    text is formatted here, i.e. in the worker; when the table is not kept in
    memory only its first row is returned.
    """
    ids = _chunk_ids(plan, index)
    res = _evaluate(plan["shape"], _designs(plan, ids), plan["wavelength_nm"], _settings(plan))
    frame = _tidy(plan, ids, res)
    text = _csv_text(frame) if plan.get("stream") else None
    if not plan.get("keep", True):
        frame = frame.head(1)
    return frame, {"warnings": res["warnings"], "methods": res["methods"]}, text


def _units(plan):
    u = {"design_id": "1", "material": _TEXT_UNIT, "core_material": _TEXT_UNIT, "medium_index": "1"}
    u.update(_GEOMETRY_UNITS)
    u.update({c: _SPECTRUM_UNITS[c] for c in RESULT_COLUMNS})
    return {c: u[c] for c in _design_columns(plan) + RESULT_COLUMNS}


def _plan_hash(plan):
    doc = {
        "shape": plan["shape"], "names": plan["names"],
        "values": [[_token(v) for v in vals] if n in ("material", "core_material")
                   else [repr(float(v)) for v in vals] for n, vals in zip(plan["names"], plan["values"])],
        "wavelength_nm": [repr(float(v)) for v in plan["wavelength_nm"]],
        "material": _token(plan["material"]), "core": _token(plan["core"]), "medium": _token(plan["medium"]),
        "polarization": plan["polarization"], "method": plan["method"],
        "surface_damping": plan["surface_damping"], "chunk_size": plan["chunk_size"],
        "package_version": __version__,
    }
    return hashlib.sha256(json.dumps(doc, sort_keys=True).encode()).hexdigest()


def _sweep_metadata(plan, n_chunks, warnings, methods, executor_name):
    shape = plan["shape"]
    swept = {}
    for n, vals in zip(plan["names"], plan["values"]):
        swept[n] = ([_material_label(v) for v in vals] if n in ("material", "core_material")
                    else [float(v) for v in vals])
    given = dict(zip(plan["names"], plan["values"]))
    mats = {"material": [_material_meta(v) for v in given.get("material", [plan["material"]])]}
    if shape == "shell":
        mats["core_material"] = [_material_meta(v) for v in given.get("core_material", [plan["core"]])]
    medium = ("swept: medium_index (constant real refractive index)" if "medium_index" in plan["names"]
              else _material_meta(plan["medium"]))
    return {
        "study": "sweep",
        "shape": shape,
        "parameters": swept,
        "cartesian_order": "design_id runs over the Cartesian product in C order: the first parameter "
                           "varies slowest",
        "n_designs": plan["n_designs"], "n_wavelengths": int(plan["wavelength_nm"].size),
        "wavelength_range_nm": [float(plan["wavelength_nm"][0]), float(plan["wavelength_nm"][-1])],
        "materials": mats, "medium": medium,
        "polarization": plan["polarization"] if shape in ("spheroid", "ellipsoid") else "any (sphere)",
        "method": plan["method"], "methods_used": methods, "surface_damping": plan["surface_damping"],
        "chunk_size": plan["chunk_size"], "n_chunks": n_chunks, "executor": executor_name,
        "efficiency_reference_area": "as nanoabs.spectrum: pi r_outer^2 for spheres; projected area for "
                                     "polarised ellipsoids; surface area / 4 for random orientation",
        "warnings": _collapse(warnings),
        "package_version": __version__,
    }


# =============================================================================
# executors
# =============================================================================


def _window(executor):
    n = getattr(executor, "_max_workers", None)
    if n is None and callable(getattr(executor, "nthreads", None)):
        try:
            n = sum(executor.nthreads().values())
        except Exception:  # noqa: BLE001 - any executor-like object
            n = None
    return max(4, 2 * int(n or 4))


def _run_chunks(executor, fn, plan, todo):
    """Yield (index, result) in the order of ``todo``; at most a window of chunks is pending."""
    if executor is None:
        for i in todo:
            yield i, fn(plan, i)
        return
    own = False
    if isinstance(executor, str):
        if executor not in ("processes", "process"):
            raise NanoabsError(f"executor = {executor!r}: allowed are None, 'processes' or an object with "
                               ".submit(fn, *args) (concurrent.futures executor, dask.distributed.Client)")
        from concurrent.futures import ProcessPoolExecutor

        executor, own = ProcessPoolExecutor(max_workers=2), True
    elif not callable(getattr(executor, "submit", None)):
        raise NanoabsError(f"executor = {type(executor).__name__}: must be None, 'processes' or an object with "
                           ".submit(fn, *args) returning futures with .result()")
    pending = deque()
    it = iter(todo)
    try:
        for i in itertools.islice(it, _window(executor)):
            pending.append((i, executor.submit(fn, plan, i)))
        while pending:
            i, fut = pending.popleft()
            res = fut.result()
            nxt = next(it, None)
            if nxt is not None:
                pending.append((nxt, executor.submit(fn, plan, nxt)))
            yield i, res
    finally:
        for _, fut in pending:
            cancel = getattr(fut, "cancel", None)
            if callable(cancel):
                try:
                    cancel()
                except Exception:  # noqa: BLE001 - best effort on shutdown
                    pass
        if own:
            executor.shutdown(wait=True, cancel_futures=True)


def _executor_name(executor):
    if executor is None:
        return "in-process"
    if isinstance(executor, str):
        return "ProcessPoolExecutor(max_workers=2)"
    return type(executor).__name__


# =============================================================================
# streaming to disk
# =============================================================================


def _part_paths(workdir: Path, i: int):
    return workdir / f"chunk_{i:06d}.csv", workdir / f"chunk_{i:06d}.json"


def _prepare_workdir(workdir: Path, digest: str, plan, n_chunks, force):
    manifest = workdir / "manifest.json"
    if workdir.exists():
        try:
            doc = json.loads(manifest.read_text(encoding="utf-8"))
        except (OSError, ValueError):
            doc = None
        if not isinstance(doc, dict) or doc.get("format") != _PARTS_FORMAT:
            raise NanoabsError(f"work directory {str(workdir)!r} exists and is not a nanoabs sweep work "
                               "directory: remove it or choose another out path")
        if doc.get("hash") != digest:
            if not force:
                raise NanoabsError(f"work directory {str(workdir)!r} holds chunks of a sweep with different "
                                   "arguments: pass force=True to discard them, or choose another out path")
            shutil.rmtree(workdir)
    if not workdir.exists():
        workdir.mkdir()
        _atomic_write_text(manifest, json.dumps({
            "format": _PARTS_FORMAT, "format_version": 1, "hash": digest, "n_chunks": n_chunks,
            "n_designs": plan["n_designs"], "chunk_size": plan["chunk_size"],
            "created_utc": datetime.now(timezone.utc).isoformat(timespec="seconds"),
            "package_version": __version__}, indent=2) + "\n")
    return {i for i in range(n_chunks) if all(p.is_file() for p in _part_paths(workdir, i))}


def _write_part(workdir: Path, i: int, text, info):
    csv_path, info_path = _part_paths(workdir, i)
    _atomic_write_text(info_path, json.dumps(info) + "\n")  # the CSV appearing marks the chunk finished
    _atomic_write_text(csv_path, text)


def _read_part(workdir: Path, i: int, plan):
    """A finished chunk back from disk; numbers parsed by Python's correctly rounded float()."""
    import pandas as pd

    csv_path, info_path = _part_paths(workdir, i)
    raw = pd.read_csv(csv_path, dtype=str, keep_default_na=False)
    data = {}
    for c in raw.columns:
        text = raw[c].to_numpy(dtype=object)
        if c in ("material", "core_material"):
            data[c] = text
        elif c == "design_id":
            data[c] = text.astype(np.int64)
        else:
            data[c] = np.array([float(v) for v in text], dtype=float)
    frame = pd.DataFrame(data, columns=list(raw.columns))
    for c in ("material", "core_material"):
        if c in frame:
            frame[c] = frame[c].astype(str)
    return frame, json.loads(info_path.read_text(encoding="utf-8"))


def _write_final(out: Path, workdir: Path, n_chunks: int, frame0, units, metadata, rows, force):
    """Concatenate the part files into ``out`` and write its JSON sidecar, both atomically."""
    from . import export

    targets = export.check_writable(out, force=force)
    columns = export._check_frame(frame0, units)
    doc = {
        "format": export.FORMAT_NAME, "format_version": export.FORMAT_VERSION,
        "package_version": __version__,
        "created_utc": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "data_file": targets[0].name, "rows": int(rows), "columns": columns,
        "metadata": export._jsonable(metadata, ""),
    }
    header = ",".join(c["name"] for c in columns) + "\n"

    def write_csv(fh):
        fh.write(header)
        for i in range(n_chunks):
            with open(_part_paths(workdir, i)[0], encoding="utf-8", newline="") as part:
                first = part.readline()
                if first != header:
                    raise NanoabsError(f"part file of chunk {i} has columns {first.strip()!r}, expected "
                                       f"{header.strip()!r}: remove {str(workdir)!r} and run again")
                shutil.copyfileobj(part, fh)

    return export.place_together([(targets[0], write_csv),
                                  (targets[1], lambda fh: fh.write(export._json_text(doc, None)))])


# =============================================================================
# sweep
# =============================================================================


def sweep(shape, params, wavelength_nm, *, material="Au", core="SiO2", medium="water",
          polarization="random", method="auto", surface_damping=True, executor=None, chunk_size=64,
          progress=True, out=None, force=False, memory_budget_MB=256.0):
    """Spectra of the Cartesian product of design parameters, as one tidy table.

    Parameters
    ----------
    shape : {"sphere", "shell", "spheroid", "ellipsoid"}
    params : dict
        Parameter name -> 1-D array of values (scalars count as one value); the
        sweep is their Cartesian product, first name varying slowest. Names per
        shape are listed in the module docstring (sizes [nm]; ``aspect_ratio``
        [1]; ``medium_index`` [1]; ``material`` / ``core_material``: lists of
        material names or material objects).
    wavelength_nm : array
        Vacuum wavelengths [nm], strictly increasing.
    material : str or material object, keyword-only
        Metal of spheres, spheroids and ellipsoids, shell material of shells,
        unless ``params`` sweeps ``material`` (default "Au").
    core : str or material object, keyword-only
        Core material of shells unless ``params`` sweeps ``core_material``
        (default "SiO2").
    medium : str, float or material object, keyword-only
        Embedding medium unless ``params`` sweeps ``medium_index`` (default water).
    polarization : str, keyword-only
        As :func:`nanoabs.spectrum`: spheroids "long", "short", "random", "x",
        "y", "z"; ellipsoids "x", "y", "z", "random" (default "random",
        orientation average); ignored for spheres and shells.
    method : str, keyword-only
        Solver as :func:`nanoabs.spectrum` (default "auto": Mie for spheres and
        shells, corrected quasi-static for spheroids and ellipsoids).
    surface_damping : bool, keyword-only
        Size-dependent surface damping of metal parts (default on).
    executor : None, "processes" or executor, keyword-only
        None: chunks run one after the other in this process. "processes": a
        ``concurrent.futures.ProcessPoolExecutor(max_workers=2)`` created and
        shut down here. Any object with ``.submit(fn, *args)`` returning futures
        with ``.result()`` (a ``concurrent.futures`` executor, a Dask
        ``distributed.Client``; its workers must be able to import nanoabs).
    chunk_size : int, keyword-only
        Designs per chunk (default 64): one chunk is one task and one part file.
    progress : bool, keyword-only
        Text progress bar on stderr for sweeps running longer than ~0.5 s.
    out : str or path, keyword-only
        Stream to ``out`` (a ``.csv``; a JSON sidecar with units and metadata is
        written beside it as by :func:`nanoabs.export.write_export`). Finished
        chunks go atomically to one file each in the work directory
        ``<out>.parts/`` as they arrive; a re-run with the same arguments
        resumes from them (a manifest holds a hash of the arguments); an
        interruption (KeyboardInterrupt or an error) keeps them. At the end the
        parts are concatenated into ``out`` atomically and the work directory
        is removed.
    force : bool, keyword-only
        Overwrite an existing ``out`` and discard a work directory of a sweep
        with different arguments.
    memory_budget_MB : float, keyword-only
        With ``out``: when the table would exceed this size [MB] it is not held
        in memory and the path of the written CSV is returned instead (read it
        with ``pandas.read_csv(path, chunksize=...)`` or
        :func:`nanoabs.read_export`). Default 256.

    Returns
    -------
    pandas.DataFrame or pathlib.Path
        One row per design and wavelength: ``design_id``, the design columns
        (all geometry columns of the shape — spheroids carry length, diameter
        and aspect ratio —, ``core_material`` for shells, ``material``, and
        ``medium_index`` when swept), then :data:`RESULT_COLUMNS`
        (cross-sections [m²], efficiencies and σ_abs/σ_ext [1]).
        ``frame.attrs["metadata"]`` holds inputs, material sources, solver,
        warnings; ``frame.attrs["units"]`` the unit of every column. A
        :class:`pathlib.Path` is returned only in the over-budget case above.

    Raises
    ------
    NanoabsError
        Unknown shape or parameter name (with a suggestion), empty or
        non-positive values, wavelengths outside a material's data, an existing
        ``out`` without ``force``.

    Examples
    --------
    >>> df = sweep("sphere", {"radius_nm": [10, 20, 40]}, np.linspace(400, 800, 201), progress=False)
    >>> peaks = df.groupby("radius_nm").apply(lambda g: g.wavelength_nm[g.sigma_abs_m2.idxmax()])
    """
    import pandas as pd

    plan = _make_plan(shape, params, wavelength_nm, material=material, core=core, medium=medium,
                      polarization=polarization, method=method, surface_damping=surface_damping,
                      chunk_size=chunk_size)
    budget = float(memory_budget_MB)
    if not math.isfinite(budget) or budget <= 0:
        raise NanoabsError(f"memory_budget_MB = {memory_budget_MB!r}: must be a finite number > 0")
    _probe(plan)
    n_chunks = -(-plan["n_designs"] // plan["chunk_size"])
    units = _units(plan)
    cols = _design_columns(plan) + RESULT_COLUMNS
    rows = plan["n_designs"] * plan["wavelength_nm"].size
    n_text = sum(c in ("material", "core_material") for c in cols)
    est_MB = rows * (8 * (len(cols) - n_text) + 40 * n_text) / 1e6
    workdir = None
    finished = set()
    if out is not None:
        from .export import check_writable

        out = Path(out)
        if out.suffix.lower() != ".csv":
            raise NanoabsError(f"out = {str(out)!r}: a streamed sweep is written as CSV + JSON sidecar; "
                               "give a path ending in .csv")
        check_writable(out, force=force)
        workdir = Path(str(out) + ".parts")
        finished = _prepare_workdir(workdir, _plan_hash(plan), plan, n_chunks, force)
    keep = out is None or est_MB <= budget
    plan["stream"], plan["keep"] = workdir is not None, keep  # not part of the argument hash
    todo = [i for i in range(n_chunks) if i not in finished]
    frames, infos = {}, {}
    frame0 = None
    bar = _Progress(n_chunks, f"sweep {plan['shape']}", progress)
    bar.update(len(finished))
    fn = _compute_chunk  # looked up at call time (tests replace it)
    try:
        with closing(_run_chunks(executor, fn, plan, todo)) as results:
            for i, (frame, info, text) in results:
                if workdir is not None:
                    _write_part(workdir, i, text if text is not None else _csv_text(frame), info)
                if keep:
                    frames[i] = frame
                elif frame0 is None:
                    frame0 = frame.head(1)
                infos[i] = info
                bar.update()
    finally:
        bar.close()
    if workdir is not None:
        for i in sorted(finished):
            frame, info = _read_part(workdir, i, plan)
            infos[i] = info
            if keep:
                frames[i] = frame
            elif frame0 is None:
                frame0 = frame.head(1)
    warnings = sorted({w for info in infos.values() for w in info["warnings"]})
    methods = sorted({m for info in infos.values() for m in info["methods"]})
    meta = _sweep_metadata(plan, n_chunks, warnings, methods, _executor_name(executor))
    if keep:
        frame = pd.concat([frames[i] for i in range(n_chunks)], ignore_index=True) if n_chunks > 1 \
            else frames[0].reset_index(drop=True)
        frame0 = frame.head(1)
    if workdir is not None:
        meta["resumed_chunks"] = len(finished)
        _write_final(out, workdir, n_chunks, frame0, units, meta, rows, force)
        shutil.rmtree(workdir)
    if not keep:
        return out
    frame.attrs["metadata"] = meta
    frame.attrs["units"] = units
    return frame


def write(frame, path, *, force=False):
    """Export a :func:`sweep` or :func:`search` table as CSV + JSON sidecar (or one JSON), atomically.

    Uses ``frame.attrs["units"]`` and ``frame.attrs["metadata"]`` (plus
    ``attrs["figure_of_merit"]`` of a search) with :func:`nanoabs.export.write_export`.

    Parameters
    ----------
    frame : pandas.DataFrame
        As returned by :func:`sweep` or :func:`search`.
    path : str or path
        ``*.csv`` (with ``*.json`` sidecar) or ``*.json``.
    force : bool, keyword-only
        Overwrite existing files.

    Returns
    -------
    tuple of pathlib.Path
        The files written.
    """
    from .export import write_export

    units = frame.attrs.get("units") if hasattr(frame, "attrs") else None
    if not isinstance(units, Mapping):
        raise NanoabsError("frame has no attrs['units']: pass a table returned by design.sweep or design.search")
    meta = dict(frame.attrs.get("metadata") or {})
    if "figure_of_merit" in frame.attrs:
        meta["figure_of_merit_definition"] = frame.attrs["figure_of_merit"]
    return write_export(frame, path, metadata=meta, units=units, force=force)


def _probe(plan):
    """Fail early (before any worker starts) on materials, ranges, methods and polarizations.

    Evaluates the first geometry at the two end wavelengths once per combination of material,
    core material and medium index.
    """
    wl = plan["wavelength_nm"]
    wl2 = wl[[0, -1]] if wl.size > 1 else wl
    names, lengths = plan["names"], plan["lengths"]
    choices = [k for k, n in enumerate(names) if n in ("material", "core_material", "medium_index")]
    for combo in itertools.product(*[range(lengths[k]) for k in choices]):
        idx = [0] * len(names)
        for k, c in zip(choices, combo):
            idx[k] = c
        j = int(np.ravel_multi_index(idx, lengths))
        _evaluate(plan["shape"], _designs(plan, [j]), wl2, _settings(plan))


# =============================================================================
# ensembles
# =============================================================================


def _quadrature(kind, nominal, s, n, *, smallest=0.0):
    """Nodes [parameter unit] and normalised weights of a normal or log-normal distribution.

    ``nominal`` is the number-mean and ``s`` the relative spread (standard deviation / mean) in both
    cases. Gauss–Hermite nodes z_i, weights w_i for the weight exp(-z²/2) (numpy ``hermegauss``;
    Abramowitz & Stegun 1964, 25.4.46): normal x_i = μ(1 + s z_i); log-normal
    x_i = exp(μ_ln + σ_ln z_i) with σ_ln² = ln(1 + s²), μ_ln = ln μ − σ_ln²/2 (so the mean is μ).
    Nodes of normalised weight below 1e-15 (no effect in double precision) and nodes at or below
    ``smallest`` (0; a monolayer for shell thicknesses) are left out; returns the weight left out
    (before renormalising).
    """
    if s == 0:
        return np.array([float(nominal)]), np.array([1.0]), 0.0
    z, w = np.polynomial.hermite_e.hermegauss(n)
    w = w / w.sum()
    if kind == "normal":
        x = nominal * (1.0 + s * z)
    else:
        sl = math.sqrt(math.log1p(s * s))
        x = np.exp(math.log(nominal) - sl * sl / 2 + sl * z)
    ok = (x > smallest) & (w >= 1e-15)
    dropped = float(w[~ok].sum())
    return x[ok], w[ok] / w[ok].sum(), dropped


_ADAPTIVE_NODES = (17, 33, 65, 129, 257)
_ADAPTIVE_RTOL = 1e-3
_ADAPTIVE_MAX_DESIGNS = 20000


def ensemble_average(shape, nominal, spread, wavelength_nm, *, distribution="normal", n_samples=None,
                     material="Au", core="SiO2", medium="water", polarization="random", method="auto",
                     surface_damping=True) -> Spectrum:
    """Per-particle average spectrum over a distribution of sizes or aspect ratios.

    ⟨σ⟩(λ) = Σ_i w_i σ(λ; p_i) with quadrature nodes p_i and weights w_i of the
    (number) distribution of each spread parameter; several spread parameters
    are independent (tensor-product quadrature). All nodes are evaluated in
    one vectorised spectrum call per material group.

    Parameters
    ----------
    shape : {"sphere", "shell", "spheroid", "ellipsoid"}
    nominal : dict
        One value per parameter, names as in :func:`sweep` (e.g.
        ``{"aspect_ratio": 3, "diameter_nm": 15}``); the mean of each
        distribution.
    spread : dict
        Relative spread (standard deviation / mean, 0 to 1) per geometry
        parameter of ``nominal``, e.g. ``{"radius_nm": 0.10}``. Spread 0 is a
        delta distribution and reproduces the single particle exactly.
    wavelength_nm : array
        Vacuum wavelengths [nm], strictly increasing.
    distribution : "normal", "lognormal" or dict, keyword-only
        "normal": Gauss–Hermite quadrature; nodes at or below zero size are
        dropped and the weights renormalised (a truncated normal; more than
        0.1 % of weight dropped is an error — use "lognormal"). "lognormal":
        Gauss–Hermite quadrature in log space with the same mean and relative
        spread. A dict ``{name: (values, weights)}`` gives user histograms
        (absolute values, weights ≥ 0, normalised here); ``spread`` must then
        be empty.
    n_samples : int, keyword-only
        Quadrature nodes per spread parameter. Default None: adaptive — 17,
        33, 65, 129, 257 nodes until two successive averages of σ_abs and σ_ext
        differ by at most 1e-3 of their maximum (a resonance that moves with the
        parameter needs many nodes once the spread shifts it by more than its
        width); the number used and the last difference are in the metadata.
    material, core, medium, polarization, method, surface_damping : keyword-only
        As :func:`sweep`; ``polarization="random"`` (default) also averages
        over orientations.

    Returns
    -------
    Spectrum
        Averaged σ_abs, σ_sca, σ_ext [m²]; averaged geometric and equal-volume
        areas [m²] and metal volume [m³], so that ``q_abs`` = ⟨σ_abs⟩/⟨G⟩ and
        ``sigma_abs_per_metal_volume_m_1`` = ⟨σ_abs⟩/⟨V⟩ are ensemble values;
        ``peak_wavelength_nm()`` and ``fwhm_nm()`` work as usual.
        ``metadata["ensemble"]`` holds the distribution, nodes and weights.
        ``layer_eps`` is empty (no single particle).
    """
    shape = check_choice("shape", shape, SHAPES)
    if not isinstance(nominal, Mapping) or not nominal:
        raise NanoabsError(f"nominal = {nominal!r}: give a dict of parameter name -> one value")
    for k, v in nominal.items():
        if np.ndim(v) != 0 and not isinstance(v, str):
            raise NanoabsError(f"nominal[{k!r}] = {v!r}: give one value per parameter")
    base = _canonical_params(shape, {k: ([v] if not isinstance(v, str) else v) for k, v in nominal.items()},
                             what="nominal")
    aliases = _ALIASES.get(shape, {})
    spread = {} if spread is None else spread
    if not isinstance(spread, Mapping):
        raise NanoabsError(f"spread = {spread!r}: give a dict of parameter name -> relative spread")
    geometry = [g for g in _GEOMETRY[shape] if g in base]
    if n_samples is not None and (isinstance(n_samples, bool) or not isinstance(n_samples, (int, np.integer))
                                  or not 1 <= n_samples <= 400):
        raise NanoabsError(f"n_samples = {n_samples!r}: allowed range is 1 to 400 (integer), or None (adaptive)")
    hist = distribution if isinstance(distribution, Mapping) else None
    if hist is not None:
        if spread:
            raise NanoabsError("spread must be empty when distribution is a histogram dict")
        kind = "histogram"
    else:
        kind = check_choice("distribution", distribution, ["normal", "lognormal"])
    fixed, rel = {}, {}
    for key, val in (hist.items() if hist is not None else spread.items()):
        name = aliases.get(key, key)
        if name not in geometry:
            raise NanoabsError(f"{'distribution' if hist is not None else 'spread'} name {key!r} is not a "
                               f"geometry parameter of nominal{suggest(key, geometry)}; allowed: "
                               f"{', '.join(geometry)}")
        if hist is not None:
            try:
                values, weights = val
            except (TypeError, ValueError):
                raise NanoabsError(f"distribution[{key!r}] = {val!r}: give (values, weights)") from None
            x = check_finite_array(f"distribution[{key!r}] values", values)
            w = check_finite_array(f"distribution[{key!r}] weights", weights)
            if x.shape != w.shape or x.ndim != 1:
                raise NanoabsError(f"distribution[{key!r}]: values {x.shape} and weights {w.shape} must be "
                                   "1-D of the same length")
            if np.any(x <= 0) or np.any(w < 0) or w.sum() <= 0:
                raise NanoabsError(f"distribution[{key!r}]: values must be > 0 and weights >= 0 with a "
                                   "positive sum")
            fixed[name] = (x, w / w.sum())
            continue
        s = float(np.asarray(val, dtype=float)) if np.ndim(val) == 0 and not isinstance(val, str) else None
        if s is None or not (0 <= s <= 1):
            raise NanoabsError(f"spread[{key!r}] = {val!r}: allowed range is 0 to 1 (relative standard deviation)")
        if s == 0:
            fixed[name] = (np.array([float(base[name][0])]), np.array([1.0]))
        else:
            rel[name] = s
    adaptive = n_samples is None and bool(rel)
    counts = list(_ADAPTIVE_NODES) if adaptive else [int(n_samples or 25)]
    prev = None
    change = None
    for n in counts:
        nodes, info = dict(fixed), {"distribution": kind, "nominal": {}, "parameters": {}}
        for name, s in rel.items():
            smallest = MONOLAYER_NM if name == "thickness_nm" else 0.0
            x, w, dropped = _quadrature(kind, float(base[name][0]), s, n, smallest=smallest)
            if dropped > 1e-3:
                hint = "; use distribution='lognormal'" if kind == "normal" else "; reduce the spread"
                raise NanoabsError(f"spread[{name!r}] = {s:g}: the {kind} distribution puts {dropped:.2g} of its "
                                   f"weight at sizes <= {smallest:g} nm{hint}")
            nodes[name] = (x, w)
            info["parameters"][name] = {"relative_spread": s, "nodes": x.tolist(), "weights": w.tolist(),
                                        "weight_left_out": dropped}
        for name, (x, w) in fixed.items():
            info["parameters"][name] = {"values": x.tolist(), "weights": w.tolist()}
        params, weights = {}, np.ones(1)
        for name, vals in base.items():
            if name in nodes:
                params[name] = nodes[name][0]
                weights = (weights[:, None] * nodes[name][1][None, :]).ravel()
            else:
                params[name] = vals
                info["nominal"][name] = (_material_label(vals[0]) if name in ("material", "core_material")
                                         else float(vals[0]))
        if prev is not None and weights.size > _ADAPTIVE_MAX_DESIGNS:
            break
        plan = _make_plan(shape, params, wavelength_nm, material=material, core=core, medium=medium,
                          polarization=polarization, method=method, surface_damping=surface_damping,
                          chunk_size=1, what="nominal")
        res = _evaluate(shape, _designs(plan, np.arange(plan["n_designs"], dtype=np.int64)),
                        plan["wavelength_nm"], _settings(plan))
        w = weights[:, None]
        avg = {k: (w * res[k]).sum(axis=0) for k in ("sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2",
                                                     "geometric_cross_section_m2", "equal_volume_area_m2")}
        avg["metal_volume_m3"] = float((weights * res["metal_volume_m3"]).sum())
        result = (plan, res, avg, info, weights, n)
        if prev is not None:
            change = max(float(np.max(np.abs(avg[k] - prev[k])) / np.max(np.abs(avg[k])))
                         for k in ("sigma_abs_m2", "sigma_ext_m2"))
            if change <= _ADAPTIVE_RTOL:
                break
        prev = avg
    plan, res, avg, info, weights, n = result
    info.update({"n_designs": plan["n_designs"], "weights": weights.tolist(),
                 "nodes_per_spread_parameter": n if rel else None,
                 "adaptive": adaptive, "last_relative_change": change,
                 "average": "number-weighted per-particle average of cross-sections, reference areas "
                            "and metal volume"})
    warnings = list(res["warnings"])
    if adaptive and (change is None or change > _ADAPTIVE_RTOL):
        warnings.append(f"ensemble quadrature not converged to {_ADAPTIVE_RTOL:g}: last relative change "
                        f"{change if change is not None else float('nan'):.2g} with {n} nodes per parameter")
    meta = _sweep_metadata(plan, 1, _collapse(warnings), res["methods"], "in-process")
    meta.update({"study": "ensemble", "ensemble": info,
                 "quadrature_reference": "Gauss-Hermite quadrature (Abramowitz & Stegun 1964, 25.4.46)"})
    for k in ("chunk_size", "n_chunks", "executor", "cartesian_order", "parameters", "n_designs"):
        meta.pop(k, None)
    return Spectrum(plan["wavelength_nm"], avg["sigma_abs_m2"], avg["sigma_sca_m2"], avg["sigma_ext_m2"],
                    avg["geometric_cross_section_m2"], avg["equal_volume_area_m2"],
                    np.asarray(avg["metal_volume_m3"]), res["n_medium"][0], meta, [])


# =============================================================================
# band and search
# =============================================================================


def band(center_nm=None, width_nm=None, lo_nm=None, hi_nm=None):
    """A target band (lo, hi) [nm] from its centre and width, or from its edges.

    Parameters
    ----------
    center_nm, width_nm : float
        Centre and full width [nm]; band = (center − width/2, center + width/2).
    lo_nm, hi_nm : float
        Edges [nm] (give either these two or the two above).

    Returns
    -------
    (float, float)
        Vacuum-wavelength edges [nm], 0 < lo < hi.
    """
    by_centre = center_nm is not None or width_nm is not None
    by_edges = lo_nm is not None or hi_nm is not None
    if by_centre == by_edges:
        raise NanoabsError("band: give either center_nm and width_nm, or lo_nm and hi_nm")
    if by_centre:
        if center_nm is None or width_nm is None:
            raise NanoabsError("band: give both center_nm and width_nm")
        c = float(check_finite_array("center_nm", center_nm)[0])
        w = float(check_finite_array("width_nm", width_nm)[0])
        if w <= 0:
            raise NanoabsError(f"width_nm = {w:g} nm: must be > 0")
        lo, hi = c - w / 2, c + w / 2
    else:
        if lo_nm is None or hi_nm is None:
            raise NanoabsError("band: give both lo_nm and hi_nm")
        lo = float(check_finite_array("lo_nm", lo_nm)[0])
        hi = float(check_finite_array("hi_nm", hi_nm)[0])
    if lo <= 0:
        raise NanoabsError(f"band lower edge = {lo:g} nm: must be > 0")
    if hi <= lo:
        raise NanoabsError(f"band upper edge = {hi:g} nm: must be above the lower edge {lo:g} nm")
    return lo, hi


_FAMILY_SHAPE = {"sphere": "sphere", "shell": "shell", "rod": "spheroid", "disc": "spheroid"}
_FAMILY_VARS = {"sphere": ("radius_nm",), "shell": ("core_radius_nm", "thickness_nm"),
                "rod": ("aspect_ratio", "diameter_nm"), "disc": ("aspect_ratio", "diameter_nm")}
_FAMILY_DIMS = {"sphere": ("radius_nm",), "shell": ("core_radius_nm", "thickness_nm"),
                "rod": ("length_nm", "diameter_nm"), "disc": ("length_nm", "diameter_nm")}
_GRID = {"sphere": (64,), "shell": (18, 18), "rod": (32, 8), "disc": (24, 10)}
_FOM_UNITS = {"sigma_abs": "m^2", "sigma_abs_per_volume": "m^-1", "q_abs": "1", "absorbed_fraction": "1",
              "injection": "s^-1"}
_FOM_TEXT = {
    "sigma_abs": "band average of sigma_abs",
    "sigma_abs_per_volume": "band average of sigma_abs per metal volume",
    "q_abs": "band average of Q_abs = sigma_abs / geometric cross-section",
    "absorbed_fraction": "band average of sigma_abs / sigma_ext",
    "injection": "band-integrated injected-electron rate per particle, integral of "
                 "sigma_abs E_lambda lambda/(h c) eta(lambda) d lambda, escape-cone yield eta, transport factor 1",
}


def _default_bounds(family, min_shell, max_size):
    half = max_size / 2
    if family == "sphere":
        return {"radius_nm": (2.5, half)}
    if family == "shell":
        return {"core_radius_nm": (5.0, max(half - min_shell, 5.0 * 1.01)),
                "thickness_nm": (min_shell, max(min(60.0, half - 5.0), min_shell * 1.01))}
    if family == "rod":
        return {"aspect_ratio": (1.2, 8.0), "diameter_nm": (5.0, max(min(60.0, max_size / 1.2), 5.05))}
    return {"aspect_ratio": (0.1, 0.8), "diameter_nm": (10.0, max(max_size, 10.1))}


def _geometry_of(family, v):
    """Dimensions [nm] of designs from the optimisation variables v (n, k)."""
    if family == "sphere":
        return {"radius_nm": v[:, 0]}
    if family == "shell":
        return {"core_radius_nm": v[:, 0], "thickness_nm": v[:, 1]}
    return {"aspect_ratio": v[:, 0], "diameter_nm": v[:, 1], "length_nm": v[:, 0] * v[:, 1]}


def _feasible(family, g, min_shell, max_size):
    tol = 1e-9
    if family == "sphere":
        return 2 * g["radius_nm"] <= max_size * (1 + tol)
    if family == "shell":
        return ((2 * (g["core_radius_nm"] + g["thickness_nm"]) <= max_size * (1 + tol))
                & (g["thickness_nm"] >= min_shell * (1 - tol)))
    if family == "rod":
        return (g["length_nm"] <= max_size * (1 + tol)) & (g["length_nm"] >= g["diameter_nm"])
    return ((g["diameter_nm"] <= max_size * (1 + tol)) & (g["length_nm"] >= min_shell * (1 - tol))
            & (g["length_nm"] < g["diameter_nm"]))


def _outer_size(family, g):
    if family == "sphere":
        return 2 * g["radius_nm"]
    if family == "shell":
        return 2 * (g["core_radius_nm"] + g["thickness_nm"])
    return np.maximum(g["length_nm"], g["diameter_nm"])


class _Problem:
    """Evaluates a family's designs for the search: spectra, figure of merit, band averages."""

    def __init__(self, family, mat, core, medium, settings, band_wl, lo, hi, objective, injection):
        self.family, self.mat, self.core, self.medium = family, mat, core, medium
        self.shape = _FAMILY_SHAPE[family]
        self.settings, self.band_wl, self.lo, self.hi = settings, band_wl, lo, hi
        self.objective, self.injection = objective, injection
        self.warnings = set()

    def table(self, g):
        n = len(next(iter(g.values())))
        t = {"design_id": np.arange(n, dtype=np.int64), "material_options": [self.mat],
             "material_code": np.zeros(n, np.int64), "medium_options": [self.medium],
             "medium_code": np.zeros(n, np.int64)}
        if self.shape == "shell":
            t.update(core_material_options=[self.core], core_material_code=np.zeros(n, np.int64))
        t.update({k: np.asarray(v, dtype=float) for k, v in g.items()})
        return t

    def spectra(self, g, wl):
        res = _evaluate(self.shape, self.table(g), wl, self.settings)
        self.warnings.update(res["warnings"])
        return res

    def fom(self, g):
        """(figure of merit, band-average absorbed fraction) of designs g."""
        from scipy.integrate import trapezoid

        res = self.spectra(g, self.band_wl)
        wl, sa = self.band_wl, res["sigma_abs_m2"]
        with np.errstate(divide="ignore", invalid="ignore"):
            af = np.where(res["sigma_ext_m2"] > 0, sa / res["sigma_ext_m2"], np.nan)
            if self.objective == "sigma_abs":
                y = sa
            elif self.objective == "sigma_abs_per_volume":
                y = sa / res["metal_volume_m3"][:, None]
            elif self.objective == "q_abs":
                y = sa / res["geometric_cross_section_m2"]
            elif self.objective == "absorbed_fraction":
                y = af
            else:
                E, eta = self.injection
                y = sa * E * (wl * 1e-9) / _HC_J_M * eta  # [s^-1 nm^-1]
        width = self.hi - self.lo
        af_avg = trapezoid(af, wl, axis=-1) / width
        if self.objective == "injection":
            return trapezoid(y, wl, axis=-1), af_avg
        return trapezoid(y, wl, axis=-1) / width, af_avg


_HC_J_M = 6.62607015e-34 * 299792458.0  # h c [J m] (exact SI values)


def _search_window(lo, hi, ranges):
    rlo = max([r[0] for r in ranges] + [1.0])
    rhi = min([r[1] for r in ranges] + [math.inf])
    if lo < rlo or hi > rhi:
        raise NanoabsError(f"band = ({lo:g}, {hi:g}) nm lies outside the wavelengths where the materials "
                           f"and medium have data, {rlo:g} to {rhi:g} nm")
    wlo = max(lo - 300.0, 0.6 * lo, rlo)
    whi = min(hi + 500.0, 1.8 * hi, rhi)
    n = int(min(max(round(whi - wlo) + 1, 201), 1201))
    return np.linspace(wlo, whi, n)


def _ranges(*materials):
    out = []
    for m in materials:
        r = getattr(m, "range_nm", None)
        if r is not None:
            out.append((float(r[0]), float(r[1])))
    return out


def search(band_nm, *, families=("sphere", "shell", "rod"), objective="sigma_abs", bounds=None,
           materials=("Au",), core="SiO2", medium="water", illumination=None, barrier_eV=None,
           fermi_energy_eV=None, min_shell_nm=2.0, max_size_nm=150.0, polarization="random",
           method="auto", surface_damping=True, wavelength_nm=None, n_starts=2, top=10, progress=True):
    """Rank particle designs by a figure of merit averaged over a target band.

    Algorithm: per family and material, (1) one vectorised spectrum call over a
    coarse grid (log-spaced in each variable within ``bounds``, infeasible
    designs left out); (2) bounded Nelder–Mead refinement (scipy.optimize,
    log-scaled variables) from the ``n_starts`` best distinct grid points,
    with infeasible designs penalised; (3) refined optima and, to fill ``top``,
    the best remaining grid points are ranked — the best design of every
    family and material is always kept, grid points next to a better entry
    are left out; (4) for the rows kept, the peak, FWHM and the sensitivity
    of the peak to each dimension are computed.

    Parameters
    ----------
    band_nm : (float, float)
        Target band edges [nm] (see :func:`band` for centre/width).
    families : sequence of {"sphere", "shell", "rod", "disc"}, keyword-only
        "sphere": radius; "shell": dielectric core radius + metal shell
        thickness; "rod": prolate spheroid (aspect ratio length/diameter ≥ 1,
        diameter); "disc": oblate spheroid (aspect ratio thickness/diameter < 1,
        diameter).
    objective : str, keyword-only
        Figure of merit, always over the band: "sigma_abs" (band average of
        σ_abs [m²]), "sigma_abs_per_volume" (band average of σ_abs per metal
        volume [m⁻¹]), "q_abs" (band average of Q_abs [1]),
        "absorbed_fraction" (band average of σ_abs/σ_ext [1]), "injection"
        (band integral of σ_abs E_λ λ/(hc) η(λ) [s⁻¹]: injected electrons per
        second per particle with the escape-cone yield η of
        :func:`nanoabs.hotcarriers.escape_cone_yield` and transport factor 1,
        i.e. every hot carrier reaches the interface — an upper bound).
    bounds : dict, keyword-only
        ``{family: {variable: (lo, hi)}}`` overriding the defaults: sphere
        radius_nm (2.5, max_size/2); shell core_radius_nm (5, max_size/2 −
        min_shell), thickness_nm (min_shell, min(60, max_size/2 − 5)); rod
        aspect_ratio (1.2, 8), diameter_nm (5, min(60, max_size/1.2)); disc
        aspect_ratio (0.1, 0.8), diameter_nm (10, max_size).
    materials : sequence, keyword-only
        Metals (names or material objects); the shell metal for shells.
    core : str or material, keyword-only
        Dielectric core of shells (default SiO2).
    medium : keyword-only
        Embedding medium (default water).
    illumination : Illumination, keyword-only
        Spectral source for "injection" (default AM1.5G); must be spectral
        (not monochromatic).
    barrier_eV : float, keyword-only
        Schottky barrier [eV], required for "injection".
    fermi_energy_eV : float, keyword-only
        Fermi energy [eV] for "injection"; default from
        :func:`nanoabs.hotcarriers.free_electron` by the metal's name.
    min_shell_nm : float, keyword-only
        Thinnest metal allowed [nm]: shell thickness and disc thickness (default 2).
    max_size_nm : float, keyword-only
        Largest outer dimension [nm]: sphere/shell diameter, rod length, disc
        diameter (default 150).
    polarization, method, surface_damping : keyword-only
        As :func:`sweep` (default "random": orientation-averaged rods/discs).
    wavelength_nm : array, keyword-only
        Window for peak and FWHM (default: from below the band to well above
        it, within the materials' data); the band must lie inside it.
    n_starts : int, keyword-only
        Local refinements per family and material (default 2).
    top : int, keyword-only
        Rows returned (default 10).
    progress : bool, keyword-only
        Progress bar on stderr for searches longer than ~0.5 s.

    Returns
    -------
    pandas.DataFrame
        Ranked (best first): ``rank``, ``family``, ``material``,
        ``core_material`` ("" unless shell), dimensions ``radius_nm``,
        ``core_radius_nm``, ``thickness_nm``, ``length_nm``, ``diameter_nm``,
        ``aspect_ratio`` (NaN where not applicable), ``outer_size_nm``,
        ``peak_wavelength_nm`` (global σ_abs maximum in the window, refined on
        a 0.1 nm grid; NaN when it sits at the window edge), ``fwhm_nm``,
        ``figure_of_merit``, ``absorbed_fraction`` (band average),
        ``dpeak_d_<dimension>`` (d peak / d dimension [nm/nm] by a central
        difference of ±1 nm, other dimensions fixed; for rods and discs the
        dimensions are length and diameter), ``stage`` ("refined" or "grid").
        ``attrs["figure_of_merit"]`` gives name, unit and definition;
        ``attrs["units"]`` every column's unit; ``attrs["metadata"]`` inputs,
        bounds and warnings.
    """
    import pandas as pd
    from scipy.optimize import minimize

    if not (isinstance(band_nm, (tuple, list, np.ndarray)) and len(band_nm) == 2):
        raise NanoabsError(f"band_nm = {band_nm!r}: give (lo, hi) in nm, e.g. band(center_nm=..., width_nm=...)")
    lo, hi = band(lo_nm=band_nm[0], hi_nm=band_nm[1])
    objective = check_choice("objective", objective, OBJECTIVES)
    if isinstance(families, str):
        families = [families]
    families = [check_choice("family", f, FAMILIES) for f in families]
    if not families:
        raise NanoabsError("families is empty: give at least one of " + ", ".join(FAMILIES))
    families = _unique(families)
    if isinstance(materials, str) or hasattr(materials, "permittivity"):
        materials = [materials]
    materials = list(materials)
    if not materials:
        raise NanoabsError("materials is empty: give at least one metal")
    mats = [_resolve_material(m) for m in materials]
    core_m = _resolve_material(core)
    med = _resolve_material(medium)
    min_shell = float(check_finite_array("min_shell_nm", min_shell_nm)[0])
    max_size = float(check_finite_array("max_size_nm", max_size_nm)[0])
    if min_shell < MONOLAYER_NM:
        raise NanoabsError(f"min_shell_nm = {min_shell:g} nm: must be at least {MONOLAYER_NM:g} nm")
    if max_size <= 2 * (5.0 + min_shell):
        raise NanoabsError(f"max_size_nm = {max_size:g} nm: must be above {2 * (5 + min_shell):g} nm")
    for name, v, lim in (("top", top, 1000), ("n_starts", n_starts, 20)):
        if isinstance(v, bool) or not isinstance(v, (int, np.integer)) or not 1 <= v <= lim:
            raise NanoabsError(f"{name} = {v!r}: allowed range is 1 to {lim} (integer)")
    method = check_choice("method", method, ["auto", *METHODS])
    if any(f in ("rod", "disc") for f in families):
        polarization = check_choice("polarization", polarization, ["long", "short", "random", "x", "y", "z"])
    settings = {"method": method, "polarization": polarization, "surface_damping": bool(surface_damping)}
    used = mats + ([core_m] if "shell" in families else []) + [med]
    if wavelength_nm is None:
        window = _search_window(lo, hi, _ranges(*used))
    else:
        window = check_finite_array("wavelength_nm", wavelength_nm, increasing=True)
        if lo < window[0] or hi > window[-1]:
            raise NanoabsError(f"band = ({lo:g}, {hi:g}) nm lies outside wavelength_nm, {window[0]:g} to "
                               f"{window[-1]:g} nm")
    n_band = int(min(max(41, math.ceil((hi - lo) / 2.0) + 1), 201))
    band_wl = np.linspace(lo, hi, n_band)

    inj = {}
    inj_meta = None
    if objective == "injection":
        from . import hotcarriers as hc
        from . import illumination as il

        if barrier_eV is None:
            raise NanoabsError("barrier_eV is required for objective = 'injection' (Schottky barrier in eV)")
        src = il.solar("am1.5g") if illumination is None else illumination
        if getattr(src, "is_monochromatic", False):
            raise NanoabsError("illumination is monochromatic: a band integral needs a spectral source; use "
                               "nanoabs.illumination.flat(...) for a uniform band")
        nodes = getattr(src, "nodes_nm", None)
        if nodes is not None:  # integrate a tabulated source on its own nodes too (sharp bands)
            nodes = np.asarray(nodes, dtype=float)
            band_wl = np.union1d(band_wl, nodes[(nodes > lo) & (nodes < hi)])
            n_band = int(band_wl.size)
        E = np.asarray(src.spectral_irradiance(band_wl), dtype=float)
        phi = float(barrier_eV)
        for m in mats:
            if fermi_energy_eV is None:
                name = getattr(m, "name", type(m).__name__)
                if str(name) not in hc.FREE_ELECTRON:
                    raise NanoabsError(f"fermi_energy_eV: no tabulated Fermi energy for metal {name!r} (known: "
                                       f"{', '.join(hc.FREE_ELECTRON)}); give fermi_energy_eV")
                ef = hc.free_electron(name).fermi_energy_eV
            else:
                ef = float(fermi_energy_eV)
            eta = np.asarray(hc.escape_cone_yield(hc.photon_energy_eV(band_wl), phi, ef), dtype=float)
            if not np.any(eta > 0):
                raise NanoabsError(f"barrier_eV = {phi:g} eV: above every photon energy of the band "
                                   f"(at most {float(hc.photon_energy_eV(lo)):.4g} eV); no carrier can cross it")
            inj[id(m)] = (E, eta)
        inj_meta = {"illumination": src.metadata() if callable(getattr(src, "metadata", None)) else str(src),
                    "barrier_eV": phi, "fermi_energy_eV": fermi_energy_eV or "per metal (Ashcroft & Mermin)",
                    "yield": "escape-cone (nanoabs.hotcarriers.escape_cone_yield)", "transport_factor": 1.0}

    user_bounds = bounds or {}
    if not isinstance(user_bounds, Mapping):
        raise NanoabsError(f"bounds = {bounds!r}: give {{family: {{variable: (lo, hi)}}}}")
    for fam in user_bounds:
        if fam not in FAMILIES:
            raise NanoabsError(f"bounds family {fam!r} is not known{suggest(fam, FAMILIES)}; allowed: "
                               f"{', '.join(FAMILIES)}")
    fam_bounds = {}
    for fam in families:
        b = _default_bounds(fam, min_shell, max_size)
        for var, val in (user_bounds.get(fam) or {}).items():
            if var not in b:
                raise NanoabsError(f"bounds[{fam!r}] name {var!r} is not known{suggest(var, list(b))}; "
                                   f"allowed: {', '.join(b)}")
            try:
                blo, bhi = (float(x) for x in val)
            except (TypeError, ValueError):
                raise NanoabsError(f"bounds[{fam!r}][{var!r}] = {val!r}: give (lo, hi)") from None
            if not (0 < blo < bhi < math.inf):
                raise NanoabsError(f"bounds[{fam!r}][{var!r}] = ({blo:g}, {bhi:g}): need 0 < lo < hi")
            b[var] = (blo, bhi)
        fam_bounds[fam] = b

    n_tasks = len(families) * len(mats) * (1 + n_starts) + top
    bar = _Progress(n_tasks, "search", progress)
    candidates = []
    problems = {}
    try:
        for fam in families:
            b = fam_bounds[fam]
            lo_v = np.log(np.array([b[v][0] for v in _FAMILY_VARS[fam]]))
            hi_v = np.log(np.array([b[v][1] for v in _FAMILY_VARS[fam]]))

            def to_v(u, lo_v=lo_v, hi_v=hi_v):
                return np.exp(lo_v + np.clip(u, 0, 1) * (hi_v - lo_v))

            axes = [np.linspace(0, 1, n) for n in _GRID[fam]]
            U = np.stack([a.ravel() for a in np.meshgrid(*axes, indexing="ij")], axis=1)
            G_all = _geometry_of(fam, to_v(U))
            ok = _feasible(fam, G_all, min_shell, max_size)
            U = U[ok]
            for mi, m in enumerate(mats):
                prob = _Problem(fam, m, core_m if fam == "shell" else None, med, settings, band_wl, lo, hi,
                                objective, inj[id(m)] if objective == "injection" else None)
                problems[(fam, mi)] = prob
                if U.shape[0] == 0:
                    prob.warnings.add(f"{fam}: no design inside the bounds satisfies the size limits")
                    bar.update(1 + n_starts)
                    continue
                fom, _ = prob.fom(_geometry_of(fam, to_v(U)))
                fom = np.where(np.isfinite(fom), fom, -np.inf)
                bar.update()
                order = np.argsort(-fom, kind="stable")
                for j in order:
                    candidates.append({"family": fam, "mi": mi, "u": U[j], "fom": float(fom[j]), "stage": "grid"})
                starts = []
                for j in order:
                    if len(starts) >= n_starts or not np.isfinite(fom[j]):
                        break
                    if all(np.max(np.abs(U[j] - U[s])) > 0.2 for s in starts):
                        starts.append(j)
                scale = float(fom[order[0]]) if np.isfinite(fom[order[0]]) and fom[order[0]] > 0 else None
                for j in starts:
                    if scale is None:
                        break

                    def f(u, fam=fam, prob=prob, scale=scale, to_v=to_v):
                        g = _geometry_of(fam, to_v(np.asarray(u))[None, :])
                        if not _feasible(fam, g, min_shell, max_size)[0]:
                            return 1.0
                        val = prob.fom(g)[0][0]
                        return -val / scale if np.isfinite(val) else 1.0

                    k = U.shape[1]
                    step = 0.5 / max(_GRID[fam])
                    simplex = np.array([U[j]] + [np.clip(U[j] + step * np.eye(k)[i] * (1 if U[j][i] < 0.5 else -1),
                                                         0, 1) for i in range(k)])
                    r = minimize(f, U[j], method="Nelder-Mead", bounds=[(0, 1)] * k,
                                 options={"initial_simplex": simplex, "xatol": 1e-4, "fatol": 1e-7,
                                          "maxiter": 120 * k})
                    if r.fun < 0:
                        candidates.append({"family": fam, "mi": mi, "u": np.clip(r.x, 0, 1),
                                           "fom": -float(r.fun) * scale, "stage": "refined"})
                    bar.update()
                bar.update(n_starts - min(len(starts), n_starts) if scale is not None else n_starts)

        chosen = _choose(candidates, top)
        rows = []
        for c in chosen:
            fam = c["family"]
            prob = problems[(fam, c["mi"])]
            b = fam_bounds[fam]
            lo_v = np.log(np.array([b[v][0] for v in _FAMILY_VARS[fam]]))
            hi_v = np.log(np.array([b[v][1] for v in _FAMILY_VARS[fam]]))
            v = np.exp(lo_v + c["u"] * (hi_v - lo_v))[None, :]
            g = _geometry_of(fam, v)
            fom, af = prob.fom(g)
            row = {"rank": 0, "family": fam, "material": _material_label(materials[c["mi"]]),
                   "core_material": _material_label(core) if fam == "shell" else ""}
            for d in ("radius_nm", "core_radius_nm", "thickness_nm", "length_nm", "diameter_nm", "aspect_ratio"):
                row[d] = float(g[d][0]) if d in g else float("nan")
            row["outer_size_nm"] = float(_outer_size(fam, g)[0])
            row.update(_peak_report(prob, fam, g, window))
            row["figure_of_merit"] = float(fom[0])
            row["absorbed_fraction"] = float(af[0])
            row["stage"] = c["stage"]
            rows.append(row)
            bar.update()
    finally:
        bar.close()
    rows.sort(key=lambda r: -r["figure_of_merit"])  # stable; the recomputed values decide the rank
    for rank, row in enumerate(rows, 1):
        row["rank"] = rank

    cols = ["rank", "family", "material", "core_material", "radius_nm", "core_radius_nm", "thickness_nm",
            "length_nm", "diameter_nm", "aspect_ratio", "outer_size_nm", "peak_wavelength_nm", "fwhm_nm",
            "figure_of_merit", "absorbed_fraction"] + [f"dpeak_d_{d}" for d in _SENS_DIMS] + ["stage"]
    frame = pd.DataFrame(rows, columns=cols)
    for c in cols:
        if c in ("family", "material", "core_material", "stage"):
            frame[c] = frame[c].astype(str)
        elif c == "rank":
            frame[c] = frame[c].astype(np.int64)
        else:
            frame[c] = frame[c].astype(float)
    units = {c: "nm" for c in cols if c.endswith("_nm")}
    units.update({"rank": "1", "family": _TEXT_UNIT, "material": _TEXT_UNIT, "core_material": _TEXT_UNIT,
                  "aspect_ratio": "1", "figure_of_merit": _FOM_UNITS[objective], "absorbed_fraction": "1",
                  "stage": _TEXT_UNIT})
    units.update({f"dpeak_d_{d}": "1" for d in _SENS_DIMS})
    warnings = sorted(set().union(*[p.warnings for p in problems.values()])) if problems else []
    frame.attrs["figure_of_merit"] = {"objective": objective, "name": _FOM_TEXT[objective],
                                      "unit": _FOM_UNITS[objective]}
    frame.attrs["units"] = {c: units[c] for c in cols}
    frame.attrs["metadata"] = {
        "study": "search", "band_nm": [lo, hi], "band_grid_points": n_band, "objective": objective,
        "figure_of_merit": _FOM_TEXT[objective], "families": families,
        "bounds": {f: {k: list(v) for k, v in b.items()} for f, b in fam_bounds.items()},
        "limits": {"min_shell_nm": min_shell, "max_size_nm": max_size},
        "materials": [_material_meta(m) for m in materials], "core": _material_meta(core) if "shell" in families
        else None, "medium": _material_meta(medium), "polarization": polarization, "method": method,
        "surface_damping": bool(surface_damping), "injection": inj_meta,
        "window_nm": [float(window[0]), float(window[-1])],
        "algorithm": "coarse log-spaced grid per family (one vectorised spectrum call), then bounded "
                     "Nelder-Mead (scipy.optimize.minimize) from the best distinct grid points",
        "sensitivity": "central difference of the sigma_abs peak for +-1 nm of each dimension "
                       "(+-value/4 below 4 nm), peak refined on a 0.1 nm grid",
        "warnings": _collapse(warnings),
        "package_version": __version__,
    }
    return frame


def _choose(candidates, top):
    """The ``top`` best distinct candidates, the best of every family and material included.

    A grid point within 0.15 (in log-scaled unit coordinates) of a better entry of the
    same family and material is a neighbour of that entry and left out; refined optima
    closer than 0.03 to a better one count as the same optimum.
    """
    cands = sorted((c for c in candidates if np.isfinite(c["fom"])),
                   key=lambda c: (-c["fom"], c["stage"] != "refined"))
    kept = []
    for c in cands:
        near = 0.15 if c["stage"] == "grid" else 0.03
        if not any(d["family"] == c["family"] and d["mi"] == c["mi"] and
                   np.max(np.abs(d["u"] - c["u"])) < near for d in kept):
            kept.append(c)
    best = {}
    for c in kept:
        best.setdefault((c["family"], c["mi"]), c)
    chosen = list(best.values())[:top]
    for c in kept:
        if len(chosen) >= top:
            break
        if not any(c is d for d in chosen):
            chosen.append(c)
    return sorted(chosen, key=lambda c: (-c["fom"], c["stage"] != "refined"))


_SENS_DIMS = ("radius_nm", "core_radius_nm", "thickness_nm", "length_nm", "diameter_nm")


def _dims_to_geometry(fam, dims):
    if fam in ("rod", "disc"):
        return {"length_nm": dims["length_nm"], "diameter_nm": dims["diameter_nm"],
                "aspect_ratio": dims["length_nm"] / dims["diameter_nm"]}
    return dict(dims)


def _peak_report(prob, fam, g, window):
    """Peak [nm], FWHM [nm] and d peak / d dimension [nm/nm] of one design."""
    out = {"peak_wavelength_nm": float("nan"), "fwhm_nm": float("nan")}
    out.update({f"dpeak_d_{d}": float("nan") for d in _SENS_DIMS})
    res = prob.spectra(g, window)
    s = Spectrum(window, res["sigma_abs_m2"][0], res["sigma_sca_m2"][0], res["sigma_ext_m2"][0],
                 res["geometric_cross_section_m2"][0], res["equal_volume_area_m2"][0],
                 np.asarray(res["metal_volume_m3"][0]), res["n_medium"][0])
    i = int(np.argmax(s.sigma_abs_m2))
    out["fwhm_nm"] = float(s.fwhm_nm())
    if i == 0 or i == window.size - 1:
        return out
    dims = {d: np.array([float(g[d][0])]) for d in _FAMILY_DIMS[fam]}
    designs = [dims]
    steps = []
    for d in _FAMILY_DIMS[fam]:
        h = min(1.0, float(dims[d][0]) / 4)
        steps.append((d, h))
        for sign in (1, -1):
            dd = {k: v.copy() for k, v in dims.items()}
            dd[d] = dd[d] + sign * h
            designs.append(dd)
    G = {k: np.concatenate([_dims_to_geometry(fam, dd)[k] for dd in designs])
         for k in _dims_to_geometry(fam, dims)}
    rough = [_peak(window, row) for row in prob.spectra(G, window)["sigma_abs_m2"]]
    fine = np.arange(max(min(rough) - 20.0, window[0]), min(max(rough) + 20.0, window[-1]) + 1e-9, 0.1)
    sa = prob.spectra(G, fine)["sigma_abs_m2"]
    peaks = []
    for row in sa:
        j = int(np.argmax(row))
        peaks.append(_peak(fine, row) if 0 < j < fine.size - 1 else float("nan"))
    out["peak_wavelength_nm"] = float(peaks[0])
    for k, (d, h) in enumerate(steps):
        out[f"dpeak_d_{d}"] = float((peaks[1 + 2 * k] - peaks[2 + 2 * k]) / (2 * h))
    return out
