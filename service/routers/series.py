"""``GET /v1/portfolios/{name}/series``: the summaries series, by date range, chosen summaries, paged.

Pages are served from prepared bytes with an ETag (:mod:`riskshape_service.prepared`).
"""

from dataclasses import dataclass
from datetime import date, datetime
from typing import Annotated

from fastapi import APIRouter, Query, Request, Response
from starlette.concurrency import run_in_threadpool

from riskshape.store import ChangeMarker, FeaturesPage, Store
from riskshape_service import access
from riskshape_service.context import ServiceContext
from riskshape_service.convert import pending_out
from riskshape_service.deps import ReadAccessDep
from riskshape_service.knowledge import KnownAtQuery, knowledge_headers, read_known_at
from riskshape_service.prepared import NOT_MODIFIED, etag_matches, not_modified, prepared_response, series_etag
from riskshape_service.routers import API_PREFIX, MAX_ID, errors
from riskshape_service.routers.portfolios import PortfolioName
from riskshape_service.schemas import SeriesOut, SeriesRow, finite_or_none
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router", "PageQuery", "render_series_page", "render_series_page_known_at"]


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``/v1/portfolios/{name}/series``: the per-window summaries, paged."""
    router = APIRouter(prefix=f"{API_PREFIX}/portfolios", tags=["series"])
    cap = settings.max_page_size

    @router.get(
        "/{name}/series",
        response_model=SeriesOut,
        responses={**errors(401, 403, 404, 422, 429), **NOT_MODIFIED},
    )
    async def series(
        name: PortfolioName,
        request: Request,
        access: ReadAccessDep,
        start: Annotated[date | None, Query(description="first window end (inclusive)")] = None,
        end: Annotated[date | None, Query(description="last window end (inclusive)")] = None,
        summaries: Annotated[list[str] | None, Query(description="summaries to return (repeat); default all")] = None,
        limit: Annotated[int, Query(ge=1, le=cap, description=f"windows per page (at most {cap})")] = min(100, cap),
        offset: Annotated[int, Query(ge=0, le=MAX_ID, description="windows to skip")] = 0,
        as_known_at: KnownAtQuery = None,
    ) -> Response:
        """Per-window summaries under the portfolio's latest configuration, oldest window first.

        Served from bytes prepared once per change of the portfolio's windows, with a strong `ETag`;
        send it back in `If-None-Match` to get `304 Not Modified` while nothing has changed. With
        `as_known_at`, exactly the page riskshape showed at that moment: each window's version then,
        under the latest configuration then, and the days pending then (read for the request, without
        an ETag).
        """
        query = PageQuery(start, end, None if summaries is None else tuple(summaries), limit, offset)
        store, context = access.store, access.context
        known_at = read_known_at(as_known_at)
        if known_at is not None:
            then = await run_in_threadpool(render_series_page_known_at, store, name, context, known_at, query)
            return Response(then, media_type="application/json", headers=knowledge_headers(known_at))
        marker = await context.markers.current(store, name)
        etag = series_etag(marker, query)
        if etag_matches(request.headers.get("if-none-match"), etag):
            return not_modified(etag)
        body = context.prepared.get(("series", name, query), etag)
        if body is None:
            body = await run_in_threadpool(render_series_page, store, name, context, marker, query)
            context.prepared.put(("series", name, query), etag, body)
        response = prepared_response(body, etag)
        response.headers.update(knowledge_headers(None))
        return response

    return router


@dataclass(frozen=True)
class PageQuery:
    """What one page of the series asks for (part of its ETag and of its prepared body's key)."""

    start: date | None
    end: date | None
    summaries: tuple[str, ...] | None
    limit: int
    offset: int


def render_series_page(
    store: Store, name: str, context: ServiceContext, marker: ChangeMarker, query: PageQuery
) -> bytes:
    """The JSON bytes of one page of a portfolio's series, as of ``marker``."""
    page = access.series_page(
        store,
        name,
        context.snapshots,
        marker,
        start=query.start,
        end=query.end,
        columns=None if query.summaries is None else list(query.summaries),
        limit=query.limit,
        offset=query.offset,
    )
    return _page_bytes(store, name, page, query)


def render_series_page_known_at(
    store: Store, name: str, context: ServiceContext, known_at: datetime, query: PageQuery
) -> bytes:
    """The JSON bytes of one page of a portfolio's series exactly as riskshape showed it at ``known_at``,
    its pending days included (those of that moment).
    """
    snapshot = access.snapshot_known_at(store, name, known_at, context.config)
    page = snapshot.page(
        start=query.start,
        end=query.end,
        columns=None if query.summaries is None else list(query.summaries),
        limit=query.limit,
        offset=query.offset,
    )
    return _page_bytes(store, name, page, query, known_at)


def _page_bytes(
    store: Store, name: str, page: FeaturesPage, query: PageQuery, known_at: datetime | None = None
) -> bytes:
    rows = [
        SeriesRow(window_end=stamp.date(), values=[finite_or_none(v) for v in values])
        for stamp, values in zip(page.frame.index, page.frame.to_numpy(dtype=float))
    ]
    following = query.offset + len(rows)
    out = SeriesOut(
        portfolio=name,
        config_hash=page.config_hash,
        columns=[str(c) for c in page.frame.columns],
        rows=rows,
        total=page.total,
        offset=query.offset,
        limit=query.limit,
        next_offset=following if following < page.total else None,
        pending=[pending_out(d) for d in access.pending(store, name, known_at)],
    )
    return out.model_dump_json().encode("utf-8")
