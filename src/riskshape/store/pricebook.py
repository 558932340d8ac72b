"""Archived prices: append-only cells with revisions; the latest revision wins when reading.

A cell is (portfolio, date, asset). The first price seen for a cell is revision 0; a later append
with a different price (or a price that became missing, or a missing price that became known) adds
revision ``n + 1``; an identical price adds nothing. Missing prices (NaN) inside the appended table
are archived as NULL cells so the table a run saw can be rebuilt exactly.
"""

from __future__ import annotations

from datetime import date, datetime
from typing import Any

import numpy as np
import pandas as pd
import sqlalchemy as sa
from sqlalchemy.engine import Connection

from riskshape.errors import DataError
from riskshape.prices import validate_prices
from riskshape.store import schema as t
from riskshape.store.records import PriceCorrection, PriceWrite

__all__ = ["validated", "append_prices", "read_prices", "list_corrections", "max_price_id", "INDEX_UNIT"]

INDEX_UNIT = "us"
"""Resolution of the rebuilt DatetimeIndex (pandas' default for parsed dates), which
:func:`riskshape.prices.hash_prices` depends on."""


def _long(frame: pd.DataFrame) -> pd.DataFrame:
    """Wide prices to rows of (date, asset, price), NaN kept."""
    wide = frame.copy()
    wide.index = pd.Index(pd.DatetimeIndex(frame.index).date, name="date")
    wide.columns = pd.Index([str(c) for c in frame.columns], name="asset")
    return wide.reset_index().melt(id_vars="date", var_name="asset", value_name="price")


def _latest(connection: Connection, portfolio_id: int, start: date | None, end: date | None,
            assets: list[str] | None, through_id: int | None) -> pd.DataFrame:
    p = t.prices
    query = sa.select(p.c.id, p.c.date, p.c.asset, p.c.price, p.c.revision).where(p.c.portfolio_id == portfolio_id)
    if start is not None:
        query = query.where(p.c.date >= start)
    if end is not None:
        query = query.where(p.c.date <= end)
    if assets is not None:
        query = query.where(p.c.asset.in_(assets))
    if through_id is not None:
        query = query.where(p.c.id <= through_id)
    rows = connection.execute(query).all()
    table = pd.DataFrame(rows, columns=["id", "date", "asset", "price", "revision"])
    if table.empty:
        return table
    table["price"] = table["price"].astype(float)
    table = table.sort_values(["date", "asset", "revision"])
    return table.drop_duplicates(["date", "asset"], keep="last")


def validated(prices: pd.DataFrame, source: str) -> pd.DataFrame:
    """The table through :func:`riskshape.prices.validate_prices` (raises :class:`DataError`), with asset
    names of at most 200 characters."""
    valid = validate_prices(prices, source=source, min_rows=1)
    long_names = [c for c in valid.columns if len(c) > 200]
    if long_names:
        raise DataError(f"{source}: asset name {long_names[0][:40]!r}... is longer than 200 characters; shorten it")
    return valid


def append_prices(connection: Connection, portfolio_id: int, valid: pd.DataFrame, now: datetime) -> PriceWrite:
    """Append a validated wide price table (see :func:`validated`) inside an open write transaction."""
    incoming = _long(valid)
    held = _latest(connection, portfolio_id, incoming["date"].min(), incoming["date"].max(), None, None)
    merged = incoming.merge(held[["date", "asset", "price", "revision"]], on=["date", "asset"], how="left",
                            suffixes=("", "_held"))
    is_new = merged["revision"].isna().to_numpy()
    new_price, old_price = merged["price"].to_numpy(float), merged["price_held"].to_numpy(float)
    same = (new_price == old_price) | (np.isnan(new_price) & np.isnan(old_price))
    changed = ~is_new & ~same
    rows: list[dict[str, Any]] = []
    revision = merged["revision"].to_numpy()
    for mask, rev in ((is_new, None), (changed, 1)):
        part = merged[mask]
        revs = np.zeros(len(part), dtype=int) if rev is None else revision[mask].astype(int) + 1
        for (d, asset, price), r in zip(part[["date", "asset", "price"]].itertuples(index=False), revs):
            rows.append({"portfolio_id": portfolio_id, "date": d, "asset": asset,
                         "price": None if np.isnan(price) else float(price), "revision": int(r), "recorded_at": now})
    if rows:
        connection.execute(sa.insert(t.prices), rows)
    return PriceWrite(added=int(is_new.sum()), corrections=int(changed.sum()), unchanged=int((~is_new & same).sum()))


def max_price_id(connection: Connection, portfolio_id: int) -> int:
    """Highest price row id of a portfolio (0 if it has none)."""
    query = sa.select(sa.func.coalesce(sa.func.max(t.prices.c.id), 0)).where(t.prices.c.portfolio_id == portfolio_id)
    return int(connection.execute(query).scalar_one())


def read_prices(connection: Connection, portfolio_id: int, start: date | None = None, end: date | None = None,
                assets: list[str] | None = None, through_id: int | None = None) -> pd.DataFrame:
    """Latest revision of every cell as a wide table (dates x assets, NaN where missing).

    Columns follow ``assets`` when given (assets never archived come out all-NaN), else sorted names.
    """
    latest = _latest(connection, portfolio_id, start, end, assets, through_id)
    if latest.empty:
        wide = pd.DataFrame(columns=list(assets or []), dtype=float)
        wide.index = pd.DatetimeIndex([], name="date").as_unit(INDEX_UNIT)
    else:
        wide = latest.pivot(index="date", columns="asset", values="price")
        wide.index = pd.DatetimeIndex(pd.to_datetime(wide.index), name="date").as_unit(INDEX_UNIT)
        wide = wide.sort_index()
        columns = list(assets) if assets is not None else sorted(wide.columns)
        wide = wide.reindex(columns=columns).astype(float)
    wide.columns = pd.Index([str(c) for c in wide.columns], name="asset")
    return wide


def list_corrections(connection: Connection, portfolio_id: int, start: date | None = None,
                     end: date | None = None) -> tuple[PriceCorrection, ...]:
    """Every revision > 0 with the price it replaced, by date, asset and revision."""
    p, q = t.prices, t.prices.alias("previous")
    query = (
        sa.select(p.c.date, p.c.asset, p.c.revision, q.c.price.label("old"), p.c.price.label("new"), p.c.recorded_at)
        .join(q, sa.and_(q.c.portfolio_id == p.c.portfolio_id, q.c.date == p.c.date, q.c.asset == p.c.asset,
                         q.c.revision == p.c.revision - 1))
        .where(p.c.portfolio_id == portfolio_id, p.c.revision > 0)
        .order_by(p.c.date, p.c.asset, p.c.revision)
    )
    if start is not None:
        query = query.where(p.c.date >= start)
    if end is not None:
        query = query.where(p.c.date <= end)
    nan = float("nan")
    return tuple(
        PriceCorrection(date=r.date, asset=r.asset, revision=int(r.revision),
                        old_price=nan if r.old is None else float(r.old),
                        new_price=nan if r.new is None else float(r.new), recorded_at=r.recorded_at)
        for r in connection.execute(query)
    )

