"""The FastAPI app: ``create_app(settings)``.

Layers, outermost first: the request middleware (request id, caution header, access log,
metrics, last-resort 500, early 413 for a declared oversize body); Starlette's streaming body
limit (413 for chunked uploads too, counted as the bytes arrive); the fast path of prepared
latest states (:mod:`riskshape_service.readpath`); the error handlers of
:mod:`riskshape_service.handlers`; the routers under ``/v1`` (and ``/metrics``). OpenAPI at
``/openapi.json``, interactive docs at ``/docs``.
"""

from __future__ import annotations

import logging
from collections.abc import AsyncIterator
from contextlib import asynccontextmanager
from typing import Any

from fastapi import FastAPI
from fastapi.openapi.utils import get_openapi
from starlette.middleware.body_limit import RequestBodyLimitMiddleware

from riskshape import CAUTION, Config, RiskshapeError, __version__
from riskshape.daily import Ingestor
from riskshape.store import open_store
from riskshape_service.console import mount_console
from riskshape_service.context import ServiceContext
from riskshape_service.docs import mount_docs
from riskshape_service.freshness import MarkerRounds
from riskshape_service.handlers import install_handlers
from riskshape_service.keycache import KeyCache
from riskshape_service.logs import LOGGER_NAME, stamp_request_ids
from riskshape_service.metrics import ServiceMetrics
from riskshape_service.middleware import (
    CAUTION_HEADER,
    CAUTION_HEADER_VALUE,
    JsonDepthMiddleware,
    RequestContextMiddleware,
)
from riskshape_service.prepared import PreparedBodies
from riskshape_service.ratelimit import RateLimiter
from riskshape_service.readpath import LatestFastPath
from riskshape_service.routers import (
    alerts,
    audit,
    days,
    diagrams,
    export,
    feed,
    health,
    metrics,
    portfolios,
    prices,
    reviews,
    series,
)
from riskshape_service.schemas import FeedIn, PricesIn
from riskshape_service.settings import ServiceSettings
from riskshape_service.snapshots import Snapshots

__all__ = ["create_app"]

log = logging.getLogger(LOGGER_NAME)
ROUTERS = (health, portfolios, series, diagrams, alerts, reviews, prices, days, feed, audit, export, metrics)

DESCRIPTION = f"""Portfolio-regime monitor over rolling persistent homology: summaries, diagrams, alerts,
reviews, price ingest and the audit chain.

**{CAUTION}** Every response carries the header `{CAUTION_HEADER}: {CAUTION_HEADER_VALUE}`, and every JSON
object a `caution` field.

Authenticate with an API key (made by `riskshape keys create`) in the `X-Riskshape-Key` header; keys are
never accepted in a URL. Roles: `reader` reads; `ingest` also posts prices; `reviewer` also reviews alerts,
verifies the audit chain and exports; `admin` does everything."""


def _openapi(app: FastAPI) -> dict[str, Any]:
    """The OpenAPI document, with the JSON prices bodies (read by hand, for their two media types) in it."""
    if app.openapi_schema is None:
        schema = get_openapi(title=app.title, version=app.version, description=app.description, routes=app.routes)
        components = schema.setdefault("components", {}).setdefault("schemas", {})
        for model in (PricesIn, FeedIn):
            body = model.model_json_schema(ref_template="#/components/schemas/{model}")
            for name, definition in body.pop("$defs", {}).items():
                components.setdefault(name, definition)
            components[model.__name__] = body
        schema["info"]["x-caution"] = CAUTION
        app.openapi_schema = schema
    return app.openapi_schema


def create_app(settings: ServiceSettings | None = None) -> FastAPI:
    """The riskshape HTTP service.

    Parameters
    ----------
    settings : ServiceSettings, optional
        Defaults to ``ServiceSettings.from_env()``.

    Returns
    -------
    fastapi.FastAPI
        The archive is opened when the app starts (its lifespan) and closed when it stops; if it
        cannot be opened, ``/v1/health`` says why (503) and the other endpoints answer 503.

    Raises
    ------
    ConfigError
        If ``settings.config_path`` names a bad configuration file.
    """
    settings = settings or ServiceSettings.from_env()
    stamp_request_ids()
    config = Config.from_toml(settings.config_path) if settings.config_path else Config()
    service_metrics = ServiceMetrics()
    context = ServiceContext(
        settings=settings,
        config=config,
        metrics=service_metrics,
        limiter=RateLimiter(settings.rate_limit_per_minute, settings.rate_limit_burst),
        ingestor=Ingestor(config, settings.result_cache_size),
        snapshots=Snapshots(config, settings.snapshot_cache_size),
        keys=KeyCache(settings.key_recheck_seconds, settings.key_cache_size),
        prepared=PreparedBodies(settings.prepared_cache_size),
        markers=MarkerRounds(),
    )

    @asynccontextmanager
    async def lifespan(app: FastAPI) -> AsyncIterator[None]:
        try:
            context.store = open_store(settings.store_url)
            context.store_error = None
            log.info("archive open", extra={"store": context.store.url, "revision": context.store.revision})
        except RiskshapeError as err:
            context.store, context.store_error = None, str(err)
            log.error("cannot open the archive: %s", err)
        try:
            yield
        finally:
            if context.store is not None:
                context.store.close()
                context.store = None

    app = FastAPI(
        title="riskshape",
        version=__version__,
        description=DESCRIPTION,
        lifespan=lifespan,
        docs_url=None,
        redoc_url=None,
        openapi_url="/openapi.json",
    )
    mount_docs(app)
    app.state.context = context
    install_handlers(app)
    for module in ROUTERS:
        app.include_router(module.make_router(settings))
    app.add_middleware(LatestFastPath, context=context)  # innermost: prepared latest states before routing
    mount_console(app, settings)
    app.add_middleware(JsonDepthMiddleware, max_depth=settings.max_json_depth)  # inside the size limit
    app.add_middleware(RequestBodyLimitMiddleware, max_body_size=settings.max_body_bytes)
    app.add_middleware(
        RequestContextMiddleware,
        metrics=service_metrics,
        max_body_bytes=settings.max_body_bytes,
        cors_origins=settings.cors_origins,
    )
    app.openapi = lambda: _openapi(app)  # type: ignore[method-assign]
    return app
