"""Price rows by portfolio: an index on ``prices (portfolio_id, id)``.

A portfolio's change marker (:mod:`riskshape.store.markers`) reads the highest id among its price
rows, so that archiving the prices of a pending day (which writes no run) changes what its readers
are served. With this index that is one index lookup on SQLite and PostgreSQL alike, however many
prices the portfolio holds; without it the read scans every price of the portfolio.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-04
"""

from __future__ import annotations

from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_index("ix_prices_portfolio_row", "prices", ["portfolio_id", "id"])


def downgrade() -> None:
    op.drop_index("ix_prices_portfolio_row", table_name="prices")
