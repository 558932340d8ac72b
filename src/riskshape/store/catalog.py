"""Portfolios and runs (the run manifest) in the archive."""

from __future__ import annotations

import json
import re
import unicodedata
from datetime import datetime, timezone
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine

from riskshape.errors import ConflictError, NotFoundError, StoreError
from riskshape.store import schema as t
from riskshape.store.database import known_id, read_transaction, write_transaction
from riskshape.store.records import Portfolio, PriceWrite, Run, RunManifest
from riskshape.store.seals import mark_unsealed
from riskshape.types import PriceFrame

__all__ = [
    "check_name",
    "portfolio_id",
    "create_portfolio",
    "ensure_portfolio",
    "get_portfolio",
    "list_portfolios",
    "create_run",
    "get_run",
    "latest_run",
    "list_runs",
]

_HEX64 = re.compile(r"^[0-9a-f]{64}$")


def check_name(name: object) -> str:
    """A portfolio name: 1 to 200 characters, no control characters, no surrounding spaces."""
    if not isinstance(name, str) or not name or len(name) > 200 or name != name.strip():
        raise StoreError(f"portfolio name must be 1 to 200 characters without surrounding spaces, got {name!r}")
    if any(unicodedata.category(ch).startswith("C") for ch in name):
        raise StoreError(f"portfolio name {name!r} contains a control character; use printable characters")
    return name


def _portfolio(row: Any) -> Portfolio:
    return Portfolio(id=int(row.id), name=row.name, created_at=row.created_at)


def portfolio_id(connection: Connection, name: str) -> int:
    """Id of a portfolio by name.

    Raises
    ------
    NotFoundError
        If there is no such portfolio.
    """
    known = known_id(connection, name)
    if known is not None:
        return known
    found = connection.execute(sa.select(t.portfolios.c.id).where(t.portfolios.c.name == name)).scalar()
    if found is None:
        raise NotFoundError(f"portfolio {name!r} is not in the archive; create it or check the name")
    known_id(connection, name, int(found))
    return int(found)


def create_portfolio(engine: Engine, name: str) -> Portfolio:
    """Create a portfolio; :class:`ConflictError` if the name is taken."""
    check_name(name)
    with write_transaction(engine) as connection:
        if connection.execute(sa.select(t.portfolios.c.id).where(t.portfolios.c.name == name)).first():
            raise ConflictError(f"portfolio {name!r} already exists; pick another name or use it")
        return _insert_portfolio(connection, name)


def _insert_portfolio(connection: Connection, name: str) -> Portfolio:
    now = datetime.now(timezone.utc)
    new_id = connection.execute(sa.insert(t.portfolios).values(name=name, created_at=now)).inserted_primary_key
    assert new_id is not None
    mark_unsealed(connection, int(new_id[0]))
    return Portfolio(id=int(new_id[0]), name=name, created_at=now)


def ensure_portfolio(engine: Engine, name: str) -> Portfolio:
    """The portfolio of that name, created if it does not exist yet."""
    check_name(name)
    with write_transaction(engine) as connection:
        row = connection.execute(sa.select(t.portfolios).where(t.portfolios.c.name == name)).first()
        return _portfolio(row) if row is not None else _insert_portfolio(connection, name)


def get_portfolio(engine: Engine, name: str) -> Portfolio:
    """A portfolio by name (:class:`NotFoundError` if absent)."""
    with read_transaction(engine) as connection:
        row = connection.execute(sa.select(t.portfolios).where(t.portfolios.c.name == name)).first()
    if row is None:
        raise NotFoundError(f"portfolio {name!r} is not in the archive; create it or check the name")
    return _portfolio(row)


def list_portfolios(engine: Engine) -> tuple[Portfolio, ...]:
    """Every portfolio, by name."""
    with read_transaction(engine) as connection:
        rows = connection.execute(sa.select(t.portfolios).order_by(t.portfolios.c.name)).all()
    return tuple(_portfolio(r) for r in rows)


def _run(row: Any) -> Run:
    return Run(
        id=int(row.id),
        portfolio=row.name,
        created_at=row.created_at,
        config=json.loads(row.config_json),
        config_hash=row.config_hash,
        input_hash=row.input_hash,
        package_version=row.package_version,
        source=row.source,
        first_date=row.first_date,
        last_date=row.last_date,
        n_dates=int(row.n_dates),
        assets=tuple(json.loads(row.assets_json)),
        prices_through_id=int(row.prices_through_id),
        prices_added=int(row.prices_added),
        corrections_added=int(row.corrections_added),
    )


def _run_query() -> sa.Select[Any]:
    return sa.select(t.runs, t.portfolios.c.name).join(t.portfolios, t.portfolios.c.id == t.runs.c.portfolio_id)


def create_run(
    engine: Engine, portfolio: str, manifest: RunManifest, prices: PriceFrame | None = None, archived: bool = False
) -> Run:
    """Archive the prices of a run (as corrections where they differ) and record its manifest, in one
    transaction; with ``archived``, the prices were read from the archive as they stand and only their
    extent is recorded. See :meth:`riskshape.store.Store.create_run`.
    """
    import pandas as pd  # writing a run only: the archive's reads load no pandas

    from riskshape.store.pricebook import append_prices, max_price_id, validated

    for name in ("config_hash", "input_hash"):
        value = getattr(manifest, name)
        if not isinstance(value, str) or not _HEX64.match(value):
            raise StoreError(f"run manifest: {name} must be 64 lowercase hex digits (SHA-256), got {value!r}")
    try:
        config_json = json.dumps(manifest.config, sort_keys=True, separators=(",", ":"), allow_nan=False)
    except (TypeError, ValueError) as err:
        raise StoreError(f"run manifest: the configuration cannot be stored as JSON ({err})") from None
    valid = None if prices is None else validated(prices, manifest.source or "prices")
    dates: list[Any] = [] if valid is None else list(pd.DatetimeIndex(valid.index).date)
    assets: list[str] = [] if valid is None else list(valid.columns)
    with write_transaction(engine) as connection:
        now = datetime.now(timezone.utc)  # under the write lock: run ids grow with created_at (knowledge time)
        pid = portfolio_id(connection, portfolio)
        written = PriceWrite(0, 0, 0) if valid is None or archived else append_prices(connection, pid, valid, now)
        values = {
            "portfolio_id": pid,
            "created_at": now,
            "config_json": config_json,
            "config_hash": manifest.config_hash,
            "input_hash": manifest.input_hash,
            "package_version": manifest.package_version,
            "source": manifest.source,
            "first_date": min(dates) if dates else None,
            "last_date": max(dates) if dates else None,
            "n_dates": len(dates),
            "assets_json": json.dumps(assets),
            "prices_through_id": max_price_id(connection, pid),
            "prices_added": written.added,
            "corrections_added": written.corrections,
        }
        run_id = connection.execute(sa.insert(t.runs).values(**values)).inserted_primary_key
        assert run_id is not None
        mark_unsealed(connection, pid)
        row = connection.execute(_run_query().where(t.runs.c.id == run_id[0])).one()
    return _run(row)


def get_run(engine: Engine, run_id: int) -> Run:
    """A run by id (:class:`NotFoundError` if absent)."""
    with read_transaction(engine) as connection:
        row = connection.execute(_run_query().where(t.runs.c.id == run_id)).first()
    if row is None:
        raise NotFoundError(f"run {run_id} is not in the archive")
    return _run(row)


def latest_run(engine: Engine, portfolio: str, as_known_at: datetime | None = None) -> Run | None:
    """The portfolio's most recent run (recorded by ``as_known_at``), or None if it has none
    (NotFoundError if no such portfolio).
    """
    query = _run_query().where(t.portfolios.c.name == portfolio)
    if as_known_at is not None:
        query = query.where(t.runs.c.created_at <= as_known_at)
    with read_transaction(engine) as connection:
        portfolio_id(connection, portfolio)
        row = connection.execute(query.order_by(t.runs.c.id.desc()).limit(1)).first()
    return None if row is None else _run(row)


def list_runs(engine: Engine, portfolio: str | None = None) -> tuple[Run, ...]:
    """Runs, oldest first, of one portfolio or of all."""
    query = _run_query().order_by(t.runs.c.id)
    if portfolio is not None:
        query = query.where(t.portfolios.c.name == portfolio)
    with read_transaction(engine) as connection:
        return tuple(_run(r) for r in connection.execute(query))
