"""A new day through the ingest reads only the tail, restart or not, and archives what a full run archives.

The reference is the batch path: :func:`riskshape.monitor` over the whole history archived with
:func:`riskshape.archive_run` into a second archive. Each new day is fed to a store opened afresh
and a new :class:`Ingestor` (a restarted service: nothing in memory). The bounded path is checked
three ways: ``monitor`` (the full path) is never called, the whole history is never read (prices
and features rows read, counted on the store's reads), and the SQL statements a day sends
(SQLAlchemy's ``before_cursor_execute`` event) and the rows it reads are the same for a history
five times longer.
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from pathlib import Path
from typing import Any

import numpy as np
import pandas as pd
import pytest
import sqlalchemy as sa
from sqlalchemy import event

import riskshape.daily.ingest as ingest_module
from riskshape import Config, archive_run, monitor, reproduce_alert
from riskshape.config import RuleConfig
from riskshape.daily import Ingestor
from riskshape.daily.tail_run import DAY_STATE
from riskshape.prices import ValidPrices, validate_prices
from riskshape.store import Store, open_store, verify_chain
from riskshape.store import schema as t
from tests.kit.archive import walk_prices
from tests.kit.assets import codes
from tests.kit.postgres import fresh_schema_url

ASSETS = codes(8)
RULES = [
    # rules that fire often on a random walk, so that the new days raise alerts to compare
    RuleConfig(name="corr-up", summary="mean_correlation", kind="quantile", threshold=0.6, clear=0.4, lookback=30,
               min_history=5),
    RuleConfig(name="h0-z", summary="h0_total_persistence", kind="zscore", threshold=0.3, clear=-0.2, lookback=25,
               min_history=4, consecutive=2, cooldown=3),
    RuleConfig(name="h0-median", summary="h0_entropy", kind="quantile", threshold=0.5, lookback=10, min_history=2),
    RuleConfig(name="h1-low", summary="h1_total_persistence", kind="quantile", threshold=0.4, direction="below",
               lookback=40, min_history=10),
]  # fmt: skip


def _config(step: int = 1) -> Config:
    return Config(window=20, step=step, maxdim=1, compute={"executor": "serial"}, alerts={"rules": RULES})


def _valid(frame: pd.DataFrame) -> ValidPrices:
    return validate_prices(frame.reset_index(), source="test body", min_rows=1, min_assets=1)


def _history(rng: np.random.Generator, n_days: int) -> pd.DataFrame:
    prices = walk_prices(rng, n_days=n_days, assets=ASSETS)
    prices.iloc[n_days // 3, 2] = np.nan  # a gap: a missing price makes two missing returns
    return prices


def _url(tmp_path: Path, name: str) -> str:
    return f"sqlite:///{tmp_path / (name + '.sqlite')}"


def _no_full_path(*args: object, **kwargs: object) -> Any:
    raise AssertionError("the full path ran: monitor over the whole history")


@contextmanager
def _counting(store: Store) -> Iterator[dict[str, int]]:
    """Statements sent, and rows of prices and features read, while the block runs."""
    seen = {"statements": 0, "price_rows": 0, "feature_rows": 0}
    read_prices, read_features, last_features = store.read_prices, store.read_features, store.last_features

    def statement(*args: object) -> None:
        seen["statements"] += 1

    def prices(*args: Any, **kwargs: Any) -> pd.DataFrame:
        frame = read_prices(*args, **kwargs)
        seen["price_rows"] += len(frame)
        return frame

    def features(*args: Any, **kwargs: Any) -> Any:
        page = read_features(*args, **kwargs)
        seen["feature_rows"] += len(page.frame)
        return page

    def last(*args: Any, **kwargs: Any) -> pd.DataFrame:
        frame = last_features(*args, **kwargs)
        seen["feature_rows"] += len(frame)
        return frame

    store.read_prices = prices  # type: ignore[method-assign]
    store.read_features = features  # type: ignore[method-assign]
    store.last_features = last  # type: ignore[method-assign]
    event.listen(store.engine, "before_cursor_execute", statement)
    try:
        yield seen
    finally:
        event.remove(store.engine, "before_cursor_execute", statement)


def _alerts(store: Store) -> list[tuple[object, ...]]:
    return [
        (a.rule, a.window_end, a.value, a.threshold, a.config_hash, a.inputs_hash, a.explanation)
        for a in store.list_alerts(portfolio="alpha", limit=None).items
    ]


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def fed_url(request: pytest.FixtureRequest, tmp_path: Path) -> Iterator[str]:
    """Where the days are fed: an SQLite file, or a PostgreSQL schema of its own."""
    if request.param == "sqlite":
        yield _url(tmp_path, "fed")
        return
    with fresh_schema_url("rs_tail") as url:
        yield url


@pytest.mark.parametrize("step,new_days", [(1, 12), (3, 16)], ids=["daily", "step-3"])
def test_days_fed_after_restarts_archive_what_a_full_run_archives(
    tmp_path: Path,
    rng: np.random.Generator,
    monkeypatch: pytest.MonkeyPatch,
    step: int,
    new_days: int,
    fed_url: str,
) -> None:
    config = _config(step)
    prices = _history(rng, 160)
    held = len(prices) - new_days
    with open_store(fed_url) as store:
        store.ensure_portfolio("alpha")
        Ingestor(config).ingest(store, "alpha", _valid(prices.iloc[:held]))  # the first ingest: the full path
    monkeypatch.setattr(ingest_module, "monitor", _no_full_path)
    for day in range(held, len(prices)):
        with open_store(fed_url) as store:  # a restart before every day
            report = Ingestor(config).ingest(store, "alpha", _valid(prices.iloc[[day]]))
        assert report.run_id is not None
    monkeypatch.undo()
    with open_store(_url(tmp_path, "full")) as full:
        archive_run(full, "alpha", monitor(prices, config))
        with open_store(fed_url) as fed:
            pd.testing.assert_frame_equal(fed.read_features("alpha").frame, full.read_features("alpha").frame)
            assert fed.window_ends("alpha") == full.window_ends("alpha")
            for end in full.window_ends("alpha")[-5:]:
                for k in (0, 1):
                    np.testing.assert_array_equal(
                        fed.read_diagram("alpha", end, k).bars, full.read_diagram("alpha", end, k).bars
                    )
            pd.testing.assert_frame_equal(fed.read_prices("alpha"), full.read_prices("alpha"))
            fed_alerts = _alerts(fed)
            assert fed_alerts == _alerts(full)  # values, thresholds, inputs hashes, explanations: bit for bit
            late = [a for a in fed_alerts if pd.Timestamp(a[1]) > prices.index[held - 1]]
            assert late, "the new days raise no alert: the check would be empty"
            assert verify_chain(fed).ok
            assert len(fed.list_events(kind=DAY_STATE, portfolio="alpha")) == new_days + 1
            for alert in fed.list_alerts(portfolio="alpha", limit=None).items[-3:]:
                assert reproduce_alert(fed, alert.id).ok  # an alert of a tail run reproduces from the archive


QUIET = [  # rules that read their lookback and never fire: the same reads on every day
    RuleConfig(name="never", summary="mean_correlation", kind="level", threshold=2.0, lookback=40, min_history=0),
    RuleConfig(name="never-z", summary="h1_entropy", kind="zscore", threshold=1e6, lookback=30, min_history=2),
]


def _one_day_counts(tmp_path: Path, rng: np.random.Generator, n_days: int, kept: bool = True) -> dict[str, int]:
    config = _config().replace(alerts={"rules": QUIET})
    prices = _history(rng, n_days)
    url = _url(tmp_path, f"h{n_days}-{kept}")
    with open_store(url) as store:
        store.ensure_portfolio("alpha")
        Ingestor(config).ingest(store, "alpha", _valid(prices.iloc[:-2]))
        Ingestor(config).ingest(store, "alpha", _valid(prices.iloc[[-2]]))  # one tail day before the counted one
        if not kept:  # without the day tail it kept, the day reads the archive's rows
            with store.engine.begin() as connection:
                connection.execute(sa.delete(t.day_tails))
    with pytest.MonkeyPatch.context() as patch, open_store(url) as store, _counting(store) as seen:
        patch.setattr(ingest_module, "monitor", _no_full_path)
        report = Ingestor(config).ingest(store, "alpha", _valid(prices.iloc[[-1]]))
    assert report.windows_added == 1
    return seen


def test_a_day_after_a_restart_reads_the_same_for_five_times_the_history(
    tmp_path: Path, rng: np.random.Generator
) -> None:
    # 200 and 200 + 13 * 64 days: the new window sits at the same place between two rebuild points
    # of the running sums (moments.RECOMPUTE_EVERY = 64), so the tail has the same length
    short = _one_day_counts(tmp_path, rng, 200, kept=False)
    long = _one_day_counts(tmp_path, rng, 200 + 13 * 64, kept=False)
    assert long == short
    window = _config().window
    # prices: the day sent, then the window, its returns' base row and at most the rebuild span
    assert long["price_rows"] <= 1 + window + 1 + 64
    assert long["feature_rows"] == max(r.lookback for r in QUIET)  # the longest lookback


def test_a_day_after_a_restart_with_its_kept_tail_reads_only_the_day(tmp_path: Path, rng: np.random.Generator) -> None:
    short = _one_day_counts(tmp_path, rng, 200)
    long = _one_day_counts(tmp_path, rng, 200 + 13 * 64)
    assert long == short
    # prices: the new counted day alone (the day sent finds nothing archived to compare with); the
    # tail's other rows and the rules' lookback come from the portfolio's day tail (one row)
    assert long["price_rows"] == 1
    assert long["feature_rows"] == 0
    unkept = _one_day_counts(tmp_path, rng, 200 + 13 * 64, kept=False)
    assert long["statements"] < unkept["statements"]


def _correction_counts(
    tmp_path: Path, rng: np.random.Generator, n_days: int, config: Config
) -> tuple[dict[str, int], pd.DataFrame]:
    prices = _history(rng, n_days)
    url = _url(tmp_path, f"c{n_days}")
    with open_store(url) as store:
        store.ensure_portfolio("alpha")
        Ingestor(config).ingest(store, "alpha", _valid(prices.iloc[:-1]))
    revised = prices.iloc[[150]][[ASSETS[4]]] * 1.02
    with pytest.MonkeyPatch.context() as patch:
        patch.setattr(ingest_module, "monitor", _no_full_path)
        with open_store(url) as store, _counting(store) as seen:
            report = Ingestor(config).ingest(store, "alpha", _valid(revised), correction=True)
        assert report.corrections == 1 and report.windows_differing >= 1
        with open_store(url) as store:  # a restart, then the next day: the bounded path again
            assert Ingestor(config).ingest(store, "alpha", _valid(prices.iloc[[-1]])).windows_added == 1
    corrected = prices.copy()
    corrected.iloc[150, 4] = revised.iloc[0, 0]
    with open_store(_url(tmp_path, f"fresh{n_days}")) as fresh, open_store(url) as store:
        archive_run(fresh, "alpha", monitor(corrected, config), explain=False)
        return seen, store.read_features("alpha").frame.compare(fresh.read_features("alpha").frame)


def test_a_correction_reads_the_same_prices_for_five_times_the_history_and_the_next_day_stays_bounded(
    tmp_path: Path, rng: np.random.Generator
) -> None:
    config = _config().replace(alerts={"rules": QUIET})
    short, short_diff = _correction_counts(tmp_path, rng, 300, config)
    long, long_diff = _correction_counts(tmp_path, rng, 300 + 13 * 64, config)
    assert short_diff.empty and long_diff.empty  # the series equals a fresh run over the corrected prices
    assert long["price_rows"] == short["price_rows"]
    # the windows the corrected date enters (window + 1 price rows on each side) and those whose
    # running sums carry it (up to the next rebuild point, 64 rows), the one before them (its diagrams)
    assert long["price_rows"] <= 1 + 2 * (config.window + 1) + 2 * 64
