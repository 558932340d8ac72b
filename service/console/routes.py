"""The console's pages that read: sign-in and sign-out, the overview and a portfolio page."""

from __future__ import annotations

import logging
import secrets

from fastapi import APIRouter, Request
from starlette.concurrency import run_in_threadpool
from starlette.responses import RedirectResponse, Response

import riskshape.outputs.palette as palette
from riskshape import NotFoundError
from riskshape_service.auth import Role
from riskshape_service.console import portfolio_views
from riskshape_service.console.gate import (
    PREFIX,
    Refusal,
    read_form,
    read_session,
    refuse,
    safe_next,
    signer_of,
    store_of,
    to_sign_in,
)
from riskshape_service.console.pages import render
from riskshape_service.console.session import COOKIE_NAME, SESSION_SECONDS, csrf_matches, new_session, tokens_match
from riskshape_service.context import ServiceContext
from riskshape_service.logs import LOGGER_NAME

__all__ = ["make_router", "SIGN_IN_COOKIE"]

log = logging.getLogger(LOGGER_NAME)
SIGN_IN_COOKIE = "riskshape_console_sign_in"
"""Holds the sign-in form's one-time CSRF token (the form posts the same value back)."""


def _context(request: Request) -> ServiceContext:
    context: ServiceContext = request.app.state.context
    return context


def _cookie(response: Response, request: Request, name: str, value: str, max_age: int) -> None:
    response.set_cookie(
        name,
        value,
        max_age=max_age,
        path=PREFIX,
        httponly=True,
        samesite="strict",
        secure=request.url.scheme == "https",
    )


def make_router() -> APIRouter:
    """The router of the console's reading pages (under ``/console``)."""
    router = APIRouter(prefix=PREFIX, include_in_schema=False)

    @router.get("/palette.css")
    async def palette_css() -> Response:
        return Response(palette.css(), media_type="text/css", headers={"Cache-Control": "max-age=3600"})

    @router.get("/sign-in")
    async def sign_in_page(request: Request, next: str | None = None) -> Response:
        token = secrets.token_urlsafe(32)
        page = render("sign_in.html", None, title="Sign in", csrf=token, next=safe_next(next), message="")
        _cookie(page, request, SIGN_IN_COOKIE, token, 15 * 60)
        return page

    @router.post("/sign-in")
    async def sign_in(request: Request) -> Response:
        try:
            form = await read_form(request)
        except Refusal as refusal:
            return refuse(refusal, None)
        expected = request.cookies.get(SIGN_IN_COOKIE, "")
        target = safe_next(form.get("next"))
        if not tokens_match(expected, form.get("csrf")):
            return refuse(Refusal(403, "the sign-in form is out of date; reload the sign-in page and try again"), None)
        token = form.get("key", "").strip()
        store = store_of(request)
        key = await run_in_threadpool(store.lookup_api_key, token) if token else None
        if key is None or key.revoked:
            log.info("console sign-in refused", extra={"reason": "unknown key" if key is None else "revoked key"})
            fresh = secrets.token_urlsafe(32)
            page = render(
                "sign_in.html",
                None,
                status_code=401,
                title="Sign in",
                csrf=fresh,
                next=target,
                message="That key is not valid (or was revoked). Check it, or ask an admin for a new one.",
            )
            _cookie(page, request, SIGN_IN_COOKIE, fresh, 15 * 60)
            return page
        session = new_session(key.key_id, Role(key.role), key.owner)
        log.info("console sign-in", extra={"key_id": key.key_id, "role": key.role})
        answer = RedirectResponse(target, status_code=303)
        _cookie(answer, request, COOKIE_NAME, signer_of(request).dumps(session), SESSION_SECONDS)
        answer.delete_cookie(SIGN_IN_COOKIE, path=PREFIX)
        return answer

    @router.post("/sign-out")
    async def sign_out(request: Request) -> Response:
        session = await read_session(request)
        try:
            form = await read_form(request)
        except Refusal as refusal:
            return refuse(refusal, session)
        if session is not None and not csrf_matches(session, form.get("csrf")):
            return refuse(Refusal(403, "the form's security token is missing or out of date; reload the page"), None)
        answer = RedirectResponse(f"{PREFIX}/sign-in", status_code=303)
        answer.delete_cookie(COOKIE_NAME, path=PREFIX, httponly=True, samesite="strict")
        return answer

    @router.get("")
    async def bare(request: Request) -> Response:
        return RedirectResponse(f"{PREFIX}/", status_code=307)

    @router.get("/")
    async def overview(request: Request) -> Response:
        session = await read_session(request)
        if session is None:
            return to_sign_in(request)
        store, context = store_of(request), _context(request)

        def gather() -> tuple[list[portfolio_views.PortfolioCard], dict[str, dict[str, int]]]:
            names = [p.name for p in store.list_portfolios()]
            cards = [portfolio_views.portfolio_card(store, name, context.snapshots) for name in names]
            return cards, {name: portfolio_views.open_by_severity(store, name) for name in names}

        cards, open_counts = await run_in_threadpool(gather)
        return render("overview.html", session, title="Portfolios", cards=cards, open_counts=open_counts)

    @router.get("/portfolios/{name}")
    async def portfolio(request: Request, name: str) -> Response:
        session = await read_session(request)
        if session is None:
            return to_sign_in(request)
        store, context = store_of(request), _context(request)
        try:
            page = await run_in_threadpool(portfolio_views.portfolio_page, store, name, context.snapshots)
        except NotFoundError as err:
            return refuse(Refusal(404, str(err)), session)
        return render("portfolio.html", session, title=f"Portfolio {name}", page=page)

    return router
