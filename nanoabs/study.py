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

import sys
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
    "wavelengths": {"start_nm": (_NUM, True), "stop_nm": (_NUM, True), "step_nm": (_NUM, True)},
    "illumination": {"kind": (str, True), "spectrum": (str, False), "irradiance_W_m2": (_NUM, False),
                     "power_W": (_NUM, False), "beam_radius_nm": (_NUM, False),
                     "temperature_K": (_NUM, False), "total_irradiance_W_m2": (_NUM, False),
                     "value_W_m2_nm": (_NUM, False), "file": (str, False), "band_nm": (list, False)},
    "detector": {"barrier_eV": (_NUM, False), "schottky": (str, False), "fermi_energy_eV": (_NUM, False),
                 "attenuation_length_nm": (_NUM, False), "density_per_um2": (_NUM, False),
                 "momentum_factor": (_NUM, False), "contact_fraction": (_NUM, False),
                 "yield_model": (str, False)},
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
    "output": {"figures": (bool, False), "formats": (list, False)},
}
_LISTS = {"particle", "sweep"}  # arrays of tables
_SHAPES = ["sphere", "shell", "spheroid", "ellipsoid"]
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
        return tomllib.loads(raw.decode("utf-8"))
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
            raise DataError(f"study key {where}.{key} = {value!r}: must be a {tname}")
    for key, (_, required) in spec.items():
        if required and key not in table:
            raise DataError(f"study key {where}.{key} is required")


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
    if not (0 < w["start_nm"] < w["stop_nm"]) or not (0 < w["step_nm"] <= w["stop_nm"] - w["start_nm"]):
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


def _wavelengths(doc):
    w = doc["wavelengths"]
    n = int(np.floor((w["stop_nm"] - w["start_nm"]) / w["step_nm"] + 1e-9)) + 1
    if n > 200_000:
        raise DataError(f"study wavelengths: {n} points; at most 200000 allowed")
    return w["start_nm"] + w["step_nm"] * np.arange(n)


def _medium(doc):
    from .materials import material

    m = doc.get("medium", {})
    if "index" in m and "name" in m:
        raise DataError("study keys medium.name and medium.index are exclusive: give one")
    if "index" in m:
        return material(float(m["index"]))
    return material(m.get("name", "water"))


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
        src = il.from_csv(f)
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
    axes = t.get("semi_axes_nm")
    if not isinstance(axes, list) or len(axes) != 3:
        raise DataError(f"study key {t['name']!r}: semi_axes_nm must be [a, b, c] in nm")
    return Ellipsoid(mat("material"), [float(a) for a in axes], shell)


@dataclass
class _Report:
    out: Path
    force: bool
    files: list
    lines: list

    def path(self, name):
        return self.out / name

    def add(self, p):
        self.files.append(Path(p).name)


def _slug(text):
    keep = "".join(c if c.isalnum() else "_" for c in text.lower())
    return "_".join(p for p in keep.split("_") if p)[:40] or "item"


def run_study(path_or_doc, out_dir, *, force: bool = False, progress: bool = True) -> Path:
    """Run a study and write the report folder; returns the path of ``summary.md``.

    Nothing is written until the study has been validated and the output folder
    checked: an existing non-empty folder needs ``force``. Each file is written
    atomically.
    """
    from .detector import hot_carrier_estimate
    from .hotcarriers import SAFETY_CAUTION
    from .materials import material
    from .optics import spectrum
    from .plotting import plot_curves, plot_map, plot_spectra, save_figure

    doc = path_or_doc if isinstance(path_or_doc, dict) else load_study(path_or_doc)
    out = Path(out_dir)
    if out.exists() and any(out.iterdir()) and not force:
        raise NanoabsError(f"output folder {str(out)!r} exists and is not empty: pass force=True (CLI: --force) "
                           "or choose another folder")
    if not out.parent.exists():
        raise NanoabsError(f"output folder parent {str(out.parent)!r} does not exist")
    wl = _wavelengths(doc)
    medium = _medium(doc)
    illum = _illumination(doc)
    det = doc.get("detector", {})
    figures = doc.get("output", {}).get("figures", True)
    fmts = doc.get("output", {}).get("formats", ["png"])
    for f in fmts:
        if f not in ("png", "svg"):
            raise DataError(f"study key output.formats contains {f!r}: allowed: png, svg")
    # build every particle first so that input errors surface before anything is written
    particles = [(t, _particle(t)) for t in doc.get("particle", [])]
    barrier = _barrier(doc) if (particles or doc.get("search")) else (None, None)
    out.mkdir(exist_ok=True)
    rep = _Report(out, force, [], [])
    kappa = doc.get("medium", {}).get("thermal_conductivity_W_mK")

    s = doc["study"]
    L = rep.lines
    L += [f"# {s['title']}", ""]
    if s.get("lab"):
        L += [f"*{s['lab']}*", ""]
    if s.get("description"):
        L += [s["description"].strip(), ""]
    L += [f"- medium: {medium.label}", f"- wavelengths: {wl[0]:g}–{wl[-1]:g} nm ({wl.size} points)",
          f"- illumination: {illum.description}",
          f"- Schottky barrier: {barrier[0]:g} eV ({barrier[1]}); photoemission cut-off hc/φ_B = "
          f"{HC_EV_NM / barrier[0]:.0f} nm" if barrier[0] else "- Schottky barrier: —",
          ""]

    def figsave(fig, stem):
        for f in fmts:
            p = save_figure(fig, rep.path(f"{stem}.{f}"), force=force)
            rep.add(p)

    # 1. particles -----------------------------------------------------------
    if particles:
        L += ["## Candidate particles", "",
              "| particle | method | peak [nm] | FWHM [nm] | peak σ_abs [m²] | σ_abs/σ_ext at peak | "
              "photocurrent per particle [A] | ΔT [K] |", "|---|---|---|---|---|---|---|---|"]
        curves, warn_lines, resp_curves = [], [], []
        for t, p in particles:
            spec = spectrum(p, wl, medium=medium, method=t.get("method", "auto"),
                            polarization=t.get("polarization", "long" if t["shape"] == "spheroid" else "x"),
                            surface_damping=t.get("surface_damping", True))
            res = hot_carrier_estimate(spec, p, illum, barrier_eV=barrier[0],
                                       fermi_energy_eV=det.get("fermi_energy_eV"),
                                       attenuation_length_nm=det.get("attenuation_length_nm"),
                                       yield_model=det.get("yield_model", "escape-cone"),
                                       momentum_factor=det.get("momentum_factor", 1.0),
                                       contact_fraction=det.get("contact_fraction", 1.0),
                                       density_per_um2=det.get("density_per_um2"),
                                       thermal_conductivity_W_mK=kappa)
            stem = _slug(t["name"])
            rep.add(res.write(rep.path(f"{stem}_hot_carriers.csv"), force=force)[0])
            rep.add(rep.path(f"{stem}_hot_carriers.json"))
            spec.write(rep.path(f"{stem}_spectrum.csv"), force=force)
            rep.add(rep.path(f"{stem}_spectrum.csv"))
            rep.add(rep.path(f"{stem}_spectrum.json"))
            sm = spec.summary()
            tot = res.totals
            cur = tot.get("photocurrent_A", tot.get("peak_photocurrent_A"))
            dT = tot.get("temperature_rise_K")
            L.append(f"| {t['name']} | {spec.metadata['method']} | {sm['peak_wavelength_nm']:.0f} | "
                     f"{_f(sm['fwhm_nm'], '.0f')} | {sm['peak_sigma_abs_m2']:.3g} | "
                     f"{sm['absorbed_fraction_at_peak']:.2f} | {cur:.3g} | {_f(dT, '.2g')} |")
            curves.append((t["name"], wl, spec.sigma_abs_m2))
            if "responsivity_A_W" in res.frame:
                resp_curves.append((t["name"], res.frame["responsivity_A_W"].to_numpy()))
            for w in res.metadata.get("warnings", []):
                warn_lines.append(f"- {t['name']}: {w}")
        L.append("")
        if warn_lines:
            L += ["Warnings:", ""] + warn_lines + [""]
        L += ["Photocurrent per particle: band-integrated for a broadband source, at the absorption peak "
              "for a monochromatic one; ΔT: steady state of one isolated particle.", ""]
        if figures:
            band = doc.get("search", {}).get("band_nm")
            figsave(plot_spectra(curves, ylabel="absorption cross-section [nm²]", scale=1e18,
                                 band=band, title="candidate particles"), "spectra")
            if resp_curves:
                figsave(plot_curves(wl, resp_curves, xlabel="wavelength [nm]", ylabel="array responsivity [A/W]",
                                    title=f"{det.get('density_per_um2')} particles per µm² (sparse-array estimate)"),
                        "responsivity")

    # 2. sweeps --------------------------------------------------------------
    for t in doc.get("sweep", []):
        from .design import sweep

        vals = np.asarray(t["values_nm"], dtype=float)
        base = {k: t[k] for k in ("radius_nm", "core_radius_nm", "thickness_nm", "length_nm", "diameter_nm")
                if k in t}
        param = t["parameter"]
        base.pop(param, None)
        params = {param: vals}
        for k, v in base.items():
            params[k] = np.array([float(v)])
        kw = {"material": t.get("material", "Au"), "medium": medium}
        if t["shape"] == "shell":
            kw = {"core": t.get("core", "SiO2"), "shell": t.get("shell", "Au"), "medium": medium}
        if "polarization" in t:
            kw["polarization"] = t["polarization"]
        stem = _slug(t["name"])
        res = sweep(t["shape"], params, wl, progress=progress, out=rep.path(f"{stem}_sweep.csv"),
                    force=force, **kw)
        rep.add(rep.path(f"{stem}_sweep.csv"))
        rep.add(rep.path(f"{stem}_sweep.json"))
        frame = res if hasattr(res, "columns") else None
        if frame is None:
            from .export import read_export

            frame, _ = read_export(rep.path(f"{stem}_sweep.csv"))
        pcol = [c for c in frame.columns if c.startswith(param.replace("_nm", ""))][0]
        grid = frame.pivot_table(index=pcol, columns="wavelength_nm", values="sigma_abs_m2").sort_index()
        peaks = grid.columns.values[np.argmax(grid.values, axis=1)]
        L += [f"## Sweep: {t['name']}", "",
              f"{param} from {vals.min():g} to {vals.max():g} nm ({vals.size} values); absorption peak moves "
              f"from {peaks[0]:.0f} nm to {peaks[-1]:.0f} nm. Data: `{stem}_sweep.csv`.", ""]
        band = doc.get("search", {}).get("band_nm")
        if band:
            inb = (grid.columns.values >= band[0]) & (grid.columns.values <= band[1])
            fom = grid.values[:, inb].mean(axis=1)
            best = grid.index.values[int(np.argmax(fom))]
            L.insert(len(L) - 1, f"Band-averaged σ_abs over {band[0]:g}–{band[1]:g} nm is largest at "
                                 f"{param} = {best:g} nm ({fom.max():.3g} m²).")
            L.insert(len(L) - 1, "")
        if figures and band:
            figsave(plot_curves(grid.index.values, [("band-averaged σ_abs", fom * 1e18)],
                                xlabel=param.replace("_nm", " [nm]"), ylabel="band-averaged σ_abs [nm²]",
                                title=f"{t['name']}: figure of merit in {band[0]:g}–{band[1]:g} nm"),
                    f"{stem}_merit")
        if figures:
            figsave(plot_map(grid.columns.values, grid.index.values, grid.values * 1e18,
                             param_label=param.replace("_nm", " [nm]"),
                             value_label="absorption cross-section [nm²]",
                             band=doc.get("search", {}).get("band_nm"), title=t["name"]), f"{stem}_map")

    # 3. search --------------------------------------------------------------
    if doc.get("search"):
        from .design import search

        sd = doc["search"]
        b = sd["band_nm"]
        if len(b) != 2 or not all(isinstance(v, _NUM) for v in b) or not b[0] < b[1]:
            raise DataError(f"study key search.band_nm = {b!r}: must be [low, high] in nm with low < high")
        ranked = search((float(b[0]), float(b[1])), families=sd.get("families", ["sphere", "shell", "rod"]),
                        objective=sd.get("objective", "absorbed_fraction"),
                        materials=sd.get("materials", ["Au"]), medium=medium,
                        illumination=illum, barrier_eV=barrier[0],
                        max_size_nm=sd.get("max_size_nm", 200.0), min_shell_nm=sd.get("min_shell_nm", 5.0),
                        top=int(sd.get("top", 10)), progress=progress)
        from .design import write as write_table

        ranked.attrs["metadata"] = {**(ranked.attrs.get("metadata") or {}), "study_search": dict(sd)}
        write_table(ranked, rep.path("ranked_designs.csv"), force=force)
        rep.add(rep.path("ranked_designs.csv"))
        rep.add(rep.path("ranked_designs.json"))
        L += [f"## Ranked designs for {b[0]:g}–{b[1]:g} nm", "",
              f"Objective: {sd.get('objective', 'absorbed_fraction')}. Full table: `ranked_designs.csv`.", ""]
        L += _ranked_table(ranked.head(int(sd.get("top", 10))))
        L.append("")

    # 4. yield curve: one pair of curves per metal of the study (each has its own E_F) -------
    if figures and barrier[0]:
        from .detector import _main_metal
        from .hotcarriers import FREE_ELECTRON, escape_cone_yield, fowler_yield, photon_energy_eV

        names = [_main_metal(p).name for _, p in particles]
        if doc.get("search"):
            names += [material(m).name for m in doc["search"].get("materials", ["Au"])]
        E = photon_energy_eV(wl)
        if det.get("fermi_energy_eV") is not None:
            fermi = [("", float(det["fermi_energy_eV"]))]
        else:
            fermi = [(n, FREE_ELECTRON[n].fermi_energy_eV) for n in dict.fromkeys(names) if n in FREE_ELECTRON]
        curves = []
        for name, ef in fermi:
            tag = f"{name}, E_F = {ef:g} eV" if name else f"E_F = {ef:g} eV"
            curves += [(f"escape-cone integral ({tag})", escape_cone_yield(E, barrier[0], ef)),
                       (f"Fowler small-excess form ({tag})", fowler_yield(E, barrier[0], ef))]
        if curves:
            figsave(plot_curves(wl, curves, xlabel="wavelength [nm]",
                                ylabel="emission probability per absorbed photon",
                                title=f"internal photoemission over a {barrier[0]:g} eV barrier"),
                    "emission_probability")
        else:
            L += ["Emission-probability figure not drawn: no metal of this study has tabulated "
                  "free-electron data (give detector.fermi_energy_eV).", ""]

    L += ["## Cautions", "", " ".join(SAFETY_CAUTION.split()), "",
          "These are model estimates (sparse arrays, isolated-particle heating, escape-cone emission) for "
          "comparing designs; they do not replace measurement or a safety review.", "",
          "## Files", ""] + [f"- `{f}`" for f in sorted(set(rep.files))]
    from .export import write_file_atomic

    text = "\n".join(L) + "\n"
    summary = write_file_atomic(rep.path("summary.md"), lambda fh: fh.write(text), force=force)
    return summary


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
