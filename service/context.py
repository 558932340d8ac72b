"""What one app holds while it runs: settings, the open archive, the default configuration, the rate
limiter, the metrics and the ingest engine. Made by ``create_app``, kept on ``app.state.context``."""

from __future__ import annotations

from dataclasses import dataclass

from riskshape.config import Config, ServiceSettings
from riskshape.store import Store
from service.ingest import Ingestor
from service.metrics import ServiceMetrics
from service.ratelimit import RateLimiter

__all__ = ["ServiceContext"]


@dataclass
class ServiceContext:
    """The app's state (one per app; the store is opened at start-up and closed at shut-down)."""

    settings: ServiceSettings
    config: Config
    metrics: ServiceMetrics
    limiter: RateLimiter
    ingestor: Ingestor
    store: Store | None = None
    store_error: str | None = None
