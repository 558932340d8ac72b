"""The data-quality check of an ingest: the new prices, and each asset's first one against its last archived.

Every ingest route runs it before anything is archived: ``POST /v1/portfolios/{name}/prices``,
``POST /v1/prices`` and ``riskshape ingest`` (one portfolio or many; for many, each portfolio on
its own, see :func:`riskshape.daily.ingest_many`). The findings are
:func:`riskshape.check_quality`'s: warnings by default, a refusal (:class:`~riskshape.errors.DataError`,
nothing written) when ``[checks] quality = "refuse"``.
"""

from __future__ import annotations

from datetime import timedelta

import pandas as pd

from riskshape.config import Config
from riskshape.prices import ValidPrices
from riskshape.quality import QualityFinding, check_quality
from riskshape.store import Store
from riskshape.store.presence import recent_dates

__all__ = ["BEFORE_DAYS", "archived_before", "check_ingest_quality"]

BEFORE_DAYS = 10
"""Archived dates read before the new prices: enough for an asset missing a few days to be compared
with its last price (a longer gap is compared with nothing, and a move across it is not flagged)."""


def archived_before(store: Store, portfolio: str, prices: pd.DataFrame, days: int = BEFORE_DAYS) -> pd.DataFrame | None:
    """The portfolio's archived prices on its last ``days`` archived dates before the table's first date.

    Parameters
    ----------
    store : Store
        The archive.
    portfolio : str
        An existing portfolio (NotFoundError otherwise).
    prices : pandas.DataFrame
        The new prices (wide, DatetimeIndex ascending).
    days : int
        How many archived dates at most (a bounded read, however long the history).

    Returns
    -------
    pandas.DataFrame or None
        Wide prices, dates ascending; None when nothing is archived before the table.
    """
    first = pd.Timestamp(prices.index[0]).date()
    earlier = recent_dates(store.engine, portfolio, first - timedelta(days=1), days)
    if not earlier:
        return None
    return store.read_prices(portfolio, start=earlier[0], end=earlier[-1])


def check_ingest_quality(
    store: Store, portfolio: str, prices: ValidPrices, config: Config, source: str
) -> tuple[QualityFinding, ...]:
    """The data-quality findings of an ingest's prices, compared with the portfolio's archived ones.

    Parameters
    ----------
    store : Store
        The archive (only read).
    portfolio : str
        An existing portfolio (NotFoundError otherwise).
    prices : ValidPrices
        The ingest's validated prices.
    config : Config
        ``window``, ``step``, ``min_coverage`` and ``[checks]`` are used.
    source : str
        Name used in messages.

    Returns
    -------
    tuple of QualityFinding
        To report as warnings, each naming its asset and date.

    Raises
    ------
    DataError
        If ``[checks] quality = "refuse"`` and there is a finding (the first is named).
    """
    return check_quality(prices, config, source, before=archived_before(store, portfolio, prices))
