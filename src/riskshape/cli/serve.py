"""``riskshape serve``: the HTTP service (FastAPI under uvicorn), in one or several worker processes."""

from __future__ import annotations

import gc
import os
from pathlib import Path
from typing import Any

import click

from riskshape import CAUTION
from riskshape.cli.audit import STORE_OPTION
from riskshape.store import open_store

__all__ = ["serve", "worker_app", "WORKER_APP"]

WORKER_APP = "riskshape.cli.serve:worker_app"
"""The import string uvicorn's worker processes make their app from (``factory=True``)."""
MAX_WORKERS = 64


def worker_app() -> Any:
    """The app of one worker process: settings from ``RISKSHAPE_*`` variables, JSON logs, BLAS pinned,
    the objects made at start-up frozen out of the garbage collector's passes (:func:`gc.freeze`).

    Returns
    -------
    fastapi.FastAPI
        ``riskshape_service.create_app(ServiceSettings.from_env())``.
    """
    from riskshape.compute import keep_blas_pinned
    from riskshape_service import create_app
    from riskshape_service.logs import configure_logging
    from riskshape_service.settings import ServiceSettings

    keep_blas_pinned()  # a worker is one of riskshape's own processes (see keep_blas_pinned)
    settings = ServiceSettings.from_env()
    configure_logging(settings.log_level)
    app = create_app(settings)
    # What the imports made (numpy, pandas, scipy, the app) lives as long as the process: moved out
    # of the collector's way, a full collection no longer walks it and pauses a worker for tens of
    # ms (the p99 of the read path under load halved with it, benchmarks/read_path.py).
    gc.freeze()
    return app


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
@click.option(
    "--workers",
    type=click.IntRange(1, MAX_WORKERS),
    default=1,
    show_default=True,
    help="Worker processes over the one archive; each answers from the archive's current state.",
)
@click.option(
    "--tls-cert",
    type=click.Path(dir_okay=False, exists=True),
    default=None,
    help="PEM certificate (chain) to serve HTTPS; give --tls-key with it.",
)
@click.option(
    "--tls-key",
    type=click.Path(dir_okay=False, exists=True),
    default=None,
    help="PEM private key of --tls-cert.",
)
def serve(
    store_url: str,
    host: str,
    port: int,
    config_path: str | None,
    workers: int,
    tls_cert: str | None,
    tls_key: str | None,
) -> None:
    """Serve the archive over HTTP: series, diagrams, alerts, reviews, price ingest, audit, export.

    Other settings come from RISKSHAPE_* environment variables (see riskshape_service.settings.ServiceSettings).
    Logs are JSON lines on standard error. With --workers N, N processes share the port and the
    archive: a write through one is seen by every one at its next request; rate limits are counted
    per process, so a key may make up to N times its limit in all. With --tls-cert and --tls-key
    the service speaks HTTPS only (uvicorn's ssl_certfile and ssl_keyfile).
    """
    import uvicorn

    from riskshape import Config
    from riskshape_service.logs import configure_logging
    from riskshape_service.settings import ServiceSettings

    if (tls_cert is None) != (tls_key is None):
        raise click.UsageError("give --tls-cert and --tls-key together (or neither, for plain HTTP)")
    if config_path is not None:
        config_path = str(Path(config_path).expanduser().resolve())
    settings = ServiceSettings.from_env(store_url=store_url, config_path=config_path)
    if settings.config_path is not None:
        Config.from_toml(settings.config_path)  # fail here, in one line, on a bad configuration file
    open_store(settings.store_url).close()  # fail here, in one line, if the archive cannot be opened
    configure_logging(settings.log_level)
    click.echo(CAUTION, err=True)
    click.echo(
        f"serving {settings.store_url} on {'https' if tls_cert else 'http'}://{host}:{port} "
        f"with {workers} worker(s) (docs at /docs)",
        err=True,
    )
    # the workers make their app from the environment: hand them the settings this command resolved
    os.environ["RISKSHAPE_STORE_URL"] = settings.store_url
    if settings.config_path is not None:
        os.environ["RISKSHAPE_CONFIG_PATH"] = settings.config_path
    uvicorn.run(
        WORKER_APP,
        factory=True,
        workers=workers,
        host=host,
        port=port,
        log_config=None,
        access_log=False,
        log_level=settings.log_level,
        ssl_certfile=tls_cert,
        ssl_keyfile=tls_key,
    )
