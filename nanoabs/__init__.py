"""nanoabs: absorption of metal nanoparticles for plasmonic hot-carrier photodetectors.

Public names are re-exported here; everything else is an implementation detail.
Submodules with more functions: ``nanoabs.illumination``, ``nanoabs.hotcarriers``,
``nanoabs.quasistatic``, ``nanoabs.mie``, ``nanoabs.plotting``.
"""

def _version() -> str:
    """The installed distribution's version (pyproject.toml is the one source of it)."""
    from importlib.metadata import PackageNotFoundError, version

    try:
        return version("nanoabs")
    except PackageNotFoundError:  # a source tree on sys.path without an installation
        return "0+unknown"


__version__ = _version()

from ._errors import NanoabsError  # noqa: E402
from .drude_lorentz import DrudeLorentz, Oscillator, fit_drude_lorentz, rakic_1998  # noqa: E402
from .materials import Material, load_table, material  # noqa: E402
from .particles import CappedRod, Cylinder, Ellipsoid, LayeredSphere, RoundedDisc, Sphere, spheroid  # noqa: E402
from .optics import Spectrum, spectrum  # noqa: E402
from .detector import HotCarrierResult, hot_carrier_estimate  # noqa: E402
from .export import read_export, write_export  # noqa: E402
from . import design, illumination  # noqa: E402

__all__ = [
    "__version__",
    "NanoabsError",
    "DrudeLorentz",
    "Oscillator",
    "fit_drude_lorentz",
    "rakic_1998",
    "Material",
    "material",
    "load_table",
    "Sphere",
    "LayeredSphere",
    "Ellipsoid",
    "spheroid",
    "Cylinder",
    "CappedRod",
    "RoundedDisc",
    "Spectrum",
    "spectrum",
    "HotCarrierResult",
    "hot_carrier_estimate",
    "read_export",
    "write_export",
    "illumination",
    "design",
]
