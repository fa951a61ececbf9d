"""Every session of the planner's database plans without JIT compilation.

The planner's own connections already start with ``jit = off``; an analyst's
psql or notebook session did not. There, ``SELECT * FROM site_price_history
WHERE period = '...'`` crossed ``jit_above_cost`` once enough weeks were
stored: its previous-week lookup reads one partition per week of history (the
other partitions are pruned while the query runs, but they stay in the plan),
so the plan's estimated cost grew with the weeks and PostgreSQL compiled about
1,200 functions first. At 156 weeks that took 368 ms of a 497 ms query that
takes 70 ms without it. The reporting views are index lookups on one week's
partitions; none gains from compilation.

The upgrade sets ``jit = off`` for the database (``ALTER DATABASE ... SET``),
which new sessions pick up; a session may still ``SET jit = on``. It needs
the database's owner (or a superuser): another user gets a notice instead
and the views keep working, compiled or not. The downgrade resets it.

Revision ID: 0012
Revises: 0011
Create Date: 2026-12-05
"""

from collections.abc import Sequence

from alembic import op

revision: str = "0012"
down_revision: str | Sequence[str] | None = "0011"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

_AS_OWNER = """
DO $$
BEGIN
    IF pg_has_role(current_user,
                   (SELECT datdba FROM pg_database WHERE datname = current_database()), 'MEMBER') THEN
        EXECUTE format('ALTER DATABASE %I {action}', current_database());
    ELSE
        RAISE NOTICE 'only the owner of database % can turn JIT compilation off for its sessions; '
                     'the planner''s own sessions turn it off themselves', current_database();
    END IF;
END
$$"""


def upgrade() -> None:
    op.execute(_AS_OWNER.format(action="SET jit = off"))


def downgrade() -> None:
    op.execute(_AS_OWNER.format(action="RESET jit"))
