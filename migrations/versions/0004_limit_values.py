"""Exact values of every limit at its bound, rate ranges of lanes at a limit, out-side prices.

- ``run_limit``: one row per limit at its bound (a lane's capacity or minimum, a
  warehouse's throughput, a site's storage) with both one-sided values: what
  loosening it by one unit saves and tightening it by one unit costs, the
  units each holds for, why a tightening is impossible, and for lanes the rate
  range over which the stored plan stays optimal. A bulk result table: no
  foreign keys (see 0001).
- ``run_site_price.price_out``: the price at the outgoing side of a warehouse
  that is split in two (handling cost or throughput capacity), so that every
  lane's reduced cost follows from stored prices.
- ``solve_run.planner_version``: which planner stored the run. Runs stored
  before this revision have none; their ``capacity_value``, ``throughput_value``
  and ``storage_value`` are one dual's bound, not the exact value.
- Views: ``binding_capacity`` ranks by the exact value of one more unit, ranks
  only limits worth something and lists full limits worth nothing as
  ``full, no value``, with the value of one unit less; the new ``limit_value``
  (with its ``_by_run`` twin and ``limit_value_of_run``) lists every limit at
  its bound. ``planner_reader`` may read them.

Revision ID: 0004
Revises: 0003
Create Date: 2026-12-02
"""

import importlib.util
from collections.abc import Sequence
from pathlib import Path

import sqlalchemy as sa
from alembic import op

revision: str = "0004"
down_revision: str | Sequence[str] | None = "0003"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def _load(name: str):
    path = Path(__file__).with_name(name)
    spec = importlib.util.spec_from_file_location(f"planner_migration_{path.stem}", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


REPORTING = _load("0003_reporting.py")
READER_ROLE = REPORTING.READER_ROLE
LANE_LABEL = REPORTING.LANE_LABEL

# Every limit at its bound, labelled like the rest of the reports. The kind of a
# row says what the limit is: lane capacity, lane minimum, warehouse throughput,
# storage (linked horizons).
LIMIT_VALUE = f"""
SELECT p.code AS period,
       CASE lim.limit_kind WHEN 'lane_capacity' THEN 'lane capacity'
                           WHEN 'lane_minimum' THEN 'lane minimum'
                           WHEN 'throughput' THEN 'warehouse throughput'
                           ELSE 'storage' END AS kind,
       CASE WHEN lim.limit_kind IN ('lane_capacity', 'lane_minimum') THEN {LANE_LABEL}
            ELSE s.code END AS label,
       lim.bound, lim.flow, lim.loosen_value, lim.loosen_units,
       lim.tighten_cost, lim.tighten_units, lim.tighten_blocked,
       lim.rate_low, lim.rate_high, lr.unit_cost,
       o.code AS origin, d.code AS destination, l.mode, s.code AS site,
       p.starts_on, rp.run_id
FROM run_period rp
JOIN period p ON p.id = rp.period_id
JOIN run_limit lim ON lim.run_id = rp.run_id AND lim.period_id = rp.period_id
LEFT JOIN lane l ON lim.limit_kind IN ('lane_capacity', 'lane_minimum') AND l.id = lim.ref_id
LEFT JOIN site o ON o.id = l.origin_id
LEFT JOIN site d ON d.id = l.destination_id
LEFT JOIN site s ON lim.limit_kind IN ('throughput', 'storage') AND s.id = lim.ref_id
LEFT JOIN lane_rate lr ON lr.batch_id = rp.batch_id AND lr.period_id = rp.period_id AND lr.lane_id = l.id
"""

# The capacities at their bound (lanes, warehouses, storage), ranked by the exact
# value of one more unit. A limit worth nothing is full but not binding: no rank.
# Runs stored before 0004 have no run_limit rows; their stored values still show,
# with no value of one unit less.
BINDING_CAPACITY = f"""
, at_capacity AS (
    SELECT p.code AS period, p.starts_on, rp.run_id, 'lane' AS kind, {LANE_LABEL} AS label,
           f.capacity_value, lr.capacity, f.flow,
           o.code AS origin, d.code AS destination, l.mode, NULL::text AS site,
           'lane_capacity' AS limit_kind, f.lane_id AS ref_id, rp.period_id
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
           NULL, NULL, NULL, s.code, 'throughput', r.site_id, rp.period_id
    FROM run_period rp
    JOIN period p ON p.id = rp.period_id
    JOIN run_site_price r ON r.run_id = rp.run_id AND r.period_id = rp.period_id
    JOIN site_version sv ON sv.batch_id = rp.batch_id AND sv.site_id = r.site_id
    JOIN site s ON s.id = r.site_id
    WHERE r.throughput_value IS NOT NULL AND r.throughput_flow >= sv.throughput_capacity
    UNION ALL
    SELECT p.code, p.starts_on, rp.run_id, 'storage', s.code,
           st.storage_value, sv.storage_capacity, st.stock,
           NULL, NULL, NULL, s.code, 'storage', st.site_id, rp.period_id
    FROM run_period rp
    JOIN period p ON p.id = rp.period_id
    JOIN run_stock st ON st.run_id = rp.run_id AND st.period_id = rp.period_id
    JOIN site_version sv ON sv.batch_id = rp.batch_id AND sv.site_id = st.site_id
    JOIN site s ON s.id = st.site_id
    WHERE st.storage_value IS NOT NULL
)
SELECT c.period,
       CASE WHEN c.capacity_value > 0
            THEN rank() OVER (PARTITION BY c.run_id, c.period, c.capacity_value > 0 ORDER BY c.capacity_value DESC)
       END AS rank,
       c.kind, c.label, c.capacity_value, c.capacity, c.flow,
       c.origin, c.destination, c.mode, c.site, c.starts_on, c.run_id,
       lim.tighten_cost AS value_less, lim.loosen_units AS units_more, lim.tighten_units AS units_less,
       lim.tighten_blocked AS less_blocked,
       CASE WHEN c.capacity_value > 0 THEN 'binding' ELSE 'full, no value' END AS status
FROM at_capacity c
LEFT JOIN run_limit lim ON lim.run_id = c.run_id AND lim.period_id = c.period_id
     AND lim.limit_kind = c.limit_kind AND lim.ref_id = c.ref_id
"""


def view_sql(view: str, *, by_run: bool = False) -> str:
    body = {"binding_capacity": BINDING_CAPACITY, "limit_value": LIMIT_VALUE}[view]
    runs = REPORTING.ALL_RUNS if by_run else REPORTING.LATEST_WEEK_RUNS
    create = "CREATE VIEW" if view == "limit_value" else "CREATE OR REPLACE VIEW"
    return f"{create} {view}{'_by_run' if by_run else ''} AS WITH {runs}{body}"


def upgrade() -> None:
    op.create_table(
        "run_limit",
        sa.Column("run_id", sa.BigInteger(), nullable=False),
        sa.Column("period_id", sa.Integer(), nullable=False),
        sa.Column("limit_kind", sa.Text(), nullable=False),
        sa.Column("ref_id", sa.Integer(), nullable=False),
        sa.Column("bound", sa.Numeric(), nullable=False),
        sa.Column("flow", sa.Numeric(), nullable=False),
        sa.Column("loosen_value", sa.Numeric(), nullable=False),
        sa.Column("loosen_units", sa.Numeric(), nullable=False),
        sa.Column("tighten_cost", sa.Numeric(), nullable=True),
        sa.Column("tighten_units", sa.Numeric(), nullable=True),
        sa.Column("tighten_blocked", sa.Text(), nullable=True),
        sa.Column("rate_low", sa.Numeric(), nullable=True),
        sa.Column("rate_high", sa.Numeric(), nullable=True),
        sa.PrimaryKeyConstraint("run_id", "period_id", "limit_kind", "ref_id", name=op.f("pk_run_limit")),
        sa.CheckConstraint(
            "limit_kind IN ('lane_capacity', 'lane_minimum', 'throughput', 'storage')",
            name=op.f("ck_run_limit_limit_kind"),
        ),
        sa.CheckConstraint("loosen_value >= 0", name=op.f("ck_run_limit_loosen_value_nonnegative")),
        sa.CheckConstraint(
            "(tighten_cost IS NULL) = (tighten_blocked IS NOT NULL)", name=op.f("ck_run_limit_tighten_or_blocked")
        ),
    )
    op.add_column("run_site_price", sa.Column("price_out", sa.Numeric(), nullable=True))
    op.add_column("solve_run", sa.Column("planner_version", sa.Text(), nullable=True))
    for by_run in (False, True):
        op.execute(view_sql("binding_capacity", by_run=by_run))
        op.execute(view_sql("limit_value", by_run=by_run))
    op.execute(REPORTING.function_sql("limit_value"))
    op.execute(f"GRANT SELECT ON limit_value, limit_value_by_run TO {READER_ROLE}")


def downgrade() -> None:
    op.execute("DROP FUNCTION limit_value_of_run(bigint)")
    op.execute("DROP VIEW limit_value_by_run")
    op.execute("DROP VIEW limit_value")
    # binding_capacity cannot lose its new columns in place: rebuild 0003's.
    op.execute("DROP FUNCTION binding_capacity_of_run(bigint)")
    op.execute("DROP VIEW binding_capacity_by_run")
    op.execute("DROP VIEW binding_capacity")
    op.execute(REPORTING.view_sql("binding_capacity"))
    op.execute(REPORTING.view_sql("binding_capacity", by_run=True))
    op.execute(REPORTING.function_sql("binding_capacity"))
    op.execute(f"GRANT SELECT ON binding_capacity, binding_capacity_by_run TO {READER_ROLE}")
    op.drop_column("solve_run", "planner_version")
    op.drop_column("run_site_price", "price_out")
    op.drop_table("run_limit")
