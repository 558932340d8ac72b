"""Knowledge time: which archived version of a window a read answers with.

A window's features and diagrams are archived by a run; a correction archives a window again, as
a new version, by a later run. Two times describe every value: the window's end (valid time) and
the moment riskshape knew it, the ``created_at`` of the run that archived it (knowledge time).
A read answers with the latest version (current knowledge) by default, and with ``as_known_at``
with the latest version whose run was recorded at or before that moment: exactly what was shown
then.
"""

from __future__ import annotations

from datetime import datetime, timezone
from typing import Any

import sqlalchemy as sa

from riskshape.errors import DataError
from riskshape.store import schema as t

__all__ = ["to_known_at", "KNOWN_AT_FORMAT", "current_version", "known_runs"]

KNOWN_AT_FORMAT = "ISO 8601 with a timezone, e.g. 2026-03-02T17:30:00Z or 2026-03-02T18:30:00+01:00"


def to_known_at(value: object, what: str = "as_known_at") -> datetime | None:
    """A timezone-aware moment (UTC) from a datetime or an ISO 8601 text; None stays None.

    Parameters
    ----------
    value : datetime, str or None
        The moment; a text must carry its timezone (``Z`` or ``+HH:MM``).
    what : str
        The field's name, for the message.

    Returns
    -------
    datetime or None
        In UTC.

    Raises
    ------
    DataError
        If the value is not a moment with a timezone (the message says how to write one).

    Examples
    --------
    >>> to_known_at("2026-03-02T18:30:00+01:00").isoformat()
    '2026-03-02T17:30:00+00:00'
    """
    if value is None:
        return None
    if isinstance(value, datetime):
        stamp = value
    else:
        try:  # ISO 8601 (Python 3.11 reads the Z suffix and the basic format too)
            stamp = datetime.fromisoformat(str(value).strip())
        except ValueError:
            raise DataError(f"{what}: cannot read {value!r} as a moment; write it as {KNOWN_AT_FORMAT}") from None
    if stamp.tzinfo is None:
        raise DataError(f"{what}: {value!r} has no timezone; write it as {KNOWN_AT_FORMAT}")
    return stamp.astimezone(timezone.utc)


def known_runs(known_at: datetime | None) -> Any:
    """A subquery of the ids of the runs recorded at or before ``known_at`` (None: every run)."""
    query = sa.select(t.runs.c.id)
    if known_at is not None:
        query = query.where(t.runs.c.created_at <= known_at)
    return query


def current_version(table: sa.Table, known_at: datetime | None, *, by_dim: bool = False) -> Any:
    """The condition keeping, of each window (and dimension), only the version in force at ``known_at``.

    The version of the highest run id among the runs known then (run ids grow with ``created_at``:
    runs are recorded under the archive's write lock).
    """
    other = table.alias("newer")
    same = [
        other.c.portfolio_id == table.c.portfolio_id,
        other.c.config_hash == table.c.config_hash,
        other.c.window_end == table.c.window_end,
    ]
    if by_dim:
        same.append(other.c.dim == table.c.dim)
    if known_at is not None:
        same.append(other.c.run_id.in_(known_runs(known_at)))
    latest = sa.select(sa.func.max(other.c.run_id)).where(*same).scalar_subquery()
    return table.c.run_id == latest
