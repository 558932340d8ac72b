"""The console's review pages: the alert queue, an alert with its review form, and the audit page
(verification, head, sign-offs, downloads). The workflow's rules live in :mod:`riskshape.reviews`;
these routes only show its answers.
"""

from __future__ import annotations

import logging
import re
from collections.abc import Callable, Mapping
from typing import Any, TypeVar
from urllib.parse import parse_qsl

from fastapi import APIRouter, Request
from starlette.concurrency import run_in_threadpool
from starlette.responses import RedirectResponse, Response

import riskshape.reviews as reviews
from riskshape import ConflictError, DataError, NotFoundError, RiskshapeError, reproduce_alert, reproduce_alert_now
from riskshape.outputs import collect_review, export_alerts, render_html
from riskshape.outputs.palette import SEVERITIES
from riskshape.selection import to_period
from riskshape.store import Store, verify_chain
from riskshape_service.auth import Permission, may
from riskshape_service.console.alert_views import alert_context
from riskshape_service.console.gate import (
    PREFIX,
    Refusal,
    check_form,
    read_form,
    read_session,
    refuse,
    store_of,
    to_sign_in,
)
from riskshape_service.console.pages import render
from riskshape_service.console.session import Session
from riskshape_service.handlers import status_of
from riskshape_service.logs import LOGGER_NAME

__all__ = ["make_router", "QUEUE_PAGE"]

log = logging.getLogger(LOGGER_NAME)
QUEUE_PAGE = 50
"""Alerts per page of the queue."""
_FILTERS = ("portfolio", "severity", "rule", "status", "start", "end")
T = TypeVar("T")
_FILE_NAME = re.compile(r"[^A-Za-z0-9._-]+")
"""Characters kept in a download's file name (a portfolio's name may hold anything)."""


def _filters(request: Request) -> dict[str, str]:
    """The queue's filters from the query string (empty ones dropped)."""
    return {name: value for name in _FILTERS if (value := request.query_params.get(name, "").strip())}


async def _run(function: Callable[..., T], *args: Any, **kwargs: Any) -> T:
    return await run_in_threadpool(function, *args, **kwargs)


def _may_review(session: Session) -> bool:
    return may(session.role, Permission.review)


def make_router() -> APIRouter:
    """The router of the queue, alert and audit pages (under ``/console``)."""
    router = APIRouter(prefix=PREFIX, include_in_schema=False)

    @router.get("/alerts")
    async def queue(request: Request) -> Response:
        session = await read_session(request)
        if session is None:
            return to_sign_in(request)
        store = store_of(request)
        chosen = _filters(request)
        try:
            offset = max(int(request.query_params.get("offset", "0")), 0)
        except ValueError:
            offset = 0
        portfolios = [p.name for p in await _run(store.list_portfolios)]
        problem, status_code, page = "", 200, None
        try:
            page = await _run(reviews.list_queue, store, limit=QUEUE_PAGE, offset=offset, **chosen)
        except RiskshapeError as err:
            problem, status_code = str(err), status_of(err)
        return render(
            "queue.html",
            session,
            status_code=status_code,
            title="Alert queue",
            page=page,
            chosen=chosen,
            problem=problem,
            portfolios=portfolios,
            severities=tuple(SEVERITIES),
            statuses=reviews.STATUSES,
            page_size=QUEUE_PAGE,
            offset=offset,
        )

    async def alert_page(
        request: Request,
        session: Session,
        alert_id: int,
        *,
        message: str = "",
        problem: str = "",
        status_code: int = 200,
        reproduced: object = None,
        known_now: object = None,
        known_now_problem: str = "",
        typed: dict[str, str] | None = None,
    ) -> Response:
        store = store_of(request)
        try:
            history = await _run(reviews.alert_history, store, alert_id)
        except NotFoundError as err:
            return refuse(Refusal(404, str(err)), session)
        alert = history.alert
        others = (await _run(store.list_alerts, portfolio=alert.portfolio, rule=alert.rule, limit=None)).items
        context = await _run(alert_context, store, alert, tuple(a for a in others if a.id != alert.id))
        actions = reviews.next_actions(history.status)
        four_eyes = history.status == "escalated" and session.owner.strip().casefold() in {
            who.strip().casefold() for who in history.escalated_by
        }
        return render(
            "alert.html",
            session,
            status_code=status_code,
            title=f"Alert {alert.id}",
            history=history,
            alert=alert,
            context=context,
            actions=actions,
            four_eyes=four_eyes,
            may_review=_may_review(session),
            message=message,
            problem=problem,
            reproduced=reproduced,
            known_now=known_now,
            known_now_problem=known_now_problem,
            typed=typed or {},
        )

    @router.get("/alerts/{alert_id}")
    async def alert(request: Request, alert_id: int) -> Response:
        session = await read_session(request)
        if session is None:
            return to_sign_in(request)
        return await alert_page(request, session, alert_id)

    @router.post("/alerts/{alert_id}/review")
    async def review(request: Request, alert_id: int) -> Response:
        session = await read_session(request)
        try:
            form = await read_form(request)
            session = check_form(session, form, Permission.review)
        except Refusal as refusal:
            return refuse(refusal, session)
        store = store_of(request)
        action, comment = form.get("action", ""), form.get("comment", "")
        try:
            await _run(reviews.review_alert, store, alert_id, action, session.owner, comment, role=session.role.value)
        except RiskshapeError as err:
            typed = {"action": action, "comment": comment}
            return await alert_page(
                request, session, alert_id, problem=str(err), status_code=status_of(err), typed=typed
            )
        log.info("console review", extra={"alert_id": alert_id, "action": action, "key_id": session.key_id})
        return RedirectResponse(f"{PREFIX}/alerts/{alert_id}?done={action}", status_code=303)

    @router.post("/alerts/{alert_id}/reproduce")
    async def reproduce(request: Request, alert_id: int) -> Response:
        session = await read_session(request)
        try:
            form = await read_form(request)
            session = check_form(session, form, Permission.read)
        except Refusal as refusal:
            return refuse(refusal, session)
        store = store_of(request)
        try:
            report = await _run(reproduce_alert, store, alert_id)
        except RiskshapeError as err:
            return await alert_page(request, session, alert_id, problem=str(err), status_code=status_of(err))
        # As known now: over the prices after every later correction (whether it would still fire).
        # The confirmation above stands on its own, so a failure here is shown beside it.
        now: object = None
        now_problem = ""
        try:
            now = await _run(reproduce_alert_now, store, alert_id)
        except RiskshapeError as err:
            now_problem = str(err)
        return await alert_page(
            request, session, alert_id, reproduced=report, known_now=now, known_now_problem=now_problem
        )

    @router.get("/audit")
    async def audit(request: Request) -> Response:
        session = await read_session(request)
        if session is None:
            return to_sign_in(request)
        if not _may_review(session):
            return refuse(Refusal(403, "the audit page needs a reviewer or admin key, as the audit API does"), session)
        return await audit_page(request, session)

    async def audit_page(
        request: Request,
        session: Session,
        *,
        message: str = "",
        problem: str = "",
        status_code: int = 200,
        typed: Mapping[str, object] | None = None,
    ) -> Response:
        store = store_of(request)
        verification = await _run(verify_chain, store)
        sign_offs = await _run(reviews.list_sign_offs, store)
        portfolios = [p.name for p in await _run(store.list_portfolios)]
        return render(
            "audit.html",
            session,
            status_code=status_code,
            title="Audit",
            verification=verification,
            sign_offs=sign_offs,
            portfolios=portfolios,
            message=message,
            problem=problem,
            typed=typed or {},
        )

    @router.post("/audit/sign-off")
    async def sign_off(request: Request) -> Response:
        session = await read_session(request)
        try:
            form = await read_form(request)
            session = check_form(session, form, Permission.review)
        except Refusal as refusal:
            return refuse(refusal, session)
        store = store_of(request)
        body = await request.body()
        chosen = [v for k, v in _pairs(body) if k == "portfolio" and v]
        try:
            made = await _run(
                reviews.sign_off,
                store,
                form.get("start", ""),
                form.get("end", ""),
                chosen,
                session.owner,
                role=session.role.value,
            )
        except RiskshapeError as err:
            typed: dict[str, object] = {
                "start": form.get("start", ""),
                "end": form.get("end", ""),
                "portfolios": chosen,
            }
            if isinstance(err, ConflictError):  # the open items, each a link to its review form
                typed["unsettled"] = (
                    await _run(
                        reviews.list_queue,
                        store,
                        status=reviews.UNSETTLED,
                        portfolio=chosen or None,
                        start=form.get("start"),
                        end=form.get("end"),
                        limit=None,
                    )
                ).items
            return await audit_page(request, session, problem=str(err), status_code=status_of(err), typed=typed)
        log.info("console sign-off", extra={"sign_off": made.id, "key_id": session.key_id})
        return await audit_page(
            request,
            session,
            message=f"Period {made.start} to {made.end} signed off by {made.signer} at chain head {made.chain_head}.",
        )

    @router.get("/audit/download")
    async def download(request: Request) -> Response:
        session = await read_session(request)
        if session is None:
            return to_sign_in(request)
        if not _may_review(session):
            return refuse(Refusal(403, "downloads need a reviewer or admin key, as the export API does"), session)
        store = store_of(request)
        what = request.query_params.get("what", "csv")
        start, end = request.query_params.get("start", ""), request.query_params.get("end", "")
        portfolio = request.query_params.get("portfolio") or None
        try:
            name, media, data = await _run(_download, store, what, start, end, portfolio)
        except RiskshapeError as err:
            return await audit_page(request, session, problem=str(err), status_code=status_of(err))
        return Response(
            data,
            media_type=media,
            headers={"Content-Disposition": f'attachment; filename="{name}"', "Cache-Control": "no-store"},
        )

    return router


def _pairs(body: bytes) -> list[tuple[str, str]]:
    """Every field of a URL-encoded body, repeats kept (the portfolios of a sign-off)."""
    return parse_qsl(body.decode("utf-8"), keep_blank_values=True)


def _download(store: Store, what: str, start: str, end: str, portfolio: str | None) -> tuple[str, str, str]:
    """File name, media type and text of a download: the export of alerts (CSV or JSON Lines), of reviews
    (CSV), or the review report (HTML).
    """
    period = to_period(start or None, end or None)
    if period.start is None or period.end is None:
        raise DataError("period: give both start and end of the period to download")
    first, last = period.start, period.end
    stem = _FILE_NAME.sub("-", f"riskshape-{first}-{last}" + (f"-{portfolio}" if portfolio else ""))
    if what == "csv":
        text = export_alerts(store, "csv", start=first, end=last, portfolio=portfolio)
        return f"{stem}.csv", "text/csv; charset=utf-8", text
    if what == "reviews":
        text = export_alerts(store, "csv", what="reviews", start=first, end=last, portfolio=portfolio)
        return f"{stem}-reviews.csv", "text/csv; charset=utf-8", text
    if what == "jsonl":
        text = export_alerts(store, "jsonl", start=first, end=last, portfolio=portfolio)
        return f"{stem}.jsonl", "application/x-ndjson", text
    if what == "report":
        report = collect_review(store, first, last, portfolio=portfolio)
        return f"{stem}-report.html", "text/html; charset=utf-8", render_html(report)
    raise DataError(f"what: {what!r} is not one of csv, reviews, jsonl, report")
