"""A non-editable install (a built wheel) ships the material data and works from elsewhere."""

import subprocess
import sys
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


@pytest.mark.slow
def test_wheel_ships_data_and_runs_elsewhere(tmp_path):
    wheels = tmp_path / "wheels"
    cmd = [sys.executable, "-m", "pip", "wheel", "--no-deps", "-q", "-w", str(wheels), str(ROOT)]
    r = subprocess.run(cmd + ["--no-build-isolation"], capture_output=True, text=True)
    if r.returncode != 0:  # no setuptools in this environment: let pip fetch the backend
        r = subprocess.run(cmd, capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    (wheel,) = wheels.glob("nanoabs-*.whl")
    names = zipfile.ZipFile(wheel).namelist()
    assert "nanoabs/material_data/Au__johnson-christy-1972.csv" in names
    assert "nanoabs/material_data/Au__johnson-christy-1972.dl.json" in names
    assert "nanoabs/_data/astm_g173_03.csv" in names

    target = tmp_path / "site"
    r = subprocess.run([sys.executable, "-m", "pip", "install", "--no-deps", "-q", "--target",
                        str(target), str(wheel)], capture_output=True, text=True)
    assert r.returncode == 0, r.stderr
    work = tmp_path / "elsewhere"
    work.mkdir()
    code = ("import nanoabs, sys; print(nanoabs.__file__); "
            "print(nanoabs.material('Au').permittivity(500.0)); "
            "print(len(nanoabs.materials.catalog()))")
    env = {"PYTHONPATH": str(target), "PATH": "/usr/bin:/bin"}
    r = subprocess.run([sys.executable, "-c", code], cwd=work, capture_output=True, text=True, env=env)
    assert r.returncode == 0, r.stderr
    out = r.stdout.splitlines()
    assert out[0].startswith(str(target))
    assert complex(out[1].strip("()")).imag > 0
    assert int(out[2]) >= 13
    r = subprocess.run([sys.executable, "-m", "nanoabs", "materials"], cwd=work, capture_output=True,
                       text=True, env=env)
    assert r.returncode == 0 and "johnson-christy-1972" in r.stdout, r.stderr
