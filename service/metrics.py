"""Prometheus metrics of one app: requests, latencies, windows computed, alerts raised.

Each app owns its :class:`prometheus_client.CollectorRegistry`, so several apps in one process
(tests) do not collide; ``/metrics`` renders it in the Prometheus text format.
"""

from __future__ import annotations

from prometheus_client import CollectorRegistry, Counter, Histogram, generate_latest
from prometheus_client.exposition import CONTENT_TYPE_LATEST

__all__ = ["ServiceMetrics", "CONTENT_TYPE_LATEST"]


class ServiceMetrics:
    """The service's instruments, registered in a registry of their own."""

    def __init__(self) -> None:
        self.registry = CollectorRegistry(auto_describe=True)
        self.requests = Counter(
            "riskshape_http_requests",
            "HTTP requests served, by method, route template and status code.",
            ["method", "route", "status"],
            registry=self.registry,
        )
        self.latency = Histogram(
            "riskshape_http_request_duration_seconds",
            "Time to serve a request, by method and route template.",
            ["method", "route"],
            registry=self.registry,
            buckets=(0.001, 0.0025, 0.005, 0.01, 0.025, 0.05, 0.1, 0.25, 0.5, 1.0, 2.5, 5.0, 10.0, 30.0),
        )
        self.windows = Counter(
            "riskshape_windows_computed",
            "Windows computed from ingested prices.",
            registry=self.registry,
        )
        self.alerts = Counter(
            "riskshape_alerts_raised",
            "Alerts raised (archived) by ingests, by severity.",
            ["severity"],
            registry=self.registry,
        )
        self.price_cells = Counter(
            "riskshape_price_cells_ingested",
            "Price cells archived by ingests, by kind (added, correction).",
            ["kind"],
            registry=self.registry,
        )
        self.rate_limited = Counter(
            "riskshape_rate_limited",
            "Requests refused by the per-key rate limit.",
            registry=self.registry,
        )

    def render(self) -> bytes:
        """The registry in the Prometheus text exposition format."""
        return generate_latest(self.registry)
