"""Fixtures of the archive tests: one store per test on SQLite (a temporary file) and on the real
PostgreSQL server (a fresh schema per test, dropped afterwards; skipped when unreachable).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Iterator

import numpy as np
import pandas as pd
import pytest

from riskshape import Config, monitor
from riskshape.compute.monitor import MonitorResult
from riskshape.config import RuleConfig
from riskshape.store import Run, Store, open_store
from tests.kit.archive import manifest, walk_prices
from tests.kit.postgres import fresh_schema_url


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def store_url(request: pytest.FixtureRequest, tmp_path) -> Iterator[str]:
    """URL of an empty archive: a SQLite file, or a fresh PostgreSQL schema."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'archive.sqlite'}"
        return
    with fresh_schema_url("rs_test") as url:
        yield url


@pytest.fixture
def store(store_url: str) -> Iterator[Store]:
    with open_store(store_url) as opened:
        yield opened


@pytest.fixture
def run(store: Store, rng: np.random.Generator) -> Run:
    """A portfolio 'Fund North' with one run of small prices."""
    store.create_portfolio("Fund North")
    return store.create_run("Fund North", manifest(), walk_prices(rng))


def _rules(features: pd.DataFrame) -> tuple[RuleConfig, ...]:
    """Rules that fire a few times on this series: a level at its own 80th percentile, a z-score and a
    trailing quantile (thresholds from the data, so nothing is hard-coded).
    """
    level = float(features["mean_correlation"].quantile(0.8))
    return (
        RuleConfig(
            name="corr_level",
            summary="mean_correlation",
            kind="level",
            threshold=level,
            min_history=0,
            consecutive=2,
            cooldown=5,
            severity="critical",
        ),
        RuleConfig(
            name="h1_z",
            summary="h1_total_persistence",
            kind="zscore",
            threshold=1.5,
            lookback=40,
            min_history=20,
            severity="info",
        ),
        RuleConfig(
            name="h0_q",
            summary="h0_wasserstein",
            kind="quantile",
            threshold=0.9,
            clear=0.5,
            lookback=40,
            min_history=20,
            cooldown=3,
        ),
    )


@pytest.fixture(scope="session")
def computed(small_prices: pd.DataFrame, small_config: Config) -> MonitorResult:
    """The small scenario monitored under rules that fire (the windows do not depend on the rules)."""
    plain = monitor(small_prices, small_config)
    config = small_config.replace(alerts={"rules": [r.model_dump() for r in _rules(plain.features)]})
    return dataclasses.replace(plain, config=config)
