"""Peak memory of a large streamed sweep (design x wavelength points), measured in a child process.

    python bench/memory.py                  # 1e7 points: 10 000 rod lengths x 1000 wavelengths
    python bench/memory.py --points 1e6     # smaller, quicker

The sweep runs in a fresh interpreter with ``out=`` set, so chunks are computed
and written to disk one by one and the full table is never held (it exceeds the
default 256 MB budget). The child reports its peak resident set size
(``resource.getrusage(RUSAGE_SELF).ru_maxrss``); the parent prints it beside the
baseline of the same interpreter after importing nanoabs, and the target from the
project issue (< 1 GB). The output file is deleted afterwards. A measurement,
not a test: the script always exits 0.
"""

from __future__ import annotations

import argparse
import json
import os
import subprocess
import sys
import tempfile
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]

CHILD = r"""
import json, resource, sys, time
import numpy as np
import nanoabs
from nanoabs import design
base = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
n_designs, n_wl, out = int(sys.argv[1]), int(sys.argv[2]), sys.argv[3]
t = time.perf_counter()
res = design.sweep("spheroid", {"length_nm": np.linspace(40.0, 200.0, n_designs), "diameter_nm": [20.0]},
                   np.linspace(500.0, 1500.0, n_wl), material="Au", medium="water", polarization="long",
                   chunk_size=200, progress=False, out=out)
dt = time.perf_counter() - t
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps({"baseline_kB": base, "peak_kB": peak, "seconds": dt,
                  "returned": type(res).__name__}))
"""


def main() -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--points", type=float, default=1e7, help="design x wavelength points (default 1e7)")
    ap.add_argument("--wavelengths", type=int, default=1000)
    ap.add_argument("--json", help="write the numbers to this file")
    args = ap.parse_args()
    n_wl = args.wavelengths
    n_designs = max(1, int(round(args.points / n_wl)))
    env = dict(os.environ)
    env["PYTHONPATH"] = str(ROOT) + os.pathsep + env.get("PYTHONPATH", "")
    with tempfile.TemporaryDirectory() as tmp:
        out = Path(tmp) / "big_sweep.csv"
        t = time.perf_counter()
        r = subprocess.run([sys.executable, "-c", CHILD, str(n_designs), str(n_wl), str(out)],
                           capture_output=True, text=True, env=env)
        wall = time.perf_counter() - t
        if r.returncode != 0:
            print("child failed:\n" + r.stderr[-2000:])
            return 0
        d = json.loads(r.stdout.strip().splitlines()[-1])
        size = out.stat().st_size if out.exists() else 0
    peak_mb = d["peak_kB"] / 1024
    base_mb = d["baseline_kB"] / 1024
    print(f"streamed sweep: {n_designs} designs x {n_wl} wavelengths = {n_designs * n_wl:.3g} points")
    print(f"  sweep time {d['seconds']:.1f} s (child wall {wall:.1f} s); CSV written {size / 1e9:.2f} GB; "
          f"sweep returned a {d['returned']}")
    print(f"  peak RSS {peak_mb:.0f} MB (interpreter + nanoabs before the sweep: {base_mb:.0f} MB; "
          f"ratio {peak_mb / base_mb:.2f})")
    print(f"  target: peak < 1024 MB -> {'PASS' if peak_mb < 1024 else 'MISS'}")
    if args.json:
        Path(args.json).write_text(json.dumps({**d, "points": n_designs * n_wl, "csv_bytes": size,
                                               "peak_MB": peak_mb, "baseline_MB": base_mb}, indent=2))
    return 0


if __name__ == "__main__":
    sys.exit(main())
