"""The package version, read from the installed distribution when first asked for.

``importlib.metadata`` costs about a third of nanoabs's own import time, so
``nanoabs.__version__`` is resolved lazily (a module ``__getattr__``) and the
modules that record the version in their metadata call :func:`version` when
they write it.
"""

from __future__ import annotations

from functools import lru_cache


@lru_cache(maxsize=None)
def version() -> str:
    """The installed distribution's version (pyproject.toml is the one source of it)."""
    from importlib.metadata import PackageNotFoundError, version as dist_version

    try:
        return dist_version("nanoabs")
    except PackageNotFoundError:  # a source tree on sys.path without an installation
        return "0+unknown"
