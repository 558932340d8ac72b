"""Every notebook in notebooks/ runs end to end (nbclient), so the walk-throughs cannot rot.

Notebooks are committed without outputs; they run here in a temporary folder, with the
python3 kernel of this environment (the kernel spec that ipykernel's wheel installs into the
environment). The executed copy, outputs and pictures included, is written to
``test-artifacts/notebooks/`` for a reader to open; every cell that draws (calls a
``plot_...`` function of riskshape.outputs) must show a PNG, and every notebook draws.
"""

from __future__ import annotations

import re
from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

ROOT = Path(__file__).resolve().parents[1]
NOTEBOOKS = sorted((ROOT / "notebooks").glob("*.ipynb"))
EXECUTED = ROOT / "test-artifacts" / "notebooks"
DRAWS = re.compile(r"\bplot_\w+\(")


def _pngs(cell: nbformat.NotebookNode) -> int:
    return sum("image/png" in out.get("data", {}) for out in cell.get("outputs", []))


def test_there_are_notebooks() -> None:
    assert len(NOTEBOOKS) >= 2


@pytest.mark.slow
@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.name)
def test_notebook_runs(path: Path, tmp_path: Path) -> None:
    notebook = nbformat.read(path, as_version=4)
    assert all(not cell.get("outputs") for cell in notebook.cells if cell.cell_type == "code"), (
        "commit notebooks without outputs"
    )
    if "skfolio" in path.read_text(encoding="utf-8"):
        pytest.importorskip("skfolio.datasets", reason="skfolio (test extra) carries the dataset")
    client = NotebookClient(
        notebook, timeout=600, kernel_name="python3", resources={"metadata": {"path": str(tmp_path)}}
    )
    client.execute()  # raises CellExecutionError, with the cell and traceback, on any failure
    EXECUTED.mkdir(parents=True, exist_ok=True)
    nbformat.write(notebook, EXECUTED / path.name)
    errors = [
        out for cell in notebook.cells if cell.cell_type == "code" for out in cell.outputs if out.output_type == "error"
    ]
    assert not errors
    warned = [
        out.text
        for cell in notebook.cells
        if cell.cell_type == "code"
        for out in cell.outputs
        if out.output_type == "stream" and out.name == "stderr" and "Warning" in out.text
    ]
    assert not warned, warned  # the walk-throughs should run clean
    assert any(cell.outputs for cell in notebook.cells if cell.cell_type == "code")
    drawing = [cell for cell in notebook.cells if cell.cell_type == "code" and DRAWS.search(cell.source)]
    assert drawing, "a walk-through shows its pictures: no cell draws"
    blank = [cell.source.splitlines()[0] for cell in drawing if _pngs(cell) == 0]
    assert not blank, f"cells that draw but show no picture: {blank}"
