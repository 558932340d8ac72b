"""``riskshape run`` names the Rips backend that ran, and ``--profile`` prints the time by stage."""

from __future__ import annotations

import json
from pathlib import Path

import pandas as pd
from click.testing import CliRunner

from riskshape.cli import cli
from riskshape.compute import describe_backend


def _run(tmp_path: Path, prices: pd.DataFrame, *extra: str) -> tuple[str, Path]:
    source = tmp_path / "prices.csv"
    prices.to_csv(source, index_label="date")
    config = tmp_path / "config.toml"
    config.write_text("[monitor]\nwindow = 20\n\n[compute]\nexecutor = 'serial'\n")
    out = tmp_path / "out"
    done = CliRunner().invoke(cli, ["run", "--prices", str(source), "--config", str(config), "--out", str(out), *extra])
    assert done.exit_code == 0, done.output
    return done.output, out


def test_run_names_the_backend_and_the_manifest_records_it(tmp_path: Path, small_prices: pd.DataFrame) -> None:
    output, out = _run(tmp_path, small_prices)
    library = describe_backend("auto", 1)
    assert f"diagrams by: {library} (rips_backend = 'auto')" in output
    assert "time by stage" not in output
    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["rips_backend"]["configured"] == "auto"
    assert manifest["rips_backend"]["library"] == library
    assert manifest["rips_backend"]["ran"] in ("ripser", "giotto")


def test_profile_prints_every_stage(tmp_path: Path, small_prices: pd.DataFrame) -> None:
    output, _ = _run(tmp_path, small_prices, "--profile")
    table = output[output.index("time by stage") :]
    for label in ("correlation", "distance matrix", "persistence", "summaries", "distances", "hand-off", "writing"):
        assert label in table, label
    writing = next(line for line in table.splitlines() if line.strip().startswith("writing"))
    assert float(writing.split()[1]) > 0
