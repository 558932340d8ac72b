"""Labels for event studies: whether an event starts within the next ``H`` trading days.

Time is counted in trading days of the events' calendar (``DrawdownEvents.calendar``). See
:mod:`riskshape.research.study` for how the labels are used.
"""

from __future__ import annotations

from typing import cast

import numpy as np
import pandas as pd

from riskshape.errors import ConfigError, DataError
from riskshape.research.events import DrawdownEvents
from riskshape.types import Positions

__all__ = ["event_labels", "positions", "event_positions"]


def positions(index: pd.DatetimeIndex, calendar: pd.DatetimeIndex, what: str) -> Positions:
    """Positions of ``index`` in ``calendar``; DataError naming ``what`` if a date is not in it."""
    pos = calendar.get_indexer(index)
    if (pos < 0).any():
        bad = index[pos < 0][0]
        raise DataError(
            f"{what}: date {bad.date()} is not a trading day of the events' calendar "
            f"({calendar[0].date()} .. {calendar[-1].date()}); build the events from the same prices"
        )
    return cast("Positions", pos)


def event_positions(events: DrawdownEvents) -> tuple[Positions, Positions]:
    """Positions in ``events.calendar`` of each event's start and of its trough (DataError if off it)."""
    cal = events.calendar
    starts = positions(pd.DatetimeIndex(events.table["start"]), cal, "event start")
    troughs = positions(pd.DatetimeIndex(events.table["trough"]), cal, "event trough")
    return starts, troughs


def event_labels(
    index: pd.DatetimeIndex,
    events: DrawdownEvents,
    horizon: int,
    *,
    exclude_in_event: bool = True,
    post_event_days: int = 0,
) -> pd.Series:
    """Label of each window end: 1.0 when an event starts within the next ``horizon`` days.

    Parameters
    ----------
    index : pandas.DatetimeIndex
        Window ends (days of ``events.calendar``).
    events : DrawdownEvents
    horizon : int
        ``H``, trading days (>= 1).
    exclude_in_event : bool
        Leave out (NaN) the window ends from an event's start to its trough.
    post_event_days : int
        With ``exclude_in_event``, also leave out this many trading days after each trough.

    Returns
    -------
    pandas.Series
        1.0, 0.0 or NaN (unknown or left out), indexed like ``index``, named ``label``.

    Examples
    --------
    One event, from its peak on day 2 to its trough on day 4. By hand, with ``H = 2``: days 0
    and 1 precede its start by at most 2 days (1.0); days 2 to 4 lie inside it (left out);
    day 5 is calm and known (0.0); days 6 and 7 look past the end of the data (unknown):

    >>> import pandas as pd
    >>> from riskshape.research.events import drawdown_events
    >>> days = pd.bdate_range("2031-01-06", periods=8)
    >>> wealth = pd.Series([1.0, 1.02, 1.03, 0.95, 0.88, 0.92, 1.05, 1.06], index=days)
    >>> events = drawdown_events(wealth, min_depth=0.1)
    >>> event_labels(days, events, horizon=2).tolist()
    [1.0, 1.0, nan, nan, nan, 0.0, nan, nan]
    >>> event_labels(days, events, horizon=2, exclude_in_event=False).tolist()
    [1.0, 1.0, 0.0, 0.0, 0.0, 0.0, nan, nan]
    """
    if horizon < 1:
        raise ConfigError(f"horizon must be at least 1 trading day, got {horizon}")
    cal = events.calendar
    pos = positions(pd.DatetimeIndex(index), cal, "signal")
    starts, troughs = event_positions(events)
    ahead = starts[None, :] - pos[:, None]
    positive = ((ahead > 0) & (ahead <= horizon)).any(axis=1)
    labels = np.where(positive, 1.0, 0.0)
    labels[~positive & (pos + horizon > len(cal) - 1)] = np.nan
    if exclude_in_event:
        ends = troughs + post_event_days
        inside = ((pos[:, None] >= starts[None, :]) & (pos[:, None] <= ends[None, :])).any(axis=1)
        labels[inside] = np.nan
    return pd.Series(labels, index=index, name="label")
