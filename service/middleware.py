"""The request middleware: request ids, the caution header, access logs, metrics, the last-resort
500, the early refusal of bodies declared too large, the headers that make browsers and proxies
treat every reply safely, the refusal of cross-origin requests, and the JSON depth limit.

Every reply carries ``X-Content-Type-Options: nosniff``, ``X-Frame-Options: DENY`` and (unless the
page sets its own policy) ``Content-Security-Policy: frame-ancestors 'none'``, ``Referrer-Policy:
same-origin``, and ``Cache-Control: no-store`` unless the route chose its own caching: the
``latest`` state and the series pages carry ``private, no-cache`` with their ETag (a client or a
private cache may keep them but must revalidate each time, which is what the 304 path serves; a
shared proxy keeps nothing). A request from a browser page of another origin (an ``Origin`` header
whose host is not the one addressed) is refused with 403 unless that origin is listed in
``cors_origins``; a listed origin gets the CORS headers, preflight included.

It is a plain ASGI middleware (no buffering of responses), placed outermost among the app's own
middleware so that every response -- including a 413 from the body limit and a 500 from a bug --
carries ``X-Riskshape-Caution`` and ``X-Request-Id``. Bodies are counted as they stream by
Starlette's :class:`~starlette.middleware.body_limit.RequestBodyLimitMiddleware`, which sits just
inside this one; a body whose ``Content-Length`` already exceeds the limit is refused here before
a byte of it is read.
"""

from __future__ import annotations

import json
import logging
import random
import re
import time
from typing import Any
from urllib.parse import urlsplit

import numpy as np
from starlette.datastructures import Headers
from starlette.types import ASGIApp, Message, Receive, Scope, Send

from riskshape import CAUTION
from riskshape_service.logs import LOGGER_NAME, REQUEST_ID
from riskshape_service.metrics import ServiceMetrics

__all__ = [
    "RequestContextMiddleware",
    "CAUTION_HEADER",
    "CAUTION_HEADER_VALUE",
    "REQUEST_ID_HEADER",
    "request_id_of",
    "error_body",
    "JsonDepthMiddleware",
    "SAFETY_HEADERS",
    "json_depth",
    "new_request_id",
]

CAUTION_HEADER = "X-Riskshape-Caution"
CAUTION_HEADER_VALUE = "not investment advice"
REQUEST_ID_HEADER = "X-Request-Id"
_METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "PATCH", "DELETE", "OPTIONS"})
_GOOD_ID = re.compile(r"^[A-Za-z0-9._-]{1,64}$")
log = logging.getLogger(LOGGER_NAME)

SAFETY_HEADERS: tuple[tuple[bytes, bytes], ...] = (
    (b"x-content-type-options", b"nosniff"),
    (b"x-frame-options", b"DENY"),
    (b"content-security-policy", b"frame-ancestors 'none'"),
    (b"referrer-policy", b"same-origin"),
    (b"cache-control", b"no-store"),
)
"""Headers added to every reply that does not set its own value of that header."""
_CORS_METHODS = b"GET, HEAD, POST, PUT, PATCH, DELETE, OPTIONS"
_CORS_HEADERS = b"X-Riskshape-Key, Content-Type, If-None-Match, X-Request-Id"
_JSON_STRING = re.compile(rb'"(?:[^"\\]|\\.)*"')


def request_id_of(scope: Scope) -> str:
    """The id of the request being served (set by the middleware)."""
    return str(scope.get("state", {}).get("request_id") or REQUEST_ID.get() or "-")


def error_body(detail: str, request_id: str, **more: Any) -> dict[str, Any]:
    """The JSON object of every error response: a message, the request id and the caution."""
    return {"detail": detail, "request_id": request_id, **more, "caution": CAUTION}


def new_request_id() -> str:
    """A fresh request id: 32 random hex digits (uuid4's length; from :func:`random.getrandbits`,
    reseeded in each forked process, as ids need to be unique, not secret, and ``uuid4`` reads the
    operating system's entropy on every request).
    """
    return f"{random.getrandbits(128):032x}"


def _route_label(scope: Scope) -> str:
    route = scope.get("route")
    path = getattr(route, "path", None)
    return str(path) if path else "unmatched"


class RequestContextMiddleware:
    """See the module notes.

    Parameters
    ----------
    app : ASGI app
    metrics : ServiceMetrics
    max_body_bytes : int
        Bodies declaring a larger ``Content-Length`` get 413 at once.
    cors_origins : tuple of str
        Origins whose browser pages may call the service (others get 403).
    """

    def __init__(
        self, app: ASGIApp, metrics: ServiceMetrics, max_body_bytes: int, cors_origins: tuple[str, ...] = ()
    ) -> None:
        self.app = app
        self.metrics = metrics
        self.max_body_bytes = max_body_bytes
        self.cors_origins = frozenset(o.rstrip("/") for o in cors_origins)
        self._instruments: dict[tuple[str, str, int], tuple[Any, Any]] = {}

    def _observe(self, method: str, route: str, code: int, elapsed: float) -> None:
        """Count the request and its latency (each label set's instruments looked up once, then kept)."""
        key = (method, route, code)
        held = self._instruments.get(key)
        if held is None:  # bounded: methods, route templates and status codes are finite sets
            held = (self.metrics.requests.labels(method, route, str(code)), self.metrics.latency.labels(method, route))
            self._instruments[key] = held
        held[0].inc()
        held[1].observe(elapsed)

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        """Serve one ASGI connection; HTTP requests get the id, caution, limit, log and metrics."""
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        headers = Headers(scope=scope)
        given = headers.get(REQUEST_ID_HEADER, "")
        request_id = given if _GOOD_ID.match(given) else new_request_id()
        scope.setdefault("state", {})["request_id"] = request_id
        token = REQUEST_ID.set(request_id)
        started = time.perf_counter()
        status = {"code": 500, "sent": False}
        origin = headers.get("origin")
        # "null" is what a browser sends from a page whose referrer policy is no-referrer (the
        # console's own forms, which carry their CSRF token): it names no other origin to refuse
        cross = origin not in (None, "null") and urlsplit(origin).netloc != headers.get("host", "")
        allowed = cross and origin is not None and origin.rstrip("/") in self.cors_origins

        async def send_with_context(message: Message) -> None:
            if message["type"] == "http.response.start":
                status["code"], status["sent"] = int(message["status"]), True
                raw = [(k, v) for k, v in message.get("headers", []) if k.lower() != b"x-riskshape-caution"]
                present = {k.lower() for k, _ in raw}
                raw += [(k, v) for k, v in SAFETY_HEADERS if k not in present]
                raw += [
                    (CAUTION_HEADER.lower().encode(), CAUTION_HEADER_VALUE.encode()),
                    (REQUEST_ID_HEADER.lower().encode(), request_id.encode()),
                ]
                if allowed and origin is not None:
                    raw += [(b"access-control-allow-origin", origin.encode("latin-1")), (b"vary", b"Origin")]
                message = {**message, "headers": raw}
            await send(message)

        try:
            declared = _content_length(headers)
            if cross and not allowed:
                await self._reply(
                    send_with_context,
                    403,
                    error_body(
                        f"requests from pages of origin {origin!r} are refused; the service's operator can allow "
                        "that origin with RISKSHAPE_CORS_ORIGINS",
                        request_id,
                    ),
                )
            elif allowed and scope.get("method") == "OPTIONS" and "access-control-request-method" in headers:
                await send_with_context(
                    {
                        "type": "http.response.start",
                        "status": 204,
                        "headers": [
                            (b"access-control-allow-methods", _CORS_METHODS),
                            (b"access-control-allow-headers", _CORS_HEADERS),
                            (b"access-control-max-age", b"600"),
                        ],
                    }
                )
                await send_with_context({"type": "http.response.body", "body": b""})
            elif declared is not None and declared > self.max_body_bytes:
                await self._reply(
                    send_with_context,
                    413,
                    error_body(
                        f"request body of {declared} bytes exceeds the limit of {self.max_body_bytes} bytes; "
                        "send less data per request",
                        request_id,
                    ),
                )
            else:
                await self.app(scope, receive, send_with_context)
        except Exception:  # the last resort: log it whole, answer without a trace
            log.exception("unhandled error while serving %s %s", scope.get("method"), scope.get("path"))
            if not status["sent"]:
                await self._reply(
                    send_with_context,
                    500,
                    error_body(f"internal error; the service logged it under request id {request_id}", request_id),
                )
        finally:
            elapsed = time.perf_counter() - started
            route = _route_label(scope)
            method = str(scope.get("method", "-"))
            method = method if method in _METHODS else "other"  # bounded label values
            self._observe(method, route, int(status["code"]), elapsed)
            if log.isEnabledFor(logging.INFO):  # the access log (off below info, as under the benchmark)
                caller = scope.get("state", {}).get("caller")
                log.info(
                    "request",
                    extra={
                        "method": method,
                        "path": scope.get("path"),
                        "route": route,
                        "status": status["code"],
                        "duration_ms": round(elapsed * 1000, 3),
                        "key_id": getattr(caller, "key_id", None),
                        "client": (scope.get("client") or ("-",))[0],
                    },
                )
            REQUEST_ID.reset(token)

    @staticmethod
    async def _reply(send: Send, code: int, body: dict[str, Any]) -> None:
        payload = json.dumps(body).encode("utf-8")
        await send(
            {
                "type": "http.response.start",
                "status": code,
                "headers": [
                    (b"content-type", b"application/json"),
                    (b"content-length", str(len(payload)).encode()),
                ],
            }
        )
        await send({"type": "http.response.body", "body": payload})


def _content_length(headers: Headers) -> int | None:
    value = headers.get("content-length")
    if value is None:
        return None
    try:
        return int(value)
    except ValueError:
        return None


def json_depth(raw: bytes) -> int:
    """The deepest nesting of arrays and objects in JSON bytes, counted without parsing them.

    Brackets inside strings do not count. For bytes that are not JSON the count means little, but
    it is never below the nesting a parser would meet.

    Parameters
    ----------
    raw : bytes
        A request body.

    Returns
    -------
    int
        0 for a scalar, 1 for ``[]``, 2 for ``[[1]]``, ...
    """
    if b"[" not in raw and b"{" not in raw:
        return 0
    codes = np.frombuffer(_JSON_STRING.sub(b"", raw), dtype=np.uint8)
    step = ((codes == 0x5B) | (codes == 0x7B)).astype(np.int32) - ((codes == 0x5D) | (codes == 0x7D))
    return int(np.cumsum(step).max(initial=0))


class JsonDepthMiddleware:
    """Refuse (422) a JSON body nested deeper than ``max_depth``, before anything parses it.

    It sits inside the body-size limit, so the body it reads is already bounded. Parsers recurse
    once per level of nesting; a body of 1,000 nested arrays would otherwise reach Python's
    recursion limit inside the parser.

    Parameters
    ----------
    app : ASGI app
    max_depth : int
    """

    def __init__(self, app: ASGIApp, max_depth: int) -> None:
        self.app = app
        self.max_depth = max_depth

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        """Read a JSON body whole, measure its depth, then refuse it or hand it on unchanged."""
        media = Headers(scope=scope).get("content-type", "") if scope["type"] == "http" else ""
        kind = media.split(";")[0].strip().lower()
        if not (kind == "application/json" or kind.endswith("+json")):
            await self.app(scope, receive, send)
            return
        chunks: list[bytes] = []
        more = True
        while more:
            message = await receive()
            if message["type"] != "http.request":
                break
            chunks.append(message.get("body", b""))
            more = message.get("more_body", False)
        body = b"".join(chunks)
        depth = json_depth(body)
        if depth > self.max_depth:
            await RequestContextMiddleware._reply(
                send,
                422,
                error_body(
                    f"request body: JSON nested {depth} levels deep, beyond the limit of {self.max_depth} "
                    "(RISKSHAPE_MAX_JSON_DEPTH); a prices body nests 4 deep, send a flatter document",
                    request_id_of(scope),
                ),
            )
            return
        sent = False

        async def replay() -> Message:
            nonlocal sent
            if not sent:
                sent = True
                return {"type": "http.request", "body": body, "more_body": False}
            return await receive()

        await self.app(scope, replay, send)
