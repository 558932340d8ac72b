"""Portfolios: list them, create one (admin), and a portfolio's latest state."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Path

from riskshape_service import access
from riskshape_service.convert import alert_out, rule_state_out
from riskshape_service.deps import AdminDep, ContextDep, ReaderDep, StoreDep
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

__all__ = ["make_router", "PortfolioName"]

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

    @router.get("/{name}/latest", response_model=LatestOut, responses=errors(401, 403, 404, 429))
    def latest(name: PortfolioName, caller: ReaderDep, store: StoreDep, context: ContextDep) -> LatestOut:
        """The last window: its summaries, where each alert rule stands, and the alerts still active."""
        state = access.latest_state(store, name, context.snapshots)
        return LatestOut(
            portfolio=state.portfolio,
            config_hash=state.config_hash,
            n_windows=state.n_windows,
            window_end=state.window_end,
            values={k: finite_or_none(v) for k, v in state.values.items()},
            rules=[rule_state_out(s) for s in state.rules],
            active_alerts=[alert_out(a) for a in state.active_alerts],
        )

    return router
