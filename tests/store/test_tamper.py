"""Tamper evidence: every change to the ledger's history is caught and the first bad record named.

To tamper, the tests go around the archive's own defences on purpose (see
``archive_kit.around_triggers``): on SQLite they drop the append-only triggers and turn foreign
keys off; on PostgreSQL they set ``session_replication_role = replica`` for the transaction.
"""

from __future__ import annotations

import dataclasses
import datetime as dt

import numpy as np
import pytest
import sqlalchemy as sa

from riskshape.store import Store, chain_head, schema, verify_chain
from riskshape.store.canonical import ALERT_FIELDS, REVIEW_FIELDS, entry_hash
from tests.kit.archive import around_triggers, make_alerts

OFFSET = 2
"""Ledger records before the fixture's own: the commitments of the portfolio and of its run."""


@pytest.fixture
def ledger(store: Store, run, rng: np.random.Generator) -> Store:
    """Seven records after the two commitments: alerts 1-5 (seq 3-7), a review of alert 2 (seq 8), alert 6 (seq 9)."""
    store.append_alerts(make_alerts(rng, 5), run.id)
    store.append_review(2, "acknowledge", "Reviewer One", "first look")
    store.append_alerts(make_alerts(rng, 1, start="2030-09-02"), run.id)
    assert verify_chain(store).ok
    return store


def _changed(value: object) -> object:
    """The value with one small change of its stored form."""
    if value is None:  # an empty optional field (an alert without explanation) filled in later
        return "{}"
    if isinstance(value, bool):
        return not value
    if isinstance(value, int):
        return value + 1000
    if isinstance(value, float):
        return float(np.nextafter(value, np.inf))  # one unit in the last place
    if isinstance(value, dt.datetime):
        return value + dt.timedelta(microseconds=1)
    if isinstance(value, dt.date):
        return value + dt.timedelta(days=3650)  # clear of the other alerts (unique per rule and day)
    if isinstance(value, str):
        return value[:-1] + ("0" if value[-1:] != "0" else "1") if value else "x"
    raise TypeError(type(value))


def _edit(store: Store, table: str, record_id: int, field: str, new: object = None) -> object:
    """Set one stored field of one record (to a small change of it by default); returns the old value."""
    columns = getattr(schema, table).c
    with store.engine.connect() as connection:
        old = connection.execute(sa.select(columns[field]).where(columns.id == record_id)).scalar_one()
    if new is None:
        new = "escalate" if field == "action" else _changed(old)  # the CHECK constraint allows three actions only
    with around_triggers(store) as connection:
        connection.execute(sa.update(getattr(schema, table)).where(columns.id == record_id).values({field: new}))
    return old


@pytest.mark.parametrize(
    ("table", "record_id", "seq", "fields"),
    [
        ("alerts", 4, 4 + OFFSET, ALERT_FIELDS + ("entry_hash",)),
        ("reviews", 1, 6 + OFFSET, REVIEW_FIELDS + ("entry_hash",)),
    ],
)
def test_changing_any_stored_field_is_caught(
    ledger: Store, table: str, record_id: int, seq: int, fields: tuple[str, ...]
) -> None:
    # One field at a time: change it, verify, put it back (and check the chain is whole again).
    for field in fields:
        old = _edit(ledger, table, record_id, field)
        report = verify_chain(ledger)
        assert not report.ok, f"a change of {table}.{field} went unnoticed"
        assert (report.first_bad.seq, report.first_bad.table) == (seq, table), (field, report.first_bad)
        assert report.checked == seq - 1
        with around_triggers(ledger) as connection:
            columns = getattr(schema, table).c
            key = columns.id == (record_id + 1000 if field == "id" else record_id)  # _changed adds 1000 to ints
            connection.execute(sa.update(getattr(schema, table)).where(key).values({field: old}))
        assert verify_chain(ledger).ok, f"restoring {table}.{field} did not restore the chain"


def test_a_flipped_byte_in_a_hash_column_of_the_ledger_is_caught(ledger: Store) -> None:
    with around_triggers(ledger) as connection:
        connection.execute(
            sa.text("UPDATE ledger SET entry_hash = :h WHERE seq = :s"), {"h": "0" * 64, "s": 3 + OFFSET}
        )
    report = verify_chain(ledger)
    assert not report.ok and report.first_bad.seq == 3 + OFFSET
    assert "ledger entry disagrees" in report.first_bad.reason


@pytest.mark.parametrize("where", ["record only", "record and its ledger entry"])
def test_a_deleted_record_is_caught(ledger: Store, where: str) -> None:
    with around_triggers(ledger) as connection:
        connection.execute(sa.text("DELETE FROM alerts WHERE seq = :s"), {"s": 3 + OFFSET})
        if where != "record only":
            connection.execute(sa.text("DELETE FROM ledger WHERE seq = :s"), {"s": 3 + OFFSET})
    report = verify_chain(ledger)
    assert not report.ok and report.first_bad.seq == 3 + OFFSET
    assert "deleted" in report.first_bad.reason


def test_a_deleted_first_record_is_caught(ledger: Store) -> None:
    with around_triggers(ledger) as connection:
        connection.execute(sa.text("DELETE FROM events WHERE seq = 1"))  # the portfolio's commitment
        connection.execute(sa.text("DELETE FROM ledger WHERE seq = 1"))
    report = verify_chain(ledger)
    assert not report.ok and report.first_bad.seq == 1


def test_swapped_records_are_caught(ledger: Store) -> None:
    # Exchange the places (seq, prev_hash, entry_hash) of alerts 2 and 3, in the ledger too.
    with around_triggers(ledger) as connection:
        rows = {
            r.id: r
            for r in connection.execute(sa.text("SELECT id, seq, prev_hash, entry_hash FROM alerts WHERE id IN (2, 3)"))
        }
        for table in ("alerts", "ledger"):
            for seq, filler in (
                (rows[2].seq, "a"),
                (rows[3].seq, "b"),
            ):  # park both rows on free values (UNIQUE columns)
                connection.execute(
                    sa.text(f"UPDATE {table} SET seq = :tmp, prev_hash = :p, entry_hash = :h WHERE seq = :seq"),
                    {"tmp": seq + 1_000_000, "p": filler * 64, "h": filler.upper() * 63 + "0", "seq": seq},
                )
            for me, other in ((2, 3), (3, 2)):
                connection.execute(
                    sa.text(f"UPDATE {table} SET seq = :seq, prev_hash = :prev, entry_hash = :own WHERE seq = :tmp"),
                    {
                        "seq": rows[other].seq,
                        "prev": rows[other].prev_hash,
                        "own": rows[other].entry_hash,
                        "tmp": rows[me].seq + 1_000_000,
                    },
                )
    report = verify_chain(ledger)
    assert not report.ok and report.first_bad.seq == 2 + OFFSET


def _forged(ledger: Store) -> dict[str, object]:
    """A copy of alert 6 placed after the head, a week later, with a different value (its hash left stale)."""
    head = chain_head(ledger)
    row = dataclasses.asdict(ledger.get_alert(6).alert)
    return {
        **row,
        "id": 7,
        "seq": head.count + 1,
        "prev_hash": head.head_hash,
        "value": 123.0,
        "window_end": row["window_end"] + dt.timedelta(days=7),
    }


def test_a_forged_record_with_a_made_up_hash_is_caught(ledger: Store) -> None:
    forged = {**_forged(ledger), "entry_hash": "ab" * 32}
    with around_triggers(ledger) as connection:  # plain INSERTs: the triggers would not stop them anyway
        connection.execute(
            sa.insert(schema.ledger).values(
                seq=forged["seq"], kind="alert", prev_hash=forged["prev_hash"], entry_hash=forged["entry_hash"]
            )
        )
        connection.execute(sa.insert(schema.alerts).values(**forged))
    report = verify_chain(ledger)
    assert not report.ok and report.first_bad.seq == forged["seq"] and report.first_bad.record_id == 7
    assert "does not match its hash" in report.first_bad.reason


def test_a_record_inserted_around_the_ledger_is_caught(ledger: Store) -> None:
    forged = _forged(ledger)
    forged["entry_hash"] = entry_hash("alerts", forged)  # well formed, but no ledger entry
    with around_triggers(ledger) as connection:
        connection.execute(sa.insert(schema.alerts).values(**forged))
    report = verify_chain(ledger)
    assert not report.ok and report.first_bad.seq == forged["seq"]
    assert "no ledger entry" in report.first_bad.reason


def test_a_cut_tail_is_caught_only_against_a_head_kept_elsewhere(ledger: Store) -> None:
    kept = chain_head(ledger)
    assert verify_chain(ledger, expect_head=str(kept)).ok
    with around_triggers(ledger) as connection:
        connection.execute(sa.text("DELETE FROM alerts WHERE seq = :s"), {"s": 7 + OFFSET})
        connection.execute(sa.text("DELETE FROM ledger WHERE seq = :s"), {"s": 7 + OFFSET})
    assert verify_chain(ledger).ok  # a chain alone cannot see its tail cut
    by_count = verify_chain(ledger, expect_head=str(kept))
    assert not by_count.ok and by_count.first_bad.seq == 7 + OFFSET and "tail cut" in by_count.first_bad.reason
    by_hash = verify_chain(ledger, expect_head=kept.head_hash)
    assert not by_hash.ok and "not in the archive" in by_hash.first_bad.reason


def test_an_older_head_still_matches_a_grown_archive(ledger: Store, run, rng: np.random.Generator) -> None:
    kept = chain_head(ledger)
    ledger.append_alerts(make_alerts(rng, 3, start="2031-03-01"), run.id)
    assert verify_chain(ledger, expect_head=str(kept)).ok
    assert verify_chain(ledger, expect_head=kept.head_hash).ok
    wrong = f"{kept.count}:{'e' * 64}"
    report = verify_chain(ledger, expect_head=wrong)
    assert not report.ok and report.first_bad.seq == kept.count and "rewritten" in report.first_bad.reason
