"""Trailing thresholds checked against numpy, the reference implementation of each statistic.

* quantile rules: ``numpy.quantile(history, q, method="linear")`` -- numpy's default method,
  Hyndman & Fan (1996) definition 7;
* z-score rules: ``numpy.mean(history) + z * numpy.std(history, ddof=1)`` (sample std, common practice);

where ``history`` is the non-missing values among the ``lookback`` windows before t
(riskshape.alerts.rules module docstring, point 1).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

from riskshape.alerts.thresholds import clean_values, trailing_levels
from riskshape.config import RuleConfig


@pytest.fixture
def rng() -> np.random.Generator:
    return np.random.default_rng(7302)


def _noisy_series(rng: np.random.Generator, n: int) -> pd.Series:
    values = rng.lognormal(mean=0.0, sigma=0.7, size=n) + 10.0
    values[rng.random(n) < 0.08] = np.nan  # missing windows
    values[0] = np.nan  # like the first window's distance to the previous one
    return pd.Series(values)


def _history(values: np.ndarray, t: int, lookback: int) -> np.ndarray:
    past = values[max(0, t - lookback) : t]
    return past[~np.isnan(past)]


@pytest.mark.parametrize("lookback", [2, 7, 50])
@pytest.mark.parametrize("q", [0.05, 0.5, 0.95])
def test_quantile_levels_match_numpy_linear(rng: np.random.Generator, lookback: int, q: float) -> None:
    series = _noisy_series(rng, 200)
    clear_q = q / 2
    rule = RuleConfig(
        name="r", summary="x", kind="quantile", threshold=q, clear=clear_q, lookback=lookback, min_history=0
    )
    levels = trailing_levels(series, rule)
    values = series.to_numpy()
    for t in range(len(values)):
        hist = _history(values, t, lookback)
        assert levels.history[t] == len(hist)
        if len(hist) == 0:
            assert np.isnan(levels.threshold[t]) and np.isnan(levels.clear[t])
            continue
        # reference: numpy.quantile, method="linear" (Hyndman & Fan type 7)
        assert levels.threshold[t] == pytest.approx(np.quantile(hist, q, method="linear"), rel=1e-12)
        assert levels.clear[t] == pytest.approx(np.quantile(hist, clear_q, method="linear"), rel=1e-12)


@pytest.mark.parametrize("lookback", [2, 9, 60])
def test_zscore_levels_match_numpy_mean_and_sample_std(rng: np.random.Generator, lookback: int) -> None:
    series = _noisy_series(rng, 200)
    rule = RuleConfig(name="r", summary="x", kind="zscore", threshold=3.0, clear=-0.5, lookback=lookback, min_history=0)
    levels = trailing_levels(series, rule)
    values = series.to_numpy()
    for t in range(len(values)):
        hist = _history(values, t, lookback)
        assert levels.history[t] == len(hist)
        if len(hist) < 2:
            assert np.isnan(levels.threshold[t]) and np.isnan(levels.clear[t])
            continue
        # reference: numpy mean and std with ddof=1
        mean, std = np.mean(hist), np.std(hist, ddof=1)
        assert levels.threshold[t] == pytest.approx(mean + 3.0 * std, rel=1e-9)
        assert levels.clear[t] == pytest.approx(mean - 0.5 * std, rel=1e-9)


@pytest.mark.parametrize("since", [3, 150, 199])
def test_zscore_levels_from_a_position_on_equal_those_of_the_whole_series(rng: np.random.Generator, since: int) -> None:
    # the daily loop judges only its new windows: levels from `since` on must be the whole series' bit for
    # bit (each position's history is summed on its own); reference: numpy mean and std with ddof=1
    series = _noisy_series(rng, 200)
    rule = RuleConfig(name="r", summary="x", kind="zscore", threshold=2.0, clear=0.5, lookback=60, min_history=0)
    whole, part = trailing_levels(series, rule), trailing_levels(series, rule, since=since)
    np.testing.assert_array_equal(part.threshold[since:], whole.threshold[since:])
    np.testing.assert_array_equal(part.clear[since:], whole.clear[since:])
    assert np.isnan(part.threshold[:since]).all()
    hist = _history(series.to_numpy(), since, 60)
    assert part.threshold[since] == pytest.approx(np.mean(hist) + 2.0 * np.std(hist, ddof=1), rel=1e-9)


def test_level_kind_levels_are_the_configured_numbers(rng: np.random.Generator) -> None:
    series = _noisy_series(rng, 30)
    levels = trailing_levels(series, RuleConfig(name="r", summary="x", kind="level", threshold=2.5, clear=1.0))
    assert np.all(levels.threshold == 2.5) and np.all(levels.clear == 1.0)


def test_constant_history_puts_zscore_levels_at_the_mean() -> None:
    # std of a constant history is 0 (numpy.std([4, 4, 4], ddof=1) == 0), so T = C = mean = 4.
    series = pd.Series([4.0, 4.0, 4.0, 9.0])
    levels = trailing_levels(series, RuleConfig(name="r", summary="x", kind="zscore", threshold=3.0, clear=1.0))
    assert levels.threshold[3] == 4.0 and levels.clear[3] == 4.0


def test_clean_values_turns_infinities_into_missing() -> None:
    cleaned = clean_values(pd.Series([1, np.inf, -np.inf, np.nan]))
    assert cleaned.dtype == np.float64
    assert cleaned.isna().tolist() == [False, True, True, True]
