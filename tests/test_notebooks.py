"""Every notebook in notebooks/ runs end to end (nbclient), so the walk-throughs cannot rot.

Notebooks are committed without outputs; they run here in a temporary folder, with the
python3 kernel of this environment.
"""

from __future__ import annotations

from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

NOTEBOOKS = sorted((Path(__file__).resolve().parents[1] / "notebooks").glob("*.ipynb"))


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
