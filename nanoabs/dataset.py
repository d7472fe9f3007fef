"""N-D results as xarray Datasets (dims ``wavelength_nm`` plus the swept parameters) and netCDF files.

xarray is an optional dependency (``pip install "nanoabs[xarray]"``, which also brings the
light ``h5netcdf`` backend for netCDF-4 files); it is imported only here, when asked for.
Every data variable carries a CF-style ``units`` attribute and a ``long_name``; the
Dataset's attributes carry the provenance (method, materials, package version) as JSON text,
since netCDF attributes cannot hold nested mappings.
"""

from __future__ import annotations

import json

import numpy as np

from ._errors import NanoabsError

__all__ = ["spectrum_dataset", "sweep_dataset", "write_netcdf", "read_netcdf"]

#: Units of the spectrum variables in CF / UDUNITS spelling.
CF_UNITS = {"wavelength_nm": "nm", "sigma_abs_m2": "m2", "sigma_sca_m2": "m2", "sigma_ext_m2": "m2",
            "q_abs": "1", "q_sca": "1", "q_ext": "1", "q_abs_eqvol": "1",
            "sigma_abs_per_metal_volume_m_1": "m-1", "absorbed_fraction": "1", "dipole_bound_ratio": "1"}


def _xarray():
    try:
        import xarray as xr
    except ImportError:  # pragma: no cover - depends on the installation
        raise NanoabsError("N-D results need xarray: pip install 'nanoabs[xarray]'") from None
    return xr


def spectrum_dataset(spec, dims=None):
    """:class:`xarray.Dataset` of a :class:`~nanoabs.Spectrum` (one particle or a family).

    Parameters
    ----------
    spec : Spectrum
        The spectrum; cross-sections [m²] of shape (..., W) on ``wavelength_nm`` [nm].
    dims : sequence of str, optional
        Names of the leading family dimensions (default ``index_0``, ``index_1``, ...).

    Returns
    -------
    xarray.Dataset
        One variable per spectrum column with a CF ``units`` attribute (``m2``, ``1``,
        ``m-1``), coordinate ``wavelength_nm`` [nm], provenance in the attributes.
    """
    from .optics import FRAME_COLUMNS

    xr = _xarray()
    shape = np.shape(spec.sigma_abs_m2)
    lead = shape[:-1]
    names = list(dims) if dims is not None else [f"index_{i}" for i in range(len(lead))]
    if len(names) != len(lead):
        raise NanoabsError(f"dims = {names!r}: give {len(lead)} name(s) for the family dimensions {lead}")
    all_dims = (*names, "wavelength_nm")
    data = {}
    for c in FRAME_COLUMNS[1:]:
        v = np.broadcast_to(np.asarray(getattr(spec, c), dtype=float), shape)
        data[c] = (all_dims, np.array(v), {"units": CF_UNITS[c], "long_name": c.replace("_", " ")})
    coords = {"wavelength_nm": ("wavelength_nm", spec.wavelength_nm,
                                {"units": "nm", "long_name": "vacuum wavelength"})}
    attrs = {"title": "nanoabs spectrum", "Conventions": "CF-1.10",
             "nanoabs_metadata_json": json.dumps(spec.metadata, default=str)}
    return xr.Dataset(data, coords=coords, attrs=attrs)


def sweep_dataset(frame):
    """:class:`xarray.Dataset` of a sweep table (:func:`nanoabs.design.sweep`) on its Cartesian grid.

    Dims are the swept parameters (those with more than one value, in the sweep's order) and
    ``wavelength_nm``; parameters held fixed become scalar coordinates. Units come from
    ``frame.attrs["units"]`` (CF spelling), the sweep metadata goes into the attributes.

    Parameters
    ----------
    frame : pandas.DataFrame
        A table returned by :func:`nanoabs.design.sweep` (with its ``attrs``).
    """
    xr = _xarray()
    meta = frame.attrs.get("metadata", {})
    units = frame.attrs.get("units", {})
    params = meta.get("parameters", {})
    dims = [n for n, v in params.items() if len(v) > 1 and n in frame.columns]
    fixed = [n for n, v in params.items() if len(v) == 1 and n in frame.columns]
    design_cols = [c for c in frame.columns if c not in dims + fixed and c != "wavelength_nm"
                   and (c == "design_id" or c not in CF_UNITS)]
    data = frame.drop(columns=design_cols).set_index(dims + ["wavelength_nm"])
    if not data.index.is_unique:
        raise NanoabsError("sweep table: the swept parameters do not identify the rows uniquely")
    ds = data.drop(columns=fixed).to_xarray()
    for n in fixed:
        ds = ds.assign_coords({n: frame[n].iloc[0]})
    for name in list(ds.variables):
        u = units.get(name)
        if u is not None:
            ds[name].attrs["units"] = CF_UNITS.get(name, _cf(u))
            ds[name].attrs["long_name"] = name.replace("_", " ")
    ds.attrs.update({"title": "nanoabs sweep", "Conventions": "CF-1.10",
                     "nanoabs_metadata_json": json.dumps(meta, default=str)})
    return ds


def _cf(unit: str) -> str:
    """A nanoabs unit string in UDUNITS spelling ("m^2" -> "m2", "m^-1" -> "m-1", "text" -> "")."""
    return "" if unit in ("text", "", None) else str(unit).replace("^", "").replace(" ", " ")


def write_netcdf(ds, path, *, force: bool = False):
    """Write a Dataset to a netCDF-4 file atomically (never overwrites unless ``force``).

    Parameters
    ----------
    ds : xarray.Dataset
        The data, e.g. from :func:`spectrum_dataset`.
    path : str or os.PathLike
        Output file (``.nc``).
    force : bool, keyword-only
        Replace an existing file.

    Returns
    -------
    pathlib.Path
        The file written.
    """
    from .export import write_file_atomic

    _xarray()
    engine = _engine()
    return write_file_atomic(path, lambda fh: fh.write(ds.to_netcdf(None, engine=engine)), force=force,
                             binary=True)


def read_netcdf(path):
    """Read a netCDF file written by :func:`write_netcdf` (fully loaded, file closed).

    Parameters
    ----------
    path : str or os.PathLike
        The netCDF file.

    Returns
    -------
    xarray.Dataset
    """
    xr = _xarray()
    with xr.open_dataset(path, engine=_engine()) as ds:
        return ds.load()


def _engine():
    try:
        import h5netcdf  # noqa: F401
        return "h5netcdf"
    except ImportError:
        try:
            import scipy.io  # noqa: F401  (netCDF-3 fallback, no compression)
            return "scipy"
        except ImportError:  # pragma: no cover
            raise NanoabsError("netCDF output needs h5netcdf: pip install 'nanoabs[xarray]'") from None
