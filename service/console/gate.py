"""The console's gate: who is signed in, whether a form is genuine, and the answers when not.

A request's session is read from its signed cookie and checked against the archive on every
request (a revoked key, or one whose role changed, ends the session at once). Forms are posted
URL-encoded; their CSRF token must match the session's.
"""

from __future__ import annotations

from urllib.parse import parse_qsl, quote

from starlette.concurrency import run_in_threadpool
from starlette.requests import Request
from starlette.responses import HTMLResponse, RedirectResponse, Response

from riskshape.store import Store
from riskshape_service.auth import Caller, Permission, may
from riskshape_service.console.pages import render
from riskshape_service.console.session import COOKIE_NAME, Session, SessionSigner, csrf_matches
from riskshape_service.context import ServiceContext

__all__ = ["PREFIX", "MAX_FORM_BYTES", "read_session", "read_form", "refuse", "to_sign_in", "store_of", "Refusal"]

PREFIX = "/console"
MAX_FORM_BYTES = 64_000
"""Largest form body the console reads (a review comment is a few lines)."""


class Refusal(Exception):
    """A request the console answers with a page instead of running it (status and a plain message)."""

    def __init__(self, status_code: int, message: str) -> None:
        super().__init__(message)
        self.status_code = status_code
        self.message = message


def store_of(request: Request) -> Store:
    """The open archive (a 503 refusal when it could not be opened)."""
    context: ServiceContext = request.app.state.context
    if context.store is None:
        raise Refusal(503, f"the archive is not open ({context.store_error}); see /v1/health")
    return context.store


def signer_of(request: Request) -> SessionSigner:
    """The app's session signer."""
    signer: SessionSigner = request.app.state.console_signer
    return signer


async def read_session(request: Request) -> Session | None:
    """The signed-in session of a request, or None (no cookie, forged, expired, or its key revoked)."""
    session = signer_of(request).loads(request.cookies.get(COOKIE_NAME))
    if session is None:
        return None
    store = store_of(request)
    keys = await run_in_threadpool(store.list_api_keys)
    key = next((k for k in keys if k.key_id == session.key_id), None)
    if key is None or key.revoked or key.role != session.role.value:
        return None
    request.scope.setdefault("state", {})["caller"] = Caller(session.key_id, session.role, session.owner)
    return session


async def read_form(request: Request) -> dict[str, str]:
    """The fields of a URL-encoded form (the last value of a repeated field wins)."""
    media = request.headers.get("content-type", "").split(";")[0].strip().lower()
    if media != "application/x-www-form-urlencoded":
        raise Refusal(415, "the console accepts forms posted as application/x-www-form-urlencoded only")
    body = await request.body()
    if len(body) > MAX_FORM_BYTES:
        raise Refusal(413, f"the form is over {MAX_FORM_BYTES} bytes; shorten the comment")
    try:
        text = body.decode("utf-8")
    except UnicodeDecodeError:
        raise Refusal(400, "the form is not UTF-8 text") from None
    return dict(parse_qsl(text, keep_blank_values=True))


def check_form(session: Session | None, form: dict[str, str], permission: Permission) -> Session:
    """The session behind a posted form: signed in, the form's CSRF token its own, the role allowed."""
    if session is None:
        raise Refusal(401, "your session has ended or is not valid; sign in again")
    if not csrf_matches(session, form.get("csrf")):
        raise Refusal(403, "the form's security token is missing or out of date; reload the page and send it again")
    if not may(session.role, permission):
        needed = "an admin" if permission is Permission.admin else "a reviewer"
        raise Refusal(403, f"a {session.role.value} key may not do this; ask for {needed} key")
    return session


def to_sign_in(request: Request) -> RedirectResponse:
    """Send a visitor without a session to the sign-in page, remembering the page asked for."""
    wanted = request.url.path + (f"?{request.url.query}" if request.url.query else "")
    return RedirectResponse(f"{PREFIX}/sign-in?next={quote(wanted, safe='')}", status_code=303)


def refuse(refusal: Refusal, session: Session | None) -> HTMLResponse:
    """The page of a refused request: its status and what to do."""
    return render("refused.html", session, status_code=refusal.status_code, title="Not done", message=refusal.message)


def safe_next(target: str | None) -> str:
    """Where to go after signing in: a console path only (never another site)."""
    if target and target.startswith(f"{PREFIX}/") and not target.startswith("//") and "\\" not in target:
        return target
    return f"{PREFIX}/"


def no_store(response: Response) -> Response:
    """Mark a response as not to be cached."""
    response.headers["Cache-Control"] = "no-store"
    return response
