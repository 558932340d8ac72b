"""``riskshape run``: what it writes, and how it refuses bad input.

The command is driven in-process through ``riskshape.cli.main`` (the console-script entry point,
which turns riskshape's errors into one line and exit status 2), and once as a real subprocess.
Every output is checked against the Python API on the same file and configuration
(``riskshape.monitor`` on ``riskshape.read_prices``).
"""

from __future__ import annotations

import json
import shutil
import subprocess
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest

import riskshape
from riskshape import CAUTION, Config, DataQualityWarning, MonitorResult, monitor, read_prices
from riskshape.alerts import describe_readiness, rule_states
from riskshape.cli import main

OUTPUTS = {"features.csv", "features.parquet", "diagrams.parquet", "left_out.csv", "manifest.json", "riskshape.sqlite"}


def _config_file(folder: Path, window: int = 20, extra: str = "", name: str = "riskshape.toml") -> Path:
    path = folder / name
    path.write_text(
        f'[monitor]\nwindow = {window}\nstep = 3\nmaxdim = 1\nrips_backend = "ripser"\n{extra}\n'
        '[compute]\nexecutor = "serial"\n'
    )
    return path


def _prices_file(price_files: Any, folder: Path, name: str = "prices.csv") -> Path:
    table = price_files.table(70)
    table.loc[:24, "XQ04"] = ""  # lists late: left out of the early windows
    table.loc[40, "XQ02"] = ""
    return price_files.write(table, folder / name)


def _run(*args: str | Path) -> Any:
    return main(["run", *map(str, args)])


def _expected(prices: Path, config: Path) -> MonitorResult:
    return monitor(read_prices(prices), Config.from_toml(config))


def test_run_writes_every_output_and_they_match_the_api(
    price_files: Any, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    prices, config = _prices_file(price_files, tmp_path), _config_file(tmp_path)
    out = tmp_path / "results"
    _run("--prices", prices, "--config", config, "--out", out)
    printed = capsys.readouterr()
    assert CAUTION in printed.out
    assert {p.name for p in out.iterdir()} == OUTPUTS
    assert not list(tmp_path.glob(".riskshape-*"))  # no staging folder left behind
    expected = _expected(prices, config)
    # 17 windows: the default rules cannot fire yet, and the run says so for each, with the windows to go
    for state in rule_states(expected.features, expected.config.alerts.rules):
        assert f"rule {describe_readiness(state, step=3)}" in printed.out
        assert not state.can_fire or state.history_needed == 0
    assert printed.out.count("cannot fire yet") == 5

    features = pd.read_parquet(out / "features.parquet")
    pd.testing.assert_frame_equal(
        features, expected.features, check_exact=True, check_freq=False, check_index_type=False
    )
    from_csv = pd.read_csv(out / "features.csv", index_col="window_end", parse_dates=["window_end"])
    assert list(from_csv.columns) == list(expected.features.columns)
    np.testing.assert_allclose(
        from_csv.to_numpy(dtype=float), expected.features.to_numpy(dtype=float), rtol=1e-8, equal_nan=True
    )  # written with 9 significant digits

    diagrams = pd.read_parquet(out / "diagrams.parquet")
    assert set(diagrams.columns) == {"window_end", "dim", "birth", "death"}
    n_rows = 0
    for end in expected.window_ends:
        for dim in (0, 1):
            mine = diagrams[(diagrams["window_end"] == end) & (diagrams["dim"] == dim)]
            bars = expected.diagram(end, dim)
            np.testing.assert_array_equal(mine[["birth", "death"]].to_numpy(dtype=float), bars)
            n_rows += len(bars)
    assert n_rows == len(diagrams) and n_rows > 0

    left_out = pd.read_csv(out / "left_out.csv", parse_dates=["window_end"])
    assert len(left_out) > 0 and set(left_out["asset"]) == {"XQ04"}
    pd.testing.assert_frame_equal(left_out, expected.left_out, check_dtype=False)

    manifest = json.loads((out / "manifest.json").read_text())
    assert manifest["input_hash"] == expected.input_hash
    assert manifest["config_hash"] == Config.from_toml(config).hash()
    assert Config.from_mapping(manifest["config"]) == Config.from_toml(config)
    assert manifest["package_version"] == riskshape.__version__
    assert manifest["caution"] == CAUTION
    assert manifest["n_windows"] == len(expected.window_ends)


def test_input_hash_follows_the_prices_and_config_hash_the_config(
    price_files: Any, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    config = _config_file(tmp_path)
    table = price_files.table(40)
    first = price_files.write(table, tmp_path / "a.csv")
    changed = table.copy()
    changed.loc[33, "XQ03"] = str(float(changed.loc[33, "XQ03"]) + 0.01)
    second = price_files.write(changed, tmp_path / "b.csv")
    _run("--prices", first, "--config", config, "--out", tmp_path / "one")
    _run("--prices", second, "--config", config, "--out", tmp_path / "two")
    _run("--prices", first, "--config", _config_file(tmp_path, window=15, name="w15.toml"), "--out", tmp_path / "three")
    one, two, three = (json.loads((tmp_path / n / "manifest.json").read_text()) for n in ("one", "two", "three"))
    assert one["input_hash"] != two["input_hash"]
    assert one["config_hash"] == two["config_hash"] == Config.from_toml(config).hash()
    assert one["input_hash"] == three["input_hash"]
    assert three["config_hash"] != one["config_hash"]


def _assert_refused(
    out: Path, capsys: pytest.CaptureFixture[str], fragments: tuple[str, ...], *args: str | Path
) -> None:
    with pytest.raises(SystemExit) as stopped:
        _run(*args)
    assert stopped.value.code == 2
    captured = capsys.readouterr()
    lines = captured.err.strip().splitlines()
    assert len(lines) == 1, captured.err
    assert lines[0].startswith("riskshape: error: ")
    assert "Traceback" not in captured.err + captured.out
    missing = [f for f in fragments if f not in lines[0]]
    assert not missing, f"{missing} not in {lines[0]!r}"


def test_bad_input_exits_2_with_one_line_and_writes_nothing(
    bad_price_file: Any, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "results"
    config = _config_file(tmp_path, window=bad_price_file.min_rows - 1)
    _assert_refused(
        out, capsys, bad_price_file.fragments, "--prices", bad_price_file.path, "--config", config, "--out", out
    )
    assert not out.exists()
    assert not list(tmp_path.glob(".riskshape-*"))


def test_an_existing_out_folder_is_left_as_it_was(
    price_files: Any, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    out = tmp_path / "results"
    out.mkdir()
    (out / "notes.txt").write_text("mine")
    table = price_files.table()
    table.loc[12, "XQ01"] = "-1"
    bad = price_files.write(table, tmp_path / "bad.csv")
    _assert_refused(
        out, capsys, ("bad.csv", "line 14", "'XQ01'"), "--prices", bad, "--config", _config_file(tmp_path), "--out", out
    )
    assert [p.name for p in out.iterdir()] == ["notes.txt"]
    assert (out / "notes.txt").read_text() == "mine"


def test_bad_config_and_missing_file_are_refused_in_one_line(
    price_files: Any, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    prices = _prices_file(price_files, tmp_path)
    out = tmp_path / "results"
    config = _config_file(tmp_path, extra="windw = 30")
    _assert_refused(out, capsys, ("riskshape.toml", "windw"), "--prices", prices, "--config", config, "--out", out)
    _assert_refused(
        out,
        capsys,
        ("missing.csv", "no such file"),
        "--prices",
        tmp_path / "missing.csv",
        "--config",
        _config_file(tmp_path),
        "--out",
        out,
    )
    assert not out.exists()


def test_unsorted_dates_warn_and_give_the_sorted_result(
    price_files: Any, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    config = _config_file(tmp_path)
    table = price_files.table(50)
    ordered = price_files.write(table, tmp_path / "ordered.csv")
    shuffled = price_files.write(
        table.sample(frac=1.0, random_state=np.random.default_rng(8)), tmp_path / "shuffled.csv"
    )
    _run("--prices", ordered, "--config", config, "--out", tmp_path / "a")
    with pytest.warns(DataQualityWarning, match="sorted"):
        _run("--prices", shuffled, "--config", config, "--out", tmp_path / "b")
    pd.testing.assert_frame_equal(
        pd.read_parquet(tmp_path / "a" / "features.parquet"),
        pd.read_parquet(tmp_path / "b" / "features.parquet"),
        check_exact=True,
    )


def test_long_layout_gives_the_same_run_as_wide(
    price_files: Any, tmp_path: Path, capsys: pytest.CaptureFixture[str]
) -> None:
    config = _config_file(tmp_path)
    wide_table = price_files.table(50)
    wide_table.loc[:9, "XQ04"] = ""
    long_table = wide_table.melt(id_vars="date", var_name="asset", value_name="price")
    long_table = long_table[long_table["price"] != ""]
    wide = price_files.write(wide_table, tmp_path / "wide.parquet")
    long = price_files.write(long_table, tmp_path / "long.csv")
    _run("--prices", wide, "--config", config, "--out", tmp_path / "w")
    _run("--prices", long, "--config", config, "--out", tmp_path / "l")
    for name in ("features.parquet", "diagrams.parquet"):
        pd.testing.assert_frame_equal(
            pd.read_parquet(tmp_path / "w" / name), pd.read_parquet(tmp_path / "l" / name), check_exact=True
        )
    hashes = [json.loads((tmp_path / n / "manifest.json").read_text())["input_hash"] for n in ("w", "l")]
    assert hashes[0] == hashes[1]


def test_the_installed_command_refuses_bad_input_in_one_line(price_files: Any, tmp_path: Path) -> None:
    command = shutil.which("riskshape")
    if command is None:
        pytest.skip("the riskshape console script is not on PATH (pip install -e . puts it there)")
    table = price_files.table()
    table.loc[4, "XQ03"] = "n/a?"
    bad = price_files.write(table, tmp_path / "bad.csv")
    out = tmp_path / "results"
    done = subprocess.run(
        [command, "run", "--prices", str(bad), "--out", str(out)],
        capture_output=True,
        text=True,
        timeout=120,
        check=False,
    )
    assert done.returncode == 2
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1 and lines[0].startswith("riskshape: error: "), done.stderr
    assert all(f in lines[0] for f in ("bad.csv", "line 6", "'XQ03'", "'n/a?'")), lines[0]
    assert not out.exists()
