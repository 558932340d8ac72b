"""Run the command line in-process, as the tests that read its output and exit status do."""

from __future__ import annotations

import pytest

from riskshape.cli import main


def run_cli(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[object, str, str]:
    """``riskshape ARGV...`` in this process: its exit status (None or 0 on success), stdout and stderr."""
    try:
        status = main(list(argv))
    except SystemExit as stop:
        status = stop.code
    out, err = capsys.readouterr()
    return status, out, err
