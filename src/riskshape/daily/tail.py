"""The bounded reads a new day needs: the tail of the price history and the previous window's diagrams.

A window ending at returns row ``e`` reads returns rows ``e - window + 1 .. e``, and with running
sums (:mod:`riskshape.compute.moments`) the rows from the rebuild point before it
(:func:`riskshape.compute.batch.first_row_needed`). A return at row ``r`` is made of price rows
``r`` and ``r + 1`` (:func:`riskshape.compute.returns.to_returns`: nothing reaches further back,
a missing price makes a missing return). So the new windows of a day need only the price rows
from ``first_row_needed`` of the first new window on -- the *tail* -- plus the diagrams of the
window before it, for the distances to the previous window. :func:`compute_batch` given the
tail's returns and its absolute ``row_offset`` computes exactly the windows a full run computes
(same rebuild points, same floating-point order).

:func:`tail_span` is the arithmetic, :func:`read_tail` the bounded read (one indexed query for the
tail's dates, one for its prices, one per homology dimension for the previous diagrams), and
:func:`tail_windows` the computation.

The rule states (what the alert rules carry across windows, and the trailing summaries the
quantile and z-score rules read) are :mod:`riskshape.daily.tail_run`'s: with them the ingest
archives a day from the tail alone (:func:`riskshape.daily.tail_run.archive_tail_run`).
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import date

import numpy as np
import pandas as pd

from riskshape.compute import window_end_positions
from riskshape.compute.batch import WindowResult, compute_batch, first_row_needed
from riskshape.compute.monitor import settings_of
from riskshape.compute.returns import to_returns
from riskshape.config import Config
from riskshape.store import Store
from riskshape.store.presence import recent_dates
from riskshape.store.tails import DayTail
from riskshape.types import Diagrams, Positions

__all__ = ["TailSpan", "Tail", "tail_span", "read_tail", "tail_from_kept", "tail_windows"]


@dataclass(frozen=True)
class TailSpan:
    """Which price rows the new windows need.

    Attributes
    ----------
    first_row : int
        Absolute position (0 = the portfolio's first counted price date) of the tail's first price row.
    n_rows : int
        Price rows in the tail (from ``first_row`` to the last counted date).
    new_ends : numpy.ndarray
        Absolute returns rows at which the new windows end.
    windows_before : int
        Windows that end before the new ones (already archived).
    """

    first_row: int
    n_rows: int
    new_ends: Positions
    windows_before: int


@dataclass(frozen=True)
class Tail:
    """The bounded read: the tail's prices and the diagrams of the window before the new ones."""

    span: TailSpan
    prices: pd.DataFrame
    previous: Diagrams | None


def tail_span(n_prices_before: int, n_prices_now: int, config: Config) -> TailSpan:
    """The price rows the windows completed by going from ``n_prices_before`` to ``n_prices_now`` need.

    Parameters
    ----------
    n_prices_before : int
        Counted price dates the archived windows were computed from.
    n_prices_now : int
        Counted price dates now (the new days included).
    config : Config
        The portfolio's configuration (``window``, ``step``, the running sums).

    Returns
    -------
    TailSpan
        ``new_ends`` is empty when the new days complete no window.

    Examples
    --------
    >>> from riskshape import Config
    >>> span = tail_span(300, 301, Config(window=60, step=1))
    >>> span.n_rows < 301, span.new_ends.tolist(), span.windows_before
    (True, [299], 240)
    """
    before = window_end_positions(max(n_prices_before - 1, 0), config.window, config.step)
    now = window_end_positions(max(n_prices_now - 1, 0), config.window, config.step)
    new_ends = now[len(before) :]
    if not len(new_ends):
        return TailSpan(first_row=n_prices_now, n_rows=0, new_ends=new_ends, windows_before=len(before))
    first = first_row_needed(int(new_ends[0]), settings_of(config))
    if len(before):  # the previous window's end date (price row end + 1) labels its archived diagrams
        first = min(first, int(before[-1]) + 1)
    return TailSpan(first_row=first, n_rows=n_prices_now - first, new_ends=new_ends, windows_before=len(before))


def read_tail(store: Store, portfolio: str, assets: list[str], span: TailSpan, through: date, config: Config) -> Tail:
    """Read the tail's prices (through ``through``) and the diagrams of the window before the new ones.

    Parameters
    ----------
    store : Store
        The archive.
    portfolio : str
        The portfolio.
    assets : list of str
        Its assets, in column order.
    span : TailSpan
        From :func:`tail_span`.
    through : datetime.date
        The last counted date.
    config : Config
        The portfolio's configuration (its hash keys the archived diagrams).

    Returns
    -------
    Tail
        ``previous`` is None when no window comes before the new ones.
    """
    dates = recent_dates(store.engine, portfolio, through, span.n_rows)
    prices = (
        store.read_prices(portfolio, start=dates[0], end=dates[-1], assets=assets)
        if dates
        else pd.DataFrame(columns=assets, dtype=float)
    )
    return Tail(span=span, prices=prices, previous=_previous(store, portfolio, prices, span, config))


def _previous(store: Store, portfolio: str, prices: pd.DataFrame, span: TailSpan, config: Config) -> Diagrams | None:
    """The archived diagrams of the window before the new ones (None when there is none)."""
    if not (span.windows_before and len(span.new_ends)):
        return None
    previous_end = _previous_end(prices, span, config)
    return tuple(
        # archived float32 bars: the float64 values of the run that computed them, exactly
        store.read_diagram(portfolio, previous_end, k, config.hash()).bars.astype(np.float64)
        for k in range(config.maxdim + 1)
    )


def _previous_end(prices: pd.DataFrame, span: TailSpan, config: Config) -> pd.Timestamp:
    """End date of the window before the new ones (the price row that labels it)."""
    return prices.index[int(span.new_ends[0]) - config.step + 1 - span.first_row]


def tail_from_kept(
    store: Store,
    portfolio: str,
    assets: list[str],
    span: TailSpan,
    kept: DayTail,
    new_days: tuple[date, date],
    config: Config,
) -> Tail | None:
    """The tail :func:`read_tail` reads, from the kept day tail and the new counted days' prices.

    Parameters
    ----------
    store : Store
        The archive.
    portfolio : str
        The portfolio.
    assets : list of str
        Its assets, in column order.
    span : TailSpan
        From :func:`tail_span` (its rows before the new days must lie in ``kept``).
    kept : DayTail
        The day tail saved after the last counted day (:func:`riskshape.daily.tail_run.kept_tail`).
    new_days : tuple of datetime.date
        The first and last new counted day.
    config : Config
        The portfolio's configuration.

    Returns
    -------
    Tail or None
        None when the kept tail does not reach back to ``span.first_row`` or names other assets
        (the caller reads the archive).
    """
    held = kept.prices
    if span.first_row < kept.first_row or list(held.columns) != assets:
        return None
    new = store.read_prices(portfolio, start=new_days[0], end=new_days[1], assets=assets)
    before = held.iloc[span.first_row - kept.first_row :]
    if len(before) + len(new) != span.n_rows:
        return None
    values = np.concatenate([before.to_numpy(), new.to_numpy()])
    prices = pd.DataFrame(values, index=before.index.append(new.index), columns=new.columns)
    previous: Diagrams | None
    if (
        span.windows_before
        and kept.diagram_end is not None
        and len(kept.diagrams) == config.maxdim + 1
        and kept.diagram_end == _previous_end(prices, span, config).date()
    ):
        previous = tuple(bars.astype(np.float64) for bars in kept.diagrams)  # as read_tail converts them
    else:
        previous = _previous(store, portfolio, prices, span, config)
    return Tail(span=span, prices=prices, previous=previous)


def tail_windows(tail: Tail, config: Config) -> tuple[pd.DatetimeIndex, list[WindowResult]]:
    """The new windows, computed from the tail alone (equal to a full run's).

    Parameters
    ----------
    tail : Tail
        From :func:`read_tail`.
    config : Config
        The portfolio's configuration.

    Returns
    -------
    window_ends, windows : pandas.DatetimeIndex, list of WindowResult
        The new windows' end dates and results, oldest first.
    """
    span = tail.span
    if not len(span.new_ends):
        return pd.DatetimeIndex([], name="window_end"), []
    returns = to_returns(tail.prices, config.returns)
    relative = np.asarray(span.new_ends) - span.first_row
    windows = compute_batch(returns.to_numpy(), relative, settings_of(config), tail.previous, row_offset=span.first_row)
    return pd.DatetimeIndex(returns.index[relative], name="window_end"), windows
