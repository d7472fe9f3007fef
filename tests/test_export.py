"""Tests for nanoabs.export: round trip, no silent overwrite, atomic writes, errors."""

from __future__ import annotations

import json
import os
from datetime import datetime
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from pandas.testing import assert_frame_equal

from nanoabs import export
from nanoabs._errors import DataError, NanoabsError
from nanoabs.export import check_writable, read_export, write_export

UNITS = {
    "wavelength_nm": "nm",
    "sigma_abs_m2": "m^2",
    "q_abs": "1",
    "photocurrent_A": "A",
    "order": "1",
    "resonant": "1",
    "material": "1",
}


def _frame() -> pd.DataFrame:
    """Values that break naive float formatting: subnormal, huge, -0.0, 1/3, NaN."""
    return pd.DataFrame(
        {
            "wavelength_nm": [400.0, 0.1, 1.0 / 3.0, 5e-324, 1.7976931348623157e308, -0.0],
            "sigma_abs_m2": [1.234567890123457e-17, np.nan, 2.5e-300, 3.0, 7.1e-16, 0.0],
            "q_abs": np.array([0.1, 0.2, 0.3, 1.0 / 7.0, 2.0 / 3.0, 1e-7], dtype=np.float32),
            "order": np.arange(6, dtype=np.int64) - 2,
            "resonant": [False, True, False, False, True, False],
            "material": ["Au", "Ag, JC", 'say "x"', "", "Cu", "Al"],
        }
    )


def _metadata() -> dict:
    return {
        "inputs": {"radius_nm": np.float64(20.0), "n_points": np.int64(6), "medium": "water"},
        "materials": [{"name": "Au", "source": Path("tables") / "au.csv"}],
        "band": {"totals": np.array([1.5, np.nan]), "ok": np.bool_(True), "range_nm": (400, 700)},
        "warnings": [],
        "note": None,
    }


EXPECTED_METADATA = {
    "inputs": {"radius_nm": 20.0, "n_points": 6, "medium": "water"},
    "materials": [{"name": "Au", "source": os.fspath(Path("tables") / "au.csv")}],
    "band": {"totals": [1.5, None], "ok": True, "range_nm": [400, 700]},
    "warnings": [],
    "note": None,
}


def _strict_json(path: Path) -> dict:
    def refuse(token):
        raise AssertionError(f"non-standard JSON token {token} in {path.name}")

    return json.loads(path.read_text(encoding="utf-8"), parse_constant=refuse)


@pytest.mark.parametrize("name", ["det.csv", "det.json"])
def test_round_trip_is_exact(tmp_path, name):
    frame = _frame()
    written = write_export(frame, tmp_path / name, metadata=_metadata(), units=UNITS)
    expected_files = ["det.csv", "det.json"] if name.endswith(".csv") else ["det.json"]
    assert [p.name for p in written] == expected_files
    assert sorted(os.listdir(tmp_path)) == sorted(expected_files)

    back, header = read_export(tmp_path / name)
    assert_frame_equal(back, frame, check_exact=True)
    for col in ("wavelength_nm", "sigma_abs_m2"):  # bit-identical, incl. the sign of -0.0
        assert np.array_equal(back[col].to_numpy().view(np.int64), frame[col].to_numpy().view(np.int64))
    assert header["metadata"] == EXPECTED_METADATA
    assert header["format"] == export.FORMAT_NAME and header["format_version"] == 2
    prov = header["provenance"]
    assert prov["dependencies"]["numpy"] == np.__version__ and prov["python"] and prov["platform"]
    assert header["rows"] == 6
    assert [(c["name"], c["unit"]) for c in header["columns"]] == [(c, UNITS[c]) for c in frame.columns]
    assert header["data_file"] == ("det.csv" if name.endswith(".csv") else None)
    assert datetime.fromisoformat(header["created_utc"]).utcoffset().total_seconds() == 0
    assert isinstance(header["package_version"], str) and header["package_version"]
    assert "data" not in header
    _strict_json(tmp_path / "det.json")


def test_csv_is_plain_and_readable_through_its_sidecar(tmp_path):
    frame = pd.DataFrame({"wavelength_nm": [500.0, 600.0], "sigma_abs_m2": [np.inf, -np.inf]})
    write_export(frame, tmp_path / "spec.csv", metadata={}, units=UNITS)
    lines = (tmp_path / "spec.csv").read_text(encoding="utf-8").splitlines()
    assert lines[0] == "wavelength_nm,sigma_abs_m2"  # header row only, no index, no comments
    assert len(lines) == 3 and not any(line.startswith("#") for line in lines)
    back, header = read_export(tmp_path / "spec.json")  # the sidecar also leads to the data
    assert_frame_equal(back, frame, check_exact=True)
    assert header["columns"][1] == {"name": "sigma_abs_m2", "unit": "m^2", "dtype": "float64"}


def test_single_json_holds_data_per_column(tmp_path):
    frame = pd.DataFrame({"wavelength_nm": [500.0, 600.0], "q_abs": [0.25, np.nan]})
    write_export(frame, tmp_path / "one.json", metadata={"a": 1}, units=UNITS)
    doc = _strict_json(tmp_path / "one.json")
    assert doc["data"] == {"wavelength_nm": [500.0, 600.0], "q_abs": [0.25, None]}
    assert doc["metadata"] == {"a": 1}


def test_empty_frame_round_trips(tmp_path):
    frame = pd.DataFrame({"wavelength_nm": np.array([], dtype=float), "order": np.array([], dtype=np.int64)})
    write_export(frame, tmp_path / "e.csv", metadata={}, units=UNITS)
    back, header = read_export(tmp_path / "e.csv")
    assert_frame_equal(back, frame, check_exact=True)
    assert header["rows"] == 0


def test_never_overwrites_without_force(tmp_path):
    target = tmp_path / "det.csv"
    write_export(_frame(), target, metadata={"run": 1}, units=UNITS)
    before = {p: p.read_bytes() for p in (target, target.with_suffix(".json"))}
    with pytest.raises(NanoabsError, match=r"exists: pass force=True \(CLI: --force\)"):
        write_export(_frame().head(2), target, metadata={"run": 2}, units=UNITS)
    with pytest.raises(NanoabsError, match="exists"):
        check_writable(target, force=False)
    assert {p: p.read_bytes() for p in before} == before

    write_export(_frame().head(2), target, metadata={"run": 2}, units=UNITS, force=True)
    back, header = read_export(target)
    assert len(back) == 2 and header["metadata"] == {"run": 2}
    assert sorted(os.listdir(tmp_path)) == ["det.csv", "det.json"]


def test_existing_sidecar_alone_blocks_csv_export(tmp_path):
    (tmp_path / "det.json").write_text("{}", encoding="utf-8")
    with pytest.raises(NanoabsError, match="det.json.*exists"):
        write_export(_frame(), tmp_path / "det.csv", metadata={}, units=UNITS)
    assert os.listdir(tmp_path) == ["det.json"]


def test_check_writable_lists_targets_and_missing_directory(tmp_path):
    assert check_writable(tmp_path / "a.csv") == (tmp_path / "a.csv", tmp_path / "a.json")
    assert check_writable(tmp_path / "a.json") == (tmp_path / "a.json",)
    with pytest.raises(NanoabsError, match="nope.*does not exist"):
        check_writable(tmp_path / "nope" / "a.csv")


def test_export_is_refused_while_another_writer_holds_it(tmp_path):
    # Source: contract. Two writers of one export would interleave a CSV and another run's sidecar.
    import pandas as pd

    from nanoabs.export import exclusive_lock

    frame = pd.DataFrame({"wavelength_nm": [500.0, 600.0]})
    with exclusive_lock(tmp_path / "x.csv"):
        with pytest.raises(NanoabsError, match="being written by another"):
            write_export(frame, tmp_path / "x.csv", metadata={}, units={"wavelength_nm": "nm"})
    write_export(frame, tmp_path / "x.csv", metadata={}, units={"wavelength_nm": "nm"})
    assert sorted(p.name for p in tmp_path.iterdir()) == ["x.csv", "x.json"]


def test_failed_second_rename_leaves_nothing(tmp_path, monkeypatch):
    real_replace = os.replace
    calls = []

    def flaky_replace(src, dst):
        calls.append(dst)
        if len(calls) == 2:
            raise OSError("disk full")
        real_replace(src, dst)

    monkeypatch.setattr(os, "replace", flaky_replace)
    with pytest.raises(OSError, match="disk full"):
        write_export(_frame(), tmp_path / "det.csv", metadata=_metadata(), units=UNITS)
    assert len(calls) == 2  # the CSV had landed before the sidecar failed
    assert os.listdir(tmp_path) == []


def test_interrupted_csv_write_leaves_nothing(tmp_path, monkeypatch):
    def broken_to_csv(self, fh, **kwargs):
        fh.write("wavelength_nm,sig")
        raise KeyboardInterrupt

    monkeypatch.setattr(pd.DataFrame, "to_csv", broken_to_csv)
    with pytest.raises(KeyboardInterrupt):
        write_export(_frame(), tmp_path / "det.csv", metadata={}, units=UNITS)
    assert os.listdir(tmp_path) == []


@pytest.mark.parametrize("name", ["det.csv", "det.json"])
def test_unserialisable_metadata_leaves_nothing(tmp_path, name):
    with pytest.raises(NanoabsError, match=r"metadata\['inputs'\]\['solver'\] = object"):
        write_export(_frame(), tmp_path / name, metadata={"inputs": {"solver": object()}}, units=UNITS)
    with pytest.raises(NanoabsError, match="keys must be str"):
        write_export(_frame(), tmp_path / name, metadata={"bands": {1: "x"}}, units=UNITS)
    assert os.listdir(tmp_path) == []


def test_missing_unit_names_the_columns(tmp_path):
    units = {k: v for k, v in UNITS.items() if k not in ("q_abs", "material")}
    with pytest.raises(NanoabsError, match="q_abs, material"):
        write_export(_frame(), tmp_path / "det.csv", metadata={}, units=units)
    with pytest.raises(NanoabsError, match=r"units\['q_abs'\] = ''"):
        write_export(_frame(), tmp_path / "det.csv", metadata={}, units={**UNITS, "q_abs": ""})
    assert os.listdir(tmp_path) == []


@pytest.mark.parametrize("name", ["det.txt", "det"])
def test_bad_suffix_lists_allowed(tmp_path, name):
    with pytest.raises(NanoabsError, match=r"allowed suffixes: \.csv, \.json"):
        write_export(_frame(), tmp_path / name, metadata={}, units=UNITS)
    with pytest.raises(NanoabsError, match=r"allowed suffixes: \.csv, \.json"):
        read_export(tmp_path / name)


def test_unsupported_columns_are_refused(tmp_path):
    complex_frame = pd.DataFrame({"q_abs": [1 + 2j]})
    with pytest.raises(NanoabsError, match="'q_abs' has dtype complex128.*real/imag"):
        write_export(complex_frame, tmp_path / "c.csv", metadata={}, units=UNITS)
    inf_frame = pd.DataFrame({"q_abs": [np.inf]})
    with pytest.raises(NanoabsError, match="infinite values.*use a .csv path"):
        write_export(inf_frame, tmp_path / "c.json", metadata={}, units=UNITS)
    assert os.listdir(tmp_path) == []


def test_missing_sidecar_on_read(tmp_path):
    write_export(_frame(), tmp_path / "det.csv", metadata={}, units=UNITS)
    (tmp_path / "det.json").unlink()
    with pytest.raises(DataError, match="sidecar .*det.json.* not found"):
        read_export(tmp_path / "det.csv")


def test_read_detects_mismatch_with_sidecar(tmp_path):
    target = tmp_path / "det.csv"
    write_export(_frame(), target, metadata={}, units=UNITS)
    lines = target.read_text(encoding="utf-8").splitlines(keepends=True)

    target.write_text(lines[0].replace("q_abs", "qabs") + "".join(lines[1:]), encoding="utf-8")
    with pytest.raises(DataError, match="do not match the sidecar columns"):
        read_export(target)

    target.write_text("".join(lines[:-1]), encoding="utf-8")  # truncated: one row lost
    with pytest.raises(DataError, match="has 5 rows, the sidecar says 6"):
        read_export(target)

    target.write_text("".join(lines), encoding="utf-8")
    sidecar = target.with_suffix(".json")
    doc = json.loads(sidecar.read_text(encoding="utf-8"))
    doc["format"] = "something-else"
    sidecar.write_text(json.dumps(doc), encoding="utf-8")
    with pytest.raises(DataError, match="format = 'something-else'"):
        read_export(target)


def test_reads_format_version_1_and_refuses_unknown(tmp_path):
    # Contract: version-1 files (no provenance block) stay readable; an unknown version is refused.
    frame = _frame()
    write_export(frame, tmp_path / "v.csv", metadata=_metadata(), units=UNITS)
    side = tmp_path / "v.json"
    doc = json.loads(side.read_text())
    doc["format_version"] = 1
    doc.pop("provenance")
    side.write_text(json.dumps(doc))
    back, header = read_export(tmp_path / "v.csv")
    assert_frame_equal(back, frame, check_exact=True) and header["format_version"] == 1
    doc["format_version"] = 3
    side.write_text(json.dumps(doc))
    with pytest.raises(DataError, match="format_version"):
        read_export(tmp_path / "v.csv")


def test_fast_reader_detects_a_short_line(tmp_path):
    # a line missing fields would be NaN-filled by a plain pandas read: it must be an error instead
    frame = _frame()
    write_export(frame, tmp_path / "s.csv", metadata=_metadata(), units=UNITS)
    lines = (tmp_path / "s.csv").read_text().splitlines()
    lines[3] = ",".join(lines[3].split(",")[:2])
    (tmp_path / "s.csv").write_text("\n".join(lines) + "\n")
    with pytest.raises(DataError, match="line 4"):
        read_export(tmp_path / "s.csv")


def test_provenance_hashes_the_shipped_tables_used(tmp_path):
    # Reproducibility: the sidecar carries the sha256 of every shipped optical-constant file the
    # result used (the reference is hashlib over the installed file itself).
    import hashlib

    import nanoabs
    from nanoabs.materials import _data_dir

    s = nanoabs.spectrum(nanoabs.Sphere("Au", 20.0), np.linspace(500.0, 600.0, 11), medium="water")
    s.write(tmp_path / "s.csv")
    _, header = read_export(tmp_path / "s.csv")
    files = header["provenance"]["material_files_sha256"]
    assert "Au__johnson-christy-1972.csv" in files and any(f.startswith("H2O__") for f in files)
    for name, digest in files.items():
        assert digest == hashlib.sha256((_data_dir() / name).read_bytes()).hexdigest()


def test_provenance_of_a_user_table(tmp_path):
    # A user's optical-constant file is identified by the sha256 of its text in the material metadata
    # that every sidecar carries (hashlib over the file written here).
    import hashlib

    import nanoabs

    text = "wavelength_nm,n,k\n400,1.5,0\n900,1.5,0\n"
    (tmp_path / "film.csv").write_text(text)
    m = nanoabs.load_table(tmp_path / "film.csv", kind="dielectric")
    s = nanoabs.spectrum(nanoabs.Sphere("Au", 20.0), np.linspace(500.0, 600.0, 6), medium=m)
    s.write(tmp_path / "s.csv")
    _, header = read_export(tmp_path / "s.csv")
    assert header["metadata"]["medium"]["file_sha256"] == hashlib.sha256(text.encode()).hexdigest()


def _same_bytes(tmp_path, columns, units):
    """The pandas-free writer (dict of columns) and DataFrame.to_csv write the same CSV bytes."""
    write_export(columns, tmp_path / "a.csv", metadata={}, units=units)
    write_export(pd.DataFrame(columns), tmp_path / "b.csv", metadata={}, units=units)
    a, b = (tmp_path / "a.csv").read_bytes(), (tmp_path / "b.csv").read_bytes()
    assert a == b
    ja, jb = (json.loads((tmp_path / f"{n}.json").read_text()) for n in "ab")
    assert ja["columns"] == jb["columns"] and ja["rows"] == jb["rows"]
    return a


def test_dict_of_columns_writes_the_bytes_pandas_writes(tmp_path):
    # reference: pandas' DataFrame.to_csv (the writer used before; general-purpose library), byte for
    # byte, on values that exercise the float formatting: random magnitudes 1e-300..1e300, both signs,
    # -0.0, nan, +-inf, subnormals, integers as floats; int, uint and bool columns; float32.
    rng = np.random.default_rng(7)
    n = 400
    f = rng.standard_normal(n) * 10.0 ** rng.integers(-300, 300, n)
    f[:8] = [0.0, -0.0, np.nan, np.inf, -np.inf, 5e-324, 1e16, 400.0]
    cols = {"wavelength_nm": np.linspace(400.0, 900.0, n), "sigma_abs_m2": f,
            "q_abs": rng.random(n).astype(np.float32), "order": rng.integers(-5, 5, n),
            "count": rng.integers(0, 9, n).astype(np.uint16), "flag": rng.random(n) > 0.5}
    units = {k: "1" for k in cols}
    text = _same_bytes(tmp_path, cols, units)
    assert text.count(b"\n") == n + 1
    back, _ = read_export(tmp_path / "a.csv")
    np.testing.assert_array_equal(back["sigma_abs_m2"].to_numpy(), f)


def test_spectrum_export_is_written_without_pandas_and_unchanged(tmp_path):
    import nanoabs

    s = nanoabs.spectrum(nanoabs.Sphere("Au", 20.0), np.linspace(400.0, 900.0, 101), medium="water")
    s.write(tmp_path / "s.csv")
    write_export(s.to_frame(), tmp_path / "f.csv", metadata={}, units=nanoabs.optics.UNITS)
    assert (tmp_path / "s.csv").read_bytes() == (tmp_path / "f.csv").read_bytes()
    assert list(s.to_arrays()) == list(s.to_frame().columns)


def test_dict_of_columns_is_checked(tmp_path):
    units = {"a": "1", "b": "1"}
    with pytest.raises(NanoabsError, match="different lengths"):
        write_export({"a": np.zeros(3), "b": np.zeros(4)}, tmp_path / "x.csv", metadata={}, units=units)
    with pytest.raises(NanoabsError, match=r"frame\['a'\].*1-D"):
        write_export({"a": np.array(["x", "y"])}, tmp_path / "x.csv", metadata={}, units=units)
    with pytest.raises(NanoabsError, match="DataFrame or a dict"):
        write_export([1.0, 2.0], tmp_path / "x.csv", metadata={}, units=units)
    assert not list(tmp_path.iterdir())
