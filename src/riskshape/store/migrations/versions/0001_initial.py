"""The first archive schema: portfolios, runs, prices, features, diagrams, the ledger with alerts and
reviews, API keys, and the triggers that make the archive's history append-only.

Revision ID: 0001
Revises:
Create Date: 2024-06-01
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None

HASH = sa.String(64)
NAME = sa.String(200)
BIGID = sa.BigInteger().with_variant(sa.Integer(), "sqlite")
STAMP = sa.DateTime(timezone=True)
APPEND_ONLY = ("ledger", "alerts", "reviews", "prices", "runs")


def upgrade() -> None:
    op.create_table(
        "portfolios",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("name", NAME, nullable=False, unique=True),
        sa.Column("created_at", STAMP, nullable=False),
    )
    op.create_table(
        "runs",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), nullable=False, index=True),
        sa.Column("created_at", STAMP, nullable=False),
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
    op.create_table(
        "prices",
        sa.Column("id", BIGID, primary_key=True, autoincrement=True),
        sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), nullable=False),
        sa.Column("date", sa.Date, nullable=False),
        sa.Column("asset", NAME, nullable=False),
        sa.Column("price", sa.Double, nullable=True),
        sa.Column("revision", sa.Integer, nullable=False),
        sa.Column("recorded_at", STAMP, nullable=False),
        sa.UniqueConstraint("portfolio_id", "date", "asset", "revision", name="uq_prices_cell_revision"),
    )
    op.create_table(
        "features",
        sa.Column("id", BIGID, primary_key=True, autoincrement=True),
        sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), nullable=False),
        sa.Column("config_hash", HASH, nullable=False),
        sa.Column("window_end", sa.Date, nullable=False),
        sa.Column("run_id", sa.Integer, sa.ForeignKey("runs.id"), nullable=False),
        sa.Column("values_json", sa.Text, nullable=False),
        sa.UniqueConstraint("portfolio_id", "config_hash", "window_end", name="uq_features_window"),
    )
    op.create_table(
        "diagrams",
        sa.Column("id", BIGID, primary_key=True, autoincrement=True),
        sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), nullable=False),
        sa.Column("config_hash", HASH, nullable=False),
        sa.Column("window_end", sa.Date, nullable=False),
        sa.Column("dim", sa.SmallInteger, nullable=False),
        sa.Column("run_id", sa.Integer, sa.ForeignKey("runs.id"), nullable=False),
        sa.Column("n_bars", sa.Integer, nullable=False),
        sa.Column("bars", sa.LargeBinary, nullable=False),
        sa.UniqueConstraint("portfolio_id", "config_hash", "window_end", "dim", name="uq_diagrams_window_dim"),
    )
    op.create_table(
        "ledger",
        sa.Column("seq", sa.Integer, primary_key=True, autoincrement=False),
        sa.Column("kind", sa.String(8), nullable=False),
        sa.Column("prev_hash", HASH, nullable=False, unique=True),
        sa.Column("entry_hash", HASH, nullable=False, unique=True),
        sa.CheckConstraint("kind IN ('alert', 'review')", name="ck_ledger_kind"),
        sa.CheckConstraint("seq >= 1", name="ck_ledger_seq"),
    )
    op.create_table(
        "alerts",
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
        sa.Column("raised_at", STAMP, nullable=False),
        sa.Column("config_hash", HASH, nullable=False),
        sa.Column("inputs_hash", HASH, nullable=False),
        sa.Column("package_version", sa.String(64), nullable=False),
        sa.Column("run_id", sa.Integer, sa.ForeignKey("runs.id"), nullable=False),
        sa.Column("explanation", sa.Text, nullable=True),
        sa.UniqueConstraint("portfolio_id", "rule", "window_end", "config_hash", name="uq_alerts_firing"),
    )
    op.create_table(
        "reviews",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=False),
        sa.Column("seq", sa.Integer, sa.ForeignKey("ledger.seq"), nullable=False, unique=True),
        sa.Column("prev_hash", HASH, nullable=False, unique=True),
        sa.Column("entry_hash", HASH, nullable=False, unique=True),
        sa.Column("alert_id", sa.Integer, sa.ForeignKey("alerts.id"), nullable=False, index=True),
        sa.Column("action", sa.String(16), nullable=False),
        sa.Column("reviewer", NAME, nullable=False),
        sa.Column("comment", sa.Text, nullable=False),
        sa.Column("created_at", STAMP, nullable=False),
        sa.CheckConstraint("action IN ('acknowledge', 'dismiss', 'escalate')", name="ck_reviews_action"),
    )
    op.create_table(
        "api_keys",
        sa.Column("key_id", sa.String(32), primary_key=True),
        sa.Column("key_hash", HASH, nullable=False),
        sa.Column("role", sa.String(32), nullable=False),
        sa.Column("owner", NAME, nullable=False),
        sa.Column("created_at", STAMP, nullable=False),
        sa.Column("revoked", sa.Boolean, nullable=False),
    )
    _append_only_triggers()


def _append_only_triggers() -> None:
    """Refuse UPDATE and DELETE (and TRUNCATE on PostgreSQL) on the tables that hold history."""
    dialect = op.get_bind().dialect.name
    if dialect == "postgresql":
        op.execute(
            """
            CREATE FUNCTION riskshape_refuse_change() RETURNS trigger LANGUAGE plpgsql AS $$
            BEGIN
                RAISE EXCEPTION 'riskshape: table % is append-only (% refused)', TG_TABLE_NAME, TG_OP
                    USING ERRCODE = 'insufficient_privilege';
            END
            $$
            """
        )
        for table in APPEND_ONLY:
            op.execute(
                f"CREATE TRIGGER {table}_append_only BEFORE UPDATE OR DELETE ON {table} "
                "FOR EACH ROW EXECUTE FUNCTION riskshape_refuse_change()"
            )
            op.execute(
                f"CREATE TRIGGER {table}_no_truncate BEFORE TRUNCATE ON {table} "
                "FOR EACH STATEMENT EXECUTE FUNCTION riskshape_refuse_change()"
            )
    elif dialect == "sqlite":
        for table in APPEND_ONLY:
            for action in ("UPDATE", "DELETE"):
                op.execute(
                    f"CREATE TRIGGER {table}_no_{action.lower()} BEFORE {action} ON {table} "
                    f"BEGIN SELECT RAISE(ABORT, 'riskshape: table {table} is append-only ({action} refused)'); END"
                )
    else:  # pragma: no cover - open_store accepts only these two
        raise RuntimeError(f"riskshape archive: unsupported database {dialect!r}")


def downgrade() -> None:
    dialect = op.get_bind().dialect.name
    for table in ("api_keys", "reviews", "alerts", "ledger", "diagrams", "features", "prices", "runs", "portfolios"):
        op.drop_table(table)
    if dialect == "postgresql":
        op.execute("DROP FUNCTION IF EXISTS riskshape_refuse_change()")
