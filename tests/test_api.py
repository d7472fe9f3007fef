"""The public namespace is deliberate; the README and CI agree on the test command."""

import re
import types
from pathlib import Path

import nanoabs

ROOT = Path(__file__).resolve().parents[1]

EXPECTED = {
    "__version__", "NanoabsError", "DrudeLorentz", "Oscillator", "fit_drude_lorentz", "rakic_1998",
    "Material", "material", "load_table", "Sphere", "LayeredSphere", "Ellipsoid", "spheroid",
    "Cylinder", "CappedRod", "RoundedDisc", "Spectrum", "spectrum", "HotCarrierResult", "hot_carrier_estimate", "read_export", "write_export",
    "illumination", "design",
}


def test_all_is_exactly_the_public_api():
    assert set(nanoabs.__all__) == EXPECTED
    for name in nanoabs.__all__:
        assert hasattr(nanoabs, name), name


def test_nothing_public_by_accident():
    # Anything public in the namespace that is not in __all__ must be a submodule.
    stray = [n for n in dir(nanoabs) if not n.startswith("_") and n not in nanoabs.__all__
             and not isinstance(getattr(nanoabs, n), types.ModuleType)]
    assert stray == []


def test_readme_test_command_is_what_ci_runs():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```\n(.*?)\n```", readme, flags=re.S)
    test_cmd = next(b for b in blocks if "pytest" in b and "pip install" in b).strip()
    ci = (ROOT / ".ci" / "run").read_text(encoding="utf-8")
    section = ci.split("# --- README test command ---")[1].split("# --- end ---")[0].strip()
    assert section == test_cmd


def test_readme_first_command_runs_the_demo():
    readme = (ROOT / "README.md").read_text(encoding="utf-8")
    blocks = re.findall(r"```\n(.*?)\n```", readme, flags=re.S)
    assert "pip install" in blocks[0] and "nanoabs demo" in blocks[0]
