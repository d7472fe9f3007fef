"""The notebooks run top to bottom (nbclient with the test extra's ipykernel)."""

from pathlib import Path

import pytest

NB_DIR = Path(__file__).resolve().parents[1] / "notebooks"
NOTEBOOKS = sorted(NB_DIR.glob("*.ipynb"))


def test_at_least_three_notebooks():
    assert len(NOTEBOOKS) >= 3


@pytest.mark.slow
@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_runs(path, monkeypatch):
    nbformat = pytest.importorskip("nbformat")
    nbclient = pytest.importorskip("nbclient")
    import os

    # the kernel must import this checkout's nanoabs (installed, or this source tree)
    root = str(NB_DIR.parent)
    monkeypatch.setenv("PYTHONPATH", os.pathsep.join([root] + [os.path.abspath(p) for p in
                                                              os.environ.get("PYTHONPATH", "").split(os.pathsep) if p]))
    nb = nbformat.read(path, as_version=4)
    client = nbclient.NotebookClient(nb, timeout=300, kernel_name="python3",
                                     resources={"metadata": {"path": str(NB_DIR)}})
    client.execute()
    errors = [o for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", [])
              if o.get("output_type") == "error"]
    assert not errors
    images = [o for c in nb.cells if c.cell_type == "code" for o in c.get("outputs", [])
              if "image/png" in o.get("data", {})]
    assert images, f"{path.name} shows no figure"
