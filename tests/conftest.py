import os

import matplotlib

matplotlib.use("Agg")
os.environ.setdefault("MPLBACKEND", "Agg")

# Property tests run the same examples on every machine (CI must not fail by chance); set
# NANOABS_HYPOTHESIS=explore to search new random examples locally.
from hypothesis import settings  # noqa: E402

settings.register_profile("deterministic", derandomize=True, print_blob=True)
settings.register_profile("explore", derandomize=False, print_blob=True)
settings.load_profile("explore" if os.environ.get("NANOABS_HYPOTHESIS") == "explore" else "deterministic")

import subprocess  # noqa: E402
import sys  # noqa: E402

import pytest  # noqa: E402


@pytest.fixture
def fresh_python(tmp_path):
    """Run code in a fresh interpreter that imports this checkout (numba's default threading layer).

    Returns a function ``run(code) -> CompletedProcess``; asserts a zero exit status.
    """
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    env = {k: v for k, v in os.environ.items() if k != "NUMBA_THREADING_LAYER"}
    env["PYTHONPATH"] = root + os.pathsep + env.get("PYTHONPATH", "")

    def run(code):
        p = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=600,
                           env=env, cwd=tmp_path)
        assert p.returncode == 0, p.stderr[-2000:]
        return p

    return run


@pytest.fixture
def in_threads():
    """``run(fn, n=4)``: call ``fn`` from n Python threads at once; returns the n results."""
    import threading

    def run(fn, n=4):
        got, errors = [], []

        def work():
            try:
                got.append(fn())
            except Exception as exc:  # pragma: no cover - reported below
                errors.append(exc)

        threads = [threading.Thread(target=work) for _ in range(n)]
        for t in threads:
            t.start()
        for t in threads:
            t.join()
        assert not errors, errors
        assert len(got) == n
        return got

    return run
