"""Drawdown events on hand-built price paths (expected values worked out by hand in comments)."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from riskshape.errors import ConfigError, DataError
from riskshape.research.events import (
    drawdown_events,
    equal_weight_wealth,
    events_from_periods,
    portfolio_drawdown_events,
)

DAYS = pd.bdate_range("2030-01-01", periods=9)


def _prices(path: list[float]) -> pd.DataFrame:
    # two assets on the same path: the equal-weight wealth is the path over its first value
    return pd.DataFrame({"A": path, "B": path}, index=DAYS[: len(path)])


def test_one_drawdown_by_hand() -> None:
    # peak 120 on day 2, trough 90 on day 4 (depth 1 - 90/120 = 0.25), back to >= 120 on day 6;
    # the later dip 121 -> 115 is 5 % deep and not an event
    events = portfolio_drawdown_events(_prices([100, 110, 120, 100, 90, 105, 121, 115, 118]), min_depth=0.2)
    assert len(events) == 1
    row = events.table.iloc[0]
    assert (row["start"], row["trough"], row["recovery"]) == (DAYS[2], DAYS[4], DAYS[6])
    assert row["breach"] == DAYS[4]  # 90 <= 0.8 * 120 = 96; 100 is not
    assert row["depth"] == pytest.approx(0.25)
    shallower = portfolio_drawdown_events(_prices([100, 110, 120, 100, 90, 105, 121, 115, 118]), min_depth=0.1)
    assert shallower.table["breach"].iloc[0] == DAYS[3]  # 100 <= 0.9 * 120 = 108


def test_unrecovered_drawdown_has_no_recovery_date() -> None:
    events = portfolio_drawdown_events(_prices([100, 90, 80, 85]), min_depth=0.15)
    assert events.table["start"].iloc[0] == DAYS[0]
    assert pd.isna(events.table["recovery"].iloc[0])
    assert events.table["depth"].iloc[0] == pytest.approx(0.2)


def test_equal_weight_wealth_rebalances_daily() -> None:
    # day 1: +10 % and -10 % -> 0; day 2: +20 % and 0 % (B missing -> the mean of what is there: 20 %)
    prices = pd.DataFrame({"A": [100.0, 110.0, 132.0], "B": [50.0, 45.0, np.nan]}, index=DAYS[:3])
    np.testing.assert_allclose(equal_weight_wealth(prices).to_numpy(), [1.0, 1.0, 1.2])


def test_max_duration_separates_a_slow_decline_from_a_later_crash() -> None:
    # slow 12 % decline over 40 days, flat, then a 30 % crash in 5 days, all below the first peak
    path = np.concatenate([np.linspace(100, 88, 41), np.full(20, 88.0), np.linspace(88, 61.6, 6)[1:]])
    wealth = pd.Series(path, index=pd.bdate_range("2030-01-01", periods=len(path)))
    merged = drawdown_events(wealth, 0.1)
    assert len(merged) == 1 and merged.table["start"].iloc[0] == wealth.index[0]
    split = drawdown_events(wealth, 0.1, max_duration=10)
    assert len(split) == 1  # the slow decline never falls 10 % within 10 days
    assert split.table["start"].iloc[0] == wealth.index[60]  # the last day at 88 before the crash
    assert split.table["depth"].iloc[0] == pytest.approx(0.3)


def test_bad_inputs_raise_named_errors() -> None:
    wealth = pd.Series([1.0, 0.9], index=DAYS[:2])
    with pytest.raises(ConfigError, match="min_depth"):
        drawdown_events(wealth, 1.5)
    with pytest.raises(DataError, match="positive and finite"):
        drawdown_events(pd.Series([1.0, -1.0], index=DAYS[:2]), 0.1)


def test_events_from_known_periods() -> None:
    wealth = pd.Series([1.0, 1.1, 1.0, 0.8, 0.9, 1.2], index=DAYS[:6])
    events = events_from_periods(pd.DataFrame({"start": [DAYS[1]], "end": [DAYS[4]]}), wealth)
    row = events.table.iloc[0]
    assert (row["start"], row["trough"], row["recovery"]) == (DAYS[1], DAYS[3], DAYS[5])
    assert row["depth"] == pytest.approx(1 - 0.8 / 1.1)
    with pytest.raises(DataError, match="periods row 0"):
        events_from_periods(pd.DataFrame({"start": [DAYS[4]], "end": [DAYS[1]]}), wealth)
