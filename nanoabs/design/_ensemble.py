"""Size-distribution ensembles: the per-particle average spectrum over a distribution of sizes."""

from __future__ import annotations

import math
from collections.abc import Mapping

import numpy as np

from .._errors import NanoabsError, check_choice, check_finite_array, suggest
from ..optics import Spectrum
from ..particles import MONOLAYER_NM
from ._designs import _ALIASES, _GEOMETRY, SHAPES, _canonical_params, _designs, _evaluate, _make_plan, \
    _material_label, _settings
from ._engine import collapse
from ._sweep import _sweep_metadata

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


def _distribution_inputs(shape, nominal, spread, distribution, n_samples):
    """Validated nominal design, fixed (histogram or zero-spread) and relative spreads, distribution kind."""
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
    return base, fixed, rel, kind


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
    base, fixed, rel, kind = _distribution_inputs(shape, nominal, spread, distribution, n_samples)
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
    meta = _sweep_metadata(plan, 1, collapse(warnings), res["methods"], "in-process")
    meta.update({"study": "ensemble", "ensemble": info,
                 "quadrature_reference": "Gauss-Hermite quadrature (Abramowitz & Stegun 1964, 25.4.46)"})
    for k in ("chunk_size", "n_chunks", "executor", "cartesian_order", "parameters", "n_designs"):
        meta.pop(k, None)
    return Spectrum(plan["wavelength_nm"], avg["sigma_abs_m2"], avg["sigma_sca_m2"], avg["sigma_ext_m2"],
                    avg["geometric_cross_section_m2"], avg["equal_volume_area_m2"],
                    np.asarray(avg["metal_volume_m3"]), res["n_medium"][0], meta, [])

