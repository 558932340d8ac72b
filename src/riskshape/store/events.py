"""Chained events: every record on the ledger that is neither an alert nor a review.

An event has a ``kind`` (a short name such as ``day_closed`` or ``window_superseded``, chosen by the
part of riskshape that records it), optionally the portfolio and the subject it concerns (a date,
an alert id, a period), who recorded it, and a payload: a JSON object written canonically (sorted
keys, no spaces, floats as their shortest round-trip text) so that its hash is the same on every
backend. Events share the ledger's one sequence with alerts and reviews, so ``audit verify`` checks
them with everything else and a head kept elsewhere covers them too.
"""

from __future__ import annotations

import json
import math
import re
from collections.abc import Callable, Mapping
from datetime import datetime, timezone
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Connection, Engine

from riskshape.errors import NotFoundError, StoreError
from riskshape.store import schema as t
from riskshape.store.canonical import entry_hash
from riskshape.store.database import read_transaction, write_transaction
from riskshape.store.ledger import ledger_head
from riskshape.store.records import EventRecord, Head

__all__ = ["append_event", "append_event_on", "list_events", "latest_event", "event_payload", "EventCheck"]

EventCheck = Callable[[Head], Mapping[str, object] | None]
"""Called with the ledger head inside the write transaction, before an event is appended; it raises
to refuse the event, or returns facts added to its payload (what it saw while no other record could
be appended, so a rule over the archive holds under concurrency)."""

_KIND = re.compile(r"^[a-z][a-z0-9_]{0,31}$")
MAX_PAYLOAD = 1_000_000


def _plain(value: object, where: str) -> object:
    """A JSON value whose text is the same on every platform (floats kept finite and exact)."""
    if value is None or isinstance(value, (bool, str, int)):
        return value
    if isinstance(value, float):
        if not math.isfinite(value):
            raise StoreError(f"{where}: {value!r} is not a finite number; write null for a missing value")
        return value
    if hasattr(value, "item"):  # numpy scalar
        return _plain(value.item(), where)
    if hasattr(value, "isoformat"):
        return value.isoformat()
    if isinstance(value, Mapping):
        return {str(k): _plain(v, f"{where}.{k}") for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_plain(v, f"{where}[{i}]") for i, v in enumerate(value)]
    raise StoreError(f"{where}: no JSON form for {type(value).__name__} value {value!r}")


def event_payload(data: Mapping[str, object]) -> str:
    """The canonical JSON text of an event's payload.

    Examples
    --------
    >>> event_payload({"b": 1.5, "a": ["2031-01-02", None]})
    '{"a":["2031-01-02",null],"b":1.5}'
    """
    text = json.dumps(_plain(dict(data), "payload"), sort_keys=True, separators=(",", ":"), ensure_ascii=False)
    if len(text) > MAX_PAYLOAD:
        raise StoreError(f"event payload: {len(text)} characters, at most {MAX_PAYLOAD} are archived")
    return text


def append_event(
    engine: Engine,
    kind: str,
    data: Mapping[str, object],
    *,
    portfolio: str | None = None,
    subject: str | None = None,
    actor: str | None = None,
    now: datetime | None = None,
    check: EventCheck | None = None,
) -> EventRecord:
    """Append one event to the ledger. See :meth:`riskshape.store.Store.append_event`."""
    if not isinstance(kind, str) or not _KIND.match(kind):
        raise StoreError(f"event kind {kind!r}: write 1 to 32 lowercase letters, digits or underscores")
    for name, text in (("subject", subject), ("actor", actor)):
        if text is not None and (not isinstance(text, str) or not text.strip() or len(text) > 200):
            raise StoreError(f"event {name} must be a non-empty text of at most 200 characters, got {text!r}")
    payload = event_payload(data)
    with write_transaction(engine) as connection:
        portfolio_id = None
        if portfolio is not None:
            portfolio_id = connection.execute(
                sa.select(t.portfolios.c.id).where(t.portfolios.c.name == portfolio)
            ).scalar()
            if portfolio_id is None:
                raise NotFoundError(f"portfolio {portfolio!r} is not in the archive")
        return append_event_on(
            connection,
            kind,
            payload,
            portfolio=portfolio,
            portfolio_id=portfolio_id,
            subject=subject,
            actor=actor,
            now=now,
            check=(None if check is None else lambda head: _merged(data, check(head))),
        )


def _merged(data: Mapping[str, object], seen: Mapping[str, object] | None) -> str | None:
    return event_payload({**data, **seen}) if seen else None


def append_event_on(
    connection: Connection,
    kind: str,
    payload: str,
    *,
    portfolio: str | None = None,
    portfolio_id: int | None = None,
    subject: str | None = None,
    actor: str | None = None,
    now: datetime | None = None,
    check: Callable[[Head], str | None] | None = None,
) -> EventRecord:
    """Append one event inside an open write transaction (``payload`` from :func:`event_payload`).

    ``check`` may return a replacement payload text (or None to keep it).
    """
    recorded = (now or datetime.now(timezone.utc)).astimezone(timezone.utc)
    seq, prev = ledger_head(connection)
    if check is not None:
        payload = check(Head(count=seq, head_hash=prev)) or payload
    next_id = int(connection.execute(sa.select(sa.func.coalesce(sa.func.max(t.events.c.id), 0))).scalar_one()) + 1
    row: dict[str, Any] = {
        "id": next_id,
        "seq": seq + 1,
        "prev_hash": prev,
        "kind": kind,
        "portfolio_id": portfolio_id,
        "portfolio": portfolio,
        "subject": subject,
        "payload": payload,
        "actor": actor,
        "recorded_at": recorded,
    }
    row["entry_hash"] = entry_hash("events", row)
    connection.execute(
        sa.insert(t.ledger),
        {"seq": row["seq"], "kind": "event", "prev_hash": prev, "entry_hash": row["entry_hash"]},
    )
    connection.execute(sa.insert(t.events), row)
    return EventRecord(**row)


def list_events(
    engine: Engine,
    *,
    kind: str | None = None,
    portfolio: str | None = None,
    subject: str | None = None,
    as_known_at: datetime | None = None,
) -> tuple[EventRecord, ...]:
    """Events in ledger order, filtered by kind, portfolio and subject (recorded by ``as_known_at``).

    See :meth:`riskshape.store.Store.list_events`.
    """
    query = sa.select(t.events).order_by(t.events.c.seq)
    if kind is not None:
        query = query.where(t.events.c.kind == kind)
    if portfolio is not None:
        query = query.where(t.events.c.portfolio == portfolio)
    if subject is not None:
        query = query.where(t.events.c.subject == subject)
    if as_known_at is not None:
        query = query.where(t.events.c.recorded_at <= as_known_at)
    with read_transaction(engine) as connection:
        rows = connection.execute(query).all()
    fields = EventRecord.__dataclass_fields__
    return tuple(EventRecord(**{name: row._mapping[name] for name in fields}) for row in rows)


def latest_event(engine: Engine, *, kind: str, portfolio: str) -> EventRecord | None:
    """The portfolio's latest event of one kind, or None: one row read, however many there are.

    See :meth:`riskshape.store.Store.latest_event`.
    """
    query = (
        sa.select(t.events)
        .where(t.events.c.kind == kind, t.events.c.portfolio == portfolio)
        .order_by(t.events.c.seq.desc())
        .limit(1)
    )
    with read_transaction(engine) as connection:
        row = connection.execute(query).first()
    if row is None:
        return None
    return EventRecord(**{name: row._mapping[name] for name in EventRecord.__dataclass_fields__})
