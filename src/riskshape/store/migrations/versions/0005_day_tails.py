"""Day tails: one replaceable row per portfolio with what its next day reads.

A day of the daily loop needs the tail of the price history and the rules' lookback of feature
rows; reading them cell by cell and row by row was most of a day's cost. ``day_tails`` keeps them
as one compact row per portfolio (replaced by each bounded day, in the day's transaction). The
chained ``day_state`` record names the row's SHA-256, so the hash chain covers it.

Revision ID: 0005
Revises: 0004
Create Date: 2026-12-05
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "day_tails",
        sa.Column("portfolio_id", sa.Integer, sa.ForeignKey("portfolios.id"), primary_key=True, autoincrement=False),
        sa.Column("run_id", sa.Integer, sa.ForeignKey("runs.id"), nullable=False),
        sa.Column("digest", sa.String(64), nullable=False),
        sa.Column("payload", sa.LargeBinary, nullable=False),
    )


def downgrade() -> None:
    op.drop_table("day_tails")
