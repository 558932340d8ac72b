"""Structured logs: one JSON object per line, carrying the id of the request being served.

The request id lives in a :class:`contextvars.ContextVar` set by the request middleware, so
every record logged while a request is served (by the service or by the library underneath)
names it without being passed around.
"""

from __future__ import annotations

import json
import logging
import sys
from contextvars import ContextVar
from datetime import datetime, timezone
from typing import Any

__all__ = ["REQUEST_ID", "JsonFormatter", "RequestIdFilter", "configure_logging", "stamp_request_ids", "LOGGER_NAME"]

LOGGER_NAME = "riskshape.service"
REQUEST_ID: ContextVar[str | None] = ContextVar("riskshape_request_id", default=None)

# attributes every LogRecord has; anything else was passed with ``extra=`` and is logged as a field
_STANDARD = set(logging.LogRecord("", 0, "", 0, "", None, None).__dict__) | {"message", "asctime", "taskName"}


class JsonFormatter(logging.Formatter):
    """Format a record as one line of JSON: time (UTC, ISO 8601), level, logger, message, request id,
    the fields given with ``extra=`` and, for errors, the exception type and traceback.
    """

    def format(self, record: logging.LogRecord) -> str:
        """The record as one line of JSON."""
        entry: dict[str, Any] = {
            "time": datetime.fromtimestamp(record.created, tz=timezone.utc).isoformat(timespec="milliseconds"),
            "level": record.levelname.lower(),
            "logger": record.name,
            "message": record.getMessage(),
        }
        request_id = getattr(record, "request_id", None) or REQUEST_ID.get()
        if request_id is not None:
            entry["request_id"] = request_id
        for key, value in record.__dict__.items():
            if key not in _STANDARD and key not in entry:
                entry[key] = value
        if record.exc_info and record.exc_info[0] is not None:
            entry["exception"] = record.exc_info[0].__name__
            entry["traceback"] = self.formatException(record.exc_info)
        return json.dumps(entry, default=str, ensure_ascii=False)


class RequestIdFilter(logging.Filter):
    """Stamp each record with the current request id when it is logged (so a record formatted
    later, or elsewhere, still names its request).
    """

    def filter(self, record: logging.LogRecord) -> bool:
        """Set ``record.request_id`` where it is unset; always keep the record."""
        if getattr(record, "request_id", None) is None:
            record.request_id = REQUEST_ID.get()
        return True


def stamp_request_ids() -> None:
    """Attach a :class:`RequestIdFilter` to the service's logger (once per process)."""
    logger = logging.getLogger(LOGGER_NAME)
    if not any(isinstance(f, RequestIdFilter) for f in logger.filters):
        logger.addFilter(RequestIdFilter())


def configure_logging(level: str = "info") -> None:
    """Send the service's logs (and uvicorn's) to stderr as JSON lines.

    Called by ``riskshape serve``; an app made by ``create_app`` alone logs through the standard
    logging tree (so tests can capture it). Idempotent: the handler is installed once per logger.

    Parameters
    ----------
    level : str
        Level name for the service's logger (``debug``, ``info``, ``warning``, ...).
    """
    for name in (LOGGER_NAME, "uvicorn", "uvicorn.error"):
        logger = logging.getLogger(name)
        logger.setLevel(level.upper())
        if not any(getattr(h, "_riskshape_json", False) for h in logger.handlers):
            handler = logging.StreamHandler(sys.stderr)
            handler.setFormatter(JsonFormatter())
            handler._riskshape_json = True  # type: ignore[attr-defined]
            logger.addHandler(handler)
            logger.propagate = False
