"""Locks only the planner can take: the ``planner_lock`` table.

One row per thing the planner serialises: ``load`` for loads, ``week <code>``
(for example ``week 2026-W49``) for the solves of one week. A session holds a
lock by holding the row: ``SELECT ... FOR UPDATE`` (waiting at most the lock
timeout) or ``FOR UPDATE SKIP LOCKED`` (not waiting), in a transaction kept
open for the guarded work. Rows are inserted on demand.

Advisory locks, used before this revision, can be taken by any role that may
connect, with keys anyone can read in the source or in ``pg_locks``; a row lock
on this table needs SELECT and UPDATE on it. ``planner_reader`` and PUBLIC get
no right at all on it (not even SELECT or INSERT, so an uncommitted row of
theirs cannot hold up the planner's inserts either).

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-03
"""

import importlib.util
from collections.abc import Sequence
from pathlib import Path

import sqlalchemy as sa
from alembic import op

revision: str = "0007"
down_revision: str | Sequence[str] | None = "0006"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def _load(name: str):
    path = Path(__file__).with_name(name)
    spec = importlib.util.spec_from_file_location(f"planner_migration_{path.stem}", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


READER_ROLE = _load("0003_reporting.py").READER_ROLE
COMMENT = "rows the planner locks (FOR UPDATE) to serialise loads and each week's solves; no other role may take them"


def upgrade() -> None:
    op.create_table(
        "planner_lock",
        sa.Column("name", sa.Text(), nullable=False),
        sa.PrimaryKeyConstraint("name", name=op.f("pk_planner_lock")),
        comment=COMMENT,
    )
    # New tables grant nothing to PUBLIC; revoking says so, and guards against
    # default privileges an administrator may have set on the schema.
    op.execute("REVOKE ALL ON planner_lock FROM PUBLIC")
    op.execute(f"REVOKE ALL ON planner_lock FROM {READER_ROLE}")


def downgrade() -> None:
    op.drop_table("planner_lock")
