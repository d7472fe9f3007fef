"""Write and read result tables as CSV + JSON sidecar (or a single JSON file).

An export is meant for a device-level model (drift-diffusion, circuit) that must
read it without guesswork:

* ``det.csv`` -- a plain CSV: one header row with the column names, one row per
  sample, no index column, no comment lines. Floats are written with the
  shortest representation that round-trips exactly; missing values are ``nan``,
  infinities ``inf`` / ``-inf``.
* ``det.json`` -- the sidecar: ``format`` ("nanoabs-export"), ``format_version``
  (1), ``package_version``, ``created_utc``, ``data_file`` (the CSV file name),
  ``rows``, ``columns`` (ordered list of ``{"name", "unit", "dtype"}``) and
  ``metadata`` (the caller's dict: inputs, materials and sources, methods and
  references, band totals, warnings).

A path ending in ``.json`` instead gives one self-contained file: the same
document with ``data_file`` null and an extra ``data`` object holding one array
per column (NaN as null; infinities are refused there because JSON has none).

Files are written atomically (temporary file in the same directory, fsync,
``os.replace``) and existing files are never overwritten unless ``force=True``.
"""

from __future__ import annotations

import csv
import glob
import importlib.util
import json
import math
import os
import tempfile
from collections.abc import Mapping
from contextlib import contextmanager
from datetime import datetime, timezone
from pathlib import Path

import numpy as np

from nanoabs._errors import DataError, NanoabsError

__all__ = ["FORMAT_NAME", "FORMAT_VERSION", "write_export", "read_export", "check_writable", "exclusive_lock"]

FORMAT_NAME = "nanoabs-export"
#: Version written. 2: spectral densities say so in their column names (``..._per_nm``) and the
#: sidecar carries ``provenance``; version 1 files are still read.
FORMAT_VERSION = 2
READABLE_VERSIONS = (1, 2)

#: The command line of the running CLI command (set by :func:`nanoabs.cli.main`), for provenance.
COMMAND_LINE: list | None = None
_SUFFIXES = (".csv", ".json")
_TEXT_DTYPES = ("object", "str", "string")


# --------------------------------------------------------------------------- paths


def _targets(path: Path, netcdf: bool = False) -> tuple[Path, ...]:
    suffix = path.suffix.lower()
    if netcdf and suffix == ".nc":
        return (path,)
    if suffix == ".csv":
        return (path, path.with_suffix(".json"))
    if suffix == ".json":
        return (path,)
    raise NanoabsError(
        f"export path = {str(path)!r} has suffix {path.suffix or '(none)'!r}; "
        f"allowed suffixes: {', '.join(_SUFFIXES + (('.nc',) if netcdf else ()))}"
    )


def check_writable(path, *, force: bool = False, netcdf: bool = False) -> tuple[Path, ...]:
    """Check that an export to ``path`` can be written, before any computation.

    Parameters
    ----------
    path : str or os.PathLike
        Target file; ``.csv`` (CSV + ``.json`` sidecar) or ``.json`` (single file).
    force : bool, optional
        Allow overwriting existing files.
    netcdf : bool, optional
        Also accept a ``.nc`` (netCDF) target.

    Returns
    -------
    tuple of pathlib.Path
        The files that :func:`write_export` will create: ``(csv, sidecar)`` or
        ``(json,)``.

    Raises
    ------
    NanoabsError
        Bad suffix, missing or unwritable parent directory, a target that is a
        directory, or a target that exists while ``force`` is false.
    """
    if str(path).strip() == "":
        raise NanoabsError("export path = '': give a file name ending in .csv or .json")
    path = Path(path)
    targets = _targets(path, netcdf)
    parent = path.parent
    if not parent.is_dir():
        raise NanoabsError(
            f"output directory {str(parent)!r} does not exist: create it first"
        )
    if not os.access(parent, os.W_OK | os.X_OK):
        raise NanoabsError(f"output directory {str(parent)!r} is not writable")
    for target in targets:
        if target.is_dir():
            raise NanoabsError(f"output file {str(target)!r} is a directory: choose a file name")
        if target.exists() and not force:
            raise NanoabsError(
                f"output file {str(target)!r} exists: pass force=True (CLI: --force) to overwrite"
            )
    return targets


# --------------------------------------------------------------------------- conversion


def _jsonable(value, where: str):
    """Return ``value`` as plain JSON types; non-finite floats become None."""
    if value is None or isinstance(value, (bool, np.bool_)):
        return None if value is None else bool(value)
    if isinstance(value, str):
        return str(value)
    if isinstance(value, (int, np.integer)):
        return int(value)
    if isinstance(value, (float, np.floating)):
        v = float(value)
        return v if math.isfinite(v) else None
    if isinstance(value, np.ndarray):
        return _jsonable(value.tolist(), where)
    if isinstance(value, Mapping):
        out = {}
        for key, item in value.items():
            if not isinstance(key, str):
                raise NanoabsError(
                    f"metadata{where} has key {key!r} of type {type(key).__name__}: keys must be str"
                )
            out[str(key)] = _jsonable(item, f"{where}[{key!r}]")
        return out
    if isinstance(value, (list, tuple)):
        return [_jsonable(item, f"{where}[{i}]") for i, item in enumerate(value)]
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    raise NanoabsError(
        f"metadata{where} = {type(value).__name__}: not JSON-serialisable; allowed: "
        "dict, list, tuple, str, int, float, bool, None, numpy scalars/arrays, paths"
    )


def _column_dtype(name: str, series: pd.Series) -> str:
    """The dtype name recorded in the sidecar; refuse what cannot round-trip."""
    import pandas as pd

    dtype = series.dtype
    if isinstance(dtype, np.dtype) and dtype.kind in "fiub":
        return str(dtype)
    is_text = isinstance(dtype, pd.StringDtype) or (
        dtype == object and all(isinstance(v, str) for v in series.to_numpy())
    )
    if is_text and str(dtype) in _TEXT_DTYPES:
        if series.isna().any():
            raise NanoabsError(
                f"column {name!r} is text with missing values: fill them (e.g. with '') before export"
            )
        return str(dtype)
    raise NanoabsError(
        f"column {name!r} has dtype {dtype}: allowed are float, int, uint, bool or text columns "
        "(split complex values into real/imag columns)"
    )


def _check_columns(data: Mapping) -> list[str]:
    """Names of a dict of columns; each must be a 1-D float, int, uint or bool array, all equally long."""
    names = list(data)
    lengths = set()
    for name in names:
        a = np.asarray(data[name]) if isinstance(name, str) and name else None
        if a is not None and (a.ndim != 1 or a.dtype.kind not in "fiub"):
            raise NanoabsError(f"frame[{name!r}]: a dict of columns needs 1-D float, int, uint or bool "
                               f"arrays, found shape {a.shape} dtype {a.dtype} (use a DataFrame for text)")
        lengths.add(None if a is None else a.shape[0])
    if len(lengths - {None}) > 1:
        raise NanoabsError(f"frame: the columns have different lengths {sorted(lengths - {None})}; "
                           "give equally long columns")
    return names


def _column(frame, name: str) -> np.ndarray:
    """One column of a DataFrame or of a dict of columns, as a numpy array."""
    return np.asarray(frame[name]) if isinstance(frame, Mapping) else frame[name].to_numpy()


def _n_rows(frame) -> int:
    if isinstance(frame, Mapping):
        return int(np.asarray(next(iter(frame.values()))).shape[0]) if frame else 0
    return int(len(frame))


def _check_frame(frame, units) -> list[dict]:
    if isinstance(frame, Mapping):  # a dict of numeric columns: no pandas needed (start-up of the CLI)
        names = _check_columns(frame)
    else:
        import pandas as pd

        if not isinstance(frame, pd.DataFrame):
            raise NanoabsError(f"frame = {type(frame).__name__}: must be a pandas DataFrame or a dict "
                               "of column name -> 1-D numeric array")
        names = list(frame.columns)
    if not names:
        raise NanoabsError("frame has no columns: give at least one column")
    bad = [n for n in names if not isinstance(n, str) or not n]
    if bad:
        raise NanoabsError(f"frame column names {bad!r}: must be non-empty str")
    dupes = sorted({n for n in names if names.count(n) > 1})
    if dupes:
        raise NanoabsError(f"frame has duplicate column names {dupes}: names must be unique")
    if not isinstance(units, Mapping):
        raise NanoabsError(f"units = {type(units).__name__}: must be a dict column -> unit string")
    missing = [n for n in names if n not in units]
    if missing:
        raise NanoabsError(
            f"units has no entry for column(s) {', '.join(missing)}: give a unit for every "
            "column ('1' for dimensionless)"
        )
    columns = []
    for name in names:
        unit = units[name]
        if not isinstance(unit, str) or not unit.strip():
            raise NanoabsError(
                f"units[{name!r}] = {unit!r}: must be a non-empty str ('1' for dimensionless)"
            )
        dtype = str(np.asarray(frame[name]).dtype) if isinstance(frame, Mapping) else _column_dtype(name, frame[name])
        columns.append({"name": name, "unit": unit, "dtype": dtype})
    return columns


def _dataset_files(metadata) -> dict:
    """{file name: sha256} of every shipped optical-constant table named in ``metadata``."""
    import hashlib

    from .materials import _data_dir

    found, stack = {}, [metadata]
    while stack:
        node = stack.pop()
        if isinstance(node, Mapping):
            mat, src = node.get("material"), node.get("source")
            if isinstance(mat, str) and isinstance(src, str):
                path = _data_dir() / f"{mat}__{src}.csv"
                if path.name not in found and path.is_file():
                    found[path.name] = hashlib.sha256(path.read_bytes()).hexdigest()
            stack.extend(node.values())
        elif isinstance(node, (list, tuple)):
            stack.extend(node)
    return dict(sorted(found.items()))


def provenance(metadata=None) -> dict:
    """What produced a file: versions of nanoabs and its dependencies, Python, platform, command line,
    and the sha256 of every shipped optical-constant table the metadata names."""
    import platform
    import sys
    from importlib.metadata import PackageNotFoundError, version

    deps = {}
    for name in ("numpy", "scipy", "pandas", "matplotlib", "miepython", "numba", "xarray"):
        try:
            deps[name] = version(name)
        except PackageNotFoundError:
            deps[name] = None
    return {"nanoabs": _package_version(), "dependencies": deps, "python": sys.version.split()[0],
            "platform": platform.platform(), "command_line": COMMAND_LINE,
            "material_files_sha256": _dataset_files(metadata) if metadata is not None else {}}


def _package_version() -> str:
    try:
        import nanoabs

        version = getattr(nanoabs, "__version__", None)
        if version:
            return str(version)
    except ImportError:  # pragma: no cover - we are inside the package
        pass
    try:
        from importlib.metadata import PackageNotFoundError, version as dist_version

        return dist_version("nanoabs")
    except PackageNotFoundError:
        return "unknown"


def _json_data(frame, columns: list[dict]) -> dict:
    data = {}
    for col in columns:
        values = _column(frame, col["name"])
        kind = np.dtype(col["dtype"]).kind if col["dtype"] not in _TEXT_DTYPES else "U"
        if kind == "f":
            if np.isinf(values).any():
                raise NanoabsError(
                    f"column {col['name']!r} has infinite values: a .json export cannot hold "
                    "them; use a .csv path"
                )
            data[col["name"]] = [None if math.isnan(v) else v for v in values.astype(float).tolist()]
        elif kind == "U":
            data[col["name"]] = [str(v) for v in values]
        else:
            data[col["name"]] = values.tolist()
    return data


def _json_text(doc: dict, data: dict | None) -> str:
    """Header indented for people; each data column on a single line."""
    text = json.dumps(doc, indent=2, ensure_ascii=False, allow_nan=False)
    if data is None:
        return text + "\n"
    body = ",\n".join(
        f"    {json.dumps(name, ensure_ascii=False)}: "
        f"{json.dumps(values, ensure_ascii=False, allow_nan=False)}"
        for name, values in data.items()
    )
    return text[: -len("\n}")] + ',\n  "data": {\n' + body + "\n  }\n}\n"


# --------------------------------------------------------------------------- writing


def _file_mode() -> int:
    mask = os.umask(0)
    os.umask(mask)
    return 0o666 & ~mask


def _write_temp(target: Path, write, *, binary: bool = False) -> Path:
    """Write through ``write(handle)`` into a temporary file beside ``target``."""
    text = {} if binary else {"encoding": "utf-8", "newline": ""}
    tmp = tempfile.NamedTemporaryFile(
        mode="wb" if binary else "w",
        delete=False,
        dir=target.parent,
        prefix=f".{target.name}.",
        suffix=".tmp",
        **text,
    )
    try:
        with tmp:
            write(tmp)
            tmp.flush()
            os.fsync(tmp.fileno())
        os.chmod(tmp.name, _file_mode())
    except BaseException:
        Path(tmp.name).unlink(missing_ok=True)
        raise
    return Path(tmp.name)


def write_export(frame, path, *, metadata, units, force: bool = False) -> tuple[Path, ...]:
    """Write ``frame`` with units and metadata as CSV + JSON sidecar or single JSON.

    Parameters
    ----------
    frame : pandas.DataFrame or dict
        The table; column names carry the unit (``wavelength_nm``, ``sigma_abs_m2``).
        Columns may be float, int, uint, bool or text. The index is not written
        (call ``reset_index()`` first to keep it). A dict of column name -> 1-D
        float, int, uint or bool array is written the same way without pandas.
    path : str or os.PathLike
        ``*.csv`` writes ``path`` and ``path.with_suffix('.json')``; ``*.json``
        writes one file holding the sidecar and the data.
    metadata : dict
        JSON-serialisable description (inputs, materials, methods, totals,
        warnings). numpy scalars/arrays become plain numbers/lists, tuples become
        lists, paths become str, NaN and infinities become null.
    units : dict
        Column name -> unit string (``"nm"``, ``"m^2"``, ``"1"`` for
        dimensionless). Every column needs one; extra entries are ignored.
    force : bool, optional
        Overwrite existing files.

    Returns
    -------
    tuple of pathlib.Path
        The files written.

    Raises
    ------
    NanoabsError
        See :func:`check_writable`; a column without unit, an unsupported column
        dtype, or metadata that cannot be written as JSON; another process writing
        the same export at the same moment (:func:`exclusive_lock`). On any
        failure no new file and no temporary file is left behind.
    """
    targets = check_writable(path, force=force)
    columns = _check_frame(frame, units)
    if not isinstance(metadata, Mapping):
        raise NanoabsError(f"metadata = {type(metadata).__name__}: must be a dict")
    single = len(targets) == 1
    doc = {
        "format": FORMAT_NAME,
        "format_version": FORMAT_VERSION,
        "package_version": _package_version(),
        "created_utc": datetime.now(timezone.utc).isoformat(timespec="seconds"),
        "data_file": None if single else targets[0].name,
        "rows": _n_rows(frame),
        "columns": columns,
        "provenance": provenance(metadata),
        "metadata": _jsonable(metadata, ""),
    }
    json_text = _json_text(doc, _json_data(frame, columns) if single else None)

    writers = []
    if not single:
        # float32/float16 go out as the float64 repr of their exact value, so
        # parsing as float64 and casting back is exact
        wide = {c["name"]: "float64" for c in columns if c["dtype"] in ("float16", "float32")}
        if isinstance(frame, Mapping):
            writers.append((targets[0], lambda fh: _write_csv_columns(fh, frame, wide)))
        else:
            table = frame.astype(wide) if wide else frame
            writers.append((targets[0], lambda fh: table.to_csv(fh, index=False, na_rep="nan",
                                                                lineterminator="\n")))
    writers.append((targets[-1], lambda fh: fh.write(json_text)))
    with exclusive_lock(targets[0], "export"):  # a CSV never lands beside another writer's sidecar
        check_writable(path, force=force)
        return place_together(writers)


def _write_csv_columns(fh, data: Mapping, wide: dict) -> None:
    """A dict of numeric columns as CSV, byte for byte what ``DataFrame.to_csv(fh, index=False,
    na_rep="nan", lineterminator="\\n")`` writes for the same columns (pandas formats each value with
    numpy's shortest round-trip ``astype(str)`` and quotes like the csv module; tests/test_export.py
    compares the bytes), without importing pandas."""
    writer = csv.writer(fh, lineterminator="\n")
    writer.writerow(list(data))
    cols = [np.asarray(data[name], dtype=wide.get(name)).astype(str) for name in data]
    writer.writerows(zip(*cols))


def place_together(writers) -> tuple[Path, ...]:
    """Write several files as one unit: all temporaries first, then rename; roll back on failure.

    ``writers`` is a list of (target path, write(handle) function). If anything
    fails, no temporary and no newly placed target is left (a CSV never lands
    without its sidecar).
    """
    temps: list[Path] = []
    placed: list[Path] = []
    try:
        for target, write in writers:
            temps.append(_write_temp(Path(target), write))
        for tmp, (target, _) in zip(temps, writers):
            os.replace(tmp, target)
            placed.append(Path(target))
    except BaseException:
        for leftover in temps:
            leftover.unlink(missing_ok=True)
        for target in placed:
            target.unlink(missing_ok=True)
        raise
    return tuple(Path(t) for t, _ in writers)


# --------------------------------------------------------------------------- reading


def _load_json(path: Path) -> dict:
    try:
        doc = json.loads(path.read_text(encoding="utf-8"))
    except FileNotFoundError:
        raise DataError(f"export file {str(path)!r} not found") from None
    except (OSError, UnicodeDecodeError, json.JSONDecodeError) as exc:
        raise DataError(f"export file {str(path)!r} is not readable JSON: {exc}") from None
    if not isinstance(doc, dict):
        raise DataError(f"export file {str(path)!r} must hold a JSON object, found {type(doc).__name__}")
    return doc


def _check_header(doc: dict, source: Path) -> list[dict]:
    where = repr(str(source))
    if doc.get("format") != FORMAT_NAME:
        raise DataError(f"{where}: format = {doc.get('format')!r}, expected {FORMAT_NAME!r}")
    if doc.get("format_version") not in READABLE_VERSIONS:
        raise DataError(
            f"{where}: format_version = {doc.get('format_version')!r}; this nanoabs reads "
            f"{', '.join(map(str, READABLE_VERSIONS))}"
        )
    rows = doc.get("rows")
    if not isinstance(rows, int) or isinstance(rows, bool) or rows < 0:
        raise DataError(f"{where}: rows = {rows!r}, must be an integer >= 0")
    if not isinstance(doc.get("metadata"), dict):
        raise DataError(f"{where}: 'metadata' must be a JSON object")
    columns = doc.get("columns")
    if not isinstance(columns, list) or not columns:
        raise DataError(f"{where}: 'columns' must be a non-empty list of {{name, unit, dtype}}")
    for i, col in enumerate(columns):
        ok = isinstance(col, dict) and all(isinstance(col.get(k), str) for k in ("name", "unit", "dtype"))
        if not ok:
            raise DataError(f"{where}: columns[{i}] = {col!r}, must have str name, unit and dtype")
        if col["dtype"] not in _TEXT_DTYPES:
            try:
                ok = np.dtype(col["dtype"]).kind in "fiub"
            except TypeError:
                ok = False
            if not ok:
                raise DataError(
                    f"{where}: column {col['name']!r} has dtype {col['dtype']!r}; "
                    f"allowed: float*, int*, uint*, bool, {', '.join(_TEXT_DTYPES)}"
                )
    return columns


def _parse(value, kind: str):
    """One value from the CSV (str) or the JSON data (number, bool, None)."""
    if kind == "f":
        return np.nan if value is None else float(value)
    if kind == "b":
        if value is True or value == "True":
            return True
        if value is False or value == "False":
            return False
        raise ValueError(value)
    if isinstance(value, float):
        raise ValueError(value)
    return int(value)


def _to_series(values: list, col: dict, source: Path) -> pd.Series:
    import pandas as pd

    name, dtype = col["name"], col["dtype"]
    if dtype in _TEXT_DTYPES:
        if not all(isinstance(v, str) for v in values):
            raise DataError(f"{str(source)!r}: column {name!r} must hold only text")
        return pd.Series(values, dtype=dtype, name=name)
    kind = np.dtype(dtype).kind
    parsed = []
    for i, value in enumerate(values):
        try:
            parsed.append(_parse(value, kind))
        except (TypeError, ValueError):
            raise DataError(
                f"{str(source)!r}: column {name!r} row {i + 1} value {value!r} is not a valid {dtype}"
            ) from None
    try:
        arr = np.array(parsed, dtype=np.float64 if kind == "f" else dtype).astype(dtype)
    except OverflowError:
        raise DataError(f"{str(source)!r}: column {name!r} has values outside the {dtype} range") from None
    return pd.Series(arr, name=name)


def _read_csv(csv_path: Path, columns: list[dict]) -> dict[str, list]:
    try:
        with open(csv_path, encoding="utf-8", newline="") as fh:
            rows = list(csv.reader(fh))
    except FileNotFoundError:
        raise DataError(f"data file {str(csv_path)!r} not found (named by its sidecar)") from None
    except (OSError, UnicodeDecodeError, csv.Error) as exc:
        raise DataError(f"data file {str(csv_path)!r} is not readable CSV: {exc}") from None
    expected = [c["name"] for c in columns]
    header = rows[0] if rows else []
    if header != expected:
        raise DataError(
            f"{str(csv_path)!r}: CSV columns {header} do not match the sidecar columns {expected}"
        )
    for lineno, row in enumerate(rows[1:], start=2):
        if len(row) != len(expected):
            raise DataError(
                f"{str(csv_path)!r}: line {lineno} has {len(row)} fields, expected {len(expected)}"
            )
    return {name: [row[i] for row in rows[1:]] for i, name in enumerate(expected)}


def _read_csv_fast(csv_path: Path, columns: list[dict], rows: int):
    """The CSV through pandas' C reader with the sidecar's dtypes, or None if anything looks wrong.

    Only the literal ``nan`` is a missing value; a short line (which the C reader would fill with
    NaN) is detected by re-reading the lines that hold NaN with the csv module. On None the caller
    falls back to the slow reader, which names the offending line.
    """
    import pandas as pd

    names = [c["name"] for c in columns]
    dtypes, na = {}, {}
    for c in columns:
        kind = "t" if c["dtype"] in _TEXT_DTYPES else np.dtype(c["dtype"]).kind
        dtypes[c["name"]] = str if kind == "t" else ("float64" if kind == "f" else c["dtype"])
        na[c["name"]] = ["nan"] if kind == "f" else []
    try:
        frame = pd.read_csv(csv_path, dtype=dtypes, keep_default_na=False, na_values=na, encoding="utf-8",
                            index_col=False, float_precision="round_trip")  # exact, as the writer promises
    except (ValueError, TypeError, OverflowError, OSError, pd.errors.ParserError, UnicodeDecodeError):
        return None
    if list(frame.columns) != names or len(frame) != rows:
        return None
    floats = [c["name"] for c in columns if dtypes[c["name"]] == "float64"]
    if floats:
        bad = np.flatnonzero(frame[floats].isna().to_numpy().any(axis=1))
        if bad.size and not _nan_rows_are_literal(csv_path, bad, names, floats):
            return None
    for c in columns:  # float16/32 columns were written as exact float64 reprs
        if c["dtype"] != dtypes[c["name"]] and dtypes[c["name"]] is not str:
            frame[c["name"]] = frame[c["name"]].astype(c["dtype"])
        elif dtypes[c["name"]] is str:
            frame[c["name"]] = frame[c["name"]].astype(c["dtype"])
    return frame


def _nan_rows_are_literal(csv_path, rows, names, floats):
    """True if each listed data row has every field and its missing floats are written 'nan'."""
    want = set(int(r) + 1 for r in rows)  # line 0 is the header
    idx = [names.index(f) for f in floats]
    with open(csv_path, encoding="utf-8", newline="") as fh:
        for lineno, row in enumerate(csv.reader(fh)):
            if lineno in want:
                if len(row) != len(names) or any(row[i] == "" for i in idx):
                    return False
                want.discard(lineno)
                if not want:
                    break
    return not want


def read_export(path) -> tuple[pd.DataFrame, dict]:
    """Read an export written by :func:`write_export`.

    Parameters
    ----------
    path : str or os.PathLike
        The ``.csv`` (its ``.json`` sidecar must sit beside it), the sidecar
        ``.json`` itself, or a single-file ``.json`` export.

    Returns
    -------
    frame : pandas.DataFrame
        Same columns, order, dtypes and values as written, with a RangeIndex.
    header : dict
        The sidecar document without ``data``: ``format``, ``format_version``,
        ``package_version``, ``created_utc``, ``data_file``, ``rows``,
        ``columns`` (name, unit, dtype) and ``metadata`` (the caller's dict).

    Raises
    ------
    NanoabsError
        The suffix is neither ``.csv`` nor ``.json``.
    DataError
        A missing file or sidecar, a foreign format or version, or data that
        do not match the columns/rows the sidecar lists.
    """
    import pandas as pd

    path = Path(path)
    _targets(path)  # validates the suffix
    if path.suffix.lower() == ".csv":
        sidecar = path.with_suffix(".json")
        if not sidecar.is_file():
            raise DataError(
                f"sidecar {str(sidecar)!r} for {str(path)!r} not found: the units and metadata live there"
            )
        if not path.is_file():
            raise DataError(f"export file {str(path)!r} not found")
        doc, source, csv_path = _load_json(sidecar), sidecar, path
        if "data" in doc:
            raise DataError(
                f"{str(sidecar)!r} is a single-file export, not the sidecar of {str(path)!r}"
            )
    else:
        doc, source = _load_json(path), path
        csv_path = None
        if "data" not in doc:
            name = doc.get("data_file")
            if not isinstance(name, str) or not name:
                raise DataError(f"{str(path)!r} has neither 'data' nor a 'data_file' name")
            csv_path = path.parent / name
    columns = _check_header(doc, source)
    names = [c["name"] for c in columns]
    if csv_path is not None:
        frame = _read_csv_fast(csv_path, columns, doc["rows"])
        if frame is not None:
            return frame, doc
        raw = _read_csv(csv_path, columns)  # slow path: exact diagnostics of what is wrong
    else:
        raw = doc.pop("data")
        if not isinstance(raw, dict) or list(raw) != names:
            got = list(raw) if isinstance(raw, dict) else type(raw).__name__
            raise DataError(f"{str(path)!r}: data columns {got} do not match the listed columns {names}")
    for name in names:
        if not isinstance(raw[name], list) or len(raw[name]) != doc["rows"]:
            n = len(raw[name]) if isinstance(raw[name], list) else "not a list"
            raise DataError(
                f"{str(csv_path or path)!r}: column {name!r} has {n} rows, the sidecar says {doc['rows']}"
            )
    frame = pd.DataFrame(
        {c["name"]: _to_series(raw[c["name"]], c, csv_path or path) for c in columns},
        index=pd.RangeIndex(doc["rows"]),
    )
    return frame, doc


# --------------------------------------------------------------------------- other files

#: Largest user input file (illumination spectrum, material table) read [bytes]: the one bound of
#: the material reader (20 MB).
from .materials import MAX_USER_FILE_BYTES as MAX_INPUT_BYTES  # noqa: E402


def check_input_file(path, what: str, *, max_bytes: int = MAX_INPUT_BYTES) -> Path:
    """Refuse a user input file larger than ``max_bytes`` before it is parsed (bounded memory)."""
    p = Path(path)
    try:
        size = p.stat().st_size
    except OSError:
        return p  # the reader reports a missing or unreadable file in its own words
    if size > max_bytes:
        raise NanoabsError(f"{what} {str(p)!r} is {size / 1e6:.0f} MB: allowed is at most {max_bytes / 1e6:.0f} MB "
                           "(thin the table, e.g. to a 1 nm grid)")
    return p


def check_file_target(path, *, force: bool = False, suffixes=None, what: str = "output file") -> Path:
    """Check, before any work, that a single output file can be written at ``path``."""
    target = Path(path)
    if str(path).strip() == "":
        raise NanoabsError(f"{what} = '': give a file name")
    if suffixes is not None and target.suffix.lower() not in suffixes:
        raise NanoabsError(f"{what} {str(target)!r}: suffix must be {' or '.join(suffixes)}")
    if not target.parent.is_dir():
        raise NanoabsError(f"output directory {str(target.parent)!r} does not exist: create it first")
    if target.is_dir():
        raise NanoabsError(f"{what} {str(target)!r} is a directory: choose a file name")
    if target.exists() and not force:
        raise NanoabsError(f"{what} {str(target)!r} exists: pass force=True (CLI: --force) to overwrite")
    return target


def write_file_atomic(path, write, *, force: bool = False, binary: bool = False) -> Path:
    """Write any output file atomically: ``write(handle)`` fills a temporary beside it, then rename.

    Used for figures, reports and parameter files. Refuses to overwrite an
    existing file unless ``force``; leaves nothing behind on failure.
    """
    target = check_file_target(path, force=force)
    tmp = _write_temp(target, write, binary=binary)
    try:
        os.replace(tmp, target)
    except BaseException:
        tmp.unlink(missing_ok=True)
        raise
    return target


# --------------------------------------------------------------------------- one writer at a time


def clean_stale_temps(target) -> None:
    """Remove temporaries of ``target`` (and its sidecar) left by a killed writer; call under its lock."""
    target = Path(target)
    for name in {target.name, target.with_suffix(".json").name}:
        for tmp in target.parent.glob(f".{glob.escape(name)}.*.tmp"):
            tmp.unlink(missing_ok=True)


@contextmanager
def exclusive_lock(target, what: str = "output"):
    """Hold an exclusive OS-level lock on ``target`` (lock file ``<target>.lock``) for the block.

    ``fcntl.flock`` on the lock file where available (released by the OS if the
    process dies); elsewhere the lock file is created with ``O_EXCL`` (a stale one
    left by a killed process must then be removed by hand, the message says so).
    A second writer gets a one-line :class:`NanoabsError` at once; nothing waits.
    """
    lock = Path(str(target) + ".lock")
    busy = (f"{what} {str(target)!r} is being written by another nanoabs process (lock file "
            f"{str(lock)!r}); wait for it to finish or choose another output")
    try:
        fd = _acquire(lock, busy)
    except OSError as exc:
        raise NanoabsError(f"{what} {str(target)!r}: cannot create the lock file {str(lock)!r} "
                           f"({exc.__class__.__name__}: {exc.strerror or exc})") from None
    try:
        os.write(fd, f"{os.getpid()}\n".encode())
        yield lock
    finally:
        lock.unlink(missing_ok=True)
        os.close(fd)


def _acquire(lock: Path, busy: str) -> int:
    if not _HAVE_FLOCK:
        try:
            return os.open(lock, os.O_WRONLY | os.O_CREAT | os.O_EXCL, 0o644)
        except FileExistsError:
            raise NanoabsError(busy + "; if no other process runs, remove the lock file") from None
    import fcntl

    for _ in range(5):
        fd = os.open(lock, os.O_RDWR | os.O_CREAT, 0o644)
        try:
            fcntl.flock(fd, fcntl.LOCK_EX | fcntl.LOCK_NB)
        except BlockingIOError:
            os.close(fd)
            raise NanoabsError(busy) from None
        try:  # the previous holder may have removed the file between our open and flock
            if os.fstat(fd).st_ino == os.stat(lock).st_ino:
                os.ftruncate(fd, 0)
                return fd
        except FileNotFoundError:
            pass
        os.close(fd)
    raise NanoabsError(busy)


_HAVE_FLOCK = importlib.util.find_spec("fcntl") is not None  # POSIX
