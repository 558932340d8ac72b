"""Change markers: what a reader needs to know whether anything it shows has changed, in one query.

A portfolio's reads (its latest state, its series pages) change only when a run is recorded, its
windows are written, or a record is appended to the ledger (an alert or a review). The archive is
append-only, so three numbers that only grow say it: the portfolio's latest run id, the highest
id of its feature rows, and the ledger's head (its count and the hash of its last record).

The feature-row id is there because a run is recorded before its windows are written (separate
transactions today): a reader that came between them would otherwise keep the run's series
without its new windows.
"""

from __future__ import annotations

from dataclasses import dataclass

import sqlalchemy as sa
from sqlalchemy.engine import Engine

from riskshape.errors import NotFoundError
from riskshape.store import schema as t
from riskshape.store.database import read_transaction
from riskshape.store.records import GENESIS_HASH

__all__ = ["ChangeMarker", "read_change_marker"]


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
    """

    portfolio: str
    run_id: int | None
    features_through: int | None
    ledger_count: int
    ledger_hash: str

    @property
    def series_key(self) -> tuple[int | None, int | None]:
        """What the portfolio's series depends on (its runs and windows, not the ledger)."""
        return (self.run_id, self.features_through)


def _marker_query(portfolio: str) -> sa.Select[tuple[int, int | None, int | None, int | None, str | None]]:
    p = t.portfolios
    run_id = sa.select(sa.func.max(t.runs.c.id)).where(t.runs.c.portfolio_id == p.c.id).scalar_subquery()
    features = sa.select(sa.func.max(t.features.c.id)).where(t.features.c.portfolio_id == p.c.id).scalar_subquery()
    last = sa.select(t.ledger.c.seq, t.ledger.c.entry_hash).order_by(t.ledger.c.seq.desc()).limit(1).subquery()
    seq = sa.select(last.c.seq).scalar_subquery()
    head = sa.select(last.c.entry_hash).scalar_subquery()
    return sa.select(p.c.id, run_id, features, seq, head).where(p.c.name == portfolio)


def read_change_marker(engine: Engine, portfolio: str) -> ChangeMarker:
    """The portfolio's change marker, read in one query.

    Raises
    ------
    NotFoundError
        If the portfolio does not exist.
    """
    with read_transaction(engine) as connection:
        row = connection.execute(_marker_query(portfolio)).first()
    if row is None:
        raise NotFoundError(f"portfolio {portfolio!r} is not in the archive; create it or check the name")
    _, run_id, features, seq, head = row
    return ChangeMarker(
        portfolio=portfolio,
        run_id=None if run_id is None else int(run_id),
        features_through=None if features is None else int(features),
        ledger_count=0 if seq is None else int(seq),
        ledger_hash=GENESIS_HASH if head is None else str(head),
    )
