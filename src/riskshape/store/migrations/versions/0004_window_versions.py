"""Window versions: a window's features and diagrams may be archived again by a later run.

A correction to an archived price recomputes the windows that contain it and archives their new
values as a new version, keyed by the run that made them; the earlier values stay. The unique keys
of ``features`` and ``diagrams`` gain ``run_id``: (portfolio, configuration, window end[, dim], run).
The version in force at a moment is the one of the latest run recorded by then (knowledge time is
the run's ``created_at``).

SQLite cannot change a UNIQUE constraint in place, so there the two tables are rebuilt with their
rows (as migration 0002 rebuilds a table), inside the migration's transaction.

Revision ID: 0004
Revises: 0003
Create Date: 2026-12-04
"""

from __future__ import annotations

from alembic import op

revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None

OLD_KEYS = {
    "features": ("uq_features_window", "portfolio_id, config_hash, window_end"),
    "diagrams": ("uq_diagrams_window_dim", "portfolio_id, config_hash, window_end, dim"),
}
NEW_KEYS = {
    "features": ("uq_features_version", ("portfolio_id", "config_hash", "window_end", "run_id")),
    "diagrams": ("uq_diagrams_version", ("portfolio_id", "config_hash", "window_end", "dim", "run_id")),
}


def upgrade() -> None:
    dialect = op.get_bind().dialect.name
    for table, (old, _) in OLD_KEYS.items():
        new, columns = NEW_KEYS[table]
        if dialect == "postgresql":
            op.drop_constraint(old, table, type_="unique")
            op.create_unique_constraint(new, table, list(columns))
        elif dialect == "sqlite":
            _rebuild_sqlite(table, old, new, columns)
        else:  # pragma: no cover - open_store accepts only these two
            raise RuntimeError(f"riskshape archive: unsupported database {dialect!r}")


def _rebuild_sqlite(table: str, old: str, new: str, columns: tuple[str, ...]) -> None:
    """Rebuild ``table`` with its UNIQUE ``old`` replaced by ``new`` over ``columns`` (SQLite's documented
    procedure, https://sqlite.org/lang_altertable.html section 7), keeping every row.
    """
    bind = op.get_bind()
    old_sql = bind.exec_driver_sql("SELECT sql FROM sqlite_master WHERE type = 'table' AND name = ?", (table,)).scalar()
    if old_sql is None:  # pragma: no cover - 0001 created it
        raise RuntimeError(f"riskshape archive: table {table!r} is missing")
    start = old_sql.index(f"CONSTRAINT {old} UNIQUE (")
    end = old_sql.index(")", start) + 1
    new_sql = old_sql[:start] + f"CONSTRAINT {new} UNIQUE ({', '.join(columns)})" + old_sql[end:]
    new_sql = new_sql.replace(f"CREATE TABLE {table}", f"CREATE TABLE {table}_rebuilt", 1)
    bind.exec_driver_sql(new_sql)
    bind.exec_driver_sql(f"INSERT INTO {table}_rebuilt SELECT * FROM {table}")
    bind.exec_driver_sql(f"DROP TABLE {table}")
    bind.exec_driver_sql(f"ALTER TABLE {table}_rebuilt RENAME TO {table}")


def downgrade() -> None:
    raise RuntimeError("riskshape archive: window versions cannot be undone without losing archived versions")
