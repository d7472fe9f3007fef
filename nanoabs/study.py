"""Study files (TOML) and the report folder they produce; the shipped demo study.

A study file describes, in one place, the medium, the wavelength grid, the
illumination, the Schottky contact and the detector array, and what to compute:
single ``[[particle]]`` spectra with hot-carrier estimates, ``[[sweep]]`` maps
over one geometric parameter, and an optional ``[search]`` for ranked designs in
a target band. :func:`run_study` writes CSV + JSON exports, PNG figures and a
Markdown summary into an output folder. The schema is documented in the README
("Study files"); :func:`load_study` validates it and names the offending key.
"""

from __future__ import annotations

import glob
import math
import os
import shutil
import sys
import tempfile
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

import numpy as np

from ._errors import DataError, NanoabsError, suggest
from .drude_lorentz import HC_EV_NM

__all__ = ["load_study", "run_study", "demo_study_path", "SCHEMA"]

# section -> {key: (type or tuple of types, required?)}
_NUM = (int, float)
SCHEMA = {
    "study": {"title": (str, True), "description": (str, False), "lab": (str, False)},
    "medium": {"name": (str, False), "index": (_NUM, False), "thermal_conductivity_W_mK": (_NUM, False)},
    "environment": {"substrate": ((str,) + _NUM, True), "superstrate": ((str,) + _NUM, False),
                    "gap_nm": (_NUM, False), "depth_nm": (_NUM, False), "spacer": (str, False),
                    "incidence": (str, False), "angle_deg": (_NUM, False), "polarization": (str, False)},
    "wavelengths": {"start_nm": (_NUM, True), "stop_nm": (_NUM, True), "step_nm": (_NUM, True)},
    "illumination": {"kind": (str, True), "spectrum": (str, False), "irradiance_W_m2": (_NUM, False),
                     "power_W": (_NUM, False), "beam_radius_nm": (_NUM, False),
                     "temperature_K": (_NUM, False), "total_irradiance_W_m2": (_NUM, False),
                     "value_W_m2_nm": (_NUM, False), "file": (str, False), "band_nm": (list, False)},
    "detector": {"barrier_eV": (_NUM, False), "schottky": (str, False), "fermi_energy_eV": (_NUM, False),
                 "attenuation_length_nm": (_NUM, False), "density_per_um2": (_NUM, False),
                 "momentum_factor": (_NUM, False), "contact_fraction": (_NUM, False),
                 "yield_model": (str, False), "surface_emission": (str, False), "fermi_smearing": (bool, False),
                 "temperature_K": (_NUM, False), "carrier": (str, False)},
    "particle": {"name": (str, True), "shape": (str, True), "material": (str, False),
                 "radius_nm": (_NUM, False), "core": (str, False), "core_radius_nm": (_NUM, False),
                 "shell": (str, False), "thickness_nm": (_NUM, False), "length_nm": (_NUM, False),
                 "diameter_nm": (_NUM, False), "semi_axes_nm": (list, False), "polarization": (str, False),
                 "method": (str, False), "surface_damping": (bool, False)},
    "sweep": {"name": (str, True), "shape": (str, True), "parameter": (str, True), "values_nm": (list, True),
              "material": (str, False), "radius_nm": (_NUM, False), "core": (str, False),
              "core_radius_nm": (_NUM, False), "shell": (str, False), "thickness_nm": (_NUM, False),
              "length_nm": (_NUM, False), "diameter_nm": (_NUM, False), "polarization": (str, False)},
    "search": {"band_nm": (list, True), "families": (list, False), "objective": (str, False),
               "materials": (list, False), "max_size_nm": (_NUM, False), "min_shell_nm": (_NUM, False),
               "top": (int, False)},
    "output": {"figures": (bool, False), "formats": (list, False), "log_emission": (bool, False)},
}
_LISTS = {"particle", "sweep"}  # arrays of tables
_SHAPES = ["sphere", "shell", "spheroid", "ellipsoid", "cylinder", "capped-rod", "rounded-disc"]
_ILLUM = ["monochromatic", "laser", "solar", "blackbody", "flat", "csv"]


def _load_toml(path: Path) -> dict:
    try:
        import tomllib
    except ModuleNotFoundError:  # Python 3.10
        import tomli as tomllib
    try:
        raw = path.read_bytes()
    except FileNotFoundError:
        raise DataError(f"study file {path}: not found") from None
    except OSError as exc:
        raise DataError(f"study file {path}: cannot be read ({exc.__class__.__name__})") from None
    try:
        return tomllib.loads(raw.decode("utf-8-sig"))  # a byte-order mark is accepted
    except UnicodeDecodeError:
        raise DataError(f"study file {path}: not UTF-8 text") from None
    except tomllib.TOMLDecodeError as exc:
        raise DataError(f"study file {path}: malformed TOML: {exc}") from None


def _check_table(where: str, table, spec: dict) -> None:
    if not isinstance(table, dict):
        raise DataError(f"study key [{where}] must be a table")
    for key, value in table.items():
        if key not in spec:
            raise DataError(f"study key {where}.{key} is not known{suggest(key, spec)}; allowed: "
                            f"{', '.join(spec)}")
        types = spec[key][0]
        ok = isinstance(value, types) and not (types is _NUM and isinstance(value, bool))
        if types == _NUM and isinstance(value, bool):
            ok = False
        if not ok:
            tname = "number" if types == _NUM else getattr(types, "__name__", str(types))
            raise DataError(f"study key {where}.{key} = {_short(value)}: must be a {tname}")
        _check_value(f"{where}.{key}", key, value)
    for key, (_, required) in spec.items():
        if required and key not in table:
            raise DataError(f"study key {where}.{key} is required")


#: Element type of the list-valued keys.
_ITEMS = {"values_nm": _NUM, "semi_axes_nm": _NUM, "band_nm": _NUM, "families": str, "materials": str,
          "formats": str}


def _short(value) -> str:
    text = repr(value)
    return text if len(text) <= 60 else text[:57] + "..."


def _check_value(where, key, value):
    """Numbers finite, list items of the right type, sizes within the bound of the design module."""
    from .design._designs import MAX_SIZE_NM

    items = value if isinstance(value, list) else [value]
    if isinstance(value, list):
        want = _ITEMS.get(key)
        for v in items:
            if want is not None and (not isinstance(v, want) or (want is _NUM and isinstance(v, bool))):
                raise DataError(f"study key {where} contains {_short(v)}: every item must be a "
                                f"{'number' if want is _NUM else 'string'}")
        if key == "values_nm" and not items:
            raise DataError(f"study key {where} is empty: give at least one value")
    for v in items:
        if isinstance(v, float) and not math.isfinite(v):
            raise DataError(f"study key {where} = {v}: must be a finite number")
    sized = key.endswith("_nm") and key != "band_nm" and not where.startswith(("wavelengths", "illumination"))
    if sized and any(isinstance(v, _NUM) and v > MAX_SIZE_NM for v in items):
        raise DataError(f"study key {where} = {max(items):g} nm: allowed range is up to {MAX_SIZE_NM:g} nm")


def validate(doc: dict) -> dict:
    """Check a parsed study against :data:`SCHEMA`; return it unchanged or raise DataError."""
    if not isinstance(doc, dict):
        raise DataError("study file must be a TOML document")
    for sec, value in doc.items():
        if sec not in SCHEMA:
            raise DataError(f"study section [{sec}] is not known{suggest(sec, SCHEMA)}; allowed: "
                            f"{', '.join(SCHEMA)}")
        if sec in _LISTS:
            if not isinstance(value, list):
                raise DataError(f"study section {sec} must be an array of tables: write [[{sec}]]")
            for i, t in enumerate(value):
                _check_table(f"{sec}[{i}]", t, SCHEMA[sec])
        else:
            _check_table(sec, value, SCHEMA[sec])
    for sec in ("study", "wavelengths", "illumination"):
        if sec not in doc:
            raise DataError(f"study section [{sec}] is required")
    if not (doc.get("particle") or doc.get("sweep") or doc.get("search")):
        raise DataError("study needs at least one [[particle]], [[sweep]] or [search]")
    ill = doc["illumination"]
    if ill["kind"] not in _ILLUM:
        raise DataError(f"study key illumination.kind = {ill['kind']!r}{suggest(ill['kind'], _ILLUM)}; "
                        f"allowed: {', '.join(_ILLUM)}")
    for sec in ("particle", "sweep"):
        for i, t in enumerate(doc.get(sec, [])):
            if t["shape"] not in _SHAPES:
                raise DataError(f"study key {sec}[{i}].shape = {t['shape']!r}{suggest(t['shape'], _SHAPES)}; "
                                f"allowed: {', '.join(_SHAPES)}")
    det = doc.get("detector", {})
    if (doc.get("particle") or doc.get("search")) and "barrier_eV" not in det and "schottky" not in det:
        raise DataError("study key detector.barrier_eV (or detector.schottky) is required for particles and searches")
    w = doc["wavelengths"]
    if not (0 < w["start_nm"] < w["stop_nm"]) or not (0 < w["step_nm"] <= (w["stop_nm"] - w["start_nm"]) * _GRID_RTOL1):
        raise DataError(f"study keys wavelengths.start_nm/stop_nm/step_nm = {w['start_nm']}/{w['stop_nm']}/"
                        f"{w['step_nm']}: need 0 < start < stop and 0 < step <= stop - start")
    return doc


def load_study(path) -> dict:
    """Read and validate a study file; errors are one line naming the key and what is allowed."""
    p = Path(path)
    doc = validate(_load_toml(p))
    doc["_path"] = str(p)
    return doc


def demo_study_path() -> Path:
    """The shipped demo study (an invented lab's sub-bandgap near-infrared detector)."""
    try:
        return Path(str(resources.files("nanoabs._data") / "demo_study.toml"))
    except ModuleNotFoundError:  # pragma: no cover - source checkout
        return Path(__file__).parent / "_data" / "demo_study.toml"


# -- running -----------------------------------------------------------------


#: Relative tolerance of "the step divides the range" (decimal steps are not exact in binary).
_GRID_RTOL = 1e-9
_GRID_RTOL1 = 1 + _GRID_RTOL


def inclusive_grid(start, stop, step, name, *, max_points=200_000):
    """start, start + step, ... up to ``stop`` inclusive [nm], robust to decimal rounding.

    When (stop − start)/step is an integer to within 1e-9 relative, the grid ends exactly at
    ``stop`` (1936.9:1937:0.1 gives 1936.9 and 1937); no point ever exceeds ``stop``.
    """
    r = (stop - start) / step
    k = round(r)
    exact = abs(r - k) <= _GRID_RTOL * max(1.0, abs(k))
    n = int(k if exact else math.floor(r)) + 1
    if n > max_points:
        raise NanoabsError(f"{name}: {n} points; at most {max_points} allowed")
    grid = np.minimum(start + step * np.arange(n), stop)
    if exact:
        grid[-1] = stop
    return grid


def _wavelengths(doc):
    w = doc["wavelengths"]
    return inclusive_grid(w["start_nm"], w["stop_nm"], w["step_nm"], "study wavelengths")


def _medium(doc):
    from .materials import material

    m = doc.get("medium", {})
    if "index" in m and "name" in m:
        raise DataError("study keys medium.name and medium.index are exclusive: give one")
    if "index" in m:
        return material(float(m["index"]))
    return material(m.get("name", "water"))


def _bodies():
    from .particles import CappedRod, Cylinder, RoundedDisc

    return {"cylinder": Cylinder, "capped-rod": CappedRod, "rounded-disc": RoundedDisc}


def _environment(doc):
    """The [environment] table as an environment object (particles on or in a substrate), or None."""
    from . import environments as envs

    e = doc.get("environment")
    if not e:
        return None
    if "name" in doc.get("medium", {}) or "index" in doc.get("medium", {}):
        raise DataError("study sections [medium] (name/index) and [environment]: give one (the environment "
                        "names the particle's host)")
    kw = {"superstrate": e.get("superstrate", "air"), "incidence": e.get("incidence", "front"),
          "angle_deg": e.get("angle_deg", 0.0), "polarization": e.get("polarization", "s")}
    if "depth_nm" in e:
        if "gap_nm" in e or "spacer" in e:
            raise DataError("study key environment.depth_nm (buried particle) excludes gap_nm and spacer")
        return envs.buried(e["substrate"], depth_nm=e["depth_nm"], **kw)
    return envs.on_substrate(e["substrate"], gap_nm=e.get("gap_nm", 0.0), spacer=e.get("spacer"), **kw)


def _illumination(doc):
    from . import illumination as il

    d = doc["illumination"]
    kind = d["kind"]
    need = {"monochromatic": ["irradiance_W_m2"], "laser": ["power_W", "beam_radius_nm"],
            "solar": ["spectrum"], "blackbody": ["temperature_K"], "flat": ["value_W_m2_nm"],
            "csv": ["file"]}[kind]
    for k in need:
        if k not in d:
            raise DataError(f"study key illumination.{k} is required for kind = {kind!r}")
    if kind == "monochromatic":
        src = il.monochromatic(d["irradiance_W_m2"])
    elif kind == "laser":
        src = il.laser(d["power_W"], d["beam_radius_nm"])
    elif kind == "solar":
        src = il.solar(d["spectrum"])
    elif kind == "blackbody":
        src = il.blackbody(d["temperature_K"], total_irradiance_W_m2=d.get("total_irradiance_W_m2"))
    elif kind == "flat":
        src = il.flat(d["value_W_m2_nm"])
    else:
        f = Path(d["file"])
        if not f.is_absolute() and doc.get("_path"):
            f = Path(doc["_path"]).parent / f
        from .export import check_input_file

        src = il.from_csv(check_input_file(f, "illumination file"))
    if "band_nm" in d:
        b = d["band_nm"]
        if len(b) != 2 or not all(isinstance(v, _NUM) for v in b):
            raise DataError(f"study key illumination.band_nm = {b!r}: must be [low, high] in nm")
        src = src.filtered(float(b[0]), float(b[1]))
    return src


def _barrier(doc):
    from .hotcarriers import schottky_barrier

    det = doc.get("detector", {})
    if "barrier_eV" in det and "schottky" in det:
        raise DataError("study keys detector.barrier_eV and detector.schottky are exclusive: give one")
    if "schottky" in det:
        v, src = schottky_barrier(det["schottky"])
        return float(v), src
    return float(det["barrier_eV"]), "study file"


def _carrier(doc):
    """Carriers that cross: from the contact's doping (detector.schottky) or detector.carrier."""
    det = doc.get("detector", {})
    if "schottky" in det:
        from .contacts import contact

        if "carrier" in det:
            raise DataError("study keys detector.carrier and detector.schottky are exclusive: the pair sets it")
        return contact(det["schottky"]).carrier
    c = det.get("carrier", "electron")
    if c not in ("electron", "hole"):
        raise DataError(f"study key detector.carrier = {c!r}: allowed: electron, hole")
    return c


def _particle(t):
    from .materials import material
    from .particles import Ellipsoid, LayeredSphere, Sphere, spheroid

    def mat(key, default=None):
        v = t.get(key, default)
        if v is None:
            raise DataError(f"study key {t['name']!r}: {key} is required for shape {t['shape']!r}")
        return material(str(v))

    def num(key):
        if key not in t:
            raise DataError(f"study key {t['name']!r}: {key} is required for shape {t['shape']!r}")
        return float(t[key])

    shape = t["shape"]
    if shape == "sphere":
        return Sphere(mat("material"), num("radius_nm"))
    if shape == "shell":
        return LayeredSphere(mat("core", t.get("material")), num("core_radius_nm"),
                             [(mat("shell"), num("thickness_nm"))])
    shell = (mat("shell"), num("thickness_nm")) if "shell" in t else None
    if shape == "spheroid":
        return spheroid(mat("material"), num("length_nm"), num("diameter_nm"), shell=shell)
    if shape in _bodies():
        if shell is not None:
            raise DataError(f"study key {t['name']!r}: shape {shape!r} takes no shell (homogeneous T-matrix bodies)")
        return _bodies()[shape](mat("material"), num("length_nm"), num("diameter_nm"))
    axes = t.get("semi_axes_nm")
    if not isinstance(axes, list) or len(axes) != 3:
        raise DataError(f"study key {t['name']!r}: semi_axes_nm must be [a, b, c] in nm")
    return Ellipsoid(mat("material"), [float(a) for a in axes], shell)


@dataclass
class _Report:
    out: Path
    files: list
    lines: list
    fmts: list

    def path(self, name):
        return self.out / name

    def add(self, p):
        self.files.append(Path(p).name)

    def figure(self, fig, stem):
        from .plotting import save_figure

        for f in self.fmts:
            self.add(save_figure(fig, self.path(f"{stem}.{f}"), force=True))


def _slug(text):
    keep = "".join(c if c.isalnum() else "_" for c in text.lower())
    return "_".join(p for p in keep.split("_") if p)[:40] or "item"


def _stems(names):
    """One file stem per item, unique by construction: repeated slugs get a suffix _2, _3, ..."""
    used, out = set(), []
    for name in names:
        base = stem = _slug(name)
        k = 1
        while stem in used:
            k += 1
            stem = f"{base}_{k}"
        used.add(stem)
        out.append(stem)
    return out


def _output_dir(out_dir, force) -> Path:
    """The report folder, checked before anything is computed or written."""
    if str(out_dir).strip() == "":
        raise NanoabsError("output folder = '': give a folder name (CLI: -o FOLDER)")
    out = Path(out_dir)
    parent = out.resolve().parent
    try:
        if out.exists() and not out.is_dir():
            raise NanoabsError(f"output folder {str(out)!r} exists and is not a folder: choose another name")
        if out.exists() and any(out.iterdir()) and not force:
            raise NanoabsError(f"output folder {str(out)!r} exists and is not empty: pass force=True (CLI: --force) "
                               "or choose another folder")
    except OSError as exc:
        raise NanoabsError(f"output folder {str(out)!r} cannot be read ({exc.__class__.__name__})") from None
    if not parent.is_dir():
        raise NanoabsError(f"output folder parent {str(out.parent)!r} does not exist")
    for d in (parent, out) if out.exists() else (parent,):
        if not os.access(d, os.W_OK | os.X_OK):
            raise NanoabsError(f"output folder {str(d)!r} is not writable")
    return out


def _prepare(doc):
    """Everything the report needs, validated; nothing is written here."""
    env = _environment(doc)
    job = {"doc": doc, "wl": _wavelengths(doc), "env": env,
           "medium": env.host_material() if env is not None else _medium(doc),
           "where": {"environment": env} if env is not None else {"medium": _medium(doc)},
           "illum": _illumination(doc),
           "det": doc.get("detector", {}), "figures": doc.get("output", {}).get("figures", True),
           "fmts": doc.get("output", {}).get("formats", ["png"]),
           "kappa": doc.get("medium", {}).get("thermal_conductivity_W_mK")}
    for f in job["fmts"]:
        if f not in ("png", "svg"):
            raise DataError(f"study key output.formats contains {f!r}: allowed: png, svg")
    items = doc.get("particle", []) + doc.get("sweep", [])
    stems = dict(zip(map(id, items), _stems([t["name"] for t in items])))
    job["particles"] = [(t, _particle(t), stems[id(t)]) for t in doc.get("particle", [])]
    job["barrier"] = _barrier(doc) if (job["particles"] or doc.get("search")) else (None, None)
    job["carrier"] = _carrier(doc) if (job["particles"] or doc.get("search")) else "electron"
    job["sweeps"] = [_sweep_inputs(t, job, stems[id(t)]) for t in doc.get("sweep", [])]
    job["search"] = _search_inputs(doc, job) if doc.get("search") else None
    return job


def _sweep_inputs(t, job, stem):
    from .design._designs import _GEOMETRY
    from .design._sweep import validated_plan

    shape, param = t["shape"], t["parameter"]
    if param not in _GEOMETRY[shape]:
        raise DataError(f"study key sweep {t['name']!r}: parameter = {param!r}{suggest(param, _GEOMETRY[shape])}; "
                        f"allowed for shape {shape!r}: {', '.join(_GEOMETRY[shape])}")
    params = {param: np.asarray(t["values_nm"], dtype=float)}
    for k in _GEOMETRY[shape]:
        if k in t and k != param:
            params[k] = np.array([float(t[k])])
    kw = {"material": t.get("shell", t.get("material", "Au")) if shape == "shell" else t.get("material", "Au"),
          "medium": job["env"] if job["env"] is not None else job["medium"]}
    if shape == "shell":
        kw["core"] = t.get("core", "SiO2")
    if "polarization" in t:
        kw["polarization"] = t["polarization"]
    try:
        validated_plan(shape, params, job["wl"], **kw)
    except NanoabsError as exc:
        raise type(exc)(f"study sweep {t['name']!r}: {exc}") from None
    return {"t": t, "stem": stem, "shape": shape, "param": param, "params": params, "kw": kw}


def _search_inputs(doc, job):
    from .design._search import search_inputs

    sd = doc["search"]
    b = sd["band_nm"]
    if len(b) != 2 or not b[0] < b[1]:
        raise DataError(f"study key search.band_nm = {b!r}: must be [low, high] in nm with low < high")
    kw = dict(families=sd.get("families", ["sphere", "shell", "rod"]),
              objective=sd.get("objective", "absorbed_fraction"), materials=sd.get("materials", ["Au"]),
              **({"environment": job["env"]} if job["env"] is not None else {"medium": job["medium"]}),
              illumination=job["illum"], barrier_eV=job["barrier"][0], carrier=job["carrier"],
              max_size_nm=sd.get("max_size_nm", 200.0), min_shell_nm=sd.get("min_shell_nm", 5.0),
              top=int(sd.get("top", 10)))
    search_inputs((float(b[0]), float(b[1])), bounds=None, core="SiO2", fermi_energy_eV=None,
                  polarization="random", method="auto", surface_damping=True, wavelength_nm=None, n_starts=2, **kw)
    return {"band": (float(b[0]), float(b[1])), "kw": kw, "sd": sd}


def run_study(path_or_doc, out_dir, *, force: bool = False, progress: bool = True) -> Path:
    """Run a study and write the report folder; returns the path of ``summary.md``.

    Order: the whole study is validated first (every section, every name, the
    output folder; an existing non-empty folder needs ``force``), then computed
    into a temporary folder beside the output, then its files are moved into the
    output folder. A failure leaves the output folder as it was. While it runs
    the folder is locked (``<folder>.lock``): a second run into it is refused.
    """
    from .export import exclusive_lock

    doc = path_or_doc if isinstance(path_or_doc, dict) else load_study(path_or_doc)
    out = _output_dir(out_dir, force)
    job = _prepare(doc)
    with exclusive_lock(out, "report folder"):
        out = _output_dir(out_dir, force)  # again, now that no one else writes it
        name, parent = out.resolve().name, out.resolve().parent
        for stale in parent.glob(f".{glob.escape(name)}.*.partial"):  # left by a killed run
            shutil.rmtree(stale, ignore_errors=True)
        try:
            tmp = Path(tempfile.mkdtemp(prefix=f".{name}.", suffix=".partial", dir=parent))
        except OSError as exc:
            raise NanoabsError(f"output folder {str(out)!r}: cannot write beside it ({exc.__class__.__name__})") \
                from None
        try:
            rep = _Report(tmp, [], [], job["fmts"])
            _write_report(job, rep, progress)
            out.mkdir(exist_ok=True)
            for f in sorted(tmp.iterdir()):
                os.replace(f, out / f.name)
        except OSError as exc:
            raise NanoabsError(f"output folder {str(out)!r}: cannot write the report ({exc.__class__.__name__}: "
                               f"{exc.strerror or exc})") from None
        finally:
            shutil.rmtree(tmp, ignore_errors=True)
    return out / "summary.md"


def _write_report(job, rep, progress):
    from .export import write_file_atomic
    from .hotcarriers import SAFETY_CAUTION

    doc, wl, barrier = job["doc"], job["wl"], job["barrier"]
    s = doc["study"]
    L = rep.lines
    L += [f"# {s['title']}", ""]
    if s.get("lab"):
        L += [f"*{s['lab']}*", ""]
    if s.get("description"):
        L += [s["description"].strip(), ""]
    L += [_where_line(job), f"- wavelengths: {wl[0]:g}–{wl[-1]:g} nm ({wl.size} points)",
          f"- illumination: {job['illum'].description}",
          f"- Schottky barrier: {barrier[0]:g} eV ({barrier[1]}); photoemission cut-off hc/φ_B = "
          f"{HC_EV_NM / barrier[0]:.0f} nm" if barrier[0] else "- Schottky barrier: —",
          ""]
    if job["particles"]:
        _particles_section(job, rep)
    for sw in job["sweeps"]:
        _sweep_section(job, sw, rep, progress)
    if job["search"]:
        _search_section(job, rep, progress)
    if job["figures"] and barrier[0]:
        _yield_figure(job, rep)
    L += _data_sources(job)
    L += ["## Cautions", "", " ".join(SAFETY_CAUTION.split()), "",
          "These are model estimates (sparse arrays, isolated-particle heating, energy-resolved escape-cone and "
          "surface emission) for "
          "comparing designs; they do not replace measurement or a safety review.", "",
          "## Files", ""] + [f"- `{f}`" for f in sorted(set(rep.files))]
    text = "\n".join(L) + "\n"
    write_file_atomic(rep.path("summary.md"), lambda fh: fh.write(text), force=True)


def _where_short(job) -> str:
    """A few words for figure titles: the host, or the substrate and how the device is lit."""
    env = job["env"]
    if env is None:
        return f"in {job['medium'].name}"
    d = {k: str(v).split(" (")[0] for k, v in env.describe().items()}  # names without dataset keys
    where = f"in {d['substrate']}" if d["kind"] == "buried" else f"on {d['substrate']} under {d['superstrate']}"
    return f"{where}, lit from the {d['incidence']}"


def _where_line(job) -> str:
    """One line saying where the particles sit and how cross-sections are referred."""
    env = job["env"]
    if env is None:
        return f"- medium: {job['medium'].label}"
    d = env.describe()
    place = (f"{d['depth_nm']:g} nm deep in {d['substrate']}" if d["kind"] == "buried" else
             f"on {d['substrate']}" + (f" with a {d['spacer']['thickness_nm']:g} nm {d['spacer']['material']} "
                                       "spacer" if d.get("spacer") else "") +
             f", {d['gap_nm']:g} nm gap, in {d['superstrate']}")
    light = "from the front (superstrate side)" if d["incidence"] == "front" else "through the substrate (back)"
    return (f"- environment: particles {place}; lit {light} at {d['angle_deg']:g}°. Cross-sections and "
            "responsivities are per irradiance of the incident light in the incidence medium (external), "
            "the reflection at the surface included")


def _data_sources(job) -> list:
    """'## Data sources': the citation of every optical-constant dataset the study used."""
    found = {}

    def visit(obj, depth=0):
        if depth > 4:
            return
        if hasattr(obj, "layer_materials"):
            for m in obj.layer_materials():
                visit(m, depth + 1)
        elif hasattr(obj, "permittivity") and callable(getattr(obj, "metadata", None)):
            meta = obj.metadata()
            if isinstance(meta, dict) and meta.get("reference"):
                found.setdefault(obj.label, meta)
        elif isinstance(obj, dict):
            for v in obj.values():
                visit(v, depth + 1)
        elif isinstance(obj, (list, tuple)):
            for v in obj:
                visit(v, depth + 1)

    visit(job)
    if not found:
        return []
    lines = ["## Data sources", ""]
    for label, meta in sorted(found.items()):
        doi = f" doi:{meta['doi']}" if meta.get("doi") else ""
        lines.append(f"- {label}: {meta['reference']}.{doi} {meta.get('dataset', '')}".rstrip())
    return lines + [""]


def _particles_section(job, rep):
    from .detector import hot_carrier_estimate
    from .optics import spectrum
    from .plotting import plot_curves, plot_spectra

    wl, det, L = job["wl"], job["det"], rep.lines
    L += ["## Candidate particles", "",
          "| particle | method | peak [nm] | FWHM [nm] | peak σ_abs [m²] | σ_abs/σ_ext at peak | "
          "photocurrent per particle [A] | external responsivity [mA/W] | ΔT [K] |",
          "|---|---|---|---|---|---|---|---|---|"]
    curves, warn_lines, resp_curves = [], [], []
    for t, p, stem in job["particles"]:
        spec = spectrum(p, wl, **job["where"], method=t.get("method", "auto"),
                        polarization=t.get("polarization", "x" if t["shape"] in ("sphere", "shell", "ellipsoid")
                                           else "long"),
                        surface_damping=t.get("surface_damping", True))
        res = hot_carrier_estimate(spec, p, job["illum"], barrier_eV=job["barrier"][0], carrier=job["carrier"],
                                   fermi_energy_eV=det.get("fermi_energy_eV"),
                                   attenuation_length_nm=det.get("attenuation_length_nm"),
                                   yield_model=det.get("yield_model", "escape-cone"),
                                   surface_emission=det.get("surface_emission", "field"),
                                   fermi_smearing=det.get("fermi_smearing", False),
                                   temperature_K=det.get("temperature_K", 300.0),
                                   momentum_factor=det.get("momentum_factor", 1.0),
                                   contact_fraction=det.get("contact_fraction", 1.0),
                                   density_per_um2=det.get("density_per_um2"),
                                   thermal_conductivity_W_mK=job["kappa"])
        job.setdefault("hc_results", []).append((t["name"], res))
        rep.add(res.write(rep.path(f"{stem}_hot_carriers.csv"))[0])
        rep.add(rep.path(f"{stem}_hot_carriers.json"))
        spec.write(rep.path(f"{stem}_spectrum.csv"))
        rep.add(rep.path(f"{stem}_spectrum.csv"))
        rep.add(rep.path(f"{stem}_spectrum.json"))
        sm = spec.summary()
        tot = res.totals
        cur = tot.get("photocurrent_A", tot.get("peak_photocurrent_A"))
        dT = tot.get("temperature_rise_K")
        resp = tot.get("band_responsivity_A_W", tot.get("peak_responsivity_A_W"))
        peak = _f(sm["peak_wavelength_nm"], ".0f") if sm["peak_status"] == "peak" else sm["peak_status"]
        L.append(f"| {t['name']} | {spec.metadata['method']} | {peak} | "
                 f"{_f(sm['fwhm_nm'], '.0f')} | {sm['peak_sigma_abs_m2']:.3g} | "
                 f"{sm['absorbed_fraction_at_peak']:.2f} | {cur:.3g} | "
                 f"{_f(None if resp is None else resp * 1e3, '.3g')} | {_f(dT, '.2g')} |")
        curves.append((t["name"], wl, spec.sigma_abs_m2))
        if "responsivity_A_W" in res.frame:
            resp_curves.append((t["name"], res.frame["responsivity_A_W"].to_numpy()))
        for w in res.metadata.get("warnings", []):
            warn_lines.append(f"- {t['name']}: {w}")
    L.append("")
    if warn_lines:
        L += ["Warnings:", ""] + warn_lines + [""]
    L += ["Photocurrent per particle: band-integrated for a broadband source, at the absorption peak "
          "for a monochromatic one. External responsivity: of the particle array per light incident on the "
          "device (band average for a broadband source, peak for a monochromatic one). ΔT: steady state of "
          "one isolated particle.", ""]
    if job["figures"]:
        band = job["doc"].get("search", {}).get("band_nm")
        rep.figure(plot_spectra(curves, ylabel="absorption cross-section [nm²]", scale=1e18,
                                band=band, title=f"candidate particles, {_where_short(job)}"), "spectra")
        if resp_curves:
            cut = HC_EV_NM / job["barrier"][0] if job["barrier"][0] else None
            fig = plot_curves(wl, [(n, r * 1e3) for n, r in resp_curves], xlabel="wavelength [nm]",
                              ylabel="external array responsivity [mA/W]",
                              title=f"{det.get('density_per_um2')} particles per µm² (sparse-array estimate)")
            ax = fig.axes[0]
            if band:
                ax.axvspan(band[0], band[1], color="0.9", zorder=0, label="target band")
            if cut and wl[0] <= cut <= wl[-1]:
                ax.axvline(cut, color="0.3", ls="--", lw=1, label=f"cut-off hc/φ_B = {cut:.0f} nm")
            ax.legend(frameon=False, fontsize=8)
            rep.figure(fig, "responsivity")


#: Designs drawn in a study sweep's map at most (every k-th design beyond that).
_MAP_ROWS = 400


def _sweep_reduced(path, param, n, wl, band):
    """Per design, sorted by the parameter: value, σ_abs peak wavelength, band-mean σ_abs; the map rows.

    Streams the sweep's CSV in blocks of whole designs, so memory does not grow with the
    sweep; the map keeps every ``step``-th of the ``n`` designs (at most ``_MAP_ROWS``).
    """
    import pandas as pd

    W = wl.size
    inb = (wl >= band[0]) & (wl <= band[1]) if band else np.zeros(W, bool)
    step = max(1, -(-n // _MAP_ROWS))
    vals, peaks, foms, map_ids, map_rows = [], [], [], [], []
    for chunk in pd.read_csv(path, usecols=["design_id", param, "sigma_abs_m2"], chunksize=W * 512,
                             float_precision="round_trip"):
        sa = chunk["sigma_abs_m2"].to_numpy(dtype=float).reshape(-1, W)
        ids = chunk["design_id"].to_numpy()[::W]
        vals.append(chunk[param].to_numpy(dtype=float)[::W])
        j = np.argmax(sa, axis=1)  # a maximum on the window edge is not a peak (NaN)
        peaks.append(np.where((j > 0) & (j < wl.size - 1), wl[j], np.nan))
        foms.append(sa[:, inb].mean(axis=1) if inb.any() else np.full(ids.size, np.nan))
        map_ids.append(ids[ids % step == 0])
        map_rows.append(sa[ids % step == 0])
    v = np.concatenate(vals)  # design ids run 0..n-1 in the order of the values
    order = np.argsort(v, kind="stable")
    mv = v[np.concatenate(map_ids)]
    mo = np.argsort(mv, kind="stable")
    fom = np.concatenate(foms)[order] if inb.any() else None
    return v[order], np.concatenate(peaks)[order], fom, mv[mo], np.concatenate(map_rows)[mo], step


def _sweep_section(job, sw, rep, progress):
    from .design import sweep
    from .plotting import plot_curves, plot_map

    t, stem, param, wl, L = sw["t"], sw["stem"], sw["param"], job["wl"], rep.lines
    band = job["doc"].get("search", {}).get("band_nm")
    path = rep.path(f"{stem}_sweep.csv")
    # streamed: the table is never held in memory, whatever its size
    sweep(sw["shape"], sw["params"], wl, progress=progress, out=path, memory_budget_MB=1e-9, **sw["kw"])
    rep.add(path)
    rep.add(rep.path(f"{stem}_sweep.json"))
    vals, peaks, fom, map_vals, grid, step = _sweep_reduced(path, param, len(t["values_nm"]), wl, band)
    L += [f"## Sweep: {t['name']}", "",
          f"{param} from {vals.min():g} to {vals.max():g} nm ({vals.size} values); {_peak_words(peaks, wl)}. "
          f"Data: `{stem}_sweep.csv`.", ""]
    if band and fom is not None:
        best = vals[int(np.argmax(fom))]
        L[-1:-1] = [f"Band-averaged σ_abs over {band[0]:g}–{band[1]:g} nm is largest at "
                    f"{param} = {best:g} nm ({fom.max():.3g} m²).", ""]
    if not job["figures"]:
        return
    if band and fom is not None:
        rep.figure(plot_curves(vals, [("band-averaged σ_abs", fom * 1e18)],
                               xlabel=param.replace("_nm", " [nm]"), ylabel="band-averaged σ_abs [nm²]",
                               title=f"{t['name']}: figure of merit in {band[0]:g}–{band[1]:g} nm"),
                   f"{stem}_merit")
    title = t["name"] + (f" (every {step}th of {vals.size} designs)" if step > 1 else "")
    rep.figure(plot_map(wl, map_vals, grid * 1e18, param_label=param.replace("_nm", " [nm]"),
                        value_label="absorption cross-section [nm²]", band=band, title=title), f"{stem}_map")


def _peak_words(peaks, wl) -> str:
    """How the absorption peak moves over a sweep, without calling a window-edge maximum a peak."""
    def one(p):
        return f"{p:.0f} nm" if p == p else "beyond the window"
    inside = int(np.sum(np.isfinite(peaks)))
    text = f"absorption peak from {one(peaks[0])} to {one(peaks[-1])}"
    if inside < len(peaks):
        text += (f" ({len(peaks) - inside} of {len(peaks)} designs have no peak inside "
                 f"{wl[0]:g}-{wl[-1]:g} nm: their absorption rises beyond the window)")
    return text


def _search_section(job, rep, progress):
    from .design import search, write as write_table

    b, sd = job["search"]["band"], job["search"]["sd"]
    ranked = search(b, progress=progress, **job["search"]["kw"])
    ranked.attrs["metadata"] = {**(ranked.attrs.get("metadata") or {}), "study_search": dict(sd)}
    write_table(ranked, rep.path("ranked_designs.csv"))
    rep.add(rep.path("ranked_designs.csv"))
    rep.add(rep.path("ranked_designs.json"))
    rep.lines.extend([f"## Ranked designs for {b[0]:g}–{b[1]:g} nm", "",
                      f"Objective: {sd.get('objective', 'absorbed_fraction')}. Full table: `ranked_designs.csv`.",
                      ""] + _ranked_table(ranked.head(int(sd.get("top", 10)))) + [""])


def _yield_figure(job, rep):
    """Emission probability per absorbed photon from the energy-resolved pipeline: for every candidate
    particle its total (volume + surface) and surface parts (nanoabs.hot_carrier_estimate); for a study
    with a search only, the search's size-independent screen per metal."""
    from .design._search import _screening_yield
    from .carriers import fermi_energy
    from .materials import material
    from .plotting import plot_curves

    doc, det, wl, barrier = job["doc"], job["det"], job["wl"], job["barrier"]
    curves = []
    for name, res in job.get("hc_results", []):
        f = res.frame
        gamma = f["absorbed_photon_rate_per_s"].to_numpy()
        carrier = res.metadata["schottky"]["carrier"]
        with np.errstate(divide="ignore", invalid="ignore"):
            tot = np.where(gamma > 0, f[f"injected_{carrier}_rate_per_s"].to_numpy() / gamma, np.nan)
            surf = np.where(gamma > 0, f[f"injected_{carrier}_rate_surface_per_s"].to_numpy() / gamma, np.nan)
        curves.append((f"{name}: volume + surface", tot))
        if np.any(surf > 0):
            curves.append((f"{name}: surface", surf))
    title = f"internal photoemission over a {barrier[0]:g} eV barrier (energy-resolved estimate)"
    if not curves and doc.get("search"):
        for m in dict.fromkeys(material(m).name for m in doc["search"].get("materials", ["Au"])):
            ef = det.get("fermi_energy_eV")
            try:
                ef = float(ef) if ef is not None else fermi_energy(m).value
            except NanoabsError:
                continue
            curves.append((f"{m} (search screen: band edges, 1 - c^3, no attenuation)",
                           _screening_yield(material(m), wl, barrier[0], ef, job["carrier"])))
    if curves:
        rep.figure(plot_curves(wl, curves, xlabel="wavelength [nm]", ylabel="emission probability per absorbed photon",
                               title=title, logy=bool(job["doc"].get("output", {}).get("log_emission", True))),
                   "emission_probability")
    else:
        rep.lines.extend(["Emission-probability figure not drawn: no metal of this study has a tabulated Fermi "
                          "energy (give detector.fermi_energy_eV).", ""])


def _f(v, fmt):
    return "—" if v is None or (isinstance(v, float) and v != v) else format(v, fmt)


def _ranked_table(df):
    """Compact Markdown view of a ranked-design table: only the parameters each family uses."""
    out = ["| rank | design | peak [nm] | FWHM [nm] | figure of merit | σ_abs/σ_ext | peak shift per +1 nm |",
           "|---|---|---|---|---|---|---|"]
    names = [("radius_nm", "r"), ("core_radius_nm", "core r"), ("thickness_nm", "shell"),
             ("length_nm", "length"), ("diameter_nm", "diameter")]
    for i, (_, r) in enumerate(df.iterrows(), 1):
        geo = ", ".join(f"{lab} {r[c]:.1f} nm" for c, lab in names if c in r and r[c] == r[c])
        core = f"{r['core_material']}/" if r.get("core_material") else ""
        sens = ", ".join(f"{lab} {r['dpeak_d_' + c]:+.1f}" for c, lab in names
                         if f"dpeak_d_{c}" in r and r[f"dpeak_d_{c}"] == r[f"dpeak_d_{c}"])
        out.append(f"| {int(r.get('rank', i))} | {r['family']} {core}{r['material']}: {geo} | "
                   f"{_f(r['peak_wavelength_nm'], '.0f')} | {_f(r['fwhm_nm'], '.0f')} | "
                   f"{r['figure_of_merit']:.4g} | {r['absorbed_fraction']:.2f} | {sens} |")
    fom = df.attrs.get("figure_of_merit", {})
    if fom:
        out += ["", f"Figure of merit: {fom.get('name', '')} [{fom.get('unit', '')}]. The peak shift is "
                    "d(peak wavelength)/d(parameter) in nm per nm."]
    return out


def main_demo(out_dir, *, force=False):  # pragma: no cover - thin CLI hook
    return run_study(demo_study_path(), out_dir, force=force, progress=sys.stderr.isatty())
