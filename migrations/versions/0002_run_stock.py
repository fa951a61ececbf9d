"""Linked horizons: stock carried per site and week of a run.

Revision ID: 0002
Revises: 0001
Create Date: 2026-12-01
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0002"
down_revision: str | Sequence[str] | None = "0001"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def upgrade() -> None:
    # Bulk result table like run_flow: no foreign keys (see 0001).
    op.create_table(
        "run_stock",
        sa.Column("run_id", sa.BigInteger(), nullable=False),
        sa.Column("period_id", sa.Integer(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("stock", sa.Numeric(), nullable=False),
        sa.Column("holding_cost", sa.Numeric(), nullable=False),
        sa.Column("storage_value", sa.Numeric(), nullable=True),
        sa.PrimaryKeyConstraint("run_id", "period_id", "site_id", name=op.f("pk_run_stock")),
        sa.CheckConstraint("stock >= 0", name=op.f("ck_run_stock_stock_nonnegative")),
    )


def downgrade() -> None:
    op.drop_table("run_stock")
