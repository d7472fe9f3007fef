"""Figures (matplotlib, headless Agg backend): optical constants, spectra, maps, yields.

The ``plot_*`` functions draw into ``ax=`` when given (else into a new Figure) and
return the Figure; :func:`spectrum_axes` (behind :meth:`nanoabs.Spectrum.plot`) returns
the Axes and, with no ``ax``, draws through pyplot so notebooks show the figure inline.
:func:`save_figure` writes PNG or SVG atomically. Axis labels carry units; colour maps are perceptually
uniform (viridis); curves of a report take their colours in the same order, so one particle keeps
one colour across the report's figures.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np

from ._errors import NanoabsError

__all__ = ["plot_material", "plot_spectra", "plot_map", "plot_curves", "plot_detector", "spectrum_axes",
           "sweep_axes", "save_figure"]

#: Plot label and scale of each spectrum quantity (one table: values, labels and units never disagree).
QUANTITY_LABELS = {
    "sigma_abs_m2": ("absorption cross-section [nm²]", 1e18),
    "sigma_sca_m2": ("scattering cross-section [nm²]", 1e18),
    "sigma_ext_m2": ("extinction cross-section [nm²]", 1e18),
    "q_abs": ("absorption efficiency Q_abs [1]", 1.0),
    "q_sca": ("scattering efficiency Q_sca [1]", 1.0),
    "q_ext": ("extinction efficiency Q_ext [1]", 1.0),
    "q_abs_eqvol": ("Q_abs, equal-volume sphere [1]", 1.0),
    "sigma_abs_per_metal_volume_m_1": ("σ_abs per metal volume [µm⁻¹]", 1e-6),
    "absorbed_fraction": ("absorbed fraction σ_abs/σ_ext [1]", 1.0),
    "dipole_bound_ratio": ("σ_abs / single-dipole bound [1]", 1.0),
}


def spectrum_axes(spec, quantity="sigma_abs_m2", *, ax=None, **line_kw):
    """Draw one quantity of a :class:`~nanoabs.Spectrum` against wavelength; return the Axes.

    The title names the particle, host or environment, method and polarisation; a family
    of sizes is drawn as one line per member.

    Parameters
    ----------
    spec : Spectrum
        The spectrum (wavelengths [nm], cross-sections [m²]).
    quantity : str
        A spectrum column (a key of ``QUANTITY_LABELS``); cross-sections are drawn in
        [nm²], σ_abs per metal volume in [µm⁻¹], efficiencies and ratios in [1].
    ax : matplotlib.axes.Axes, optional
        Draw into these Axes; default new Axes through pyplot (shown inline in notebooks).
    **line_kw
        Passed to :meth:`matplotlib.axes.Axes.plot` (``label=`` also adds a legend).

    Returns
    -------
    matplotlib.axes.Axes
    """
    from ._errors import check_choice

    quantity = check_choice("quantity", quantity, list(QUANTITY_LABELS))
    label, scale = QUANTITY_LABELS[quantity]
    if ax is None:
        import matplotlib.pyplot as plt

        _, ax = plt.subplots(figsize=(6.4, 4.2), layout="constrained")
    y = np.asarray(getattr(spec, quantity), dtype=float) * scale
    y = np.broadcast_to(y, np.broadcast_shapes(y.shape, spec.wavelength_nm.shape))
    ax.plot(spec.wavelength_nm, y.reshape(-1, spec.wavelength_nm.size).T, **line_kw)
    ax.set_xlabel("wavelength [nm]")
    ax.set_ylabel(label)
    ax.grid(alpha=0.3)
    m = spec.metadata
    ax.set_title(f"{spec._headline().split('; ')[0]}; {m.get('method', '?')}, "
                 f"polarisation {m.get('polarization', '?')}", fontsize=9)
    if "label" in line_kw:
        ax.legend(frameon=False, fontsize=8)
    return ax


def sweep_axes(frame, quantity="sigma_abs_m2", *, ax=None):
    """Map of a sweep table (:func:`nanoabs.design.sweep`): wavelength × design; returns the Axes.

    Parameters
    ----------
    frame : pandas.DataFrame
        A sweep table with its ``attrs`` (one row per design and wavelength).
    quantity : str
        A result column (a key of ``QUANTITY_LABELS``); cross-sections in [nm²].
    ax : matplotlib.axes.Axes, optional
        Where to draw; a new figure through pyplot when omitted.

    Returns
    -------
    matplotlib.axes.Axes
        With one parameter swept its values are the vertical axis; with several, the
        ``design_id`` (the label says which parameters vary), so nothing is averaged away.
    """
    from ._errors import check_choice

    quantity = check_choice("quantity", quantity, [q for q in QUANTITY_LABELS if q in frame.columns])
    label, scale = QUANTITY_LABELS[quantity]
    swept = [n for n, v in frame.attrs.get("metadata", {}).get("parameters", {}).items() if len(v) > 1]
    key = swept[0] if len(swept) == 1 and swept[0] in frame.columns and swept[0] != "material" else "design_id"
    grid = frame.pivot_table(index=key, columns="wavelength_nm", values=quantity).sort_index()
    if ax is None:
        import matplotlib.pyplot as plt

        _, ax = plt.subplots(figsize=(6.4, 4.2), layout="constrained")
    plabel = key.replace("_nm", " [nm]") if key != "design_id" else "design_id (" + " x ".join(
        n for n, v in frame.attrs.get("metadata", {}).get("parameters", {}).items() if len(v) > 1) + ")"
    plot_map(grid.columns.values, grid.index.values, grid.values * scale, param_label=plabel, value_label=label,
             ax=ax)
    return ax


def _colours(n):
    """The colour order of every curve plot: curve i of n in every figure of a report gets the same
    viridis colour, so one particle keeps one colour across the report."""
    import matplotlib

    cmap = matplotlib.colormaps["viridis"]
    return [cmap(0.9 * i / max(1, n - 1)) for i in range(n)]


def _figure(nrows=1, ncols=1, ax=None, **kw):
    from matplotlib.figure import Figure

    if ax is not None:
        return ax.figure, ax
    fig = Figure(figsize=kw.pop("figsize", (6.4, 4.2)), layout="constrained")
    axes = fig.subplots(nrows, ncols, **kw)
    return fig, axes


def save_figure(fig, path, *, force: bool = False, dpi: int = 150) -> Path:
    """Save ``fig`` to ``path`` (.png or .svg) atomically; never overwrite unless ``force``.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        The figure.
    path : str or os.PathLike
        Output file; the suffix (``.png`` or ``.svg``) chooses the format.
    force : bool, keyword-only
        Replace an existing file.
    dpi : int, keyword-only
        Resolution of a PNG [dots per inch].

    Returns
    -------
    pathlib.Path
        The file written.
    """
    from .export import write_file_atomic

    p = Path(path)
    fmt = p.suffix.lower().lstrip(".")
    if fmt not in ("png", "svg"):
        raise NanoabsError(f"plot file {str(p)!r}: suffix must be .png or .svg")
    return write_file_atomic(p, lambda fh: fig.savefig(fh, format=fmt, dpi=dpi), force=force,
                             binary=True)


def plot_material(mat, wavelength_nm=None, *, ax=None):
    """n, k and ε′, ε″ of a material against wavelength [nm]; tabulated points marked.

    Parameters
    ----------
    mat : Material
        The material (from :func:`nanoabs.material`).
    wavelength_nm : array_like, optional
        Vacuum wavelengths [nm]; default 400 points over the data range (at most a
        factor 20 in wavelength, 300–2000 nm for a constant index).
    ax : sequence of two matplotlib.axes.Axes, optional
        Draw n, k into the first and ε′, ε″ into the second; default a new Figure.

    Returns
    -------
    matplotlib.figure.Figure
    """
    if wavelength_nm is None:
        lo, hi = mat.range_nm
        if not np.isfinite(hi):
            lo, hi = 300.0, 2000.0
        hi = min(hi, 20 * lo, 20000.0)
        wavelength_nm = np.geomspace(lo, hi, 400)
    wl = np.asarray(wavelength_nm, dtype=float)
    n = np.atleast_1d(mat.refractive_index(wl))
    if ax is not None:  # a pair of Axes: (n and k, permittivity)
        if not (isinstance(ax, (tuple, list)) and len(ax) == 2):
            raise NanoabsError("plot_material: ax must be a pair of Axes (index panel, permittivity panel)")
        (a1, a2), fig = ax, ax[0].figure
    else:
        fig, (a1, a2) = _figure(1, 2, figsize=(9.0, 3.8))
    a1.plot(wl, n.real, label="n", color="#1b6ca8")
    a1.plot(wl, n.imag, label="k", color="#c8553d")
    eps = n**2
    a2.plot(wl, eps.real, label="ε′", color="#1b6ca8")
    a2.plot(wl, eps.imag, label="ε″", color="#c8553d")
    if getattr(mat, "_wl", None) is not None:
        t = mat._wl[(mat._wl >= wl.min()) & (mat._wl <= wl.max())]
        if t.size < 300:
            nt = np.atleast_1d(mat.refractive_index(t))
            a1.plot(t, nt.real, ".", color="#1b6ca8", ms=3)
            a1.plot(t, nt.imag, ".", color="#c8553d", ms=3)
    for a, y in ((a1, "refractive index"), (a2, "permittivity")):
        a.set_xlabel("wavelength [nm]")
        a.set_ylabel(y)
        a.legend(frameon=False)
        a.grid(alpha=0.3)
    a2.axhline(0, color="0.5", lw=0.8)
    fig.suptitle(mat.label)
    return fig


def plot_spectra(curves, *, ylabel="absorption cross-section [nm²]", title=None, band=None,
                 scale=1.0, ax=None):
    """Overlay of spectra: ``curves`` is a list of (label, wavelength_nm, values).

    Parameters
    ----------
    curves : list of (str, array_like, array_like)
        Label, vacuum wavelengths [nm] and values (in the unit of ``ylabel`` after ``scale``).
    ylabel : str, keyword-only
        Axis label, with its unit in brackets.
    title : str, optional
        Axes title.
    band : (float, float), optional
        Target band [nm], shaded.
    scale : float, keyword-only
        Factor applied to the values (e.g. 1e18 for m² → nm²) [1].
    ax : matplotlib.axes.Axes, optional
        Draw into these Axes (their Figure is returned); default a new Figure.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, ax = _figure(ax=ax)
    for (label, wl, y), colour in zip(curves, _colours(len(curves))):
        ax.plot(wl, np.asarray(y) * scale, label=label, color=colour)
    if band is not None:
        ax.axvspan(band[0], band[1], color="0.85", zorder=0, label="target band")
    ax.set_xlabel("wavelength [nm]")
    ax.set_ylabel(ylabel)
    ax.grid(alpha=0.3)
    if len(curves) <= 12:
        ax.legend(frameon=False, fontsize=8)
    if title:
        ax.set_title(title)
    return fig


def plot_map(wavelength_nm, param, values, *, param_label, value_label, ridge=True, band=None,
             title=None, ax=None):
    """Wavelength × parameter map (values shape (len(param), len(wavelength))) with the peak ridge.

    Parameters
    ----------
    wavelength_nm : (W,) array_like
        Vacuum wavelengths [nm].
    param : (P,) array_like
        Values of the swept parameter (in the unit named by ``param_label``, e.g. [nm]).
    values : (P, W) array_like
        Quantity to colour (in the unit named by ``value_label``).
    param_label : str, keyword-only
        Label of the parameter axis, with its unit in brackets.
    value_label : str, keyword-only
        Label of the colour bar, with its unit in brackets.
    ridge : bool, keyword-only
        Draw the wavelength of the maximum of each row; a maximum on the first or last
        wavelength is not a peak and is not drawn.
    band : sequence of float, optional
        Band edges [nm], drawn as vertical lines.
    title : str, optional
        Axes title.
    ax : matplotlib.axes.Axes, optional
        Draw into these Axes (their Figure is returned); default a new Figure.

    Returns
    -------
    matplotlib.figure.Figure
    """
    wl = np.asarray(wavelength_nm, dtype=float)
    p = np.asarray(param, dtype=float)
    v = np.asarray(values, dtype=float)
    fig, ax = _figure(ax=ax)
    mesh = ax.pcolormesh(wl, p, v, cmap="viridis", shading="nearest")
    fig.colorbar(mesh, ax=ax, label=value_label)
    if ridge:
        i = np.argmax(v, axis=1)
        ridge_wl = np.where((i > 0) & (i < wl.size - 1), wl[i], np.nan)  # peaks cut by the grid: not drawn
        ax.plot(ridge_wl, p, color="white", lw=1.2, ls="--", label="absorption peak")
    if band is not None:
        for j, b in enumerate(band):
            ax.axvline(b, color="#ff7f0e", lw=1.0, label="target band" if j == 0 else None)
    if ridge or band is not None:
        ax.legend(frameon=False, labelcolor="white", loc="upper left")
    ax.set_xlabel("wavelength [nm]")
    ax.set_ylabel(param_label)
    if title:
        ax.set_title(title)
    return fig


def plot_curves(x, curves, *, xlabel, ylabel, title=None, logy=False, ax=None):
    """Simple line plot: ``curves`` is a list of (label, y) against a shared x.

    Parameters
    ----------
    x : array_like
        Shared abscissa (in the unit named by ``xlabel``).
    curves : list of (str, array_like)
        Label and ordinate values (in the unit named by ``ylabel``).
    xlabel : str, keyword-only
        Abscissa label, with its unit in brackets.
    ylabel : str, keyword-only
        Ordinate label, with its unit in brackets.
    title : str, optional
        Axes title.
    logy : bool, keyword-only
        Logarithmic ordinate (e.g. for emission probabilities).
    ax : matplotlib.axes.Axes, optional
        Draw into these Axes (their Figure is returned); default a new Figure.

    Returns
    -------
    matplotlib.figure.Figure
    """
    fig, ax = _figure(ax=ax)
    for (label, y), colour in zip(curves, _colours(len(curves))):
        ax.plot(x, y, label=label, color=colour)
    ax.set_xlabel(xlabel)
    ax.set_ylabel(ylabel)
    if logy:
        ax.set_yscale("log")
    ax.grid(alpha=0.3)
    ax.legend(frameon=False, fontsize=8)
    if title:
        ax.set_title(title)
    return fig


def plot_detector(result, ax=None):
    """Responsivity [mA/W] and, with a device area, D* [Jones] against wavelength; cut-off marked.

    Parameters
    ----------
    result : HotCarrierResult
        From :func:`nanoabs.hot_carrier_estimate` with ``density_per_um2`` (and ``area_um2`` for D*).
    ax : matplotlib Axes, optional
        Axes to draw on (a new figure otherwise); D* goes on a twin axis (log scale).

    Returns
    -------
    matplotlib.axes.Axes
        The responsivity axes.
    """
    f = result.frame
    if "responsivity_A_W" not in f:
        raise NanoabsError("plot_detector: the result has no responsivity (give density_per_um2)")
    if ax is None:
        ax = _figure()[1]
    wl = f["wavelength_nm"].to_numpy()
    ax.plot(wl, f["responsivity_A_W"].to_numpy() * 1e3, color="C0", label="responsivity")
    ax.set_xlabel("wavelength [nm]")
    ax.set_ylabel("responsivity [mA/W]", color="C0")
    lam_c = result.totals.get("cutoff_wavelength_nm")
    if lam_c is not None and wl.min() <= lam_c <= wl.max():
        ax.axvline(lam_c, color="0.4", ls="--", lw=1)
        ax.annotate(f"cut-off {lam_c:.0f} nm", (lam_c, 0.95), xycoords=("data", "axes fraction"),
                    ha="right", va="top", rotation=90, fontsize=8, color="0.3")
    elif lam_c is not None:
        ax.annotate(f"cut-off {lam_c:.0f} nm (outside the plot)", (0.02, 0.95), xycoords="axes fraction",
                    ha="left", va="top", fontsize=8, color="0.3")
    if "specific_detectivity_Jones" in f:
        d = f["specific_detectivity_Jones"].to_numpy()
        tw = ax.twinx()
        tw.plot(wl, np.where(d > 0, d, np.nan), color="C1", label="D*")
        tw.set_ylabel("D* [cm Hz$^{1/2}$ W$^{-1}$]", color="C1")
        if np.any(d > 0):
            tw.set_yscale("log")
    ax.set_title(result.metadata.get("schottky", {}).get("contact", "hot-carrier detector"))
    return ax
