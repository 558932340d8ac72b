"""``GET /v1/export/alerts``: alerts for review as CSV or JSON Lines, the caution first (reviewer or admin)."""

from __future__ import annotations

from datetime import date
from typing import Annotated, Literal

from fastapi import APIRouter, Query
from fastapi.responses import Response
from starlette.concurrency import run_in_threadpool

from riskshape.outputs import export_alerts
from riskshape_service.deps import ReviewerDep, StoreDep
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
        since: Annotated[date | None, Query(alias="from", description="window end on or after")] = None,
        until: Annotated[date | None, Query(alias="to", description="window end on or before")] = None,
        portfolio: Annotated[str | None, Query(min_length=1, max_length=200)] = None,
    ) -> Response:
        """Every matching alert with its hashes and review status; CSV cells made safe for spreadsheets."""
        text = await run_in_threadpool(export_alerts, store, format, since=since, until=until, portfolio=portfolio)
        name = f"riskshape-alerts.{format}"
        return Response(
            text, media_type=MEDIA_TYPES[format], headers={"Content-Disposition": f'attachment; filename="{name}"'}
        )

    return router
