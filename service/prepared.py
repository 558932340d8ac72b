"""Prepared response bodies: the JSON bytes of a portfolio's latest state and series pages, rendered
once per change of the archive and served as they are, with a strong ``ETag``.

Consistency rule: every request reads the portfolio's change marker
(:func:`riskshape.store.change_marker`: latest run, highest window row, ledger head; one indexed
query) after it arrives, and its ETag and body follow from that marker. So a run or a review
archived before a request arrives -- through this worker or any other over the same archive -- is
seen by that request; nothing is shared between workers but the archive. A body is rendered from
reads made after its marker was read, so it is never older than its ETag says (at worst newer,
and then the next request, with the newer marker, renders it again).

The ETag is derived from the marker, the package version and what was asked (the page's query),
so it changes when a run or a review is archived, and with it the body; ``If-None-Match`` with a
matching tag gets ``304 Not Modified`` and no body (the caution header is on every response).
"""

from __future__ import annotations

import functools
import hashlib
import threading
from collections import OrderedDict
from collections.abc import Hashable
from typing import Any

from starlette.responses import Response

from riskshape import __version__
from riskshape.store import ChangeMarker

__all__ = [
    "PreparedBodies",
    "latest_etag",
    "series_etag",
    "etag_matches",
    "prepared_response",
    "not_modified",
    "CACHE_HEADERS",
    "NOT_MODIFIED",
]

CACHE_HEADERS = {"Cache-Control": "private, no-cache", "Vary": "X-Riskshape-Key"}
"""Clients may keep a body but must revalidate it (If-None-Match) each time; shared caches must not keep it."""

NOT_MODIFIED: dict[int | str, dict[str, Any]] = {
    304: {"description": "Not Modified: the If-None-Match header names the current ETag (no body)"}
}
"""The ``responses=`` entry of the endpoints served from prepared bytes."""


def _tag(*parts: object) -> str:
    digest = hashlib.sha256(repr((__version__, *parts)).encode("utf-8")).hexdigest()
    return f'"{digest[:40]}"'


def latest_etag(marker: ChangeMarker) -> str:
    """The strong ETag of a portfolio's latest state: its runs, windows and the ledger head."""
    return _tag("latest", marker.portfolio, marker.series_key, marker.days_key, marker.ledger_count, marker.ledger_hash)


def series_etag(marker: ChangeMarker, query: Hashable) -> str:
    """The strong ETag of one page of a portfolio's series (``query``: what the page asked for)."""
    return _tag("series", marker.portfolio, marker.series_key, marker.days_key, query)


def etag_matches(if_none_match: str | None, etag: str) -> bool:
    """Whether an ``If-None-Match`` header value names ``etag`` (weak comparison, RFC 9110 13.1.2)."""
    if not if_none_match:
        return False
    if if_none_match.strip() == "*":
        return True
    for candidate in if_none_match.split(","):
        tag = candidate.strip()
        if tag.startswith("W/"):
            tag = tag[2:]
        if tag == etag:
            return True
    return False


def prepared_response(body: bytes, etag: str) -> Response:
    """A 200 answer with prepared JSON bytes and their ETag."""
    return Response(body, media_type="application/json", headers={"ETag": etag, **CACHE_HEADERS})


def not_modified(etag: str) -> Response:
    """A 304 answer (no body) for a client that holds the body of ``etag``."""
    return Response(status_code=304, headers={"ETag": etag, **CACHE_HEADERS})


class PreparedBodies:
    """Rendered bodies by what was asked, each with the ETag it was rendered for (least recently
    used dropped first beyond ``size``), and the latest-state ETags of the markers seen lately.

    Parameters
    ----------
    size : int
        Bodies kept at most (a latest state is a few kB; a page of 100 windows some 10 kB), and
        markers whose ETag is kept (the ``latest_etag`` attribute, a :func:`functools.lru_cache`).
    """

    def __init__(self, size: int = 512) -> None:
        if size < 1:
            raise ValueError(f"size must be >= 1, got {size}")
        self.size = size
        self._held: OrderedDict[Hashable, tuple[str, bytes]] = OrderedDict()
        self._lock = threading.Lock()
        # A marker stands for many requests (every poller of its round): its ETag is hashed once.
        self.latest_etag = functools.lru_cache(maxsize=size)(latest_etag)

    def get(self, what: Hashable, etag: str) -> bytes | None:
        """The body rendered for ``what`` at ``etag``, or None (never rendered, or rendered at another)."""
        with self._lock:
            held = self._held.get(what)
            if held is None or held[0] != etag:
                return None
            self._held.move_to_end(what)
            return held[1]

    def put(self, what: Hashable, etag: str, body: bytes) -> None:
        """Keep the body rendered for ``what`` at ``etag`` (replacing one of an earlier ETag)."""
        with self._lock:
            self._held[what] = (etag, body)
            self._held.move_to_end(what)
            while len(self._held) > self.size:
                self._held.popitem(last=False)

    def __len__(self) -> int:
        with self._lock:
            return len(self._held)
