"""The threshold and clear level each rule has in force at each window, in the summary's units.

Every statistic here is trailing and excludes the window it is used at: the history of window
``t`` is the ``lookback`` windows *before* ``t`` (positions ``t - lookback .. t - 1``, fewer at
the start of the series), missing values (NaN or infinite) left out. A spike is thus compared
with the past, never with itself.

* ``level``: threshold and clear are the configured numbers, the same at every window.
* ``quantile``: the ``threshold``-quantile (and the ``clear``-quantile) of the history, with
  linear interpolation between order statistics -- numpy's default ``method="linear"``, which
  is definition 7 of Hyndman & Fan (1996). Needs at least one past value.
* ``zscore``: ``mean + z * std`` of the history with the sample standard deviation
  (``ddof=1``, common practice), for ``z`` = ``threshold`` (and ``clear``). Needs at least two
  past values. A constant history (std 0) puts both levels at its mean.

The levels at ``t`` are computed from the values of ``t``'s own history alone, laid out the same
way at every window (``lookback`` slots, missing ones left out), so they never depend on anything
after ``t`` -- nor on anything before its history: a series that starts ``lookback`` windows before
``t`` gives the same levels at ``t``, bit for bit, as the whole series (the daily loop evaluates a
new window from the archived tail of the series, :mod:`riskshape.alerts.carry`). The quantile is
pandas' rolling quantile (an order statistic of the window's values, whatever came before); the
mean and standard deviation are summed over the window's own slots (pandas' rolling mean and
variance update running sums, whose last bits depend on where the series started).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from riskshape.config import RuleConfig
from riskshape.types import FloatArray, IntArray

__all__ = ["RuleLevels", "clean_values", "trailing_levels", "MIN_PAST_VALUES"]

#: Fewest past values each kind needs before its threshold is defined.
MIN_PAST_VALUES = {"level": 0, "quantile": 1, "zscore": 2}


@dataclass(frozen=True)
class RuleLevels:
    """Per-window levels of one rule over one series (arrays aligned with the series).

    Attributes
    ----------
    history : numpy.ndarray of int
        Non-missing values among the ``lookback`` windows before each window.
    threshold : numpy.ndarray of float
        Threshold in force at each window, in the summary's units (NaN where undefined).
    clear : numpy.ndarray of float
        Clear level in force at each window, in the summary's units (NaN where undefined).
    """

    history: IntArray
    threshold: FloatArray
    clear: FloatArray


def clean_values(series: pd.Series) -> pd.Series:
    """The series as float64 with infinite values turned into NaN (missing).

    Parameters
    ----------
    series : pandas.Series
        A numeric summary series.

    Returns
    -------
    pandas.Series
        Same index, float64, NaN wherever the value was NaN or infinite.
    """
    values = series.to_numpy(dtype=np.float64, copy=True)
    values[~np.isfinite(values)] = np.nan
    return pd.Series(values, index=series.index, name=series.name)


def trailing_levels(values: pd.Series, rule: RuleConfig, since: int = 0) -> RuleLevels:
    """Threshold and clear level of ``rule`` at every window of ``values``.

    Parameters
    ----------
    values : pandas.Series
        The summary series as returned by :func:`clean_values` (float64, NaN = missing).
    rule : RuleConfig
        The rule; its ``clear`` defaults to its ``threshold``.
    since : int
        The z-score levels are computed from this position on (NaN before it; the daily loop judges
        only its new windows); each position's levels depend on its own history only, so they are
        the same as with ``since = 0``.

    Returns
    -------
    RuleLevels

    Examples
    --------
    >>> import pandas as pd
    >>> rule = RuleConfig(name="r", summary="x", kind="quantile", threshold=0.5, lookback=3, min_history=0)
    >>> trailing_levels(pd.Series([1.0, 3.0, 2.0, 10.0]), rule).threshold.tolist()
    [nan, 1.0, 2.0, 2.0]
    """
    n = len(values)
    clear_at = rule.threshold if rule.clear is None else rule.clear
    past = values.shift(1)
    history = past.rolling(rule.lookback, min_periods=0).count().to_numpy(dtype=np.int64)
    if rule.kind == "level":
        threshold = np.full(n, rule.threshold, dtype=np.float64)
        clear = np.full(n, clear_at, dtype=np.float64)
    elif rule.kind == "quantile":
        window = past.rolling(rule.lookback, min_periods=MIN_PAST_VALUES["quantile"])
        threshold = window.quantile(rule.threshold, interpolation="linear").to_numpy(dtype=np.float64)
        clear = window.quantile(clear_at, interpolation="linear").to_numpy(dtype=np.float64)
    else:  # zscore
        mean, std = _trailing_mean_std(values.to_numpy(dtype=np.float64), rule.lookback, since)
        threshold = mean + rule.threshold * std
        clear = mean + clear_at * std
    return RuleLevels(history=history, threshold=threshold, clear=clear)


def _trailing_mean_std(x: FloatArray, lookback: int, since: int = 0) -> tuple[FloatArray, FloatArray]:
    """Mean and sample std (``ddof=1``) of the ``lookback`` values before each position, missing left out.

    Each position's history is one row of ``lookback`` slots (NaN before the series starts), summed
    on its own: the result at ``t`` depends on the values of ``t``'s history and nothing else.
    NaN where fewer than :data:`MIN_PAST_VALUES` ``["zscore"]`` values are present, and before ``since``
    (positions not computed).
    """
    n = len(x)
    since = min(max(since, 0), n)
    if n == 0:
        return np.empty(0), np.empty(0)
    padded = np.concatenate([np.full(lookback, np.nan), x])
    rows = np.ascontiguousarray(np.lib.stride_tricks.sliding_window_view(padded, lookback)[since:n])
    present = ~np.isnan(rows)
    count = present.sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        mean = np.where(present, rows, 0.0).sum(axis=1) / count
        deviations = np.where(present, rows - mean[:, None], 0.0)
        std = np.sqrt((deviations * deviations).sum(axis=1) / (count - 1))
    short = count < MIN_PAST_VALUES["zscore"]
    mean[short] = np.nan
    std[short] = np.nan
    if since:
        skipped = np.full(since, np.nan)
        return np.concatenate([skipped, mean]), np.concatenate([skipped, std])
    return mean, std
