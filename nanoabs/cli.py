"""Command-line interface: a thin layer over the library (no physics here).

Exit codes: 0 success; 2 invalid input or usage (including an output file that
exists without --force); 3 unreadable or malformed data file; 130 interrupted;
1 unexpected internal error (run with --debug for the traceback and report it).
"""

from __future__ import annotations

import argparse
import sys
import warnings
from pathlib import Path

import numpy as np

from ._version import version as _package_version
from ._units import parse_irradiance
from .validity import NanoabsWarning
from ._errors import NanoabsError

EXIT_INTERNAL = 1


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors that exit with code 2."""

    def error(self, message):  # noqa: D401 - argparse API
        raise NanoabsError(f"{self.prog}: {message}")


#: Most wavelengths (or values) one argument may expand to: bounds memory and work.
MAX_POINTS = 200_000


def parse_range(text: str, name: str = "--wl", *, need_step: bool = True):
    """Parse 'START:STOP:STEP' in nm (inclusive of STOP when it lies on the grid to within
    1e-9 of a step), a list 'V1,V2,...' (strictly increasing, e.g. '1310,1550'), or, with
    need_step False, 'START:STOP' (returned as a pair)."""
    t = str(text).strip()
    if need_step and ":" not in t:
        vals = _parse_list(t, name, increasing=True)
        if np.any(vals <= 0):
            raise NanoabsError(f"{name} = {_short(t)}: every value must be > 0 nm")
        return vals
    parts = t.split(":")
    want = 3 if need_step else 2
    if len(parts) != want:
        form = "START:STOP:STEP or a list V1,V2,..." if need_step else "START:STOP"
        raise NanoabsError(f"{name} = {_short(t)}: expected {form} in nm, e.g. "
                           f"{'400:900:1' if need_step else '400:1000'}")
    vals = _parse_list(",".join(parts), name, increasing=False, shown=t)
    if vals[0] <= 0 or vals[1] <= vals[0]:
        raise NanoabsError(f"{name} = {_short(t)}: need 0 < START < STOP")
    if not need_step:
        return float(vals[0]), float(vals[1])
    start, stop, step = (float(v) for v in vals)
    span = (stop - start) / step if step > 0 else -1.0
    if span > MAX_POINTS:
        raise NanoabsError(f"{name} = {_short(t)}: {span + 1:.3g} points; at most {MAX_POINTS} allowed")
    # a span a rounding error short of a whole number of steps still includes STOP
    n = int(np.floor(span + 1e-9)) + 1 if span > 0 else 0
    if n < 2:
        raise NanoabsError(f"{name} = {_short(t)}: STEP must be > 0 and no larger than STOP - START")
    out = start + step * np.arange(n)
    if abs(out[-1] - stop) <= 1e-9 * step:
        out[-1] = stop  # exactly STOP, not STOP minus a rounding error
    return out


def _short(text) -> str:
    t = str(text)
    return repr(t if len(t) <= 40 else t[:37] + "...")


def _parse_list(text: str, name: str, *, increasing: bool, shown: str | None = None) -> np.ndarray:
    """'V1,V2,...' -> finite float array (at most MAX_POINTS values); ``shown`` is the text
    quoted in messages (default ``text``)."""
    items = str(text).split(",")
    text = text if shown is None else shown
    if len(items) > MAX_POINTS:
        raise NanoabsError(f"{name}: {len(items)} values; at most {MAX_POINTS} allowed")
    try:
        vals = np.array([float(v) for v in items])
    except ValueError:
        raise NanoabsError(f"{name} = {_short(text)}: every field must be a number") from None
    if not np.all(np.isfinite(vals)):
        raise NanoabsError(f"{name} = {_short(text)}: values must be finite")
    if increasing and np.any(np.diff(vals) <= 0):
        raise NanoabsError(f"{name} = {_short(text)}: values must be strictly increasing")
    return vals


# -- materials -----------------------------------------------------------------


def _cmd_materials(args) -> int:
    from . import materials as mat

    if args.action is None or args.action == "list":
        cat = mat.catalog()
        print(f"{'material':9s} {'dataset':26s} {'range [nm]':>19s}  default  reference")
        for name in sorted(cat, key=str.lower):
            dflt = mat.default_source(name)
            for src, h in cat[name].items():
                lo, hi = (float(v) for v in h.get("range_nm", "0 0").split())
                ref = h.get("reference", "")
                ref = ref if len(ref) <= 70 else ref[:67] + "..."
                fit = " +fit" if h.get("fit") else ""
                print(f"{name:9s} {src:26s} {lo:9.4g}-{hi:<9.4g}  {'yes' if src == dflt else '   ':7s}  "
                      f"{ref}{fit}")
        print("\nA number (e.g. 1.33) gives a constant-index medium. '+fit': a Drude-Lorentz fit "
              "ships with the dataset. Data: refractiveindex.info database (CC0).")
        return 0
    if args.name is None:
        raise NanoabsError(f"materials {args.action}: give a material NAME (see 'nanoabs materials')")
    if args.action == "show":
        m = mat.material(args.name, args.source, extrapolate=_EXTRAPOLATE)
        if args.wl:
            wl = parse_range(args.wl)
        else:
            lo, hi = m.range_nm
            if not np.isfinite(hi):
                lo, hi = 300.0, 2000.0
            wl = np.geomspace(lo, hi, 25)
        n = np.atleast_1d(m.refractive_index(wl))
        eps = n**2
        md = m.metadata()
        print(f"{m.label}: {md.get('reference', md.get('values', ''))}")
        if md.get("dataset"):
            print(f"  dataset: {md['dataset']}")
        print(f"  range: {m.range_nm[0]:g}-{m.range_nm[1]:g} nm; convention: exp(-i omega t), k >= 0")
        if m.model is not None:
            mm = m.model.meta
            print(f"  Drude-Lorentz fit: {mm.get('range_nm')} nm, RMS relative error of eps "
                  f"{mm.get('rms_relative_error', float('nan')):.2%}")
        print(f"{'wavelength_nm':>14s} {'n':>10s} {'k':>10s} {'eps_real':>11s} {'eps_imag':>10s}")
        for w, a, e in zip(np.atleast_1d(wl), n, eps):
            print(f"{w:14.2f} {a.real:10.4f} {a.imag:10.4f} {e.real:11.4f} {e.imag:10.4f}")
        if args.plot:
            from .plotting import plot_material, save_figure

            dense = np.geomspace(wl.min(), wl.max(), 400) if args.wl else None
            save_figure(plot_material(m, dense), args.plot, force=args.force)
            print(f"wrote {args.plot}")
        return 0
    if args.action == "fit":
        from .drude_lorentz import fit_drude_lorentz

        m = mat.material(args.name, args.source)
        if m._wl is None:
            raise NanoabsError(f"materials fit: {m.label} is a constant index; nothing to fit")
        lo, hi = parse_range(args.range, "--range", need_step=False) if args.range else m.range_nm
        res = fit_drude_lorentz(m._wl, m._n**2, oscillators=args.oscillators,
                                drude=not args.no_drude, range_nm=(lo, hi), starts=args.starts)
        md = res.model
        print(f"Drude-Lorentz fit of {m.label} over {res.range_nm[0]:g}-{res.range_nm[1]:g} nm "
              f"({res.n_points} points): RMS relative error of eps = {res.rms_relative_error:.3%}")
        print(f"  eps_inf = {md.eps_inf:.5g}")
        print(f"  Drude: plasma energy = {md.plasma_energy_eV:.5g} eV, damping = {md.damping_eV:.5g} eV")
        for j, o in enumerate(md.oscillators, 1):
            print(f"  Lorentz {j}: energy = {o.energy_eV:.5g} eV, strength = {o.strength:.5g}, "
                  f"damping = {o.damping_eV:.5g} eV")
        if not res.success:
            print(f"  warning: optimiser did not report convergence: {res.message}")
        if args.save:
            import json

            from .export import write_file_atomic

            d = md.to_dict()
            d.update({"material": m.name, "source": m.source, "range_nm": list(res.range_nm),
                      "rms_relative_error": res.rms_relative_error,
                      "fitted_by": f"nanoabs {_package_version()}"})
            text = json.dumps(d, indent=2) + "\n"
            write_file_atomic(args.save, lambda fh: fh.write(text), force=args.force)
            print(f"wrote {args.save}")
        return 0
    raise NanoabsError(f"materials: unknown action {args.action!r}; allowed: list, show, fit")


# -- particles, spectrum, hot-carriers -------------------------------------------


PARTICLE_SHAPES = ["sphere", "shell", "spheroid", "ellipsoid", "cylinder", "capped-rod", "rounded-disc"]
_AXIAL_SHAPES = ("spheroid", "cylinder", "capped-rod", "rounded-disc")


def _material_arg(text, option):
    """'Au' or 'Au:mcpeak-2015' (material:dataset) or a number."""
    from .materials import material

    if text is None:
        raise NanoabsError(f"{option} is required for this shape")
    return material(text, extrapolate=_EXTRAPOLATE)


def _particle_from_args(args):
    with warnings.catch_warnings(record=True) as caught:  # plausibility warnings of the constructors
        warnings.simplefilter("always", NanoabsWarning)
        particle = _build_particle(args)
    for w in caught:
        print(f"warning: {w.message}", file=sys.stderr)
    return particle


def _build_particle(args):
    from .particles import CappedRod, Cylinder, Ellipsoid, LayeredSphere, RoundedDisc, Sphere, spheroid

    shape = args.shape
    if shape == "sphere":
        if args.radius is None:
            raise NanoabsError("--radius [nm] is required for --shape sphere")
        return Sphere(_material_arg(args.material, "--material"), args.radius)
    if shape == "shell":
        core = args.core if args.core is not None else args.material
        if args.core_radius is None:
            raise NanoabsError("--core-radius [nm] is required for --shape shell")
        shells = args.shell or []
        thick = args.thickness or []
        if not shells or len(shells) != len(thick):
            raise NanoabsError(f"--shape shell needs one --thickness per --shell: got {len(shells)} --shell and "
                               f"{len(thick)} --thickness")
        return LayeredSphere(_material_arg(core, "--core"), args.core_radius,
                             [(_material_arg(m, "--shell"), t) for m, t in zip(shells, thick)])
    shell = None
    if args.shell:
        if len(args.shell) != 1 or not args.thickness or len(args.thickness) != 1:
            raise NanoabsError(f"a coated {shape} takes exactly one --shell and one --thickness")
        shell = (_material_arg(args.shell[0], "--shell"), args.thickness[0])
    if shape == "spheroid":
        if args.length is None or args.diameter is None:
            raise NanoabsError("--length and --diameter [nm] are required for --shape spheroid")
        return spheroid(_material_arg(args.material, "--material"), args.length, args.diameter, shell=shell)
    if shape in ("cylinder", "capped-rod", "rounded-disc"):
        if args.length is None or args.diameter is None:
            raise NanoabsError(f"--length and --diameter [nm] are required for --shape {shape}")
        kind = {"cylinder": Cylinder, "capped-rod": CappedRod, "rounded-disc": RoundedDisc}[shape]
        return kind(_material_arg(args.material, "--material"), args.length, args.diameter, shell=shell)
    if shape == "ellipsoid":
        if args.semi_axes is None:
            raise NanoabsError("--semi-axes A,B,C [nm] is required for --shape ellipsoid")
        try:
            axes = [float(v) for v in args.semi_axes.split(",")]
        except ValueError:
            raise NanoabsError(f"--semi-axes = {args.semi_axes!r}: expected three numbers A,B,C in nm") from None
        if len(axes) != 3:
            raise NanoabsError(f"--semi-axes = {args.semi_axes!r}: expected exactly three numbers A,B,C in nm")
        return Ellipsoid(_material_arg(args.material, "--material"), axes, shell)
    raise NanoabsError(f"--shape = {shape!r}: allowed: {', '.join(PARTICLE_SHAPES)}")


def _medium_arg(text):
    from .materials import material

    return material(text, extrapolate=_EXTRAPOLATE)


#: Set from --extrapolate for the running command: every material it reads may use the fitted
#: Drude-Lorentz model outside its tabulated range (the metadata says so where it does).
_EXTRAPOLATE = False


def _named_material(text):
    """A material name as given, or (with --extrapolate) the material object that extrapolates."""
    return _medium_arg(text) if _EXTRAPOLATE else text


def _spectrum_from_args(args, particle=None):
    from .optics import spectrum

    particle = _particle_from_args(args) if particle is None else particle
    wl = parse_range(args.wl)
    where, pol = _where_from_args(args)
    spec = spectrum(particle, wl, method=args.method, polarization=pol,
                    surface_damping=not args.no_surface_damping, damping_A=args.damping_a, **where)
    return particle, spec


def _where_from_args(args):
    """({"medium": ...} or {"environment": ...}, particle polarization) from the CLI options.

    ``--polarization s|p`` is the polarisation of oblique light in a planar environment; any
    other value is the particle's (rods: long|short|random).
    """
    from . import environments as env

    pol = args.polarization
    light = pol if pol in ("s", "p") else None
    particle_pol = (pol if light is None and pol else ("long" if args.shape in _AXIAL_SHAPES else "x"))
    planar = {k: getattr(args, k) for k in ("substrate", "superstrate", "gap", "depth", "spacer", "incidence",
                                             "angle") if getattr(args, k, None) is not None}
    if not planar:
        if light is not None:
            raise NanoabsError(f"--polarization {pol}: s or p is the polarisation of oblique light on a substrate; "
                               "give --substrate (and --angle)")
        return {"medium": _medium_arg(args.medium or "water")}, particle_pol
    if args.medium is not None:
        raise NanoabsError("--medium and --substrate: give one (the substrate options describe the host)")
    if "substrate" not in planar:
        raise NanoabsError(f"--{next(iter(planar))} needs --substrate MATERIAL")
    if "depth" in planar and "gap" in planar:
        raise NanoabsError("--depth (buried particle) and --gap (particle on the surface): give one")
    planar.update({k: _named_material(planar[k]) for k in ("substrate", "superstrate") if k in planar})
    kw = {"superstrate": planar.get("superstrate", "air"), "incidence": planar.get("incidence", "front"),
          "angle_deg": planar.get("angle", 0.0), "polarization": light or "s"}
    if "depth" in planar:
        if "spacer" in planar:
            raise NanoabsError("--spacer applies to a particle on the surface (--gap), not to a buried one")
        return {"environment": env.buried(planar["substrate"], depth_nm=planar["depth"], **kw)}, particle_pol
    return {"environment": env.on_substrate(planar["substrate"], gap_nm=planar.get("gap", 0.0),
                                            spacer=planar.get("spacer"), **kw)}, particle_pol


def _print_warnings(meta):
    for w in meta.get("warnings", []):
        print(f"warning: {w}", file=sys.stderr)


def _check_outputs(args):
    """Every output of a command is checked before any work (nothing is half-written)."""
    from .export import check_file_target, check_writable

    if args.output is not None:
        check_writable(args.output, force=args.force)
    if getattr(args, "plot", None) is not None:
        check_file_target(args.plot, force=args.force, suffixes=(".png", ".svg"), what="plot file")


def _cmd_spectrum(args) -> int:
    _check_outputs(args)
    particle, spec = _spectrum_from_args(args)
    _print_warnings(spec.metadata)
    summ = spec.summary()
    cols = spec.to_arrays()
    if args.output:
        spec.write(args.output, force=args.force)
        print(f"wrote {args.output}")
    else:
        step = max(1, len(cols["wavelength_nm"]) // 20)
        print(f"{'wavelength_nm':>13s} {'sigma_abs_m2':>13s} {'sigma_sca_m2':>13s} {'q_abs':>8s} {'q_sca':>8s}")
        for wl, sa, ss, qa, qs in zip(*(cols[c][::step] for c in ("wavelength_nm", "sigma_abs_m2", "sigma_sca_m2",
                                                                   "q_abs", "q_sca"))):
            print(f"{wl:13.1f} {sa:13.4e} {ss:13.4e} {qa:8.4f} {qs:8.4f}")
    fwhm = summ["fwhm_nm"]
    peak = (f"absorption peak {summ['peak_wavelength_nm']:.1f} nm" if summ["peak_status"] == "peak"
            else f"no absorption peak in the window ({summ['peak_status']})")
    width = f"FWHM {fwhm:.1f} nm" if fwhm == fwhm else f"FWHM not given ({summ['fwhm_status']})"
    print(f"method {spec.metadata['method']}; {peak}, {width}, "
          f"largest sigma_abs {summ['peak_sigma_abs_m2']:.4g} m^2, Q_abs {summ['peak_q_abs']:.3g}, "
          f"absorbed fraction {summ['absorbed_fraction_at_peak']:.3f}")
    if args.plot:
        from .plotting import plot_spectra, save_figure

        fig = plot_spectra([("absorption", spec.wavelength_nm, spec.sigma_abs_m2),
                            ("scattering", spec.wavelength_nm, spec.sigma_sca_m2),
                            ("extinction", spec.wavelength_nm, spec.sigma_ext_m2)],
                           ylabel="cross-section [nm²]", scale=1e18,
                           title=_title(spec.metadata["particle"]))
        save_figure(fig, args.plot, force=args.force)
        print(f"wrote {args.plot}")
    return 0


def _title(p):
    parts = [p.get("shape", "")]
    for k, v in p.items():
        if k != "shape" and not isinstance(v, (dict, list)):
            parts.append(f"{k}={v}")
    return ", ".join(parts)[:90]


def _spectrum_source(text, total_irradiance=None):
    """--spectrum am1.5g|am1.5d|am0|blackbody:T|flat:VALUE|FILE.csv -> Illumination."""
    from . import illumination as il

    low = text.lower()
    if low in ("am1.5g", "am1.5d", "am0"):
        return il.solar(low)
    if low.startswith("blackbody:"):
        try:
            T = float(low.split(":", 1)[1])
        except ValueError:
            raise NanoabsError(f"--spectrum {text!r}: expected blackbody:TEMPERATURE_K") from None
        return il.blackbody(T, total_irradiance_W_m2=total_irradiance)
    if low.startswith("flat:"):
        try:
            return il.flat(float(low.split(":", 1)[1]))
        except ValueError:
            raise NanoabsError(f"--spectrum {text!r}: expected flat:W_PER_M2_PER_NM") from None
    from .export import check_input_file

    return il.from_csv(check_input_file(text, "--spectrum file"))


def _illumination_from_args(args):
    from . import illumination as il

    given = [a for a in ("irradiance", "laser_power", "spectrum") if getattr(args, a) is not None]
    if len(given) > 1:
        raise NanoabsError("give only one of --irradiance, --laser-power, --spectrum")
    if args.irradiance is not None:
        src = il.monochromatic(args.irradiance)
    elif args.laser_power is not None:
        if args.beam_radius is None:
            raise NanoabsError("--laser-power needs --beam-radius (1/e^2 intensity radius) [nm]")
        src = il.laser(args.laser_power, args.beam_radius)
    elif args.spectrum is not None:
        src = _spectrum_source(args.spectrum, args.total_irradiance)
    else:
        raise NanoabsError("give the illumination: --irradiance W/m^2, --laser-power W with --beam-radius nm, "
                           "or --spectrum am1.5g|am1.5d|am0|blackbody:T|flat:VALUE|FILE.csv")
    if args.band:
        lo, hi = parse_range(args.band, "--band", need_step=False)
        src = src.filtered(lo, hi)
    return src


def _cmd_hot_carriers(args) -> int:
    from .detector import hot_carrier_estimate
    from .hotcarriers import SAFETY_CAUTION

    _check_outputs(args)
    if args.total_irradiance is not None and not str(args.spectrum or "").startswith("blackbody"):
        raise NanoabsError("--total-irradiance scales a blackbody: give it with --spectrum blackbody:T_K")
    if (args.barrier is None) == (args.schottky is None):
        raise NanoabsError("give exactly one of --barrier EV or --schottky METAL/SEMICONDUCTOR (e.g. Au/Si, Au/p-Si)")
    if args.barrier is not None and args.area is not None:
        raise NanoabsError("--area needs --schottky (dark current uses the semiconductor's Richardson constant)")
    illum = _illumination_from_args(args)
    particle, spec = _spectrum_from_args(args)
    res = hot_carrier_estimate(spec, particle, illum, barrier_eV=args.barrier, contact=args.schottky,
                               carrier=args.carrier if args.barrier is not None else None,
                               fermi_energy_eV=args.fermi_energy, attenuation_length_nm=args.attenuation_length,
                               yield_model=args.yield_model, geometry=args.geometry, generation=args.generation,
                               momentum_factor=args.momentum_factor, contact_fraction=args.contact_fraction,
                               surface_emission=args.surface_emission, fermi_smearing=args.fermi_smearing,
                               density_per_um2=args.density, area_um2=args.area, temperature_K=args.temperature,
                               bias_V=args.bias, doping_cm3=args.doping, load_ohm=args.load,
                               thermal_conductivity_W_mK=args.thermal_conductivity)
    _print_warnings(res.metadata)
    _print_hot_carrier_summary(res, illum)
    print("caution: " + " ".join(SAFETY_CAUTION.split()))
    if args.output:
        res.write(args.output, force=args.force)
        print(f"wrote {args.output}")
    if args.plot:
        from .plotting import plot_detector, save_figure

        save_figure(plot_detector(res).figure, args.plot, force=args.force)
        print(f"wrote {args.plot}")
    return 0


def _print_hot_carrier_summary(res, illum):
    t, sch = res.totals, res.metadata["schottky"]
    carrier = sch["carrier"]
    name = sch.get("contact", "barrier")
    print(f"{name}: {sch['barrier_eV']:.3g} eV for {carrier}s ({sch['barrier_source']}); cut-off "
          f"{t['cutoff_wavelength_nm']:.0f} nm; illumination: {illum.description}")
    if "absorbed_power_W" in t:
        print(f"band-integrated absorbed power per particle: {t['absorbed_power_W']:.4g} W; "
              f"photocurrent per particle: {t['photocurrent_A']:.4g} A")
        rates = {k: t.get(f"injected_{carrier}_rate_{k}_per_s", np.nan)
                 for k in ("intraband_bulk", "intraband_surface", "interband")}
        chans = ", ".join(f"{k} {v:.3g}" for k, v in rates.items() if np.isfinite(v))
        if chans:
            print(f"injected {carrier}s per second by channel: {chans}")
        vol, surf = (t.get(f"injected_{carrier}_rate_{k}_per_s", np.nan) for k in ("volume", "surface"))
        print(f"injected {carrier}s per second: volume {vol:.3g}, surface {surf:.3g} "
              f"(surface emission: {sch.get('surface_emission', 'cone')})")
    else:
        print(f"peak absorbed power per particle: {t['peak_absorbed_power_W']:.4g} W at "
              f"{t['peak_absorbed_power_wavelength_nm']:g} nm; peak photocurrent {t['peak_photocurrent_A']:.4g} A")
    if "photocurrent_density_A_m2" in t:
        print(f"array photocurrent density: {t['photocurrent_density_A_m2']:.4g} A/m^2")
    if "peak_responsivity_A_W" in t:
        print(f"responsivity at peak: {t['peak_responsivity_A_W']:.4g} A/W at "
              f"{t['peak_responsivity_wavelength_nm']:g} nm")
    if "dark_current_A" in t:
        print(f"dark current {t['dark_current_A']:.4g} A (saturation current {t['saturation_current_A']:.4g} A) "
              f"at {sch['bias_V']:g} V, {sch['temperature_K']:g} K")
    if "peak_specific_detectivity_Jones" in t:
        print(f"peak D* {t['peak_specific_detectivity_Jones']:.4g} Jones at "
              f"{t['peak_specific_detectivity_wavelength_nm']:g} nm (NEP "
              f"{t['noise_equivalent_power_at_peak_W_Hz05']:.4g} W/Hz^0.5)")
    if "temperature_rise_K" in t:
        print(f"steady-state temperature rise of one particle: {t['temperature_rise_K']:.3g} K "
              f"({t['temperature_rise_basis']})")
    else:
        print("temperature rise: not estimated (no thermal conductivity for this medium; "
              "give --thermal-conductivity)")


def _add_extrapolate(p):
    p.add_argument("--extrapolate", action="store_true",
                   help="beyond a table's range, use its fitted Drude-Lorentz model (metadata says where)")


def _add_particle_options(p):
    g = p.add_argument_group("particle (lengths in nm)")
    g.add_argument("--shape", required=True, choices=PARTICLE_SHAPES)
    g.add_argument("--material", help="particle material, e.g. Au or Au:mcpeak-2015 (material:dataset)")
    g.add_argument("--radius", type=float, help="sphere radius [nm]")
    g.add_argument("--core", help="shell: core material (default --material)")
    g.add_argument("--core-radius", type=float, help="shell: core radius [nm]")
    g.add_argument("--shell", action="append", help="shell material (repeat for more shells, core outward); "
                   "spheroid, ellipsoid: one confocal coating; cylinder, capped-rod, rounded-disc: one uniform "
                   "coating")
    g.add_argument("--thickness", type=float, action="append", help="shell thickness [nm] (one per --shell)")
    g.add_argument("--length", type=float, help="spheroid, cylinder, capped-rod, rounded-disc: extent along "
                   "the symmetry axis (tip to tip) [nm]")
    g.add_argument("--diameter", type=float, help="spheroid, cylinder, capped-rod, rounded-disc: diameter [nm]")
    g.add_argument("--semi-axes", help="ellipsoid: A,B,C semi-axes along x,y,z [nm]")
    g.add_argument("--polarization", help="spheroid, cylinder, capped-rod, rounded-disc: long|short|random; "
                   "ellipsoid: x|y|z|random")
    g.add_argument("--medium", help="homogeneous host: name or refractive index (default water)")
    g.add_argument("--wl", default="400:1000:2",
                   help="wavelengths START:STOP:STEP or a list V1,V2,... [nm] (default 400:1000:2)")
    g.add_argument("--method", default="auto", help="auto|mie|miepython|quasistatic|mlwa|tmatrix")
    e = p.add_argument_group("device environment (instead of --medium; lengths in nm)")
    e.add_argument("--substrate", help="planar substrate material, e.g. Si, GaAs, SiO2, TiO2")
    e.add_argument("--superstrate", help="medium above the substrate (default air)")
    e.add_argument("--gap", type=float, help="particle on the substrate: its lowest point this far above the "
                                             "surface (or the spacer) [nm]")
    e.add_argument("--depth", type=float, help="particle buried in the substrate: centre this deep [nm]")
    e.add_argument("--spacer", help="thin planar layer on the substrate, MATERIAL:THICKNESS_NM (e.g. SiO2:3)")
    e.add_argument("--incidence", help="light from the superstrate (front, default) or through the substrate (back)")
    e.add_argument("--angle", type=float, help="angle of incidence in the incidence medium [deg] (default 0); "
                                               "give --polarization s or p with it")
    g.add_argument("--no-surface-damping", action="store_true", help="turn the size correction off")
    g.add_argument("--damping-a", type=float, default=1.0, help="surface-scattering parameter A (default 1)")
    _add_extrapolate(g)
    p.add_argument("-o", "--output", help="write CSV (+ JSON sidecar) or .json")
    p.add_argument("--force", action="store_true", help="overwrite existing output files")


def _register_particle_commands(sub):
    s = sub.add_parser("spectrum", help="absorption/scattering spectrum of one particle")
    _add_particle_options(s)
    s.add_argument("--plot", help="save a plot of the cross-sections (.png or .svg)")
    s.set_defaults(func=_cmd_spectrum)

    h = sub.add_parser("hot-carriers", help="absorbed power, hot-carrier injection, photocurrent, noise")
    _add_particle_options(h)
    g = h.add_argument_group("illumination")
    g.add_argument("--irradiance", type=_irradiance_arg,
                   help="monochromatic irradiance at every wavelength: W/m^2, or with a unit (1mW/cm2)")
    g.add_argument("--laser-power", type=float, help="laser power [W] (Gaussian beam, peak irradiance)")
    g.add_argument("--beam-radius", type=float, help="1/e^2 intensity radius of the beam [nm]")
    g.add_argument("--spectrum", help="am1.5g | am1.5d | am0 | blackbody:T_K | flat:W_m2_nm | FILE.csv")
    g.add_argument("--total-irradiance", type=float, help="blackbody: scale to this total [W/m^2]")
    g.add_argument("--band", help="keep only START:STOP [nm] of the illumination (band filter)")
    d = h.add_argument_group("detector")
    d.add_argument("--barrier", type=float, help="Schottky barrier height [eV], used as given")
    d.add_argument("--carrier", default="electron", choices=["electron", "hole"],
                   help="with --barrier: carriers that cross (electron: n-type, hole: p-type)")
    d.add_argument("--schottky", help="tabulated metal/semiconductor pair: Au/Si (= Au/n-Si), Au/p-Si, PtSi/p-Si, "
                   "Au/GaAs, Au/TiO2, Au/ZnO, ...")
    d.add_argument("--fermi-energy", type=float, help="Fermi energy of the metal [eV] (default tabulated)")
    d.add_argument("--attenuation-length", type=float,
                   help="constant hot-carrier attenuation length [nm] (default: tabulated, energy dependent)")
    d.add_argument("--yield-model", default="escape-cone", choices=["escape-cone", "fowler"])
    d.add_argument("--geometry", default="particle", choices=["particle", "flat"],
                   help="escape cone at the curved particle wall (default) or the flat-interface form")
    d.add_argument("--generation", default="band-edges", choices=["band-edges", "flat"],
                   help="interband carriers from the d-band edge (default) or all carriers flat over [0, hv]")
    d.add_argument("--momentum-factor", type=float, default=1.0, help="empirical emission multiplier")
    d.add_argument("--contact-fraction", type=float, default=1.0,
                   help="fraction of surface on the semiconductor (ellipsoids: the facet with the lowest z)")
    d.add_argument("--surface-emission", default="field", choices=["field", "cone"],
                   help="surface-assisted absorption emitted by the normal field at the contact (default) "
                        "or through the escape cone like the volume channels")
    d.add_argument("--fermi-smearing", action="store_true",
                   help="smear the threshold with the Fermi-Dirac occupation at --temperature (default: sharp)")
    d.add_argument("--density", type=float, help="particles per um^2 (adds array columns)")
    d.add_argument("--area", type=float, help="device area [um^2]: adds dark current, NEP and D* (needs --density)")
    d.add_argument("--temperature", type=float, default=300.0, help="device temperature [K] (default 300)")
    d.add_argument("--bias", type=float, default=0.0,
                   help="bias [V]: negative = reverse bias, positive = forward (default 0)")
    d.add_argument("--doping", type=float, default=1e15, help="semiconductor doping [cm^-3] (default 1e15)")
    d.add_argument("--load", type=float, help="load resistance [ohm] (adds its Johnson noise)")
    d.add_argument("--thermal-conductivity", type=float, help="of the surroundings [W/(m K)]")
    d.add_argument("--plot", help="save responsivity and D* vs wavelength with the cut-off (.png or .svg)")
    h.set_defaults(func=_cmd_hot_carriers)

    x = sub.add_parser("export-generation", help="carrier generation rate G(r) inside a sphere, or inside a "
                                                 "cylinder, capped rod, rounded disc or spheroid (method tmatrix) "
                                                 "in a homogeneous host, for a device simulator")
    _add_particle_options(x)
    x.add_argument("--irradiance", required=True,
                   help="incident irradiance: W/m^2, or with a unit (1mW/cm2, 10W/m2)")
    x.add_argument("--points", type=int, default=50, help="radial points per layer (default 50); bodies of "
                   "revolution: bins in polar angle and in fractional radius (at most 200)")
    x.set_defaults(func=_cmd_export_generation)


def _irradiance_arg(text):
    """argparse type: an irradiance with an optional unit, in W/m^2 (errors become one line)."""
    try:
        return parse_irradiance(text)
    except NanoabsError as exc:
        raise argparse.ArgumentTypeError(str(exc)) from None


def _cmd_export_generation(args) -> int:
    from .export import check_writable, write_export
    from .handoff import GENERATION_UNITS, absorbed_photon_rate, generation_profile

    if not args.output:
        raise NanoabsError("-o/--output FILE.csv is required for export-generation")
    check_writable(args.output, force=args.force)
    irradiance = parse_irradiance(args.irradiance)
    particle = _particle_from_args(args)
    _, spec = _spectrum_from_args(args, particle)
    _print_warnings(spec.metadata)
    frame = generation_profile(spec, particle, irradiance, n_points=args.points)
    sphere = particle.shape in ("sphere", "layered sphere")
    meta = {"what": "carrier generation rate inside the particle (one electron-hole pair per absorbed "
                    "photon), " + ("angle-averaged internal field (on or in a planar stack: the field of the "
                                   "multipole solution there)" if sphere else
                                   "T-matrix internal field averaged over ring-shaped cells about the "
                                   "symmetry axis (z_nm along it, rho_nm from it)"),
            "irradiance_W_m2": irradiance, "spectrum": spec.metadata,
            "absorbed_photon_rate_per_s": absorbed_photon_rate(spec, irradiance).tolist()}
    for key in ("energy_balance_relative_error", "profile_approximation"):
        if key in frame.attrs:
            meta[key] = frame.attrs[key]
    write_export(frame, args.output, metadata=meta, units=GENERATION_UNITS, force=args.force)
    print(f"wrote {args.output}: G(r) at {len(spec.wavelength_nm)} wavelength(s), "
          f"{len(frame) // len(spec.wavelength_nm)} {'radii' if sphere else 'cells'}; peak G {frame['generation_rate_cm3_s'].max():.3g} "
          "cm^-3 s^-1")
    return 0


def _parse_values(text, name):
    """'40:100:5' (start:stop:step, inclusive) or '20' or '20,30,40' -> array [nm]."""
    t = str(text)
    if t.count(":") == 2:
        return parse_range(t, name)
    return _parse_list(t, name, increasing=False)


def _sweep_params(items):
    """--param NAME=VALUES (repeatable, each name once) -> {name: array}."""
    params = {}
    for item in items or []:
        key, sep, val = item.partition("=")
        key = key.strip()
        if not sep:
            raise NanoabsError(f"--param {item!r}: expected NAME=VALUES, e.g. length_nm=40:100:5")
        if key in params:
            raise NanoabsError(f"--param {key} is given twice: give each parameter once (comma-separate "
                               "several values, e.g. radius_nm=10,20,40)")
        if key in ("material", "core_material", "shell", "core"):
            params[key] = [_table_or_material(v.strip()) for v in val.split(",")]
        else:
            params[key] = _parse_values(val, f"--param {key}")
    if not params:
        raise NanoabsError("give at least one --param NAME=VALUES, e.g. --param radius_nm=10:80:5")
    return params


def _table_or_material(text):
    """A material name, or a user table when the text names a .csv file."""
    from .export import check_input_file
    from .materials import load_table

    if str(text).lower().endswith(".csv"):
        return load_table(check_input_file(text, "material table"))
    return _named_material(text)


def _cmd_sweep(args) -> int:
    from . import design
    from .export import check_file_target, check_writable

    if args.output is not None:  # an empty -o '' is refused, not read as "no output"
        check_writable(args.output, force=args.force, netcdf=True)
    if args.plot is not None:
        check_file_target(args.plot, force=args.force, suffixes=(".png", ".svg"), what="plot file")
    params = _sweep_params(args.param)
    wl = parse_range(args.wl)
    kw = dict(material=_table_or_material(args.material), medium=_medium_arg(args.medium), method=args.method,
              surface_damping=not args.no_surface_damping, progress=not args.quiet and sys.stderr.isatty(),
              executor="processes" if args.processes else None)
    if args.core:
        kw["core"] = _table_or_material(args.core)
    if args.polarization:
        kw["polarization"] = args.polarization
    if args.max_points is not None:
        kw["max_points"] = args.max_points
    netcdf = bool(args.output) and args.output.lower().endswith(".nc")
    res = design.sweep(args.shape, params, wl, out=None if netcdf else args.output, force=args.force, **kw)
    if netcdf:
        from .dataset import sweep_dataset, write_netcdf

        write_netcdf(sweep_dataset(res), args.output, force=args.force)
    if args.output:
        print(f"wrote {args.output}")
    if hasattr(res, "columns"):
        _report_sweep(res, args)
    else:
        skipped = " and no --plot drawn" if args.plot else ""
        print(f"the table is larger than the memory budget: peaks not listed{skipped}; read {res} in pieces "
              "(pandas.read_csv(..., chunksize=...))")
    return 0


def _report_sweep(res, args):
    """Peak per design (and the map) of a sweep table; nothing is averaged over a parameter."""
    swept = [n for n, v in res.attrs["metadata"]["parameters"].items() if len(v) > 1]
    if len(swept) <= 1:
        pcols = [c for c in res.columns if c.endswith("_nm") and c != "wavelength_nm" and res[c].nunique() > 1]
        key = pcols[0] if pcols else "design_id"
        label = key.replace("_nm", " [nm]")
    else:  # several parameters vary: one line (and one map row) per design
        key, label = "design_id", f"design_id ({' x '.join(swept)}; first varies slowest)"
    from .optics import _peak, _peak_status

    grid = res.pivot_table(index=key, columns="wavelength_nm", values="sigma_abs_m2").sort_index()
    wl = grid.columns.values
    peaks = [f"absorption peak {p:.1f} nm" if p == p else _peak_status(wl, row)
             for p, row in zip((_peak(wl, row) for row in grid.values), grid.values)]
    if key == "design_id" and swept:
        first = res.drop_duplicates("design_id").set_index("design_id")
        for v, pk in zip(grid.index, peaks):
            what = ", ".join(f"{n} = {_fmt_value(first.at[v, n])}" for n in swept)
            print(f"design {v} ({what}): {pk}")
    else:
        for v, pk in zip(grid.index, peaks):
            print(f"{key} = {v:g}: {pk}")
    if args.plot:
        from .plotting import plot_map, save_figure

        save_figure(plot_map(grid.columns.values, grid.index.values, grid.values * 1e18, param_label=label,
                             value_label="absorption cross-section [nm²]"), args.plot, force=args.force)
        print(f"wrote {args.plot}")


def _fmt_value(v):
    return f"{v:g}" if isinstance(v, (float, np.floating)) else str(v)


def _cmd_search(args) -> int:
    from . import design
    from .export import check_writable
    from .hotcarriers import schottky_barrier

    if args.output is not None:  # an empty -o '' is refused, not read as "no output"
        check_writable(args.output, force=args.force)
    if args.band and (args.center or args.width):
        raise NanoabsError("give either --band LO:HI (repeatable) or --center and --width")
    if args.band:
        b = []
        for text in args.band:
            lo, hi = parse_range(text, "--band", need_step=False)
            b.append(design.band(lo_nm=lo, hi_nm=hi))
    else:
        b = [design.band(center_nm=args.center, width_nm=args.width)]
    barrier, carrier = None, args.carrier
    if args.schottky:
        from .contacts import contact

        if args.barrier is not None:
            raise NanoabsError("give only one of --barrier EV or --schottky METAL/SEMICONDUCTOR")
        barrier = float(schottky_barrier(args.schottky)[0])
        carrier = contact(args.schottky).carrier
    elif args.barrier is not None:
        barrier = args.barrier
    if args.spectrum and args.irradiance is not None:
        raise NanoabsError("give only one of --spectrum, --irradiance")
    illum = None
    if args.irradiance is not None:
        from . import illumination as il

        illum = il.monochromatic(args.irradiance)
    elif args.spectrum:
        illum = _spectrum_source(args.spectrum)
    ranked = design.search(b, families=[f.strip() for f in args.families.split(",")],
                           objective=args.objective, materials=[_named_material(m.strip()) for m in args.materials.split(",")],
                           medium=_medium_arg(args.medium), illumination=illum, barrier_eV=barrier,
                           max_size_nm=args.max_size, min_shell_nm=args.min_shell, top=args.top,
                           progress=not args.quiet and sys.stderr.isatty(), combine=args.combine,
                           peak_in_band=not args.any_peak, carrier=carrier)
    fom = ranked.attrs.get("figure_of_merit", {})
    bands = ", ".join(f"{lo:g}-{hi:g}" for lo, hi in b)
    print(f"band(s) {bands} nm; objective {args.objective} [{fom.get('unit', '')}]"
          + (f", {args.combine} band" if len(b) > 1 else ""))
    _print_warnings(ranked.attrs.get("metadata", {}))
    cols = [c for c in ("rank", "family", "material", "radius_nm", "core_radius_nm", "thickness_nm",
                        "length_nm", "diameter_nm", "peak_wavelength_nm", "figure_of_merit",
                        "absorbed_fraction", "validity", "recheck_method", "recheck_peak_wavelength_nm")
            if c in ranked.columns]
    with __import__("pandas").option_context("display.width", 160, "display.max_columns", 20):
        print(ranked[cols].to_string(index=False, float_format=lambda v: f"{v:.4g}"))
    if args.output:
        design.write(ranked, args.output, force=args.force)
        print(f"wrote {args.output}")
    return 0


def _register_design_commands(sub):
    w = sub.add_parser("sweep", help="spectra over a grid of sizes (tidy table, map)")
    _add_extrapolate(w)
    w.add_argument("--shape", required=True, choices=["sphere", "shell", "spheroid", "ellipsoid"])
    w.add_argument("--param", action="append", help="NAME=VALUES, e.g. length_nm=40:100:5 or diameter_nm=20 "
                   "(names: radius_nm, core_radius_nm, thickness_nm, length_nm, diameter_nm, aspect_ratio, "
                   "a_nm, b_nm, c_nm, medium_index)")
    w.add_argument("--material", default="Au", help="particle (or shell) material or a user table FILE.csv "
                   "(default Au)")
    w.add_argument("--core", help="shell: core material or FILE.csv (default SiO2)")
    w.add_argument("--medium", default="water")
    w.add_argument("--polarization")
    w.add_argument("--method", default="auto")
    w.add_argument("--no-surface-damping", action="store_true")
    w.add_argument("--wl", default="400:1000:2", help="START:STOP:STEP or a list V1,V2,... [nm]")
    w.add_argument("--processes", action="store_true", help="run chunks on two local processes")
    w.add_argument("--max-points", type=int, help="allow a sweep of more than 1e8 designs x wavelengths")
    w.add_argument("--plot", help="save a wavelength x parameter map (.png/.svg)")
    w.add_argument("-o", "--output", help="stream the table to this CSV (+ JSON; resumes if interrupted), or "
                                          "write an N-D netCDF file (.nc, needs the xarray extra)")
    w.add_argument("--force", action="store_true")
    w.add_argument("--quiet", action="store_true", help="no progress bar")
    w.set_defaults(func=_cmd_sweep)

    q = sub.add_parser("search", help="ranked particle designs for a target band")
    _add_extrapolate(q)
    q.add_argument("--band", action="append", help="band edges LO:HI [nm]; repeat for several bands")
    q.add_argument("--center", type=float, help="band centre [nm] (with --width)")
    q.add_argument("--width", type=float, help="band width [nm]")
    q.add_argument("--families", default="sphere,shell,rod", help="comma list: sphere, shell, rod, disc, cylinder, "
                   "capped-rod (the last two: coarse stage on the equal-volume spheroid, recheck by T-matrix)")
    q.add_argument("--objective", default="sigma_abs",
                   help="sigma_abs | sigma_abs_per_volume | q_abs | absorbed_fraction | injection | selectivity")
    q.add_argument("--combine", default="worst", help="several bands: worst | mean (default worst)")
    q.add_argument("--any-peak", action="store_true",
                   help="also rank designs whose absorption peak lies outside the band(s)")
    q.add_argument("--materials", default="Au", help="comma list of metals")
    q.add_argument("--medium", default="water")
    q.add_argument("--max-size", type=float, default=150.0, help="largest outer dimension [nm]")
    q.add_argument("--min-shell", type=float, default=2.0, help="thinnest shell [nm]")
    q.add_argument("--barrier", type=float, help="injection: Schottky barrier [eV]")
    q.add_argument("--schottky", help="injection: tabulated pair, e.g. Au/Si (n-type: electrons) or Au/p-Si "
                                      "(p-type: holes)")
    q.add_argument("--carrier", default="electron", choices=["electron", "hole"],
                   help="injection with --barrier: carriers that cross (electron: n-type, hole: p-type); "
                        "--schottky sets it from the pair")
    q.add_argument("--spectrum", help="injection: am1.5g | am1.5d | am0 | blackbody:T | flat:V | FILE.csv")
    q.add_argument("--irradiance", type=_irradiance_arg,
                   help="injection: monochromatic irradiance, W/m^2 or with a unit (1mW/cm2)")
    q.add_argument("--top", type=int, default=10)
    q.add_argument("-o", "--output", help="write the ranked table (CSV + JSON)")
    q.add_argument("--force", action="store_true")
    q.add_argument("--quiet", action="store_true")
    q.set_defaults(func=_cmd_search)


def _cmd_run(args) -> int:
    from .study import run_study

    summary = run_study(args.study, args.output, force=args.force,
                        progress=not args.quiet and sys.stderr.isatty())
    print(f"wrote report {summary.parent}/ (summary: {summary})")
    return 0


def _cmd_demo(args) -> int:
    from .study import demo_study_path, run_study

    print(f"running the demo study {demo_study_path().name} (an invented lab and device)")
    summary = run_study(demo_study_path(), args.output, force=args.force,
                        progress=not args.quiet and sys.stderr.isatty())
    print(f"wrote report {summary.parent}/ (summary: {summary})")
    return 0


def _register_study_commands(sub):
    r = sub.add_parser("run", help="run a study file (TOML) and write a report folder")
    r.add_argument("study", help="study file (.toml); see README 'Study files'")
    r.add_argument("-o", "--output", required=True, help="report folder")
    r.add_argument("--force", action="store_true", help="write into an existing non-empty folder")
    r.add_argument("--quiet", action="store_true", help="no progress bars")
    r.set_defaults(func=_cmd_run)
    d = sub.add_parser("demo", help="run the shipped demo study (an invented sub-bandgap Si detector)")
    d.add_argument("-o", "--output", default="nanoabs-demo", help="report folder (default nanoabs-demo)")
    d.add_argument("--force", action="store_true", help="write into an existing non-empty folder")
    d.add_argument("--quiet", action="store_true", help="no progress bars")
    d.set_defaults(func=_cmd_demo)


class _VersionAction(argparse.Action):
    """--version: reads the installed version only when asked (importlib.metadata is slow to import)."""

    def __init__(self, option_strings, dest, **kw):
        super().__init__(option_strings, dest, nargs=0, help="show the version and exit", **kw)

    def __call__(self, parser, namespace, values, option_string=None):
        print(f"nanoabs {_package_version()}")
        parser.exit()


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="nanoabs", description="Absorption of metal nanoparticles for hot-carrier "
                "photodetectors: optical constants, spectra, absorbed power, injection estimates.")
    p.add_argument("--version", action=_VersionAction)
    p.add_argument("--debug", action="store_true", help="show tracebacks of internal errors")
    sub = p.add_subparsers(dest="command", parser_class=_Parser)

    m = sub.add_parser("materials", help="list, show or fit the optical-constant datasets")
    m.add_argument("action", nargs="?", choices=["list", "show", "fit"], help="default: list")
    m.add_argument("name", nargs="?", help="material name, e.g. Au")
    m.add_argument("--source", help="dataset key (default: the material's default dataset)")
    _add_extrapolate(m)
    m.add_argument("--wl", help="show: wavelengths START:STOP:STEP [nm]")
    m.add_argument("--plot", help="show: save a plot of n, k, eps', eps'' (.png or .svg)")
    m.add_argument("--range", help="fit: window START:STOP [nm] (default: whole table)")
    m.add_argument("--oscillators", type=int, default=3, help="fit: number of Lorentz terms (default 3)")
    m.add_argument("--no-drude", action="store_true", help="fit: no free-electron term (dielectrics)")
    m.add_argument("--starts", type=int, default=6, help="fit: number of starting points")
    m.add_argument("--save", help="fit: write the parameters to this JSON file")
    m.add_argument("--force", action="store_true", help="overwrite existing output files")
    m.set_defaults(func=_cmd_materials)

    _register_particle_commands(sub)
    _register_design_commands(sub)
    _register_study_commands(sub)

    return p


def _run(argv) -> int:
    from . import export

    global _EXTRAPOLATE
    export.COMMAND_LINE = ["nanoabs", *argv]
    parser = build_parser()
    args = parser.parse_args(argv)
    _EXTRAPOLATE = bool(getattr(args, "extrapolate", False))
    if getattr(args, "func", None) is None:
        parser.print_help()
        return 0
    return int(args.func(args) or 0)


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    debug = "--debug" in argv
    if debug:  # accepted before or after the command
        argv = ["--debug"] + [a for a in argv if a != "--debug"]
    try:
        with warnings.catch_warnings():  # the commands print the cautions themselves ("warning: ...")
            warnings.simplefilter("ignore", NanoabsWarning)
            return _run(argv)
    except NanoabsError as exc:
        print(f"nanoabs: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except BrokenPipeError:  # output piped into e.g. `head`
        return 0
    except KeyboardInterrupt:
        print("nanoabs: interrupted; finished results already written are kept", file=sys.stderr)
        return 130
    except Exception as exc:  # noqa: BLE001 - last-resort guard, no traceback for users
        if debug:
            raise
        msg = " ".join(str(exc).split())
        print(f"nanoabs: internal error: {exc.__class__.__name__}: {msg} (rerun with --debug and "
              "report it)", file=sys.stderr)
        return EXIT_INTERNAL


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
