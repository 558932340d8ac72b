"""Helpers of the archive tests: fictional prices, alerts, a run manifest, PostgreSQL reachability,
and a connection that goes around the append-only triggers (for tampering on purpose).
"""

from __future__ import annotations

from collections.abc import Iterator
from contextlib import contextmanager
from datetime import datetime, timedelta, timezone

import numpy as np
import pandas as pd
import sqlalchemy as sa

from riskshape.alerts.model import Alert, Firing
from riskshape.store import RunManifest, Store
from riskshape.store.schema import APPEND_ONLY_TABLES
from tests.kit.assets import ASSETS
from tests.kit.postgres import PG_CONNINFO, PG_URL, postgres_unreachable  # noqa: F401 (re-exported)


def walk_prices(
    rng: np.random.Generator,
    n_days: int = 30,
    assets: tuple[str, ...] = ASSETS,
    start: str = "2030-01-01",
) -> pd.DataFrame:
    """Positive random-walk prices of fictional assets on business days."""
    index = pd.bdate_range(start, periods=n_days, name="date")
    steps = rng.normal(0.0, 0.01, size=(n_days, len(assets)))
    return pd.DataFrame(100.0 * np.exp(np.cumsum(steps, axis=0)), index=index, columns=list(assets))


def manifest(config_hash: str = "c" * 64, input_hash: str = "d" * 64) -> RunManifest:
    return RunManifest(
        config={"monitor": {"window": 20}},
        config_hash=config_hash,
        input_hash=input_hash,
        package_version="0.0.test",
        source="fixture",
    )


def make_alerts(
    rng: np.random.Generator,
    n: int,
    portfolio: str = "Fund North",
    rule: str = "rule_a",
    start: str = "2030-02-01",
    config_hash: str = "c" * 64,
) -> list[Alert]:
    """``n`` alerts of one rule on consecutive business days, random values."""
    ends = pd.bdate_range(start, periods=n)
    now = datetime(2030, 6, 1, 12, 0, tzinfo=timezone.utc)
    return [
        Alert(
            portfolio=portfolio,
            firing=Firing(
                rule=rule,
                summary="h1_total_persistence",
                kind="quantile",
                window_end=end,
                value=float(rng.normal()),
                threshold=float(rng.normal()),
                severity="warning",
            ),
            raised_at=now + timedelta(microseconds=int(rng.integers(0, 10**9))),
            config_hash=config_hash,
            inputs_hash=f"{int(rng.integers(0, 2**62)):064x}",
            package_version="0.0.test",
        )
        for end in ends
    ]


@contextmanager
def around_triggers(store: Store) -> Iterator[sa.Connection]:
    """A connection that can UPDATE and DELETE history, for tampering on purpose.

    SQLite: the append-only triggers are dropped and foreign keys turned off for the session.
    PostgreSQL: ``session_replication_role = replica`` (superuser) disables every trigger,
    including the foreign-key ones, for the session.
    """
    with store.engine.connect() as connection:
        raw = connection.connection.driver_connection
        sqlite = store.dialect == "sqlite"
        if sqlite:  # outside any transaction, where the pragma takes effect
            raw.execute("PRAGMA foreign_keys = OFF")
        with connection.begin():
            if sqlite:
                for table in APPEND_ONLY_TABLES:
                    for action in ("update", "delete"):
                        connection.exec_driver_sql(f"DROP TRIGGER IF EXISTS {table}_no_{action}")
            else:
                connection.exec_driver_sql("SET LOCAL session_replication_role = replica")
            yield connection
        if sqlite:
            raw.execute("PRAGMA foreign_keys = ON")
