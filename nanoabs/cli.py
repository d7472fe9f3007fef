"""Command-line interface: a thin layer over the library (no physics here).

Exit codes: 0 success; 2 invalid input or usage (including an output file that
exists without --force); 3 unreadable or malformed data file; 130 interrupted;
1 unexpected internal error (run with --debug for the traceback and report it).
"""

from __future__ import annotations

import argparse
import sys

import numpy as np

from . import __version__
from ._errors import NanoabsError

EXIT_INTERNAL = 1


class _Parser(argparse.ArgumentParser):
    """argparse with one-line errors that exit with code 2."""

    def error(self, message):  # noqa: D401 - argparse API
        raise NanoabsError(f"{self.prog}: {message}")


def parse_range(text: str, name: str = "--wl", *, need_step: bool = True):
    """Parse 'START:STOP:STEP' (or 'START:STOP' when need_step is False) in nm."""
    parts = str(text).split(":")
    want = 3 if need_step else 2
    if len(parts) != want:
        form = "START:STOP:STEP" if need_step else "START:STOP"
        raise NanoabsError(f"{name} = {text!r}: expected {form} in nm, e.g. "
                           f"{'400:900:1' if need_step else '400:1000'}")
    try:
        vals = [float(p) for p in parts]
    except ValueError:
        raise NanoabsError(f"{name} = {text!r}: every field must be a number") from None
    if not all(np.isfinite(vals)) or vals[0] <= 0 or vals[1] <= vals[0]:
        raise NanoabsError(f"{name} = {text!r}: need 0 < START < STOP")
    if need_step:
        if vals[2] <= 0 or vals[2] > vals[1] - vals[0]:
            raise NanoabsError(f"{name} = {text!r}: STEP must be > 0 and no larger than STOP - START")
        n = int(np.floor((vals[1] - vals[0]) / vals[2] + 1e-9)) + 1
        if n > 200_000:
            raise NanoabsError(f"{name} = {text!r}: {n} points; at most 200000 allowed")
        return vals[0] + vals[2] * np.arange(n)
    return vals[0], vals[1]


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
        m = mat.material(args.name, args.source)
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
                      "fitted_by": f"nanoabs {__version__}"})
            text = json.dumps(d, indent=2) + "\n"
            write_file_atomic(args.save, lambda fh: fh.write(text), force=args.force)
            print(f"wrote {args.save}")
        return 0
    raise NanoabsError(f"materials: unknown action {args.action!r}; allowed: list, show, fit")


def build_parser() -> argparse.ArgumentParser:
    p = _Parser(prog="nanoabs", description="Absorption of metal nanoparticles for hot-carrier "
                "photodetectors: optical constants, spectra, absorbed power, injection estimates.")
    p.add_argument("--version", action="version", version=f"nanoabs {__version__}")
    p.add_argument("--debug", action="store_true", help="show tracebacks of internal errors")
    sub = p.add_subparsers(dest="command", parser_class=_Parser)

    m = sub.add_parser("materials", help="list, show or fit the optical-constant datasets")
    m.add_argument("action", nargs="?", choices=["list", "show", "fit"], help="default: list")
    m.add_argument("name", nargs="?", help="material name, e.g. Au")
    m.add_argument("--source", help="dataset key (default: the material's default dataset)")
    m.add_argument("--wl", help="show: wavelengths START:STOP:STEP [nm]")
    m.add_argument("--plot", help="show: save a plot of n, k, eps', eps'' (.png or .svg)")
    m.add_argument("--range", help="fit: window START:STOP [nm] (default: whole table)")
    m.add_argument("--oscillators", type=int, default=3, help="fit: number of Lorentz terms (default 3)")
    m.add_argument("--no-drude", action="store_true", help="fit: no free-electron term (dielectrics)")
    m.add_argument("--starts", type=int, default=6, help="fit: number of starting points")
    m.add_argument("--save", help="fit: write the parameters to this JSON file")
    m.add_argument("--force", action="store_true", help="overwrite existing output files")
    m.set_defaults(func=_cmd_materials)

    return p


def main(argv=None) -> int:
    argv = sys.argv[1:] if argv is None else list(argv)
    debug = "--debug" in argv
    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        if getattr(args, "func", None) is None:
            parser.print_help()
            return 0
        return int(args.func(args) or 0)
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
