"""The browser console at ``/console``: server-rendered pages over the library's public API.

:func:`mount_console` adds its routes and its static files (one style sheet, shipped in the
package, so the console works offline) to the service's app.
"""

from __future__ import annotations

import secrets

from fastapi import FastAPI
from starlette.staticfiles import StaticFiles

from riskshape_service.console.session import SessionSigner
from riskshape_service.settings import ServiceSettings

__all__ = ["mount_console"]


def mount_console(app: FastAPI, settings: ServiceSettings) -> None:
    """Serve the console from ``app`` under ``/console``.

    Parameters
    ----------
    app : fastapi.FastAPI
        The service's app (its ``state.context`` holds the archive).
    settings : ServiceSettings
        ``console_secret`` signs the session cookies (a random one per process without it).
    """
    from riskshape_service.console import key_routes, review_routes, routes

    app.state.console_signer = SessionSigner(settings.console_secret or secrets.token_urlsafe(32))
    app.include_router(routes.make_router())
    app.include_router(review_routes.make_router())
    app.include_router(key_routes.make_router())
    app.mount(
        "/console/static",
        StaticFiles(packages=[("riskshape_service", "console/static")]),
        name="console-static",
    )
