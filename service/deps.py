"""FastAPI dependencies as ``Annotated`` aliases: the archive, the caller's key and role, paging.

The dependencies are ``async`` (they run on the event loop, no thread hop). The key check reads
the archive only when the key's last check is older than the ``key_recheck_seconds`` setting
(:mod:`riskshape_service.keycache`), and then in the thread pool.

``ReaderDep``, ``IngestDep``, ``ReviewerDep`` and ``AdminDep`` authenticate the
``X-Riskshape-Key`` header, check the role (401 without a valid key, 403 for the wrong role) and
spend one token of the key's rate limit (429 with ``Retry-After`` when empty).
"""

from __future__ import annotations

from collections.abc import Awaitable, Callable
from dataclasses import dataclass
from typing import Annotated

from fastapi import Depends, HTTPException, Request, Security
from fastapi.security import APIKeyHeader
from starlette.concurrency import run_in_threadpool

from riskshape.store import Store
from riskshape_service.auth import KEY_HEADER, URL_KEY_NAMES, Caller, Permission, Role, may
from riskshape_service.context import ServiceContext

__all__ = [
    "ContextDep",
    "StoreDep",
    "KeyDep",
    "ReaderDep",
    "IngestDep",
    "ReviewerDep",
    "AdminDep",
    "ReadAccess",
    "ReadAccessDep",
    "requires",
]

_key_header = APIKeyHeader(
    name=KEY_HEADER,
    auto_error=False,
    scheme_name="RiskshapeKey",
    description="An API key made by `riskshape keys create`; sent in this header only, never in a URL.",
)


async def get_context(request: Request) -> ServiceContext:
    """The app's :class:`ServiceContext`."""
    context: ServiceContext = request.app.state.context
    return context


ContextDep = Annotated[ServiceContext, Depends(get_context)]


def _open_store(context: ServiceContext) -> Store:
    if context.store is None:
        raise HTTPException(status_code=503, detail=f"the archive is not open ({context.store_error}); see /v1/health")
    return context.store


async def get_store(context: ContextDep) -> Store:
    """The open archive; 503 if it could not be opened at start-up."""
    return _open_store(context)


StoreDep = Annotated[Store, Depends(get_store)]


def _unauthorized(detail: str) -> HTTPException:
    return HTTPException(status_code=401, detail=detail, headers={"WWW-Authenticate": KEY_HEADER})


async def authenticate(
    request: Request, context: ContextDep, token: Annotated[str | None, Security(_key_header)]
) -> Caller:
    """The caller of a request with a valid, unrevoked key; one token of its rate limit spent.

    A key checked against the archive less than ``key_recheck_seconds`` ago is trusted without a
    query; an older one is read again (so a revocation reaches every worker within that time).
    """
    return await _authenticate(request, context, token)


async def _authenticate(request: Request, context: ServiceContext, token: str | None) -> Caller:
    if not token:
        if URL_KEY_NAMES & {name.lower() for name in request.query_params}:
            raise _unauthorized(
                f"API keys are accepted only in the {KEY_HEADER} header, never in a URL (URLs end up in logs); "
                "send the key in the header, and revoke a key that was sent in a URL"
            )
        raise _unauthorized(f"missing API key; send it in the {KEY_HEADER} header")
    key = context.keys.fresh(token)
    if key is None:
        key = await run_in_threadpool(context.keys.check, _open_store(context), token)
    if key is None:
        raise _unauthorized(f"the key in {KEY_HEADER} is not valid; check it or ask an admin for a new one")
    if key.revoked:
        raise _unauthorized(f"the key {key.key_id} was revoked; ask an admin for a new one")
    try:
        role = Role(key.role)
    except ValueError:
        raise HTTPException(
            status_code=403, detail=f"the key's role {key.role!r} is not one this service knows"
        ) from None
    caller = Caller(key_id=key.key_id, role=role, owner=key.owner)
    request.scope.setdefault("state", {})["caller"] = caller
    decision = context.limiter.take(key.key_id)
    if not decision.allowed:
        context.metrics.rate_limited.inc()
        raise HTTPException(
            status_code=429,
            detail=f"rate limit of {context.settings.rate_limit_per_minute} requests a minute for key {key.key_id} "
            f"reached; retry after {decision.retry_after} s",
            headers={"Retry-After": str(decision.retry_after)},
        )
    return caller


KeyDep = Annotated[Caller, Depends(authenticate)]


def _permit(caller: Caller, permission: Permission) -> None:
    if not may(caller.role, permission):
        allowed = ", ".join(r.value for r in Role if may(r, permission))
        raise HTTPException(
            status_code=403,
            detail=f"a {caller.role.value} key may not do this; it needs one of the roles: {allowed}",
        )


def requires(permission: Permission) -> Callable[[Caller], Awaitable[Caller]]:
    """A dependency that lets through the callers whose role grants ``permission`` (403 otherwise)."""

    async def check(caller: KeyDep) -> Caller:
        _permit(caller, permission)
        return caller

    check.__name__ = f"requires_{permission.value}"
    return check


ReaderDep = Annotated[Caller, Depends(requires(Permission.read))]
IngestDep = Annotated[Caller, Depends(requires(Permission.ingest))]
ReviewerDep = Annotated[Caller, Depends(requires(Permission.review))]
AdminDep = Annotated[Caller, Depends(requires(Permission.admin))]


@dataclass(frozen=True)
class ReadAccess:
    """What a read endpoint served from prepared bytes needs: the caller, the archive, the app's state."""

    caller: Caller
    store: Store
    context: ServiceContext


async def read_access(request: Request, token: Annotated[str | None, Security(_key_header)]) -> ReadAccess:
    """The checks of ``ReaderDep``, ``StoreDep`` and ``ContextDep`` in one dependency.

    The same answers (401, 403, 429, 503) in the same order; one dependency instead of six to
    solve on the endpoints polled most (``latest`` and the series pages).
    """
    context: ServiceContext = request.app.state.context
    caller = await _authenticate(request, context, token)
    _permit(caller, Permission.read)
    return ReadAccess(caller, _open_store(context), context)


ReadAccessDep = Annotated[ReadAccess, Depends(read_access)]
