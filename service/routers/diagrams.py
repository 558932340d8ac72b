"""``GET /v1/portfolios/{name}/diagrams/{window_end}``: one window's persistence diagram."""

from __future__ import annotations

from datetime import date
from typing import Annotated

from fastapi import APIRouter, Path, Query, Response

from riskshape_service.deps import ReaderDep, StoreDep
from riskshape_service.knowledge import KnownAtQuery, knowledge_headers, read_known_at
from riskshape_service.routers import API_PREFIX, errors
from riskshape_service.routers.portfolios import PortfolioName
from riskshape_service.schemas import DiagramOut
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router"]


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``/v1/portfolios/{name}/diagrams/{window_end}``: one window's persistence diagram."""
    router = APIRouter(prefix=f"{API_PREFIX}/portfolios", tags=["diagrams"])

    @router.get("/{name}/diagrams/{window_end}", response_model=DiagramOut, responses=errors(401, 403, 404, 422, 429))
    def diagram(
        name: PortfolioName,
        window_end: Annotated[date, Path(description="the window's last date (YYYY-MM-DD)")],
        caller: ReaderDep,
        store: StoreDep,
        response: Response,
        dim: Annotated[int, Query(ge=0, le=2, description="homology dimension")] = 1,
        as_known_at: KnownAtQuery = None,
    ) -> DiagramOut:
        """Finite (birth, death) bars of one window in one dimension, under the latest configuration.

        With `as_known_at`, the version of the diagram riskshape showed at that moment (before any
        later correction), under the configuration of the latest run then.
        """
        known_at = read_known_at(as_known_at)
        found = store.read_diagram(name, window_end, dim, as_known_at=known_at)
        response.headers.update(knowledge_headers(known_at))
        return DiagramOut(
            portfolio=found.portfolio,
            window_end=found.window_end,
            dim=found.dim,
            config_hash=found.config_hash,
            run_id=found.run_id,
            n_bars=len(found.bars),
            bars=[(float(b), float(d)) for b, d in found.bars],
        )

    return router
