"""The service's settings, read from ``RISKSHAPE_*`` environment variables (the library's
configuration, :mod:`riskshape.config`, knows nothing of them).
"""

from __future__ import annotations

import os
from collections.abc import Mapping
from contextvars import ContextVar
from typing import Any, Literal

from pydantic import BaseModel, ConfigDict, Field, ValidationError

from riskshape import ConfigError
from riskshape.config import format_validation_error

__all__ = ["ServiceSettings"]

_WHERE: ContextVar[str] = ContextVar("riskshape_service_settings_where", default="ServiceSettings(...)")


class ServiceSettings(BaseModel):
    """Settings of the HTTP service, read from ``RISKSHAPE_*`` environment variables by :meth:`from_env`
    (``RISKSHAPE_STORE_URL``, ``RISKSHAPE_MAX_BODY_BYTES``, ...).

    Parameters
    ----------
    store_url : str
        Archive URL (``sqlite:///path`` or ``postgresql+psycopg://...``).
    max_body_bytes : int
        Largest request body accepted, counted as it streams (413 beyond it).
    max_page_size : int
        Largest page a paged endpoint returns (422 beyond it).
    rate_limit_per_minute : int
        Sustained requests a minute per API key (429 with Retry-After beyond it).
    rate_limit_burst : int
        Requests a key may make at once after being idle (the token bucket's size).
    config_path : str or None
        TOML configuration for portfolios before their first run (defaults without it); a portfolio
        with runs keeps the configuration of its latest run.
    log_level : str
        Level of the service's JSON logs.
    result_cache_size : int
        Portfolios whose latest result the service keeps in memory, so that a new day computes
        only the windows it completes; the least recently fed beyond it is recomputed from the
        archive at its next ingest (0.5 s instead of 0.03 s for 24 assets and two years). A result
        holds the portfolio's prices, returns and float32 diagrams: a few MB for 100 assets and two
        years (1.5 MB pickled), about 75 MB for 500 assets and 20 years.
    snapshot_cache_size : int
        Portfolios whose archived series (under their latest configuration) and latest state the
        read endpoints keep in memory between writes; the least recently read beyond it is read
        again from the archive at its next read. A snapshot holds one float64 row per window:
        about 30 kB a year of daily windows (0.15 MB for five years).
    prepared_cache_size : int
        Response bodies kept rendered (``latest`` states and series pages, each with its ETag),
        least recently used dropped first; it also bounds the ETags kept per change marker. A
        latest state is a few kB, a series page about 0.3 kB a window (0.3 MB for 1,000).
    key_cache_size : int
        API keys whose archive check the service keeps (see ``key_recheck_seconds``), least
        recently used dropped first; under 1 kB each. Only keys the archive knows are kept.
    key_recheck_seconds : float
        Age past which a worker reads an API key again from the archive before trusting it: a key
        revoked through any process is refused by every worker within this time (0: every request).
    max_request_assets : int
        Most assets one ingest request may carry (422 beyond it, before a price is parsed).
    max_request_rows : int
        Most rows (CSV lines, JSON ``rows`` or ``wide`` entries) one ingest request may carry.
    max_json_depth : int
        Deepest nesting of arrays and objects accepted in a JSON body (422 beyond it, counted in the
        raw bytes before the body is parsed; a prices body nests 4 deep).
    cors_origins : tuple of str
        Origins (``https://host:port``) whose browser pages may call the service; requests from any
        other origin are refused (403). Read from a comma-separated ``RISKSHAPE_CORS_ORIGINS``.
    console_secret : str or None
        Key that signs the browser console's session cookies (at least 32 characters). Several
        service processes over one archive need the same one; without it each process makes a
        random one when it starts (sessions then end when it restarts).
    """

    model_config = ConfigDict(frozen=True, extra="forbid")

    store_url: str = "sqlite:///riskshape.sqlite"
    max_body_bytes: int = Field(5_000_000, ge=1024)
    max_page_size: int = Field(1000, ge=1)
    rate_limit_per_minute: int = Field(600, ge=1)
    rate_limit_burst: int = Field(60, ge=1)
    config_path: str | None = None
    log_level: Literal["debug", "info", "warning", "error"] = "info"
    result_cache_size: int = Field(128, ge=0)
    snapshot_cache_size: int = Field(32, ge=1, le=1_000_000)
    prepared_cache_size: int = Field(512, ge=1, le=1_000_000)
    key_cache_size: int = Field(4096, ge=1, le=1_000_000)
    key_recheck_seconds: float = Field(1.0, ge=0, le=60)
    max_request_assets: int = Field(5000, ge=3)
    max_request_rows: int = Field(200_000, ge=1)
    max_json_depth: int = Field(32, ge=4, le=256)
    cors_origins: tuple[str, ...] = ()
    console_secret: str | None = Field(None, min_length=32, repr=False)

    def __init__(self, **data: Any) -> None:
        try:
            super().__init__(**data)
        except ValidationError as err:
            raise ConfigError(format_validation_error(err, _WHERE.get())) from None

    @classmethod
    def _build(cls, data: Mapping[str, Any], where: str) -> ServiceSettings:
        """Construct from a mapping read from ``where`` (the environment); errors name it."""
        token = _WHERE.set(where)
        try:
            return cls(**data)
        finally:
            _WHERE.reset(token)

    @classmethod
    def from_env(cls, environ: Mapping[str, str] | None = None, **overrides: Any) -> ServiceSettings:
        """Read ``RISKSHAPE_STORE_URL``, ``RISKSHAPE_MAX_BODY_BYTES``, ... then apply ``overrides``."""
        env = os.environ if environ is None else environ
        data: dict[str, Any] = {}
        for name in cls.model_fields:
            key = f"RISKSHAPE_{name.upper()}"
            if key in env:
                data[name] = env[key]
        if isinstance(data.get("cors_origins"), str):
            data["cors_origins"] = tuple(o.strip() for o in data["cors_origins"].split(",") if o.strip())
        data.update({k: v for k, v in overrides.items() if v is not None})
        return cls._build(data, "environment (RISKSHAPE_*)")
