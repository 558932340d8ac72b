"""The fast path of ``GET /v1/portfolios/{name}/latest``: prepared bytes answered before routing.

A plain ASGI middleware, inside the request middleware (so the request id, the caution header,
metrics and the access log apply as to any request) and outside FastAPI's router. It answers
only a request it can answer exactly as the endpoint would, from what the app already holds:

* a key checked against the archive less than ``key_recheck_seconds`` ago, not revoked, whose role
  may read, and whose rate limit has a token left (past half that time, one request starts a check
  of the key in the background, so a key in steady use is checked again before it expires; see
  :mod:`riskshape_service.keycache`);
* the portfolio's change marker, read for this request (:mod:`riskshape_service.freshness`);
* then ``304 Not Modified`` for a matching ``If-None-Match``, or the body prepared at the
  marker's ETag.

Anything else -- no key or one not checked lately, a query string, an unknown portfolio, a body
not yet prepared at this ETag, an empty rate limit, an archive that cannot be read -- goes on to
the endpoint, which answers it (and prepares the body). The route's dependency tree and
validation cost several times the work of a prepared answer; this path skips them, not checks.
"""

from __future__ import annotations

import asyncio
import logging
from dataclasses import dataclass

from starlette.concurrency import run_in_threadpool
from starlette.types import ASGIApp, Receive, Scope, Send

from riskshape import RiskshapeError
from riskshape.store import Store
from riskshape_service.auth import KEY_HEADER, Caller, Permission, Role, may
from riskshape_service.context import ServiceContext
from riskshape_service.knowledge import knowledge_headers
from riskshape_service.logs import LOGGER_NAME
from riskshape_service.prepared import CACHE_HEADERS, etag_matches

__all__ = ["LatestFastPath", "LATEST_ROUTE"]

log = logging.getLogger(LOGGER_NAME)

LATEST_ROUTE = "/v1/portfolios/{name}/latest"
_PREFIX, _SUFFIX = LATEST_ROUTE.split("{name}")
_KEY = KEY_HEADER.lower().encode("latin-1")
_IF_NONE_MATCH = b"if-none-match"
_MAX_NAME = 200  # as PortfolioName
_ROLES = {role.value: role for role in Role}


@dataclass(frozen=True)
class _RouteLabel:
    """What the request middleware reads from ``scope["route"]`` for its metrics and logs."""

    path: str = LATEST_ROUTE


def portfolio_of(path: str) -> str | None:
    """The portfolio name of a ``latest`` path, or None for any other path."""
    if not (path.startswith(_PREFIX) and path.endswith(_SUFFIX)):
        return None
    name = path[len(_PREFIX) : len(path) - len(_SUFFIX)]
    return name if 0 < len(name) <= _MAX_NAME and "/" not in name else None


def _raw(headers: dict[str, str]) -> list[tuple[bytes, bytes]]:
    return [(k.lower().encode("latin-1"), v.encode("latin-1")) for k, v in headers.items()]


_CACHE = _raw(CACHE_HEADERS)
_CURRENT = _raw(knowledge_headers(None))  # what the endpoint adds to a 200 read without as_known_at
_JSON = (b"content-type", b"application/json")


@dataclass(frozen=True)
class _Prepared:
    """The endpoint's answer, sent as two ASGI messages: a 200 with the prepared bytes (the headers of
    :func:`~riskshape_service.prepared.prepared_response` and the knowledge header), or a 304 (those
    of :func:`~riskshape_service.prepared.not_modified`). Built by hand: a Response object cost a
    tenth of the request.
    """

    status: int
    etag: str
    body: bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        headers = [(b"etag", self.etag.encode("latin-1")), *_CACHE]
        if self.status == 200:
            headers += [(b"content-length", str(len(self.body)).encode("latin-1")), _JSON, *_CURRENT]
        await send({"type": "http.response.start", "status": self.status, "headers": headers})
        await send({"type": "http.response.body", "body": self.body})


class LatestFastPath:
    """See the module notes.

    Parameters
    ----------
    app : ASGI app
        The rest of the app (the router), which answers whatever this path does not.
    context : ServiceContext
        The app's state: its archive, key checks, rate limiter, marker reads and prepared bodies.
    """

    def __init__(self, app: ASGIApp, context: ServiceContext) -> None:
        self.app = app
        self.context = context
        self.label = _RouteLabel()
        self._checks: set[asyncio.Task[object]] = set()  # key checks ahead of expiry under way

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        """Answer a ``latest`` request from prepared bytes, or hand the request on."""
        name = None
        if scope["type"] == "http" and scope["method"] == "GET" and not scope.get("query_string"):
            name = portfolio_of(scope["path"])
        answer = None if name is None else await self._answer(scope, name)
        if answer is None:
            await self.app(scope, receive, send)
        else:
            await answer(scope, receive, send)

    async def _answer(self, scope: Scope, name: str) -> _Prepared | None:
        context = self.context
        store = context.store
        token = if_none_match = None
        for header, value in scope["headers"]:
            if header == _KEY:
                token = value.decode("latin-1")
            elif header == _IF_NONE_MATCH:
                if_none_match = value.decode("latin-1")
        if store is None or not token:
            return None
        key, due = context.keys.fresh_and_due(token)
        if due:
            self._check_ahead(store, token)
        role = None if key is None or key.revoked else _ROLES.get(key.role)
        if key is None or role is None or not may(role, Permission.read):
            return None
        try:
            marker = await context.markers.current(store, name)
        except RiskshapeError:
            return None
        etag = context.prepared.latest_etag(marker)
        if etag_matches(if_none_match, etag):
            answer = _Prepared(304, etag, b"")
        else:
            body = context.prepared.get(("latest", name), etag)
            if body is None:
                return None
            answer = _Prepared(200, etag, body)
        if not context.limiter.take(key.key_id).allowed:
            return None  # the endpoint answers 429 with its Retry-After
        state = scope.setdefault("state", {})
        state["caller"] = Caller(key_id=key.key_id, role=role, owner=key.owner)
        scope["route"] = self.label
        return answer

    def _check_ahead(self, store: Store, token: str) -> None:
        """Check a key again in the background while its entry is still trusted (see the module notes)."""
        task: asyncio.Task[object] = asyncio.get_running_loop().create_task(
            run_in_threadpool(self.context.keys.check, store, token)
        )
        self._checks.add(task)
        task.add_done_callback(self._checked)

    def _checked(self, task: asyncio.Task[object]) -> None:
        self._checks.discard(task)
        if not task.cancelled() and task.exception() is not None:  # the entry expires; the endpoint reads it
            log.warning("key check ahead of expiry failed: %s", task.exception())
