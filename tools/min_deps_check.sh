#!/usr/bin/env bash
# The oldest dependency versions pyproject.toml allows, on the oldest Python it allows (3.10):
# installs them in a throwaway venv and runs the quick tests there. Run by hand (needs python3.10):
#     bash tools/min_deps_check.sh
# Result of the run that set the floors (2026-12-02): numpy 2.0.2, scipy 1.13.1, pandas 2.2.2,
# matplotlib 3.8.4, numba 0.60.0, tqdm 4.64.1 pass; miepython before 3.3 does not (its API and the
# accuracy the reference tests hold it to differ), hence miepython >= 3.3. numpy 2 is needed for numpy.trapezoid.
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
