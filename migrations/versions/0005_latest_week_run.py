"""One definition of "the latest optimal run of a week", and of "the newest run of a week".

- ``latest_week_run``: per period, its latest optimal week run (newest
  ``finished_at``, then highest id), with the batch it was solved from. Every
  view that shows "each week's latest optimal run", and the planner's own
  lookups (explanations, rate ranges, staleness for cron), read it.
- ``newest_week_run``: per period, its newest week run whatever its status.

Both are plain views over one backward probe of
``ix_solve_run_period_id_status_finished_at`` per period; the reporting views
are recreated on them with the same columns.

Revision ID: 0005
Revises: 0004
Create Date: 2026-12-02
"""

import importlib.util
from collections.abc import Sequence
from pathlib import Path

from alembic import op

revision: str = "0005"
down_revision: str | Sequence[str] | None = "0004"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def _load(name: str):
    path = Path(__file__).with_name(name)
    spec = importlib.util.spec_from_file_location(f"planner_migration_{path.stem}", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


REPORTING = _load("0003_reporting.py")
LIMITS = _load("0004_limit_values.py")
READER_ROLE = REPORTING.READER_ROLE

LATEST_WEEK_RUN = """
CREATE VIEW latest_week_run AS
SELECT p.id AS period_id, p.code AS period, p.starts_on, r.id AS run_id, r.batch_id,
       r.finished_at, r.input_fingerprint
FROM period p
CROSS JOIN LATERAL (
    SELECT sr.id, sr.batch_id, sr.finished_at, sr.input_fingerprint FROM solve_run sr
    WHERE sr.period_id = p.id AND sr.status = 'optimal' AND sr.kind = 'week'
    ORDER BY sr.finished_at DESC, sr.id DESC
    LIMIT 1
) r"""

NEWEST_WEEK_RUN = """
CREATE VIEW newest_week_run AS
SELECT p.id AS period_id, p.code AS period, p.starts_on, r.id AS run_id, r.status, r.batch_id,
       r.finished_at, r.input_fingerprint
FROM period p
CROSS JOIN LATERAL (
    SELECT sr.id, sr.status, sr.batch_id, sr.finished_at, sr.input_fingerprint FROM solve_run sr
    WHERE sr.period_id = p.id AND sr.kind = 'week'
    ORDER BY sr.finished_at DESC NULLS LAST, sr.id DESC
    LIMIT 1
) r"""

# The reports' run selection, now read from latest_week_run.
LATEST_WEEK_RUNS = """
run_period AS NOT MATERIALIZED (
    SELECT lw.run_id, lw.period_id, lw.batch_id,
           lag(lw.run_id) OVER by_week AS previous_run_id,
           lag(lw.period_id) OVER by_week AS previous_period_id
    FROM latest_week_run lw
    WINDOW by_week AS (ORDER BY lw.starts_on)
)"""

# Every run's periods; a run's first period is compared with the latest optimal
# week run of the solved period before it.
ALL_RUNS = """
run_period AS NOT MATERIALIZED (
    SELECT r.id AS run_id, p.id AS period_id,
           coalesce(r.batch_id, (
               SELECT max(ps.batch_id) FROM period_snapshot ps
               JOIN load_batch b ON b.id = ps.batch_id
               WHERE ps.period_id = p.id AND b.loaded_at <= r.started_at
           )) AS batch_id,
           coalesce(lag(r.id) OVER by_week, earlier.run_id) AS previous_run_id,
           coalesce(lag(p.id) OVER by_week, earlier.period_id) AS previous_period_id
    FROM solve_run r
    JOIN period first_period ON first_period.id = r.first_period_id
    JOIN period last_period ON last_period.id = r.last_period_id
    JOIN period p ON p.starts_on BETWEEN first_period.starts_on AND last_period.starts_on
    LEFT JOIN LATERAL (
        SELECT lw.period_id, lw.run_id FROM latest_week_run lw
        WHERE lw.starts_on < first_period.starts_on
        ORDER BY lw.starts_on DESC
        LIMIT 1
    ) earlier ON true
    WINDOW by_week AS (PARTITION BY r.id ORDER BY p.starts_on)
)"""

BODIES = {**REPORTING.BODIES, "binding_capacity": LIMITS.BINDING_CAPACITY, "limit_value": LIMITS.LIMIT_VALUE}
VIEWS = REPORTING.VIEWS + ("limit_value",)


def view_sql(view: str, *, by_run: bool = False, runs: tuple[str, str] = (LATEST_WEEK_RUNS, ALL_RUNS)) -> str:
    """``CREATE OR REPLACE VIEW`` of a reporting view (or its ``_by_run`` twin) on the given run selections."""
    latest, every = runs
    if view == "run_summary":
        chosen = REPORTING.RUN_SUMMARY_ALL if by_run else f"{latest},{REPORTING.RUN_SUMMARY_LATEST}"
        query = f"WITH {chosen}{REPORTING.RUN_SUMMARY_BODY}"
    else:
        query = f"WITH {every if by_run else latest}{BODIES[view]}"
    return f"CREATE OR REPLACE VIEW {view}{'_by_run' if by_run else ''} AS {query}"


def upgrade() -> None:
    op.execute(LATEST_WEEK_RUN)
    op.execute(NEWEST_WEEK_RUN)
    for view in VIEWS:
        op.execute(view_sql(view))
        op.execute(view_sql(view, by_run=True))
    op.execute(f"GRANT SELECT ON latest_week_run, newest_week_run TO {READER_ROLE}")


def downgrade() -> None:
    previous = (REPORTING.LATEST_WEEK_RUNS, REPORTING.ALL_RUNS)
    for view in VIEWS:
        op.execute(view_sql(view, runs=previous))
        op.execute(view_sql(view, by_run=True, runs=previous))
    op.execute("DROP VIEW newest_week_run")
    op.execute("DROP VIEW latest_week_run")
