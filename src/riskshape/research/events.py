"""Stress events from the data: drawdowns of the equal-weight portfolio beyond a depth.

The portfolio is equal weight, rebalanced daily: its simple return on a day is the mean of the
simple returns of the assets that have one that day (a day where none has one counts as 0).
Its wealth starts at 1 on the first date. A drawdown episode runs from a running peak (the
``start``, the last date at the peak) until wealth is back at or above that peak (the
``recovery`` date, NaT if it never is within the data). Its ``depth`` is ``1 - trough / peak``;
the episode is an event when ``depth >= min_depth``. ``breach`` is the first date at which the
drawdown reached ``min_depth``: only from then on is it known to be an event.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from riskshape.compute.returns import to_returns
from riskshape.errors import ConfigError, DataError
from riskshape.types import FloatArray, PriceFrame

__all__ = [
    "DrawdownEvents",
    "equal_weight_wealth",
    "drawdown_events",
    "portfolio_drawdown_events",
    "events_from_periods",
    "EVENT_COLUMNS",
]

EVENT_COLUMNS: tuple[str, ...] = ("start", "breach", "trough", "recovery", "depth")


@dataclass(frozen=True)
class DrawdownEvents:
    """Drawdown events of a wealth path.

    Attributes
    ----------
    table : pandas.DataFrame
        One row per event, columns :data:`EVENT_COLUMNS` (dates; ``depth`` a fraction in (0, 1)).
    wealth : pandas.Series
        The wealth path the events come from; its index is the trading calendar.
    min_depth : float
        The depth an episode needed to count.
    """

    table: pd.DataFrame
    wealth: pd.Series
    min_depth: float

    @property
    def calendar(self) -> pd.DatetimeIndex:
        """The trading days of the wealth path."""
        return pd.DatetimeIndex(self.wealth.index)

    @property
    def starts(self) -> pd.DatetimeIndex:
        """Start (peak) dates of the events."""
        return pd.DatetimeIndex(self.table["start"])

    def __len__(self) -> int:
        return len(self.table)


def equal_weight_wealth(prices: PriceFrame) -> pd.Series:
    """Wealth of the daily rebalanced equal-weight portfolio, 1 on the first date.

    Parameters
    ----------
    prices : pandas.DataFrame
        Wide validated prices, NaN = missing.

    Returns
    -------
    pandas.Series
        Named ``wealth``, same index as ``prices``.

    Examples
    --------
    >>> import pandas as pd
    >>> p = pd.DataFrame({"A": [1.0, 1.1], "B": [1.0, 0.9]}, index=pd.to_datetime(["2024-01-01", "2024-01-02"]))
    >>> equal_weight_wealth(p).tolist()
    [1.0, 1.0]
    """
    simple = to_returns(prices, "simple")
    daily = simple.mean(axis=1, skipna=True).fillna(0.0).to_numpy()
    wealth = np.concatenate([[1.0], np.cumprod(1.0 + daily)])
    return pd.Series(wealth, index=prices.index, name="wealth")


def drawdown_events(wealth: pd.Series, min_depth: float, max_duration: int | None = None) -> DrawdownEvents:
    """Drawdown events of a wealth path at least ``min_depth`` deep.

    Parameters
    ----------
    wealth : pandas.Series
        Positive values on a sorted DatetimeIndex.
    min_depth : float
        Fraction in (0, 1), e.g. 0.1 for a 10 % peak-to-trough fall.
    max_duration : int, optional
        ``None`` (default): the classical drawdown from the running peak (all history). An
        integer ``M``: the peak is the highest wealth of the ``M`` trading days up to the trough,
        so a slow old decline does not merge with a later crash into one event.

    Returns
    -------
    DrawdownEvents

    Raises
    ------
    ConfigError
        If ``min_depth`` is outside (0, 1) or ``max_duration`` is below 1.
    DataError
        If ``wealth`` holds a non-positive or missing value.

    Notes
    -----
    Days where the drawdown from the (running or trailing) peak is at least ``min_depth`` form
    runs; each run gives its deepest day as ``trough``, the last day at the highest wealth
    before it (within ``max_duration`` days) as ``start``, the first day between them at least
    ``min_depth`` below the start as ``breach``, and the first day after the trough back at the
    start's wealth as ``recovery``. Events whose start falls before the previous event's trough
    are merged into one (earliest start, lowest trough).

    Examples
    --------
    >>> import pandas as pd
    >>> w = pd.Series([1.0, 1.2, 0.9, 1.3, 1.25], index=pd.bdate_range("2024-01-01", periods=5))
    >>> ev = drawdown_events(w, 0.2)
    >>> ev.table[["start", "trough", "recovery"]].iloc[0].dt.day.tolist(), round(float(ev.table["depth"].iloc[0]), 2)
    ([2, 3, 4], 0.25)
    """
    if not 0.0 < min_depth < 1.0:
        raise ConfigError(f"min_depth must be a fraction in (0, 1), e.g. 0.1 for 10 %; got {min_depth!r}")
    if max_duration is not None and max_duration < 1:
        raise ConfigError(f"max_duration must be a number of trading days >= 1 (or None), got {max_duration!r}")
    values = wealth.to_numpy(dtype=float)
    good = np.isfinite(values) & (values > 0)
    if len(values) == 0 or not good.all():
        where = f" at {wealth.index[~good][0]!s} (value {values[~good][0]!r})" if len(values) else " (empty)"
        raise DataError(f"drawdown_events: wealth must be positive and finite{where}; check the prices")
    dates = pd.DatetimeIndex(wealth.index)
    series = pd.Series(values)
    peak = (series.cummax() if max_duration is None else series.rolling(max_duration, min_periods=1).max()).to_numpy()
    deep = 1.0 - values / peak >= min_depth
    edges = np.diff(np.concatenate([[0], deep.astype(np.int8), [0]]))
    spans: list[tuple[int, int]] = []  # (start, trough) positions
    for first, stop in zip(np.flatnonzero(edges == 1), np.flatnonzero(edges == -1)):
        trough = int(first) + int(np.argmin(values[first:stop]))
        lo = 0 if max_duration is None else max(0, trough - max_duration + 1)
        start = _last_argmax(values[lo : trough + 1]) + lo
        if spans and start <= spans[-1][1]:
            prev_start, prev_trough = spans.pop()
            start = prev_start
            trough = prev_trough if values[prev_trough] <= values[trough] else trough
        spans.append((start, trough))
    rows = []
    for start, trough in spans:
        level = values[start]
        breach = start + int(np.argmax(values[start : trough + 1] <= (1.0 - min_depth) * level))
        back = np.flatnonzero(values[trough:] >= level)
        rows.append(
            (
                dates[start],
                dates[breach],
                dates[trough],
                dates[trough + back[0]] if len(back) else pd.NaT,
                float(1.0 - values[trough] / level),
            )
        )
    table = pd.DataFrame(rows, columns=list(EVENT_COLUMNS))
    for col in EVENT_COLUMNS[:-1]:
        table[col] = pd.to_datetime(table[col])
    table["depth"] = table["depth"].astype(float)
    return DrawdownEvents(table=table, wealth=wealth.rename("wealth"), min_depth=float(min_depth))


def _last_argmax(values: FloatArray) -> int:
    """Position of the last occurrence of the maximum."""
    return len(values) - 1 - int(np.argmax(values[::-1]))


def portfolio_drawdown_events(
    prices: PriceFrame, min_depth: float = 0.1, max_duration: int | None = None
) -> DrawdownEvents:
    """Drawdown events of the equal-weight portfolio of a price table.

    Parameters
    ----------
    prices : pandas.DataFrame
        Wide validated prices.
    min_depth : float
        Fraction in (0, 1).
    max_duration : int, optional
        See :func:`drawdown_events`.

    Returns
    -------
    DrawdownEvents
    """
    return drawdown_events(equal_weight_wealth(prices), min_depth, max_duration)


def events_from_periods(periods: pd.DataFrame, wealth: pd.Series) -> DrawdownEvents:
    """Known episodes (e.g. a scenario's stress regime) as events on a wealth path.

    Parameters
    ----------
    periods : pandas.DataFrame
        Columns ``start`` and ``end`` (dates on ``wealth``'s index), one row per episode.
    wealth : pandas.Series
        The wealth path (its index is the calendar).

    Returns
    -------
    DrawdownEvents
        ``start`` and ``breach`` are the episode's start; ``trough`` is its lowest wealth between
        ``start`` and ``end``, ``depth`` the fall to it from the start, ``recovery`` the first day
        after the trough back at the start's wealth; ``min_depth`` is NaN.

    Raises
    ------
    DataError
        If a start or end is not a date of ``wealth``, or an end comes before its start.
    """
    dates = pd.DatetimeIndex(wealth.index)
    values = wealth.to_numpy(dtype=float)
    rows = []
    for i, (start, end) in enumerate(zip(pd.to_datetime(periods["start"]), pd.to_datetime(periods["end"]))):
        first, last = dates.get_indexer([start, end])
        if first < 0 or last < 0 or last < first:
            raise DataError(
                f"periods row {i}: start {start.date()} and end {end.date()} must be dates of the wealth "
                f"path ({dates[0].date()} .. {dates[-1].date()}) with start <= end"
            )
        trough = first + int(np.argmin(values[first : last + 1]))
        back = np.flatnonzero(values[trough:] >= values[first])
        rows.append(
            (
                dates[first],
                dates[first],
                dates[trough],
                dates[trough + back[0]] if len(back) else pd.NaT,
                float(1.0 - values[trough] / values[first]),
            )
        )
    table = pd.DataFrame(rows, columns=list(EVENT_COLUMNS))
    for col in EVENT_COLUMNS[:-1]:
        table[col] = pd.to_datetime(table[col])
    return DrawdownEvents(table=table, wealth=wealth.rename("wealth"), min_depth=float("nan"))
