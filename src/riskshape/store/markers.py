"""Change markers: what a reader needs to know whether anything it shows has changed, in one query.

A portfolio's reads (its latest state, its series pages) change only when a run is recorded, its
windows are written, a record is appended to the ledger (an alert, a review or an event), or
prices are archived (a pending day, which writes no run, shows as pending at once). The archive
is append-only, so numbers that only grow say it: the portfolio's latest run id, the highest id
of its feature rows, of its price rows and of its chained events (a day closed, an asset
delisted), and the ledger's head (its count and the hash of its last record).

The feature-row id is there because a run is recorded before its windows are written (separate
transactions today): a reader that came between them would otherwise keep the run's series
without its new windows.
"""

from __future__ import annotations

from dataclasses import dataclass

from sqlalchemy.engine import Engine

from riskshape.errors import NotFoundError, StoreError
from riskshape.store.records import GENESIS_HASH

__all__ = ["ChangeMarker", "read_change_marker", "MARKER_SQL"]


@dataclass(frozen=True)
class ChangeMarker:
    """What a portfolio's reads depend on, as the archive holds it now.

    Attributes
    ----------
    portfolio : str
    run_id : int or None
        The portfolio's latest run (None before its first).
    features_through : int or None
        The highest id among the portfolio's feature rows (None before any).
    ledger_count : int
        Records in the ledger (alerts and reviews of every portfolio).
    ledger_hash : str
        Hash of the ledger's last record (the genesis hash when empty).
    prices_through : int or None
        The highest id among the portfolio's price rows (None before any).
    events_through : int or None
        The highest id among the portfolio's chained events (None before any).
    """

    portfolio: str
    run_id: int | None
    features_through: int | None
    ledger_count: int
    ledger_hash: str
    prices_through: int | None = None
    events_through: int | None = None

    @property
    def series_key(self) -> tuple[int | None, int | None]:
        """What the portfolio's series depends on (its runs and windows, not the ledger)."""
        return (self.run_id, self.features_through)

    @property
    def days_key(self) -> tuple[int | None, int | None]:
        """What the portfolio's pending days depend on (its prices and its chained events)."""
        return (self.prices_through, self.events_through)


MARKER_SQL = (
    "SELECT p.id,"
    " (SELECT max(r.id) FROM runs r WHERE r.portfolio_id = p.id),"
    " (SELECT max(f.id) FROM features f WHERE f.portfolio_id = p.id),"
    " (SELECT l.seq FROM ledger l ORDER BY l.seq DESC LIMIT 1),"
    " (SELECT l.entry_hash FROM ledger l ORDER BY l.seq DESC LIMIT 1),"
    " (SELECT max(q.id) FROM prices q WHERE q.portfolio_id = p.id),"
    " (SELECT max(e.id) FROM events e WHERE e.portfolio_id = p.id)"
    " FROM portfolios p WHERE p.name = {name}"
)
"""The one query (each part an index lookup; the feature ids of one portfolio are a range of its
unique index). Written out for the driver, on a pooled connection without SQLAlchemy's statement
layer: this runs once per read request, where building and compiling a statement cost several
times the query itself."""

_PLACEHOLDERS = {"qmark": "?", "format": "%s", "pyformat": "%s"}


def read_change_marker(engine: Engine, portfolio: str) -> ChangeMarker:
    """The portfolio's change marker, read in one query.

    Raises
    ------
    NotFoundError
        If the portfolio does not exist.
    """
    sql = MARKER_SQL.format(name=_PLACEHOLDERS[engine.dialect.paramstyle])
    try:
        connection = engine.raw_connection()
        try:
            cursor = connection.cursor()
            try:
                cursor.execute(sql, (portfolio,))
                row = cursor.fetchone()
            finally:
                cursor.close()
        finally:
            connection.close()  # back to the pool, which rolls back whatever the driver began
    except engine.dialect.loaded_dbapi.Error as err:
        raise StoreError(
            f"change_marker: database error ({str(err).splitlines()[0] if str(err) else type(err).__name__})"
        ) from None
    if row is None:
        raise NotFoundError(f"portfolio {portfolio!r} is not in the archive; create it or check the name")
    _, run_id, features, seq, head, prices, events = row
    return ChangeMarker(
        portfolio=portfolio,
        run_id=None if run_id is None else int(run_id),
        features_through=None if features is None else int(features),
        ledger_count=0 if seq is None else int(seq),
        ledger_hash=GENESIS_HASH if head is None else str(head),
        prices_through=None if prices is None else int(prices),
        events_through=None if events is None else int(events),
    )
