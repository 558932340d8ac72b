"""Portfolios: list them, create one (admin), and a portfolio's latest state (prepared bytes, ETag)."""

from __future__ import annotations

from datetime import datetime
from typing import Annotated

from fastapi import APIRouter, Path, Request, Response
from starlette.concurrency import run_in_threadpool

from riskshape.store import ChangeMarker, Store
from riskshape_service import access
from riskshape_service.context import ServiceContext
from riskshape_service.convert import alert_out, pending_out, rule_state_out
from riskshape_service.deps import AdminDep, ReadAccessDep, ReaderDep, StoreDep
from riskshape_service.knowledge import KnownAtQuery, knowledge_headers, read_known_at
from riskshape_service.prepared import NOT_MODIFIED, etag_matches, not_modified, prepared_response
from riskshape_service.routers import API_PREFIX, errors
from riskshape_service.schemas import (
    LatestOut,
    PortfolioCreated,
    PortfolioIn,
    PortfolioList,
    PortfolioOut,
    finite_or_none,
)
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router", "PortfolioName", "render_latest", "render_latest_known_at"]

PortfolioName = Annotated[str, Path(min_length=1, max_length=200, description="portfolio name")]


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``/v1/portfolios``: list, create (admin) and each portfolio's latest state."""
    router = APIRouter(prefix=f"{API_PREFIX}/portfolios", tags=["portfolios"])

    @router.get("", response_model=PortfolioList, responses=errors(401, 403, 429))
    def list_portfolios(caller: ReaderDep, store: StoreDep) -> PortfolioList:
        """Every portfolio, by name."""
        found = store.list_portfolios()
        return PortfolioList(items=[PortfolioOut(name=p.name, created_at=p.created_at) for p in found])

    @router.post("", response_model=PortfolioCreated, status_code=201, responses=errors(401, 403, 409, 413, 422, 429))
    def create_portfolio(body: PortfolioIn, caller: AdminDep, store: StoreDep) -> PortfolioCreated:
        """Create an empty portfolio (admin); then post its prices."""
        made = store.create_portfolio(body.name)
        return PortfolioCreated(portfolio=PortfolioOut(name=made.name, created_at=made.created_at))

    @router.get(
        "/{name}/latest",
        response_model=LatestOut,
        responses={**errors(401, 403, 404, 429), **NOT_MODIFIED},
    )
    async def latest(
        name: PortfolioName, request: Request, access: ReadAccessDep, as_known_at: KnownAtQuery = None
    ) -> Response:
        """The last window: its summaries, where each alert rule stands, and the alerts still active.

        Served from bytes prepared once per change of the archive, with a strong `ETag`; send it back
        in `If-None-Match` to get `304 Not Modified` while nothing has changed. With `as_known_at`,
        exactly the state riskshape showed at that moment, its pending days included (read for the
        request, without an ETag).
        """
        store, context = access.store, access.context
        known_at = read_known_at(as_known_at)
        if known_at is not None:
            then = await run_in_threadpool(render_latest_known_at, store, name, context, known_at)
            return Response(then, media_type="application/json", headers=knowledge_headers(known_at))
        marker = await context.markers.current(store, name)
        etag = context.prepared.latest_etag(marker)
        if etag_matches(request.headers.get("if-none-match"), etag):
            return not_modified(etag)
        body = context.prepared.get(("latest", name), etag)
        if body is None:
            body = await run_in_threadpool(render_latest, store, name, context, marker)
            context.prepared.put(("latest", name), etag, body)
        response = prepared_response(body, etag)
        response.headers.update(knowledge_headers(None))
        return response

    return router


def render_latest(store: Store, name: str, context: ServiceContext, marker: ChangeMarker) -> bytes:
    """The JSON bytes of a portfolio's latest state, as of ``marker``."""
    return _latest_bytes(store, name, access.latest_state(store, name, context.snapshots, marker))


def render_latest_known_at(store: Store, name: str, context: ServiceContext, known_at: datetime) -> bytes:
    """The JSON bytes of a portfolio's latest state exactly as riskshape showed it at ``known_at``,
    its pending days included (those of that moment).
    """
    state = access.latest_state_known_at(store, name, known_at, context.config)
    return _latest_bytes(store, name, state, known_at)


def _latest_bytes(store: Store, name: str, state: access.LatestState, known_at: datetime | None = None) -> bytes:
    out = LatestOut(
        portfolio=state.portfolio,
        config_hash=state.config_hash,
        n_windows=state.n_windows,
        window_end=state.window_end,
        values={k: finite_or_none(v) for k, v in state.values.items()},
        rules=[rule_state_out(s) for s in state.rules],
        active_alerts=[alert_out(a) for a in state.active_alerts],
        pending=[pending_out(d) for d in access.pending(store, name, known_at)],
    )
    return out.model_dump_json().encode("utf-8")
