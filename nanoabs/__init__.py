"""nanoabs: absorption of metal nanoparticles for plasmonic hot-carrier photodetectors.

Public names are re-exported here; everything else is an implementation detail.
"""

from ._errors import NanoabsError
from .drude_lorentz import DrudeLorentz, Oscillator, fit_drude_lorentz, rakic_1998
from .materials import Material, load_table, material

__version__ = "0.1.0"

__all__ = [
    "NanoabsError",
    "DrudeLorentz",
    "Oscillator",
    "fit_drude_lorentz",
    "rakic_1998",
    "Material",
    "material",
    "load_table",
    "__version__",
]
