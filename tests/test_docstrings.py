"""Every public object documents its parameters (numpydoc's PR01 check), against an allow-list.

The objects checked are the callables in ``nanoabs.__all__``, the callables in ``__all__`` of
the public submodules, and the public methods defined on those classes. A parameter whose
name starts with an underscore is private (an internal dataclass field) and is not required.

``UNDOCUMENTED`` lists known gaps (none remain). The test fails both when a new gap appears
and when a listed gap has been filled (remove it from the list): the list can only shrink.
"""

import importlib
import inspect

from numpydoc.docscrape import get_doc_object
from numpydoc.validate import Validator

import nanoabs

PUBLIC_SUBMODULES = ["illumination", "hotcarriers", "quasistatic", "mie", "plotting", "design",
                     "solvers", "validity", "dataset", "dipole"]

#: object -> its parameters without a description (empty: every known gap has been filled).
UNDOCUMENTED: dict = {}


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
