"""Eight writers at once on one archive, on SQLite and on PostgreSQL: runs, ingests and reviews, of
different portfolios and of the same one. No lock error reaches a writer (they wait inside the store),
every count is exact, the chain verifies.

Expected counts come from the library without the archive: the windows of ``monitor`` and the firings
of ``evaluate_rules`` on its features. The large counts are in ``benchmarks/reliability.py``.
"""

from __future__ import annotations

from functools import partial

import pandas as pd
import pytest
import sqlalchemy as sa

from riskshape import Config, archive_run, monitor
from riskshape.alerts import evaluate_rules
from riskshape.compute.monitor import MonitorResult
from riskshape.demo.scenario import generate_scenario
from riskshape.store import Store, verify_chain
from tests.kit.service import write_config
from tests.kit.writers import Outcome, at_once, ingest_work, review_work, run_work

WRITERS = 8


@pytest.fixture(scope="module")
def small(tmp_path_factory: pytest.TempPathFactory) -> tuple[pd.DataFrame, Config, MonitorResult, int]:
    """18 fictional assets over 45 days, the service tests' configuration, its result and firings."""
    prices = generate_scenario(seed=5, n_days=45, assets_per_sector=3).prices
    config = Config.from_toml(write_config(tmp_path_factory.mktemp("writers")))
    result = monitor(prices, config)
    firings = len(evaluate_rules(result.features, config.alerts.rules))
    assert firings > 0  # the rules fire, so alert counts say something
    return prices, config, result, firings


def _counts(store: Store, portfolio: str | None = None) -> dict[str, int]:
    where = "" if portfolio is None else " WHERE portfolio_id = (SELECT id FROM portfolios WHERE name = :p)"
    with store.engine.connect() as connection:
        return {
            table: int(
                connection.execute(sa.text(f"SELECT count(*) FROM {table}{where}"), {"p": portfolio}).scalar_one()
            )
            for table in ("features", "diagrams", "alerts")
        }


def _no_lock_errors(outcomes: list[Outcome]) -> None:
    assert not [o for o in outcomes if o.lock_error or o.status == "crash"], outcomes


@pytest.mark.timeout(600)
def test_eight_runs_at_once_of_different_portfolios_and_of_one(store: Store, store_url: str, small) -> None:
    _, config, result, firings = small
    windows = len(result.window_ends)
    outcomes = at_once(store_url, [partial(run_work, result, f"Fund {n}") for n in range(WRITERS)])
    _no_lock_errors(outcomes)
    assert [o.detail for o in outcomes] == [firings] * WRITERS
    for n in range(WRITERS):
        assert _counts(store, f"Fund {n}") == {
            "features": windows,
            "diagrams": windows * (config.maxdim + 1),
            "alerts": firings,
        }
    outcomes = at_once(store_url, [partial(run_work, result, "Fund Shared") for _ in range(WRITERS)])
    _no_lock_errors(outcomes)
    assert sum(o.detail for o in outcomes) == firings  # raised once, whoever wrote first
    assert _counts(store, "Fund Shared") == {
        "features": windows,
        "diagrams": windows * (config.maxdim + 1),
        "alerts": firings,
    }
    report = verify_chain(store)
    # the ledger: the alerts and the chained events (commitments, day states, key events)
    assert report.ok and report.head.count == (WRITERS + 1) * firings + len(store.list_events()), report.first_bad


@pytest.mark.timeout(600)
def test_eight_ingests_at_once_of_different_portfolios_and_of_one(store: Store, store_url: str, small) -> None:
    prices, config, result, firings = small
    windows, cells = len(result.window_ends), prices.size  # a missing price is archived too (as null)
    names = [f"Feed {n}" for n in range(WRITERS)] + ["Feed Shared"]
    for name in names:
        store.create_portfolio(name)
    outcomes = at_once(store_url, [partial(ingest_work, prices, config, name) for name in names[:WRITERS]])
    _no_lock_errors(outcomes)
    assert [o.detail for o in outcomes] == [(cells, windows, firings)] * WRITERS
    outcomes = at_once(store_url, [partial(ingest_work, prices, config, "Feed Shared") for _ in range(WRITERS)])
    _no_lock_errors(outcomes)
    assert all(o.status == "ok" for o in outcomes), outcomes
    added = [o.detail for o in outcomes]
    assert sum(a[0] for a in added) == cells and sum(a[1] for a in added) == windows  # each cell and window once
    assert sum(a[2] for a in added) == firings
    for name in names:
        assert _counts(store, name) == {
            "features": windows,
            "diagrams": windows * (config.maxdim + 1),
            "alerts": firings,
        }
    report = verify_chain(store)
    # the ledger: the alerts and the chained events (commitments, day states, key events)
    assert report.ok and report.head.count == (WRITERS + 1) * firings + len(store.list_events()), report.first_bad


@pytest.mark.timeout(600)
def test_eight_reviews_at_once_of_different_alerts_and_of_one(store: Store, store_url: str, small) -> None:
    prices, config, result, firings = small
    for n in range(3):
        archive_run(store, f"Desk {n}", result)
    ids = [a.id for a in store.list_alerts(limit=None).items][: WRITERS + 1]
    assert len(ids) == WRITERS + 1
    head = verify_chain(store).head.count
    outcomes = at_once(store_url, [partial(review_work, ids[n], f"reviewer {n}") for n in range(WRITERS)])
    _no_lock_errors(outcomes)
    assert all(o.status == "ok" for o in outcomes), outcomes
    assert sorted(o.detail for o in outcomes) == list(range(head + 1, head + WRITERS + 1))  # one place each
    outcomes = at_once(store_url, [partial(review_work, ids[-1], f"reviewer {n}") for n in range(WRITERS)])
    _no_lock_errors(outcomes)
    done = [o for o in outcomes if o.status == "ok"]
    refused = [o for o in outcomes if o.status == "refused"]
    assert len(done) == 1 and len(refused) == WRITERS - 1, outcomes  # the workflow admits one acknowledgement
    assert len(store.get_alert(ids[-1]).reviews) == 1
    report = verify_chain(store)
    assert report.ok and report.head.count == head + WRITERS + 1, report.first_bad
