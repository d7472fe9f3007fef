"""Device-model hand-off: carrier generation inside the particle, and lookup tables for circuits.

A device (drift–diffusion) simulator wants the generation rate G of electron–hole pairs per
volume and time at each point of the metal; a circuit simulator wants the responsivity as a
two-column lookup table. Both come from quantities the package already computes:

* ``G(r) = p(r) / (h c / λ)`` with ``p(r)`` the absorbed power density of
  :func:`nanoabs.detector.absorbed_power_density` (internal Mie fields; Bohren & Huffman
  1983, sec. 4.4) for spheres, and of the T-matrix internal field
  (:func:`nanoabs.tmatrix.absorption_cells`) for homogeneous spheroids, cylinders, capped
  rods and rounded discs in a homogeneous host: every absorbed photon makes one electron–hole
  pair (common practice; the hot-carrier estimate decides how many of them cross the
  barrier). Its volume integral equals the absorbed photon rate σ_abs I₀ λ/(h c).
* the responsivity table is ``wavelength_nm, responsivity_A_W`` as plain CSV with a one-line
  header, which SPICE-family simulators read as a piecewise-linear table.
"""

from __future__ import annotations

import numpy as np

from ._errors import NanoabsError, check_positive
from .drude_lorentz import HC_EV_NM

__all__ = ["absorbed_photon_rate", "generation_profile", "responsivity_table"]

_EV_J = 1.602176634e-19  # elementary charge [C] (exact, SI 2019)

#: Largest relative mismatch between the volume integral of a body's internal-field absorption and
#: its far-field C_abs accepted for a generation profile (edged bodies reach 1e-3 to 2e-2).
BODY_BALANCE_TOL = 0.05

#: Units of the generation-profile columns.
GENERATION_UNITS = {"wavelength_nm": "nm", "radius_nm": "nm", "z_nm": "nm", "rho_nm": "nm",
                    "cell_volume_nm3": "nm^3",
                    "absorbed_power_density_W_m3": "W m^-3",
                    "generation_rate_cm3_s": "cm^-3 s^-1"}


def absorbed_photon_rate(spec, irradiance_W_m2):
    """Absorbed photons per second per particle, σ_abs I₀ λ/(h c) [s⁻¹], at each wavelength."""
    photon_J = HC_EV_NM / spec.wavelength_nm * _EV_J
    return spec.sigma_abs_m2 * irradiance_W_m2 / photon_J


def generation_profile(spec, particle, irradiance_W_m2, *, n_points: int = 50):
    """Generation rate G [cm⁻³ s⁻¹] in cells inside a sphere, or inside a T-matrix body.

    Parameters
    ----------
    spec : Spectrum
        Spectrum of ``particle`` (one particle, W wavelengths).
    particle : Sphere, LayeredSphere, or a homogeneous body of revolution
        Spheres: radial cells.  Cylinder, capped rod, rounded disc, and a spheroid whose
        spectrum was computed with ``method="tmatrix"``, in a homogeneous host: cells of a
        body-fitted grid (:func:`nanoabs.tmatrix.absorption_cells`), for the spectrum's
        polarisation (``random``: orientation average).  The same bodies (spheroids with any
        method) on or in a planar stack: a documented approximation, the profile shape of the
        body in the host medium scaled to the environment's σ_abs (``attrs["profile_approximation"]``);
        spheres there get their exact profile (the multipole solution's internal field).
    irradiance_W_m2 : float or array (W,)
        Incident irradiance at each wavelength [W m⁻²].
    n_points : int
        Radial cells per layer (spheres), or bins in polar angle and in fractional radius
        (bodies of revolution) [1].

    Returns
    -------
    pandas.DataFrame
        Long format, one row per (wavelength, cell): :data:`GENERATION_UNITS` columns.
        Spheres: ``radius_nm`` is the cell centre; G and the power density are cell averages of
        the angle-averaged profile (4-point Gauss–Legendre in r² dr inside each cell).  Bodies:
        ``z_nm`` (along the symmetry axis) and ``rho_nm`` (from it) give the cell centre, G is
        the cell average over the ring-shaped cell (azimuth integrated).  In both, Σ G V_cell
        reproduces the absorbed photon rate; ``cell_volume_nm3`` is given.
    """
    import pandas as pd

    from .detector import absorbed_power_density

    if not (isinstance(n_points, (int, np.integer)) and not isinstance(n_points, bool) and 2 <= n_points <= 2000):
        raise NanoabsError(f"points = {n_points!r}: must be an integer from 2 to 2000")
    I0 = check_positive("irradiance", irradiance_W_m2, unit="W/m^2")
    if particle.shape not in ("sphere", "layered sphere"):
        return _body_profile(spec, particle, I0, min(n_points, 200))
    lo, hi = _layer_cells(particle, n_points)
    t, w = np.polynomial.legendre.leggauss(4)
    half = 0.5 * (hi - lo)
    r = 0.5 * (hi + lo)[:, None] + half[:, None] * t[None, :]  # (C, 4) nodes
    wr2 = half[:, None] * w[None, :] * r**2  # weights of ∫ f r² dr
    p = absorbed_power_density(spec, particle, r.ravel(), I0).reshape(spec.wavelength_nm.size, *r.shape)
    shell = (hi**3 - lo**3) / 3.0  # ∫ r² dr over the cell
    p_avg = np.einsum("wcq,cq->wc", p, wr2) / shell
    photon_J = HC_EV_NM / spec.wavelength_nm * _EV_J
    G = p_avg / photon_J[:, None] * 1e-6  # [cm^-3 s^-1]
    n_wl = spec.wavelength_nm.size
    return pd.DataFrame({"wavelength_nm": np.repeat(spec.wavelength_nm, lo.size),
                         "radius_nm": np.tile(0.5 * (lo + hi), n_wl),
                         "cell_volume_nm3": np.tile(4.0 * np.pi * shell, n_wl),
                         "absorbed_power_density_W_m3": p_avg.ravel(), "generation_rate_cm3_s": G.ravel()})


def _body_profile(spec, particle, I0, n_points):
    """G in body-fitted cells of a homogeneous body of revolution from its T-matrix internal field.

    p = I₀ q with q the cell-average absorption density [1/nm → 1/m] of
    :func:`nanoabs.tmatrix.absorption_cells`; the T matrix is rebuilt on the spectrum's
    grid with the spectrum's (damped) permittivity and the solver's tolerance.
    """
    import pandas as pd

    from .tmatrix import _body, _incidence, _symmetry_axis, absorption_cells, solver_tmatrix

    env = spec.metadata.get("environment") or {}
    planar = env.get("kind", "homogeneous") != "homogeneous"
    body = particle.shape in ("cylinder", "capped-rod", "rounded-disc")
    spheroid = (particle.shape == "ellipsoid" and (spec.metadata.get("method") == "tmatrix" or planar)
                and _symmetry_axis(particle.semi_axes_nm) is not None)
    if not (body or spheroid) or len(particle.layer_materials()) > 1:
        raise NanoabsError("generation profile: defined for spheres and layered spheres, and for homogeneous "
                           "spheroids (method tmatrix, or any method on / in a substrate), cylinders, capped rods "
                           "and rounded discs (an ellipsoid's quasi-static internal field is uniform: G = absorbed "
                           "photon rate / volume)")
    if any(np.size(v) > 1 for v in particle.outer_semi_axes_nm()):
        raise NanoabsError("generation profile: give one particle, not a size family")
    shape, axis, L, D = _body(particle)
    L, D = float(np.ravel(L)[0]), float(np.ravel(D)[0])
    wl = spec.wavelength_nm
    eps = np.broadcast_to(spec.layer_eps[0], wl.shape)
    if planar and spec.metadata.get("incidence_index") is None:
        raise NanoabsError("generation profile: the spectrum's metadata lacks incidence_index (recompute it)")
    tm = solver_tmatrix(shape, eps, np.asarray(spec.n_medium) ** 2, L, D, wl, internal=True)
    pol = spec.metadata.get("polarization", "random")
    theta_inc, psi = (None, 0.0) if pol == "random" else _incidence(axis, pol)
    cells = absorption_cells(tm, theta_inc, psi, n_points)
    # energy balance: the internal field must integrate to C_abs of the far field (its series can
    # converge worse than the T matrix near the edges of a body)
    c_abs = tm.orientation_average()[0] if theta_inc is None else tm.cross_sections(theta_inc, psi)[0]
    balance = float(np.max(np.abs(cells["q_per_nm"] @ cells["cell_volume_nm3"] / c_abs - 1)))
    if balance > BODY_BALANCE_TOL:
        raise NanoabsError(f"generation profile: the internal field of this {shape} integrates to C_abs only within "
                           f"{balance:.1e} (allowed {BODY_BALANCE_TOL:g}); its internal series is not converged "
                           "here (notes/tmatrix.md)")
    I0 = np.broadcast_to(np.asarray(I0, dtype=float), wl.shape)
    q = cells["q_per_nm"]
    if planar:  # documented approximation: the free body's profile shape, scaled to sigma_abs of the environment
        free = q @ cells["cell_volume_nm3"]  # [nm^2]: C_abs of the body in the host, same illumination
        with np.errstate(divide="ignore", invalid="ignore"):
            q = np.where(free[:, None] > 0, q * (np.asarray(spec.sigma_abs_m2) * 1e18 / free)[:, None], 0.0)
    p = I0[:, None] * q * 1e9  # [W m^-3]
    photon_J = HC_EV_NM / wl * _EV_J
    G = p / photon_J[:, None] * 1e-6
    C = cells["z_nm"].size
    frame = pd.DataFrame({"wavelength_nm": np.repeat(wl, C), "z_nm": np.tile(cells["z_nm"], wl.size),
                         "rho_nm": np.tile(cells["rho_nm"], wl.size),
                         "cell_volume_nm3": np.tile(cells["cell_volume_nm3"], wl.size),
                         "absorbed_power_density_W_m3": p.ravel(), "generation_rate_cm3_s": G.ravel()})
    frame.attrs["energy_balance_relative_error"] = balance
    if planar:
        frame.attrs["profile_approximation"] = (
            "on or in a planar stack: the profile shape of the same body in the host medium (T-matrix internal "
            "field), scaled so that it integrates to the environment's sigma_abs; the substrate's own field "
            "gradient across the body (strongest on the side facing it) is not in the shape")
    return frame


def _layer_cells(particle, n):
    """(inner, outer) radii [nm] of ``n`` equal-width radial cells in each layer."""
    edges, r_in = [], 0.0
    for _, r_out in particle.layers:
        e = np.linspace(r_in, float(r_out), n + 1)
        edges.append(np.stack([e[:-1], e[1:]]))
        r_in = float(r_out)
    lo, hi = np.concatenate(edges, axis=1)
    return lo, hi


def responsivity_table(wavelength_nm, responsivity_A_W, path, *, force: bool = False):
    """Write ``wavelength_nm,responsivity_A_W`` as a plain two-column CSV lookup table (atomic).

    Load it in a circuit simulator as a piecewise-linear table of responsivity against
    wavelength, or with ``numpy.loadtxt(path, delimiter=",", skiprows=1)``.
    """
    from .export import write_file_atomic

    wl = np.asarray(wavelength_nm, dtype=float)
    R = np.asarray(responsivity_A_W, dtype=float)
    if wl.shape != R.shape or wl.ndim != 1:
        raise NanoabsError("responsivity table: wavelength and responsivity must be 1-D arrays of one length")
    if not (np.all(np.isfinite(R)) and np.all(np.isfinite(wl))):
        raise NanoabsError("responsivity table: non-finite values; nothing written")
    text = "wavelength_nm,responsivity_A_W\n" + "".join(f"{a:.10g},{b:.10g}\n" for a, b in zip(wl, R))
    return write_file_atomic(path, lambda fh: fh.write(text), force=force)
