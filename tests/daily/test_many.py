"""Many portfolios in one day file: in parallel equals one by one; a bad portfolio is refused alone.

The reference is the same ingest policy fed one portfolio at a time (riskshape's own batch path).
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from riskshape import Config
from riskshape.cli import main
from riskshape.config import RuleConfig
from riskshape.daily import Ingestor, ingest_many, split_feed
from riskshape.store import open_store
from tests.kit.archive import walk_prices
from tests.kit.assets import codes

RULE = RuleConfig(name="calm", summary="mean_correlation", kind="level", threshold=-1.0, min_history=0)
NAMES = ("Fund Alder", "Fund Birch", "Fund Cedar")


def _config(executor: str) -> Config:
    return Config(window=20, maxdim=1, compute={"executor": executor, "workers": 2}, alerts={"rules": [RULE]})


def _long(rng: np.random.Generator) -> pd.DataFrame:
    parts = []
    for i, name in enumerate(NAMES):
        wide = walk_prices(rng, n_days=24, assets=codes(4, prefix=f"X{'ABC'[i]}"))
        long = wide.reset_index().melt(id_vars="date", var_name="asset", value_name="price")
        long["date"] = long["date"].dt.strftime("%Y-%m-%d")
        long["price"] = long["price"].map(repr)
        long.insert(0, "portfolio", name)
        parts.append(long)
    return pd.concat(parts, ignore_index=True)


def _features(url: str) -> dict[str, pd.DataFrame]:
    with open_store(url) as store:
        return {n: store.read_features(n).frame for n in NAMES if store.latest_run(n) is not None}


def test_many_portfolios_in_parallel_equal_one_by_one(tmp_path: Path, rng: np.random.Generator) -> None:
    table = _long(rng)
    feed = split_feed(table, "day file")
    urls = {kind: f"sqlite:///{tmp_path / (kind + '.sqlite')}" for kind in ("parallel", "serial")}
    for kind, url in urls.items():
        with open_store(url) as store:
            for name in NAMES:
                store.ensure_portfolio(name)
            outcomes = ingest_many(store, feed, Ingestor(_config("process" if kind == "parallel" else "serial")))
        assert [o.error for o in outcomes] == [None, None, None]
        assert all(o.report is not None and o.report.windows_added == 4 for o in outcomes)
    parallel, serial = _features(urls["parallel"]), _features(urls["serial"])
    assert set(parallel) == set(NAMES)
    for name in NAMES:
        pd.testing.assert_frame_equal(parallel[name], serial[name])


def test_a_bad_portfolio_is_refused_alone(
    tmp_path: Path, rng: np.random.Generator, capsys: pytest.CaptureFixture[str]
) -> None:
    table = _long(rng)
    bad = table["portfolio"] == "Fund Birch"
    table.loc[bad & (table.index % 7 == 0), "price"] = "-3"
    path = tmp_path / "day.csv"
    table.to_csv(path, index=False)
    url = f"sqlite:///{tmp_path / 'archive.sqlite'}"
    with pytest.raises(SystemExit) as stop:
        main(["ingest", "--prices", str(path), "--store", url])
    assert stop.value.code == 2
    assert "1 of 3 portfolio(s) refused" in capsys.readouterr().err
    with open_store(url) as store:
        assert store.latest_run("Fund Birch") is None
        assert store.read_prices("Fund Birch").empty
        assert len(store.read_prices("Fund Alder")) == 24 and len(store.read_prices("Fund Cedar")) == 24


def _ingest(capsys: pytest.CaptureFixture[str], *argv: str) -> tuple[object, str, str]:
    try:
        status = main(list(argv))
    except SystemExit as stop:
        status = stop.code
    out, err = capsys.readouterr()
    return status, out, err


@pytest.mark.parametrize("mode", ["warn", "refuse"])
def test_each_portfolios_prices_are_checked_for_quality_against_its_archive(
    tmp_path: Path, rng: np.random.Generator, capsys: pytest.CaptureFixture[str], mode: str
) -> None:
    table = _long(rng)
    days = sorted(table["date"].unique())
    url = f"sqlite:///{tmp_path / 'archive.sqlite'}"
    config = tmp_path / "checks.toml"
    config.write_text(f'[monitor]\nwindow = 20\n[compute]\nexecutor = "serial"\n[checks]\nquality = "{mode}"\n')
    head, last = tmp_path / "head.csv", tmp_path / "last.csv"
    table[table["date"] < days[-1]].to_csv(head, index=False)
    new = table[table["date"] == days[-1]].copy()
    asset = "XB02"  # Fund Birch's; its last day's price x10 (a misplaced decimal point)
    at = (new["portfolio"] == "Fund Birch") & (new["asset"] == asset)
    new.loc[at, "price"] = repr(float(new.loc[at, "price"].iloc[0]) * 10)
    new.to_csv(last, index=False)
    assert _ingest(capsys, "ingest", "--prices", str(head), "--store", url, "--config", str(config))[0] in (None, 0)
    status, out, err = _ingest(capsys, "ingest", "--prices", str(last), "--store", url, "--config", str(config))
    # reference: pandas' one-day ratios of Fund Birch's prices, archived and new (bound x2, the default)
    birch = pd.concat([table[table["date"] < days[-1]], new])
    wide = birch[birch["portfolio"] == "Fund Birch"].pivot(index="date", columns="asset", values="price").astype(float)
    ratio = wide.pct_change(fill_method=None).iloc[-1] + 1.0
    assert list(ratio.index[(ratio > 2.0) | (ratio < 0.5)]) == [asset]
    named = f"asset '{asset}' on {days[-1]}"
    with open_store(url) as store:
        birch_dates = len(store.read_prices("Fund Birch"))
        others = [len(store.read_prices(n)) for n in ("Fund Alder", "Fund Cedar")]
    assert others == [24, 24]
    if mode == "warn":
        assert status in (None, 0), err
        warnings = [line for line in out.splitlines() if line.startswith("  warning: ")]
        assert len(warnings) == 1 and named in warnings[0] and "portfolio Fund Birch" in warnings[0], out
        assert birch_dates == 24
    else:
        assert status == 2 and "1 of 3 portfolio(s) refused" in err
        (refused,) = [line for line in out.splitlines() if line.startswith("Fund Birch: refused")]
        assert named in refused and "refused because [checks] quality = 'refuse'" in refused
        assert birch_dates == 23  # nothing of Fund Birch's day was archived
