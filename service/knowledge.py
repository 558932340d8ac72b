"""The ``as_known_at`` query parameter of the read endpoints: one definition, read and stated once.

A read with ``as_known_at`` answers exactly what riskshape showed at that moment (windows, runs,
alerts and reviews recorded by then; see :func:`riskshape.store.to_known_at`); without it, the
current knowledge. Every read that takes it states the knowledge it shows in the
``X-Riskshape-Known-At`` header (``current`` or the moment, ISO 8601 in UTC), so the body itself
is the same bytes riskshape served then. A bad value is a 422 naming the field and the format.
"""

from __future__ import annotations

from datetime import datetime, timezone
from typing import Annotated

from fastapi import Query

from riskshape.store import KNOWN_AT_FORMAT, to_known_at

__all__ = ["KnownAtQuery", "read_known_at", "KNOWN_AT_HEADER", "knowledge_headers"]

KNOWN_AT_HEADER = "X-Riskshape-Known-At"

KnownAtQuery = Annotated[
    str | None,
    Query(
        max_length=64,
        description=f"answer exactly what riskshape showed at this moment ({KNOWN_AT_FORMAT}); default: now",
    ),
]


def read_known_at(value: str | None) -> datetime | None:
    """The moment of an ``as_known_at`` query value (UTC), or None; a DataError (422) if it does not read."""
    return to_known_at(value, "query 'as_known_at'")


def knowledge_headers(known_at: datetime | None) -> dict[str, str]:
    """The header stating the knowledge a response shows."""
    return {KNOWN_AT_HEADER: "current" if known_at is None else known_at.astimezone(timezone.utc).isoformat()}
