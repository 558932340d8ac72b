"""Lazy exports for riskshape's packages (PEP 562): a name's module is imported on first use.

``import riskshape`` then costs almost nothing, and a command that needs only the archive never
loads scipy, ripser or matplotlib.
"""

from __future__ import annotations

import importlib
import sys
import warnings
from collections.abc import Callable, Mapping
from typing import Any

__all__ = ["lazy_exports", "EXTRA_OF"]

EXTRA_OF = {"sklearn": "research", "arch": "research", "distributed": "dask", "dask": "dask"}
"""Third-party packages that come with one of riskshape's extras, and the extra that brings them."""


def _import(module: str) -> Any:
    """Import ``module``; a missing optional package says which extra installs it."""
    try:
        return importlib.import_module(module)
    except ModuleNotFoundError as err:
        top = (err.name or "").split(".")[0]
        if top not in EXTRA_OF:
            raise
        raise ModuleNotFoundError(
            f"{module} needs {top}, which comes with riskshape's [{EXTRA_OF[top]}] extra: "
            f"pip install 'riskshape[{EXTRA_OF[top]}]'",
            name=err.name,
        ) from None


def lazy_exports(
    package: str,
    exports: Mapping[str, str],
    moved: Mapping[str, str] | None = None,
) -> tuple[Callable[[str], Any], Callable[[], list[str]]]:
    """Build a package's module-level ``__getattr__`` and ``__dir__``.

    Parameters
    ----------
    package : str
        The package's dotted name (its ``__name__``).
    exports : mapping of str to str
        Public name -> dotted name of the module that defines it.
    moved : mapping of str to str, optional
        Names kept for old code: name -> module that now holds it. Reading one gives the object
        and a ``DeprecationWarning`` naming its new home.

    Returns
    -------
    getattr, dir : callables
        To assign to the package's ``__getattr__`` and ``__dir__``.

    Examples
    --------
    >>> get, names = lazy_exports("riskshape", {"CAUTION": "riskshape.caution"})
    >>> get("CAUTION").startswith("riskshape is a decision aid")
    True
    >>> "CAUTION" in names()
    True
    """
    old = dict(moved or {})

    def __getattr__(name: str) -> Any:
        if name in exports:
            value = getattr(_import(exports[name]), name)
            sys.modules[package].__dict__[name] = value  # later reads skip this function
            return value
        if name in old:
            warnings.warn(
                f"{package}.{name} moved: import it from {old[name]} ({package}.{name} will be removed)",
                DeprecationWarning,
                stacklevel=2,
            )
            return getattr(_import(old[name]), name)
        raise AttributeError(f"module {package!r} has no attribute {name!r}")

    def __dir__() -> list[str]:
        return sorted(set(sys.modules[package].__dict__) | set(exports))

    return __getattr__, __dir__
