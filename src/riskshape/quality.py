"""Data-quality findings a desk expects to hear about, found before any window is computed.

Three kinds, each naming the asset and the date:

* ``constant``: an asset whose price never changes in the table (zero variance: it is left out of
  every window it is in);
* ``all_left_out``: windows in which every asset is left out (too few prices, or none moving), which
  therefore have no diagram;
* ``large_move``: a one-day move beyond ``[checks] max_day_ratio`` (a price more than that many times,
  or less than its inverse times, the asset's previous price): a likely bad print, which would raise
  or hide alerts.

``[checks] quality`` makes them warnings (the default: reported by ``riskshape run``, the run
folder's manifest and the ingest reply) or refusals (:class:`~riskshape.errors.DataError`, before
any work, nothing written).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Literal

import numpy as np
import pandas as pd

from riskshape.compute.windows import window_end_positions
from riskshape.config import Config
from riskshape.errors import DataError

__all__ = ["QualityFinding", "find_quality_issues", "check_quality"]

FindingKind = Literal["constant", "all_left_out", "large_move"]


@dataclass(frozen=True)
class QualityFinding:
    """One data-quality finding.

    Attributes
    ----------
    kind : {"constant", "all_left_out", "large_move"}
    asset : str or None
        The asset (None for ``all_left_out``, which concerns every asset).
    date : str
        ISO date: the first price of a constant asset, the first window end of a run of windows
        with every asset left out, the day of a large move.
    message : str
        One line naming the asset, the date and what to check.
    """

    kind: FindingKind
    asset: str | None
    date: str
    message: str

    def __str__(self) -> str:
        return self.message


def find_quality_issues(
    prices: pd.DataFrame, config: Config, source: str = "prices", *, before: pd.DataFrame | None = None
) -> tuple[QualityFinding, ...]:
    """Every data-quality finding of a validated price table, in the order left out, constant, moves.

    Parameters
    ----------
    prices : ValidPrices
        Wide validated prices (:func:`riskshape.validate_prices`).
    config : Config
        ``window``, ``step``, ``min_coverage`` and ``checks.max_day_ratio`` are used.
    source : str
        Name used in messages.
    before : pandas.DataFrame, optional
        Archived prices of the days just before the table (wide, dates ascending, all before the
        table's first): an ingest passes them so that the first new price of an asset is compared
        with its last archived one. Findings are about the table's own days only.

    Returns
    -------
    tuple of QualityFinding

    Examples
    --------
    >>> from riskshape import validate_prices
    >>> table = pd.DataFrame({"date": pd.bdate_range("2031-01-01", periods=4).astype(str),
    ...                       "QA01": [10.0, 10.0, 10.0, 10.0], "QA02": [5.0, 5.1, 51.0, 5.2],
    ...                       "QA03": [7.0, 7.1, 7.0, 7.2]})
    >>> [f.kind for f in find_quality_issues(validate_prices(table), Config(window=5))]
    ['constant', 'large_move', 'large_move']
    """
    values = prices.to_numpy(dtype=float)
    dates = pd.DatetimeIndex(prices.index)
    names = [str(c) for c in prices.columns]
    found = _windows_all_left_out(values, dates, config, source)
    found += _constant_assets(values, dates, names, source)
    if before is not None and len(before):
        earlier = before.reindex(columns=prices.columns).to_numpy(dtype=float)
        values, dates = np.vstack([earlier, values]), pd.DatetimeIndex(before.index).append(dates)
    moves = _large_moves(values, dates, names, config.checks.max_day_ratio, source)
    first = len(dates) - len(prices)  # rows of ``before`` come first: their own moves were reported then
    return tuple(found + [m for m in moves if m.date >= _day(dates, first)])


def check_quality(
    prices: pd.DataFrame, config: Config, source: str = "prices", *, before: pd.DataFrame | None = None
) -> tuple[QualityFinding, ...]:
    """The findings of :func:`find_quality_issues`, or a refusal when ``[checks] quality = "refuse"``.

    Parameters
    ----------
    prices : ValidPrices
    config : Config
    source : str
        Name used in messages.
    before : pandas.DataFrame, optional
        Archived prices of the days just before the table (see :func:`find_quality_issues`).

    Returns
    -------
    tuple of QualityFinding
        The findings, to report as warnings.

    Raises
    ------
    DataError
        If ``config.checks.quality`` is ``"refuse"`` and there is a finding (the first is named).
    """
    found = find_quality_issues(prices, config, source, before=before)
    if found and config.checks.quality == "refuse":
        more = f" (and {len(found) - 1} more)" if len(found) > 1 else ""
        raise DataError(
            f"{found[0]}{more}; refused because [checks] quality = 'refuse': fix the prices, or set "
            "quality = 'warn' to run with warnings"
        )
    return found


def _day(dates: pd.DatetimeIndex, i: int) -> str:
    return str(dates[i].date())


def _constant_assets(
    values: np.ndarray, dates: pd.DatetimeIndex, names: list[str], source: str
) -> list[QualityFinding]:
    present = ~np.isnan(values)
    counts = present.sum(axis=0)
    with np.errstate(invalid="ignore"):
        top = np.nanmax(np.where(present, values, -np.inf), axis=0)
        bottom = np.nanmin(np.where(present, values, np.inf), axis=0)
    found = []
    for j in np.flatnonzero((counts >= 2) & (top == bottom)):
        first = int(np.flatnonzero(present[:, j])[0])
        found.append(
            QualityFinding(
                "constant",
                names[j],
                _day(dates, first),
                f"{source}: asset '{names[j]}' has the same price ({top[j]:g}) on all {counts[j]} dates from "
                f"{_day(dates, first)}: it is left out of every window (zero variance); check its source",
            )
        )
    return found


def _windows_all_left_out(
    values: np.ndarray, dates: pd.DatetimeIndex, config: Config, source: str
) -> list[QualityFinding]:
    if len(values) < 2:
        return []
    with np.errstate(invalid="ignore", divide="ignore"):
        ratios = values[1:] / values[:-1]  # one-day ratios: zero variance of returns iff constant ratio
    ends = window_end_positions(len(ratios), config.window, config.step)
    if not len(ends):
        return []
    frame = pd.DataFrame(ratios)
    rolling = frame.rolling(config.window, min_periods=1)
    needed = math.ceil(config.min_coverage * config.window - 1e-9)
    counts = rolling.count().to_numpy()[ends]
    spread = (rolling.max() - rolling.min()).to_numpy()[ends]
    admitted = ((counts >= needed) & (spread > 0)).sum(axis=1)
    empty = np.flatnonzero(admitted == 0)
    if not len(empty):
        return []
    first, last = ends[empty[0]] + 1, ends[empty[-1]] + 1  # returns row r ends at price row r + 1
    return [
        QualityFinding(
            "all_left_out",
            None,
            _day(dates, first),
            f"{source}: {len(empty)} of {len(ends)} windows (ending {_day(dates, first)} to {_day(dates, last)}) "
            "have every asset left out (too few prices, or no price moving) and get no diagram; check the prices",
        )
    ]


def _large_moves(
    values: np.ndarray, dates: pd.DatetimeIndex, names: list[str], bound: float, source: str
) -> list[QualityFinding]:
    previous = pd.DataFrame(values).ffill().shift(1).to_numpy()
    with np.errstate(invalid="ignore", divide="ignore", over="ignore"):
        ratio = values / previous
        beyond = (ratio > bound) | (ratio < 1.0 / bound)
    found = []
    for i, j in zip(*np.nonzero(beyond)):
        before = int(np.flatnonzero(~np.isnan(values[:i, j]))[-1])
        found.append(
            QualityFinding(
                "large_move",
                names[j],
                _day(dates, int(i)),
                f"{source}: asset '{names[j]}' on {_day(dates, int(i))}: price {values[i, j]:g} after "
                f"{values[before, j]:g} on {_day(dates, before)}, a one-day move beyond the bound of x{bound:g} "
                "([checks] max_day_ratio); a likely bad print, check it",
            )
        )
    return found
