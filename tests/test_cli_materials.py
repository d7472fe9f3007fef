"""`nanoabs materials` commands: listing, showing, fitting, one-line errors."""

import json

import pytest

from nanoabs.cli import main


def run(capsys, *argv):
    code = main(list(argv))
    out, err = capsys.readouterr()
    return code, out, err


def test_list(capsys):
    code, out, err = run(capsys, "materials")
    assert code == 0
    for token in ("Au", "johnson-christy-1972", "mcpeak-2015", "H2O", "TiN", "yes"):
        assert token in out


def test_show_and_plot(capsys, tmp_path):
    png = tmp_path / "au.png"
    code, out, _ = run(capsys, "materials", "show", "Au", "--wl", "500:700:100", "--plot", str(png))
    assert code == 0 and png.stat().st_size > 1000
    assert "eps_imag" in out and "Johnson" in out
    # never overwrite without --force
    code, _, err = run(capsys, "materials", "show", "Au", "--plot", str(png))
    assert code == 2 and "exists" in err and err.count("\n") == 1


def test_fit_and_save(capsys, tmp_path):
    out_json = tmp_path / "fit.json"
    code, out, _ = run(capsys, "materials", "fit", "Au", "--range", "450:1000", "--oscillators", "2",
                       "--save", str(out_json))
    assert code == 0 and "RMS relative error" in out
    d = json.loads(out_json.read_text())
    assert d["material"] == "Au" and len(d["oscillators"]) == 2 and d["rms_relative_error"] < 0.05


@pytest.mark.parametrize("argv,needle", [
    (["materials", "show", "Unobtainium"], "unknown material"),
    (["materials", "show", "Au", "--source", "nobody"], "unknown dataset"),
    (["materials", "show", "Au", "--wl", "100:900:10"], "outside"),
    (["materials", "fit", "Au", "--range", "100:1000"], "outside"),
    (["materials", "fit", "Au", "--range", "900:400"], "START < STOP"),
    (["materials", "fit", "Au", "--oscillators", "40"], "oscillators"),
    (["materials", "show"], "NAME"),
    (["materials", "show", "Au", "--wl", "a:b:c"], "number"),
    (["materials", "frobnicate"], "invalid choice"),
])
def test_errors_one_line_no_traceback(capsys, argv, needle):
    code, out, err = run(capsys, *argv)
    assert code == 2
    assert needle in err
    assert err.count("\n") == 1 and "Traceback" not in err


@pytest.mark.parametrize("cmd", [
    "spectrum --shape sphere --material Au --radius 20 --medium 1.5 --wl 1800:2200:100",
    "sweep --shape sphere --param radius_nm=10,20 --medium 1.5 --wl 1800:2200:100 --quiet",
    "materials show Au --wl 2000:2100:50",
])
def test_extrapolate_on_every_command_that_reads_materials(cmd, capsys, tmp_path, monkeypatch):
    # Johnson & Christy (1972) gold ends at 1937 nm: refused without --extrapolate (the message names
    # the CLI option), accepted with it (the shipped Drude-Lorentz fit extends the table).
    monkeypatch.chdir(tmp_path)
    assert main(cmd.split()) == 2
    assert "--extrapolate" in capsys.readouterr().err
    assert main(cmd.split() + ["--extrapolate"]) == 0
