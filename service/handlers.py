"""One mapping from errors to HTTP answers; no answer ever carries a stack trace.

=========================  ======
riskshape error            status
=========================  ======
DataError, ConfigError     422
AccessError                403
NotFoundError              404
ConflictError              409
any other RiskshapeError   400
request validation         422
anything else              500 (logged with its traceback under the request id)
=========================  ======

Every body is a JSON object ``{"detail": ..., "request_id": ..., "caution": ...}``; validation
errors add ``errors``, one entry per bad field.
"""

from __future__ import annotations

import logging
from typing import Any

from fastapi import FastAPI, Request
from fastapi.exceptions import RequestValidationError
from fastapi.responses import JSONResponse
from starlette.exceptions import HTTPException as StarletteHTTPException

from riskshape.errors import (
    AccessError,
    ConfigError,
    ConflictError,
    DataError,
    NotFoundError,
    RiskshapeError,
)
from riskshape_service.logs import LOGGER_NAME
from riskshape_service.middleware import error_body, request_id_of

__all__ = ["install_handlers", "status_of", "describe_validation"]

log = logging.getLogger(LOGGER_NAME)
_MAX_SHOWN = 80


def status_of(err: RiskshapeError) -> int:
    """The HTTP status of one of riskshape's own errors (see the module table)."""
    if isinstance(err, (DataError, ConfigError)):
        return 422
    if isinstance(err, AccessError):
        return 403
    if isinstance(err, NotFoundError):
        return 404
    if isinstance(err, ConflictError):
        return 409
    return 400


def _shown(value: Any) -> str:
    text = repr(value)
    return text if len(text) <= _MAX_SHOWN else text[: _MAX_SHOWN - 3] + "..."


def describe_validation(errors: Any) -> list[dict[str, str]]:
    """Pydantic/FastAPI validation errors as ``{"field", "message"}`` pairs, the value received shown
    (cut to a few dozen characters).
    """
    described = []
    for problem in errors:
        field = ".".join(str(p) for p in problem.get("loc", ()))
        message = str(problem.get("msg", "invalid value"))
        ctx = problem.get("ctx") or {}
        if problem.get("type") == "json_invalid" and "error" in ctx:
            message = f"malformed JSON ({ctx['error']})"
        elif "input" in problem and problem.get("type") not in ("missing", "json_invalid"):
            message += f" (got {_shown(problem['input'])})"
        described.append({"field": field, "message": message})
    return described


def _json(
    request: Request, status: int, detail: str, headers: dict[str, str] | None = None, **more: Any
) -> JSONResponse:
    return JSONResponse(error_body(detail, request_id_of(request.scope), **more), status_code=status, headers=headers)


async def _riskshape_error(request: Request, err: Exception) -> JSONResponse:
    assert isinstance(err, RiskshapeError)
    return _json(request, status_of(err), str(err))


async def _validation_error(request: Request, err: Exception) -> JSONResponse:
    assert isinstance(err, RequestValidationError)
    errors = describe_validation(err.errors())
    detail = "; ".join(f"{e['field']}: {e['message']}" for e in errors) or "invalid request"
    return _json(request, 422, detail, errors=errors)


async def _http_error(request: Request, err: Exception) -> JSONResponse:
    assert isinstance(err, StarletteHTTPException)
    detail = err.detail if isinstance(err.detail, str) else str(err.detail)
    if err.status_code == 413:
        limit = request.scope.get("starlette.max_body_size")
        detail = f"request body exceeds the limit of {limit} bytes; send less data per request"
    elif err.status_code == 404 and detail == "Not Found":
        detail = f"no endpoint at {request.url.path}; see /docs for the API"
    elif err.status_code == 400 and detail == "There was an error parsing the body":
        status = 422  # FastAPI's answer to a JSON body that is not UTF-8 text; malformed JSON is a 422 here
        return _json(request, status, "malformed JSON (the body is not UTF-8 text); send UTF-8 encoded JSON")
    elif err.status_code == 405:
        detail = f"method {request.method} is not allowed on {request.url.path}; see /docs"
    return _json(request, err.status_code, detail, headers=getattr(err, "headers", None))


async def _unexpected(request: Request, err: Exception) -> JSONResponse:
    request_id = request_id_of(request.scope)
    log.error("unhandled error", exc_info=(type(err), err, err.__traceback__))
    return _json(request, 500, f"internal error; the service logged it under request id {request_id}")


def install_handlers(app: FastAPI) -> None:
    """Register the handlers of the module table on ``app``."""
    app.add_exception_handler(RiskshapeError, _riskshape_error)
    app.add_exception_handler(RequestValidationError, _validation_error)
    app.add_exception_handler(StarletteHTTPException, _http_error)
    app.add_exception_handler(Exception, _unexpected)
