"""The documentation site builds with warnings as errors and covers the public API.

The build is the one a user runs (``sphinx-build -W --keep-going -b html docs OUT``), here
in-process through ``sphinx.cmd.build.build_main`` into a temporary directory. It also writes
the generated API stubs (``docs/api/generated``) and the copied notebooks (``docs/notebooks``)
into the source tree, both untracked.
"""

from pathlib import Path

import pytest
from sphinx.cmd.build import build_main

import nanoabs

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"
SUBMODULES = ["illumination", "hotcarriers", "quasistatic", "mie", "plotting", "design", "solvers",
              "validity", "dataset"]


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    out = tmp_path_factory.mktemp("site")
    code = build_main(["-W", "--keep-going", "-q", "-b", "html", "-d", str(out / "doctrees"),
                       str(DOCS), str(out / "html")])
    assert code == 0, "sphinx build failed or warned (see the output above)"
    return out / "html"


def _text(path: Path) -> str:
    return path.read_text(encoding="utf-8")


def test_user_guide_pages_exist(site):
    for page in ["index", "installation", "tour", "notebooks", "units", "validation", "device_handoff",
                 "safety", "architecture", "api/index"]:
        assert (site / f"{page}.html").is_file(), page


def test_every_public_name_and_submodule_has_a_page(site):
    generated = {p.stem for p in (site / "api" / "generated").glob("*.html")}
    documented = {name.split("-")[0] for name in generated}
    missing = [n for n in nanoabs.__all__ if n != "__version__" and f"nanoabs.{n}" not in documented]
    missing += [m for m in SUBMODULES if f"nanoabs.{m}" not in documented]
    assert missing == []


def test_every_notebook_is_included(site):
    for nb in sorted((ROOT / "notebooks").glob("*.ipynb")):
        assert (site / "notebooks" / f"{nb.stem}.html").is_file(), nb.name


def test_pages_carry_what_they_promise(site):
    # README tour and contributor-guide architecture are included, not copied
    assert "Optical constants" in _text(site / "tour.html")
    assert "How to add a solver" in _text(site / "architecture.html")
    # every method has its independent reference on the validation page; the hand-off page is real
    validation = _text(site / "validation.html")
    assert "pytmatrix" in validation and "tmm" in validation and "Full-wave reference" in validation and "NGSolve" in validation
    assert "To be filled" not in validation
    handoff = _text(site / "device_handoff.html")
    assert "generation_rate_cm3_s" in handoff and "responsivity_table" in handoff and "TODO" not in handoff
    # the usual cautions defer to the laser-safety standards
    safety = _text(site / "safety.html")
    assert "IEC 60825-1" in safety and "ANSI Z136.1" in safety
    # parameter units in brackets reach the rendered API reference
    assert "Vacuum wavelengths [nm]" in _text(site / "api" / "generated" / "nanoabs.plotting.html")
