"""Alerts: list them with filters, and one alert with its provenance and reviews."""

from datetime import date
from typing import Annotated

from fastapi import APIRouter, Path, Query

from riskshape.explain import explanation_object, explanation_text
from riskshape.types import Severity
from riskshape_service.convert import alert_out, provenance_out, review_out
from riskshape_service.deps import ReaderDep, StoreDep
from riskshape_service.routers import API_PREFIX, MAX_ID, errors
from riskshape_service.schemas import AlertDetailOut, AlertPageOut
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router", "AlertId"]

AlertId = Annotated[int, Path(ge=1, le=MAX_ID, description="alert id")]


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``/v1/alerts``: the alert list with its filters, and one alert in detail."""
    router = APIRouter(prefix=f"{API_PREFIX}/alerts", tags=["alerts"])
    cap = settings.max_page_size

    @router.get("", response_model=AlertPageOut, responses=errors(401, 403, 422, 429))
    def list_alerts(
        caller: ReaderDep,
        store: StoreDep,
        portfolio: Annotated[str | None, Query(min_length=1, max_length=200)] = None,
        since: Annotated[date | None, Query(description="window end on or after")] = None,
        until: Annotated[date | None, Query(description="window end on or before")] = None,
        severity: Annotated[list[Severity] | None, Query(description="repeat for several")] = None,
        rule: Annotated[str | None, Query(min_length=1, max_length=80)] = None,
        reviewed: Annotated[bool | None, Query(description="true: with a review; false: without")] = None,
        limit: Annotated[int, Query(ge=1, le=cap, description=f"alerts per page (at most {cap})")] = min(100, cap),
        offset: Annotated[int, Query(ge=0, le=MAX_ID)] = 0,
    ) -> AlertPageOut:
        """Archived alerts, oldest window first, filtered."""
        page = store.list_alerts(
            portfolio=portfolio,
            since=since,
            until=until,
            severity=severity or None,
            rule=rule,
            reviewed=reviewed,
            limit=limit,
            offset=offset,
        )
        following = offset + len(page.items)
        return AlertPageOut(
            items=[alert_out(a) for a in page.items],
            total=page.total,
            offset=offset,
            limit=limit,
            next_offset=following if following < page.total else None,
        )

    @router.get("/{alert_id}", response_model=AlertDetailOut, responses=errors(401, 403, 404, 422, 429))
    def get_alert(alert_id: AlertId, caller: ReaderDep, store: StoreDep) -> AlertDetailOut:
        """One alert, where it came from (configuration, inputs, version, run, chain), and its reviews."""
        detail = store.get_alert(alert_id)
        return AlertDetailOut(
            alert=alert_out(detail.alert),
            provenance=provenance_out(detail.alert),
            explanation=explanation_object(detail.alert.explanation),
            explanation_text=explanation_text(detail.alert.explanation),
            reviews=[review_out(r) for r in detail.reviews],
        )

    return router
