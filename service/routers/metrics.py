"""``GET /metrics``: the Prometheus text format (any valid key)."""

from __future__ import annotations

from fastapi import APIRouter
from fastapi.responses import Response

from riskshape_service.deps import ContextDep, ReaderDep
from riskshape_service.metrics import CONTENT_TYPE_LATEST
from riskshape_service.routers import errors
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router"]


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``/metrics``: the service's counters in the Prometheus text format."""
    router = APIRouter(tags=["metrics"])

    @router.get(
        "/metrics",
        response_class=Response,
        responses={
            200: {"description": "Prometheus text format", "content": {"text/plain": {"schema": {"type": "string"}}}},
            **errors(401, 403, 429),
        },
    )
    def metrics(caller: ReaderDep, context: ContextDep) -> Response:
        """Requests, latencies, windows computed, alerts raised, price cells ingested, rate-limited requests."""
        return Response(context.metrics.render(), media_type=CONTENT_TYPE_LATEST)

    return router
