"""Results that scale with the plan: sparse lanes, one partition per week, pinned runs.

- ``run_flow`` keeps only the lanes that carry flow (``flow <> 0``); its
  ``reduced_cost`` and ``capacity_value`` columns go. A lane's reduced cost is
  derived in the views from the stored prices and the snapshot's rate, exactly:
  ``unit_cost + price_out(origin) - price(destination)``, where ``price_out`` is
  the outgoing-side price of a warehouse split in two (else its price). A lane's
  capacity value is its ``run_limit`` row (``lane_capacity``).
- ``run_site_price.throughput_value`` and ``run_stock.storage_value`` go too:
  the ``run_limit`` rows hold them.
- The four result tables (``run_flow``, ``run_site_price``, ``run_stock``,
  ``run_limit``) are LIST-partitioned by period, one partition per week
  (``run_flow_2026_w10``), made by ``planner_result_partitions(code)``. Every
  store writes whole weeks, every report reads whole weeks and retention keeps
  the newest runs of each week, so a week's partition holds only that week's
  retained runs: storing, reading and pruning a week cost the same after years
  of history as in the first week. (Partitions by run range would put a week's
  retained runs in partitions that can never be dropped, and make a week's
  read depend on when its runs were made.) The partition key is the week's
  code, in a column ``period`` that replaces ``period_id``: the views join it
  to ``period.code``, so an analyst's ``WHERE period = '2026-W10'`` reaches
  every result table as a constant and PostgreSQL reads that week's
  partitions only, whatever the join order (an id found by a join would
  prune only inside nested loops).
- Runs stored before 0004 kept one dual's bound of each full capacity in the
  dense columns; they become ``run_limit`` rows with ``exact = false`` and no
  units, so that ``binding_capacity`` answers as before, and ``limit_value``
  (exact values only) as before. Their warehouses' outgoing-side prices,
  which the dense reduced costs implied, are filled in.
- ``run_pin``: runs a user (or a scenario) pinned; retention never drops them.
- The reporting views that read the result tables are rebuilt on the sparse
  tables with the same columns and answers; ``planner_reader`` may read them.
- Loads near COPY speed: the bulk input tables (``lane_rate``, ``lane``,
  ``supply``, ``demand``, ``site_version``) lose their foreign keys, whose
  per-row checks took two thirds of a 500,000-lane load (11.7 s of lane_rate's
  insert against 3.2 s without them). What they guaranteed still holds: the
  loader inserts those rows only by joining the staged rows to their parents
  in the same statement, and the parents (``load_batch``, ``period``,
  ``period_snapshot``, ``site``, ``lane``) become append-only: a trigger
  refuses every UPDATE, DELETE and TRUNCATE of them, so no referenced row can
  go or change.

The downgrade re-densifies: every lane of each stored week gets its row back,
with the reduced cost and capacity value the views derive.

Revision ID: 0006
Revises: 0005
Create Date: 2026-12-02
"""

import importlib.util
from collections.abc import Sequence
from pathlib import Path

import sqlalchemy as sa
from alembic import op

revision: str = "0006"
down_revision: str | Sequence[str] | None = "0005"
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

#: Primary key columns of each result table after (run_id, period).
RESULT_KEYS = {"run_flow": "lane_id", "run_site_price": "site_id", "run_stock": "site_id",
               "run_limit": "limit_kind, ref_id"}
#: The views rebuilt here: those that read a result table (run_summary does not).
VIEWS = ("site_price_history", "lane_flow", "binding_capacity", "shortage", "limit_value")
#: Why a converted pre-0004 limit has no tightening figures.
LEGACY_NOTE = "not computed: run stored before exact limit values"

# Each body follows "WITH <run_period>" (0005's selections of runs). Result rows
# are joined on "x.period = p.code": with the view filtered on its period, that
# is a constant for every result table (see the docstring).

# lane_flow: the lanes that carry flow (stored), then every other lane of the
# snapshot with flow 0, both with the reduced cost from the stored prices.
# round() gives the derived figures the scale the stored ones have (the run's
# decimals), so that they print alike. A filter on the flow ("flow > 0") rules
# out the second part before it reads a lane.
_LANE_FLOW_PART = f"""
SELECT p.code AS period, o.code AS origin, d.code AS destination, l.mode,
       {{flow}} AS flow, lr.capacity,
       {{flow}} / NULLIF(lr.capacity, 0) AS utilisation,
       lr.unit_cost,
       round(lr.unit_cost + coalesce(po.price_out, po.price) - pd.price, sr.cost_decimals) AS reduced_cost,
       cap.loosen_value AS capacity_value,
       {{flow}} * lr.unit_cost AS cost,
       ov.kind || '->' || dv.kind AS echelon,
       (cap.loosen_value IS NOT NULL) AS at_capacity,
       lr.min_quantity, p.starts_on, rp.run_id, l.id AS lane_id,
       {LANE_LABEL} AS label
FROM run_period rp
JOIN solve_run sr ON sr.id = rp.run_id
JOIN period p ON p.id = rp.period_id
{{lanes}}
JOIN lane l ON l.id = lr.lane_id
JOIN site o ON o.id = l.origin_id
JOIN site d ON d.id = l.destination_id
JOIN run_site_price po ON po.run_id = rp.run_id AND po.period = p.code AND po.site_id = l.origin_id
JOIN run_site_price pd ON pd.run_id = rp.run_id AND pd.period = p.code AND pd.site_id = l.destination_id
LEFT JOIN run_limit cap ON cap.run_id = rp.run_id AND cap.period = p.code
     AND cap.limit_kind = 'lane_capacity' AND cap.ref_id = lr.lane_id
LEFT JOIN site_version ov ON ov.batch_id = rp.batch_id AND ov.site_id = l.origin_id
LEFT JOIN site_version dv ON dv.batch_id = rp.batch_id AND dv.site_id = l.destination_id
"""
LANE_FLOW = (
    _LANE_FLOW_PART.format(
        flow="f.flow",
        lanes="JOIN run_flow f ON f.run_id = rp.run_id AND f.period = p.code\n"
        "JOIN lane_rate lr ON lr.batch_id = rp.batch_id AND lr.period_id = rp.period_id AND lr.lane_id = f.lane_id",
    )
    + "UNION ALL"
    + _LANE_FLOW_PART.format(
        flow="round(0, sr.quantity_decimals)",
        lanes="JOIN lane_rate lr ON lr.batch_id = rp.batch_id AND lr.period_id = rp.period_id\n"
        "     AND NOT EXISTS (SELECT FROM run_flow f WHERE f.run_id = rp.run_id AND f.period = p.code\n"
        "                     AND f.lane_id = lr.lane_id)",
    )
)

# The previous week's price is one primary-key probe per row: its week code is
# only known at run time, and a join on it would read every week's partition.
SITE_PRICE_HISTORY = """
SELECT p.code AS period, p.starts_on, s.code AS site, sv.kind, sv.name, sv.region,
       r.price, r.price_low, r.price_high,
       (r.price_low IS DISTINCT FROM r.price_high) AS degenerate,
       r.price - (SELECT prior.price FROM run_site_price prior WHERE prior.run_id = rp.previous_run_id
                  AND prior.period = previous.code AND prior.site_id = r.site_id) AS price_change,
       rp.run_id,
       sv.x, sv.y
FROM run_period rp
JOIN period p ON p.id = rp.period_id
JOIN run_site_price r ON r.run_id = rp.run_id AND r.period = p.code
JOIN site s ON s.id = r.site_id
LEFT JOIN site_version sv ON sv.batch_id = rp.batch_id AND sv.site_id = r.site_id
LEFT JOIN period previous ON previous.id = rp.previous_period_id
"""

SHORTAGE = """
SELECT p.code AS period, s.code AS customer, r.shortage AS units_short,
       dm.shortage_penalty AS penalty, r.shortage * dm.shortage_penalty AS penalty_cost,
       dm.quantity AS demand, sv.name, sv.region, r.price, p.starts_on, rp.run_id
FROM run_period rp
JOIN period p ON p.id = rp.period_id
JOIN run_site_price r ON r.run_id = rp.run_id AND r.period = p.code
JOIN site s ON s.id = r.site_id
LEFT JOIN demand dm ON dm.batch_id = rp.batch_id AND dm.period_id = rp.period_id
     AND dm.site_id = r.site_id
LEFT JOIN site_version sv ON sv.batch_id = rp.batch_id AND sv.site_id = r.site_id
WHERE r.shortage > 0
"""

# The capacities at their bound (lanes, warehouses, storage), ranked by the exact
# value of one more unit; a limit worth nothing is full but not binding: no rank.
# Pre-0004 runs show their stored bound (exact = false) with no value of one unit less.
_AT_CAPACITY = """
    SELECT p.code AS period, p.starts_on, rp.run_id, {kind} AS kind, {label} AS label,
           lim.loosen_value AS capacity_value, {capacity} AS capacity, lim.flow,
           {ends}, lim.exact, lim.tighten_cost, lim.loosen_units, lim.tighten_units, lim.tighten_blocked
    FROM run_period rp
    JOIN period p ON p.id = rp.period_id
    JOIN run_limit lim ON lim.run_id = rp.run_id AND lim.period = p.code AND lim.limit_kind = {limit}
    {joins}"""
_SITE_LIMIT_JOINS = """JOIN site_version sv ON sv.batch_id = rp.batch_id AND sv.site_id = lim.ref_id
    JOIN site s ON s.id = lim.ref_id"""
_LANE_LIMIT_JOINS = """JOIN lane l ON l.id = lim.ref_id
    JOIN site o ON o.id = l.origin_id
    JOIN site d ON d.id = l.destination_id
    LEFT JOIN lane_rate lr ON lr.batch_id = rp.batch_id AND lr.period_id = rp.period_id
         AND lr.lane_id = lim.ref_id"""
_AT_CAPACITY_PARTS = "\n    UNION ALL".join(
    [
        _AT_CAPACITY.format(
            kind="'lane'", label=LANE_LABEL, capacity="lr.capacity", limit="'lane_capacity'",
            ends="o.code AS origin, d.code AS destination, l.mode, NULL::text AS site", joins=_LANE_LIMIT_JOINS,
        ),
        _AT_CAPACITY.format(
            kind="'warehouse'", label="s.code", capacity="sv.throughput_capacity", limit="'throughput'",
            ends="NULL, NULL, NULL, s.code", joins=_SITE_LIMIT_JOINS + "\n    WHERE lim.flow >= sv.throughput_capacity",
        ),
        _AT_CAPACITY.format(
            kind="'storage'", label="s.code", capacity="sv.storage_capacity", limit="'storage'",
            ends="NULL, NULL, NULL, s.code", joins=_SITE_LIMIT_JOINS,
        ),
    ]
)
BINDING_CAPACITY = f"""
, at_capacity AS ({_AT_CAPACITY_PARTS}
)
SELECT c.period,
       CASE WHEN c.capacity_value > 0
            THEN rank() OVER (PARTITION BY c.run_id, c.period, c.capacity_value > 0 ORDER BY c.capacity_value DESC)
       END AS rank,
       c.kind, c.label, c.capacity_value, c.capacity, c.flow,
       c.origin, c.destination, c.mode, c.site, c.starts_on, c.run_id,
       c.tighten_cost AS value_less, c.loosen_units AS units_more, c.tighten_units AS units_less,
       CASE WHEN c.exact THEN c.tighten_blocked END AS less_blocked,
       CASE WHEN c.capacity_value > 0 THEN 'binding' ELSE 'full, no value' END AS status
FROM at_capacity c
"""

# Every limit at its bound with exact values (runs stored before 0004 have none).
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
JOIN run_limit lim ON lim.run_id = rp.run_id AND lim.period = p.code
LEFT JOIN lane l ON lim.limit_kind IN ('lane_capacity', 'lane_minimum') AND l.id = lim.ref_id
LEFT JOIN site o ON o.id = l.origin_id
LEFT JOIN site d ON d.id = l.destination_id
LEFT JOIN site s ON lim.limit_kind IN ('throughput', 'storage') AND s.id = lim.ref_id
LEFT JOIN lane_rate lr ON lr.batch_id = rp.batch_id AND lr.period_id = rp.period_id AND lr.lane_id = l.id
WHERE lim.exact
"""

BODIES = {
    "site_price_history": SITE_PRICE_HISTORY,
    "lane_flow": LANE_FLOW,
    "binding_capacity": BINDING_CAPACITY,
    "shortage": SHORTAGE,
    "limit_value": LIMIT_VALUE,
}

# One partition of each result table per period, named after the week
# (run_flow_2026_w10), its primary key named like every other (pk_<table>).
# Made apart and then attached: ATTACH takes a lock on the parent that lets
# reads and writes of the other weeks go on. Idempotent; a concurrent call
# that made the partition first wins.
PARTITION_FUNCTION = f"""
CREATE FUNCTION planner_result_partitions(code text) RETURNS void
LANGUAGE plpgsql AS $body$
DECLARE
    keys text[] := ARRAY[{", ".join(f"'{k}'" for k in RESULT_KEYS.values())}];
    tables text[] := ARRAY[{", ".join(f"'{t}'" for t in RESULT_KEYS)}];
    part text;
BEGIN
    IF NOT EXISTS (SELECT FROM period p WHERE p.code = planner_result_partitions.code) THEN
        RAISE EXCEPTION 'no period %', code;
    END IF;
    FOR i IN 1 .. array_length(tables, 1) LOOP
        part := tables[i] || '_' || regexp_replace(lower(code), '[^a-z0-9]+', '_', 'g');
        CONTINUE WHEN to_regclass(format('%I', part)) IS NOT NULL;
        BEGIN
            EXECUTE format('CREATE TABLE %I (LIKE %I INCLUDING DEFAULTS INCLUDING CONSTRAINTS, '
                           'CONSTRAINT %I PRIMARY KEY (run_id, period, %s))',
                           part, tables[i], 'pk_' || part, keys[i]);
            EXECUTE format('ALTER TABLE %I ATTACH PARTITION %I FOR VALUES IN (%L)', tables[i], part, code);
        EXCEPTION WHEN duplicate_table OR unique_violation OR duplicate_object THEN
            NULL;
        END;
    END LOOP;
END
$body$"""


def view_sql(view: str, *, by_run: bool = False) -> str:
    """``CREATE VIEW`` of a rebuilt view (or its ``_by_run`` twin) on 0005's run selections."""
    query = f"WITH {LATEST.ALL_RUNS if by_run else LATEST.LATEST_WEEK_RUNS}{BODIES[view]}"
    return f"CREATE VIEW {view}{'_by_run' if by_run else ''} AS {query}"


def _drop_views() -> None:
    for view in VIEWS:
        op.execute(f"DROP FUNCTION {view}_of_run(bigint)")
        op.execute(f"DROP VIEW {view}_by_run")
        op.execute(f"DROP VIEW {view}")


def _create_views(create) -> None:
    for view in VIEWS:
        op.execute(create(view))
        op.execute(create(view, by_run=True))
        op.execute(REPORTING.function_sql(view))
    names = [name for view in VIEWS for name in (view, f"{view}_by_run")]
    op.execute(f"GRANT SELECT ON {', '.join(names)} TO {READER_ROLE}")


def _set_aside(table: str, suffix: str) -> None:
    """Rename ``table`` to ``<table>_<suffix>`` (and its primary key, whose index name is schema-wide)."""
    op.execute(f"ALTER TABLE {table} RENAME TO {table}_{suffix}")
    op.execute(f"ALTER TABLE {table}_{suffix} RENAME CONSTRAINT pk_{table} TO pk_{table}_{suffix}")


def _result_table(name: str, period: sa.Column, *columns, key: tuple[str, ...], checks=(), **options) -> None:
    op.create_table(
        name,
        sa.Column("run_id", sa.BigInteger(), nullable=False),
        period,
        *columns,
        sa.PrimaryKeyConstraint("run_id", period.name, *key, name=op.f(f"pk_{name}")),
        *checks,
        **options,
    )


def _site_price_columns(*, dense: bool) -> list[sa.Column]:
    """``run_site_price`` columns after the period (0005's dense table has ``throughput_value``)."""
    return [
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("price", sa.Numeric(), nullable=False),
        sa.Column("price_low", sa.Numeric(), nullable=True),
        sa.Column("price_high", sa.Numeric(), nullable=True),
        sa.Column("low_reason", sa.Text(), nullable=True),
        sa.Column("high_reason", sa.Text(), nullable=True),
        sa.Column("high_units", sa.Numeric(), nullable=True),
        sa.Column("throughput_flow", sa.Numeric(), nullable=True),
        *([sa.Column("throughput_value", sa.Numeric(), nullable=True)] if dense else []),
        sa.Column("shortage", sa.Numeric(), nullable=True),
        sa.Column("spare", sa.Numeric(), nullable=True),
        sa.Column("price_out", sa.Numeric(), nullable=True),
    ]


def _limit_columns(*, exact: bool) -> list:
    """``run_limit`` columns after the period, and its checks (``exact`` from 0006 on)."""
    columns = [
        sa.Column("limit_kind", sa.Text(), nullable=False),
        sa.Column("ref_id", sa.Integer(), nullable=False),
        sa.Column("bound", sa.Numeric(), nullable=False),
        sa.Column("flow", sa.Numeric(), nullable=False),
        sa.Column("loosen_value", sa.Numeric(), nullable=False),
        sa.Column("loosen_units", sa.Numeric(), nullable=exact),  # 0006: NULL for converted pre-0004 limits
        sa.Column("tighten_cost", sa.Numeric(), nullable=True),
        sa.Column("tighten_units", sa.Numeric(), nullable=True),
        sa.Column("tighten_blocked", sa.Text(), nullable=True),
        sa.Column("rate_low", sa.Numeric(), nullable=True),
        sa.Column("rate_high", sa.Numeric(), nullable=True),
    ]
    checks = [
        sa.CheckConstraint(
            "limit_kind IN ('lane_capacity', 'lane_minimum', 'throughput', 'storage')",
            name=op.f("ck_run_limit_limit_kind"),
        ),
        sa.CheckConstraint("loosen_value >= 0", name=op.f("ck_run_limit_loosen_value_nonnegative")),
        sa.CheckConstraint(
            "(tighten_cost IS NULL) = (tighten_blocked IS NOT NULL)", name=op.f("ck_run_limit_tighten_or_blocked")
        ),
    ]
    if exact:
        columns.append(sa.Column("exact", sa.Boolean(), server_default=sa.true(), nullable=False))
        checks += [
            sa.CheckConstraint(
                "exact OR (loosen_units IS NULL AND tighten_cost IS NULL)", name=op.f("ck_run_limit_legacy")
            ),
            sa.CheckConstraint("NOT exact OR loosen_units IS NOT NULL", name=op.f("ck_run_limit_exact_units")),
        ]
    return columns + checks


def _partitioned_tables() -> None:
    def period() -> sa.Column:
        return sa.Column("period", sa.Text(), nullable=False)

    by_period = {"postgresql_partition_by": "LIST (period)"}
    _result_table(
        "run_flow", period(),
        sa.Column("lane_id", sa.Integer(), nullable=False),
        sa.Column("flow", sa.Numeric(), nullable=False),
        key=("lane_id",),
        checks=(sa.CheckConstraint("flow <> 0", name=op.f("ck_run_flow_flow_nonzero")),),
        **by_period,
    )
    _result_table("run_site_price", period(), *_site_price_columns(dense=False), key=("site_id",), **by_period)
    # One site over every week (a customer's price history) probes each week's
    # partition instead of reading them all.
    op.create_index("ix_run_site_price_site_id", "run_site_price", ["site_id"])
    _result_table(
        "run_stock", period(),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("stock", sa.Numeric(), nullable=False),
        sa.Column("holding_cost", sa.Numeric(), nullable=False),
        key=("site_id",),
        checks=(sa.CheckConstraint("stock >= 0", name=op.f("ck_run_stock_stock_nonnegative")),),
        **by_period,
    )
    _result_table("run_limit", period(), *_limit_columns(exact=True), key=("limit_kind", "ref_id"), **by_period)


# The batch each stored (run, period) was solved from: 0005's rule for every run.
RUN_BATCH = f"WITH {LATEST.ALL_RUNS}, run_batch AS (SELECT run_id, period_id, batch_id FROM run_period)"

# Pre-0004 runs: the outgoing-side price of a split warehouse, which their dense
# reduced costs imply through any lane leaving it (r = c + price_out - price(d)).
LEGACY_PRICE_OUT = f"""
{RUN_BATCH}
SELECT DISTINCT ON (f.run_id, f.period_id, l.origin_id)
       f.run_id, f.period_id, l.origin_id AS site_id, f.reduced_cost - lr.unit_cost + pd.price AS price_out
FROM run_flow_dense f
JOIN solve_run sr ON sr.id = f.run_id AND sr.planner_version IS NULL
JOIN run_batch rb ON rb.run_id = f.run_id AND rb.period_id = f.period_id
JOIN lane l ON l.id = f.lane_id
JOIN lane_rate lr ON lr.batch_id = rb.batch_id AND lr.period_id = f.period_id AND lr.lane_id = f.lane_id
JOIN run_site_price_dense pd ON pd.run_id = f.run_id AND pd.period_id = f.period_id AND pd.site_id = l.destination_id
ORDER BY f.run_id, f.period_id, l.origin_id, f.lane_id
"""

# Pre-0004 runs: their stored capacity values become inexact run_limit rows.
LEGACY_LIMITS = f"""
INSERT INTO run_limit (run_id, period, limit_kind, ref_id, bound, flow, loosen_value, tighten_blocked, exact)
SELECT v.run_id, p.code, v.limit_kind, v.ref_id, v.flow, v.flow, v.value, '{LEGACY_NOTE}', false
FROM (
    SELECT run_id, period_id, 'lane_capacity' AS limit_kind, lane_id AS ref_id, flow, capacity_value AS value
    FROM run_flow_dense WHERE capacity_value IS NOT NULL
    UNION ALL
    SELECT run_id, period_id, 'throughput', site_id, throughput_flow, throughput_value
    FROM run_site_price_dense WHERE throughput_value IS NOT NULL
    UNION ALL
    SELECT run_id, period_id, 'storage', site_id, stock, storage_value
    FROM run_stock_dense WHERE storage_value IS NOT NULL
) v
JOIN period p ON p.id = v.period_id
WHERE NOT EXISTS (
    SELECT FROM run_limit_dense lim WHERE lim.run_id = v.run_id AND lim.period_id = v.period_id
    AND lim.limit_kind = v.limit_kind AND lim.ref_id = v.ref_id
)
"""

SITE_PRICE_COLUMNS = (
    "site_id, price, price_low, price_high, low_reason, high_reason, high_units, throughput_flow, shortage, spare"
)
LIMIT_COLUMNS = (
    "limit_kind, ref_id, bound, flow, loosen_value, loosen_units, tighten_cost, "
    "tighten_units, tighten_blocked, rate_low, rate_high"
)


def _prefixed(columns: str, alias: str) -> str:
    return ", ".join(f"{alias}.{c}" for c in columns.split(", "))


# Foreign keys of the bulk input tables, dropped on upgrade, restored on downgrade.
INPUT_FOREIGN_KEYS = (
    ("site_version", ("batch_id",), "load_batch", ("id",)),
    ("site_version", ("site_id",), "site", ("id",)),
    ("supply", ("period_id", "batch_id"), "period_snapshot", ("period_id", "batch_id")),
    ("supply", ("site_id",), "site", ("id",)),
    ("demand", ("period_id", "batch_id"), "period_snapshot", ("period_id", "batch_id")),
    ("demand", ("site_id",), "site", ("id",)),
    ("lane", ("origin_id",), "site", ("id",)),
    ("lane", ("destination_id",), "site", ("id",)),
    ("lane_rate", ("period_id", "batch_id"), "period_snapshot", ("period_id", "batch_id")),
    ("lane_rate", ("lane_id",), "lane", ("id",)),
)
#: Tables whose rows the bulk input tables reference: append-only.
APPEND_ONLY = ("load_batch", "period", "period_snapshot", "site", "lane")

APPEND_ONLY_FUNCTION = """
CREATE FUNCTION planner_append_only() RETURNS trigger
LANGUAGE plpgsql AS $body$
BEGIN
    RAISE EXCEPTION 'table % is append-only: the planner''s inputs are never changed or removed', TG_TABLE_NAME
        USING ERRCODE = 'restrict_violation';
END
$body$"""


def _foreign_key_name(table: str, columns: tuple[str, ...], parent: str) -> str:
    return f"fk_{table}_{'_'.join(columns)}_{parent}"


def _inputs_without_row_checks() -> None:
    for table, columns, parent, _ in INPUT_FOREIGN_KEYS:
        op.execute(f"ALTER TABLE {table} DROP CONSTRAINT {_foreign_key_name(table, columns, parent)}")
    op.execute(APPEND_ONLY_FUNCTION)
    for table in APPEND_ONLY:
        op.execute(f"CREATE TRIGGER {table}_append_only BEFORE UPDATE OR DELETE OR TRUNCATE ON {table} "
                   "FOR EACH STATEMENT EXECUTE FUNCTION planner_append_only()")


def _inputs_with_row_checks() -> None:
    for table in APPEND_ONLY:
        op.execute(f"DROP TRIGGER {table}_append_only ON {table}")
    op.execute("DROP FUNCTION planner_append_only()")
    for table, columns, parent, parent_columns in INPUT_FOREIGN_KEYS:
        op.execute(f"ALTER TABLE {table} ADD CONSTRAINT {_foreign_key_name(table, columns, parent)} "
                   f"FOREIGN KEY ({', '.join(columns)}) REFERENCES {parent} ({', '.join(parent_columns)})")


def upgrade() -> None:
    _inputs_without_row_checks()
    _drop_views()
    for table in RESULT_KEYS:
        op.execute(f"DROP STATISTICS IF EXISTS st_{table}_run_id_period_id")
        _set_aside(table, "dense")
    _partitioned_tables()
    op.execute(PARTITION_FUNCTION)
    op.execute("SELECT planner_result_partitions(code) FROM period ORDER BY starts_on")
    op.execute("INSERT INTO run_flow (run_id, period, lane_id, flow) "
               "SELECT f.run_id, p.code, f.lane_id, f.flow FROM run_flow_dense f JOIN period p ON p.id = f.period_id "
               "WHERE f.flow <> 0")
    op.execute(
        f"INSERT INTO run_site_price (run_id, period, {SITE_PRICE_COLUMNS}, price_out) "
        f"SELECT r.run_id, p.code, {_prefixed(SITE_PRICE_COLUMNS, 'r')}, "
        "coalesce(r.price_out, CASE WHEN legacy.price_out <> r.price THEN legacy.price_out END) "
        "FROM run_site_price_dense r JOIN period p ON p.id = r.period_id "
        f"LEFT JOIN ({LEGACY_PRICE_OUT}) legacy "
        "ON legacy.run_id = r.run_id AND legacy.period_id = r.period_id AND legacy.site_id = r.site_id"
    )
    op.execute("INSERT INTO run_stock (run_id, period, site_id, stock, holding_cost) "
               "SELECT k.run_id, p.code, k.site_id, k.stock, k.holding_cost FROM run_stock_dense k "
               "JOIN period p ON p.id = k.period_id")
    op.execute(f"INSERT INTO run_limit (run_id, period, {LIMIT_COLUMNS}) "
               f"SELECT lim.run_id, p.code, {_prefixed(LIMIT_COLUMNS, 'lim')} FROM run_limit_dense lim "
               "JOIN period p ON p.id = lim.period_id")
    op.execute(LEGACY_LIMITS)
    for table in RESULT_KEYS:
        op.execute(f"DROP TABLE {table}_dense")
    _create_views(view_sql)
    op.create_table(
        "run_pin",
        sa.Column("run_id", sa.BigInteger(), nullable=False),
        sa.Column("pinned_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False),
        sa.Column("pinned_by", sa.Text(), server_default=sa.text("current_user"), nullable=False),
        sa.Column("note", sa.Text(), nullable=True),
        sa.ForeignKeyConstraint(
            ["run_id"], ["solve_run.id"], name=op.f("fk_run_pin_run_id_solve_run"), ondelete="CASCADE"
        ),
        sa.PrimaryKeyConstraint("run_id", name=op.f("pk_run_pin")),
    )


# Downgrade: every lane of each stored (run, period) gets its dense row back,
# with the reduced cost and capacity value the views derive.
DENSE_FLOWS = f"""
{RUN_BATCH}, stored AS (SELECT DISTINCT run_id, period_id FROM run_site_price)
INSERT INTO run_flow (run_id, period_id, lane_id, flow, reduced_cost, capacity_value)
SELECT s.run_id, s.period_id, lr.lane_id,
       coalesce(f.flow, round(0, sr.quantity_decimals)),
       round(lr.unit_cost + coalesce(po.price_out, po.price) - pd.price, sr.cost_decimals),
       cap.loosen_value
FROM stored s
JOIN period p ON p.id = s.period_id
JOIN solve_run sr ON sr.id = s.run_id
JOIN run_batch rb ON rb.run_id = s.run_id AND rb.period_id = s.period_id
JOIN lane_rate lr ON lr.batch_id = rb.batch_id AND lr.period_id = s.period_id
JOIN lane l ON l.id = lr.lane_id
JOIN run_site_price po ON po.run_id = s.run_id AND po.period_id = s.period_id AND po.site_id = l.origin_id
JOIN run_site_price pd ON pd.run_id = s.run_id AND pd.period_id = s.period_id AND pd.site_id = l.destination_id
LEFT JOIN run_flow_sparse f ON f.run_id = s.run_id AND f.period = p.code AND f.lane_id = lr.lane_id
LEFT JOIN run_limit_sparse cap ON cap.run_id = s.run_id AND cap.period = p.code
     AND cap.limit_kind = 'lane_capacity' AND cap.ref_id = lr.lane_id
"""


def _limit_value(kind: str, alias: str, key: str) -> str:
    """The (exact or converted) value of a run's limit of ``kind`` on the row ``alias``."""
    return (
        f"(SELECT lim.loosen_value FROM run_limit_sparse lim WHERE lim.run_id = {alias}.run_id "
        f"AND lim.period = {alias}.period AND lim.limit_kind = '{kind}' AND lim.ref_id = {alias}.{key})"
    )


def _dense_table(name: str, *columns, key: tuple[str, ...], checks=()) -> None:
    _result_table(name, sa.Column("period_id", sa.Integer(), nullable=False), *columns, key=key, checks=checks)


def downgrade() -> None:
    _inputs_with_row_checks()
    _drop_views()
    op.drop_table("run_pin")
    for table in RESULT_KEYS:
        _set_aside(table, "sparse")
    _dense_table(
        "run_flow",
        sa.Column("lane_id", sa.Integer(), nullable=False),
        sa.Column("flow", sa.Numeric(), nullable=False),
        sa.Column("reduced_cost", sa.Numeric(), nullable=False),
        sa.Column("capacity_value", sa.Numeric(), nullable=True),
        key=("lane_id",),
    )
    _dense_table("run_site_price", *_site_price_columns(dense=True), key=("site_id",))
    _dense_table(
        "run_stock",
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("stock", sa.Numeric(), nullable=False),
        sa.Column("holding_cost", sa.Numeric(), nullable=False),
        sa.Column("storage_value", sa.Numeric(), nullable=True),
        key=("site_id",),
        checks=(sa.CheckConstraint("stock >= 0", name=op.f("ck_run_stock_stock_nonnegative")),),
    )
    _dense_table("run_limit", *_limit_columns(exact=False), key=("limit_kind", "ref_id"))
    # Pre-0004 runs had no outgoing-side prices.
    op.execute(
        f"INSERT INTO run_site_price (run_id, period_id, {SITE_PRICE_COLUMNS}, throughput_value, price_out) "
        f"SELECT r.run_id, p.id, {_prefixed(SITE_PRICE_COLUMNS, 'r')}, {_limit_value('throughput', 'r', 'site_id')}, "
        "CASE WHEN sr.planner_version IS NOT NULL THEN r.price_out END "
        "FROM run_site_price_sparse r JOIN period p ON p.code = r.period JOIN solve_run sr ON sr.id = r.run_id"
    )
    op.execute(
        "INSERT INTO run_stock (run_id, period_id, site_id, stock, holding_cost, storage_value) "
        f"SELECT k.run_id, p.id, k.site_id, k.stock, k.holding_cost, {_limit_value('storage', 'k', 'site_id')} "
        "FROM run_stock_sparse k JOIN period p ON p.code = k.period"
    )
    op.execute(DENSE_FLOWS)
    op.execute(f"INSERT INTO run_limit (run_id, period_id, {LIMIT_COLUMNS}) "
               f"SELECT lim.run_id, p.id, {_prefixed(LIMIT_COLUMNS, 'lim')} FROM run_limit_sparse lim "
               "JOIN period p ON p.code = lim.period WHERE lim.exact")
    for table in RESULT_KEYS:
        op.execute(f"DROP TABLE {table}_sparse")
    op.execute("DROP FUNCTION planner_result_partitions(text)")
    for table in REPORTING.RUN_PERIOD_STATISTICS:
        op.execute(f"CREATE STATISTICS st_{table}_run_id_period_id (dependencies) ON run_id, period_id FROM {table}")
    _create_views(LATEST.view_sql)
