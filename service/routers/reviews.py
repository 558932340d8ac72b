"""``POST /v1/alerts/{alert_id}/reviews``: acknowledge, dismiss or escalate an alert (reviewer)."""

from __future__ import annotations

from fastapi import APIRouter

from riskshape_service.convert import review_out
from riskshape_service.deps import ReviewerDep, StoreDep
from riskshape_service.routers import API_PREFIX, errors
from riskshape_service.routers.alerts import AlertId
from riskshape_service.schemas import ReviewCreated, ReviewIn
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router"]


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``POST /v1/alerts/{alert_id}/reviews``: append a review to an alert (reviewer)."""
    router = APIRouter(prefix=f"{API_PREFIX}/alerts", tags=["reviews"])

    @router.post(
        "/{alert_id}/reviews",
        response_model=ReviewCreated,
        status_code=201,
        responses=errors(401, 403, 404, 413, 422, 429),
    )
    def post_review(alert_id: AlertId, body: ReviewIn, caller: ReviewerDep, store: StoreDep) -> ReviewCreated:
        """Append a review; the reviewer recorded is the owner of the key, never a field of the body."""
        record = store.append_review(alert_id, body.action, caller.owner, body.comment)
        return ReviewCreated(review=review_out(record))

    return router
