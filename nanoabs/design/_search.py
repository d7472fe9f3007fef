"""Band-targeted search: ranked particle designs for a figure of merit averaged over a band."""

from __future__ import annotations

import contextlib
import math
import warnings as _warnings
from collections.abc import Mapping
from functools import partial

import numpy as np

from .. import _compiled_mie
from .._version import version as _package_version
from .._errors import NanoabsError, check_choice, check_finite_array, suggest
from ..optics import METHODS, Spectrum, _peak
from ..particles import MONOLAYER_NM
from ..validity import NanoabsWarning
from ._designs import SWEEP_AUTO, is_environment, _evaluate, _material_label, _material_list, _material_meta, _resolve_material, check_flag
from ._engine import NoBar, collapse, map_ordered, progress_bar, thread_pool, unique
from ._sweep import _TEXT_UNIT

#: Particle families of :func:`search`.
FAMILIES = ("sphere", "shell", "rod", "disc", "cylinder", "capped-rod")
#: Figures of merit of :func:`search`.
OBJECTIVES = ("sigma_abs", "sigma_abs_per_volume", "q_abs", "absorbed_fraction", "injection", "selectivity")
#: How the figures of merit of several bands combine into one.
COMBINE = ("worst", "mean")

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
        c, w = _two_numbers(center_nm=center_nm, width_nm=width_nm)
        if w <= 0:
            raise NanoabsError(f"width_nm = {w:g} nm: must be > 0")
        lo, hi = c - w / 2, c + w / 2
    else:
        lo, hi = _two_numbers(lo_nm=lo_nm, hi_nm=hi_nm)
    if lo <= 0:
        raise NanoabsError(f"band lower edge = {lo:g} nm: must be > 0")
    if hi <= lo:
        raise NanoabsError(f"band upper edge = {hi:g} nm: must be above the lower edge {lo:g} nm")
    return lo, hi


def _two_numbers(**given):
    """The two keyword values as finite floats; both must be given."""
    if any(v is None for v in given.values()):
        raise NanoabsError(f"band: give both {' and '.join(given)}")
    return tuple(float(check_finite_array(k, v)[0]) for k, v in given.items())


_FAMILY_SHAPE = {"sphere": "sphere", "shell": "shell", "rod": "spheroid", "disc": "spheroid",
                 "cylinder": "cylinder", "capped-rod": "capped-rod"}
_FAMILY_VARS = {"sphere": ("radius_nm",), "shell": ("core_radius_nm", "thickness_nm"),
                "rod": ("aspect_ratio", "diameter_nm"), "disc": ("aspect_ratio", "diameter_nm"),
                "cylinder": ("aspect_ratio", "diameter_nm"), "capped-rod": ("aspect_ratio", "diameter_nm")}
_FAMILY_DIMS = {"sphere": ("radius_nm",), "shell": ("core_radius_nm", "thickness_nm"),
                "rod": ("length_nm", "diameter_nm"), "disc": ("length_nm", "diameter_nm"),
                "cylinder": ("length_nm", "diameter_nm"), "capped-rod": ("length_nm", "diameter_nm")}
_GRID = {"sphere": (64,), "shell": (18, 18), "rod": (32, 8), "disc": (24, 10), "cylinder": (32, 8),
         "capped-rod": (32, 8)}
#: Rods with edges (T-matrix bodies): the coarse stage evaluates a stand-in spheroid of the same aspect
#: ratio and volume with the fast method; the recheck solves the body itself with the T-matrix.
_ROD_BODIES = ("cylinder", "capped-rod")


def _proxy_scale(family, aspect_ratio):
    """Length scale f of the stand-in spheroid (f L, f D) with the body's volume and aspect ratio.

    Volume of the body over that of the spheroid of the same L and D (π L D²/6): a cylinder
    3/2; a capped rod 3/2 − 1/(2 AR) (calculus, from the volumes in :mod:`nanoabs.particles`).
    """
    ratio = 1.5 if family == "cylinder" else 1.5 - 0.5 / np.asarray(aspect_ratio, dtype=float)
    return np.cbrt(ratio)
_FOM_UNITS = {"sigma_abs": "m^2", "sigma_abs_per_volume": "m^-1", "q_abs": "1", "absorbed_fraction": "1",
              "injection": "s^-1", "selectivity": "1"}
_FOM_TEXT = {
    "sigma_abs": "band average of sigma_abs",
    "sigma_abs_per_volume": "band average of sigma_abs per metal volume",
    "q_abs": "band average of Q_abs = sigma_abs / geometric cross-section",
    "absorbed_fraction": "band average of sigma_abs / sigma_ext",
    "injection": "band-integrated injected-carrier rate (electrons or holes, per carrier) per particle from nanoabs.hot_carrier_estimate (energy-"
                 "resolved generation, curved-wall escape with attenuation, surface photoemission; defaults); "
                 "designs are explored with a size-independent screen (band-edge generation with the bulk "
                 "mechanism split, uniform-sphere escape 1 - c^3, no attenuation) and every ranked row is "
                 "recomputed with the pipeline",
    "selectivity": "band average of sigma_abs divided by its average over the rest of the window "
                   "(in-band absorption relative to out-of-band absorption)",
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
    if family in _ROD_BODIES:  # the T-matrix recheck converges up to aspect ratio ~5 (notes/tmatrix.md)
        return {"aspect_ratio": (1.2, 5.0), "diameter_nm": (10.0, max(min(60.0, max_size / 1.2), 10.1))}
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
    if family == "rod" or family in _ROD_BODIES:
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
    """Evaluates a family's designs for the search: spectra, figure of merit per band, peak position.

    ``bands`` is a list of (lo, hi, band grid, injection inputs or None); the spectra are computed
    once on the union of the band grids and a coarse grid over the whole window (for the peak
    position and the out-of-band average of the selectivity objective).
    """

    def __init__(self, family, mat, core, medium, settings, bands, window, objective, combine, peak_in_band):
        self.family, self.mat, self.core, self.medium = family, mat, core, medium
        self.proxy = family in _ROD_BODIES and settings["method"] != "tmatrix"
        self.shape = "spheroid" if self.proxy else _FAMILY_SHAPE[family]
        self.settings, self.bands, self.objective = settings, bands, objective
        self.combine, self.peak_in_band = combine, peak_in_band
        coarse = np.linspace(window[0], window[-1], 161)
        self.grid = np.unique(np.concatenate([coarse] + [b[2] for b in bands]))
        self.band_idx = [np.searchsorted(self.grid, b[2]) for b in bands]
        self.coarse_idx = np.searchsorted(self.grid, coarse)
        self.step = float(coarse[1] - coarse[0])
        in_any = np.zeros(coarse.size, bool)
        for lo, hi, _, _ in bands:
            in_any |= (coarse >= lo) & (coarse <= hi)
        self.out_idx = self.coarse_idx[~in_any]
        self.warnings = set()

    def table(self, g):
        n = len(next(iter(g.values())))
        t = {"design_id": np.arange(n, dtype=np.int64), "material_options": [self.mat],
             "material_code": np.zeros(n, np.int64), "medium_options": [self.medium],
             "medium_code": np.zeros(n, np.int64)}
        if self.shape == "shell":
            t.update(core_material_options=[self.core], core_material_code=np.zeros(n, np.int64))
        t.update({k: np.asarray(v, dtype=float) for k, v in g.items()})
        if self.proxy:
            f = _proxy_scale(self.family, t["aspect_ratio"])
            t.update(length_nm=t["length_nm"] * f, diameter_nm=t["diameter_nm"] * f)
        return t

    def spectra(self, g, wl):
        res = _evaluate(self.shape, self.table(g), wl, self.settings)
        self.warnings.update(res["warnings"])
        return res

    def _band_values(self, res, idx, injection):
        """(objective values on one band's grid, absorbed fraction there)."""
        sa = res["sigma_abs_m2"][:, idx]
        with np.errstate(divide="ignore", invalid="ignore"):
            af = np.where(res["sigma_ext_m2"][:, idx] > 0, sa / res["sigma_ext_m2"][:, idx], np.nan)
            if self.objective in ("sigma_abs", "selectivity"):
                return sa, af
            if self.objective == "sigma_abs_per_volume":
                return sa / res["metal_volume_m3"][:, None], af
            if self.objective == "q_abs":
                return sa / res["geometric_cross_section_m2"][:, idx], af
            if self.objective == "absorbed_fraction":
                return af, af
        E, eta = injection
        return sa * E * (self.grid[idx] * 1e-9) / _HC_J_M * eta, af  # [s^-1 nm^-1]

    def evaluate(self, g, spectra=None):
        """Figures of merit of designs g: dict with the combined value, one per band, the band-average
        absorbed fraction, the coarse peak [nm] and whether it lies in a band.  ``spectra``: the
        result of :meth:`spectra` on ``self.grid`` if already at hand."""
        from scipy.integrate import trapezoid

        res = self.spectra(g, self.grid) if spectra is None else spectra
        per_band, afs = [], []
        for (lo, hi, _, inj), idx in zip(self.bands, self.band_idx):
            y, af = self._band_values(res, idx, inj)
            wl = self.grid[idx]
            scale = 1.0 if self.objective == "injection" else hi - lo
            per_band.append(trapezoid(y, wl, axis=-1) / scale)
            afs.append(trapezoid(af, wl, axis=-1) / (hi - lo))
        per_band = np.stack(per_band, axis=-1)
        if self.objective == "selectivity":
            outside = res["sigma_abs_m2"][:, self.out_idx].mean(axis=-1) if self.out_idx.size else np.nan
            with np.errstate(divide="ignore", invalid="ignore"):
                per_band = per_band / np.asarray(outside)[..., None]
        fom = per_band.min(axis=-1) if self.combine == "worst" else per_band.mean(axis=-1)
        peak, in_band = self._coarse_peak(res["sigma_abs_m2"][:, self.coarse_idx])
        if self.peak_in_band:
            fom = np.where(in_band, fom, -np.inf)
        return {"fom": fom, "per_band": per_band, "absorbed_fraction": np.mean(afs, axis=0),
                "peak_nm": peak, "in_band": in_band, "sigma_abs_m2": res["sigma_abs_m2"]}

    def fom(self, g):
        """(figure of merit, band-average absorbed fraction) of designs g."""
        r = self.evaluate(g)
        return r["fom"], r["absorbed_fraction"]

    def _coarse_peak(self, sa):
        """Peak [nm] on the coarse window grid (NaN at the window edge) and whether it is in a band
        (within one coarse step of a band edge)."""
        coarse = self.grid[self.coarse_idx]
        j = np.argmax(sa, axis=-1)
        peak = np.where((j > 0) & (j < coarse.size - 1), coarse[j], np.nan)
        in_band = np.zeros(peak.shape, bool)
        for lo, hi, _, _ in self.bands:
            in_band |= (peak >= lo - self.step) & (peak <= hi + self.step)
        return peak, in_band


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
        r = None if getattr(m, "extrapolate", False) else getattr(m, "range_nm", None)
        if r is not None:
            out.append((float(r[0]), float(r[1])))
    return out


def search(band_nm, *, families=("sphere", "shell", "rod"), objective="sigma_abs", bounds=None,
           materials=("Au",), core="SiO2", medium="water", illumination=None, barrier_eV=None,
           fermi_energy_eV=None, min_shell_nm=2.0, max_size_nm=150.0, polarization="random",
           method="auto", surface_damping=True, wavelength_nm=None, n_starts=2, top=10, progress=None,
           combine="worst", peak_in_band=True, recheck=True, environment=None, carrier="electron"):
    """Rank particle designs by a figure of merit averaged over one or several target bands.

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
    band_nm : (float, float) or sequence of them
        Target band edges [nm] (see :func:`band` for centre/width); several bands (e.g.
        ``[(1260, 1360), (1530, 1565)]``) are scored separately and combined by ``combine``.
    families : sequence of {"sphere", "shell", "rod", "disc", "cylinder", "capped-rod"}, keyword-only
        "sphere": radius; "shell": dielectric core radius + metal shell
        thickness; "rod": prolate spheroid (aspect ratio length/diameter ≥ 1,
        diameter); "disc": oblate spheroid (aspect ratio thickness/diameter < 1,
        diameter); "cylinder", "capped-rod": flat-ended or hemisphere-capped rods
        (aspect ratio ≥ 1, diameter).  With ``method="auto"`` (or any method but
        "tmatrix") the coarse stage evaluates these two with a stand-in: the spheroid of
        the same aspect ratio and volume (validity code ``spheroid-stand-in``); the
        recheck solves the rod itself with the T-matrix.
    objective : str, keyword-only
        Figure of merit, always over the band: "sigma_abs" (band average of
        σ_abs [m²]), "sigma_abs_per_volume" (band average of σ_abs per metal
        volume [m⁻¹]), "q_abs" (band average of Q_abs [1]),
        "absorbed_fraction" (band average of σ_abs/σ_ext [1]), "injection"
        (band integral of the injected-electron rate per particle [s⁻¹] from
        :func:`nanoabs.hot_carrier_estimate` with its defaults: energy-resolved
        generation, escape at the curved wall with attenuation, surface
        photoemission; designs are explored with a size-independent screen —
        band-edge generation with the bulk split of ε″, uniform-sphere escape
        1 − c³, no attenuation — and every ranked row is recomputed with the
        pipeline, which sets its rank; electrons over ``barrier_eV``),
        "selectivity" (band average of σ_abs divided by its average over the rest of
        the window [1]: in-band relative to out-of-band absorption).
    bounds : dict, keyword-only
        ``{family: {variable: (lo, hi)}}`` overriding the defaults: sphere
        radius_nm (2.5, max_size/2); shell core_radius_nm (5, max_size/2 −
        min_shell), thickness_nm (min_shell, min(60, max_size/2 − 5)); rod
        aspect_ratio (1.2, 8), diameter_nm (5, min(60, max_size/1.2)); disc
        aspect_ratio (0.1, 0.8), diameter_nm (10, max_size); cylinder and capped-rod
        aspect_ratio (1.2, 5), diameter_nm (10, min(60, max_size/1.2)).
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
    carrier : {"electron", "hole"}, keyword-only
        Carriers that cross the barrier for "injection": electrons over an n-type
        contact (default), holes over a p-type one (e.g. Au/p-Si).
    fermi_energy_eV : float, keyword-only
        Fermi energy [eV] for "injection"; default from
        :func:`nanoabs.carriers.fermi_energy` by the metal's name.
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
    progress : bool or None, keyword-only
        Progress bar on stderr for searches longer than ~0.5 s: True always,
        False never, None (default) only when stderr is a terminal.
    environment : environment object, keyword-only
        Where the particles sit (:func:`nanoabs.on_substrate`, :func:`nanoabs.buried`) instead of
        ``medium``; every design is then computed on its own (slower than a homogeneous host).
    combine : {"worst", "mean"}, keyword-only
        Several bands: rank by the worst band's figure of merit (default: the design must
        serve every band) or by their mean.
    peak_in_band : bool, keyword-only
        True (default): a design counts only if its absorption peak (the maximum of σ_abs
        inside the window, not at its edge) lies in one of the bands; designs that merely
        have a tail in the band are left out. False: rank every design, and say in the
        ``peak_in_band`` column where each peaks.
    recheck : bool, keyword-only
        True (default): recompute each ranked row with the best available solver (the
        ``"auto"`` rule of :func:`nanoabs.solvers.choose`, exact methods first) and report
        it in the ``recheck_*`` columns beside the coarse method's values (cylinders and
        capped rods: the T-matrix; ``recheck_method`` says "tmatrix: failed (not converged)"
        with NaN values when the exact solver does not converge for a design).  A T-matrix
        recheck solves the body at about a third of the search grid's wavelengths (nodes
        24 nm apart, refined where a cubic spline misses the next midpoint by more than
        2e-3 of the largest cross-section) and interpolates the rest.

    Returns
    -------
    pandas.DataFrame
        Ranked (best first): ``rank``, ``family``, ``material``,
        ``core_material`` ("" unless shell), dimensions ``radius_nm``,
        ``core_radius_nm``, ``thickness_nm``, ``length_nm``, ``diameter_nm``,
        ``aspect_ratio`` (NaN where not applicable), ``outer_size_nm``,
        ``peak_wavelength_nm`` (global σ_abs maximum in the window, refined on
        a 0.1 nm grid; NaN when it sits at the window edge), ``fwhm_nm``,
        ``figure_of_merit``, ``figure_of_merit_band_<i>`` (one per band when there are
        several), ``absorbed_fraction`` (band average), ``peak_in_band`` ("yes"/"no"),
        ``method`` (the coarse method), ``validity`` ("ok" or the caution codes of that
        method for this design), ``recheck_method``, ``recheck_peak_wavelength_nm``,
        ``recheck_figure_of_merit`` (NaN when ``recheck`` is False),
        ``dpeak_d_<dimension>`` (d peak / d dimension [nm/nm] by a central
        difference of ±1 nm, other dimensions fixed; for rods and discs the
        dimensions are length and diameter), ``stage`` ("refined" or "grid").
        ``attrs["figure_of_merit"]`` gives name, unit and definition;
        ``attrs["units"]`` every column's unit; ``attrs["metadata"]`` inputs,
        bounds and warnings.
    """
    cfg = search_inputs(band_nm, families=families, objective=objective, bounds=bounds, materials=materials,
                         core=core, medium=medium, illumination=illumination, barrier_eV=barrier_eV,
                         fermi_energy_eV=fermi_energy_eV, min_shell_nm=min_shell_nm, max_size_nm=max_size_nm,
                         polarization=polarization, method=method, surface_damping=surface_damping,
                         wavelength_nm=wavelength_nm, n_starts=n_starts, top=top, combine=combine,
                         peak_in_band=peak_in_band, environment=environment, carrier=carrier)
    cfg["recheck"] = bool(recheck)
    n_tasks = len(cfg["families"]) * len(cfg["mats"]) * (1 + n_starts) + top
    bar = progress_bar(n_tasks, "search", progress)
    candidates, problems = [], {}
    for fam in cfg["families"]:
        for mi in range(len(cfg["mats"])):
            problems[(fam, mi)] = _problem(cfg, fam, mi)
    pool = thread_pool(WORKERS, _warm_up)
    # warnings.catch_warnings is not thread-safe: the tasks' own catch_warnings (in _evaluate) may
    # restore each other's filters; this outer one, left after the workers stop, restores the caller's
    quiet = _warnings.catch_warnings()
    quiet.__enter__()
    _warnings.simplefilter("ignore", NanoabsWarning)
    try:
        for out in map_ordered(pool, partial(_explore_task, cfg, problems), list(problems), bar, 1 + n_starts):
            candidates += out
        chosen = _choose(candidates, top)
        kept = []  # the tasks add their warnings to problems[...].warnings themselves
        for row, c in zip(map_ordered(pool, partial(_row_task, cfg, problems), chosen, bar, 1), chosen):
            if row["peak_in_band"] == "yes" or not cfg["peak_in_band"]:  # the refined peak decides
                kept.append((row, c))
        if cfg["recheck"]:  # only the rows kept (a recheck can be a T-matrix spectrum)
            rechecks = map_ordered(pool, partial(_recheck_task, cfg), [c for _, c in kept], NoBar(), 0)
            for (row, _), rc in zip(kept, rechecks):
                row.update(rc)
        rows = [row for row, _ in kept]
    finally:
        if pool is not None:
            pool.shutdown(wait=True, cancel_futures=True)
        quiet.__exit__(None, None, None)
        bar.close()
    if not rows:
        problems_w = {"no design peaks inside the band(s) within the bounds; widen the bounds, change the "
                      "families or pass peak_in_band=False to see the nearest designs"}
        for p in problems.values():
            p.warnings |= problems_w
    rows.sort(key=lambda r: -r["figure_of_merit"])  # stable; the recomputed values decide the rank
    for rank, row in enumerate(rows, 1):
        row["rank"] = rank
    warnings = sorted(set().union(*[p.warnings for p in problems.values()])) if problems else []
    return _ranked_frame(rows, cfg, warnings)


# --------------------------------------------------------------------------- parallel evaluation

#: Worker threads of a search (1: everything in the calling thread).  The explore stage runs one
#: task per family and material, the report stage one per ranked design and one recheck per row
#: kept; a task computes exactly what the sequential loop computes, so results do not depend on it.
#: The compiled kernels release the GIL (one kernel call at a time); the numpy-heavy T-matrix
#: rechecks hold it for much of their time, so on the loaded 2-core test machine two threads
#: measured about the same as one, and forked processes slower (notes/speed.md).
WORKERS = 2


def _explore_task(cfg, problems, key):
    with _compiled_mie.any_size():  # many small Mie spectra: the compiled kernel, loaded once
        return _explore(cfg, problems[key], key[1], NoBar())


def _row_task(cfg, problems, c):
    with _compiled_mie.any_size():
        return _design_row(cfg, problems[(c["family"], c["mi"])], c)


def _recheck_task(cfg, c):
    g = _geometry_of(c["family"], _to_v(cfg, c["family"], c["u"])[None, :])
    with _compiled_mie.any_size():
        return _recheck(cfg, c, g)


def _warm_up():
    """Load the compiled kernels (numba's import and cache load) and the search's scipy modules here,
    once, before the worker threads could race to load them."""
    import scipy.integrate  # noqa: F401
    import scipy.optimize  # noqa: F401

    from .. import _compiled

    with _compiled_mie.any_size():
        if _compiled_mie.available(1):
            try:
                _compiled_mie.mie_efficiencies(np.array([[1.5 + 0.1j]]), np.array([[1.0]]), np.array([2]))
            except _compiled.Unavailable:
                pass
    if _compiled.available():
        try:
            one = np.ones(1)
            _compiled.ellipsoid_mlwa_map(one + 1j, one, (0.0, 0.0), np.zeros(1), one, one, np.full((1, 1), 1 / 3),
                                         np.zeros((1, 1)), one, one, 1.0)
        except _compiled.Unavailable:
            pass


def _bands(band_nm):
    """Sorted, non-overlapping list of (lo, hi) [nm] from one band or a sequence of bands."""
    def is_pair(b):
        return isinstance(b, (tuple, list, np.ndarray)) and len(b) == 2 and not any(
            isinstance(x, (tuple, list, np.ndarray)) for x in b)

    items = [band_nm] if is_pair(band_nm) else band_nm
    if not isinstance(items, (tuple, list)) or not items or not all(is_pair(b) for b in items):
        raise NanoabsError(f"band_nm = {band_nm!r}: give (lo, hi) in nm or a list of such bands, "
                           "e.g. [(1260, 1360), (1530, 1565)]")
    if len(items) > 10:
        raise NanoabsError(f"band_nm: {len(items)} bands given; allowed range is 1 to 10")
    out = sorted(band(lo_nm=b[0], hi_nm=b[1]) for b in items)
    for (a_lo, a_hi), (b_lo, b_hi) in zip(out, out[1:]):
        if b_lo < a_hi:
            raise NanoabsError(f"bands ({a_lo:g}, {a_hi:g}) and ({b_lo:g}, {b_hi:g}) nm overlap: give "
                               "separate bands or one band that covers both")
    return out


def search_inputs(band_nm, *, families, objective, bounds, materials, core, medium="water", illumination, barrier_eV,
                   fermi_energy_eV, min_shell_nm, max_size_nm, polarization, method, surface_damping,
                   wavelength_nm, n_starts, top, combine="worst", peak_in_band=True, environment=None,
                   carrier="electron"):
    """The validated inputs of :func:`search` as one dict; raises before any spectrum is computed."""
    bands = _bands(band_nm)
    lo, hi = bands[0][0], bands[-1][1]
    objective = check_choice("objective", objective, OBJECTIVES)
    carrier = check_choice("carrier", carrier, ("electron", "hole"))
    combine = check_choice("combine", combine, COMBINE)
    if not isinstance(peak_in_band, (bool, np.bool_)):
        raise NanoabsError(f"peak_in_band = {peak_in_band!r}: must be True or False")
    if isinstance(families, str):
        families = [families]
    if not isinstance(families, (list, tuple)):
        raise NanoabsError(f"families = {families!r}: give a list of {', '.join(FAMILIES)}")
    families = [check_choice("family", f, FAMILIES) for f in families]
    if not families:
        raise NanoabsError("families is empty: give at least one of " + ", ".join(FAMILIES))
    families = unique(families)
    materials = _material_list("materials", materials)
    if not materials:
        raise NanoabsError("materials is empty: give at least one metal")
    mats = [_resolve_material(m) for m in materials]
    core_m = _resolve_material(core)
    if environment is not None:
        if medium != "water":
            raise NanoabsError("medium and environment: give one (the environment names the particle's host)")
        if not is_environment(environment):
            raise NanoabsError(f"environment = {environment!r}: expected nanoabs.on_substrate(...), buried(...) "
                               "or homogeneous(...)")
        medium = environment
    med = environment.host_material() if environment is not None else _resolve_material(medium)
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
    if any(f in ("rod", "disc", *_ROD_BODIES) for f in families):
        polarization = check_choice("polarization", polarization, ["long", "short", "random", "x", "y", "z"])
    used = mats + ([core_m] if "shell" in families else []) + [med]
    if wavelength_nm is None:
        window = _search_window(lo, hi, _ranges(*used))
    else:
        window = check_finite_array("wavelength_nm", wavelength_nm, increasing=True)
        if lo < window[0] or hi > window[-1]:
            raise NanoabsError(f"band = ({lo:g}, {hi:g}) nm lies outside wavelength_nm, {window[0]:g} to "
                               f"{window[-1]:g} nm")
    band_grids, inj_meta = [], None
    for b_lo, b_hi in bands:
        band_wl = np.linspace(b_lo, b_hi, int(min(max(41, math.ceil((b_hi - b_lo) / 2.0) + 1), 201)))
        inj = {}
        if objective == "injection":
            band_wl, inj, inj_meta = _injection_inputs(b_lo, b_hi, band_wl, mats, illumination, barrier_eV,
                                                       fermi_energy_eV, carrier)
        band_grids.append((b_lo, b_hi, band_wl, inj))
    return {"lo": lo, "hi": hi, "bands": band_grids, "objective": objective, "combine": combine,
            "peak_in_band": bool(peak_in_band), "families": families, "materials": materials,
            "mats": mats, "core": core, "core_m": core_m, "medium": medium, "med": med,
            "where": environment if environment is not None else med, "min_shell": min_shell,
            "max_size": max_size, "n_starts": n_starts, "window": window,
            "band_wl": np.concatenate([b[2] for b in band_grids]),
            "inj_meta": inj_meta, "fermi_energy_eV": fermi_energy_eV,
            "inj_source": _injection_source(illumination) if objective == "injection" else None,
            "fam_bounds": _family_bounds(bounds, families, min_shell, max_size),
            "settings": {"method": method, "polarization": polarization,
                         "surface_damping": check_flag("surface_damping", surface_damping)}}


def _injection_inputs(lo, hi, band_wl, mats, illumination, barrier_eV, fermi_energy_eV, carrier="electron"):
    """Band grid, {id(metal): (E_lambda, eta)} and metadata of the "injection" objective."""
    from .. import hotcarriers as hc
    from ..carriers import fermi_energy

    if barrier_eV is None:
        raise NanoabsError("barrier_eV is required for objective = 'injection' (Schottky barrier in eV)")
    src = _injection_source(illumination)
    if getattr(src, "is_monochromatic", False):
        raise NanoabsError("illumination is monochromatic: a band integral needs a spectral source; use "
                           "nanoabs.illumination.flat(...) for a uniform band")
    nodes = getattr(src, "nodes_nm", None)
    if nodes is not None:  # integrate a tabulated source on its own nodes too (sharp bands)
        nodes = np.asarray(nodes, dtype=float)
        band_wl = np.union1d(band_wl, nodes[(nodes > lo) & (nodes < hi)])
    E = np.asarray(src.spectral_irradiance(band_wl), dtype=float)
    phi = float(barrier_eV)
    inj = {}
    for m in mats:
        if fermi_energy_eV is None:
            ef = fermi_energy(str(getattr(m, "name", type(m).__name__))).value
        else:
            ef = float(fermi_energy_eV)
        eta = _screening_yield(m, band_wl, phi, ef, carrier)
        if not np.any(eta > 0):
            raise NanoabsError(f"barrier_eV = {phi:g} eV: above every photon energy of the band "
                               f"(at most {float(hc.photon_energy_eV(lo)):.4g} eV); no carrier can cross it")
        inj[id(m)] = (E, eta)
    meta = {"illumination": src.metadata() if callable(getattr(src, "metadata", None)) else str(src),
            "barrier_eV": phi, "carrier": carrier, "fermi_energy_eV": fermi_energy_eV or "per metal (nanoabs.carriers.fermi_energy)",
            "ranked_value": "nanoabs.hot_carrier_estimate band integral (defaults: band-edge generation, "
                            "particle geometry, energy-dependent attenuation, surface emission 'field')",
            "screening_yield": "band-edge generation with the bulk mechanism split of eps'', uniform-sphere "
                               "escape 1 - c^3, transport factor 1 (exploration only)"}
    return band_wl, inj, meta


def _injection_source(illumination):
    """The illumination of the "injection" objective (default AM1.5G)."""
    from .. import illumination as il

    return il.solar("am1.5g") if illumination is None else illumination


def _screening_yield(metal, wl, phi, ef, carrier="electron"):
    """Size-independent emission probability per absorbed photon used to explore designs [-].

    The energy-resolved pipeline of :func:`nanoabs.hot_carrier_estimate` without what depends on
    the design: absorbed power split by the parts of eps'' of the bulk Drude-Lorentz model
    (no surface damping), band-edge carrier distributions (:func:`nanoabs.carriers.excess_energy_bounds`),
    escape from a sphere with uniform generation and no attenuation, 1 - c^3
    (:mod:`nanoabs.carriers`), ``carrier`` over ``phi``. Ranked rows are recomputed with the pipeline.
    """
    from .. import carriers as cr
    from .. import hotcarriers as hc
    from ..detector import _mechanism_fractions

    E_ph = hc.photon_energy_eV(wl)
    if phi >= E_ph.max():
        return np.zeros(wl.shape)
    E = cr.energy_grid(phi, E_ph.max())
    W = 1.0 - cr.cone_cosine(E, phi, ef) ** 3
    model = getattr(metal, "model", None)
    fr = (_mechanism_fractions(metal, wl, 0.0) if model is not None
          else {k: (np.ones(wl.shape) if k == "intraband_bulk" else np.zeros(wl.shape)) for k in cr.CHANNELS})
    name = getattr(metal, "name", "")
    return sum(fr[k] * cr.channel_yield(W, E, *cr.excess_energy_bounds(E_ph, name, k, carrier))
               for k in cr.CHANNELS)


def _pipeline_fom(cfg, prob, g, method):
    """Figure of merit per band of design ``g`` from :func:`nanoabs.hot_carrier_estimate` [s^-1]."""
    from scipy.integrate import trapezoid

    from ..detector import hot_carrier_estimate
    from ..optics import spectrum

    particle = _one_particle(prob, g)
    where = prob.medium
    place = {"environment": where} if is_environment(where) else {"medium": where}
    meta = cfg["inj_meta"]
    out = []
    for lo, hi, wl, _ in cfg["bands"]:
        with _quiet():
            spec = spectrum(particle, wl, method=method, polarization=prob.settings["polarization"],
                            surface_damping=prob.settings["surface_damping"], **place)
            res = hot_carrier_estimate(spec, particle, cfg["inj_source"], barrier_eV=meta["barrier_eV"],
                                       carrier=meta["carrier"], fermi_energy_eV=cfg["fermi_energy_eV"])
        out.append(float(trapezoid(res.frame[f"injected_{meta['carrier']}_rate_per_s"].to_numpy(), wl)))
    return np.array(out)


@contextlib.contextmanager
def _quiet():
    """Silence the cautions of the per-row recomputation (the search reports its own warnings)."""
    import warnings

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        yield


def _family_bounds(bounds, families, min_shell, max_size):
    """{family: {variable: (lo, hi)}}: the defaults overridden by the user's ``bounds``."""
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
    return fam_bounds




def _problem(cfg, fam, mi, method=None):
    m = cfg["mats"][mi]
    settings = dict(cfg["settings"])
    if method is not None:
        settings["method"] = method
    elif settings["method"] == "auto":
        planar = is_environment(cfg["where"]) and cfg["where"].kind != "homogeneous"
        # the fast method for the coarse stage (in a planar environment the dipole with the reflected
        # Green's function; the recheck uses the multipole method)
        settings["method"] = "mlwa" if planar or fam in _ROD_BODIES else SWEEP_AUTO[_FAMILY_SHAPE[fam]]
    bands = [(lo, hi, wl, inj[id(m)] if cfg["objective"] == "injection" else None)
             for lo, hi, wl, inj in cfg["bands"]]
    return _Problem(fam, m, cfg["core_m"] if fam == "shell" else None, cfg["where"], settings, bands,
                    cfg["window"], cfg["objective"], cfg["combine"], cfg["peak_in_band"])


def _to_v(cfg, fam, u):
    """Optimisation variables [nm or 1] from unit coordinates u (log-scaled within the bounds)."""
    b = cfg["fam_bounds"][fam]
    lo_v = np.log(np.array([b[v][0] for v in _FAMILY_VARS[fam]]))
    hi_v = np.log(np.array([b[v][1] for v in _FAMILY_VARS[fam]]))
    return np.exp(lo_v + np.clip(u, 0, 1) * (hi_v - lo_v))


def _explore(cfg, prob, mi, bar):
    """Candidates of one family and material: every feasible grid point, then the refined optima."""
    fam, n_starts = prob.family, cfg["n_starts"]
    axes = [np.linspace(0, 1, n) for n in _GRID[fam]]
    U = np.stack([a.ravel() for a in np.meshgrid(*axes, indexing="ij")], axis=1)
    U = U[_feasible(fam, _geometry_of(fam, _to_v(cfg, fam, U)), cfg["min_shell"], cfg["max_size"])]
    if U.shape[0] == 0:
        prob.warnings.add(f"{fam}: no design inside the bounds satisfies the size limits")
        bar.update(1 + n_starts)
        return []
    fom, _ = prob.fom(_geometry_of(fam, _to_v(cfg, fam, U)))
    fom = np.where(np.isfinite(fom), fom, -np.inf)
    bar.update()
    order = np.argsort(-fom, kind="stable")
    out = [{"family": fam, "mi": mi, "u": U[j], "fom": float(fom[j]), "stage": "grid"} for j in order]
    starts = []
    for j in order:
        if len(starts) >= n_starts or not np.isfinite(fom[j]):
            break
        if all(np.max(np.abs(U[j] - U[s])) > 0.2 for s in starts):
            starts.append(j)
    scale = float(fom[order[0]]) if np.isfinite(fom[order[0]]) and fom[order[0]] > 0 else None
    if scale is None:
        bar.update(n_starts)
        return out
    for j in starts:
        r = _refine(cfg, prob, U[j], scale)
        if r.fun < 0:
            out.append({"family": fam, "mi": mi, "u": np.clip(r.x, 0, 1), "fom": -float(r.fun) * scale,
                        "stage": "refined"})
        bar.update()
    bar.update(n_starts - min(len(starts), n_starts))
    return out


def _refine(cfg, prob, u0, scale):
    """Bounded Nelder-Mead (scipy.optimize.minimize) of -fom/scale from unit coordinates ``u0``."""
    from scipy.optimize import minimize

    fam = prob.family

    def f(u):
        g = _geometry_of(fam, _to_v(cfg, fam, np.asarray(u))[None, :])
        if not _feasible(fam, g, cfg["min_shell"], cfg["max_size"])[0]:
            return 1.0
        val = prob.fom(g)[0][0]
        return -val / scale if np.isfinite(val) else 1.0

    k = u0.size
    step = 0.5 / max(_GRID[fam])
    simplex = np.array([u0] + [np.clip(u0 + step * np.eye(k)[i] * (1 if u0[i] < 0.5 else -1), 0, 1)
                               for i in range(k)])
    return minimize(f, u0, method="Nelder-Mead", bounds=[(0, 1)] * k,
                    options={"initial_simplex": simplex, "xatol": 1e-4, "fatol": 1e-7, "maxiter": 120 * k})


def _design_row(cfg, prob, c):
    """One row of the ranked table: dimensions, peak report, figures of merit, validity and the
    recheck by the best available solver for candidate ``c``."""
    fam = c["family"]
    g = _geometry_of(fam, _to_v(cfg, fam, c["u"])[None, :])
    ev = prob.evaluate(g)
    row = {"rank": 0, "family": fam, "material": _material_label(cfg["materials"][c["mi"]]),
           "core_material": _material_label(cfg["core"]) if fam == "shell" else ""}
    for d in ("radius_nm", "core_radius_nm", "thickness_nm", "length_nm", "diameter_nm", "aspect_ratio"):
        row[d] = float(g[d][0]) if d in g else float("nan")
    row["outer_size_nm"] = float(_outer_size(fam, g)[0])
    row.update(_peak_report(prob, fam, g, cfg["window"]))
    peak = row["peak_wavelength_nm"]
    row["peak_in_band"] = "yes" if any(lo <= peak <= hi for lo, hi, _, _ in cfg["bands"]) else "no"
    per_band = ev["per_band"][0]
    if cfg["objective"] == "injection":  # the ranked value comes from the energy-resolved pipeline
        per_band = _pipeline_fom(cfg, prob, g, prob.settings["method"])
    row["figure_of_merit"] = float(per_band.min() if cfg["combine"] == "worst" else per_band.mean())
    for i, v in enumerate(per_band, 1):
        row[f"figure_of_merit_band_{i}"] = float(v)
    row["absorbed_fraction"] = float(ev["absorbed_fraction"][0])
    row["method"] = prob.settings["method"]
    row["validity"] = _validity(prob, g, cfg["window"])
    row.update({"recheck_method": "", "recheck_peak_wavelength_nm": float("nan"),
                "recheck_figure_of_merit": float("nan")})  # filled in by _recheck_task for the rows kept
    row["stage"] = c["stage"]
    return row


def _one_particle(prob, g):
    from ._designs import _particle

    return _particle(prob.shape, prob.table(g), np.array([0]), prob.mat, prob.core)


def _validity(prob, g, window):
    """"ok", or the codes of the coarse method's size cautions for design ``g`` on the window."""
    from ..solvers import METHODS, Problem

    solver = METHODS[prob.settings["method"]]
    n_med = (prob.medium.host_index(window)[0] if is_environment(prob.medium)
             else np.atleast_1d(prob.medium.refractive_index(window)).real)
    prb = Problem(_one_particle(prob, g), window, n_med, "x", None, [])
    codes = sorted({c.code for c in solver.validity(prb)} | ({"spheroid-stand-in"} if prob.proxy else set()))
    return ";".join(codes) if codes else "ok"


def _recheck(cfg, c, g):
    """Peak and figure of merit of design ``g`` with the best available solver (the size-aware
    "auto" rule of :func:`nanoabs.solvers.choose`), on the search's evaluation grid.  A rod with
    edges is rechecked as itself (not its stand-in spheroid); when the exact solver refuses or
    does not converge, ``recheck_method`` says so and the values are NaN."""
    from ..solvers import Homogeneous, choose

    fam = c["family"]
    prob0 = _problem(cfg, fam, c["mi"], method="tmatrix" if fam in _ROD_BODIES else None)
    where = prob0.medium if is_environment(prob0.medium) else Homogeneous(prob0.medium)
    window = cfg["window"]
    best = None
    try:
        best, _ = choose("auto", _one_particle(prob0, g), where, wavelength_nm=window,
                         n_medium=where.host_index(window)[0])
        prob = _problem(cfg, fam, c["mi"], method=best.name)
        ev = prob.evaluate(g, spectra=_recheck_spectra(prob, g, best.name))
    except NanoabsError as exc:
        name = best.name if best is not None else "none"
        why = "not converged" if ("converge" in str(exc) or "passive" in str(exc)) else "refused"
        return {"recheck_method": f"{name}: failed ({why})", "recheck_peak_wavelength_nm": float("nan"),
                "recheck_figure_of_merit": float("nan")}
    per_band = ev["per_band"][0]
    if cfg["objective"] == "injection":
        per_band = _pipeline_fom(cfg, prob, g, best.name)
    return {"recheck_method": best.name,
            "recheck_peak_wavelength_nm": float(_peak(prob.grid, ev["sigma_abs_m2"][0])),
            "recheck_figure_of_merit": float(per_band.min() if cfg["combine"] == "worst" else per_band.mean())}


#: The T-matrix recheck solves its body on a subset of the search grid: nodes about
#: RECHECK_STEP_NM apart, then the midpoints of every interval whose last midpoint missed the cubic
#: spline through the nodes by more than RECHECK_TOL (relative to the largest cross-section met),
#: until the intervals pass or hold no grid point; the rest of the grid is interpolated.
RECHECK_STEP_NM = 24.0
RECHECK_TOL = 2e-3
#: Node spacing [nm] of the recheck of a body on or in a stack (:func:`_stack_spectra`).
STACK_RECHECK_STEP_NM = 16.0


def _recheck_spectra(prob, g, method):
    """Spectra of the recheck on ``prob.grid``: :func:`_sparse_spectra` for the T-matrix, or the direct
    spectrum where a sparse solve fails (e.g. a later node is not passive at the first call's orders,
    where the direct solve may switch to extended precision)."""
    if method == "tmatrix" and hasattr(prob.medium, "resolve"):  # on / in a stack: see _stack_spectra
        return _stack_spectra(prob, g)
    if method == "tmatrix":
        try:
            return _sparse_spectra(prob, g)
        except NanoabsError:
            pass
    return prob.spectra(g, prob.grid)


def _stack_spectra(prob, g):
    """Recheck spectra of a body on or in a planar stack (multipole method with the full T-matrix).

    Every call of that method repeats its multipole-order study (tens of seconds), so the adaptive
    refinement of :func:`_sparse_spectra` would cost one study per round: here ONE call solves nodes
    STACK_RECHECK_STEP_NM apart (at least 6, both ends included) and a not-a-knot cubic spline in wavelength
    (de Boor 1978, ch. IV-V) fills the grid. Plasmon resonances of gold and silver bodies on a
    substrate are 100 nm wide or more, so the spline's error at 16 nm spacing (5e-4 of the peak for a
    120 nm wide Lorentzian) is small against the method's own accuracy there (a few per cent,
    notes/flatrods.md); it is not checked per design.
    """
    from scipy.interpolate import CubicSpline

    wl = prob.grid
    n = int(max(6, np.ceil((wl[-1] - wl[0]) / STACK_RECHECK_STEP_NM) + 1))
    if n * 2 >= wl.size:
        return prob.spectra(g, wl)
    nodes = np.linspace(wl[0], wl[-1], n)
    res = prob.spectra(g, nodes)
    out = dict(res)
    for k in ("sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2", "geometric_cross_section_m2",
              "equal_volume_area_m2", "n_medium"):
        out[k] = CubicSpline(nodes, np.asarray(res[k])[0])(wl)[None, :]
    out["recheck_nodes"] = n
    return out


def _sparse_spectra(prob, g):
    """:meth:`_Problem.spectra` of the one design ``g`` on ``prob.grid`` from T-matrix solves at a subset
    of the grid, adaptively refined (RECHECK_STEP_NM, RECHECK_TOL) and completed by a not-a-knot cubic
    spline in wavelength (scipy.interpolate.CubicSpline; de Boor, A Practical Guide to Splines, 1978,
    ch. IV-V: error O(h^4) on smooth data, checked here at every midpoint added).  The body is
    converged once (first call) and solved with the same orders at later nodes
    (:func:`nanoabs.tmatrix.reuse_orders`), so each node equals the direct spectrum at the same orders."""
    from scipy.interpolate import CubicSpline

    from ..tmatrix import reuse_orders

    wl = prob.grid
    W = wl.size
    checked = ("sigma_abs_m2", "sigma_sca_m2", "sigma_ext_m2")
    keys = checked + ("geometric_cross_section_m2", "equal_volume_area_m2", "n_medium")
    first = np.unique(np.r_[np.searchsorted(wl, np.arange(wl[0], wl[-1], RECHECK_STEP_NM)), W - 1].clip(0, W - 1))
    if first.size < 4 or first.size * 2 >= W:  # too few points to gain anything
        return prob.spectra(g, wl)

    def spline(k, at):
        x = np.array(sorted(known[k]))
        return CubicSpline(wl[x], [known[k][i] for i in x])(at)

    with reuse_orders():
        res = prob.spectra(g, wl[first])
        known = {k: dict(zip(first.tolist(), res[k][0])) for k in keys}
        nodes, todo = first, first[:-1]  # left ends of the intervals to split
        while todo.size:
            right = nodes[np.searchsorted(nodes, todo) + 1]
            split = (right - todo) >= 2
            left, right = todo[split], right[split]
            if left.size == 0:
                break
            mid = (left + right) // 2
            new = prob.spectra(g, wl[mid])
            err = np.zeros(mid.size)
            for k in checked:
                scale = max(max(abs(v) for v in known[k].values()), float(np.max(np.abs(new[k][0]))), 1e-300)
                err = np.maximum(err, np.abs(spline(k, wl[mid]) - new[k][0]) / scale)
            for k in keys:
                known[k].update(zip(mid.tolist(), new[k][0]))
            nodes = np.union1d(nodes, mid)
            bad = err > RECHECK_TOL
            todo = np.union1d(left[bad], mid[bad])
    out = dict(res)
    for k in keys:
        full = spline(k, wl)
        full[list(known[k])] = list(known[k].values())
        out[k] = full[None, :]
    out["recheck_nodes"] = nodes.size
    return out


def _ranked_frame(rows, cfg, warnings):
    """The ranked rows as a typed DataFrame with units, figure-of-merit definition and metadata."""
    import pandas as pd

    objective = cfg["objective"]
    band_cols = [f"figure_of_merit_band_{i}" for i in range(1, len(cfg["bands"]) + 1)] if len(cfg["bands"]) > 1 \
        else []
    text_cols = ("family", "material", "core_material", "stage", "peak_in_band", "method", "validity",
                 "recheck_method")
    cols = ["rank", "family", "material", "core_material", "radius_nm", "core_radius_nm", "thickness_nm",
            "length_nm", "diameter_nm", "aspect_ratio", "outer_size_nm", "peak_wavelength_nm", "fwhm_nm",
            "peak_in_band", "figure_of_merit", *band_cols, "absorbed_fraction", "method", "validity",
            "recheck_method", "recheck_peak_wavelength_nm", "recheck_figure_of_merit"] + \
        [f"dpeak_d_{d}" for d in _SENS_DIMS] + ["stage"]
    frame = pd.DataFrame(rows, columns=cols)
    for c in cols:
        if c in text_cols:
            frame[c] = frame[c].astype(str)
        elif c == "rank":
            frame[c] = frame[c].astype(np.int64)
        else:
            frame[c] = frame[c].astype(float)
    units = {c: "nm" for c in cols if c.endswith("_nm")}
    units.update({"rank": "1", "aspect_ratio": "1", "figure_of_merit": _FOM_UNITS[objective],
                  "recheck_figure_of_merit": _FOM_UNITS[objective], "absorbed_fraction": "1"})
    units.update({c: _TEXT_UNIT for c in text_cols})
    units.update({c: _FOM_UNITS[objective] for c in band_cols})
    units.update({f"dpeak_d_{d}": "1" for d in _SENS_DIMS})
    frame.attrs["figure_of_merit"] = {"objective": objective, "name": _FOM_TEXT[objective],
                                      "unit": _FOM_UNITS[objective]}
    frame.attrs["units"] = {c: units[c] for c in cols}
    families, window = cfg["families"], cfg["window"]
    frame.attrs["metadata"] = {
        "study": "search", "band_nm": [cfg["lo"], cfg["hi"]], "bands_nm": [[lo, hi] for lo, hi, _, _ in cfg["bands"]],
        "combine": cfg["combine"], "peak_in_band": cfg["peak_in_band"],
        "band_grid_points": int(cfg["band_wl"].size), "objective": objective, "figure_of_merit": _FOM_TEXT[objective], "families": families,
        "bounds": {f: {k: list(v) for k, v in b.items()} for f, b in cfg["fam_bounds"].items()},
        "limits": {"min_shell_nm": cfg["min_shell"], "max_size_nm": cfg["max_size"]},
        "materials": [_material_meta(m) for m in cfg["materials"]],
        "core": _material_meta(cfg["core"]) if "shell" in families else None,
        "medium": _material_meta(cfg["medium"]), "polarization": cfg["settings"]["polarization"],
        "method": cfg["settings"]["method"], "surface_damping": cfg["settings"]["surface_damping"],
        "injection": cfg["inj_meta"], "window_nm": [float(window[0]), float(window[-1])],
        "algorithm": "coarse log-spaced grid per family (one vectorised spectrum call), then bounded "
                     "Nelder-Mead (scipy.optimize.minimize) from the best distinct grid points",
        "sensitivity": "central difference of the sigma_abs peak for +-1 nm of each dimension "
                       "(+-value/4 below 4 nm), peak refined on a 0.1 nm grid",
        "warnings": collapse(warnings),
        "package_version": _package_version(),
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
    if fam in ("rod", "disc", *_ROD_BODIES):
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
