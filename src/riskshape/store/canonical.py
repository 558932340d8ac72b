"""Canonical serialisation and hashing of ledger records (pure functions).

A record's ``entry_hash`` is the SHA-256 (hex) of the UTF-8 bytes of a JSON object holding the
table name and every stored field of the record except ``entry_hash`` itself, with sorted keys
and no spaces. Values are written so that every backend gives the same bytes: floats as their
``repr`` (shortest round-trip form, as a string), timestamps as UTC ISO 8601 with microseconds
and a ``Z``, dates as ``YYYY-MM-DD``, integers and strings as they are. ``prev_hash`` is part of
the record, which chains each record to the one before (the first points at
:data:`~riskshape.store.records.GENESIS_HASH`).
"""

from __future__ import annotations

import hashlib
import json
import math
from collections.abc import Mapping
from datetime import date, datetime, timezone

__all__ = ["ALERT_FIELDS", "REVIEW_FIELDS", "EVENT_FIELDS", "canonical_bytes", "entry_hash", "canonical_value"]

ALERT_FIELDS = (
    "id",
    "seq",
    "prev_hash",
    "portfolio_id",
    "portfolio",
    "rule",
    "summary",
    "kind",
    "window_end",
    "value",
    "threshold",
    "severity",
    "raised_at",
    "config_hash",
    "inputs_hash",
    "package_version",
    "run_id",
    "explanation",
)
"""Stored fields of an alert that its hash covers (every column but ``entry_hash``)."""

REVIEW_FIELDS = ("id", "seq", "prev_hash", "alert_id", "action", "reviewer", "comment", "created_at")
"""Stored fields of a review that its hash covers (every column but ``entry_hash``)."""

EVENT_FIELDS = (
    "id",
    "seq",
    "prev_hash",
    "kind",
    "portfolio_id",
    "portfolio",
    "subject",
    "payload",
    "actor",
    "recorded_at",
)
"""Stored fields of an event that its hash covers (every column but ``entry_hash``)."""

_FIELDS = {"alerts": ALERT_FIELDS, "reviews": REVIEW_FIELDS, "events": EVENT_FIELDS}


def canonical_value(value: object) -> object:
    """One field in its canonical JSON form (see the module notes).

    Examples
    --------
    >>> from datetime import date, datetime, timedelta, timezone
    >>> canonical_value(0.1), canonical_value(float("nan")), canonical_value(date(2031, 3, 3))
    ('0.1', 'nan', '2031-03-03')

    The same instant gives the same text from any timezone; a naive timestamp is refused:

    >>> canonical_value(datetime(2031, 3, 4, 3, 30, tzinfo=timezone(timedelta(hours=9))))
    '2031-03-03T18:30:00.000000Z'
    >>> canonical_value(datetime(2031, 3, 3))
    Traceback (most recent call last):
    ...
    ValueError: timestamp datetime.datetime(2031, 3, 3, 0, 0) has no timezone
    """
    if value is None or isinstance(value, (bool, str)):
        return value
    if isinstance(value, int):
        return int(value)
    if isinstance(value, float):
        return repr(float(value)) if math.isfinite(value) else str(value)
    if isinstance(value, datetime):
        if value.tzinfo is None:
            raise ValueError(f"timestamp {value!r} has no timezone")
        return value.astimezone(timezone.utc).strftime("%Y-%m-%dT%H:%M:%S.%fZ")
    if isinstance(value, date):
        return value.isoformat()
    if hasattr(value, "item"):  # numpy scalar
        return canonical_value(value.item())
    raise TypeError(f"no canonical form for {type(value).__name__} value {value!r}")


def canonical_bytes(table: str, record: Mapping[str, object]) -> bytes:
    """The bytes hashed for a record of ``table`` (``alerts``, ``reviews`` or ``events``)."""
    payload: dict[str, object] = {"table": table}
    for name in _FIELDS[table]:
        payload[name] = canonical_value(record[name])
    return json.dumps(payload, sort_keys=True, separators=(",", ":"), ensure_ascii=False).encode("utf-8")


def entry_hash(table: str, record: Mapping[str, object]) -> str:
    """SHA-256 (hex) of :func:`canonical_bytes`.

    Examples
    --------
    Sorted keys, no spaces, the table's name included; any changed byte changes the hash:

    >>> from datetime import datetime, timezone
    >>> review = {
    ...     "id": 1,
    ...     "seq": 2,
    ...     "prev_hash": "0" * 64,
    ...     "alert_id": 1,
    ...     "action": "acknowledge",
    ...     "reviewer": "analyst-1",
    ...     "comment": "",
    ...     "created_at": datetime(2031, 3, 3, 18, 30, tzinfo=timezone.utc),
    ... }
    >>> canonical_bytes("reviews", review)  # doctest: +ELLIPSIS
    b'{"action":"acknowledge","alert_id":1,"comment":"","created_at":"2031-03-03T18:30:00.000000Z",...,"table":"reviews"}'
    >>> hashlib.sha256(canonical_bytes("reviews", review)).hexdigest() == entry_hash("reviews", review)
    True
    >>> entry_hash("reviews", review) == entry_hash("reviews", {**review, "comment": " "})
    False
    """
    return hashlib.sha256(canonical_bytes(table, record)).hexdigest()
