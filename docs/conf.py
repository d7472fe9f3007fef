"""Sphinx configuration of the nanoabs documentation (build: sphinx-build -W --keep-going docs out).

Pages are MyST Markdown (user guide) and reStructuredText (API reference); the notebooks in
../notebooks are copied into ``notebooks/`` (not tracked) at the start of every build and
shown without being executed (``nb_execution_mode = "off"``).
"""

from __future__ import annotations

import re
import shutil
from pathlib import Path

import nanoabs

HERE = Path(__file__).resolve().parent
NOTEBOOK_SOURCE = HERE.parent / "notebooks"

project = "nanoabs"
author = "nanoabs developers"
copyright = "nanoabs developers (MIT licence)"
release = nanoabs.__version__
version = release

extensions = [
    "sphinx.ext.autodoc",
    "sphinx.ext.autosummary",
    "sphinx.ext.mathjax",
    "numpydoc",
    "myst_nb",
]

source_suffix = {".rst": "restructuredtext", ".md": "myst-nb", ".ipynb": "myst-nb"}
root_doc = "index"
exclude_patterns = ["_build", "**.ipynb_checkpoints"]
templates_path = ["_templates"]

# Notebooks: shown as committed (no outputs yet), never executed by the docs build.
nb_execution_mode = "off"
myst_enable_extensions = ["dollarmath", "deflist"]
myst_heading_anchors = 3

# API reference
autosummary_generate = True
autosummary_imported_members = True
autosummary_ignore_module_all = False  # a module's __all__ decides what its page shows
# names that differ only in case get distinct files (case-insensitive file systems)
autosummary_filename_map = {"nanoabs.spectrum": "nanoabs.spectrum-function",
                            "nanoabs.material": "nanoabs.material-function"}
suppress_warnings = [
    "myst.header",   # included README / contributor-guide sections start at ###
    "ref.citation",  # a numpydoc References list need not be cited inline
]
autodoc_default_options = {"members": True, "member-order": "bysource"}
autodoc_typehints = "none"
numpydoc_show_class_members = False
numpydoc_xref_param_type = False

html_theme = "furo"
html_title = f"nanoabs {release}"
html_static_path: list = []


# TODO(lead): the docstrings of these modules write formulas as plain text (|a_n|^2, shape
# (L, *grid)), which reStructuredText reads as substitutions and emphasis. Until they use
# ``literals`` (see notes/docs.md), their | and *name are escaped before rendering; delete
# a module from this tuple once its docstrings are fixed (the build then proves it).
PLAIN_TEXT_FORMULA_MODULES = ("nanoabs.mie", "nanoabs.hotcarriers")
_LITERAL = re.compile(r"(``.*?``)")


def _escape_piece(text: str) -> str:
    text = text.replace("|", r"\|")
    return re.sub(r"(?<!\*)\*(?=\w+[,)])", r"\\*", text)  # "(L, *grid)", not "*Title words*"


def _escape_plain_text_formulas(app, what, name, obj, options, lines):
    """Escape | and star-args (*grid) outside literals and literal blocks (see the TODO above)."""
    if not name.startswith(PLAIN_TEXT_FORMULA_MODULES):
        return
    block_indent = None
    for i, line in enumerate(lines):
        indent = len(line) - len(line.lstrip())
        if block_indent is not None and line.strip() and indent <= block_indent:
            block_indent = None
        if block_indent is None:
            lines[i] = "".join(p if p.startswith("``") else _escape_piece(p) for p in _LITERAL.split(line))
            if line.rstrip().endswith("::"):
                block_indent = indent


def _copy_notebooks(app, config):
    """Copy ../notebooks/*.ipynb (and their data) into the source tree when they differ."""
    target = Path(app.srcdir) / "notebooks"
    target.mkdir(exist_ok=True)
    for src in sorted(NOTEBOOK_SOURCE.glob("*.ipynb")):
        dst = target / src.name
        if not dst.exists() or dst.read_bytes() != src.read_bytes():
            shutil.copyfile(src, dst)


def setup(app):
    app.connect("config-inited", _copy_notebooks)
    app.connect("autodoc-process-docstring", _escape_plain_text_formulas, priority=100)  # before numpydoc
