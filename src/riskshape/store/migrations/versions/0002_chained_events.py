"""Chained events: one table for every chained record that is neither an alert nor a review.

Adds ``events`` (append-only, on the same ledger as alerts and reviews) and widens two checks:
the ledger's ``kind`` takes ``event``, a review's ``action`` takes ``close``. SQLite cannot change
a CHECK constraint in place, so there the two tables are rebuilt with their rows, inside the
migration's transaction (with foreign keys off and checked before the commit, as
``riskshape.store.database`` runs every migration on SQLite), and their append-only triggers made anew.

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-04
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None

HASH = sa.String(64)
NAME = sa.String(200)
STAMP = sa.DateTime(timezone=True)

LEDGER_KINDS = ("alert", "review", "event")
REVIEW_ACTIONS = ("acknowledge", "dismiss", "escalate", "close")


def _in(column: str, values: tuple[str, ...]) -> str:
    return f"{column} IN ({', '.join(repr(v) for v in values)})"


def upgrade() -> None:
    dialect = op.get_bind().dialect.name
    if dialect == "postgresql":
        op.drop_constraint("ck_ledger_kind", "ledger", type_="check")
        op.create_check_constraint("ck_ledger_kind", "ledger", _in("kind", LEDGER_KINDS))
        op.drop_constraint("ck_reviews_action", "reviews", type_="check")
        op.create_check_constraint("ck_reviews_action", "reviews", _in("action", REVIEW_ACTIONS))
    elif dialect == "sqlite":
        _rebuild_sqlite("ledger", "ck_ledger_kind", _in("kind", LEDGER_KINDS))
        _rebuild_sqlite("reviews", "ck_reviews_action", _in("action", REVIEW_ACTIONS))
    else:  # pragma: no cover - open_store accepts only these two
        raise RuntimeError(f"riskshape archive: unsupported database {dialect!r}")
    op.create_table(
        "events",
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
        sa.Column("recorded_at", STAMP, nullable=False),
    )
    _append_only("events")


def _append_only(table: str) -> None:
    """The append-only triggers of migration 0001, for one more table."""
    dialect = op.get_bind().dialect.name
    if dialect == "postgresql":
        op.execute(
            f"CREATE TRIGGER {table}_append_only BEFORE UPDATE OR DELETE ON {table} "
            "FOR EACH ROW EXECUTE FUNCTION riskshape_refuse_change()"
        )
        op.execute(
            f"CREATE TRIGGER {table}_no_truncate BEFORE TRUNCATE ON {table} "
            "FOR EACH STATEMENT EXECUTE FUNCTION riskshape_refuse_change()"
        )
    else:
        for action in ("UPDATE", "DELETE"):
            op.execute(
                f"CREATE TRIGGER {table}_no_{action.lower()} BEFORE {action} ON {table} "
                f"BEGIN SELECT RAISE(ABORT, 'riskshape: table {table} is append-only ({action} refused)'); END"
            )


def _rebuild_sqlite(table: str, check: str, condition: str) -> None:
    """Rebuild ``table`` with its CHECK ``check`` replaced by ``condition`` (SQLite's documented
    procedure for schema changes ALTER TABLE cannot make, https://sqlite.org/lang_altertable.html,
    section 7), keeping every row and the append-only triggers.

    Foreign keys are off during migrations on SQLite and checked before the commit (see
    ``riskshape.store.database``), so the other tables' references to ``table`` hold throughout.
    """
    bind = op.get_bind()
    old_sql = bind.exec_driver_sql("SELECT sql FROM sqlite_master WHERE type = 'table' AND name = ?", (table,)).scalar()
    if old_sql is None:  # pragma: no cover - 0001 created it
        raise RuntimeError(f"riskshape archive: table {table!r} is missing")
    start = old_sql.index(f"CONSTRAINT {check} CHECK (")
    depth, end = 0, start + len(f"CONSTRAINT {check} CHECK ")
    for position in range(end, len(old_sql)):
        depth += {"(": 1, ")": -1}.get(old_sql[position], 0)
        if depth == 0:
            end = position + 1
            break
    new_sql = old_sql[:start] + f"CONSTRAINT {check} CHECK ({condition})" + old_sql[end:]
    new_sql = new_sql.replace(f"CREATE TABLE {table}", f"CREATE TABLE {table}_rebuilt", 1)
    indexes = bind.exec_driver_sql(
        "SELECT sql FROM sqlite_master WHERE type = 'index' AND tbl_name = ? AND sql IS NOT NULL", (table,)
    ).scalars()
    index_sql = list(indexes)
    for action in ("update", "delete"):
        bind.exec_driver_sql(f"DROP TRIGGER IF EXISTS {table}_no_{action}")
    bind.exec_driver_sql(new_sql)
    bind.exec_driver_sql(f"INSERT INTO {table}_rebuilt SELECT * FROM {table}")
    bind.exec_driver_sql(f"DROP TABLE {table}")
    bind.exec_driver_sql(f"ALTER TABLE {table}_rebuilt RENAME TO {table}")
    for sql in index_sql:
        bind.exec_driver_sql(sql)
    _append_only(table)


def downgrade() -> None:
    op.drop_table("events")
