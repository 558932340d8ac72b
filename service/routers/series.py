"""``GET /v1/portfolios/{name}/series``: the summaries series, by date range, chosen summaries, paged."""

from datetime import date
from typing import Annotated

from fastapi import APIRouter, Query

from riskshape_service import access
from riskshape_service.deps import ContextDep, ReaderDep, StoreDep
from riskshape_service.routers import API_PREFIX, MAX_ID, errors
from riskshape_service.routers.portfolios import PortfolioName
from riskshape_service.schemas import SeriesOut, SeriesRow, finite_or_none
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router"]


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``/v1/portfolios/{name}/series``: the per-window summaries, paged."""
    router = APIRouter(prefix=f"{API_PREFIX}/portfolios", tags=["series"])
    cap = settings.max_page_size

    @router.get("/{name}/series", response_model=SeriesOut, responses=errors(401, 403, 404, 422, 429))
    def series(
        name: PortfolioName,
        caller: ReaderDep,
        store: StoreDep,
        context: ContextDep,
        start: Annotated[date | None, Query(description="first window end (inclusive)")] = None,
        end: Annotated[date | None, Query(description="last window end (inclusive)")] = None,
        summaries: Annotated[list[str] | None, Query(description="summaries to return (repeat); default all")] = None,
        limit: Annotated[int, Query(ge=1, le=cap, description=f"windows per page (at most {cap})")] = min(100, cap),
        offset: Annotated[int, Query(ge=0, le=MAX_ID, description="windows to skip")] = 0,
    ) -> SeriesOut:
        """Per-window summaries under the portfolio's latest configuration, oldest window first."""
        page = access.series_page(
            store, name, context.snapshots, start=start, end=end, columns=summaries, limit=limit, offset=offset
        )
        rows = [
            SeriesRow(window_end=stamp.date(), values=[finite_or_none(v) for v in values])
            for stamp, values in zip(page.frame.index, page.frame.to_numpy(dtype=float))
        ]
        following = offset + len(rows)
        return SeriesOut(
            portfolio=name,
            config_hash=page.config_hash,
            columns=[str(c) for c in page.frame.columns],
            rows=rows,
            total=page.total,
            offset=offset,
            limit=limit,
            next_offset=following if following < page.total else None,
        )

    return router
