"""Initial schema: load batches, snapshots, lanes, solve runs and the price history view.

Revision ID: 0001
Revises:
Create Date: 2026-01-05
"""

from collections.abc import Sequence

import sqlalchemy as sa
from alembic import op
from sqlalchemy.dialects import postgresql

revision: str = "0001"
down_revision: str | Sequence[str] | None = None
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None

SITE_PRICE_HISTORY = """
CREATE VIEW site_price_history AS
WITH latest AS (
    SELECT DISTINCT ON (period_id) id AS run_id, period_id, batch_id
    FROM solve_run
    WHERE kind = 'week' AND status = 'optimal'
    ORDER BY period_id, finished_at DESC, id DESC
)
SELECT p.code AS period, p.starts_on, s.code AS site, sv.kind, sv.name, sv.region,
       r.price, r.price_low, r.price_high,
       (r.price_low IS DISTINCT FROM r.price_high) AS degenerate,
       r.price - lag(r.price) OVER (PARTITION BY r.site_id ORDER BY p.starts_on) AS price_change,
       l.run_id
FROM latest l
JOIN run_site_price r ON r.run_id = l.run_id AND r.period_id = l.period_id
JOIN period p ON p.id = l.period_id
JOIN site s ON s.id = r.site_id
LEFT JOIN site_version sv ON sv.batch_id = l.batch_id AND sv.site_id = r.site_id
"""


def _snapshot_key(table: str) -> sa.ForeignKeyConstraint:
    return sa.ForeignKeyConstraint(
        ["period_id", "batch_id"],
        ["period_snapshot.period_id", "period_snapshot.batch_id"],
        name=op.f(f"fk_{table}_period_id_batch_id_period_snapshot"),
    )


def upgrade() -> None:
    op.create_table(
        "load_batch",
        sa.Column("id", sa.BigInteger(), autoincrement=True, nullable=False),
        sa.Column(
            "loaded_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.Column("source", sa.Text(), nullable=False),
        sa.Column("files", postgresql.JSONB(), nullable=False),
        sa.Column("content_sha256", sa.Text(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_load_batch")),
    )
    op.create_index(op.f("ix_load_batch_content_sha256"), "load_batch", ["content_sha256"])

    op.create_table(
        "site",
        sa.Column("id", sa.Integer(), autoincrement=True, nullable=False),
        sa.Column("code", sa.Text(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_site")),
        sa.UniqueConstraint("code", name=op.f("uq_site_code")),
    )

    op.create_table(
        "site_version",
        sa.Column("batch_id", sa.BigInteger(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("kind", sa.Text(), nullable=False),
        sa.Column("name", sa.Text(), nullable=True),
        sa.Column("region", sa.Text(), nullable=True),
        sa.Column("throughput_capacity", sa.Numeric(), nullable=True),
        sa.Column("handling_cost", sa.Numeric(), nullable=True),
        sa.Column("holding_cost", sa.Numeric(), nullable=True),
        sa.Column("storage_capacity", sa.Numeric(), nullable=True),
        sa.Column("x", sa.Double(), nullable=True),
        sa.Column("y", sa.Double(), nullable=True),
        sa.PrimaryKeyConstraint("batch_id", "site_id", name=op.f("pk_site_version")),
        sa.ForeignKeyConstraint(
            ["batch_id"], ["load_batch.id"], name=op.f("fk_site_version_batch_id_load_batch")
        ),
        sa.ForeignKeyConstraint(
            ["site_id"], ["site.id"], name=op.f("fk_site_version_site_id_site")
        ),
        sa.CheckConstraint(
            "kind IN ('plant', 'warehouse', 'customer')", name=op.f("ck_site_version_kind")
        ),
        sa.CheckConstraint(
            "throughput_capacity >= 0", name=op.f("ck_site_version_throughput_capacity_nonnegative")
        ),
        sa.CheckConstraint(
            "handling_cost >= 0", name=op.f("ck_site_version_handling_cost_nonnegative")
        ),
        sa.CheckConstraint(
            "holding_cost >= 0", name=op.f("ck_site_version_holding_cost_nonnegative")
        ),
        sa.CheckConstraint(
            "storage_capacity >= 0", name=op.f("ck_site_version_storage_capacity_nonnegative")
        ),
    )

    op.create_table(
        "period",
        sa.Column("id", sa.Integer(), autoincrement=True, nullable=False),
        sa.Column("code", sa.Text(), nullable=False),
        sa.Column("starts_on", sa.Date(), nullable=False),
        sa.Column("ends_on", sa.Date(), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_period")),
        sa.UniqueConstraint("code", name=op.f("uq_period_code")),
        sa.UniqueConstraint("starts_on", name=op.f("uq_period_starts_on")),
        sa.CheckConstraint("code ~ '^[0-9]{4}-W[0-9]{2}$'", name=op.f("ck_period_code_format")),
        sa.CheckConstraint("ends_on = starts_on + 6", name=op.f("ck_period_seven_days")),
    )

    op.create_table(
        "period_snapshot",
        sa.Column("period_id", sa.Integer(), nullable=False),
        sa.Column("batch_id", sa.BigInteger(), nullable=False),
        sa.Column("fingerprint", sa.Text(), nullable=False),
        sa.PrimaryKeyConstraint("period_id", "batch_id", name=op.f("pk_period_snapshot")),
        sa.ForeignKeyConstraint(
            ["period_id"], ["period.id"], name=op.f("fk_period_snapshot_period_id_period")
        ),
        sa.ForeignKeyConstraint(
            ["batch_id"], ["load_batch.id"], name=op.f("fk_period_snapshot_batch_id_load_batch")
        ),
    )

    op.create_table(
        "supply",
        sa.Column("batch_id", sa.BigInteger(), nullable=False),
        sa.Column("period_id", sa.Integer(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("quantity", sa.Numeric(), nullable=False),
        sa.PrimaryKeyConstraint("batch_id", "period_id", "site_id", name=op.f("pk_supply")),
        _snapshot_key("supply"),
        sa.ForeignKeyConstraint(["site_id"], ["site.id"], name=op.f("fk_supply_site_id_site")),
        sa.CheckConstraint("quantity >= 0", name=op.f("ck_supply_quantity_nonnegative")),
    )

    op.create_table(
        "demand",
        sa.Column("batch_id", sa.BigInteger(), nullable=False),
        sa.Column("period_id", sa.Integer(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("quantity", sa.Numeric(), nullable=False),
        sa.Column("shortage_penalty", sa.Numeric(), nullable=True),
        sa.PrimaryKeyConstraint("batch_id", "period_id", "site_id", name=op.f("pk_demand")),
        _snapshot_key("demand"),
        sa.ForeignKeyConstraint(["site_id"], ["site.id"], name=op.f("fk_demand_site_id_site")),
        sa.CheckConstraint("quantity >= 0", name=op.f("ck_demand_quantity_nonnegative")),
        sa.CheckConstraint(
            "shortage_penalty >= 0", name=op.f("ck_demand_shortage_penalty_nonnegative")
        ),
    )

    op.create_table(
        "lane",
        sa.Column("id", sa.Integer(), autoincrement=True, nullable=False),
        sa.Column("origin_id", sa.Integer(), nullable=False),
        sa.Column("destination_id", sa.Integer(), nullable=False),
        sa.Column("mode", sa.Text(), server_default=sa.text("''"), nullable=False),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_lane")),
        sa.ForeignKeyConstraint(["origin_id"], ["site.id"], name=op.f("fk_lane_origin_id_site")),
        sa.ForeignKeyConstraint(
            ["destination_id"], ["site.id"], name=op.f("fk_lane_destination_id_site")
        ),
        sa.UniqueConstraint(
            "origin_id",
            "destination_id",
            "mode",
            name=op.f("uq_lane_origin_id_destination_id_mode"),
        ),
        sa.CheckConstraint("origin_id <> destination_id", name=op.f("ck_lane_distinct_ends")),
    )

    op.create_table(
        "lane_rate",
        sa.Column("batch_id", sa.BigInteger(), nullable=False),
        sa.Column("period_id", sa.Integer(), nullable=False),
        sa.Column("lane_id", sa.Integer(), nullable=False),
        sa.Column("unit_cost", sa.Numeric(), nullable=False),
        sa.Column("capacity", sa.Numeric(), nullable=True),
        sa.Column("min_quantity", sa.Numeric(), server_default=sa.text("0"), nullable=False),
        sa.PrimaryKeyConstraint("batch_id", "period_id", "lane_id", name=op.f("pk_lane_rate")),
        _snapshot_key("lane_rate"),
        sa.ForeignKeyConstraint(["lane_id"], ["lane.id"], name=op.f("fk_lane_rate_lane_id_lane")),
        sa.CheckConstraint("capacity >= 0", name=op.f("ck_lane_rate_capacity_nonnegative")),
        sa.CheckConstraint("min_quantity >= 0", name=op.f("ck_lane_rate_min_quantity_nonnegative")),
        sa.CheckConstraint(
            "capacity IS NULL OR min_quantity <= capacity",
            name=op.f("ck_lane_rate_min_quantity_within_capacity"),
        ),
    )

    op.create_table(
        "solve_run",
        sa.Column("id", sa.BigInteger(), autoincrement=True, nullable=False),
        sa.Column("kind", sa.Text(), nullable=False),
        sa.Column("period_id", sa.Integer(), nullable=True),
        sa.Column("first_period_id", sa.Integer(), nullable=False),
        sa.Column("last_period_id", sa.Integer(), nullable=False),
        sa.Column("batch_id", sa.BigInteger(), nullable=True),
        sa.Column("input_fingerprint", sa.Text(), nullable=False),
        sa.Column("status", sa.Text(), nullable=False),
        sa.Column("message", sa.Text(), nullable=True),
        sa.Column(
            "started_at", sa.DateTime(timezone=True), server_default=sa.func.now(), nullable=False
        ),
        sa.Column("finished_at", sa.DateTime(timezone=True), nullable=True),
        sa.Column("cost_decimals", sa.Integer(), nullable=False),
        sa.Column("quantity_decimals", sa.Integer(), nullable=False),
        sa.Column("solver_seconds", sa.Double(), nullable=True),
        sa.Column("total_seconds", sa.Double(), nullable=True),
        sa.Column("primal_cost", sa.Numeric(), nullable=True),
        sa.Column("dual_objective", sa.Numeric(), nullable=True),
        sa.Column("duality_gap", sa.Numeric(), nullable=True),
        sa.Column("max_conservation_violation", sa.Numeric(), nullable=True),
        sa.Column("max_bound_violation", sa.Numeric(), nullable=True),
        sa.Column("min_reduced_cost", sa.Numeric(), nullable=True),
        sa.Column("certificate_ok", sa.Boolean(), nullable=True),
        sa.Column("shortage_units", sa.Numeric(), nullable=True),
        sa.Column("spare_units", sa.Numeric(), nullable=True),
        sa.Column("node_count", sa.Integer(), nullable=True),
        sa.Column("arc_count", sa.Integer(), nullable=True),
        sa.PrimaryKeyConstraint("id", name=op.f("pk_solve_run")),
        sa.ForeignKeyConstraint(
            ["period_id"], ["period.id"], name=op.f("fk_solve_run_period_id_period")
        ),
        sa.ForeignKeyConstraint(
            ["first_period_id"], ["period.id"], name=op.f("fk_solve_run_first_period_id_period")
        ),
        sa.ForeignKeyConstraint(
            ["last_period_id"], ["period.id"], name=op.f("fk_solve_run_last_period_id_period")
        ),
        sa.ForeignKeyConstraint(
            ["batch_id"], ["load_batch.id"], name=op.f("fk_solve_run_batch_id_load_batch")
        ),
        sa.CheckConstraint("kind IN ('week', 'horizon')", name=op.f("ck_solve_run_kind")),
        sa.CheckConstraint(
            "status IN ('running', 'optimal', 'infeasible', 'unbounded', 'failed')",
            name=op.f("ck_solve_run_status"),
        ),
    )
    op.create_index(
        op.f("ix_solve_run_period_id_status_finished_at"),
        "solve_run",
        ["period_id", "status", "finished_at"],
    )

    # The bulk result tables carry no foreign keys: a run writes hundreds of
    # thousands of rows in one COPY, and PostgreSQL checks each foreign key
    # row by row (about 1.3 s per key per 500,000 rows). Their ids come from
    # the snapshot read in the same transaction as the run row, and runs are
    # never deleted.
    op.create_table(
        "run_flow",
        sa.Column("run_id", sa.BigInteger(), nullable=False),
        sa.Column("period_id", sa.Integer(), nullable=False),
        sa.Column("lane_id", sa.Integer(), nullable=False),
        sa.Column("flow", sa.Numeric(), nullable=False),
        sa.Column("reduced_cost", sa.Numeric(), nullable=False),
        sa.Column("capacity_value", sa.Numeric(), nullable=True),
        sa.PrimaryKeyConstraint("run_id", "period_id", "lane_id", name=op.f("pk_run_flow")),
    )

    op.create_table(
        "run_site_price",
        sa.Column("run_id", sa.BigInteger(), nullable=False),
        sa.Column("period_id", sa.Integer(), nullable=False),
        sa.Column("site_id", sa.Integer(), nullable=False),
        sa.Column("price", sa.Numeric(), nullable=False),
        sa.Column("price_low", sa.Numeric(), nullable=True),
        sa.Column("price_high", sa.Numeric(), nullable=True),
        sa.Column("low_reason", sa.Text(), nullable=True),
        sa.Column("high_reason", sa.Text(), nullable=True),
        sa.Column("high_units", sa.Numeric(), nullable=True),
        sa.Column("throughput_flow", sa.Numeric(), nullable=True),
        sa.Column("throughput_value", sa.Numeric(), nullable=True),
        sa.Column("shortage", sa.Numeric(), nullable=True),
        sa.Column("spare", sa.Numeric(), nullable=True),
        sa.PrimaryKeyConstraint("run_id", "period_id", "site_id", name=op.f("pk_run_site_price")),
    )

    op.execute(SITE_PRICE_HISTORY)


def downgrade() -> None:
    op.execute("DROP VIEW site_price_history")
    for table in (
        "run_site_price",
        "run_flow",
        "solve_run",
        "lane_rate",
        "lane",
        "demand",
        "supply",
        "period_snapshot",
        "period",
        "site_version",
        "site",
        "load_batch",
    ):
        op.drop_table(table)
