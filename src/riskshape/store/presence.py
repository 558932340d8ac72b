"""Which price cells are archived at all: a price, an explicit missing price (NULL), or nothing.

The daily loop (:mod:`riskshape.daily.days`) needs the difference a wide table hides: an asset
left out of a day's feed has no cell for that day (the day waits for it), while a price sent as
missing is an archived NULL cell (the asset has answered for that day).
"""

from __future__ import annotations

from datetime import date

import pandas as pd
from sqlalchemy.engine import Engine

from riskshape.store import catalog
from riskshape.store.database import read_transaction
from riskshape.store.pricebook import _latest

__all__ = ["read_cells"]


def read_cells(engine: Engine, portfolio: str, after: date | None) -> pd.DataFrame:
    """The latest revision of every archived cell dated after ``after`` (every cell when None).

    Parameters
    ----------
    engine : sqlalchemy.engine.Engine
        The archive's engine (``Store.engine``).
    portfolio : str
        An existing portfolio (NotFoundError otherwise).
    after : datetime.date or None
        Only cells dated strictly after this day.

    Returns
    -------
    pandas.DataFrame
        Columns ``date`` (``datetime.date``), ``asset``, ``price`` (NaN for an archived missing price).
    """
    with read_transaction(engine) as connection:
        pid = catalog.portfolio_id(connection, portfolio)
        start = None if after is None else pd.Timestamp(after) + pd.Timedelta(days=1)
        rows = _latest(connection, pid, None if start is None else start.date(), None, None, None)
    return rows[["date", "asset", "price"]].reset_index(drop=True)
