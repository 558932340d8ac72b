"""Every file of the bad-input corpus through ``riskshape run``: refused in one line naming the file
and the fix, exit status 2, no traceback, and nothing written (no run folder, no archive).

The corpus is :func:`tests.kit.bad_inputs.bad_files`; its size is the figure on docs/reliability.md.
"""

from __future__ import annotations

from pathlib import Path

import pytest

from riskshape.cli import main
from tests.kit.bad_inputs import WINDOW, BadFile, bad_files

CASES = bad_files()


def test_the_corpus_is_large_enough() -> None:
    # the reliability page promises at least 60 bad files and bodies; files are the larger part
    assert len(CASES) >= 55
    assert len({case.id for case in CASES}) == len(CASES)


def _place(case: BadFile, folder: Path) -> Path:
    path = folder / case.name
    if case.missing:
        return path
    if case.data is None:
        path.mkdir()
    else:
        path.write_bytes(case.data)
    return path


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_bad_file_is_refused_before_any_work(case: BadFile, tmp_path: Path, capsys: pytest.CaptureFixture[str]) -> None:
    inputs = tmp_path / "in"
    inputs.mkdir()
    path = _place(case, inputs)
    config = tmp_path / "config.toml"
    config.write_text(f"[monitor]\nwindow = {WINDOW}\n{case.config}")
    out = tmp_path / "out"
    with pytest.raises(SystemExit) as ended:
        main(["run", "--prices", str(path), "--config", str(config), "--out", str(out), "--executor", "serial"])
    assert ended.value.code == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("riskshape: error: ") and "\n" not in err, err
    assert "Traceback" not in err
    for word in case.words:
        assert word in err, (word, err)
    assert str(path) in err  # the message names the file
    assert not out.exists()  # no run folder, no archive inside it
    assert sorted(p.name for p in tmp_path.iterdir()) == ["config.toml", "in"]
