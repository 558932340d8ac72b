"""The audit chain: verify it and read its head (reviewer or admin); sign a period off and list the sign-offs."""

from __future__ import annotations

from typing import Annotated

from fastapi import APIRouter, Query
from starlette.concurrency import run_in_threadpool

from riskshape.reviews import SignOff, list_sign_offs, sign_off
from riskshape.store import Head, chain_head, verify_chain
from riskshape_service.deps import ReaderDep, ReviewerDep, StoreDep
from riskshape_service.routers import API_PREFIX, errors
from riskshape_service.schemas import (
    BadRecordOut,
    ChainHead,
    HeadOut,
    SignOffIn,
    SignOffList,
    SignOffOut,
    StatusCounts,
    VerifyOut,
)
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router", "sign_off_out"]


def sign_off_out(signed: SignOff) -> SignOffOut:
    """A sign-off as the API shows it."""
    return SignOffOut(
        id=signed.id,
        seq=signed.seq,
        entry_hash=signed.entry_hash,
        start=signed.start,
        end=signed.end,
        portfolios=list(signed.portfolios),
        counts=StatusCounts.model_validate(dict(signed.counts)),
        signer=signed.signer,
        signed_at=signed.signed_at,
        chain_head=str(signed.chain_head),
    )


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

    @router.post("/sign-offs", response_model=SignOffOut, status_code=201, responses=errors(401, 403, 404, 409, 429))
    def post_sign_off(body: SignOffIn, caller: ReviewerDep, store: StoreDep) -> SignOffOut:
        """Sign a period off (the signer is the key's owner); 409 listing the alerts still open or escalated."""
        signed = sign_off(store, body.start, body.end, body.portfolios, caller.owner, role=caller.role.value)
        return sign_off_out(signed)

    @router.get("/sign-offs", response_model=SignOffList, responses=errors(401, 403, 429))
    def get_sign_offs(caller: ReaderDep, store: StoreDep) -> SignOffList:
        """Every sign-off, in ledger order."""
        found = list_sign_offs(store)
        return SignOffList(items=[sign_off_out(s) for s in found], total=len(found))

    @router.get("/head", response_model=HeadOut, responses=errors(401, 403, 429))
    def head(caller: ReviewerDep, store: StoreDep) -> HeadOut:
        """Record count and head hash of the chain, to keep elsewhere and check later."""
        found = chain_head(store)
        return HeadOut(count=found.count, head_hash=found.head_hash, head=str(found))

    return router
