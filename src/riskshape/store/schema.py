"""The archive's tables as SQLAlchemy Core objects (the queries use these; the DDL lives in the
Alembic migrations under ``riskshape/store/migrations``, which must stay in step with this file).

Design notes
------------
* ``features`` holds one row per (portfolio, configuration, window) with the summary columns as a
  JSON object in a text column. The set of columns depends on ``maxdim`` and may grow as summaries
  are added; a JSON row keeps the schema stable without a migration per new summary, reading a
  date range is one indexed range scan (a long table would be ~20 rows per window), and text JSON
  behaves identically on SQLite and PostgreSQL (NaN is written as ``null``).
* A window may have several versions (migration 0004): a correction archives the recomputed
  features and diagrams again, keyed by the run that made them; the version in force at a moment
  is that of the latest run recorded by then (knowledge time = the run's ``created_at``).
* ``diagrams`` keeps the finite bars of a window and dimension as little-endian float32 bytes
  (ripser computes in float32, so nothing is lost).
* ``ledger`` is the single append-only sequence shared by ``alerts``, ``reviews`` and ``events``: its primary
  key ``seq`` and the UNIQUE ``prev_hash`` make two records claiming the same place impossible.
  Every alert, review and event row repeats its ``seq``, ``prev_hash`` and ``entry_hash``.
* ``events`` holds every other chained record (a day closed, a window superseded, a period signed
  off, ...): a ``kind``, the portfolio and subject it concerns, who recorded it, and a canonical
  JSON ``payload``; see :mod:`riskshape.store.events`.
* ``day_tails`` (migration 0005) keeps one row per portfolio, replaced by every bounded day: what
  the next day reads instead of the price and feature rows it needs (:mod:`riskshape.store.tails`).
  It is not history but a copy of archived values; the chained ``day_state`` record names its
  SHA-256, so an edited row is refused (the day then reads the archive) and ``audit verify`` reports it.
* Triggers (created by the migration) refuse UPDATE and DELETE on ``ledger``, ``alerts``,
  ``reviews``, ``events``, ``prices`` and ``runs``.
"""

from __future__ import annotations

from datetime import datetime, timezone
from typing import Any

import sqlalchemy as sa

__all__ = [
    "metadata",
    "UtcDateTime",
    "portfolios",
    "runs",
    "prices",
    "features",
    "diagrams",
    "ledger",
    "alerts",
    "reviews",
    "events",
    "api_keys",
    "day_tails",
    "APPEND_ONLY_TABLES",
]

APPEND_ONLY_TABLES = ("ledger", "alerts", "reviews", "events", "prices", "runs")

HASH = sa.String(64)
NAME = sa.String(200)
BIGID = sa.BigInteger().with_variant(sa.Integer(), "sqlite")


class UtcDateTime(sa.types.TypeDecorator[datetime]):
    """A timestamp stored in UTC and always read back timezone-aware (UTC), on every backend."""

    impl = sa.DateTime(timezone=True)
    cache_ok = True

    def process_bind_param(self, value: datetime | None, dialect: Any) -> datetime | None:
        """The value to write, in UTC (naive on SQLite, which keeps no timezone); a naive value is refused."""
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError(f"timestamp {value!r} has no timezone; give a timezone-aware (UTC) datetime")
        value = value.astimezone(timezone.utc)
        return value.replace(tzinfo=None) if dialect.name == "sqlite" else value

    def process_result_value(self, value: datetime | None, dialect: Any) -> datetime | None:
        """The value read back, timezone-aware in UTC."""
        if value is None:
            return None
        if value.tzinfo is None:
            return value.replace(tzinfo=timezone.utc)
        return value.astimezone(timezone.utc)


metadata = sa.MetaData()

portfolios = sa.Table(
    "portfolios",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
    sa.Column("name", NAME, nullable=False, unique=True),
    sa.Column("created_at", UtcDateTime, nullable=False),
)

runs = sa.Table(
    "runs",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
    sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), nullable=False, index=True),
    sa.Column("created_at", UtcDateTime, nullable=False),
    sa.Column("config_json", sa.Text, nullable=False),
    sa.Column("config_hash", HASH, nullable=False),
    sa.Column("input_hash", HASH, nullable=False),
    sa.Column("package_version", sa.String(64), nullable=False),
    sa.Column("source", sa.Text, nullable=True),
    sa.Column("first_date", sa.Date, nullable=True),
    sa.Column("last_date", sa.Date, nullable=True),
    sa.Column("n_dates", sa.Integer, nullable=False),
    sa.Column("assets_json", sa.Text, nullable=False),
    sa.Column("prices_through_id", sa.BigInteger, nullable=False),
    sa.Column("prices_added", sa.Integer, nullable=False),
    sa.Column("corrections_added", sa.Integer, nullable=False),
)

prices = sa.Table(
    "prices",
    metadata,
    sa.Column("id", BIGID, primary_key=True, autoincrement=True),
    sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), nullable=False),
    sa.Column("date", sa.Date, nullable=False),
    sa.Column("asset", NAME, nullable=False),
    sa.Column("price", sa.Double, nullable=True),
    sa.Column("revision", sa.Integer, nullable=False),
    sa.Column("recorded_at", UtcDateTime, nullable=False),
    sa.UniqueConstraint("portfolio_id", "date", "asset", "revision", name="uq_prices_cell_revision"),
    sa.Index("ix_prices_portfolio_row", "portfolio_id", "id"),  # the change marker's newest price row
)

features = sa.Table(
    "features",
    metadata,
    sa.Column("id", BIGID, primary_key=True, autoincrement=True),
    sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), nullable=False),
    sa.Column("config_hash", HASH, nullable=False),
    sa.Column("window_end", sa.Date, nullable=False),
    sa.Column("run_id", sa.Integer, sa.ForeignKey("runs.id"), nullable=False),
    sa.Column("values_json", sa.Text, nullable=False),
    sa.UniqueConstraint("portfolio_id", "config_hash", "window_end", "run_id", name="uq_features_version"),
)

diagrams = sa.Table(
    "diagrams",
    metadata,
    sa.Column("id", BIGID, primary_key=True, autoincrement=True),
    sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), nullable=False),
    sa.Column("config_hash", HASH, nullable=False),
    sa.Column("window_end", sa.Date, nullable=False),
    sa.Column("dim", sa.SmallInteger, nullable=False),
    sa.Column("run_id", sa.Integer, sa.ForeignKey("runs.id"), nullable=False),
    sa.Column("n_bars", sa.Integer, nullable=False),
    sa.Column("bars", sa.LargeBinary, nullable=False),
    sa.UniqueConstraint("portfolio_id", "config_hash", "window_end", "dim", "run_id", name="uq_diagrams_version"),
)

ledger = sa.Table(
    "ledger",
    metadata,
    sa.Column("seq", sa.Integer, primary_key=True, autoincrement=False),
    sa.Column("kind", sa.String(8), nullable=False),
    sa.Column("prev_hash", HASH, nullable=False, unique=True),
    sa.Column("entry_hash", HASH, nullable=False, unique=True),
    sa.CheckConstraint("kind IN ('alert', 'review', 'event')", name="ck_ledger_kind"),
    sa.CheckConstraint("seq >= 1", name="ck_ledger_seq"),
)

alerts = sa.Table(
    "alerts",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True, autoincrement=False),
    sa.Column("seq", sa.Integer, sa.ForeignKey("ledger.seq"), nullable=False, unique=True),
    sa.Column("prev_hash", HASH, nullable=False, unique=True),
    sa.Column("entry_hash", HASH, nullable=False, unique=True),
    sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), nullable=False),
    sa.Column("portfolio", NAME, nullable=False),
    sa.Column("rule", sa.String(80), nullable=False),
    sa.Column("summary", sa.String(80), nullable=False),
    sa.Column("kind", sa.String(16), nullable=False),
    sa.Column("window_end", sa.Date, nullable=False, index=True),
    sa.Column("value", sa.Double, nullable=False),
    sa.Column("threshold", sa.Double, nullable=False),
    sa.Column("severity", sa.String(16), nullable=False),
    sa.Column("raised_at", UtcDateTime, nullable=False),
    sa.Column("config_hash", HASH, nullable=False),
    sa.Column("inputs_hash", HASH, nullable=False),
    sa.Column("package_version", sa.String(64), nullable=False),
    sa.Column("run_id", sa.Integer, sa.ForeignKey("runs.id"), nullable=False),
    sa.Column("explanation", sa.Text, nullable=True),
    sa.UniqueConstraint("portfolio_id", "rule", "window_end", "config_hash", name="uq_alerts_firing"),
)

reviews = sa.Table(
    "reviews",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True, autoincrement=False),
    sa.Column("seq", sa.Integer, sa.ForeignKey("ledger.seq"), nullable=False, unique=True),
    sa.Column("prev_hash", HASH, nullable=False, unique=True),
    sa.Column("entry_hash", HASH, nullable=False, unique=True),
    sa.Column("alert_id", sa.Integer, sa.ForeignKey("alerts.id"), nullable=False, index=True),
    sa.Column("action", sa.String(16), nullable=False),
    sa.Column("reviewer", NAME, nullable=False),
    sa.Column("comment", sa.Text, nullable=False),
    sa.Column("created_at", UtcDateTime, nullable=False),
    sa.CheckConstraint("action IN ('acknowledge', 'dismiss', 'escalate', 'close')", name="ck_reviews_action"),
)

events = sa.Table(
    "events",
    metadata,
    sa.Column("id", sa.Integer, primary_key=True, autoincrement=False),
    sa.Column("seq", sa.Integer, sa.ForeignKey("ledger.seq"), nullable=False, unique=True),
    sa.Column("prev_hash", HASH, nullable=False, unique=True),
    sa.Column("entry_hash", HASH, nullable=False, unique=True),
    sa.Column("kind", sa.String(32), nullable=False, index=True),
    sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), nullable=True, index=True),
    sa.Column("portfolio", NAME, nullable=True),
    sa.Column("subject", NAME, nullable=True),
    sa.Column("payload", sa.Text, nullable=False),
    sa.Column("actor", NAME, nullable=True),
    sa.Column("recorded_at", UtcDateTime, nullable=False),
)

api_keys = sa.Table(
    "api_keys",
    metadata,
    sa.Column("key_id", sa.String(32), primary_key=True),
    sa.Column("key_hash", HASH, nullable=False),
    sa.Column("role", sa.String(32), nullable=False),
    sa.Column("owner", NAME, nullable=False),
    sa.Column("created_at", UtcDateTime, nullable=False),
    sa.Column("revoked", sa.Boolean, nullable=False),
)

day_tails = sa.Table(
    "day_tails",
    metadata,
    sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), primary_key=True, autoincrement=False),
    sa.Column("run_id", sa.Integer, sa.ForeignKey("runs.id"), nullable=False),
    sa.Column("digest", HASH, nullable=False),
    sa.Column("payload", sa.LargeBinary, nullable=False),
)
