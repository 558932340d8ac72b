"""One router per resource; ``make_router(settings)`` in each module builds it."""

from __future__ import annotations

from typing import Any

from riskshape_service.schemas import ErrorOut

__all__ = ["errors", "MAX_ID", "API_PREFIX"]

API_PREFIX = "/v1"
MAX_ID = 2_147_483_647
"""Largest id accepted in a path (ids are 32-bit integers on every backend)."""

_DESCRIPTIONS = {
    400: "Refused by the archive",
    401: "No valid API key in the X-Riskshape-Key header",
    403: "The key's role may not do this",
    404: "No such portfolio, window, alert or endpoint",
    409: "Conflicts with what is archived",
    413: "Request body over the size limit",
    415: "Unsupported content type",
    422: "Invalid input (the message names the field or row and the value received)",
    429: "Rate limit of the key reached (see Retry-After)",
    500: "Internal error (logged under the request id)",
}


def errors(*codes: int) -> dict[int | str, dict[str, Any]]:
    """The ``responses=`` entries for these error codes, plus 422 (any parameter may be invalid) and 500."""
    return {code: {"model": ErrorOut, "description": _DESCRIPTIONS[code]} for code in sorted(set(codes) | {422, 500})}
