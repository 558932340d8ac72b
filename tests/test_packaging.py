"""The install names every package, and the optional extras keep the monitor's core light.

pyproject.toml lists the packages by hand (the service's folder installs under a name of its own,
``riskshape_service``), so a new subpackage left off the list would be missing from an install.
"""

from __future__ import annotations

import sys
from pathlib import Path

import pytest

if sys.version_info >= (3, 11):
    import tomllib
else:  # pragma: no cover - Python 3.10 only
    import tomli as tomllib

REPO = Path(__file__).resolve().parents[1]
PROJECT = tomllib.loads((REPO / "pyproject.toml").read_text(encoding="utf-8"))


def _packages_on_disk() -> set[str]:
    found = set()
    for root, name in ((REPO / "src" / "riskshape", "riskshape"), (REPO / "service", "riskshape_service")):
        for init in root.rglob("__init__.py"):
            relative = init.parent.relative_to(root).parts
            found.add(".".join((name, *relative)))
    return found


def test_every_package_is_installed() -> None:
    listed = set(PROJECT["tool"]["setuptools"]["packages"])
    on_disk = _packages_on_disk()
    assert on_disk - listed == set(), "add these to [tool.setuptools] packages in pyproject.toml"
    assert listed - on_disk == set(), "these listed packages have no folder with an __init__.py"


def test_core_dependencies_leave_out_the_optional_stacks() -> None:
    core = " ".join(PROJECT["project"]["dependencies"]).lower()
    for optional in ("dask", "arch", "skfolio", "weasyprint", "pytest"):
        assert optional not in core, f"{optional} belongs in an extra, not in the core dependencies"
    extras = PROJECT["project"]["optional-dependencies"]
    assert {"dask", "research", "test", "fast"} <= set(extras)
    # the README's test command installs the test extra, which must bring every other extra along
    assert any(req.startswith("riskshape[") and "dask" in req and "research" in req for req in extras["test"])


def test_a_missing_extra_is_named(monkeypatch) -> None:
    """Without scikit-learn, a research name says which extra brings it (no bare ModuleNotFoundError)."""
    import riskshape.research

    for module in [m for m in sys.modules if m == "sklearn" or m.startswith(("sklearn.", "riskshape.research."))]:
        monkeypatch.delitem(sys.modules, module)
    monkeypatch.setitem(sys.modules, "sklearn", None)  # makes "import sklearn" fail as if it were not installed
    monkeypatch.delitem(riskshape.research.__dict__, "study_table", raising=False)
    with pytest.raises(ModuleNotFoundError, match=r"riskshape\.research\.study needs sklearn.*riskshape\[research\]"):
        riskshape.research.study_table  # noqa: B018 - the attribute read is what loads the module
