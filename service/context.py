"""What one app holds while it runs: settings, the open archive, the default configuration, the rate
limiter, the metrics, the ingest engine, the snapshots pollers read, the key checks, the prepared
response bodies and the rounds of change-marker reads. Made by ``create_app``, kept on
``app.state.context``.
"""

from __future__ import annotations

from dataclasses import dataclass

from riskshape import Config
from riskshape.daily import Ingestor
from riskshape.store import Store
from riskshape_service.freshness import MarkerRounds
from riskshape_service.keycache import KeyCache
from riskshape_service.metrics import ServiceMetrics
from riskshape_service.prepared import PreparedBodies
from riskshape_service.ratelimit import RateLimiter
from riskshape_service.settings import ServiceSettings
from riskshape_service.snapshots import Snapshots

__all__ = ["ServiceContext"]


@dataclass
class ServiceContext:
    """The app's state (one per app; the store is opened at start-up and closed at shut-down)."""

    settings: ServiceSettings
    config: Config
    metrics: ServiceMetrics
    limiter: RateLimiter
    ingestor: Ingestor
    snapshots: Snapshots
    keys: KeyCache
    prepared: PreparedBodies
    markers: MarkerRounds
    store: Store | None = None
    store_error: str | None = None
