"""Verifying the ledger: recompute every hash, in order, and name the first record that fails.

What is caught: a changed byte in any hashed field of an alert, review or event (its hash no longer
matches), a deleted record (a gap in ``seq``, or a ledger entry without its record), records
swapped or renumbered (``prev_hash`` or the hash breaks), a row inserted around the ledger or a
row whose hash is not the hash of its content. A chain alone cannot see records cut off its tail,
nor a well-formed record appended by someone who follows the algorithm: compare against a head
kept elsewhere (``expect_head``; RFC 9162 calls such a commitment a tree head).

Once the chain verifies, the rows it covers through commitments (runs, prices, features,
diagrams, portfolios) and the API keys are checked against it (:mod:`riskshape.store.coverage`).
"""

from __future__ import annotations

import re
from collections import defaultdict
from collections.abc import Iterator
from typing import Any

import sqlalchemy as sa
from sqlalchemy.engine import Connection

from riskshape.errors import AuditError
from riskshape.store import schema as t
from riskshape.store.canonical import entry_hash
from riskshape.store.coverage import check_coverage
from riskshape.store.merkle import merkle_root
from riskshape.store.records import GENESIS_HASH, BadRecord, Head, VerifyReport

__all__ = ["parse_head", "verify_ledger", "ledger_summary"]

CHUNK = 5000
_HEAD = re.compile(r"^(?:(\d+):)?([0-9a-f]{64})$")
_TABLE_OF_KIND = {"alert": "alerts", "review": "reviews", "event": "events"}


def parse_head(text: str) -> tuple[int | None, str]:
    r"""Read ``HASH`` or ``COUNT:HASH`` (as printed by ``riskshape audit head``).

    Raises
    ------
    AuditError
        If the text has neither form.

    Examples
    --------
    >>> from riskshape.store.records import Head
    >>> parse_head(str(Head(3, "ab" * 32))) == (3, "ab" * 32)
    True
    >>> parse_head(" " + "AB" * 32 + "\n") == (None, "ab" * 32)
    True
    >>> parse_head("3:abc")  # doctest: +ELLIPSIS
    Traceback (most recent call last):
    ...
    riskshape.errors.AuditError: expected head '3:abc' is neither HASH nor COUNT:HASH (64 hex digits, ...)
    """
    match = _HEAD.match(text.strip().lower())
    if match is None:
        raise AuditError(
            f"expected head {text!r} is neither HASH nor COUNT:HASH "
            "(64 hex digits, as printed by 'riskshape audit head')"
        )
    return (int(match.group(1)) if match.group(1) is not None else None), match.group(2)


def ledger_summary(connection: Connection) -> tuple[int, int]:
    """(lowest, highest) seq found in the ledger, alerts and reviews ((1, 0) when all are empty)."""
    lows, highs = [1], [0]
    for table in (t.ledger, t.alerts, t.reviews, t.events):
        low, high = connection.execute(sa.select(sa.func.min(table.c.seq), sa.func.max(table.c.seq))).one()
        if low is not None:
            lows.append(int(low))
            highs.append(int(high))
    return min(lows), max(highs)


Records = dict[int, list[tuple[str, Any]]]


def _chunks(connection: Connection, low: int, high: int) -> Iterator[tuple[int, dict[int, Any], Records]]:
    for start in range(low, high + 1, CHUNK):
        stop = min(start + CHUNK - 1, high)
        entries = {
            int(r.seq): r for r in connection.execute(sa.select(t.ledger).where(t.ledger.c.seq.between(start, stop)))
        }
        records: dict[int, list[tuple[str, Any]]] = defaultdict(list)
        for name, table in (("alerts", t.alerts), ("reviews", t.reviews), ("events", t.events)):
            for row in connection.execute(sa.select(table).where(table.c.seq.between(start, stop))):
                records[int(row.seq)].append((name, row))
        for seq in range(start, stop + 1):
            yield seq, entries, records


def _check(seq: int, entry: Any, found: list[tuple[str, Any]], prev: str) -> tuple[BadRecord | None, str]:
    """Check one position of the ledger; returns (problem or None, this record's hash)."""
    if seq < 1:
        name, row = found[0] if found else ("ledger", None)
        return BadRecord(seq, name, getattr(row, "id", None), "seq below 1: the ledger starts at seq 1"), prev
    if entry is None and not found:
        return BadRecord(
            seq, "ledger", None, "record missing: no ledger entry and no alert, review or event has this seq (deleted?)"
        ), prev
    if len(found) > 1:
        names = ", ".join(f"{n} id {r.id}" for n, r in found)
        return BadRecord(seq, found[0][0], found[0][1].id, f"several records claim this seq ({names})"), prev
    if not found:
        table = _TABLE_OF_KIND.get(entry.kind, str(entry.kind))
        return BadRecord(
            seq, table, None, f"the ledger lists a {entry.kind} here but no {table} row has this seq (deleted?)"
        ), prev
    name, row = found[0]
    if entry is None:
        return BadRecord(
            seq,
            name,
            row.id,
            "no ledger entry for this record (inserted around the ledger, or its ledger entry deleted)",
        ), prev
    if row.prev_hash != prev:
        return BadRecord(
            seq,
            name,
            row.id,
            f"prev_hash {row.prev_hash} is not the hash of the record before "
            f"({prev}): records deleted, reordered or inserted",
        ), prev
    recomputed = entry_hash(name, row._mapping)
    if recomputed != row.entry_hash:
        return BadRecord(
            seq,
            name,
            row.id,
            f"content does not match its hash (stored {row.entry_hash}, "
            f"recomputed {recomputed}): a stored field was changed",
        ), prev
    if _TABLE_OF_KIND.get(entry.kind) != name or entry.prev_hash != row.prev_hash or entry.entry_hash != row.entry_hash:
        return BadRecord(seq, name, row.id, "the ledger entry disagrees with the record (kind or hashes)"), prev
    return None, row.entry_hash


def verify_ledger(connection: Connection, expect_head: str | None = None) -> VerifyReport:
    """Recompute the chain inside one read transaction. See :func:`riskshape.store.verify_chain`."""
    expected = parse_head(expect_head) if expect_head is not None else None
    low, high = ledger_summary(connection)
    prev, checked = GENESIS_HASH, 0
    hashes_at: dict[int, str] = {}
    leaves: list[bytes] = []
    for seq, entries, records in _chunks(connection, low, high):
        problem, prev = _check(seq, entries.get(seq), records.get(seq, []), prev)
        if problem is not None:
            return VerifyReport(
                ok=False, checked=checked, head=Head(checked, prev), first_bad=problem, merkle_root=merkle_root(leaves)
            )
        checked += 1
        leaves.append(bytes.fromhex(prev))
        if (
            expected is not None
            and expected[0] is None
            and prev == expected[1]
            or expected is not None
            and expected[0] == seq
        ):
            hashes_at[seq] = prev
    head = Head(checked, prev)
    root = merkle_root(leaves)
    if expected is not None:
        problem = _against(expected, head, hashes_at)
        if problem is not None:
            return VerifyReport(ok=False, checked=checked, head=head, first_bad=problem, merkle_root=root)
    problem = check_coverage(connection)
    if problem is None:
        from riskshape.store.tails import check_tails  # numpy and pandas load here, not at start

        problem = check_tails(connection)
    if problem is not None:
        return VerifyReport(ok=False, checked=checked, head=head, first_bad=problem, merkle_root=root)
    return VerifyReport(ok=True, checked=checked, head=head, first_bad=None, merkle_root=root)


def _against(expected: tuple[int | None, str], head: Head, hashes_at: dict[int, str]) -> BadRecord | None:
    count, wanted = expected
    hashes_at = {0: GENESIS_HASH, **hashes_at}  # the empty ledger's head is the genesis hash
    if count is None:
        if wanted in hashes_at.values():
            return None
        return BadRecord(
            head.count + 1,
            "ledger",
            None,
            f"the expected head hash {wanted} is not in the archive ({head.count} records): "
            "records cut off the tail, or another archive",
        )
    if head.count < count:
        return BadRecord(
            head.count + 1,
            "ledger",
            None,
            f"the archive holds {head.count} records but the expected head has {count}: "
            f"the last {count - head.count} record(s) are missing (tail cut)",
        )
    if hashes_at.get(count) != wanted:
        return BadRecord(
            count,
            "ledger",
            None,
            f"record {count} has hash {hashes_at.get(count)}, the expected head says {wanted}: "
            "the history up to the head was rewritten",
        )
    return None
