"""Full-wave finite-element reference: absorption of a metal particle above a planar interface.

A bench tool, not part of the package and not a test. It solves Maxwell's equations in 3-D with
the general-purpose finite-element library NGSolve (Nedelec elements, netgen meshes) and writes
sigma_abs(lambda) per case as CSV, so that ``bench/fullwave/compare.py`` can hold the package's
substrate methods against a reference that shares none of their code.

Formulation (scattered field; time dependence exp(-i w t), eps'' >= 0)
----------------------------------------------------------------------
* Geometry: the planar interface is the plane z = 0 (superstrate z > 0, substrate z < 0); the
  particle (sphere of radius R, or a spheroid lying flat with its long axis along x) sits above it
  with its lowest point ``gap`` nm above the plane. The computational domain is a ball around the
  origin, closed by a radial perfectly matched layer (complex stretching r -> r + i a (r - R_pml)
  centred on the interface, so the stretched layers stay planar) and a perfectly conducting wall.
* Background E_b: the normally incident plane wave polarised along x with its specular reflection
  and transmission at the single interface, written here from the Fresnel formulas (Born & Wolf,
  Principles of Optics, 7th ed., eqs. 1.5.20-1.5.21 at normal incidence):
  front (from z > 0): E_b = x [exp(-i k1 z) + r exp(i k1 z)] above, x t exp(-i k2 z) below,
  r = (n1 - n2)/(n1 + n2), t = 2 n1/(n1 + n2); back (from z < 0): the same with 1 <-> 2 and z -> -z.
* Scattered field E_s solves curl curl E_s - k0^2 eps E_s = k0^2 (eps - eps_b) E_b (Jin, The
  Finite Element Method in Electromagnetics, 3rd ed., 2014, ch. 9 "scattered-field formulation"),
  with eps - eps_b non-zero only inside the particle.
* Symmetry: at normal incidence with x polarisation the plane x = 0 carries no tangential E
  (perfect electric wall) and y = 0 no tangential H (perfect magnetic wall, the natural boundary
  condition), so only the quarter x > 0, y > 0 is meshed; volume integrals are multiplied by 4.
* sigma_abs = k0 * integral_particle Im(eps) |E_b + E_s|^2 dV / (n_inc |E0|^2): the absorbed power
  per irradiance of the incident wave in the incidence medium (Jackson 1999 eq. 6.127 for the
  dissipated power, I = n c eps0 |E0|^2 / 2) -- the reference the package states in
  ``metadata["sigma_reference"]``.

The permittivities are the package's tabulated bulk values (``nanoabs.materials``, no surface
damping), so a comparison isolates the electromagnetic method.

Usage
-----
    python bench/fullwave/fem_reference.py --list
    python bench/fullwave/fem_reference.py au40_si_front [--order 2] [--wl 480:560:10] [--force]
    python bench/fullwave/fem_reference.py validate_au40_air            # homogeneous vs miepython

Writes bench/fullwave/<case>.csv (refuses to overwrite without --force) with a '#' header of
mesh / order / PML facts. Needs the ``fullwave`` extra (``pip install ngsolve``); CPU only.
"""

from __future__ import annotations

import argparse
import os
import sys
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent

# name: (metal, shape, size [nm], substrate, incidence, default wavelengths [nm])
# shape "sphere": size = radius; "spheroid": size = (length, diameter), long axis along x (the field)
CASES = {
    "au40_si_front": ("Au", "sphere", 40.0, "Si", "front", np.arange(480.0, 551.0, 10.0)),
    "au20_si_front": ("Au", "sphere", 20.0, "Si", "front", np.arange(480.0, 551.0, 10.0)),
    "au40_sio2_front": ("Au", "sphere", 40.0, "SiO2", "front", np.arange(480.0, 551.0, 10.0)),
    "au40_sio2_back": ("Au", "sphere", 40.0, "SiO2", "back", np.arange(480.0, 551.0, 10.0)),
    "au40_tio2_front": ("Au", "sphere", 40.0, "TiO2", "front", np.arange(480.0, 551.0, 10.0)),
    "ag40_sio2_front": ("Ag", "sphere", 40.0, "SiO2", "front", np.arange(320.0, 391.0, 10.0)),
    "au40_si_back": ("Au", "sphere", 40.0, "Si", "back", np.arange(1100.0, 1601.0, 100.0)),
    "ag40_si_front": ("Ag", "sphere", 40.0, "Si", "front", np.arange(345.0, 396.0, 10.0)),
    "au40_tio2_back": ("Au", "sphere", 40.0, "TiO2", "back", np.arange(480.0, 551.0, 10.0)),
    "au80_si_front": ("Au", "sphere", 80.0, "Si", "front", np.arange(470.0, 561.0, 15.0)),
    "aurod100x30_sio2_front": ("Au", "spheroid", (100.0, 30.0), "SiO2", "front", np.arange(620.0, 761.0, 10.0)),
    # (its 650-1050 nm / 50 nm run is kept as aurod100x30_sio2_front_coarse.csv)
    # FEM self-check: substrate = superstrate = air, against miepython
    "validate_au40_air": ("Au", "sphere", 40.0, "air", "front", np.array([500.0, 520.0, 540.0])),
    "validate_au20_air": ("Au", "sphere", 20.0, "air", "front", np.array([520.0])),
}
GAP_NM = {"sphere": 1.0, "spheroid": 2.0}


def index(name, wl):
    """Complex refractive index n + ik (k >= 0) of a package material at vacuum wavelength wl [nm]."""
    if name == "air":
        return 1.0 + 0j
    from nanoabs.materials import material

    return complex(np.sqrt(material(name).permittivity(np.array([wl]))[0]))


def fresnel_background(n1, n2, incidence):
    """Normal-incidence background field E_b,x(z) of one interface at z = 0 (Born & Wolf eq. 1.5.20).

    n1: superstrate (z > 0), n2: substrate (z < 0). Returns (n_inc, f_up(k0, z), f_down(k0, z))
    as functions giving E_b,x for unit incident amplitude; exp(-i w t).
    """
    if incidence == "front":
        r, t = (n1 - n2) / (n1 + n2), 2 * n1 / (n1 + n2)
        up = lambda k0, z, e: e(-1j * k0 * n1 * z) + r * e(1j * k0 * n1 * z)   # noqa: E731
        down = lambda k0, z, e: t * e(-1j * k0 * n2 * z)                         # noqa: E731
        return n1, up, down
    r, t = (n2 - n1) / (n1 + n2), 2 * n2 / (n1 + n2)
    up = lambda k0, z, e: t * e(1j * k0 * n1 * z)                                 # noqa: E731
    down = lambda k0, z, e: e(1j * k0 * n2 * z) + r * e(-1j * k0 * n2 * z)         # noqa: E731
    return n2, up, down


def build_mesh(shape, size, gap, wl_min, n_up, n_down, *, ppw, maxh_particle, maxh_gap, margin, pml_width,
               refine_gap=True, pml_layers=6):
    """Quarter-ball mesh: particle, superstrate, substrate, two PML shells (netgen OCC)."""
    from netgen.meshing import MeshingParameters
    from netgen.occ import X, Y, Axes, Box, Ellipsoid, Glue, OCCGeometry, Pnt, Sphere
    import ngsolve as ng

    if shape == "sphere":
        a = b = c = size
    else:
        a, b, c = size[0] / 2, size[1] / 2, size[1] / 2
    zc = c + gap
    r_in = max(np.sqrt(a**2 + (zc + c) ** 2), zc + c) + margin
    r_out = r_in + pml_width
    big = 2 * r_out
    quarter = Box(Pnt(0, 0, -big), Pnt(big, big, big))
    quarter.faces.Min(X).name = "symx"
    quarter.faces.Min(Y).name = "symy"
    top = Box(Pnt(-big, -big, 0), Pnt(big, big, big))
    inner = Sphere(Pnt(0, 0, 0), r_in)
    outer = Sphere(Pnt(0, 0, 0), r_out)
    outer.faces.name = "outer"
    if shape == "sphere":
        part = Sphere(Pnt(0, 0, zc), a)
    else:
        part = Ellipsoid(Axes(Pnt(0, 0, zc), n=(1, 0, 0), h=(0, 0, 1)), a, b, c)  # r1 along n; seam on y = 0 meshes
    part = part * quarter
    part.mat("particle")
    part.maxh = maxh_particle
    up = (inner * top - part) * quarter
    up.mat("up")
    up.maxh = wl_min / (n_up * ppw)
    down = (inner - top) * quarter
    down.mat("down")
    down.maxh = wl_min / (n_down * ppw)
    pml_up = ((outer - inner) * top) * quarter
    pml_up.mat("pml_up")
    pml_up.maxh = min(wl_min / (n_up * ppw), pml_width / pml_layers)
    pml_down = ((outer - inner) - top) * quarter
    pml_down.mat("pml_down")
    pml_down.maxh = min(wl_min / (n_down * ppw), pml_width / pml_layers)
    geo = OCCGeometry(Glue([part, up, down, pml_up, pml_down]))
    mp = MeshingParameters(maxh=wl_min / ppw, grading=0.3)
    # refine the gap (not in the homogeneous check): points on the particle's underside and on the
    # interface below it, mesh size growing linearly with the distance from the contact point
    rho_gap = np.sqrt(2 * c * gap) if refine_gap else 0.0
    for rho in np.linspace(0.0, 2.0 * rho_gap, 5) if refine_gap else ():
        for phi in (0.1, np.pi / 4, np.pi / 2 - 0.1):
            x, y = rho * np.cos(phi), rho * np.sin(phi)
            for z in (0.0, gap / 2, gap):
                mp.RestrictH(x, y, z, maxh_gap * (1 + rho / rho_gap))
    mesh = ng.Mesh(geo.GenerateMesh(mp=mp))
    facts = dict(r_in_nm=r_in, r_out_nm=r_out, zc_nm=zc, semi_axes_nm=(a, b, c))
    return mesh, facts


def solve_case(name, wavelengths, *, order=2, ppw=5.0, maxh_particle=None, maxh_gap=None, margin=None,
               pml_width=None, alpha=2.0, pml_layers=6, curve=None, progress=True, mesh_only=False):
    """sigma_abs [nm^2] of one case on a wavelength grid; returns (sigma, facts)."""
    import ngsolve as ng
    from ngsolve import pml

    metal, shape, size, sub, inc, _ = CASES[name]
    ng.SetNumThreads(int(os.environ.get("FEM_THREADS", "2")))
    gap = 0.0 if sub == "air" else GAP_NM[shape]
    wl = np.asarray(wavelengths, float)
    n_up = 1.0
    n_down = max(index(sub, w).real for w in wl)
    c = size if shape == "sphere" else size[1] / 2
    maxh_particle = maxh_particle or max(c / 4, 4.0)
    maxh_gap = maxh_gap or max(gap, 1.0)
    wl_min = wl.min()
    margin = margin if margin is not None else 0.12 * wl_min
    pml_width = pml_width if pml_width is not None else 0.3 * wl_min
    if sub == "air":
        gap = 50.0  # any position: homogeneous check; the sphere sits away from the (fictitious) plane
    t0 = time.perf_counter()
    mesh, facts = build_mesh(shape, size, gap, wl_min, n_up, n_down, ppw=ppw, maxh_particle=maxh_particle,
                             maxh_gap=maxh_gap, margin=margin, pml_width=pml_width, refine_gap=sub != "air",
                             pml_layers=pml_layers)
    mesh.Curve(curve or order)
    mesh.SetPML(pml.Radial(origin=(0, 0, 0), rad=facts["r_in_nm"], alpha=1j * alpha), "pml_up|pml_down")
    fes = ng.HCurl(mesh, order=order, complex=True, dirichlet="symx|outer")
    E, v = fes.TnT()
    gfu = ng.GridFunction(fes)
    facts.update(mesh_elements=mesh.ne, ndof=fes.ndof, order=order, ppw=ppw, maxh_particle_nm=maxh_particle,
                 maxh_gap_nm=maxh_gap, margin_nm=margin, pml_width_nm=pml_width, pml_alpha=alpha, pml_layers=pml_layers,
                 gap_nm=0.0 if sub == "air" else gap, mesh_seconds=round(time.perf_counter() - t0, 1))
    print(f"{name}: {mesh.ne} elements, {fes.ndof} dof, mesh {facts['mesh_seconds']} s", file=sys.stderr)
    if mesh_only:
        return None, facts
    sig = np.empty(len(wl))
    it = wl
    if progress:
        from tqdm import tqdm

        it = tqdm(wl, desc=f"{name} ({fes.ndof} dof)", unit="wl", file=sys.stderr)
    t1 = time.perf_counter()
    for i, w in enumerate(it):
        k0 = 2 * np.pi / w
        n1, n2, nm = 1.0 + 0j, index(sub, w), index(metal, w)
        eps_m = nm**2
        n_inc, f_up, f_down = fresnel_background(n1, n2, inc)
        eps = mesh.MaterialCF({"particle": eps_m, "up|pml_up": n1**2, "down|pml_down": n2**2})
        Eb = ng.CF((f_up(k0, ng.z, ng.exp), 0, 0))          # the particle lies in the superstrate
        a = ng.BilinearForm(fes, symmetric=True, condense=True)
        a += (ng.curl(E) * ng.curl(v) - k0**2 * eps * E * v) * ng.dx
        f = ng.LinearForm(fes)
        f += k0**2 * (eps_m - n1**2) * Eb * v * ng.dx(definedon=mesh.Materials("particle"))
        a.Assemble()
        f.Assemble()
        inv = a.mat.Inverse(fes.FreeDofs(True), inverse="sparsecholesky")
        gfu.vec.data = inv * f.vec
        gfu.vec.data += a.harmonic_extension * gfu.vec
        gfu.vec.data += a.inner_solve * f.vec
        Et = gfu + Eb
        p = ng.Integrate((Et * ng.Conj(Et)).real, mesh, definedon=mesh.Materials("particle"),
                         order=2 * order + 2)
        sig[i] = 4 * k0 * eps_m.imag * p / n_inc.real
    facts["solve_seconds_per_wl"] = round((time.perf_counter() - t1) / len(wl), 1)
    return sig, facts


def mie_reference(metal, radius, wl):
    """sigma_abs [nm^2] of a sphere in air from miepython (general-purpose Mie library)."""
    import miepython

    out = []
    for w in wl:
        m = index(metal, w)
        qext, qsca, _, _ = miepython.efficiencies(m.real - 1j * m.imag, 2 * radius, w)
        out.append((qext - qsca) * np.pi * radius**2)
    return np.array(out)


def write_csv(path, wl, sig, header, force):
    if path.exists() and not force:
        raise SystemExit(f"error: {path} exists: pass --force to overwrite")
    tmp = path.with_suffix(".csv.tmp")
    with open(tmp, "w") as fh:
        for k, v in header.items():
            fh.write(f"# {k}: {v}\n")
        fh.write("wavelength_nm,sigma_abs_nm2\n")
        for w, s in zip(wl, sig):
            fh.write(f"{w:.6g},{s:.8g}\n")
    os.replace(tmp, path)


def convergence(name, wl, force):
    """Re-solve one case at one wavelength with each discretisation parameter refined in turn."""
    base = dict(margin=0.12 * wl, pml_width=0.3 * wl)
    variants = [("baseline (order 2, 5 elements per wavelength, PML a = 2)", {}),
                ("8 elements per wavelength", dict(ppw=8.0)),
                ("order 3", dict(order=3)),
                ("gap mesh halved", dict(maxh_gap=0.5 * max(GAP_NM[CASES[name][1]], 1.0))),
                ("particle mesh halved", dict(maxh_particle="half")),
                ("domain margin x2, PML x1.5", dict(margin=0.24 * wl, pml_width=0.45 * wl)),
                ("PML strength a = 1", dict(alpha=1.0))]
    path = HERE / f"convergence_{name}.csv"
    if path.exists() and not force:
        raise SystemExit(f"error: {path} exists: pass --force to overwrite")
    c = CASES[name][2] if CASES[name][1] == "sphere" else CASES[name][2][1] / 2
    lines = ["variant,wavelength_nm,ndof,order,sigma_abs_nm2,change_vs_baseline"]
    ref = None
    for label, kw in variants:
        kw = {**base, **kw}
        if kw.get("maxh_particle") == "half":
            kw["maxh_particle"] = 0.5 * max(c / 4, 4.0)
        sig, facts = solve_case(name, [wl], progress=False, **kw)
        ref = sig[0] if ref is None else ref
        lines.append(f"\"{label}\",{wl:g},{facts['ndof']},{facts['order']},{sig[0]:.8g},{sig[0] / ref - 1:+.5f}")
        print(lines[-1], flush=True)
    tmp = path.with_suffix(".csv.tmp")
    tmp.write_text("\n".join(lines) + "\n")
    os.replace(tmp, path)
    print(f"wrote {path}")


def main(argv=None):
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("cases", nargs="*", help="case names (see --list)")
    ap.add_argument("--list", action="store_true", help="list the cases and exit")
    ap.add_argument("--order", type=int, default=2, help="Nedelec element order (default 2)")
    ap.add_argument("--ppw", type=float, default=5.0, help="elements per wavelength in each medium (default 5)")
    ap.add_argument("--margin", type=float, default=None, help="particle to PML distance [nm] (default 0.12 wl)")
    ap.add_argument("--pml-width", type=float, default=None, help="PML thickness [nm] (default 0.3 wl)")
    ap.add_argument("--maxh-particle", type=float, default=None, help="mesh size in the particle [nm]")
    ap.add_argument("--maxh-gap", type=float, default=None, help="mesh size in the gap [nm]")
    ap.add_argument("--wl", default=None, help="wavelengths START:STOP:STEP [nm] (default: the case's grid)")
    ap.add_argument("--convergence", type=float, default=None, metavar="WL",
                    help="instead of a spectrum: re-solve the case at this wavelength [nm] with a finer mesh, "
                         "higher order, finer gap, larger domain / PML and a softer PML; writes convergence_<case>.csv")
    ap.add_argument("--suffix", default="", help="append to the CSV name (convergence runs)")
    ap.add_argument("--force", action="store_true", help="overwrite an existing CSV")
    args = ap.parse_args(argv)
    if args.list or not args.cases:
        for k, v in CASES.items():
            print(f"{k:26s} {v[0]} {v[1]} {v[2]} nm on {v[3]}, {v[4]}, {v[5][0]:g}-{v[5][-1]:g} nm")
        return 0
    for name in args.cases:
        if name not in CASES:
            print(f"error: case {name!r} unknown; choose from {', '.join(CASES)}", file=sys.stderr)
            return 2
    if args.convergence is not None:
        for name in args.cases:
            convergence(name, args.convergence, args.force)
        return 0
    for name in args.cases:
        metal, shape, size, sub, inc, wl = CASES[name]
        if args.wl:
            try:
                a, b, s = (float(x) for x in args.wl.split(":"))
                if not (0 < a <= b and s > 0):
                    raise ValueError
            except ValueError:
                print(f"error: --wl {args.wl!r}: expected START:STOP:STEP in nm, 0 < START <= STOP, STEP > 0",
                      file=sys.stderr)
                return 2
            wl = np.arange(a, b + 0.5 * s, s)
        path = HERE / f"{name}{args.suffix}.csv"
        if path.exists() and not args.force:
            print(f"error: {path} exists: pass --force to overwrite", file=sys.stderr)
            return 2
        sig, facts = solve_case(name, wl, order=args.order, ppw=args.ppw, maxh_particle=args.maxh_particle,
                                maxh_gap=args.maxh_gap, margin=args.margin, pml_width=args.pml_width)
        header = dict(case=name, metal=metal, shape=shape, size_nm=size, substrate=sub, superstrate="air",
                      incidence=inc, polarization="x (long axis for the spheroid)",
                      sigma_reference="absorbed power / irradiance of the incident wave in the incidence medium",
                      permittivity="nanoabs.materials tabulated bulk values, no surface damping",
                      method="NGSolve scattered-field FEM, Nedelec elements, radial PML, quarter domain",
                      **facts)
        if sub == "air":
            mie = mie_reference(metal, size, wl)
            header["miepython_sigma_abs_nm2"] = " ".join(f"{m:.6g}" for m in mie)
            header["relative_error_vs_miepython"] = " ".join(f"{s / m - 1:+.5f}" for s, m in zip(sig, mie))
        write_csv(path, wl, sig, header, args.force)
        print(f"wrote {path}")
        for k in ("relative_error_vs_miepython",):
            if k in header:
                print(f"  {k}: {header[k]}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
