"""Interactive API docs served from the package's own copy of Swagger UI (no CDN: works offline)."""

from __future__ import annotations

from fastapi import FastAPI
from fastapi.openapi.docs import get_swagger_ui_html
from fastapi.responses import HTMLResponse
from fastapi.staticfiles import StaticFiles
from swagger_ui_bundle import swagger_ui_path

__all__ = ["mount_docs", "DOCS_PATH", "ASSETS_PATH"]

DOCS_PATH = "/docs"
ASSETS_PATH = "/docs-assets"


def mount_docs(app: FastAPI) -> None:
    """Serve Swagger UI at ``/docs`` with its scripts and styles from ``/docs-assets`` (swagger-ui-bundle)."""
    app.mount(ASSETS_PATH, StaticFiles(directory=swagger_ui_path), name="docs-assets")

    @app.get(DOCS_PATH, include_in_schema=False)
    async def docs() -> HTMLResponse:
        return get_swagger_ui_html(
            openapi_url=app.openapi_url or "/openapi.json",
            title="riskshape API (not investment advice)",
            swagger_js_url=f"{ASSETS_PATH}/swagger-ui-bundle.js",
            swagger_css_url=f"{ASSETS_PATH}/swagger-ui.css",
            swagger_favicon_url=f"{ASSETS_PATH}/favicon-32x32.png",
        )
