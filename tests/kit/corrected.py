"""A portfolio archived with alerts, and corrections of its prices: the bed of the point-in-time tests.

The rules' thresholds come from the data itself (a quantile of the series), so that alerts fire
whatever the seed; nothing here is a hard-coded result.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from riskshape import Config, archive_run, monitor
from riskshape.config import RuleConfig
from riskshape.daily import Ingestor
from riskshape.store import AlertRecord, Store
from tests.kit.archive import walk_prices
from tests.kit.assets import codes

PORTFOLIO = "Fund Lantern"
WINDOW = 12


def corrected_prices(seed: int = 41) -> pd.DataFrame:
    """Five fictional assets over 60 days (a seeded random walk)."""
    return walk_prices(np.random.default_rng(seed), n_days=60, assets=codes(5))


def rules_config(prices: pd.DataFrame) -> Config:
    """Short windows; a level rule on the mean correlation at its 0.7 quantile over ``prices``."""
    plain = Config(window=WINDOW, step=1, compute={"executor": "serial"})
    features = monitor(prices, plain).features
    rule = RuleConfig(
        name="corr_level",
        summary="mean_correlation",
        kind="level",
        threshold=float(features["mean_correlation"].quantile(0.7)),
        min_history=0,
        cooldown=2,
        severity="warning",
    )
    return plain.replace(alerts={"rules": [rule.model_dump()]})


def archive_portfolio(store: Store, prices: pd.DataFrame, config: Config) -> tuple[AlertRecord, ...]:
    """Archive a run of ``prices`` for :data:`PORTFOLIO`; the alerts it raised."""
    store.ensure_portfolio(PORTFOLIO)
    return archive_run(store, PORTFOLIO, monitor(prices, config), config).alerts.added


def correct_day(store: Store, prices: pd.DataFrame, config: Config, day: pd.Timestamp, factors: object) -> pd.DataFrame:
    """Correct every price of ``day`` (multiplied by ``factors``) through the ingest path; the corrected history."""
    corrected = prices.copy()
    corrected.loc[day, :] *= np.asarray(factors, dtype=float)
    Ingestor(config).ingest(store, PORTFOLIO, corrected.loc[[day]], correction=True, source="vendor fix")  # type: ignore[arg-type]
    return corrected
