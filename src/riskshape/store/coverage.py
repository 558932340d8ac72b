"""Verifying what the ledger's commitments cover: runs, prices, features, diagrams, portfolios and API keys.

Called by :func:`riskshape.store.chain.verify_ledger` once the chain itself verifies. Each
``records_sealed`` commitment (:mod:`riskshape.store.seals`) is recomputed from the tables in ledger
order; then every row not covered by one is named; then the API keys are checked against their
``key_created`` and ``key_revoked`` events. The first problem found is returned as a
:class:`~riskshape.store.records.BadRecord` naming the table, the row and its key.
"""

from __future__ import annotations

import base64
import json
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Connection

from riskshape.store import schema as t
from riskshape.store.keys import KEY_CREATED, KEY_REVOKED
from riskshape.store.records import BadRecord
from riskshape.store.seals import (
    SEALED,
    SEALED_TABLES,
    TAG_BYTES,
    fetch_portfolio,
    fetch_rows,
    portfolio_digest,
    row_tags,
    rows_digest,
)

__all__ = ["check_coverage"]


@dataclass(frozen=True)
class _Seal:
    seq: int
    event_id: int
    portfolio_id: int | None
    payload: dict[str, Any]

    @property
    def named(self) -> str:
        runs = [str(r["id"]) for r in self.payload.get("runs", [])]
        if len(runs) == 1:
            return f"run {runs[0]}'s commitment (seq {self.seq})"
        if runs:
            return f"the commitment of runs {', '.join(runs)} (seq {self.seq})"
        return f"the commitment at seq {self.seq}"


def _key(table: str, row: Sequence[Any], names: dict[int, str]) -> str:
    """What a row is, in words (its portfolio and the columns that identify it)."""
    columns = SEALED_TABLES[table]
    get = dict(zip(columns, row))
    who = f"portfolio {names.get(int(get['portfolio_id']), get['portfolio_id'])!r}"
    if table == "prices":
        return f"{who}, {get['asset']}, {get['date']}, revision {get['revision']}"
    if table == "features":
        return f"{who}, window {get['window_end']}, run {get['run_id']}"
    if table == "diagrams":
        return f"{who}, window {get['window_end']}, H{get['dim']}, run {get['run_id']}"
    return f"{who}, created {get['created_at']}"


def _locate(
    table: str, rows: list[tuple[Any, ...]], part: dict[str, Any], seal: _Seal, names: dict[int, str]
) -> BadRecord:
    """Name the row whose bytes break a commitment's root, by the commitment's tags."""
    group = int(part.get("group", 1))
    stored = base64.b64decode(part.get("tags", ""))
    theirs = [stored[i : i + TAG_BYTES] for i in range(0, len(stored), TAG_BYTES)]
    mine = row_tags(table, rows, group)
    first = next((i for i, (a, b) in enumerate(zip(mine, theirs)) if a != b), min(len(mine), len(theirs)))
    at = min(first * group, len(rows) - 1) if rows else None
    count = int(part["count"])
    if len(rows) == count and at is not None and first < len(mine):
        what = "changed since it was archived" if group == 1 else f"it or one of the {group - 1} rows after it changed"
        reason = f"{_key(table, rows[at], names)}: does not match {seal.named}: {what}"
        return BadRecord(seal.seq, table, int(rows[at][0]), reason)
    if len(rows) < count:
        if at is not None and first < len(rows):
            where = f" just before id {rows[at][0]}"
        else:
            where = f" after id {rows[-1][0]}" if rows else ""
        reason = (
            f"{count - len(rows)} row(s) of {seal.named} (ids {int(part['after']) + 1} to {part['through']}) "
            f"are missing{where}: deleted, or moved to another portfolio"
        )
        return BadRecord(seal.seq, table, None, reason)
    if len(rows) > count and at is not None:
        reason = f"{_key(table, rows[at], names)}: not in {seal.named}: inserted"
        return BadRecord(seal.seq, table, int(rows[at][0]), reason)
    reason = f"rows with ids {part['after']}..{part['through']} do not match {seal.named}"
    return BadRecord(seal.seq, table, None, reason)


def _check_seal(
    connection: Connection, seal: _Seal, throughs: dict[tuple[str, int], int], names: dict[int, str]
) -> BadRecord | None:
    pid = seal.portfolio_id
    facts = seal.payload.get("portfolio", {})
    if pid is None or facts.get("id") != pid:
        return BadRecord(
            seal.seq, "events", seal.event_id, "a commitment without its portfolio: not written by riskshape"
        )
    row = fetch_portfolio(connection, pid)
    if row is None:
        return BadRecord(
            seal.seq, "portfolios", pid, f"portfolio {facts.get('name')!r} of {seal.named} is missing: deleted"
        )
    if portfolio_digest(row) != facts.get("digest"):
        return BadRecord(
            seal.seq,
            "portfolios",
            pid,
            f"portfolio {row[1]!r} does not match {seal.named}: its name or creation changed",
        )
    for table in SEALED_TABLES:
        part = seal.payload["tables"][table]
        after, through = int(part["after"]), int(part["through"])
        if after != throughs.get((table, pid), 0):
            reason = f"{seal.named} covers {table} after id {after}, the commitment before it ended at a different id"
            return BadRecord(seal.seq, "events", seal.event_id, reason)
        rows = fetch_rows(connection, table, pid, after, through)
        digest = rows_digest(table, rows)
        if digest["root"] != part["root"] or digest["count"] != part["count"]:
            return _locate(table, rows, part, seal, names)
        throughs[(table, pid)] = through
    return None


def _uncovered(connection: Connection, throughs: dict[tuple[str, int], int], names: dict[int, str]) -> BadRecord | None:
    for table in SEALED_TABLES:
        column = getattr(t, table).c.portfolio_id
        for pid in connection.execute(sa.select(column).distinct().order_by(column)).scalars():
            rows = fetch_rows(connection, table, int(pid), throughs.get((table, int(pid)), 0), None)
            if rows:
                reason = (
                    f"{_key(table, rows[0], names)}: not covered by any commitment "
                    "(inserted around riskshape, or archived by a version before commitments and not sealed since)"
                )
                return BadRecord(0, table, int(rows[0][0]), reason)
    return None


def _check_keys(connection: Connection) -> BadRecord | None:
    e = t.events
    created: dict[str, tuple[int, dict[str, Any]]] = {}
    revoked: set[str] = set()
    for event in connection.execute(
        sa.select(e.c.seq, e.c.kind, e.c.payload).where(e.c.kind.in_((KEY_CREATED, KEY_REVOKED))).order_by(e.c.seq)
    ):
        data = json.loads(event.payload)
        if event.kind == KEY_CREATED:
            created[data["key_id"]] = (int(event.seq), data)
        else:
            revoked.add(data["key_id"])
    seen: set[str] = set()
    for row in connection.execute(sa.select(t.api_keys).order_by(t.api_keys.c.key_id)):
        seen.add(row.key_id)
        if row.key_id not in created:
            reason = f"key {row.key_id} (owner {row.owner!r}, role {row.role!r}) has no key_created record: inserted"
            return BadRecord(0, "api_keys", None, reason)
        seq, data = created[row.key_id]
        archived = {
            "role": row.role,
            "owner": row.owner,
            "token_digest": row.key_hash,
            "created_at": row.created_at.isoformat(),
        }
        for name, value in archived.items():
            if data.get(name) != value:
                reason = (
                    f"key {row.key_id}: {name} {value!r} is not the {data.get(name)!r} it was created with (seq {seq})"
                )
                return BadRecord(seq, "api_keys", None, reason)
        if bool(row.revoked) != (row.key_id in revoked):
            state = "revoked" if row.revoked else "not revoked"
            reason = f"key {row.key_id} is {state} in the table, the ledger says the opposite"
            return BadRecord(seq, "api_keys", None, reason)
    for key_id, (seq, data) in sorted(created.items(), key=lambda item: item[1][0]):
        if key_id not in seen:
            return BadRecord(seq, "api_keys", None, f"key {key_id} (owner {data.get('owner')!r}) is missing: deleted")
    return None


def check_coverage(connection: Connection) -> BadRecord | None:
    """The first row of runs, prices, features, diagrams, portfolios or api_keys that fails, or None.

    Parameters
    ----------
    connection : sqlalchemy.engine.Connection
        Inside a read transaction (one snapshot), after the chain itself verified.

    Returns
    -------
    BadRecord or None
    """
    names = dict(connection.execute(sa.select(t.portfolios.c.id, t.portfolios.c.name)).all())
    e = t.events
    seals = [
        _Seal(int(r.seq), int(r.id), None if r.portfolio_id is None else int(r.portfolio_id), json.loads(r.payload))
        for r in connection.execute(
            sa.select(e.c.seq, e.c.id, e.c.portfolio_id, e.c.payload).where(e.c.kind == SEALED).order_by(e.c.seq)
        )
    ]
    throughs: dict[tuple[str, int], int] = {}
    sealed: set[int] = set()
    for seal in seals:
        problem = _check_seal(connection, seal, throughs, names)
        if problem is not None:
            return problem
        sealed.add(int(seal.portfolio_id or 0))
    for pid, name in sorted(names.items()):
        if pid not in sealed:
            return BadRecord(0, "portfolios", pid, f"portfolio {name!r} is not covered by any commitment: inserted")
    return _uncovered(connection, throughs, names) or _check_keys(connection)
