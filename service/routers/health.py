"""``GET /v1/health``: whether the service is up and can read the archive (no key needed)."""

from __future__ import annotations

from fastapi import APIRouter
from fastapi.responses import JSONResponse

from riskshape import RiskshapeError, __version__
from riskshape_service.access import store_status
from riskshape_service.deps import ContextDep
from riskshape_service.routers import API_PREFIX, errors
from riskshape_service.schemas import HealthOut, StoreStatus
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router"]


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``/v1/health``: service version and archive status, no key needed."""
    router = APIRouter(prefix=API_PREFIX, tags=["health"])

    @router.get(
        "/health",
        response_model=HealthOut,
        responses={503: {"model": HealthOut, "description": "The archive cannot be read"}, **errors()},
    )
    def health(context: ContextDep) -> HealthOut | JSONResponse:
        """Service version and archive status; 503 when the archive cannot be read."""
        store = context.store
        if store is None:
            status = StoreStatus(ok=False, detail=context.store_error)
        else:
            try:
                store_status(store)
                status = StoreStatus(ok=True, dialect=store.dialect, revision=store.revision)
            except RiskshapeError as err:
                status = StoreStatus(ok=False, dialect=store.dialect, revision=store.revision, detail=str(err))
        body = HealthOut(status="ok" if status.ok else "degraded", version=__version__, store=status)
        if not status.ok:
            return JSONResponse(body.model_dump(mode="json"), status_code=503)
        return body

    return router
