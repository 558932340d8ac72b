"""Commitments: chained records that cover the tables outside the ledger (runs, prices, features,
diagrams, portfolios).

Every write transaction that archives rows of a portfolio in ``runs``, ``prices``, ``features`` or
``diagrams``, or creates the portfolio, ends with one ``records_sealed`` event for that portfolio,
appended in the same transaction just before it commits (:func:`mark_unsealed` registers it with
:func:`~riskshape.store.database.before_commit`). ``archive_run`` writes a run in one transaction,
so a run gets one commitment; any other path that writes (a correction, a tail run, a plain price
append) gets its own without having to ask.

The payload says, for each table, which rows it covers (the portfolio's rows with id after the
previous commitment's ``through`` and up to its own), how many, the RFC 6962 Merkle root of their
canonical bytes (:func:`row_leaf`), and a 3-byte tag of each row (of each group of rows past
:data:`MAX_TAGS`) so that ``verify`` can name the row that changed, not only the commitment. It
also holds the portfolio row's digest and each covered run's configuration hash, input hash and
code version. Ranges of successive commitments of a portfolio tile its rows: a row after the last
commitment's range, or of a portfolio with none, is not covered and ``verify`` names it.
"""

from __future__ import annotations

import base64
import hashlib
import json
import math
from collections.abc import Sequence
from datetime import date, datetime, timezone
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Connection

from riskshape.store import schema as t
from riskshape.store.database import before_commit, fault_point
from riskshape.store.events import append_event_on, event_payload
from riskshape.store.merkle import leaf_hash, root_of_leaf_hashes

__all__ = [
    "SEALED",
    "SEALED_TABLES",
    "PORTFOLIO_COLUMNS",
    "row_leaf",
    "rows_digest",
    "fetch_rows",
    "portfolio_digest",
    "seal_portfolio",
    "mark_unsealed",
    "seal_all",
]

SEALED = "records_sealed"
"""Kind of the commitment events."""

SEALED_TABLES: dict[str, tuple[str, ...]] = {
    "runs": (
        "id",
        "portfolio_id",
        "created_at",
        "config_json",
        "config_hash",
        "input_hash",
        "package_version",
        "source",
        "first_date",
        "last_date",
        "n_dates",
        "assets_json",
        "prices_through_id",
        "prices_added",
        "corrections_added",
    ),
    "prices": ("id", "portfolio_id", "date", "asset", "price", "revision", "recorded_at"),
    "features": ("id", "portfolio_id", "config_hash", "window_end", "run_id", "values_json"),
    "diagrams": ("id", "portfolio_id", "config_hash", "window_end", "dim", "run_id", "n_bars", "bars"),
}
"""Tables covered by commitments and the columns (every one) their rows' bytes hold."""

PORTFOLIO_COLUMNS = ("id", "name", "created_at")
TAG_BYTES = 3
MAX_TAGS = {"runs": 1_000, "prices": 100_000, "features": 25_000, "diagrams": 50_000}
"""At most this many tags per table and commitment (past it, one tag per group of rows), which keeps
a commitment's payload under the events' 1 MB limit."""


_AS_IS = (str, int, type(None))
_ENCODER = json.JSONEncoder(separators=(",", ":"), ensure_ascii=False)


def _plain(value: object) -> object:
    """A column value as the driver returned it, in one text form on every backend."""
    if type(value) in _AS_IS:  # the usual case first (exact types: bool is not taken as int)
        return value
    if value is None or isinstance(value, str):
        return value
    if isinstance(value, bool):
        return int(value)
    if isinstance(value, int):
        return value
    if isinstance(value, float):
        return repr(value) if math.isfinite(value) else str(value)
    if isinstance(value, (bytes, bytearray, memoryview)):
        return "sha256:" + hashlib.sha256(bytes(value)).hexdigest()
    if isinstance(value, datetime):  # PostgreSQL; SQLite returns the stored text, in this same form
        aware = value if value.tzinfo is not None else value.replace(tzinfo=timezone.utc)
        return aware.astimezone(timezone.utc).strftime("%Y-%m-%d %H:%M:%S.%f")
    if isinstance(value, date):
        return value.isoformat()
    return str(value)


def row_leaf(table: str, row: Sequence[object]) -> bytes:
    """The canonical bytes of one row (a JSON list: the table's name, then every column in order).

    Examples
    --------
    >>> from datetime import date
    >>> row_leaf("prices", (7, 1, date(2031, 3, 3), "XQ01", 101.5, 0, "2031-03-03 18:00:00.000000"))
    b'["prices",7,1,"2031-03-03","XQ01","101.5",0,"2031-03-03 18:00:00.000000"]'
    """
    return _ENCODER.encode([table, *[_plain(v) for v in row]]).encode("utf-8")


def _tags(hashes: Sequence[bytes], group: int) -> list[bytes]:
    """First bytes of each leaf hash (of the hash of each group's leaf hashes past :data:`MAX_TAGS`)."""
    if group == 1:
        return [h[:TAG_BYTES] for h in hashes]
    return [hashlib.sha256(b"".join(hashes[i : i + group])).digest()[:TAG_BYTES] for i in range(0, len(hashes), group)]


def _leaf_hashes(table: str, rows: Sequence[Sequence[object]]) -> list[bytes]:
    return [leaf_hash(row_leaf(table, r)) for r in rows]


def rows_digest(table: str, rows: Sequence[Sequence[object]]) -> dict[str, Any]:
    """Count, RFC 6962 Merkle root, group size and tags (base64) of rows of ``table`` in id order."""
    hashes = _leaf_hashes(table, rows)
    group = max(1, math.ceil(len(hashes) / MAX_TAGS[table]))
    tags = base64.b64encode(b"".join(_tags(hashes, group))).decode("ascii")
    return {"count": len(hashes), "root": root_of_leaf_hashes(hashes), "group": group, "tags": tags}


def row_tags(table: str, rows: Sequence[Sequence[object]], group: int) -> list[bytes]:
    """The tag of each group of ``group`` rows (for finding which row a changed root comes from)."""
    return _tags(_leaf_hashes(table, rows), group)


def fetch_rows(
    connection: Connection, table: str, portfolio_id: int, after: int, through: int | None
) -> list[tuple[Any, ...]]:
    """Rows of one portfolio in ``table`` with ``after < id <= through`` (no upper bound for None), by id.

    Read through the driver's cursor (as :mod:`riskshape.store.pricebook` does): a price table of
    100,000 rows costs a tenth of a second this way.
    """
    mark = "?" if connection.dialect.name == "sqlite" else "%s"
    sql = f"SELECT {', '.join(SEALED_TABLES[table])} FROM {table} WHERE portfolio_id = {mark} AND id > {mark}"
    params: list[object] = [portfolio_id, after]
    if through is not None:
        sql += f" AND id <= {mark}"
        params.append(through)
    cursor = connection.connection.cursor()
    try:
        cursor.execute(sql + " ORDER BY id", tuple(params))
        return [tuple(r) for r in cursor.fetchall()]
    finally:
        cursor.close()


def portfolio_digest(row: Sequence[object]) -> str:
    """SHA-256 (hex) of a portfolio row's canonical bytes (id, name, created_at)."""
    return hashlib.sha256(row_leaf("portfolios", row)).hexdigest()


def fetch_portfolio(connection: Connection, portfolio_id: int) -> tuple[object, ...] | None:
    """The portfolio row (id, name, created_at) as the driver returns it, or None."""
    mark = "?" if connection.dialect.name == "sqlite" else "%s"
    cursor = connection.connection.cursor()
    try:
        cursor.execute(f"SELECT {', '.join(PORTFOLIO_COLUMNS)} FROM portfolios WHERE id = {mark}", (portfolio_id,))
        found = cursor.fetchone()
    finally:
        cursor.close()
    return None if found is None else tuple(found)


def _previous(connection: Connection, portfolio_id: int) -> dict[str, int] | None:
    """``through`` of each table in the portfolio's last commitment (None if it has none)."""
    e = t.events
    text = connection.execute(
        sa.select(e.c.payload)
        .where(e.c.kind == SEALED, e.c.portfolio_id == portfolio_id)
        .order_by(e.c.seq.desc())
        .limit(1)
    ).scalar()
    if text is None:
        return None
    return {name: int(part["through"]) for name, part in json.loads(text)["tables"].items()}


def seal_portfolio(connection: Connection, portfolio_id: int) -> None:
    """Append the commitment of the portfolio's rows archived since its last one (nothing if none).

    Runs inside the write transaction that wrote them (see :func:`mark_unsealed`).
    """
    previous = _previous(connection, portfolio_id)
    portfolio = fetch_portfolio(connection, portfolio_id)
    if portfolio is None:  # pragma: no cover - the rows reference it (foreign keys)
        return
    tables: dict[str, dict[str, Any]] = {}
    covered: list[tuple[Any, ...]] = []
    for table in SEALED_TABLES:
        after = 0 if previous is None else previous.get(table, 0)
        rows = fetch_rows(connection, table, portfolio_id, after, None)
        through = int(rows[-1][0]) if rows else after
        tables[table] = {"after": after, "through": through, **rows_digest(table, rows)}
        if table == "runs":
            covered = rows
    if previous is not None and not any(part["count"] for part in tables.values()):
        return
    columns = SEALED_TABLES["runs"]
    runs = [
        {name: row[columns.index(name)] for name in ("id", "config_hash", "input_hash", "package_version")}
        for row in covered
    ]
    payload = {
        "portfolio": {"id": portfolio_id, "name": portfolio[1], "digest": portfolio_digest(portfolio)},
        "runs": runs,
        "tables": tables,
    }
    subject = "runs " + ", ".join(str(r["id"]) for r in runs) if runs else "records"
    fault_point("seal")
    append_event_on(
        connection,
        SEALED,
        event_payload(payload),
        portfolio=str(portfolio[1]),
        portfolio_id=portfolio_id,
        subject=subject[:200],
        actor="riskshape",
    )


def seal_all(connection: Connection) -> int:
    """Seal every portfolio's rows not yet covered (an archive written before commitments); returns how many."""
    e = t.events
    before = int(connection.execute(sa.select(sa.func.count()).select_from(e).where(e.c.kind == SEALED)).scalar_one())
    for pid in connection.execute(sa.select(t.portfolios.c.id).order_by(t.portfolios.c.id)).scalars():
        seal_portfolio(connection, int(pid))
    after = int(connection.execute(sa.select(sa.func.count()).select_from(e).where(e.c.kind == SEALED)).scalar_one())
    return after - before


def mark_unsealed(connection: Connection, portfolio_id: int) -> None:
    """Note that this write transaction archived rows of the portfolio: seal them before it commits."""
    before_commit(connection, ("seal", portfolio_id), lambda c: seal_portfolio(c, portfolio_id))
