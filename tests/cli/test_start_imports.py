"""Quick commands load only what they use: no numerical or plotting library at start.

Run in a fresh interpreter (this test process has loaded everything already). A behaviour
check; the start-up time itself is measured in benchmarks/README.md.
"""

from __future__ import annotations

import json
import subprocess
import sys

import pytest

HEAVY = ("scipy", "matplotlib", "ripser", "gph", "sklearn", "dask")


def _heavy_modules_after(code: str) -> list[str]:
    report = "import json, sys\nprint(json.dumps(sorted({m.split('.')[0] for m in sys.modules} & set(sys.argv[1:]))))"
    out = subprocess.run(
        [sys.executable, "-c", f"{code}\n{report}", *HEAVY], capture_output=True, text=True, check=True, timeout=120
    )
    return json.loads(out.stdout.strip().splitlines()[-1])


@pytest.mark.parametrize(
    "code",
    [
        "import riskshape",
        "import riskshape.cli",
        "import riskshape.cli.alerts",
        "import riskshape.cli.audit",
        "from riskshape.cli import cli; cli.get_command(None, 'alerts'); cli.get_command(None, 'audit')",
        "import riskshape.store, riskshape.alerts, riskshape.explain, riskshape.compute, riskshape.outputs",
    ],
)
def test_quick_commands_load_no_heavy_library(code: str) -> None:
    assert _heavy_modules_after(code) == []


def test_the_probe_sees_a_heavy_import() -> None:
    assert _heavy_modules_after("import riskshape.compute.distance") == ["scipy"]


def test_opening_an_archive_at_the_current_revision_loads_no_migration_tool(tmp_path) -> None:
    url = f"sqlite:///{tmp_path / 'a.sqlite'}"
    created = subprocess.run(
        [sys.executable, "-c", f"from riskshape.store import open_store; open_store({url!r}).close()"],
        capture_output=True,
        text=True,
        check=True,
        timeout=120,
    )
    assert created.returncode == 0
    probe = (
        "import sys\nfrom riskshape.store import open_store\n"
        f"open_store({url!r}, create=False).close()\nprint('alembic' in sys.modules)"
    )
    again = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True, timeout=120)
    assert again.stdout.strip() == "False"


QUICK_READS_MUST_NOT_LOAD = ("pandas", "numpy", "pydantic", "alembic", *HEAVY)
"""What ``--version``, ``alerts list`` and ``audit head`` must not import (issue 12, item 7): their
reads are alerts, reviews and the chain head; pandas and numpy load only with prices and series,
pydantic only with the configuration (a --store given on the command line needs none)."""


@pytest.mark.parametrize(
    "argv",
    [["--version"], ["alerts", "list", "--store", "{url}"], ["audit", "head", "--store", "{url}"]],
    ids=["version", "alerts list", "audit head"],
)
def test_quick_reads_load_no_dataframe_or_configuration_library(tmp_path, argv: list[str]) -> None:
    url = f"sqlite:///{tmp_path / 'a.sqlite'}"
    subprocess.run(
        [sys.executable, "-c", f"from riskshape.store import open_store; open_store({url!r}).close()"],
        check=True,
        timeout=120,
    )
    args = [a.format(url=url) for a in argv]
    probe = (
        "import json, sys\nfrom riskshape.cli import main\n"
        f"try:\n    main({args!r})\nexcept SystemExit:\n    pass\n"
        "print(json.dumps(sorted({m.split('.')[0] for m in sys.modules} & set(sys.argv[1:]))))"
    )
    out = subprocess.run(
        [sys.executable, "-c", probe, *QUICK_READS_MUST_NOT_LOAD],
        capture_output=True,
        text=True,
        check=True,
        timeout=120,
    )
    assert json.loads(out.stdout.strip().splitlines()[-1]) == []


def test_the_quick_read_probe_sees_pandas_where_a_command_reads_prices(tmp_path) -> None:
    # the probe can fail: the report command reads the series (a DataFrame) and so loads pandas
    url = f"sqlite:///{tmp_path / 'a.sqlite'}"
    probe = (
        "import sys\nfrom riskshape.store import open_store\n"
        f"store = open_store({url!r})\nstore.ensure_portfolio('book')\nstore.read_prices('book')\n"
        "print('pandas' in sys.modules)"
    )
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True, timeout=120)
    assert out.stdout.strip().splitlines()[-1] == "True"


def test_the_program_leaves_its_objects_to_the_exit_and_a_caller_keeps_its_collector(tmp_path) -> None:
    # Run as the program (no argv: sys.argv), main freezes what the imports made so the shutdown
    # does not walk it; called with arguments in a caller's process, it leaves gc alone.
    url = f"sqlite:///{tmp_path / 'a.sqlite'}"
    subprocess.run(
        [sys.executable, "-c", f"from riskshape.store import open_store; open_store({url!r}).close()"],
        check=True,
        timeout=120,
    )
    frozen = {}
    for how, call in (("program", "sys.argv = ['riskshape'] + ARGS; main()"), ("caller", "main(ARGS)")):
        probe = (
            f"import gc, sys\nfrom riskshape.cli import main\nARGS = ['alerts', 'list', '--store', {url!r}]\n"
            f"{call}\nprint(gc.get_freeze_count())"
        )
        out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True, timeout=120)
        assert "decision aid" in out.stdout  # the command ran and printed its caution
        frozen[how] = int(out.stdout.strip().splitlines()[-1])
    assert frozen["caller"] == 0
    assert frozen["program"] > 10_000
