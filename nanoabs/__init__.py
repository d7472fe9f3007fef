"""nanoabs: absorption of metal nanoparticles for plasmonic hot-carrier photodetectors.

Public names are re-exported here; everything else is an implementation detail.
Submodules with more functions: ``nanoabs.illumination``, ``nanoabs.hotcarriers``,
``nanoabs.quasistatic``, ``nanoabs.mie``, ``nanoabs.plotting``.
"""

from ._errors import NanoabsError
from .drude_lorentz import DrudeLorentz, Oscillator, fit_drude_lorentz, rakic_1998
from .materials import Material, load_table, material
from .particles import CappedRod, Cylinder, Ellipsoid, LayeredSphere, RoundedDisc, Sphere, spheroid
from .optics import Spectrum, spectrum
from .environments import buried, homogeneous, on_substrate
from .detector import HotCarrierResult, hot_carrier_estimate
from .export import read_export, write_export
from . import design, illumination

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
    "homogeneous",
    "on_substrate",
    "buried",
    "HotCarrierResult",
    "hot_carrier_estimate",
    "read_export",
    "write_export",
    "illumination",
    "design",
]


def __getattr__(name):
    """``__version__`` is read from the installed distribution on first use (start-up time)."""
    if name == "__version__":
        from ._version import version

        return version()
    raise AttributeError(f"module {__name__!r} has no attribute {name!r}")


def __dir__():
    return sorted(set(globals()) | {"__version__"})
