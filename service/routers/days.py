"""A portfolio's days and assets: list the pending days, close a day, delist an asset.

Closing a day and delisting an asset take the **ingest** role (or admin): both decide when a
day's prices are final enough to count -- to compute its window and evaluate the rules on it --
which is the feed's business, not the review's. A reviewer judges the alerts a day raises, so
keeping the two apart keeps the one who forces a day through from reviewing what it raised.
Who closed the day (or delisted the asset) is the key's owner, archived in the chained record
(``day_closed``, ``asset_delisted``). The policy is in :mod:`riskshape.daily.ingest`.
"""

from __future__ import annotations

from datetime import date
from typing import Annotated

from fastapi import APIRouter, Path, Response
from starlette.concurrency import run_in_threadpool

from riskshape.daily import IngestReport
from riskshape_service import access
from riskshape_service.convert import pending_out
from riskshape_service.deps import ContextDep, IngestDep, ReaderDep, StoreDep
from riskshape_service.knowledge import KnownAtQuery, knowledge_headers, read_known_at
from riskshape_service.routers import API_PREFIX, errors
from riskshape_service.routers.portfolios import PortfolioName
from riskshape_service.routers.prices import ingest_out
from riskshape_service.schemas import DelistIn, IngestOut, PendingDaysOut
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router"]

AssetCode = Annotated[str, Path(min_length=1, max_length=200, description="the asset's code")]


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``/v1/portfolios/{name}/days`` and ``/v1/portfolios/{name}/assets``."""
    router = APIRouter(prefix=f"{API_PREFIX}/portfolios", tags=["days"])

    @router.get("/{name}/days/pending", response_model=PendingDaysOut, responses=errors(401, 403, 404, 422, 429))
    async def list_pending(
        name: PortfolioName, caller: ReaderDep, store: StoreDep, response: Response, as_known_at: KnownAtQuery = None
    ) -> PendingDaysOut:
        """The days archived that do not count yet (no window, no rule), oldest first, with the assets missing.

        With `as_known_at`, the days pending at that moment, as they stood then (a day completed or
        closed since is listed; a day whose first price came later is not).
        """
        known_at = read_known_at(as_known_at)
        found = await run_in_threadpool(access.pending, store, name, known_at)
        response.headers.update(knowledge_headers(known_at))
        return PendingDaysOut(portfolio=name, items=[pending_out(d) for d in found], count=len(found))

    @router.post("/{name}/days/{day}/close", response_model=IngestOut, responses=errors(401, 403, 404, 409, 429))
    async def close_day(
        name: PortfolioName, day: date, caller: IngestDep, store: StoreDep, context: ContextDep
    ) -> IngestOut:
        """Close a pending day by hand (ingest role): it counts, with the assets still absent missing there.

        The closing is a chained `day_closed` record naming the key's owner; the windows the day (and the
        complete days waiting on it) complete are computed and the rules evaluated, as for an ingest.
        404 if the portfolio has no prices that day; 409 if the day counts already.
        """

        def work() -> IngestReport:
            return context.ingestor.close_day(store, name, day, who=caller.owner)

        report = await run_in_threadpool(work)
        context.metrics.windows.inc(report.windows_computed)
        return ingest_out(report)

    @router.post("/{name}/assets/{asset}/delist", response_model=IngestOut, responses=errors(401, 403, 404, 409, 429))
    async def delist_asset(
        name: PortfolioName, asset: AssetCode, body: DelistIn, caller: IngestDep, store: StoreDep, context: ContextDep
    ) -> IngestOut:
        """Delist an asset after its last trading day (ingest role): later days no longer wait for it.

        The delisting is a chained `asset_delisted` record naming the key's owner; days it held back
        are computed. 422 if the asset is not the portfolio's or has a price after that day; 409 if it
        is delisted already.
        """

        def work() -> IngestReport:
            return context.ingestor.delist(store, name, asset, body.last_trading_day, who=caller.owner)

        report = await run_in_threadpool(work)
        context.metrics.windows.inc(report.windows_computed)
        return ingest_out(report)

    return router
