"""The audit chain: verify it, read its head (reviewer or admin)."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query
from starlette.concurrency import run_in_threadpool

from riskshape.store import Head, chain_head, verify_chain
from riskshape_service.deps import ReviewerDep, StoreDep
from riskshape_service.routers import API_PREFIX, errors
from riskshape_service.schemas import BadRecordOut, ChainHead, HeadOut, VerifyOut
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router"]


def _head(head: Head) -> ChainHead:
    return ChainHead(count=head.count, head_hash=head.head_hash, head=str(head))


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``/v1/audit``: verify the hash chain and read its head (reviewer or admin)."""
    router = APIRouter(prefix=f"{API_PREFIX}/audit", tags=["audit"])

    @router.get("/verify", response_model=VerifyOut, responses=errors(401, 403, 422, 429))
    async def verify(
        caller: ReviewerDep,
        store: StoreDep,
        expect_head: Annotated[
            str | None,
            Query(pattern=r"^(?:[0-9]+:)?[0-9a-f]{64}$", description="COUNT:HASH kept from /v1/audit/head earlier"),
        ] = None,
    ) -> VerifyOut:
        """Recompute the hash chain of alerts and reviews; name the first record that does not verify."""
        report = await run_in_threadpool(verify_chain, store, expect_head)
        bad = report.first_bad
        return VerifyOut(
            ok=report.ok,
            checked=report.checked,
            head=_head(report.head),
            first_bad=None
            if bad is None
            else BadRecordOut(seq=bad.seq, table=bad.table, record_id=bad.record_id, reason=bad.reason),
        )

    @router.get("/head", response_model=HeadOut, responses=errors(401, 403, 429))
    def head(caller: ReviewerDep, store: StoreDep) -> HeadOut:
        """Record count and head hash of the chain, to keep elsewhere and check later."""
        found = chain_head(store)
        return HeadOut(count=found.count, head_hash=found.head_hash, head=str(found))

    return router
