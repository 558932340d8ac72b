"""Many portfolios in one day file: in parallel equals one by one; a bad portfolio is refused alone.

The reference is the same ingest policy fed one portfolio at a time (riskshape's own batch path).
"""

from __future__ import annotations

from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
from sqlalchemy import event
from sqlalchemy.engine import Connection

from riskshape import Config
from riskshape.cli import main
from riskshape.config import RuleConfig
from riskshape.daily import Ingestor, ingest_many, split_feed
from riskshape.daily import ingest as ingest_module
from riskshape.daily.tail_run import DAY_STATE
from riskshape.errors import StoreError
from riskshape.store import Store, open_store, verify_chain
from riskshape.store.database import WRITE_OPTION
from riskshape.store.seals import SEALED
from tests.kit.archive import walk_prices
from tests.kit.assets import codes
from tests.kit.cli import run_cli

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
    assert run_cli(capsys, "ingest", "--prices", str(head), "--store", url, "--config", str(config))[0] in (None, 0)
    status, out, err = run_cli(capsys, "ingest", "--prices", str(last), "--store", url, "--config", str(config))
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


def _history_then_day(rng: np.random.Generator) -> tuple[pd.DataFrame, pd.DataFrame]:
    """The three portfolios' first 23 days, and their 24th day (long tables)."""
    table = _long(rng)
    last = table["date"] == table["date"].max()
    return table[~last].reset_index(drop=True), table[last].reset_index(drop=True)


def _archive_view(url: str) -> dict[str, object]:
    """What a day leaves in the archive, per portfolio, without row ids or clocks."""
    view: dict[str, object] = {}
    with open_store(url) as store:
        assert verify_chain(store).ok
        for name in NAMES:
            view[name] = (
                store.read_prices(name),
                store.read_features(name).frame,
                [store.read_diagram(name, end, k).bars.tobytes() for end in store.window_ends(name) for k in (0, 1)],
                [(a.rule, a.window_end, a.value, a.threshold) for a in store.list_alerts(portfolio=name).items],
                len(store.list_runs(name)),
                [(e.subject, e.data["n_prices"]) for e in store.list_events(kind=DAY_STATE, portfolio=name)],
                len(store.list_events(kind=SEALED, portfolio=name)),
            )
    return view


def test_a_batched_day_equals_the_portfolios_fed_one_by_one_with_one_commit(
    tmp_path: Path, rng: np.random.Generator
) -> None:
    history, day = _history_then_day(rng)
    config = _config("serial")
    urls = {kind: f"sqlite:///{tmp_path / (kind + '.sqlite')}" for kind in ("batched", "alone")}
    commits: list[object] = []

    def count(connection: Connection) -> None:  # write transactions only (BEGIN IMMEDIATE)
        if connection.get_execution_options().get(WRITE_OPTION):
            commits.append(connection)

    for kind, url in urls.items():
        with open_store(url) as store:
            for name in NAMES:
                store.ensure_portfolio(name)
            ingest_many(store, split_feed(history, "history"), Ingestor(config), batch=1)
            commits.clear()
            event.listen(store.engine, "commit", count)
            ingestor = Ingestor(config)
            if kind == "batched":
                outcomes = ingest_many(store, split_feed(day, "day file"), ingestor)
                assert [o.error for o in outcomes] == [None, None, None]
                assert len(commits) == 1  # one commit (one fsync) for the three portfolios' day
            else:
                feed = split_feed(day, "day file")
                for name in NAMES:
                    assert ingestor.ingest(store, name, feed.prices[name]).windows_added == 1
                assert len(commits) == 3
            event.remove(store.engine, "commit", count)
    batched, alone = _archive_view(urls["batched"]), _archive_view(urls["alone"])
    for name in NAMES:
        for mine, theirs in zip(batched[name], alone[name]):  # type: ignore[call-overload]
            if isinstance(mine, pd.DataFrame):
                pd.testing.assert_frame_equal(mine, theirs)
            else:
                assert mine == theirs


def test_a_portfolio_failing_after_its_first_writes_is_rolled_back_alone(
    tmp_path: Path, rng: np.random.Generator, monkeypatch: pytest.MonkeyPatch
) -> None:
    history, day = _history_then_day(rng)
    config = _config("serial")
    url = f"sqlite:///{tmp_path / 'archive.sqlite'}"
    with open_store(url) as store:
        for name in NAMES:
            store.ensure_portfolio(name)
        ingest_many(store, split_feed(history, "history"), Ingestor(config))
    before = _archive_view(url)
    real = ingest_module.archive_tail_run

    def refuses_birch(store: Store, portfolio: str, *args: Any, **kwargs: Any) -> Any:
        if portfolio == "Fund Birch":  # its day's prices are written by now: the savepoint must undo them
            raise StoreError("write_features: the archive refused the write (disk full)")
        return real(store, portfolio, *args, **kwargs)

    monkeypatch.setattr(ingest_module, "archive_tail_run", refuses_birch)
    with open_store(url) as store:
        outcomes = ingest_many(store, split_feed(day, "day file"), Ingestor(config))
    assert [o.error is None for o in outcomes] == [True, False, True]
    assert "disk full" in str(outcomes[1].error)
    after = _archive_view(url)  # verify_chain passes: no commitment names Birch's undone rows
    pd.testing.assert_frame_equal(after["Fund Birch"][0], before["Fund Birch"][0])  # type: ignore[index]
    assert after["Fund Birch"][4:] == before["Fund Birch"][4:]  # type: ignore[index]
    for name in ("Fund Alder", "Fund Cedar"):
        assert len(after[name][0]) == len(before[name][0]) + 1  # type: ignore[index]
        assert after[name][4] == before[name][4] + 1  # type: ignore[index,operator]
