"""Which price cells are archived at all: a price, an explicit missing price (NULL), or nothing.

The daily loop (:mod:`riskshape.daily.days`) needs the difference a wide table hides: an asset
left out of a day's feed has no cell for that day (the day waits for it), while a price sent as
missing is an archived NULL cell (the asset has answered for that day).
"""

from __future__ import annotations

from datetime import date, datetime

import pandas as pd
import sqlalchemy as sa
from sqlalchemy.engine import Engine

from riskshape.store import catalog
from riskshape.store import schema as t
from riskshape.store.database import read_transaction
from riskshape.store.pricebook import _latest

__all__ = ["read_cells", "recent_dates"]


def read_cells(
    engine: Engine, portfolio: str, after: date | None, *, as_known_at: datetime | None = None
) -> pd.DataFrame:
    """The latest revision of every archived cell dated after ``after`` (every cell when None).

    Parameters
    ----------
    engine : sqlalchemy.engine.Engine
        The archive's engine (``Store.engine``).
    portfolio : str
        An existing portfolio (NotFoundError otherwise).
    after : datetime.date or None
        Only cells dated strictly after this day.
    as_known_at : datetime.datetime, optional
        Only the revisions recorded at or before this moment (timezone-aware): the cells as they
        stood then. Price rows are appended under the archive's write lock, so their ids grow with
        ``recorded_at`` and "recorded by then" is "id at most that of the last row recorded by then".

    Returns
    -------
    pandas.DataFrame
        Columns ``date`` (``datetime.date``), ``asset``, ``price`` (NaN for an archived missing price).
    """
    with read_transaction(engine) as connection:
        pid = catalog.portfolio_id(connection, portfolio)
        through = None
        if as_known_at is not None:
            through = connection.execute(
                sa.select(sa.func.max(t.prices.c.id)).where(
                    t.prices.c.portfolio_id == pid, t.prices.c.recorded_at <= as_known_at
                )
            ).scalar()
            if through is None:  # no price of the portfolio was recorded by then
                return pd.DataFrame({"date": [], "asset": [], "price": []})
        start = None if after is None else pd.Timestamp(after) + pd.Timedelta(days=1)
        rows = _latest(connection, pid, None if start is None else start.date(), None, None, through)
    return rows[["date", "asset", "price"]].reset_index(drop=True)


def recent_dates(engine: Engine, portfolio: str, through: date, count: int) -> tuple[date, ...]:
    """The last ``count`` archived price dates on or before ``through``, oldest first.

    One query walking the prices' ``(portfolio_id, date, ...)`` index backwards from ``through``:
    a bounded read, however long the history (the daily loop's tail, :mod:`riskshape.daily.tail`).

    Parameters
    ----------
    engine : sqlalchemy.engine.Engine
        The archive's engine (``Store.engine``).
    portfolio : str
        An existing portfolio (NotFoundError otherwise).
    through : datetime.date
        The last date wanted.
    count : int
        How many dates (fewer when the history is shorter).

    Returns
    -------
    tuple of datetime.date
    """
    with read_transaction(engine) as connection:
        pid = catalog.portfolio_id(connection, portfolio)
        query = (
            sa.select(t.prices.c.date)
            .where(t.prices.c.portfolio_id == pid, t.prices.c.date <= through)
            .group_by(t.prices.c.date)
            .order_by(t.prices.c.date.desc())
            .limit(count)
        )
        found = [row[0] for row in connection.execute(query)]
    return tuple(pd.Timestamp(d).date() for d in reversed(found))
