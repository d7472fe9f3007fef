"""Extract the ASTM G173-03 reference solar spectra into ``nanoabs/_data/astm_g173_03.csv``.

Run once, in the development environment where pvlib is installed::

    /root/dev/bin/python tools/extract_astm_g173.py

It reads pvlib's copy of the public ASTM G173-03 table (``pvlib/data/ASTMG173.csv``),
checks it (2002 rows, 280-4000 nm, strictly increasing wavelengths, no negative
values), and writes the shipped CSV with a ``#`` comment header. The numbers are
copied as they are written in the source file (no rounding, no resampling).
The nanoabs runtime reads only the shipped CSV and never imports pvlib.
"""

from __future__ import annotations

import argparse
import csv
import importlib.metadata
import importlib.util
import math
import sys
from pathlib import Path

HERE = Path(__file__).resolve().parent
DEFAULT_OUTPUT = HERE.parent / "nanoabs" / "_data" / "astm_g173_03.csv"

# Source column -> shipped column name.
COLUMNS = {
    "wavelength": "wavelength_nm",
    "extraterrestrial": "extraterrestrial_W_m2_nm",
    "global": "global_tilt_W_m2_nm",
    "direct": "direct_circumsolar_W_m2_nm",
}


def find_pvlib_table() -> tuple[Path, str]:
    """Return (path of pvlib's ASTMG173.csv, pvlib version) without importing pvlib."""
    spec = importlib.util.find_spec("pvlib")
    if spec is None or not spec.submodule_search_locations:
        sys.exit("pvlib is not installed in this environment; install it to run the extraction")
    path = Path(list(spec.submodule_search_locations)[0]) / "data" / "ASTMG173.csv"
    if not path.is_file():
        sys.exit(f"pvlib's ASTM G173-03 table was not found at {path}")
    return path, importlib.metadata.version("pvlib")


def read_source(path: Path) -> list[list[str]]:
    """Rows of [wavelength, extraterrestrial, global, direct] as the source strings."""
    with open(path, newline="", encoding="utf-8") as fh:
        rows = list(csv.reader(fh))
    # Line 1 is a title, line 2 the column names.
    names = [c.strip() for c in rows[1]]
    idx = [names.index(c) for c in COLUMNS]
    out = []
    for line_no, row in enumerate(rows[2:], start=3):
        if not row or not any(c.strip() for c in row):
            continue
        cells = [row[i].strip() for i in idx]
        vals = [float(c) for c in cells]
        if not all(math.isfinite(v) and v >= 0 for v in vals):
            sys.exit(f"{path}:{line_no}: unexpected value in {cells}")
        out.append(cells)
    wl = [float(r[0]) for r in out]
    if len(out) != 2002 or wl[0] != 280.0 or wl[-1] != 4000.0:
        sys.exit(f"{path}: expected 2002 rows on 280-4000 nm, got {len(out)} rows on {wl[0]}-{wl[-1]} nm")
    if any(b <= a for a, b in zip(wl, wl[1:])):
        sys.exit(f"{path}: wavelengths are not strictly increasing")
    return out


def header(pvlib_version: str) -> str:
    return f"""\
# ASTM G173-03 Standard Tables for Reference Solar Spectral Irradiances:
#   Direct Normal and Hemispherical on 37 degree Tilted Surface.
# Publisher: ASTM International (West Conshohocken, PA), standard G173-03 (2003).
# The table values were computed by the publishers with the SMARTS v2.9.2 radiative-transfer model.
# Extracted by tools/extract_astm_g173.py from the copy of the table carried by
#   pvlib-python {pvlib_version} (file pvlib/data/ASTMG173.csv); values copied unchanged.
# Columns (all irradiances in W m^-2 nm^-1):
#   wavelength_nm               wavelength [nm], 280-4000 nm, 2002 rows
#   extraterrestrial_W_m2_nm    extraterrestrial spectrum (air mass 0)
#   global_tilt_W_m2_nm         hemispherical on a 37 deg sun-facing tilted surface (AM1.5G)
#   direct_circumsolar_W_m2_nm  direct normal + circumsolar (AM1.5D)
# Licence note: this is the public numerical reference table that is distributed freely
#   with the standard's reference data and in pvlib-python (BSD 3-Clause); the standard's
#   text is copyright ASTM International and is not reproduced here.
"""


def main(argv=None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--source", type=Path, help="path of ASTMG173.csv (default: pvlib's copy)")
    ap.add_argument("--output", type=Path, default=DEFAULT_OUTPUT, help="CSV to write")
    args = ap.parse_args(argv)

    if args.source is None:
        source, version = find_pvlib_table()
    else:
        source, version = args.source, importlib.metadata.version("pvlib")
    rows = read_source(source)
    with open(args.output, "w", newline="", encoding="utf-8") as fh:
        fh.write(header(version))
        fh.write(",".join(COLUMNS.values()) + "\n")
        for r in rows:
            fh.write(",".join(r) + "\n")

    # Report the band integrals (trapezoid over the table) as a sanity check.
    wl = [float(r[0]) for r in rows]
    for j, name in enumerate(list(COLUMNS.values())[1:], start=1):
        v = [float(r[j]) for r in rows]
        total = sum(0.5 * (v[i] + v[i + 1]) * (wl[i + 1] - wl[i]) for i in range(len(wl) - 1))
        print(f"{name}: {total:.2f} W/m^2")
    print(f"wrote {args.output} ({len(rows)} rows) from {source} (pvlib {version})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
