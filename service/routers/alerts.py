"""Alerts: the queue with its filters and counts by status, and one alert with its provenance and review history."""

from datetime import date
from typing import Annotated

from fastapi import APIRouter, Path, Query, Response

from riskshape import DataError
from riskshape.explain import explanation_object, explanation_text
from riskshape.reviews import STATUSES, QueueItem, list_queue, status_of
from riskshape.selection import pick_alias, split_names
from riskshape_service.convert import alert_out, provenance_out, review_out
from riskshape_service.deps import ReaderDep, StoreDep
from riskshape_service.knowledge import KnownAtQuery, knowledge_headers, read_known_at
from riskshape_service.routers import API_PREFIX, MAX_ID, errors
from riskshape_service.schemas import AlertDetailOut, AlertOut, AlertPageOut, StatusCounts
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router", "AlertId", "queue_item_out"]

AlertId = Annotated[int, Path(ge=1, le=MAX_ID, description="alert id")]
SEVERITIES = ("info", "warning", "critical")


def _severities(values: list[str] | None) -> tuple[str, ...] | None:
    names = split_names(values)
    unknown = [n for n in names or () if n not in SEVERITIES]
    if unknown:
        raise DataError(f"severity: {unknown[0]!r} is not one of {', '.join(SEVERITIES)}")
    return names


def queue_item_out(item: QueueItem) -> AlertOut:
    """An alert of the queue with its status and last reviewer."""
    return alert_out(item.alert).model_copy(update={"status": item.status, "last_reviewer": item.last_reviewer})


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``/v1/alerts``: the alert list with its filters, and one alert in detail."""
    router = APIRouter(prefix=f"{API_PREFIX}/alerts", tags=["alerts"])
    cap = settings.max_page_size

    @router.get("", response_model=AlertPageOut, responses=errors(401, 403, 422, 429))
    def list_alerts(
        caller: ReaderDep,
        store: StoreDep,
        response: Response,
        status: Annotated[
            list[str] | None, Query(description=f"{', '.join(STATUSES)}; repeat or comma-separate")
        ] = None,
        portfolio: Annotated[list[str] | None, Query(description="repeat or comma-separate")] = None,
        start: Annotated[date | None, Query(description="window end on or after")] = None,
        end: Annotated[date | None, Query(description="window end on or before")] = None,
        severity: Annotated[
            list[str] | None, Query(description="info, warning, critical; repeat or comma-separate")
        ] = None,
        rule: Annotated[list[str] | None, Query(description="repeat or comma-separate")] = None,
        since: Annotated[date | None, Query(deprecated=True, description="old name of start")] = None,
        until: Annotated[date | None, Query(deprecated=True, description="old name of end")] = None,
        reviewed: Annotated[
            bool | None, Query(deprecated=True, description="old filter: true is every status but open, false is open")
        ] = None,
        limit: Annotated[int, Query(ge=1, le=cap, description=f"alerts per page (at most {cap})")] = min(100, cap),
        offset: Annotated[int, Query(ge=0, le=MAX_ID)] = 0,
        as_known_at: KnownAtQuery = None,
    ) -> AlertPageOut:
        """Archived alerts with their review status: open first, then newest window first; counts by status.

        With `as_known_at`, the queue as it stood then: alerts raised by then, statuses from the
        reviews made by then.
        """
        known_at = read_known_at(as_known_at)
        response.headers.update(knowledge_headers(known_at))
        first = pick_alias("start", start, warn=False, since=since)
        last = pick_alias("end", end, warn=False, until=until)
        if since is not None or until is not None or reviewed is not None:
            response.headers["Deprecation"] = "true"
            response.headers["Warning"] = '299 - "since, until and reviewed are deprecated; use start, end and status"'
        if reviewed is not None and status is None:
            status = ["open"] if not reviewed else [s for s in STATUSES if s != "open"]
        page = list_queue(
            store,
            status=status,
            portfolio=portfolio,
            severity=_severities(severity),
            rule=rule,
            start=first,
            end=last,
            limit=limit,
            offset=offset,
            as_known_at=known_at,
        )
        following = offset + len(page.items)
        return AlertPageOut(
            items=[queue_item_out(i) for i in page.items],
            total=page.total,
            offset=offset,
            limit=limit,
            next_offset=following if following < page.total else None,
            counts=StatusCounts.model_validate(dict(page.counts)),
        )

    @router.get("/{alert_id}", response_model=AlertDetailOut, responses=errors(401, 403, 404, 422, 429))
    def get_alert(
        alert_id: AlertId, caller: ReaderDep, store: StoreDep, response: Response, as_known_at: KnownAtQuery = None
    ) -> AlertDetailOut:
        """One alert, where it came from (configuration, inputs, version, run, chain), and its reviews.

        With `as_known_at`, as it stood then: 404 if it was not raised yet, the reviews made by then.
        """
        known_at = read_known_at(as_known_at)
        detail = store.get_alert(alert_id, as_known_at=known_at)
        response.headers.update(knowledge_headers(known_at))
        last = detail.reviews[-1].reviewer if detail.reviews else None
        return AlertDetailOut(
            alert=alert_out(detail.alert).model_copy(
                update={"status": status_of(detail.reviews), "last_reviewer": last}
            ),
            provenance=provenance_out(detail.alert),
            explanation=explanation_object(detail.alert.explanation),
            explanation_text=explanation_text(detail.alert.explanation),
            status=status_of(detail.reviews),
            reviews=[review_out(r) for r in detail.reviews],
        )

    return router
