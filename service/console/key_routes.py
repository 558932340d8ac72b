"""The console's keys page: an admin lists, creates and revokes API keys.

The page lists each key's id, owner, role, creation time and state, never a secret (the archive
keeps only a hash of it). A new key's token is shown once, on the page that answers the creation
form (never in a URL, a redirect, a cookie or a log); reloading that page does not show it again.
Every form carries the session's CSRF token; keys of other roles are refused with a 403.
"""

from __future__ import annotations

import logging

from fastapi import APIRouter, Request
from starlette.concurrency import run_in_threadpool
from starlette.responses import RedirectResponse, Response

from riskshape import RiskshapeError
from riskshape.store import NewApiKey
from riskshape_service.auth import Permission, Role, may
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

__all__ = ["make_router", "ROLE_NOTES"]

log = logging.getLogger(LOGGER_NAME)

ROLE_NOTES: dict[Role, str] = {
    Role.reader: "reads portfolios, alerts and the audit chain's head",
    Role.ingest: "reads, and posts prices",
    Role.reviewer: "reads, reviews alerts, signs periods off, verifies and exports",
    Role.admin: "everything, including portfolios and keys",
}
"""What each role may do, as the keys page explains it."""

_NOT_ADMIN = "the keys page needs an admin key; ask an admin to create or revoke keys"


def make_router() -> APIRouter:
    """The router of the keys page (under ``/console/keys``)."""
    router = APIRouter(prefix=f"{PREFIX}/keys", include_in_schema=False)

    async def keys_page(
        request: Request,
        session: Session,
        *,
        made: NewApiKey | None = None,
        message: str = "",
        problem: str = "",
        status_code: int = 200,
        typed: dict[str, str] | None = None,
    ) -> Response:
        found = await run_in_threadpool(store_of(request).list_api_keys)
        return render(
            "keys.html",
            session,
            status_code=status_code,
            title="API keys",
            keys=sorted(found, key=lambda k: (k.revoked, k.created_at, k.key_id)),
            roles=ROLE_NOTES,
            made=made,
            message=message,
            problem=problem,
            typed=typed or {},
        )

    @router.get("")
    async def keys(request: Request) -> Response:
        session = await read_session(request)
        if session is None:
            return to_sign_in(request)
        if not may(session.role, Permission.admin):
            return refuse(Refusal(403, _NOT_ADMIN), session)
        return await keys_page(request, session)

    @router.post("")
    async def create(request: Request) -> Response:
        session = await read_session(request)
        try:
            form = await read_form(request)
            session = check_form(session, form, Permission.admin)
        except Refusal as refusal:
            return refuse(refusal, session)
        owner, role = form.get("owner", "").strip(), form.get("role", "")
        typed = {"owner": owner, "role": role}
        if role not in {r.value for r in Role}:
            problem = f"role: {role!r} is not one of {', '.join(r.value for r in Role)}; choose one from the list"
            return await keys_page(request, session, problem=problem, status_code=422, typed=typed)
        if not owner:
            problem = "owner: write who will hold the key (their reviews are recorded under this name)"
            return await keys_page(request, session, problem=problem, status_code=422, typed=typed)
        try:
            made = await run_in_threadpool(store_of(request).create_api_key, owner, role)
        except RiskshapeError as err:
            return await keys_page(request, session, problem=str(err), status_code=status_of(err), typed=typed)
        log.info("console key created", extra={"key_id": made.key.key_id, "role": role, "by": session.key_id})
        return await keys_page(request, session, made=made)

    @router.post("/{key_id}/revoke")
    async def revoke(request: Request, key_id: str) -> Response:
        session = await read_session(request)
        try:
            form = await read_form(request)
            session = check_form(session, form, Permission.admin)
        except Refusal as refusal:
            return refuse(refusal, session)
        try:
            key = await run_in_threadpool(store_of(request).revoke_api_key, key_id)
        except RiskshapeError as err:
            return await keys_page(request, session, problem=str(err), status_code=status_of(err))
        log.info("console key revoked", extra={"key_id": key.key_id, "by": session.key_id})
        if key.key_id == session.key_id:  # one's own key: the session ends with it
            return RedirectResponse(f"{PREFIX}/sign-in", status_code=303)
        message = f"Key {key.key_id} ({key.role}, owner {key.owner}) revoked; it can no longer sign in or call the API."
        return await keys_page(request, session, message=message)

    return router
