"""``riskshape serve``: the HTTP service (FastAPI under uvicorn)."""

from __future__ import annotations

import click

from riskshape import CAUTION
from riskshape.cli.audit import STORE_OPTION
from riskshape.store import open_store

__all__ = ["serve"]


@click.command()
@STORE_OPTION
@click.option("--host", default="127.0.0.1", show_default=True, help="Interface to listen on.")
@click.option("--port", type=click.IntRange(0, 65535), default=8000, show_default=True, help="TCP port.")
@click.option(
    "--config",
    "config_path",
    type=click.Path(dir_okay=False),
    default=None,
    help="TOML configuration for portfolios before their first run (see config/default.toml).",
)
def serve(store_url: str, host: str, port: int, config_path: str | None) -> None:
    """Serve the archive over HTTP: series, diagrams, alerts, reviews, price ingest, audit, export.

    Other settings come from RISKSHAPE_* environment variables (see riskshape_service.settings.ServiceSettings).
    Logs are JSON lines on standard error.
    """
    import uvicorn

    from riskshape_service import create_app
    from riskshape_service.logs import configure_logging
    from riskshape_service.settings import ServiceSettings

    settings = ServiceSettings.from_env(store_url=store_url, config_path=config_path)
    open_store(settings.store_url).close()  # fail here, in one line, if the archive cannot be opened
    configure_logging(settings.log_level)
    click.echo(CAUTION, err=True)
    click.echo(f"serving {settings.store_url} on http://{host}:{port} (docs at /docs)", err=True)
    uvicorn.run(
        create_app(settings), host=host, port=port, log_config=None, access_log=False, log_level=settings.log_level
    )
