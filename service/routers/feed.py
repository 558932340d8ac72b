"""``POST /v1/prices``: one day (or more) for many portfolios in one request (ingest or admin).

The body names each row's portfolio: JSON ``{"rows": [{portfolio, date, asset, price}, ...]}`` or
CSV text with a ``portfolio`` column (long ``portfolio,date,asset,price`` or wide
``portfolio,date,A,B,...``). Each portfolio is validated and ingested on its own
(:func:`riskshape.daily.ingest_many`) and answers for itself: one portfolio's bad data, or an
unknown portfolio, is refused alone and the others are taken. The answer is 200 with one item
per portfolio, each saying what was archived.
"""

from __future__ import annotations

from typing import Annotated

import pandas as pd
from fastapi import APIRouter, HTTPException, Query, Request
from starlette.concurrency import run_in_threadpool

from riskshape.daily import PortfolioOutcome, ingest_many, split_feed
from riskshape_service.bodies import CSV_SOURCE, JSON_SOURCE, table_from_csv
from riskshape_service.deps import ContextDep, IngestDep, StoreDep
from riskshape_service.routers import API_PREFIX, errors
from riskshape_service.routers.prices import ingest_out, json_body, media_type
from riskshape_service.schemas import FeedIn, FeedItemOut, FeedOut
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router", "feed_table"]

PORTFOLIO_COLUMN = "portfolio"
CSV_EXAMPLE = "portfolio,date,asset,price\nfund-a,2031-03-03,QY01,101.5\nfund-b,2031-03-03,QJ01,98.25\n"
FEED_BODY = {
    "required": True,
    "content": {
        "application/json": {"schema": {"$ref": "#/components/schemas/FeedIn"}},
        "text/csv": {
            "schema": {
                "type": "string",
                "description": "a portfolio column, then long (date, asset, price) or wide (date, one column per "
                "asset) CSV, one header line",
            },
            "example": CSV_EXAMPLE,
        },
    },
}


def feed_table(body: FeedIn) -> pd.DataFrame:
    """The raw long table of a JSON many-portfolio body (dates as ISO text, missing prices as NaN)."""
    return pd.DataFrame(
        {
            "portfolio": [r.portfolio for r in body.rows],
            "date": [r.date.isoformat() for r in body.rows],
            "asset": [r.asset for r in body.rows],
            "price": [float("nan") if r.price is None else float(r.price) for r in body.rows],
        }
    )


def _item(outcome: PortfolioOutcome) -> FeedItemOut:
    return FeedItemOut(
        portfolio=outcome.portfolio,
        archived=outcome.report is not None,
        result=None if outcome.report is None else ingest_out(outcome.report, outcome.warnings),
        error=outcome.error,
    )


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``POST /v1/prices``: many portfolios' prices in one request."""
    router = APIRouter(prefix=API_PREFIX, tags=["prices"])

    @router.post(
        "/prices",
        response_model=FeedOut,
        openapi_extra={"requestBody": FEED_BODY},
        responses=errors(401, 403, 413, 415, 422, 429),
    )
    async def post_feed(
        request: Request,
        caller: IngestDep,
        store: StoreDep,
        context: ContextDep,
        correction: Annotated[
            bool, Query(description="archive prices that differ from archived ones as corrections")
        ] = False,
    ) -> FeedOut:
        """Prices for many portfolios (a `portfolio` on every row); each portfolio answers for itself.

        Each portfolio's rows are validated and ingested as `POST /v1/portfolios/{name}/prices` would
        (days count once complete, pending days wait, idempotent, 409-worthy revisions refused without
        `correction=true`, data-quality findings in the portfolio's `warnings`). A portfolio refused -- bad
        rows, an unknown asset, a conflict, no such portfolio, a data-quality finding under `[checks] quality
        = "refuse"` -- archives nothing and has its message in `error`; the others are taken.
        """
        media = media_type(request)
        raw = await request.body()
        if media == "application/json" or media.endswith("+json"):
            table, source = feed_table(json_body(raw, FeedIn)), JSON_SOURCE
        elif media == "text/csv":
            table = await run_in_threadpool(
                table_from_csv,
                raw,
                PORTFOLIO_COLUMN,
                max_assets=settings.max_request_assets,
                max_rows=settings.max_request_rows,
            )
            source = CSV_SOURCE
        else:
            raise HTTPException(
                status_code=415,
                detail=f"content type {media or 'none'!r} is not accepted; send application/json or text/csv",
            )

        def work() -> tuple[PortfolioOutcome, ...]:
            feed = split_feed(table, source)
            return ingest_many(store, feed, context.ingestor, correction=correction)

        outcomes = await run_in_threadpool(work)
        for outcome in outcomes:
            if outcome.report is not None:
                context.metrics.windows.inc(outcome.report.windows_computed)
                context.metrics.price_cells.labels("added").inc(outcome.report.prices_added)
        items = [_item(o) for o in outcomes]
        return FeedOut(items=items, count=len(items), refused=sum(not i.archived for i in items))

    return router
