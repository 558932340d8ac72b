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
