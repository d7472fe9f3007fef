"""The material store: tabulated optical constants, interpolation, shipped Drude–Lorentz fits.

Each dataset is one CSV in the ``materials`` data package (``materials/`` in the
source tree, installed as ``nanoabs.material_data``) with a ``#`` header giving the
material, the publication, the open dataset and licence, the valid range and the
sign convention (exp(−iωt), n + ik with k ≥ 0). A fitted Drude–Lorentz model for
a dataset lives beside it as ``<material>__<source>.dl.json``.

Interpolation is shape-preserving piecewise-cubic Hermite (PCHIP; Fritsch &
Carlson, SIAM J. Numer. Anal. 17, 238 (1980)) of n and k separately against
log(wavelength): it passes through every tabulated point, is C¹, and never
overshoots the data between points.
"""

from __future__ import annotations

import csv
import io
import math
import os
from dataclasses import dataclass, field
from functools import lru_cache
from pathlib import Path

import numpy as np

from ._errors import DataError, NanoabsError, _fmt, check_choice, check_finite_array, check_positive, suggest
from .drude_lorentz import HC_EV_NM, DrudeLorentz, surface_damping_correction, surface_damping_eV
from .hotcarriers import FREE_ELECTRON

__all__ = [
    "Material",
    "material",
    "catalog",
    "load_table",
    "effective_length_nm",
]

ALIASES = {
    "water": "H2O", "gold": "Au", "silver": "Ag", "copper": "Cu", "aluminium": "Al",
    "aluminum": "Al", "silica": "SiO2", "glass": "SiO2", "titania": "TiO2", "alumina": "Al2O3",
    "sapphire": "Al2O3", "silicon": "Si", "vacuum": "air",
}

#: Largest user file read [bytes] (material tables here, spectra in nanoabs.illumination): 20 MB,
#: about 500 000 rows of three numbers; bounds the memory a mistaken file can take.
MAX_USER_FILE_BYTES = 20_000_000


def user_path(path, what: str) -> Path:
    """``path`` as a Path; a one-line NanoabsError for anything that is not a path (None, numbers)."""
    if isinstance(path, (str, os.PathLike)) and str(path) != "":
        return Path(path)
    raise NanoabsError(f"{what} = {_fmt(path)}: must be a file path (str or pathlib.Path)")


def read_user_text(path, what: str) -> str:
    """Text of a user data file: size-bounded, UTF-8 with or without a byte-order mark.

    Raises a one-line :class:`DataError` naming the file (never quoting its contents) when it
    is missing, a folder, larger than ``MAX_USER_FILE_BYTES``, unreadable or not UTF-8.
    """
    p = user_path(path, what)
    try:
        size = p.stat().st_size
        if p.is_dir():
            raise IsADirectoryError
        if size > MAX_USER_FILE_BYTES:
            raise DataError(f"{what} {p}: {size / 1e6:.1f} MB; files up to {MAX_USER_FILE_BYTES / 1e6:g} MB "
                            "are read (split or thin the table)")
        with open(p, "rb") as fh:  # read at most the bound + 1 byte even if the file grew meanwhile
            raw = fh.read(MAX_USER_FILE_BYTES + 1)
    except FileNotFoundError:
        raise DataError(f"{what} {p}: file not found") from None
    except IsADirectoryError:
        raise DataError(f"{what} {p}: is a directory, expected a CSV file") from None
    except OSError as exc:
        raise DataError(f"{what} {p}: cannot be read ({type(exc).__name__})") from None
    if len(raw) > MAX_USER_FILE_BYTES:
        raise DataError(f"{what} {p}: larger than {MAX_USER_FILE_BYTES / 1e6:g} MB")
    try:
        return raw.decode("utf-8-sig")
    except UnicodeDecodeError:
        raise DataError(f"{what} {p}: cannot be read (not UTF-8 text)") from None




def _data_dir() -> Path:
    try:
        from importlib import resources  # here, not at import (start-up)

        return Path(str(resources.files("nanoabs.material_data")))
    except ModuleNotFoundError:  # running from a source checkout without installing
        return Path(__file__).resolve().parents[1] / "materials"


def _read_header(text: str) -> tuple[dict, str]:
    header, body = {}, []
    for line in text.splitlines():
        if line.startswith("#"):
            key, sep, value = line[1:].partition(":")
            if sep:
                header[key.strip().lower()] = value.strip()
        elif line.strip():
            body.append(line)
    return header, "\n".join(body)


def _parse_table(path: Path, text: str):
    """Columns (wavelength_nm, n, k) or (wavelength_nm, eps_real, eps_imag) → (wl, complex n, note)."""
    header, body = _read_header(text)
    rows = list(csv.reader(io.StringIO(body)))
    if not rows:
        raise DataError(f"material table {path}: no data rows")
    cols = [c.strip().lower() for c in rows[0]]
    if cols[:3] == ["wavelength_nm", "n", "k"]:
        kind = "nk"
    elif cols[:3] == ["wavelength_nm", "eps_real", "eps_imag"]:
        kind = "eps"
    else:  # the file's contents are never quoted in a message: only counts and positions
        raise DataError(f"material table {path}: the first data line must be the header "
                        f"'wavelength_nm,n,k' or 'wavelength_nm,eps_real,eps_imag' "
                        f"(it has {len(rows[0])} fields that do not match)")
    vals = []
    for i, r in enumerate(rows[1:], start=2):
        try:
            vals.append([float(x) for x in r[:3]])
            if len(r) < 3:
                raise ValueError
        except ValueError:
            raise DataError(f"material table {path}: data row {i} is not three numbers") from None
    a = np.array(vals, dtype=float)
    if a.shape[0] < 2:
        raise DataError(f"material table {path}: need at least 2 data rows, found {a.shape[0]}")
    if not np.all(np.isfinite(a)):
        raise DataError(f"material table {path}: contains NaN or infinite values")
    wl = a[:, 0]
    if np.any(wl <= 0):
        raise DataError(f"material table {path}: wavelengths must be > 0 nm")
    if np.any(np.diff(wl) <= 0):
        i = int(np.argmax(np.diff(wl) <= 0))
        raise DataError(f"material table {path}: wavelength_nm must increase strictly "
                        f"({wl[i + 1]:g} follows {wl[i]:g})")
    note = ""
    if kind == "nk":
        n = a[:, 1] + 1j * a[:, 2]
        if np.any(a[:, 2] < 0):
            if np.all(a[:, 2] <= 0):
                n = np.conj(n)
                note = "k < 0 in the file: converted from the exp(+i omega t) convention (n - ik)"
            else:
                raise DataError(f"material table {path}: k changes sign; cannot tell the sign convention")
    else:
        eps = a[:, 1] + 1j * a[:, 2]
        if np.any(a[:, 2] < 0):
            if np.all(a[:, 2] <= 0):
                eps = np.conj(eps)
                note = "eps'' < 0 in the file: converted from the exp(+i omega t) convention"
            else:
                raise DataError(f"material table {path}: eps_imag changes sign; cannot tell the sign convention")
        n = np.sqrt(eps)
    return header, wl, n, note


@dataclass
class Material:
    """Optical constants of one dataset (or a constant index) as functions of vacuum wavelength.

    Use :func:`material` to obtain one. ``permittivity`` and ``refractive_index``
    take scalars or arrays of wavelengths [nm] and keep their shape.

    Parameters
    ----------
    name : str
        Material name (e.g. ``'Au'``), used in labels, messages and metadata.
    source : str
        Dataset the constants come from: its key, ``'constant'`` for a constant index,
        or ``'user'`` for a user table without a ``# source`` header.
    kind : str, optional
        ``'metal'``, ``'dielectric'`` or ``'medium'``; only ``'metal'`` layers count
        towards the metal volume and get surface damping.
    info : dict, optional
        Dataset metadata (reference, DOI, dataset, convention, note) copied into exports.
    range_nm : tuple of float, optional
        (shortest, longest) tabulated vacuum wavelength [nm]; outside it evaluation
        raises unless ``extrapolate`` is set and a fitted ``model`` exists.
    extrapolate : bool, optional
        Use the fitted Drude-Lorentz ``model`` outside ``range_nm`` instead of raising.
    model : DrudeLorentz or None, optional
        Drude-Lorentz fit of the dataset, used for extrapolation and surface damping.
    """

    name: str
    source: str
    kind: str = "dielectric"
    info: dict = field(default_factory=dict)
    range_nm: tuple = (0.0, math.inf)
    extrapolate: bool = False
    model: DrudeLorentz | None = None
    _wl: np.ndarray | None = field(default=None, repr=False)
    _n: np.ndarray | None = field(default=None, repr=False)
    _constant: complex | None = field(default=None, repr=False)
    _interp: tuple | None = field(default=None, repr=False, compare=False)  # shared (n, k) interpolants

    def __post_init__(self):
        if self._wl is not None:
            self._n_interp, self._k_interp = self._interp or _interpolants(self._wl, self._n)

    @property
    def label(self) -> str:
        return self.name if self._constant is not None else f"{self.name} ({self.source})"

    @property
    def is_metal(self) -> bool:
        return self.kind == "metal"

    def __repr__(self) -> str:
        lo, hi = self.range_nm
        span = "any wavelength" if self._constant is not None else f"{lo:g}-{hi:g} nm"
        fit = ", Drude-Lorentz fit" if self.model is not None else ""
        return f"Material({self.label}: {self.kind}, {span}{fit})"

    def _repr_html_(self) -> str:
        import html

        ref = self.info.get("reference", "")
        return (f"<div><b>{html.escape(self.label)}</b> ({html.escape(self.kind)})<br>"
                f"{html.escape(repr(self))}<br><small>{html.escape(str(ref))}</small></div>")

    def outside(self, wavelength_nm) -> np.ndarray:
        """Boolean mask of wavelengths outside the tabulated range.

        Parameters
        ----------
        wavelength_nm : float or array_like
            Vacuum wavelengths [nm], any shape.
        """
        wl = np.asarray(wavelength_nm, dtype=float)
        lo, hi = self.range_nm
        return (wl < lo * (1 - 1e-12)) | (wl > hi * (1 + 1e-12))

    def refractive_index(self, wavelength_nm):
        """Complex refractive index n + ik (k ≥ 0) at vacuum wavelengths [nm].

        Parameters
        ----------
        wavelength_nm : float or array_like
            Vacuum wavelengths [nm], > 0, any shape (the result keeps it); within
            ``range_nm`` unless ``extrapolate`` is set.
        """
        wl = check_positive("wavelength", wavelength_nm, unit="nm")
        if self._constant is not None:
            return np.full(wl.shape, self._constant, dtype=complex)[()]
        # one-entry memo: searches and sweeps ask again and again for the same grid
        key = (self.extrapolate, id(self.model))
        memo = self.__dict__.get("_memo")
        if memo is not None and memo[0] == key and memo[1].shape == wl.shape and np.array_equal(memo[1], wl):
            return memo[2].copy()[()]
        out = self.outside(wl)
        if np.any(out):
            if not (self.extrapolate and self.model is not None):
                lo, hi = self.range_nm
                how = ("; no fitted model to extrapolate with" if self.extrapolate else
                       "; use the fitted Drude-Lorentz model there with extrapolate=True (--extrapolate on the command line)"
                       if self.model is not None else "")
                raise NanoabsError(
                    f"wavelength {wl.min():g}-{wl.max():g} nm is outside material {self.name} "
                    f"dataset {self.source!r} range {lo:g}-{hi:g} nm{how}")
        # the range check accepts 1e-12 relative beyond the table ends: clip to the ends so the
        # interpolants (extrapolate=False, NaN outside) see exactly the accepted points
        lo, hi = self._wl[0], self._wl[-1]
        x = np.log(np.clip(wl, lo, hi))
        n = self._n_interp(x) + 1j * self._k_interp(x)
        if np.any(out):
            n = np.where(out, self.model.refractive_index(wl), n)
        if not np.all(np.isfinite(n)):
            bad = np.asarray(np.broadcast_to(wl, np.shape(n)))[~np.isfinite(n)].flat[0]
            raise NanoabsError(f"material {self.label}: optical constants are not finite at "
                               f"{bad:g} nm (data or fitted model); choose another dataset or range")
        n = np.asarray(n)
        self.__dict__["_memo"] = (key, wl.copy(), n.copy())
        return n[()]

    def permittivity(self, wavelength_nm):
        """Complex permittivity ε = (n + ik)² (ε″ ≥ 0) at vacuum wavelengths [nm].

        Parameters
        ----------
        wavelength_nm : float or array_like
            Vacuum wavelengths [nm], > 0, any shape (the result keeps it); within
            ``range_nm`` unless ``extrapolate`` is set.
        """
        return np.asarray(self.refractive_index(wavelength_nm)) ** 2

    def with_surface_damping(self, length_nm: float, *, A: float = 1.0,
                             fermi_velocity_m_s: float | None = None) -> "DampedMaterial":
        """This metal with the size-dependent surface-scattering correction for mean free path L [nm].

        ε(ω, L) = ε_bulk(ω) + ω_p²/(ω² + iγω) − ω_p²/(ω² + i(γ + A v_F/L)ω)
        (Kreibig & Vollmer 1995, Sec. 2.2.4), with ω_p and γ from the dataset's
        shipped Drude–Lorentz fit and v_F from Ashcroft & Mermin (1976) Table 2.1.

        Parameters
        ----------
        length_nm : float
            Effective electron mean free path L [nm] (4V/S for a convex particle).
        A : float, keyword-only
            Dimensionless surface-scattering parameter [1] (≈ 1 for diffuse scattering).
        fermi_velocity_m_s : float or None, keyword-only
            Fermi velocity v_F [m s^-1]; by default the tabulated value for Au, Ag, Cu
            or Al (other metals need it given).
        """
        if self.model is None or self.model.plasma_energy_eV <= 0:
            raise NanoabsError(f"surface damping needs a Drude term: material {self.label} has no "
                               "fitted Drude-Lorentz model with a free-electron part")
        if fermi_velocity_m_s is None:
            if self.name not in FREE_ELECTRON:
                raise NanoabsError(
                    f"surface damping for {self.name}: no tabulated Fermi velocity (known: "
                    f"{', '.join(FREE_ELECTRON)}); give fermi_velocity_m_s or turn the correction off")
            fermi_velocity_m_s = FREE_ELECTRON[self.name].fermi_velocity_m_s
        extra = float(surface_damping_eV(length_nm, fermi_velocity_m_s, A=A))
        return DampedMaterial(self, float(length_nm), float(A), float(fermi_velocity_m_s), extra)

    def metadata(self) -> dict:
        d = {"material": self.name, "source": self.source, "kind": self.kind,
             "range_nm": list(self.range_nm)}
        for key in ("reference", "doi", "dataset", "values", "convention", "note", "file_sha256"):
            if self.info.get(key):
                d[key] = self.info[key]
        if self.extrapolate:
            d["extrapolation"] = "fitted Drude-Lorentz model used outside the tabulated range"
        return d


@dataclass
class DampedMaterial:
    """A metal with surface damping; same interface as :class:`Material`."""

    bulk: Material
    length_nm: float
    A: float
    fermi_velocity_m_s: float
    extra_damping_eV: float

    name = property(lambda self: self.bulk.name)
    source = property(lambda self: self.bulk.source)
    kind = property(lambda self: self.bulk.kind)
    is_metal = property(lambda self: self.bulk.is_metal)
    range_nm = property(lambda self: self.bulk.range_nm)
    label = property(lambda self: self.bulk.label)

    @property
    def model(self) -> DrudeLorentz:
        return self.bulk.model.with_surface_damping(self.extra_damping_eV)

    def outside(self, wavelength_nm):
        return self.bulk.outside(wavelength_nm)

    def permittivity(self, wavelength_nm):
        return damped_permittivity(self.bulk, wavelength_nm, self.extra_damping_eV)[0][()]

    def refractive_index(self, wavelength_nm):
        return np.sqrt(self.permittivity(wavelength_nm))

    def with_surface_damping(self, length_nm, **kw):
        return self.bulk.with_surface_damping(length_nm, **kw)

    def metadata(self) -> dict:
        d = self.bulk.metadata()
        d["surface_damping"] = {
            "effective_length_nm": self.length_nm, "A": self.A,
            "fermi_velocity_m_s": self.fermi_velocity_m_s,
            "extra_damping_eV": self.extra_damping_eV,
            "reference": "Kreibig & Vollmer (1995) Sec. 2.2.4; v_F: " + FREE_ELECTRON[self.name].source
            if self.name in FREE_ELECTRON else "Kreibig & Vollmer (1995) Sec. 2.2.4; v_F given by the user",
        }
        return d


def damped_permittivity(mat, wavelength_nm, extra_damping_eV):
    """ε of a metal whose Drude damping is raised by Δγ [eV] (Δγ may broadcast against λ).

    ε(ω, L) = ε_bulk(ω) + Δε with Δε from
    :func:`~nanoabs.drude_lorentz.surface_damping_correction` and the material's
    fitted Drude term. The Drude–Lorentz form stays passive for any Δγ ≥ 0;
    added to tabulated data the difference of two Drude terms could push ε″
    below 0 far in the infrared (ω < γ + Δγ), so ε″ is clipped at 0 there.

    Returns
    -------
    eps : complex array
    clipped : bool
        Whether any value was clipped (callers report it).
    """
    wl = np.asarray(wavelength_nm, dtype=float)
    eps = np.asarray(mat.permittivity(wl), dtype=complex)
    eps = eps + surface_damping_correction(mat.model, HC_EV_NM / wl, extra_damping_eV)
    clipped = bool(np.any(eps.imag < 0))
    return eps.real + 1j * np.maximum(eps.imag, 0.0), clipped


def effective_length_nm(volume_nm3: float, surface_nm2: float) -> float:
    """Effective mean free path L = 4V/S [nm] of a convex particle (Coronado & Schatz 2003)."""
    return 4.0 * float(volume_nm3) / float(surface_nm2)


@lru_cache(maxsize=None)
def catalog() -> dict:
    """All shipped datasets: {material: {source: header dict}}, with the default marked."""
    out: dict = {}
    for p in sorted(_data_dir().glob("*__*.csv")):
        mat, src = p.stem.split("__", 1)
        header, _ = _read_header(p.read_text(encoding="utf-8"))
        header["path"] = str(p)
        fit = p.with_name(p.stem + ".dl.json")
        header["fit"] = str(fit) if fit.exists() else ""
        out.setdefault(mat, {})[src] = header
    return out


def default_source(name: str) -> str:
    srcs = catalog()[name]
    for s, h in srcs.items():
        if h.get("default", "no") == "yes":
            return s
    return next(iter(srcs))


def _resolve_name(name: str) -> str:
    cat = catalog()
    if name in cat:
        return name
    low = {k.lower(): k for k in cat}
    key = str(name).strip()
    if key.lower() in low:
        return low[key.lower()]
    if key.lower() in ALIASES:
        return ALIASES[key.lower()]
    names = sorted(cat) + sorted(ALIASES)
    raise NanoabsError(f"unknown material {name!r}{suggest(name, names)}; known: {', '.join(sorted(cat))} "
                       f"(aliases: {', '.join(sorted(ALIASES))}) or a number for a constant index")


def _constant(value) -> Material:
    try:
        n = complex(value)
    except (TypeError, ValueError):
        raise NanoabsError(f"medium = {value!r}: must be a material name or a refractive index") from None
    if not (np.isfinite(n.real) and np.isfinite(n.imag)) or n.real <= 0 or n.imag < 0:
        raise NanoabsError(f"refractive index = {value!r}: need a finite real part > 0 and imaginary part >= 0")
    label = f"n={n.real:g}" if n.imag == 0 else f"n={n.real:g}+{n.imag:g}i"
    return Material(label, "constant", "medium", {"values": "constant refractive index"},
                    _constant=n)


def material(name, source: str | None = None, *, extrapolate: bool = False) -> Material:
    """Load a material from the store, or make a constant-index medium from a number.

    Parameters
    ----------
    name : str or float
        A material (``"Au"``, ``"SiO2"``, ``"H2O"``/``"water"``, …; see
        ``nanoabs materials``), ``"material:dataset"`` (``"Au:mcpeak-2015"``), or
        a refractive index (``1.33``, ``"1.5"``).
    source : str, optional
        Dataset key (e.g. ``"mcpeak-2015"``); default: the dataset marked default.
    extrapolate : bool, keyword-only
        Outside the tabulated range, use the dataset's fitted Drude–Lorentz
        model instead of raising. The material's metadata records it.

    Examples
    --------
    >>> au = material("Au")
    >>> eps = au.permittivity([500.0, 600.0])
    """
    if isinstance(name, (bool, np.bool_)) or not isinstance(
            name, (str, int, float, complex, np.integer, np.floating, np.complexfloating)):
        raise NanoabsError(f"material = {_fmt(name)}: must be a material name (str), a refractive "
                           f"index (number) or a Material (got {type(name).__name__})")
    if source is not None and not isinstance(source, str):
        raise NanoabsError(f"source = {_fmt(source)}: must be a dataset key (str)")
    if isinstance(name, (int, float, complex, np.number)):
        return _constant(name)
    try:
        float(str(name))
    except ValueError:
        pass
    else:
        return _constant(str(name))
    if source is None and ":" in str(name):
        name, source = str(name).split(":", 1)
    key = _resolve_name(name)
    srcs = catalog()[key]
    if source is None:
        source = default_source(key)
    if source not in srcs:
        raise NanoabsError(f"unknown dataset {source!r} for {key}{suggest(source, srcs)}; "
                           f"available: {', '.join(srcs)}")
    return _load(key, source, bool(extrapolate))


@lru_cache(maxsize=None)
def _load_cached(key: str, source: str):
    h = catalog()[key][source]
    path = Path(h["path"])
    header, wl, n, note = _parse_table(path, path.read_text(encoding="utf-8"))
    model = DrudeLorentz.load(h["fit"]) if h.get("fit") else None
    return header, wl, n, note, model


class _Pchip:
    """Piecewise-cubic Hermite interpolant with Fritsch & Carlson's (1980) monotone derivatives.

    Interior derivatives: 0 where the neighbouring secant slopes m_{k-1}, m_k differ in
    sign or one is 0, else the weighted harmonic mean 1/d_k = (w1/m_{k-1} + w2/m_k) /
    (w1 + w2), w1 = 2h_k + h_{k-1}, w2 = h_k + 2h_{k-1} (Fritsch & Carlson, SIAM J.
    Numer. Anal. 17, 238 (1980), with the weights of Fritsch & Butland (1984) (from
    memory)); end derivatives from the one-sided three-point formula, limited to keep the
    shape (Moler, Numerical Computing with MATLAB (2004), Sec. 3.6, pchiptx (from
    memory)).  Two points give the straight line.  NaN outside [x_0, x_N].  Written in
    numpy so that reading a material does not import scipy.interpolate (start-up);
    tests/test_materials.py holds it to 1e-12 of ``scipy.interpolate.PchipInterpolator``.
    """

    def __init__(self, x, y):
        x = np.asarray(x, dtype=float)
        y = np.asarray(y, dtype=float)
        h = np.diff(x)
        m = np.diff(y) / h
        if y.size == 2:
            d = np.array([m[0], m[0]])
        else:
            d = np.zeros_like(y)
            w1, w2 = 2.0 * h[1:] + h[:-1], h[1:] + 2.0 * h[:-1]
            flat = (np.sign(m[1:]) != np.sign(m[:-1])) | (m[1:] == 0) | (m[:-1] == 0)
            with np.errstate(divide="ignore", invalid="ignore"):
                whmean = (w1 / m[:-1] + w2 / m[1:]) / (w1 + w2)
            d[1:-1][~flat] = 1.0 / whmean[~flat]
            d[0] = self._end(h[0], h[1], m[0], m[1])
            d[-1] = self._end(h[-1], h[-2], m[-1], m[-2])
        # cubic per interval in s = x - x_k: y_k + d_k s + c1 s^2 + c0 s^3
        t = (d[:-1] + d[1:] - 2.0 * m) / h
        self._x = x
        self._c = (t / h, (m - d[:-1]) / h - t, d[:-1], y[:-1])

    @staticmethod
    def _end(h0, h1, m0, m1):
        d = ((2.0 * h0 + h1) * m0 - h0 * m1) / (h0 + h1)
        if np.sign(d) != np.sign(m0):
            return 0.0
        if np.sign(m0) != np.sign(m1) and abs(d) > 3.0 * abs(m0):
            return 3.0 * m0
        return d

    def __call__(self, xq):
        xq = np.asarray(xq, dtype=float)
        x = self._x
        k = np.clip(np.searchsorted(x, xq, side="right") - 1, 0, x.size - 2)
        s = xq - x[k]
        c0, c1, c2, c3 = (c[k] for c in self._c)
        out = c3 + s * c2 + s * s * c1 + s * s * s * c0
        return np.where((xq >= x[0]) & (xq <= x[-1]), out, np.nan)


def _interpolants(wl, n):
    """PCHIP interpolants of n and k on log(λ) (shape-preserving, no overshoot between points)."""
    x = np.log(wl)
    with np.errstate(divide="ignore", over="ignore", invalid="ignore"):  # flat runs (k = 0)
        return _Pchip(x, n.real), _Pchip(x, n.imag)


@lru_cache(maxsize=None)
def _interpolants_cached(key: str, source: str):
    _, wl, n, _, _ = _load_cached(key, source)
    return _interpolants(wl, n)


def _load(key: str, source: str, extrapolate: bool) -> Material:
    header, wl, n, note, model = _load_cached(key, source)
    info = dict(header)
    if note:
        info["note"] = note
    if len(np.unique(n)) == 1:  # constant table (air)
        return Material(key, source, header.get("kind", "medium"), info, (float(wl[0]), float(wl[-1])),
                        _constant=complex(n[0]))
    return Material(key, source, header.get("kind", "dielectric"), info,
                    (float(wl[0]), float(wl[-1])), extrapolate, model, wl, n,
                    _interp=_interpolants_cached(key, source))


def load_table(path, *, name: str | None = None, kind: str = "metal") -> Material:
    """Read a user table (CSV: ``wavelength_nm,n,k`` or ``wavelength_nm,eps_real,eps_imag``).

    ``#`` header lines of the shipped form are read if present. Data in the
    exp(+iωt) convention (k ≤ 0 or ε″ ≤ 0 throughout) are conjugated on import
    and the material's metadata says so; a column whose sign changes is an error.
    A UTF-8 byte-order mark is accepted; files larger than ``MAX_USER_FILE_BYTES`` (20 MB)
    are refused before they are read, and error messages never quote the file's contents.

    Parameters
    ----------
    path : str or os.PathLike
        The CSV file; wavelengths [nm] strictly increasing.
    name : str or None, keyword-only
        Material name; by default the file's ``# material`` header, else the file stem.
    kind : str, keyword-only
        ``'metal'``, ``'dielectric'`` or ``'medium'``; a ``# kind`` header in the file
        takes precedence.
    """
    p = user_path(path, "material table")
    if name is not None and not isinstance(name, str):
        raise NanoabsError(f"name = {_fmt(name)}: must be a string")
    kind = check_choice("kind", kind, ["metal", "dielectric", "medium"])
    text = read_user_text(p, "material table")
    header, wl, n, note = _parse_table(p, text)
    info = dict(header)
    import hashlib

    info["file_sha256"] = hashlib.sha256(text.encode("utf-8")).hexdigest()  # provenance of the user's file
    info.setdefault("dataset", f"user table {p.name}")
    if note:
        info["note"] = note
    check_finite_array("wavelength_nm", wl, increasing=True)
    return Material(name or header.get("material", p.stem), header.get("source", "user"),
                    header.get("kind", kind), info, (float(wl[0]), float(wl[-1])), False, None, wl, n)
