"""Parameter sweeps: spectra of the Cartesian product of design parameters as one tidy table."""

from __future__ import annotations

import hashlib
import itertools
import json
import math
import shutil
from collections.abc import Mapping
from pathlib import Path

import numpy as np

from .._version import version as _package_version
from .._errors import NanoabsError
from ..optics import UNITS as _SPECTRUM_UNITS
from ..validity import emit_messages
from . import _engine
from ._designs import (is_environment, _GEOMETRY, _design_columns, _designs, _evaluate, _make_plan, _material_label,
                       _material_meta, _resolve_material, _settings)

#: Largest sweep (designs x wavelengths) run without an explicit ``max_points``.
MAX_POINTS = 100_000_000
#: Spectral columns of a sweep table, after the design columns.
RESULT_COLUMNS = ["wavelength_nm", "sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2",
                  "q_abs", "q_sca", "q_ext", "absorbed_fraction"]

_GEOMETRY_UNITS = {"radius_nm": "nm", "core_radius_nm": "nm", "thickness_nm": "nm", "length_nm": "nm",
                   "diameter_nm": "nm", "aspect_ratio": "1", "a_nm": "nm", "b_nm": "nm", "c_nm": "nm"}
_TEXT_UNIT = "1"  # unit recorded for text columns (material labels)


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


def _compute_chunk(plan, index):
    """Compute chunk ``index`` of a sweep plan: (tidy frame, {"warnings", "methods"}, CSV text or None).

    A module-level function so that process pools and Dask can run it; its
    result depends only on ``plan`` and ``index``. For a streamed sweep the CSV
    text is formatted here, i.e. in the worker; when the table is not kept in
    memory only its first row is returned.
    """
    ids = _chunk_ids(plan, index)
    W = plan["wavelength_nm"].size
    res = _evaluate(plan["shape"], _designs(plan, ids), plan["wavelength_nm"], _settings(plan))
    frame = _tidy(plan, ids, res)
    text = _engine.csv_text(frame) if plan.get("stream") else None
    if not plan.get("keep", True):
        frame = frame.head(1)
    return frame, {"warnings": res["warnings"], "methods": res["methods"], "rows": int(ids.size * W)}, text


def _units(plan):
    u = {"design_id": "1", "material": _TEXT_UNIT, "core_material": _TEXT_UNIT, "medium_index": "1"}
    u.update(_GEOMETRY_UNITS)
    u.update({c: _SPECTRUM_UNITS[c] for c in RESULT_COLUMNS})
    return {c: u[c] for c in _design_columns(plan) + RESULT_COLUMNS}


def _content_token(value, wavelength_nm) -> str:
    """SHA-256 of everything about a material that determines the numbers.

    Its class and label, metadata (material, dataset, source, range), fitted model,
    table content (wavelengths and n + ik as parsed, or the constant index) and its
    permittivity on the sweep's wavelengths (which covers any user object).
    """
    if isinstance(value, (int, float)) and not isinstance(value, bool):
        return repr(float(value))
    if is_environment(value):  # its description plus the content of every material it names
        h = hashlib.sha256(json.dumps(value.describe(), sort_keys=True, default=str).encode())
        for name in ("medium", "substrate", "superstrate"):
            if getattr(value, name, None) is not None:
                h.update(_content_token(getattr(value, name), wavelength_nm).encode())
        if getattr(value, "spacer", None):
            h.update(_content_token(value.spacer[0], wavelength_nm).encode())
        return h.hexdigest()
    m = _resolve_material(value)
    h = hashlib.sha256(f"{type(m).__name__}|{_material_label(value)}".encode())
    h.update(json.dumps(_material_meta(m), sort_keys=True, default=str).encode())
    model = getattr(m, "model", None)
    h.update((json.dumps(model.to_dict(), sort_keys=True, default=str) if callable(getattr(model, "to_dict", None))
              else repr(model)).encode())
    for name in ("_wl", "_n", "_constant"):
        v = getattr(getattr(m, "bulk", m), name, None)
        if v is not None:
            h.update(np.ascontiguousarray(v).tobytes())
    h.update(np.ascontiguousarray(np.asarray(m.permittivity(wavelength_nm), dtype=complex)).tobytes())
    return h.hexdigest()


def _plan_hash(plan):
    """The identity of a sweep: arguments, content of every material used, solver settings, package version."""
    wl = plan["wavelength_nm"]
    swept = dict(zip(plan["names"], plan["values"]))
    doc = {
        "shape": plan["shape"], "names": plan["names"],
        "values": [[_content_token(v, wl) for v in vals] if n in ("material", "core_material")
                   else [repr(float(v)) for v in vals] for n, vals in zip(plan["names"], plan["values"])],
        "wavelength_nm": hashlib.sha256(np.ascontiguousarray(wl, dtype=float).tobytes()).hexdigest(),
        "material": None if "material" in swept else _content_token(plan["material"], wl),
        "core": (_content_token(plan["core"], wl) if plan["shape"] == "shell" and "core_material" not in swept
                 else None),
        "medium": None if "medium_index" in swept else _content_token(plan["medium"], wl),
        "polarization": plan["polarization"], "method": plan["method"],
        "surface_damping": plan["surface_damping"], "chunk_size": plan["chunk_size"],
        "package_version": _package_version(),
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
        "polarization": plan["polarization"] if shape not in ("sphere", "shell") else "any (sphere)",
        "method": plan["method"], "methods_used": methods, "surface_damping": plan["surface_damping"],
        "chunk_size": plan["chunk_size"], "n_chunks": n_chunks, "executor": executor_name,
        "efficiency_reference_area": "as nanoabs.spectrum: pi r_outer^2 for spheres; projected area for "
                                     "polarised ellipsoids; surface area / 4 for random orientation",
        "warnings": _engine.collapse(warnings),
        "package_version": _package_version(),
    }


def sweep(shape, params, wavelength_nm, *, material="Au", core="SiO2", medium="water",
          polarization="random", method="auto", surface_damping=True, executor=None, chunk_size=64,
          progress=None, out=None, force=False, memory_budget_MB=256.0, max_points=MAX_POINTS,
          as_dataset=False, environment=None):
    """Spectra of the Cartesian product of design parameters, as one tidy table (or an N-D dataset).

    Parameters
    ----------
    shape : {"sphere", "shell", "spheroid", "ellipsoid", "cylinder", "capped-rod", "rounded-disc"}
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
    progress : bool or None, keyword-only
        Progress bar (tqdm, on stderr; a widget in notebooks) for sweeps running
        longer than ~0.5 s: True always, False never, None (default) only when
        stderr is a terminal.
    out : str or path, keyword-only
        Stream to ``out`` (a ``.csv``; a JSON sidecar with units and metadata is
        written beside it as by :func:`nanoabs.export.write_export`). Finished
        chunks go atomically to one file each in the work directory
        ``<out>.parts/`` as they arrive; an interruption (KeyboardInterrupt,
        an error, a killed process) keeps them. At the end the parts are
        concatenated into ``out`` atomically and the work directory is removed.
        Resume rule: a re-run resumes only from parts of the same *identity*,
        a SHA-256 over the arguments, the content of every material table
        used (tabulated n + ik, fitted model, dataset and source, permittivity
        on the grid; user tables included), the solver settings and the
        package version. A work directory of another identity is refused
        unless ``force``; a part whose own sidecar does not record the same
        identity, its expected row count and the checksum of its bytes
        (truncated, edited) is recomputed. While it runs, the sweep holds an
        exclusive lock (``<out>.lock``); a second writer to the same ``out``
        is refused.
    force : bool, keyword-only
        Overwrite an existing ``out`` and discard a work directory of a sweep
        with different arguments.
    memory_budget_MB : float, keyword-only
        With ``out``: when the table would exceed this size [MB] it is not held
        in memory and the path of the written CSV is returned instead (read it
        with ``pandas.read_csv(path, chunksize=...)`` or
        :func:`nanoabs.read_export`). Default 256.
    max_points : int, keyword-only
        Largest number of designs x wavelengths allowed (default
        :data:`MAX_POINTS`, 1e8, about 10 GB of CSV); a larger sweep is refused
        unless this is raised explicitly.
    environment : environment object, keyword-only
        Where the particles sit (:func:`nanoabs.on_substrate`, :func:`nanoabs.buried`) instead of a
        homogeneous ``medium``; each design is then computed on its own (planar environments take
        one particle per call), and the environment's description and materials enter the
        resume identity.
    as_dataset : bool, keyword-only
        Return an :class:`xarray.Dataset` with dims ``wavelength_nm`` plus the swept
        parameters and CF ``units`` attributes (:func:`nanoabs.dataset.sweep_dataset`;
        needs the ``xarray`` extra). Not with ``out``.

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
    if environment is not None:
        if medium != "water":
            raise NanoabsError("medium and environment: give one (the environment names the particle's host)")
        medium = environment
    if as_dataset:
        if out is not None:
            raise NanoabsError("as_dataset=True returns the sweep in memory; write it with "
                               "nanoabs.dataset.write_netcdf instead of out=")
        from ..dataset import sweep_dataset

        return sweep_dataset(sweep(shape, params, wavelength_nm, material=material, core=core, medium=medium,
                                   polarization=polarization, method=method, surface_damping=surface_damping,
                                   chunk_size=chunk_size, executor=executor, progress=progress,
                                   max_points=max_points))
    plan, rows = validated_plan(shape, params, wavelength_nm, material=material, core=core, medium=medium,
                                polarization=polarization, method=method, surface_damping=surface_damping,
                                chunk_size=chunk_size, max_points=max_points)
    budget = float(memory_budget_MB)
    if not math.isfinite(budget) or budget <= 0:
        raise NanoabsError(f"memory_budget_MB = {memory_budget_MB!r}: must be a finite number > 0")
    if out is None:
        return _run(plan, rows, budget, executor, progress, None, force)
    from ..export import check_writable, clean_stale_temps, exclusive_lock

    out = Path(out)
    if out.suffix.lower() != ".csv":
        raise NanoabsError(f"out = {str(out)!r}: a streamed sweep is written as CSV + JSON sidecar; "
                           "give a path ending in .csv")
    check_writable(out, force=force)
    with exclusive_lock(out, "sweep output"):
        clean_stale_temps(out)
        check_writable(out, force=force)  # again, now that no one else writes it
        return _run(plan, rows, budget, executor, progress, out, force)


def validated_plan(shape, params, wavelength_nm, *, material="Au", core="SiO2", medium="water",
                   polarization="random", method="auto", surface_damping=True, chunk_size=64,
                   max_points=MAX_POINTS):
    """The checked plan of a sweep and its number of rows; every input error is raised here.

    Materials, wavelength ranges, methods and polarizations are probed on the first
    design at the end wavelengths, so a caller can validate a sweep before writing anything.
    """
    plan = _make_plan(shape, params, wavelength_nm, material=material, core=core, medium=medium,
                      polarization=polarization, method=method, surface_damping=surface_damping,
                      chunk_size=chunk_size)
    rows = plan["n_designs"] * plan["wavelength_nm"].size
    if isinstance(max_points, bool) or not isinstance(max_points, (int, np.integer)) or max_points < 1:
        raise NanoabsError(f"max_points = {max_points!r}: must be an integer >= 1")
    if rows > max_points:
        raise NanoabsError(f"sweep size = {plan['n_designs']} designs x {plan['wavelength_nm'].size} wavelengths = "
                           f"{rows:.3g} points: allowed is at most max_points = {max_points:.3g} (CLI: "
                           "--max-points); raise it explicitly for a larger sweep")
    _probe(plan)
    return plan, rows


def _run(plan, rows, budget, executor, progress, out, force):
    """Compute (or resume) every chunk of a validated plan; the frame, or ``out`` over budget."""
    import pandas as pd

    n_chunks = -(-plan["n_designs"] // plan["chunk_size"])
    units = _units(plan)
    cols = _design_columns(plan) + RESULT_COLUMNS
    n_text = sum(c in ("material", "core_material") for c in cols)
    keep = out is None or rows * (8 * (len(cols) - n_text) + 40 * n_text) / 1e6 <= budget
    workdir, finished, digest = None, set(), None
    if out is not None:
        workdir, digest = Path(str(out) + ".parts"), _plan_hash(plan)
        W = plan["wavelength_nm"].size
        finished = _engine.prepare_workdir(workdir, digest, n_chunks, force,
                                           lambda i: int(_chunk_ids(plan, i).size * W),
                                           n_designs=plan["n_designs"], chunk_size=plan["chunk_size"])
    plan["stream"], plan["keep"] = workdir is not None, keep  # not part of the identity
    frames, frame0, infos = _engine.collect(
        _compute_chunk, plan, n_chunks, executor=executor, progress=progress, label=f"sweep {plan['shape']}",
        workdir=workdir, identity=digest, finished=finished, keep=keep,
        read_kw={"text_columns": ("material", "core_material"), "int_columns": ("design_id",)})
    warnings = sorted({w for info in infos for w in info["warnings"]})
    methods = sorted({m for info in infos for m in info["methods"]})
    meta = _sweep_metadata(plan, n_chunks, warnings, methods, _engine.executor_name(executor))
    emit_messages(meta["warnings"])
    if keep:
        frame = pd.concat(frames, ignore_index=True) if n_chunks > 1 else frames[0].reset_index(drop=True)
        frame0 = frame.head(1)
    if workdir is not None:
        meta["resumed_chunks"] = len(finished)
        _engine.write_final(out, workdir, n_chunks, frame0, units, meta, rows, force)
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
    from ..export import write_export

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


