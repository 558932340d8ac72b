"""``POST /v1/portfolios/{name}/prices``: archive a portfolio's prices, compute the windows they
complete and raise alerts (ingest or admin). The policy is in :mod:`riskshape.daily.ingest`.

The body is JSON (``{"rows": [{date, asset, price}, ...]}`` or ``{"wide": [{date, prices}, ...]}``)
or CSV text (``Content-Type: text/csv``; wide ``date,A,B,...`` or long ``date,asset,price``).
"""

from __future__ import annotations

import email.message
import json
from collections.abc import Sequence
from typing import Annotated, TypeVar

from fastapi import APIRouter, HTTPException, Query, Request
from fastapi.exceptions import RequestValidationError
from pydantic import BaseModel, ValidationError
from starlette.concurrency import run_in_threadpool

from riskshape.daily import IngestReport, check_ingest_quality
from riskshape_service.bodies import CSV_SOURCE, JSON_SOURCE, table_from_csv, table_from_json, validated_prices
from riskshape_service.convert import alert_out, pending_out
from riskshape_service.deps import ContextDep, IngestDep, StoreDep
from riskshape_service.routers import API_PREFIX, errors
from riskshape_service.routers.portfolios import PortfolioName
from riskshape_service.schemas import IngestOut, PricesIn
from riskshape_service.settings import ServiceSettings

__all__ = ["make_router", "PRICES_BODY", "ingest_out", "media_type", "json_body"]

Body = TypeVar("Body", bound=BaseModel)

CSV_EXAMPLE = "date,QY01,QJ01,QK01\n2031-03-03,101.5,98.25,100.75\n"
PRICES_BODY = {
    "required": True,
    "content": {
        "application/json": {"schema": {"$ref": "#/components/schemas/PricesIn"}},
        "text/csv": {
            "schema": {
                "type": "string",
                "description": "wide (date, one column per asset) or long (date, asset, price) CSV, one header line",
            },
            "example": CSV_EXAMPLE,
        },
    },
}


def media_type(request: Request) -> str:
    """The request's media type, without parameters (empty when none is given)."""
    header = request.headers.get("content-type")
    if not header:
        return ""
    message = email.message.Message()
    message["content-type"] = header
    return message.get_content_type()


def json_body(raw: bytes, model: type[Body]) -> Body:
    """A JSON body parsed and validated as ``model``; errors in FastAPI's shape (422)."""
    try:
        data = json.loads(raw)
    except json.JSONDecodeError as err:
        raise RequestValidationError(
            [
                {
                    "type": "json_invalid",
                    "loc": ("body", err.pos),
                    "msg": "JSON decode error",
                    "input": {},
                    "ctx": {"error": err.msg},
                }
            ]
        ) from None
    except UnicodeDecodeError:
        raise RequestValidationError(
            [
                {
                    "type": "json_invalid",
                    "loc": ("body",),
                    "msg": "JSON decode error",
                    "input": {},
                    "ctx": {"error": "not UTF-8 text"},
                }
            ]
        ) from None
    try:
        return model.model_validate(data)
    except ValidationError as err:
        raise RequestValidationError([{**e, "loc": ("body", *e["loc"])} for e in err.errors()]) from None


def ingest_out(report: IngestReport, warnings: Sequence[str] = ()) -> IngestOut:
    """The response of an ingest (or a closing, or a delisting), with the data-quality findings of its prices."""
    return IngestOut(
        portfolio=report.portfolio,
        prices_added=report.prices_added,
        corrections=report.corrections,
        unchanged=report.unchanged,
        windows_added=report.windows_added,
        windows_differing=report.windows_differing,
        first_window=report.first_window,
        last_window=report.last_window,
        alerts=[alert_out(a) for a in report.alerts],
        run_id=report.run_id,
        note=report.note,
        warnings=list(warnings),
        pending=[pending_out(d) for d in report.pending],
        closed=list(report.closed),
    )


def make_router(settings: ServiceSettings) -> APIRouter:
    """The router of ``POST /v1/portfolios/{name}/prices``: archive prices and compute what they complete."""
    router = APIRouter(prefix=f"{API_PREFIX}/portfolios", tags=["prices"])

    @router.post(
        "/{name}/prices",
        response_model=IngestOut,
        openapi_extra={"requestBody": PRICES_BODY},
        responses=errors(401, 403, 404, 409, 413, 415, 422, 429),
    )
    async def post_prices(
        name: PortfolioName,
        request: Request,
        caller: IngestDep,
        store: StoreDep,
        context: ContextDep,
        correction: Annotated[
            bool,
            Query(
                description="archive prices that differ from archived ones as "
                "corrections (otherwise they are refused with 409)"
            ),
        ] = False,
    ) -> IngestOut:
        """Archive prices, compute only the new windows, evaluate the alert rules; idempotent.

        Body: JSON `{"rows": [{"date", "asset", "price"}, ...]}` (long) or `{"wide": [{"date", "prices":
        {asset: price}}, ...]}`, or CSV text (`Content-Type: text/csv`, wide `date,A,B,...` or long
        `date,asset,price`). Dates in order, oldest first; a missing price is null (JSON) or an empty cell.

        - Days after the last archived one are added. A day counts once every listed asset has a price (or
          is sent as missing) or the day is closed (`POST .../days/{date}/close`, or the `[daily] close_share`
          cut-off); until then it is `pending` (its prices archived, no window, no rule), and sending the rest
          of it is an ordinary ingest. The windows the counted days complete are computed and archived; the
          alert rules are evaluated and new alerts returned.
        - Sending the same prices again adds nothing (no prices, windows, runs or alerts).
        - A price that differs from the archived one for a day already archived is refused with 409, unless
          `correction=true`: then it is archived as a correction (both revisions kept), and windows are
          computed from the corrected history from now on; archived windows and alerts are never rewritten
          (`windows_differing` counts those the correction would change).
        - A date inside the archived history that was never archived is refused (422): windows count
          trading days. An asset the portfolio does not have is refused (422); a new portfolio's assets
          are those of its first prices, in name order.
        """
        media = media_type(request)
        raw = await request.body()
        if media == "application/json" or media.endswith("+json"):
            table, layout = table_from_json(json_body(raw, PricesIn))
            source, first, label = f"{JSON_SOURCE} ({layout})", 0, ("rows" if layout == "long" else "wide")
        elif media == "text/csv":
            table = await run_in_threadpool(
                table_from_csv, raw, max_assets=settings.max_request_assets, max_rows=settings.max_request_rows
            )
            source, first, label = CSV_SOURCE, 2, "line"
        else:
            raise HTTPException(
                status_code=415,
                detail=f"content type {media or 'none'!r} is not accepted; send application/json or text/csv",
            )
        prices = await run_in_threadpool(
            lambda: validated_prices(
                table,
                source,
                first,
                label,
                max_assets=settings.max_request_assets,
                max_rows=settings.max_request_rows,
            )
        )

        # checked before anything is archived: with [checks] quality = "refuse" a finding is a 422
        findings = await run_in_threadpool(check_ingest_quality, store, name, prices, context.config, source)

        def work() -> IngestReport:
            return context.ingestor.ingest(store, name, prices, correction=correction, source=source)

        report = await run_in_threadpool(work)
        context.metrics.windows.inc(report.windows_computed)
        context.metrics.price_cells.labels("added").inc(report.prices_added)
        context.metrics.price_cells.labels("correction").inc(report.corrections)
        for alert in report.alerts:
            context.metrics.alerts.labels(alert.severity).inc()
        return ingest_out(report, [str(f) for f in findings])

    return router
