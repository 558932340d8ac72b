"""The request middleware: request ids, the caution header, access logs, metrics, the last-resort
500, and the early refusal of bodies declared too large.

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
import re
import time
import uuid
from typing import Any

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
]

CAUTION_HEADER = "X-Riskshape-Caution"
CAUTION_HEADER_VALUE = "not investment advice"
REQUEST_ID_HEADER = "X-Request-Id"
_METHODS = frozenset({"GET", "HEAD", "POST", "PUT", "PATCH", "DELETE", "OPTIONS"})
_GOOD_ID = re.compile(r"^[A-Za-z0-9._-]{1,64}$")
log = logging.getLogger(LOGGER_NAME)


def request_id_of(scope: Scope) -> str:
    """The id of the request being served (set by the middleware)."""
    return str(scope.get("state", {}).get("request_id") or REQUEST_ID.get() or "-")


def error_body(detail: str, request_id: str, **more: Any) -> dict[str, Any]:
    """The JSON object of every error response: a message, the request id and the caution."""
    return {"detail": detail, "request_id": request_id, **more, "caution": CAUTION}


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
    """

    def __init__(self, app: ASGIApp, metrics: ServiceMetrics, max_body_bytes: int) -> None:
        self.app = app
        self.metrics = metrics
        self.max_body_bytes = max_body_bytes

    async def __call__(self, scope: Scope, receive: Receive, send: Send) -> None:
        """Serve one ASGI connection; HTTP requests get the id, caution, limit, log and metrics."""
        if scope["type"] != "http":
            await self.app(scope, receive, send)
            return
        headers = Headers(scope=scope)
        given = headers.get(REQUEST_ID_HEADER, "")
        request_id = given if _GOOD_ID.match(given) else uuid.uuid4().hex
        scope.setdefault("state", {})["request_id"] = request_id
        token = REQUEST_ID.set(request_id)
        started = time.perf_counter()
        status = {"code": 500, "sent": False}

        async def send_with_context(message: Message) -> None:
            if message["type"] == "http.response.start":
                status["code"], status["sent"] = int(message["status"]), True
                raw = [(k, v) for k, v in message.get("headers", []) if k.lower() != b"x-riskshape-caution"]
                raw += [
                    (CAUTION_HEADER.lower().encode(), CAUTION_HEADER_VALUE.encode()),
                    (REQUEST_ID_HEADER.lower().encode(), request_id.encode()),
                ]
                message = {**message, "headers": raw}
            await send(message)

        try:
            declared = _content_length(headers)
            if declared is not None and declared > self.max_body_bytes:
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
            self.metrics.requests.labels(method, route, str(status["code"])).inc()
            self.metrics.latency.labels(method, route).observe(elapsed)
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
