"""Tampering on purpose, for the tamper tests: a small archive holding a row of every table, and one
change (an edit, a deletion, an insertion, a swap, a cut tail) made the way anyone with the database
can make it (around the append-only triggers and the foreign keys).
"""

from __future__ import annotations

import datetime as dt
import json
from dataclasses import dataclass
from typing import Any

import numpy as np
import pandas as pd
import sqlalchemy as sa

from riskshape.archive import archive_run
from riskshape.compute.monitor import MonitorResult
from riskshape.daily.corrections import apply_corrections
from riskshape.store import Store, schema

TABLES = ("portfolios", "runs", "prices", "features", "diagrams", "ledger", "alerts", "reviews", "events", "api_keys")
"""Every table of the archive but Alembic's own ``alembic_version`` (not covered; see docs/reliability.md)."""
COVERED = ("runs", "prices", "features", "diagrams")
CHAINED = ("ledger", "alerts", "reviews", "events")
KINDS = ("edit", "delete", "insert", "swap")
_ACTIONS = ("acknowledge", "dismiss", "escalate", "close")
_LEDGER_KINDS = ("alert", "review", "event")


def build_archive(store: Store, computed: MonitorResult) -> None:
    """Two portfolios' runs (windows, diagrams, alerts), a correction that supersedes windows, a
    two reviews, an event and two API keys (one revoked): a row in every table.
    """
    first = archive_run(store, "Fund North", computed)
    archive_run(store, "Fund South", computed, explain=False)
    prices = computed.prices
    day = prices.index[-30]
    revised = pd.DataFrame(np.nan, index=pd.DatetimeIndex([day], name=prices.index.name), columns=prices.columns)
    revised.iloc[0, 1] = float(prices.iloc[-30, 1]) * 1.03
    run = store.latest_run("Fund North")
    assert run is not None
    apply_corrections(store, "Fund North", revised, computed.config, run, source="fixture", explain=False)
    assert len(first.alerts.added) >= 2, "the fixture's rules fire twice or more"
    store.append_review(first.alerts.added[0].id, "acknowledge", "Reviewer One", "seen")
    store.append_review(first.alerts.added[1].id, "dismiss", "Reviewer Two", "noise: a thin day")
    store.append_event("day_closed", {"how": "fixture"}, portfolio="Fund South", subject="2030-01-02", actor="ana")
    store.create_api_key("Ana Owner", "reader")
    revoked = store.create_api_key("Bo Owner", "admin")
    store.revoke_api_key(revoked.key.key_id)


def _key_column(table: str) -> str:
    return "key_id" if table == "api_keys" else "seq" if table == "ledger" else "id"


def row_keys(connection: sa.Connection, table: str) -> list[Any]:
    """Primary keys of a table's rows, ascending."""
    column = getattr(schema, table).c[_key_column(table)]
    return list(connection.execute(sa.select(column).order_by(column)).scalars())


def changed_value(table: str, column: sa.Column[Any], value: object) -> object:
    """The value with one small, well-formed change of its stored form."""
    if column.name == "action":
        return next(a for a in _ACTIONS if a != value)
    if table == "ledger" and column.name == "kind":
        return next(k for k in _LEDGER_KINDS if k != value)
    if value is None:
        python = column.type.python_type
        return {float: 1.5, int: 7, bytes: b"\x00", dt.date: dt.date(2031, 1, 2)}.get(python, "x")
    if isinstance(value, bool):
        return not value
    if isinstance(value, int):
        return value + 1_000_003
    if isinstance(value, float):
        return float(np.nextafter(value, np.inf))  # one unit in the last place
    if isinstance(value, dt.datetime):
        return value + dt.timedelta(microseconds=1)
    if isinstance(value, dt.date):
        return value + dt.timedelta(days=36500)  # clear of every other row (unique per cell and window)
    if isinstance(value, (bytes, memoryview)):
        data = bytearray(bytes(value) or b"\x00")
        data[0] ^= 0x01
        return bytes(data)
    text = str(value)
    for i, ch in enumerate(text):  # the first digit, one up: a date, a hash or a number stays well formed
        if ch.isdigit():
            return text[:i] + str((int(ch) + 1) % 10) + text[i + 1 :]
    return text + "x"


@dataclass(frozen=True)
class Tamper:
    """One change: what it is, and the table(s) verify may name for it first."""

    kind: str
    table: str
    key: object
    column: str | None
    expected: tuple[str, ...]
    record_id: int | None = None  # the row verify must name, where it is certain


def _table(name: str) -> sa.Table:
    return getattr(schema, name)  # type: ignore[no-any-return]


def apply(connection: sa.Connection, kind: str, table: str, pick: int, pick_column: int, pick_other: int) -> Tamper:
    """Make one change of ``kind`` to ``table`` (rows and columns chosen by the ``pick`` numbers)."""
    t = _table(table)
    key_name = _key_column(table)
    keys = row_keys(connection, table)
    key = keys[pick % len(keys)]
    columns = list(t.c)
    expected = (table,) if table not in CHAINED else CHAINED
    if kind == "edit":
        column = columns[pick_column % len(columns)]
        old = connection.execute(sa.select(column).where(t.c[key_name] == key)).scalar_one()
        new = changed_value(table, column, old)
        connection.execute(sa.update(t).where(t.c[key_name] == key).values({column.name: new}))
        exact = table in COVERED and column.name not in ("id", "portfolio_id")
        named = new if column.name == key_name else key  # the row, under its key as it is now
        return Tamper(kind, table, named, column.name, expected, int(key) if exact else None)
    if kind == "delete":
        connection.execute(sa.delete(t).where(t.c[key_name] == key))
        return Tamper(kind, table, key, None, expected)
    if kind == "insert":
        row = dict(connection.execute(sa.select(t).where(t.c[key_name] == key)).one()._mapping)
        new_key: object = "f" * 16 if table == "api_keys" else int(max(keys)) + 1 + pick_other % 5
        row[key_name] = new_key
        for name in ("prev_hash", "entry_hash"):
            if name in row:
                row[name] = f"{pick_other % 10}" + "e" * 63 if name == "prev_hash" else "d" * 63 + f"{pick_other % 10}"
        if table == "portfolios":
            row["name"] = f"{row['name']} copy"
        if table == "prices":
            row["revision"] = int(row["revision"]) + 100
        if table in ("features", "diagrams"):
            row["run_id"] = int(row["run_id"]) + 1000
        if table == "alerts":
            row["window_end"] = row["window_end"] + dt.timedelta(days=3650)
        if table in ("alerts", "reviews", "events"):
            row["seq"] = int(row["seq"]) + 1_000_000
        connection.execute(sa.insert(t).values(row))
        return Tamper(kind, table, new_key, None, expected, int(new_key) if table in COVERED else None)
    if kind == "swap":
        unique = {c.name for c in columns if c.primary_key or c.unique} | {"seq", "prev_hash", "entry_hash"}
        plain = [c for c in columns if c.name not in unique]
        for turn in range(len(keys)):  # the first other row, from the chosen one on, that differs somewhere
            other = keys[(pick_other + turn) % len(keys)]
            if other == key:
                continue
            for step in range(len(plain)):  # the first column, from the chosen one on, where the two rows differ
                column = plain[(pick_column + step) % len(plain)]
                values = [
                    connection.execute(sa.select(column).where(t.c[key_name] == k)).scalar_one() for k in (key, other)
                ]
                if values[0] == values[1]:
                    continue
                try:
                    with connection.begin_nested():  # a swap that breaks a UNIQUE constraint tries the next column
                        connection.execute(sa.update(t).where(t.c[key_name] == key).values({column.name: values[1]}))
                        connection.execute(sa.update(t).where(t.c[key_name] == other).values({column.name: values[0]}))
                except sa.exc.IntegrityError:
                    continue
                exact = table in COVERED and column.name != "portfolio_id"  # moved rows leave a gap, not a name
                first = min(int(key), int(other)) if exact else None
                return Tamper(kind, table, (key, other), column.name, expected, first)
        raise LookupError(f"no row of {table} differs from row {key} in a column that can be swapped")
    raise ValueError(kind)


def cut_tail(connection: sa.Connection, records: int, with_rows: bool) -> Tamper:
    """Delete the last ``records`` ledger records (and, ``with_rows``, the rows their commitments cover)."""
    head = int(connection.execute(sa.select(sa.func.max(schema.ledger.c.seq))).scalar_one())
    cut = head - records
    if with_rows:
        payloads = connection.execute(
            sa.select(schema.events.c.portfolio_id, schema.events.c.payload).where(
                schema.events.c.kind == "records_sealed", schema.events.c.seq > cut
            )
        ).all()
        for pid, text in payloads:
            for table, part in json.loads(text)["tables"].items():
                t = _table(table)
                connection.execute(
                    sa.delete(t).where(t.c.portfolio_id == pid, t.c.id > part["after"], t.c.id <= part["through"])
                )
    for table in ("alerts", "reviews", "events", "ledger"):
        t = _table(table)
        connection.execute(sa.delete(t).where(t.c.seq > cut))
    return Tamper("cut", "ledger", cut + 1, None, ("ledger",))
