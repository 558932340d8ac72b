"""``POST /v1/alerts/{alert_id}/reviews``: acknowledge, escalate, dismiss or close an alert (reviewer).

Dismissing and escalating need a comment (422 without); an action that does not apply to the
alert's status, or the escalating reviewer closing (four eyes), is a 409.
"""

from __future__ import annotations

from fastapi import APIRouter

from riskshape.reviews import alert_history, review_alert
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
        responses=errors(401, 403, 404, 409, 413, 422, 429),
    )
    def post_review(alert_id: AlertId, body: ReviewIn, caller: ReviewerDep, store: StoreDep) -> ReviewCreated:
        """Append a review; the reviewer recorded is the owner of the key, never a field of the body."""
        record = review_alert(store, alert_id, body.action, caller.owner, body.comment, role=caller.role.value)
        return ReviewCreated(review=review_out(record), status=alert_history(store, alert_id).status)

    return router
