"""``GET /v1/export/alerts``: alerts or reviews as CSV or JSON Lines for programs (reviewer or admin)."""

from __future__ import annotations

from datetime import date
from functools import partial
from typing import Annotated, Literal

from fastapi import APIRouter, Query
from fastapi.responses import Response
from starlette.concurrency import run_in_threadpool

from riskshape.outputs import export_alerts
from riskshape.selection import pick_alias
from riskshape_service.deps import ReviewerDep, StoreDep
from riskshape_service.knowledge import KnownAtQuery, knowledge_headers, read_known_at
from riskshape_service.routers import API_PREFIX, errors
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router", "MEDIA_TYPES"]

MEDIA_TYPES = {"csv": "text/csv; charset=utf-8", "jsonl": "application/x-ndjson"}


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``/v1/export/alerts``: alerts as CSV or JSON Lines (reviewer or admin)."""
    router = APIRouter(prefix=f"{API_PREFIX}/export", tags=["export"])

    @router.get(
        "/alerts",
        response_class=Response,
        responses={
            200: {
                "description": "The export",
                "content": {
                    "text/csv": {"schema": {"type": "string"}},
                    "application/x-ndjson": {"schema": {"type": "string"}},
                },
            },
            **errors(401, 403, 404, 422, 429),
        },
    )
    async def export(
        caller: ReviewerDep,
        store: StoreDep,
        format: Annotated[Literal["csv", "jsonl"], Query(description="csv or jsonl")] = "csv",
        what: Annotated[Literal["alerts", "reviews"], Query(description="one row per alert, or per review")] = "alerts",
        start: Annotated[date | None, Query(description="window end on or after")] = None,
        end: Annotated[date | None, Query(description="window end on or before")] = None,
        portfolio: Annotated[list[str] | None, Query(description="repeat or comma-separate")] = None,
        status: Annotated[list[str] | None, Query(description="repeat or comma-separate")] = None,
        since: Annotated[date | None, Query(alias="from", deprecated=True, description="old name of start")] = None,
        until: Annotated[date | None, Query(alias="to", deprecated=True, description="old name of end")] = None,
        as_known_at: KnownAtQuery = None,
    ) -> Response:
        """Every matching alert (or review) with its hashes and status: a header row first, the caution in a
        column, exact values; CSV cells made safe for spreadsheets; JSON Lines one record per line.

        With `as_known_at`, exactly the export riskshape gave at that moment; every record states
        the knowledge it shows in `known_at`.
        """
        known_at = read_known_at(as_known_at)
        first = pick_alias("start", start, warn=False, **{"from": since})
        last = pick_alias("end", end, warn=False, to=until)
        text = await run_in_threadpool(
            partial(
                export_alerts,
                store,
                format,
                what=what,
                start=first,
                end=last,
                portfolio=portfolio,
                status=status,
                as_known_at=known_at,
            )
        )
        name = f"riskshape-{what}.{format}"
        headers = {"Content-Disposition": f'attachment; filename="{name}"', **knowledge_headers(known_at)}
        if since is not None or until is not None:
            headers["Deprecation"] = "true"
            headers["Warning"] = '299 - "from and to are deprecated; use start and end"'
        return Response(text, media_type=MEDIA_TYPES[format], headers=headers)

    return router
