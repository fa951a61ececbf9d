"""Reporting: views for analysts, their run-id functions and a read-only role.

Views (each reads the latest optimal week run of every period):

- ``site_price_history`` (from 0001; same columns, plus ``x`` and ``y`` at the end),
- ``lane_flow``: flow, capacity, utilisation, cost and reduced cost of every lane,
- ``binding_capacity``: lanes and warehouses at capacity, ranked by the value of one
  more unit of capacity,
- ``shortage``: customers left short and the penalty paid,
- ``run_summary``: cost, dual objective, certificate and timings of each latest run
  (week runs per period, horizon runs per span).

For each view ``V`` the view ``V_by_run`` has the same columns for every run, whatever
its status (older runs, failed runs, linked horizons), to be filtered on ``run_id``;
the function ``V_of_run(run_id bigint)`` returns the rows of one run:
``SELECT * FROM lane_flow_of_run(42)``. The functions are plain SQL that PostgreSQL
inlines, so a filter on their result uses the same indexes as one on the view.

Extended statistics on ``run_flow`` and ``run_site_price`` tell the planner that a run
id fixes the period (no new index: the primary keys serve every lookup here).

The role ``planner_reader`` (NOLOGIN) may SELECT these views (and so call the
functions), nothing else. Roles are cluster-wide: it is created only if missing, and
a downgrade revokes its rights in this database but leaves the role for the others.

Revision ID: 0003
Revises: 0002
Create Date: 2026-12-14
"""

import importlib.util
from collections.abc import Sequence
from pathlib import Path

import sqlalchemy as sa
from alembic import op

revision: str = "0003"
down_revision: str | Sequence[str] | None = "0002"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

READER_ROLE = "planner_reader"

# Every query below starts from run_period(run_id, period_id, batch_id,
# previous_run_id, previous_period_id): the (run, period) pairs it reports on, the
# snapshot batch each was solved from and the run and period to compare prices with.
# The views and the *_by_run views differ only here. NOT MATERIALIZED: a query that
# names run_period twice must still get the period or run filter pushed into each use.

# Views: the latest optimal week run of each period. Latest means the newest
# finished_at, then the highest id, exactly as in 0001's site_price_history. The
# LATERAL probe per period uses ix_solve_run_period_id_status_finished_at; the lag
# names the previous solved period's run, for price changes.
LATEST_WEEK_RUNS = """
run_period AS NOT MATERIALIZED (
    SELECT r.id AS run_id, p.id AS period_id, r.batch_id,
           lag(r.id) OVER by_week AS previous_run_id,
           lag(p.id) OVER by_week AS previous_period_id
    FROM period p
    CROSS JOIN LATERAL (
        SELECT sr.id, sr.batch_id FROM solve_run sr
        WHERE sr.period_id = p.id AND sr.status = 'optimal' AND sr.kind = 'week'
        ORDER BY sr.finished_at DESC, sr.id DESC
        LIMIT 1
    ) r
    WINDOW by_week AS (ORDER BY p.starts_on)
)"""

# *_by_run views: every period of every run, whatever its status; meant to be
# filtered on run_id, which reaches solve_run's primary key (the window is
# partitioned by run, so the filter passes it). A horizon run records no batch: its
# periods were read from the snapshots current when it ran, that is the newest batch
# of each period loaded before the run's row was written. Prices of a run's first
# period are compared with the latest optimal week run of the solved period before.
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
        SELECT pp.id AS period_id, pr.id AS run_id FROM period pp
        CROSS JOIN LATERAL (
            SELECT sr.id FROM solve_run sr
            WHERE sr.period_id = pp.id AND sr.status = 'optimal' AND sr.kind = 'week'
            ORDER BY sr.finished_at DESC, sr.id DESC
            LIMIT 1
        ) pr
        WHERE pp.starts_on < first_period.starts_on
        ORDER BY pp.starts_on DESC
        LIMIT 1
    ) earlier ON true
    WINDOW by_week AS (PARTITION BY r.id ORDER BY p.starts_on)
)"""

LANE_LABEL = "o.code || '->' || d.code || CASE WHEN l.mode = '' THEN '' ELSE ' ' || l.mode END"

# The body of each report, after "WITH <run_period>". Extra columns go at the end.
BODIES = {
    "site_price_history": """
SELECT p.code AS period, p.starts_on, s.code AS site, sv.kind, sv.name, sv.region,
       r.price, r.price_low, r.price_high,
       (r.price_low IS DISTINCT FROM r.price_high) AS degenerate,
       r.price - prior.price AS price_change,
       rp.run_id,
       sv.x, sv.y
FROM run_period rp
JOIN period p ON p.id = rp.period_id
JOIN run_site_price r ON r.run_id = rp.run_id AND r.period_id = rp.period_id
JOIN site s ON s.id = r.site_id
LEFT JOIN site_version sv ON sv.batch_id = rp.batch_id AND sv.site_id = r.site_id
LEFT JOIN run_site_price prior ON prior.run_id = rp.previous_run_id
     AND prior.period_id = rp.previous_period_id AND prior.site_id = r.site_id
""",
    "lane_flow": f"""
SELECT p.code AS period, o.code AS origin, d.code AS destination, l.mode,
       f.flow, lr.capacity,
       f.flow / NULLIF(lr.capacity, 0) AS utilisation,
       lr.unit_cost, f.reduced_cost, f.capacity_value,
       f.flow * lr.unit_cost AS cost,
       ov.kind || '->' || dv.kind AS echelon,
       (f.capacity_value IS NOT NULL) AS at_capacity,
       lr.min_quantity, p.starts_on, rp.run_id, l.id AS lane_id,
       {LANE_LABEL} AS label
FROM run_period rp
JOIN period p ON p.id = rp.period_id
JOIN run_flow f ON f.run_id = rp.run_id AND f.period_id = rp.period_id
JOIN lane l ON l.id = f.lane_id
JOIN site o ON o.id = l.origin_id
JOIN site d ON d.id = l.destination_id
LEFT JOIN lane_rate lr ON lr.batch_id = rp.batch_id AND lr.period_id = rp.period_id
     AND lr.lane_id = f.lane_id
LEFT JOIN site_version ov ON ov.batch_id = rp.batch_id AND ov.site_id = l.origin_id
LEFT JOIN site_version dv ON dv.batch_id = rp.batch_id AND dv.site_id = l.destination_id
""",
    # A lane is at capacity where the run stored a capacity value (flow = capacity);
    # a warehouse where its throughput reached its throughput capacity; stock (linked
    # horizons only) where it filled the storage capacity. Ties share a rank.
    "binding_capacity": f"""
, at_capacity AS (
    SELECT p.code AS period, p.starts_on, rp.run_id, 'lane' AS kind, {LANE_LABEL} AS label,
           f.capacity_value, lr.capacity, f.flow,
           o.code AS origin, d.code AS destination, l.mode, NULL::text AS site
    FROM run_period rp
    JOIN period p ON p.id = rp.period_id
    JOIN run_flow f ON f.run_id = rp.run_id AND f.period_id = rp.period_id
    JOIN lane l ON l.id = f.lane_id
    JOIN site o ON o.id = l.origin_id
    JOIN site d ON d.id = l.destination_id
    LEFT JOIN lane_rate lr ON lr.batch_id = rp.batch_id AND lr.period_id = rp.period_id
         AND lr.lane_id = f.lane_id
    WHERE f.capacity_value IS NOT NULL
    UNION ALL
    SELECT p.code, p.starts_on, rp.run_id, 'warehouse', s.code,
           r.throughput_value, sv.throughput_capacity, r.throughput_flow,
           NULL, NULL, NULL, s.code
    FROM run_period rp
    JOIN period p ON p.id = rp.period_id
    JOIN run_site_price r ON r.run_id = rp.run_id AND r.period_id = rp.period_id
    JOIN site_version sv ON sv.batch_id = rp.batch_id AND sv.site_id = r.site_id
    JOIN site s ON s.id = r.site_id
    WHERE r.throughput_value IS NOT NULL AND r.throughput_flow >= sv.throughput_capacity
    UNION ALL
    SELECT p.code, p.starts_on, rp.run_id, 'storage', s.code,
           st.storage_value, sv.storage_capacity, st.stock,
           NULL, NULL, NULL, s.code
    FROM run_period rp
    JOIN period p ON p.id = rp.period_id
    JOIN run_stock st ON st.run_id = rp.run_id AND st.period_id = rp.period_id
    JOIN site_version sv ON sv.batch_id = rp.batch_id AND sv.site_id = st.site_id
    JOIN site s ON s.id = st.site_id
    WHERE st.storage_value IS NOT NULL
)
SELECT period,
       rank() OVER (PARTITION BY run_id, period ORDER BY capacity_value DESC) AS rank,
       kind, label, capacity_value, capacity, flow,
       origin, destination, mode, site, starts_on, run_id
FROM at_capacity
""",
    "shortage": """
SELECT p.code AS period, s.code AS customer, r.shortage AS units_short,
       dm.shortage_penalty AS penalty, r.shortage * dm.shortage_penalty AS penalty_cost,
       dm.quantity AS demand, sv.name, sv.region, r.price, p.starts_on, rp.run_id
FROM run_period rp
JOIN period p ON p.id = rp.period_id
JOIN run_site_price r ON r.run_id = rp.run_id AND r.period_id = rp.period_id
JOIN site s ON s.id = r.site_id
LEFT JOIN demand dm ON dm.batch_id = rp.batch_id AND dm.period_id = rp.period_id
     AND dm.site_id = r.site_id
LEFT JOIN site_version sv ON sv.batch_id = rp.batch_id AND sv.site_id = r.site_id
WHERE r.shortage > 0
""",
}

# run_summary has one row per run, not per period: its own run selection.
RUN_SUMMARY_BODY = """
SELECT CASE WHEN r.kind = 'week' THEN first_period.code
            ELSE first_period.code || '..' || last_period.code END AS period,
       r.status, r.primal_cost AS cost, r.dual_objective, r.certificate_ok,
       r.shortage_units, r.finished_at AS solved_at, r.input_fingerprint, r.solver_seconds,
       r.kind, r.id AS run_id, first_period.code AS first_period,
       last_period.code AS last_period, first_period.starts_on, r.duality_gap,
       r.spare_units, r.total_seconds, r.batch_id, r.message
FROM chosen c
JOIN solve_run r ON r.id = c.run_id
JOIN period first_period ON first_period.id = r.first_period_id
JOIN period last_period ON last_period.id = r.last_period_id
"""
# Horizon runs have no period_id: "period_id IS NULL" lets the solve_run index find them.
RUN_SUMMARY_LATEST = """
chosen AS (
    SELECT run_id FROM run_period
    UNION ALL
    SELECT * FROM (
        SELECT DISTINCT ON (first_period_id, last_period_id) id
        FROM solve_run
        WHERE period_id IS NULL AND status = 'optimal' AND kind = 'horizon'
        ORDER BY first_period_id, last_period_id, finished_at DESC, id DESC
    ) latest_horizon
)"""
RUN_SUMMARY_ALL = """
chosen AS (SELECT id AS run_id FROM solve_run)"""

VIEWS = ("site_price_history", "lane_flow", "binding_capacity", "shortage", "run_summary")
# A week run has one period, so run_id fixes period_id. Without these statistics the
# planner multiplies the two selectivities and expects a run's rows to be fewer by
# the number of periods, and then picks plans that are slow on a whole week.
RUN_PERIOD_STATISTICS = ("run_flow", "run_site_price")


def view_sql(view: str, *, by_run: bool = False) -> str:
    """``CREATE VIEW`` statement of a reporting view, or of its ``_by_run`` twin."""
    if view == "run_summary":
        chosen = RUN_SUMMARY_ALL if by_run else f"{LATEST_WEEK_RUNS},{RUN_SUMMARY_LATEST}"
        query = f"WITH {chosen}{RUN_SUMMARY_BODY}"
    else:
        query = f"WITH {ALL_RUNS if by_run else LATEST_WEEK_RUNS}{BODIES[view]}"
    # site_price_history exists since 0001: replaced in place, keeping its columns.
    create = "CREATE OR REPLACE VIEW" if view == "site_price_history" and not by_run else "CREATE VIEW"
    return f"{create} {view}{'_by_run' if by_run else ''} AS {query}"


def function_sql(view: str) -> str:
    """``<view>_of_run(run_id)``: the ``_by_run`` view's rows of one run.

    A plain SQL function (STABLE, not STRICT, SECURITY INVOKER) that PostgreSQL
    inlines into the calling query, so filters on its result reach the indexes.
    """
    return (
        f"CREATE FUNCTION {view}_of_run(run_id bigint) RETURNS SETOF {view} "
        f"LANGUAGE sql STABLE "
        f"AS $body$ SELECT * FROM {view}_by_run WHERE {view}_by_run.run_id = $1 $body$"
    )


def _schema() -> str:
    return op.get_bind().execute(sa.text("SELECT current_schema()")).scalar_one()


def _quoted(identifier: str) -> str:
    return op.get_bind().dialect.identifier_preparer.quote(identifier)


def upgrade() -> None:
    schema = _quoted(_schema())
    for view in VIEWS:
        op.execute(view_sql(view))
        op.execute(view_sql(view, by_run=True))
        op.execute(function_sql(view))
    for table in RUN_PERIOD_STATISTICS:
        op.execute(
            f"CREATE STATISTICS st_{table}_run_id_period_id (dependencies) ON run_id, period_id FROM {table}"
        )

    # Cluster-wide: another database's migration may have created the role, or be
    # creating it at this moment (then CREATE ROLE fails with a duplicate).
    op.execute(
        f"""
DO $$
BEGIN
    IF NOT EXISTS (SELECT FROM pg_catalog.pg_roles WHERE rolname = '{READER_ROLE}') THEN
        CREATE ROLE {READER_ROLE} NOLOGIN;
    END IF;
EXCEPTION WHEN duplicate_object OR unique_violation THEN
    NULL;
END
$$"""
    )
    op.execute(f"GRANT USAGE ON SCHEMA {schema} TO {READER_ROLE}")
    views = [name for view in VIEWS for name in (view, f"{view}_by_run")]
    op.execute(f"GRANT SELECT ON {', '.join(views)} TO {READER_ROLE}")


def _initial_site_price_history() -> str:
    path = Path(__file__).with_name("0001_initial.py")
    spec = importlib.util.spec_from_file_location("planner_migration_0001", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module.SITE_PRICE_HISTORY


def downgrade() -> None:
    for table in RUN_PERIOD_STATISTICS:
        op.execute(f"DROP STATISTICS st_{table}_run_id_period_id")
    for view in VIEWS:
        op.execute(f"DROP FUNCTION {view}_of_run(bigint)")
        op.execute(f"DROP VIEW {view}_by_run")
        if view != "site_price_history":
            op.execute(f"DROP VIEW {view}")
    # 0001's view cannot lose the added columns in place.
    op.execute("DROP VIEW site_price_history")
    op.execute(_initial_site_price_history())
    op.execute(
        f"""
DO $$
BEGIN
    IF EXISTS (SELECT FROM pg_catalog.pg_roles WHERE rolname = '{READER_ROLE}') THEN
        EXECUTE format('REVOKE USAGE ON SCHEMA %I FROM {READER_ROLE}', current_schema());
    END IF;
END
$$"""
    )
