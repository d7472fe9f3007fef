"""Design studies: parameter sweeps, size-distribution ensembles and a band-targeted search.

The designer's question — which particle, of which size, shape and coating,
puts strong absorption in my band, and how sensitive is that to the size
spread I will actually get? — is answered with:

:func:`sweep`
    Spectra of the Cartesian product of design parameters as one tidy table
    (one row per design and wavelength). Designs are processed in chunks; each
    chunk of one shape family is one vectorised :func:`nanoabs.spectrum` call
    per material/medium group. Chunks run in-process, in a process pool or on
    any executor with ``submit`` (a Dask ``distributed.Client`` works
    unchanged), can be streamed to disk and resumed after an interruption.
:func:`ensemble_average`
    The per-particle average spectrum over a size (or aspect-ratio)
    distribution: Gauss–Hermite quadrature for normal and log-normal
    distributions, or a user histogram.
:func:`search`
    A coarse vectorised grid per particle family followed by bounded local
    refinement (Nelder–Mead) of the best designs for a band-averaged figure of
    merit, with the sensitivity of the absorption peak to a 1 nm change of each
    dimension.
:func:`band`
    A validated (lo, hi) target band from its edges or its centre and width.
:func:`write`
    Export a sweep or search table (CSV + JSON sidecar with the unit of every
    column, as :func:`nanoabs.export.write_export`).

Parameter names (sizes in nm; ``aspect_ratio`` = length / diameter)
-------------------------------------------------------------------
=============  ===============================================================
``sphere``     ``radius_nm``
``shell``      ``core_radius_nm``, ``thickness_nm``; core material
               ``core_material`` (alias ``core``), shell material ``material``
               (alias ``shell``)
``spheroid``   two of ``length_nm``, ``diameter_nm``, ``aspect_ratio``
               (rods: length > diameter; discs: length < diameter)
``ellipsoid``  ``a_nm``, ``b_nm``, ``c_nm`` (semi-axes along x, y, z)
all shapes     ``material`` (material names or material objects) and
               ``medium_index`` (a constant, real refractive index that
               replaces ``medium``)
=============  ===============================================================

Reproducibility
---------------
A chunk's result depends only on the sweep's arguments and the chunk index:
it is bit-for-bit the same whichever executor computes it (in-process, process
pool, Dask). Different chunk sizes group designs differently inside the
vectorised solvers (the Mie solver starts its downward recurrence from the
largest size parameter of a batch; numpy's vectorised and scalar loops round
differently in the last bit), so sweeps with different chunk sizes agree to
about 1e-15 relative, not bit-for-bit.
"""

from __future__ import annotations

from ._designs import SHAPES
from ._ensemble import ensemble_average
from ._search import FAMILIES, OBJECTIVES, band, search
from ._sweep import RESULT_COLUMNS, sweep, write

__all__ = ["SHAPES", "FAMILIES", "OBJECTIVES", "RESULT_COLUMNS", "sweep", "ensemble_average",
           "search", "band", "write"]
