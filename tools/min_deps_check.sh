#!/usr/bin/env bash
# The oldest dependency versions pyproject.toml allows, on the oldest Python it allows (3.10):
# installs them in a throwaway venv and runs the quick tests there. Run by hand (needs python3.10):
#     bash tools/min_deps_check.sh
# Result of the run that set the floors (2026-12-02): numpy 2.0.2, scipy 1.13.1, pandas 2.2.2,
# matplotlib 3.8.4, numba 0.60.0, tqdm 4.64.1 pass; miepython before 3.3 does not (its API and the
# accuracy the reference tests hold it to differ), hence miepython >= 3.3. numpy 2 is needed for numpy.trapezoid.
# Run of session 4 (2026-12-02, Python 3.10.13, the floors above): 1258 passed, 2 FAILED, both on
# ill-conditioned T-matrix cases: tests/test_tmatrix_convergence.py::test_thin_capped_rod_converges_and_
# higher_orders_agree (orders n_max+2 differ by 10 % at one wavelength; passes with the current
# releases) and tests/test_surface_tmatrix.py::test_flat_rod_crossing_the_interface_against_the_full_wave_
# reference (the flat rod's order study fails there and auto falls back to the dipole). Not caused by
# scipy (1.15.3) or numpy (2.1.3) alone; not yet traced (Python 3.10, numba 0.60 or the LAPACK build).
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
work=$(mktemp -d)
python3.10 -m venv "$work/venv"
. "$work/venv/bin/activate"
pip install -q "numpy==2.0.2" "scipy==1.13.1" "pandas==2.2.2" "matplotlib==3.8.4" "miepython==3.3.0" \
    "numba==0.60.0" "tqdm==4.64.1" "tomli==2.0.1" pytest hypothesis tmm pytmatrixc
pip install -q --no-deps "$here"
cd "$here" && python -m pytest -q -m "not slow" -p no:cacheprovider \
    --ignore=tests/test_docs_build.py --ignore=tests/test_docstrings.py
