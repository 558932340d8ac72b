"""Old module paths kept working: ``riskshape.windows`` still imports, and says where it went.

The modules moved into rooms that say what they hold (the computation into
:mod:`riskshape.compute`, the run folder, export, report and plots into :mod:`riskshape.outputs`,
the scenario and its runner into :mod:`riskshape.demo`, the baselines into
:mod:`riskshape.research`). One finder on ``sys.meta_path`` maps each old dotted name to the
module that now holds it: importing the old name gives that same module object and a
``DeprecationWarning`` naming the new path. Names that moved inside a package that kept its
name (``riskshape.compute.make_executor``, ``riskshape.demo.run_demo``) are served by that
package's lazy exports.
"""

from __future__ import annotations

import importlib
import importlib.abc
import importlib.machinery
import importlib.util
import sys
import warnings
from collections.abc import Sequence
from types import ModuleType

__all__ = ["MOVED_MODULES", "install"]

MOVED_MODULES: dict[str, str] = {
    "riskshape.returns": "riskshape.compute.returns",
    "riskshape.windows": "riskshape.compute.windows",
    "riskshape.window": "riskshape.compute.batch",
    "riskshape.distance": "riskshape.compute.distance",
    "riskshape.persistence": "riskshape.compute.persistence",
    "riskshape.matching": "riskshape.compute.matching",
    "riskshape.summaries": "riskshape.compute.summaries",
    "riskshape.rolling": "riskshape.compute.moments",
    "riskshape.monitor": "riskshape.compute.monitor",
    "riskshape.output": "riskshape.outputs.run_folder",
    "riskshape.export": "riskshape.outputs.export",
    "riskshape.report": "riskshape.outputs.report",
    "riskshape.plots": "riskshape.outputs.plots",
    "riskshape.scenario": "riskshape.demo.scenario",
    "riskshape.baselines": "riskshape.research.baselines",
    "riskshape.store.engine": "riskshape.store.database",
}
"""Old module path -> the module that holds its contents now."""


def _caller_stacklevel() -> int:
    """The ``stacklevel`` that points a warning at the import statement, past importlib's frames."""
    frame = sys._getframe(1)
    level = 1
    while frame is not None and (frame.f_code.co_filename == __file__ or "importlib" in frame.f_code.co_filename):
        frame = frame.f_back  # type: ignore[assignment]
        level += 1
    return level


class _MovedLoader(importlib.abc.Loader):
    """Gives the module at the new path in place of the old one."""

    def __init__(self, new: str) -> None:
        self.new = new
        self.spec: importlib.machinery.ModuleSpec | None = None

    def create_module(self, spec: importlib.machinery.ModuleSpec) -> ModuleType:
        warnings.warn(
            f"{spec.name} moved to {self.new}: import it from there ({spec.name} will be removed)",
            DeprecationWarning,
            stacklevel=_caller_stacklevel(),
        )
        module = importlib.import_module(self.new)
        self.spec = module.__spec__
        return module

    def exec_module(self, module: ModuleType) -> None:
        """Nothing to run: the module at the new path is loaded; keep its own spec (pickle, reload)."""
        module.__spec__ = self.spec


class _MovedFinder(importlib.abc.MetaPathFinder):
    """Finds the old module paths of :data:`MOVED_MODULES`."""

    def find_spec(
        self,
        fullname: str,
        path: Sequence[str] | None,
        target: ModuleType | None = None,
    ) -> importlib.machinery.ModuleSpec | None:
        new = MOVED_MODULES.get(fullname)
        if new is None:
            return None
        return importlib.util.spec_from_loader(fullname, _MovedLoader(new))


class _Package(ModuleType):
    """The ``riskshape`` package's module type: an old submodule path never hides a public function.

    Importing ``riskshape.monitor`` (the old module path) makes the import system set the
    attribute ``riskshape.monitor`` to that module; the function ``riskshape.monitor`` is kept.
    """

    def __setattr__(self, name: str, value: object) -> None:
        if isinstance(value, ModuleType) and name in self.__dict__.get("__all__", ()):
            return  # an old module path (riskshape.monitor) named like a public function
        super().__setattr__(name, value)


def install(package: ModuleType) -> None:
    """Put the finder for old module paths on ``sys.meta_path`` (once) and guard ``package``'s names.

    Parameters
    ----------
    package : module
        The ``riskshape`` package itself.

    Examples
    --------
    >>> import riskshape, sys
    >>> sum(isinstance(f, _MovedFinder) for f in sys.meta_path)
    1
    >>> "riskshape.windows" in MOVED_MODULES
    True
    """
    if not any(isinstance(finder, _MovedFinder) for finder in sys.meta_path):
        sys.meta_path.append(_MovedFinder())
    package.__class__ = _Package
