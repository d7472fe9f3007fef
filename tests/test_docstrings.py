"""Every public object documents its parameters (numpydoc's PR01 check), against an allow-list.

The objects checked are the callables in ``nanoabs.__all__``, the callables in ``__all__`` of
the public submodules, and the public methods defined on those classes. A parameter whose
name starts with an underscore is private (an internal dataclass field) and is not required.

``UNDOCUMENTED`` lists the gaps that existed when this check was written, in modules whose
docstrings are being filled in separately. The test fails both when a new gap appears and when
a listed gap has been filled (remove it from the list): the list can only shrink.
"""

import importlib
import inspect

from numpydoc.docscrape import get_doc_object
from numpydoc.validate import Validator

import nanoabs

PUBLIC_SUBMODULES = ["illumination", "hotcarriers", "quasistatic", "mie", "plotting", "design",
                     "solvers", "validity", "dataset", "dipole"]

#: object -> its parameters without a description (to be filled in the modules named).
UNDOCUMENTED = {
    # nanoabs._errors
    "nanoabs.NanoabsError": ("message",),
    # nanoabs.materials
    "nanoabs.Material": ("extrapolate", "info", "kind", "model", "name", "range_nm", "source"),
    "nanoabs.Material.outside": ("wavelength_nm",),
    "nanoabs.Material.permittivity": ("wavelength_nm",),
    "nanoabs.Material.refractive_index": ("wavelength_nm",),
    "nanoabs.Material.with_surface_damping": ("A", "fermi_velocity_m_s", "length_nm"),
    "nanoabs.load_table": ("kind", "name", "path"),
    # nanoabs.particles
    "nanoabs.Sphere": ("material", "radius_nm"),
    "nanoabs.LayeredSphere": ("core", "core_radius_nm", "shells"),
    "nanoabs.Ellipsoid": ("kind", "material", "semi_axes_nm", "shell"),
    "nanoabs.Ellipsoid.projected_area_nm2": ("axis",),
    "nanoabs.Ellipsoid.surface_nm2": ("axes",),
    "nanoabs.Ellipsoid.reference_area_nm2": ("polarization",),
    "nanoabs.spheroid": ("material", "shell"),
    # nanoabs.optics
    "nanoabs.Spectrum": ("equal_volume_area_m2", "geometric_cross_section_m2", "metadata",
                         "metal_volume_m3", "n_medium", "sigma_abs_m2", "sigma_ext_m2",
                         "sigma_sca_m2", "wavelength_nm"),
    "nanoabs.Spectrum.write": ("force", "path"),
    # nanoabs.detector
    "nanoabs.HotCarrierResult": ("frame", "metadata", "totals", "units"),
    "nanoabs.HotCarrierResult.write": ("force", "path"),
    # nanoabs.illumination
    "nanoabs.illumination.Illumination": ("description", "evaluate", "is_monochromatic", "kind",
                                          "nodes_nm", "parameters", "range_nm", "source"),
    "nanoabs.illumination.blackbody": ("solid_angle_sr", "temperature_K", "total_irradiance_W_m2"),
    "nanoabs.illumination.flat": ("value_W_m2_nm",),
    "nanoabs.illumination.from_csv": ("path",),
    "nanoabs.illumination.gaussian_beam_irradiance": ("beam_radius_nm", "power_W", "r_nm"),
    "nanoabs.illumination.monochromatic": ("irradiance_W_m2",),
    # nanoabs.hotcarriers
    "nanoabs.hotcarriers.FreeElectronMetal": ("electron_density_m3", "fermi_energy_eV",
                                              "fermi_velocity_m_s", "source"),
    "nanoabs.hotcarriers.Sourced": ("source", "value"),
    "nanoabs.hotcarriers.attenuation_length_nm": ("metal",),
    "nanoabs.hotcarriers.equal_volume_radius": ("a", "b", "c"),
    "nanoabs.hotcarriers.external_quantum_efficiency": ("responsivity_A_W", "wavelength_nm"),
    "nanoabs.hotcarriers.free_electron": ("metal",),
    "nanoabs.hotcarriers.thermal_conductivity": ("medium",),
    # nanoabs.mie
    "nanoabs.mie.MieEfficiencies": ("g", "qabs", "qback", "qext", "qsca"),
}


def public_objects() -> dict:
    """Dotted name -> object for every public callable that should document its parameters."""
    found = {}
    for name in nanoabs.__all__:
        obj = getattr(nanoabs, name)
        if callable(obj) and not inspect.ismodule(obj):
            found[f"nanoabs.{name}"] = obj
    for mod_name in PUBLIC_SUBMODULES:
        mod = importlib.import_module(f"nanoabs.{mod_name}")
        for name in mod.__all__:
            obj = getattr(mod, name)
            if callable(obj) and not inspect.ismodule(obj):
                public = f"nanoabs.{name}" if getattr(nanoabs, name, None) is obj else f"nanoabs.{mod_name}.{name}"
                found.setdefault(public, obj)
    for cls_name, cls in [(n, o) for n, o in found.items() if inspect.isclass(o)]:
        for attr, raw in vars(cls).items():
            if attr.startswith("_"):
                continue
            if inspect.isfunction(raw) or isinstance(raw, (classmethod, staticmethod)):
                found[f"{cls_name}.{attr}"] = getattr(cls, attr)
    return found


def undocumented_parameters(obj) -> tuple:
    """Parameters of ``obj``'s signature that its numpydoc docstring does not describe (PR01)."""
    v = Validator(get_doc_object(obj))
    documented = {p.replace("\\", "") for p in v.doc_all_parameters}
    return tuple(sorted(p for p in v.signature_parameters
                        if p not in documented and not p.lstrip("*").startswith("_")))


def test_the_check_sees_the_public_api():
    objs = public_objects()
    for name in ("nanoabs.spectrum", "nanoabs.Spectrum.to_frame", "nanoabs.design.search",
                 "nanoabs.plotting.plot_map", "nanoabs.solvers.choose", "nanoabs.DrudeLorentz.load"):
        assert name in objs, name
    assert len(objs) > 100


def test_the_check_detects_an_undocumented_parameter():
    def documented(a, b):
        """Sum.

        Parameters
        ----------
        a : float
            First [nm].
        """

    assert undocumented_parameters(documented) == ("b",)


def test_public_parameters_are_documented_or_listed():
    gaps = {}
    for name, obj in public_objects().items():
        missing = undocumented_parameters(obj)
        if missing:
            gaps[name] = missing
    new = {k: v for k, v in gaps.items() if UNDOCUMENTED.get(k) != v}
    filled = sorted(set(UNDOCUMENTED) - set(gaps))
    assert new == {}, f"undocumented parameters (document them): {new}"
    assert filled == [], f"documented now: remove from UNDOCUMENTED in this file: {filled}"
