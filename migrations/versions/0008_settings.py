"""Settings kept once per database: the currency of every money figure.

- ``setting``: one row per setting (``name``, ``value``, ``changed_at``). The
  only setting so far is ``currency``, an ISO 4217 code (three capital letters)
  that the reports, charts and the HTML report write beside every money
  figure. It starts as ``XXX``, ISO 4217's code for "no currency", until a
  user sets it (``planner currency EUR``): the planner never guesses a
  currency. The read-only role ``planner_reader`` may read it, so that a
  reporting tool can label money columns as the planner does.

Revision ID: 0008
Revises: 0007
Create Date: 2026-12-05
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op

revision: str = "0008"
down_revision: str | Sequence[str] | None = "0007"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

#: The read-only reporting role (created by migration 0003).
READER_ROLE = "planner_reader"

#: ISO 4217's code for "no currency involved": the value until a user sets one.
DEFAULT_CURRENCY = "XXX"


def upgrade() -> None:
    op.create_table(
        "setting",
        sa.Column("name", sa.Text(), nullable=False),
        sa.Column("value", sa.Text(), nullable=False),
        sa.Column("changed_at", sa.DateTime(timezone=True), server_default=sa.text("now()"), nullable=False),
        sa.PrimaryKeyConstraint("name", name=op.f("pk_setting")),
        sa.CheckConstraint("name <> 'currency' OR value ~ '^[A-Z]{3}$'", name=op.f("ck_setting_currency_code")),
    )
    op.execute(f"INSERT INTO setting (name, value) VALUES ('currency', '{DEFAULT_CURRENCY}')")
    op.execute(f"GRANT SELECT ON setting TO {READER_ROLE}")


def downgrade() -> None:
    op.drop_table("setting")
