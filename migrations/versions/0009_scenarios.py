"""What-if scenarios, the engine of each run, and comparisons of any two runs.

- ``scenario``: a named base week (its period, and the batch whose snapshot the
  edits were checked against) with who made it, when and why.
- ``scenario_edit``: its edits in order, as written (action, target, value),
  with how the value changes the figure (``set``, ``percent``, ``remove``) and
  where it was written (file and line, or the command line).
- ``solve_run.scenario_id``: the scenario a run solved (NULL for the real
  plan). ``latest_week_run`` and ``newest_week_run`` (and so every week view,
  ``planner resolve`` and retention's "latest optimal" rule) see only runs
  without a scenario; the ``_by_run`` views show any run by its id.
- ``solve_run.engine``: which engine produced the flow (``ortools``, ``warm``,
  ``ortools after warm``); NULL for runs stored before this revision.
- ``run_lane_edit``: the lane figures a scenario run used where they differ
  from its base snapshot (edited and added lanes), so that costs of a
  scenario run are its own.
- ``run_lane_rate(run)``: the lane figures a run was solved with.
- ``compare_cost(a, b)``, ``compare_prices(a, b)``, ``compare_flows(a, b)``,
  ``compare_binding(a, b)``: what moved between two week runs; executable by
  ``planner_reader`` (security definer: the reader reads no table directly).

Revision ID: 0009
Revises: 0008
Create Date: 2026-12-05
"""

import importlib.util
from collections.abc import Sequence
from pathlib import Path

import sqlalchemy as sa
from alembic import op

revision: str = "0009"
down_revision: str | Sequence[str] | None = "0008"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def _load(name: str):
    path = Path(__file__).with_name(name)
    spec = importlib.util.spec_from_file_location(f"planner_migration_{path.stem}", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


REPORTING = _load("0003_reporting.py")
LATEST = _load("0005_latest_week_run.py")
READER_ROLE = REPORTING.READER_ROLE
LANE_LABEL = REPORTING.LANE_LABEL
EDIT_ACTIONS = ("close", "open", "demand", "supply", "rate", "capacity", "minimum", "throughput", "handling",
                "holding", "storage", "add-lane")


def _without_scenarios(view_sql: str) -> str:
    return view_sql.replace("WHERE sr.period_id = p.id AND", "WHERE sr.period_id = p.id AND sr.scenario_id IS NULL AND")


RUN_LANE_RATE = """
CREATE FUNCTION run_lane_rate(run bigint)
RETURNS TABLE (lane_id integer, unit_cost numeric, capacity numeric, min_quantity numeric)
LANGUAGE sql STABLE SECURITY DEFINER SET search_path FROM CURRENT AS $$
    SELECT lr.lane_id, lr.unit_cost, lr.capacity, lr.min_quantity
    FROM solve_run sr
    JOIN lane_rate lr ON lr.batch_id = sr.batch_id AND lr.period_id = sr.period_id
    WHERE sr.id = run
      AND NOT EXISTS (SELECT FROM run_lane_edit e WHERE e.run_id = run AND e.lane_id = lr.lane_id)
    UNION ALL
    SELECT e.lane_id, e.unit_cost, e.capacity, e.min_quantity FROM run_lane_edit e WHERE e.run_id = run
$$"""

# Only the lanes that carry flow are costed: each one's rate is a primary-key
# probe of the run's snapshot, or its scenario edit (edited and added lanes).
_RUN_LANE_COST = """
    SELECT {tag} AS side, ov.kind || '->' || dv.kind AS echelon, l.mode,
           sum(f.flow * coalesce(e.unit_cost, lr.unit_cost)) AS cost
    FROM run_flow f
    JOIN solve_run sr ON sr.id = {run}
    LEFT JOIN run_lane_edit e ON e.run_id = {run} AND e.lane_id = f.lane_id
    LEFT JOIN lane_rate lr ON lr.batch_id = sr.batch_id AND lr.period_id = sr.period_id AND lr.lane_id = f.lane_id
    JOIN lane l ON l.id = f.lane_id
    LEFT JOIN site_version ov ON ov.batch_id = sr.batch_id AND ov.site_id = l.origin_id
    LEFT JOIN site_version dv ON dv.batch_id = sr.batch_id AND dv.site_id = l.destination_id
    WHERE f.run_id = {run}
      AND f.period = (SELECT p.code FROM solve_run sr JOIN period p ON p.id = sr.period_id WHERE sr.id = {run})
    GROUP BY 1, 2, 3"""

# Cost of the lanes by echelon (origin kind -> destination kind) and mode.
COMPARE_COST = f"""
CREATE FUNCTION compare_cost(a bigint, b bigint)
RETURNS TABLE (echelon text, mode text, cost_a numeric, cost_b numeric, difference numeric)
LANGUAGE sql STABLE SECURITY DEFINER SET search_path FROM CURRENT AS $$
    WITH lane_cost AS ({_RUN_LANE_COST.format(tag="'a'", run="a")}
    UNION ALL{_RUN_LANE_COST.format(tag="'b'", run="b")}
    )
    SELECT coalesce(x.echelon, y.echelon), coalesce(x.mode, y.mode),
           coalesce(x.cost, 0), coalesce(y.cost, 0), coalesce(y.cost, 0) - coalesce(x.cost, 0)
    FROM (SELECT * FROM lane_cost WHERE side = 'a') x
    FULL JOIN (SELECT * FROM lane_cost WHERE side = 'b') y ON x.echelon = y.echelon AND x.mode = y.mode
    ORDER BY 1, 2
$$"""

# A price move is determined when both prices are unique or their ranges do not
# overlap; otherwise another optimal dual of either run could show no move.
COMPARE_PRICES = """
CREATE FUNCTION compare_prices(a bigint, b bigint)
RETURNS TABLE (site text, kind text, price_a numeric, low_a numeric, high_a numeric,
               price_b numeric, low_b numeric, high_b numeric, difference numeric, determined boolean)
LANGUAGE sql STABLE SECURITY DEFINER SET search_path FROM CURRENT AS $$
    WITH x AS (
        SELECT r.* FROM run_site_price r
        WHERE r.run_id = a AND r.period = (SELECT p.code FROM solve_run sr JOIN period p ON p.id = sr.period_id WHERE sr.id = a)
    ), y AS (
        SELECT r.* FROM run_site_price r
        WHERE r.run_id = b AND r.period = (SELECT p.code FROM solve_run sr JOIN period p ON p.id = sr.period_id WHERE sr.id = b)
    )
    SELECT s.code, sv.kind, x.price, x.price_low, x.price_high, y.price, y.price_low, y.price_high,
           y.price - x.price,
           coalesce(x.price_low = x.price_high AND y.price_low = y.price_high, false)
           OR coalesce(x.price_high, 'Infinity') < coalesce(y.price_low, '-Infinity')
           OR coalesce(y.price_high, 'Infinity') < coalesce(x.price_low, '-Infinity')
    FROM x JOIN y ON y.site_id = x.site_id
    JOIN site s ON s.id = x.site_id
    LEFT JOIN site_version sv ON sv.batch_id = (SELECT batch_id FROM solve_run WHERE id = b) AND sv.site_id = x.site_id
    ORDER BY abs(y.price - x.price) DESC, s.code
$$"""

# Lanes whose flow differs (idle lanes have no run_flow row: flow 0).
COMPARE_FLOWS = f"""
CREATE FUNCTION compare_flows(a bigint, b bigint)
RETURNS TABLE (lane text, origin text, destination text, mode text, flow_a numeric, flow_b numeric,
               difference numeric)
LANGUAGE sql STABLE SECURITY DEFINER SET search_path FROM CURRENT AS $$
    WITH x AS (
        SELECT f.lane_id, f.flow FROM run_flow f
        WHERE f.run_id = a AND f.period = (SELECT p.code FROM solve_run sr JOIN period p ON p.id = sr.period_id WHERE sr.id = a)
    ), y AS (
        SELECT f.lane_id, f.flow FROM run_flow f
        WHERE f.run_id = b AND f.period = (SELECT p.code FROM solve_run sr JOIN period p ON p.id = sr.period_id WHERE sr.id = b)
    )
    SELECT {LANE_LABEL}, o.code, d.code, l.mode, coalesce(x.flow, 0), coalesce(y.flow, 0),
           coalesce(y.flow, 0) - coalesce(x.flow, 0)
    FROM x FULL JOIN y ON y.lane_id = x.lane_id
    JOIN lane l ON l.id = coalesce(x.lane_id, y.lane_id)
    JOIN site o ON o.id = l.origin_id
    JOIN site d ON d.id = l.destination_id
    WHERE x.flow IS DISTINCT FROM y.flow
    ORDER BY abs(coalesce(y.flow, 0) - coalesce(x.flow, 0)) DESC, 1
$$"""

# A limit binds when one more unit of it is worth something.
COMPARE_BINDING = f"""
CREATE FUNCTION compare_binding(a bigint, b bigint)
RETURNS TABLE (limit_kind text, label text, value_a numeric, value_b numeric, change text)
LANGUAGE sql STABLE SECURITY DEFINER SET search_path FROM CURRENT AS $$
    WITH x AS (
        SELECT lim.limit_kind, lim.ref_id, lim.loosen_value FROM run_limit lim
        WHERE lim.run_id = a AND lim.period = (SELECT p.code FROM solve_run sr JOIN period p ON p.id = sr.period_id WHERE sr.id = a) AND lim.loosen_value > 0
    ), y AS (
        SELECT lim.limit_kind, lim.ref_id, lim.loosen_value FROM run_limit lim
        WHERE lim.run_id = b AND lim.period = (SELECT p.code FROM solve_run sr JOIN period p ON p.id = sr.period_id WHERE sr.id = b) AND lim.loosen_value > 0
    ), moved AS (
        SELECT coalesce(x.limit_kind, y.limit_kind) AS limit_kind, coalesce(x.ref_id, y.ref_id) AS ref_id,
               x.loosen_value AS value_a, y.loosen_value AS value_b
        FROM x FULL JOIN y ON y.limit_kind = x.limit_kind AND y.ref_id = x.ref_id
        WHERE x.ref_id IS NULL OR y.ref_id IS NULL
    )
    SELECT m.limit_kind,
           CASE WHEN m.limit_kind IN ('lane_capacity', 'lane_minimum') THEN {LANE_LABEL} ELSE s.code END,
           m.value_a, m.value_b,
           CASE WHEN m.value_a IS NULL THEN 'became binding' ELSE 'stopped binding' END
    FROM moved m
    LEFT JOIN lane l ON m.limit_kind IN ('lane_capacity', 'lane_minimum') AND l.id = m.ref_id
    LEFT JOIN site o ON o.id = l.origin_id
    LEFT JOIN site d ON d.id = l.destination_id
    LEFT JOIN site s ON m.limit_kind NOT IN ('lane_capacity', 'lane_minimum') AND s.id = m.ref_id
    ORDER BY 5, 1, 2
$$"""

FUNCTIONS = ("run_lane_rate(bigint)", "compare_cost(bigint, bigint)", "compare_prices(bigint, bigint)",
             "compare_flows(bigint, bigint)", "compare_binding(bigint, bigint)")


def upgrade() -> None:
    op.create_table(
        "scenario",
        sa.Column("id", sa.BigInteger(), sa.Identity(), nullable=False),
        sa.Column("name", sa.Text(), nullable=False),
        sa.Column("description", sa.Text(), nullable=True),
        sa.Column("period_id", sa.Integer(), nullable=False),
        sa.Column("batch_id", sa.BigInteger(), nullable=False),
        sa.Column("cost_decimals", sa.Integer(), nullable=False),
        sa.Column("quantity_decimals", sa.Integer(), nullable=False),
        sa.Column("created_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False),
        sa.Column("created_by", sa.Text(), server_default=sa.text("current_user"), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_scenario")),
        sa.UniqueConstraint("name", name=op.f("uq_scenario_name")),
        sa.ForeignKeyConstraint(["period_id"], ["period.id"], name=op.f("fk_scenario_period_id_period")),
        sa.ForeignKeyConstraint(["batch_id"], ["load_batch.id"], name=op.f("fk_scenario_batch_id_load_batch")),
    )
    op.create_table(
        "scenario_edit",
        sa.Column("scenario_id", sa.BigInteger(), nullable=False),
        sa.Column("position", sa.Integer(), nullable=False),
        sa.Column("action", sa.Text(), nullable=False),
        sa.Column("target", sa.Text(), nullable=False),
        sa.Column("value", sa.Text(), server_default=sa.text("''"), nullable=False),
        sa.Column("change", sa.Text(), nullable=True),
        sa.Column("source", sa.Text(), nullable=False),
        sa.Column("source_line", sa.Integer(), nullable=False),
        sa.PrimaryKeyConstraint("scenario_id", "position", name=op.f("pk_scenario_edit")),
        sa.ForeignKeyConstraint(["scenario_id"], ["scenario.id"], name=op.f("fk_scenario_edit_scenario_id_scenario"),
                                ondelete="CASCADE"),
        sa.CheckConstraint("action IN (" + ", ".join(f"'{a}'" for a in EDIT_ACTIONS) + ")",
                           name=op.f("ck_scenario_edit_action")),
        sa.CheckConstraint("change IN ('set', 'percent', 'remove')", name=op.f("ck_scenario_edit_change")),
    )
    op.add_column("solve_run", sa.Column("scenario_id", sa.BigInteger(), nullable=True))
    op.add_column("solve_run", sa.Column("engine", sa.Text(), nullable=True))
    op.create_foreign_key(op.f("fk_solve_run_scenario_id_scenario"), "solve_run", "scenario", ["scenario_id"], ["id"])
    op.create_index(op.f("ix_solve_run_scenario_id"), "solve_run", ["scenario_id"])
    op.create_table(
        "run_lane_edit",
        sa.Column("run_id", sa.BigInteger(), nullable=False),
        sa.Column("lane_id", sa.Integer(), nullable=False),
        sa.Column("unit_cost", sa.Numeric(), nullable=False),
        sa.Column("capacity", sa.Numeric(), nullable=True),
        sa.Column("min_quantity", sa.Numeric(), nullable=False),
        sa.PrimaryKeyConstraint("run_id", "lane_id", name=op.f("pk_run_lane_edit")),
        sa.ForeignKeyConstraint(["run_id"], ["solve_run.id"], name=op.f("fk_run_lane_edit_run_id_solve_run"),
                                ondelete="CASCADE"),
    )
    op.execute("CREATE OR REPLACE VIEW" + _without_scenarios(LATEST.LATEST_WEEK_RUN).removeprefix("\nCREATE VIEW"))
    op.execute("CREATE OR REPLACE VIEW" + _without_scenarios(LATEST.NEWEST_WEEK_RUN).removeprefix("\nCREATE VIEW"))
    for sql in (RUN_LANE_RATE, COMPARE_COST, COMPARE_PRICES, COMPARE_FLOWS, COMPARE_BINDING):
        op.execute(sql)
    for function in FUNCTIONS:
        op.execute(f"REVOKE ALL ON FUNCTION {function} FROM PUBLIC")
        op.execute(f"GRANT EXECUTE ON FUNCTION {function} TO {READER_ROLE}")
    op.execute(f"GRANT SELECT ON scenario, scenario_edit TO {READER_ROLE}")


def downgrade() -> None:
    for function in reversed(FUNCTIONS):
        op.execute(f"DROP FUNCTION {function}")
    op.execute("CREATE OR REPLACE VIEW" + LATEST.LATEST_WEEK_RUN.removeprefix("\nCREATE VIEW"))
    op.execute("CREATE OR REPLACE VIEW" + LATEST.NEWEST_WEEK_RUN.removeprefix("\nCREATE VIEW"))
    op.drop_table("run_lane_edit")
    op.drop_index(op.f("ix_solve_run_scenario_id"), table_name="solve_run")
    op.drop_constraint(op.f("fk_solve_run_scenario_id_scenario"), "solve_run", type_="foreignkey")
    op.drop_column("solve_run", "engine")
    op.drop_column("solve_run", "scenario_id")
    op.drop_table("scenario_edit")
    op.drop_table("scenario")
