"""The public surface: what the service and the CLI may import from riskshape, and its docstrings.

The contract: the service (``service/``, installed as ``riskshape_service``) and the CLI
(``src/riskshape/cli/``) import riskshape only through the public packages below, and only names
listed in their ``__all__``. Every public function and class carries a numpydoc docstring
(layout after the numpydoc format guide, https://numpydoc.readthedocs.io/en/latest/format.html).
"""

from __future__ import annotations

import ast
import importlib
import inspect
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]

PUBLIC_PACKAGES = (
    "riskshape",
    "riskshape.compute",
    "riskshape.alerts",
    "riskshape.explain",
    "riskshape.store",
    "riskshape.outputs",
    "riskshape.demo",
    "riskshape.research",
    "riskshape.types",
    "riskshape.config",
    "riskshape.daily",
    "riskshape.reviews",
    "riskshape.selection",
    "riskshape.outputs.palette",
)

# (module, name) imports allowed past the public packages, each with its reason (none today).
EXCEPTIONS: dict[tuple[str, str], str] = {}


def _client_files() -> list[Path]:
    return sorted([*(ROOT / "service").rglob("*.py"), *(ROOT / "src" / "riskshape" / "cli").rglob("*.py")])


def _public_names(package: str) -> set[str]:
    return set(importlib.import_module(package).__all__)


def contract_breaches(path: Path, source: str) -> tuple[list[str], set[tuple[str, str]]]:
    """The imports of one file that reach past riskshape's public API, and the exceptions it uses."""
    breaches: list[str] = []
    used: set[tuple[str, str]] = set()
    in_cli = "riskshape/cli" in path.as_posix()
    for node in ast.walk(ast.parse(source, filename=str(path))):
        if isinstance(node, ast.Import):
            targets = [(alias.name, None) for alias in node.names]
        elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
            targets = [(node.module, alias.name) for alias in node.names]
        else:
            continue
        for module, name in targets:
            if module != "riskshape" and not module.startswith("riskshape."):
                continue  # riskshape_service, third parties
            if in_cli and (module == "riskshape.cli" or module.startswith("riskshape.cli.")):
                continue  # the CLI's own modules
            where = f"{path.relative_to(ROOT)}:{node.lineno}"
            if name is not None and (module, name) in EXCEPTIONS:
                used.add((module, name))
            elif module not in PUBLIC_PACKAGES:
                breaches.append(f"{where}: imports {module} (not a public package)")
            elif name is not None and name not in _public_names(module):
                breaches.append(f"{where}: {module}.{name} is not in {module}.__all__")
    return breaches, used


def test_service_and_cli_import_only_the_public_api() -> None:
    breaches: list[str] = []
    used: set[tuple[str, str]] = set()
    for path in _client_files():
        found, seen = contract_breaches(path, path.read_text(encoding="utf-8"))
        breaches += found
        used |= seen
    assert len(_client_files()) > 20  # the walk found the service and the CLI
    assert breaches == [], "import these names from a public package, or export them there:\n" + "\n".join(breaches)
    assert set(EXCEPTIONS) <= used, f"exceptions no longer needed, remove them: {set(EXCEPTIONS) - used}"


@pytest.mark.parametrize(
    "line",
    [
        "from riskshape.compute.monitor import monitor",  # an internal module
        "from riskshape._version import __version__",
        "import riskshape.archive",
        "from riskshape.store import catalog",  # a public package, a name outside its __all__
    ],
)
def test_contract_catches_a_reach_past_the_public_api(line: str) -> None:
    breaches, _ = contract_breaches(ROOT / "service" / "example.py", line + "\n")
    assert len(breaches) == 1 and "service/example.py:1" in breaches[0]


def test_contract_lets_public_imports_through() -> None:
    source = "from riskshape import Config, monitor, __version__\nfrom riskshape.store import open_store\n"
    assert contract_breaches(ROOT / "service" / "example.py", source)[0] == []


@pytest.mark.parametrize("package", PUBLIC_PACKAGES)
def test_all_lists_exactly_the_lazy_exports(package: str) -> None:
    module = importlib.import_module(package)
    assert len(module.__all__) == len(set(module.__all__)), "a name is listed twice"
    for name in module.__all__:
        assert getattr(module, name) is not None, f"{package}.{name} does not load"


def _described_parameters(doc: str) -> set[str]:
    """Names in the entries of a Parameters section (``x : int``, ``a, b : float``, or a bare ``ax``)."""
    section = doc.split("Parameters\n----------\n", 1)[-1]
    names: set[str] = set()
    for line in section.splitlines():
        if line.startswith("---"):
            break  # the underline of the next section
        if line and not line[0].isspace():
            names |= {name.strip() for name in line.split(" :")[0].split(",")}
    return names


def docstring_problems(qualname: str, obj: object) -> list[str]:
    """What a public function's or class's docstring lacks, by the numpydoc layout."""
    doc = inspect.getdoc(obj)
    if not doc or not doc.strip():
        return [f"{qualname}: no docstring"]
    problems = []
    if inspect.isfunction(obj):
        parameters = [
            p.name
            for p in inspect.signature(obj).parameters.values()
            if p.name not in ("self", "cls") and p.kind not in (p.VAR_POSITIONAL, p.VAR_KEYWORD)
        ]
        if parameters and "Parameters\n----------" not in doc:
            problems.append(f"{qualname}: no Parameters section")
        else:
            described = _described_parameters(doc)
            problems += [f"{qualname}: parameter {p!r} not described" for p in parameters if p not in described]
        returns = inspect.signature(obj).return_annotation
        if returns not in (None, "None", inspect.Signature.empty) and not (
            "Returns\n-------" in doc or "Yields\n------" in doc
        ):
            problems.append(f"{qualname}: no Returns section")
    return problems


def _public_objects() -> list[tuple[str, object]]:
    found = []
    for package in PUBLIC_PACKAGES:
        module = importlib.import_module(package)
        for name in module.__all__:
            obj = getattr(module, name)
            if inspect.isfunction(obj) or inspect.isclass(obj):
                found.append((f"{package}.{name}", obj))
    return found


def test_public_functions_and_classes_have_numpydoc_docstrings() -> None:
    objects = _public_objects()
    assert len(objects) > 50
    problems = [p for qualname, obj in objects for p in docstring_problems(qualname, obj)]
    assert problems == [], "\n".join(problems)


def test_docstring_check_finds_what_is_missing() -> None:
    def bare(x: int) -> int:
        return x

    def described(x: int) -> int:
        """Twice x.

        Parameters
        ----------
        x : int
            A number.

        Returns
        -------
        int
        """
        return 2 * x

    assert docstring_problems("bare", bare) == ["bare: no docstring"]
    assert docstring_problems("described", described) == []
    described.__doc__ = "Twice x."
    assert docstring_problems("described", described) == [
        "described: no Parameters section",
        "described: no Returns section",
    ]
