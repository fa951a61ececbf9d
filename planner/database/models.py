"""SQLAlchemy 2 models of the planner's tables.

The schema itself is owned by the Alembic revisions under ``migrations/``; these models
describe the same tables (names, types, keys and named constraints) for typed queries.
``tests/test_db.py`` checks that the migrated database and these models agree.

Snapshots are append-only: every load creates one :class:`LoadBatch`, and the rows of
``site_version``, ``period_snapshot``, ``supply``, ``demand`` and ``lane_rate`` carry its
id. The current snapshot of a period is its ``period_snapshot`` row with the largest
``batch_id``. :class:`Site` and :class:`Lane` hold identities only, shared by all batches.
"""

from __future__ import annotations

import datetime
from decimal import Decimal
from typing import Any

import sqlalchemy as sa
from sqlalchemy.dialects.postgresql import JSONB
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column

from planner.periods import WEEK_CODE_PATTERN

__all__ = [
    "NAMING_CONVENTION",
    "RUN_KINDS",
    "LIMIT_KINDS",
    "RUN_STATUSES",
    "SITE_KINDS",
    "Base",
    "Demand",
    "Lane",
    "LaneRate",
    "LoadBatch",
    "Period",
    "PeriodSnapshot",
    "PlannerLock",
    "EDIT_ACTIONS",
    "Scenario",
    "ScenarioEdit",
    "RunFlow",
    "RunLaneEdit",
    "RunLimit",
    "RunPin",
    "RunSitePrice",
    "Site",
    "Setting",
    "SiteVersion",
    "SolveRun",
    "Supply",
    "site_price_history",
]

#: Constraint names follow one pattern so that migrations can refer to them.
NAMING_CONVENTION = {
    "ix": "ix_%(table_name)s_%(column_0_N_name)s",
    "uq": "uq_%(table_name)s_%(column_0_N_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_N_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}

SITE_KINDS = ("plant", "warehouse", "customer")
RUN_KINDS = ("week", "horizon")
RUN_STATUSES = ("running", "optimal", "infeasible", "unbounded", "failed")
LIMIT_KINDS = ("lane_capacity", "lane_minimum", "throughput", "storage")


def _in_list(column: str, values: tuple[str, ...]) -> str:
    quoted = ", ".join(f"'{value}'" for value in values)
    return f"{column} IN ({quoted})"


class Base(DeclarativeBase):
    """Declarative base holding the planner's metadata."""

    metadata = sa.MetaData(naming_convention=NAMING_CONVENTION)
    type_annotation_map = {
        Decimal: sa.Numeric(),
        dict[str, Any]: JSONB(),
        datetime.datetime: sa.DateTime(timezone=True),
    }


class LoadBatch(Base):
    """One load of a folder of CSV files."""

    __tablename__ = "load_batch"
    __table_args__ = (sa.Index(None, "content_sha256"),)

    id: Mapped[int] = mapped_column(sa.BigInteger, primary_key=True)
    loaded_at: Mapped[datetime.datetime] = mapped_column(server_default=sa.func.now())
    source: Mapped[str] = mapped_column(sa.Text)
    #: ``{"sites.csv": {"sha256": "...", "rows": 12}, ...}``
    files: Mapped[dict[str, Any]]
    #: sha256 hex over the sorted (file name, file sha256) pairs.
    content_sha256: Mapped[str] = mapped_column(sa.Text)


class Site(Base):
    """Identity of a site; its attributes live in :class:`SiteVersion` per batch."""

    __tablename__ = "site"

    id: Mapped[int] = mapped_column(primary_key=True)
    code: Mapped[str] = mapped_column(sa.Text, unique=True)


class SiteVersion(Base):
    """Attributes of a site as one batch defined them."""

    __tablename__ = "site_version"
    __table_args__ = (
        sa.CheckConstraint(_in_list("kind", SITE_KINDS), name="kind"),
        sa.CheckConstraint("throughput_capacity >= 0", name="throughput_capacity_nonnegative"),
        sa.CheckConstraint("handling_cost >= 0", name="handling_cost_nonnegative"),
        sa.CheckConstraint("holding_cost >= 0", name="holding_cost_nonnegative"),
        sa.CheckConstraint("storage_capacity >= 0", name="storage_capacity_nonnegative"),
    )

    # No foreign keys on the bulk input tables (migration 0006): the loader joins
    # every row to its parents, and the parents are append-only.
    batch_id: Mapped[int] = mapped_column(sa.BigInteger, primary_key=True)
    site_id: Mapped[int] = mapped_column(primary_key=True)
    kind: Mapped[str] = mapped_column(sa.Text)
    name: Mapped[str | None] = mapped_column(sa.Text)
    region: Mapped[str | None] = mapped_column(sa.Text)
    throughput_capacity: Mapped[Decimal | None]
    handling_cost: Mapped[Decimal | None]
    holding_cost: Mapped[Decimal | None]
    storage_capacity: Mapped[Decimal | None]
    x: Mapped[float | None] = mapped_column(sa.Double)
    y: Mapped[float | None] = mapped_column(sa.Double)


class Period(Base):
    """An ISO 8601 week."""

    __tablename__ = "period"
    __table_args__ = (
        sa.CheckConstraint(f"code ~ '{WEEK_CODE_PATTERN}'", name="code_format"),
        sa.CheckConstraint("ends_on = starts_on + 6", name="seven_days"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    code: Mapped[str] = mapped_column(sa.Text, unique=True)
    starts_on: Mapped[datetime.date] = mapped_column(unique=True)
    ends_on: Mapped[datetime.date]


class PeriodSnapshot(Base):
    """Which batch (re)defined which period, with the fingerprint of that content."""

    __tablename__ = "period_snapshot"

    period_id: Mapped[int] = mapped_column(sa.ForeignKey("period.id"), primary_key=True)
    batch_id: Mapped[int] = mapped_column(
        sa.BigInteger, sa.ForeignKey("load_batch.id"), primary_key=True
    )
    fingerprint: Mapped[str] = mapped_column(sa.Text)


class Supply(Base):
    """What a plant can ship in a period (an upper bound)."""

    __tablename__ = "supply"
    __table_args__ = (sa.CheckConstraint("quantity >= 0", name="quantity_nonnegative"),)

    batch_id: Mapped[int] = mapped_column(sa.BigInteger, primary_key=True)
    period_id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(primary_key=True)
    quantity: Mapped[Decimal]


class Demand(Base):
    """What a customer needs in a period, and the penalty per unit left unmet."""

    __tablename__ = "demand"
    __table_args__ = (
        sa.CheckConstraint("quantity >= 0", name="quantity_nonnegative"),
        sa.CheckConstraint("shortage_penalty >= 0", name="shortage_penalty_nonnegative"),
    )

    batch_id: Mapped[int] = mapped_column(sa.BigInteger, primary_key=True)
    period_id: Mapped[int] = mapped_column(primary_key=True)
    site_id: Mapped[int] = mapped_column(primary_key=True)
    quantity: Mapped[Decimal]
    shortage_penalty: Mapped[Decimal | None]


class Lane(Base):
    """Identity of a directed lane: origin, destination and mode (``''`` when none)."""

    __tablename__ = "lane"
    __table_args__ = (
        sa.UniqueConstraint("origin_id", "destination_id", "mode"),
        sa.CheckConstraint("origin_id <> destination_id", name="distinct_ends"),
    )

    id: Mapped[int] = mapped_column(primary_key=True)
    origin_id: Mapped[int]
    destination_id: Mapped[int]
    mode: Mapped[str] = mapped_column(sa.Text, server_default=sa.text("''"))


class LaneRate(Base):
    """Cost and bounds of a lane in a period, as one batch defined them."""

    __tablename__ = "lane_rate"
    __table_args__ = (
        sa.CheckConstraint("capacity >= 0", name="capacity_nonnegative"),
        sa.CheckConstraint("min_quantity >= 0", name="min_quantity_nonnegative"),
        sa.CheckConstraint(
            "capacity IS NULL OR min_quantity <= capacity", name="min_quantity_within_capacity"
        ),
    )

    batch_id: Mapped[int] = mapped_column(sa.BigInteger, primary_key=True)
    period_id: Mapped[int] = mapped_column(primary_key=True)
    lane_id: Mapped[int] = mapped_column(primary_key=True)
    unit_cost: Mapped[Decimal]
    #: None means unlimited.
    capacity: Mapped[Decimal | None]
    min_quantity: Mapped[Decimal] = mapped_column(server_default=sa.text("0"))


class SolveRun(Base):
    """One solve of one week (``kind='week'``) or of a linked horizon of weeks."""

    __tablename__ = "solve_run"
    __table_args__ = (
        sa.CheckConstraint(_in_list("kind", RUN_KINDS), name="kind"),
        sa.CheckConstraint(_in_list("status", RUN_STATUSES), name="status"),
        sa.Index(None, "period_id", "status", "finished_at"),
    )

    id: Mapped[int] = mapped_column(sa.BigInteger, primary_key=True)
    kind: Mapped[str] = mapped_column(sa.Text)
    period_id: Mapped[int | None] = mapped_column(sa.ForeignKey("period.id"))
    first_period_id: Mapped[int] = mapped_column(sa.ForeignKey("period.id"))
    last_period_id: Mapped[int] = mapped_column(sa.ForeignKey("period.id"))
    batch_id: Mapped[int | None] = mapped_column(sa.BigInteger, sa.ForeignKey("load_batch.id"))
    input_fingerprint: Mapped[str] = mapped_column(sa.Text)
    status: Mapped[str] = mapped_column(sa.Text)
    message: Mapped[str | None] = mapped_column(sa.Text)
    started_at: Mapped[datetime.datetime] = mapped_column(server_default=sa.func.now())
    finished_at: Mapped[datetime.datetime | None]
    cost_decimals: Mapped[int]
    quantity_decimals: Mapped[int]
    solver_seconds: Mapped[float | None] = mapped_column(sa.Double)
    total_seconds: Mapped[float | None] = mapped_column(sa.Double)
    primal_cost: Mapped[Decimal | None]
    dual_objective: Mapped[Decimal | None]
    duality_gap: Mapped[Decimal | None]
    max_conservation_violation: Mapped[Decimal | None]
    max_bound_violation: Mapped[Decimal | None]
    min_reduced_cost: Mapped[Decimal | None]
    certificate_ok: Mapped[bool | None]
    shortage_units: Mapped[Decimal | None]
    spare_units: Mapped[Decimal | None]
    node_count: Mapped[int | None]
    arc_count: Mapped[int | None]
    #: The planner version that stored the run (migration 0004; None before).
    planner_version: Mapped[str | None] = mapped_column(sa.Text)
    #: The scenario the run solved; None for the real plan (migration 0009).
    scenario_id: Mapped[int | None] = mapped_column(sa.BigInteger, sa.ForeignKey("scenario.id"), index=True)
    #: Which engine produced the flow: ``ortools``, ``warm``, ``ortools after warm`` (migration 0009).
    engine: Mapped[str | None] = mapped_column(sa.Text)


#: The result tables are LIST-partitioned by their ``period`` (the week's code), one
#: partition per week (migration 0006).
_BY_PERIOD = {"postgresql_partition_by": "LIST (period)"}


class RunFlow(Base):
    """Flow of one lane that carries flow in one period of a run (migration 0006: sparse).

    A lane without a row carries nothing; its reduced cost follows from the
    stored prices (the ``lane_flow`` view derives it).
    """

    __tablename__ = "run_flow"
    __table_args__ = (sa.CheckConstraint("flow <> 0", name="flow_nonzero"), _BY_PERIOD)

    # No foreign keys on the bulk result tables: see migration 0001.
    run_id: Mapped[int] = mapped_column(sa.BigInteger, primary_key=True)
    period: Mapped[str] = mapped_column(sa.Text, primary_key=True)
    lane_id: Mapped[int] = mapped_column(primary_key=True)
    flow: Mapped[Decimal]


class RunSitePrice(Base):
    """Shadow price of a site in one period of a run, with its valid range."""

    __tablename__ = "run_site_price"
    __table_args__ = (sa.Index("ix_run_site_price_site_id", "site_id"), _BY_PERIOD)

    run_id: Mapped[int] = mapped_column(sa.BigInteger, primary_key=True)
    period: Mapped[str] = mapped_column(sa.Text, primary_key=True)
    site_id: Mapped[int] = mapped_column(primary_key=True)
    price: Mapped[Decimal]
    price_low: Mapped[Decimal | None]
    price_high: Mapped[Decimal | None]
    low_reason: Mapped[str | None] = mapped_column(sa.Text)
    high_reason: Mapped[str | None] = mapped_column(sa.Text)
    high_units: Mapped[Decimal | None]
    throughput_flow: Mapped[Decimal | None]
    shortage: Mapped[Decimal | None]
    spare: Mapped[Decimal | None]
    #: Price at the outgoing side of a warehouse split in two (migration 0004).
    price_out: Mapped[Decimal | None]



class RunStock(Base):
    """Stock a linked-horizon run carries out of a week at a site (migration 0002)."""

    __tablename__ = "run_stock"
    __table_args__ = (sa.CheckConstraint("stock >= 0", name="stock_nonnegative"), _BY_PERIOD)

    run_id: Mapped[int] = mapped_column(sa.BigInteger, primary_key=True)
    period: Mapped[str] = mapped_column(sa.Text, primary_key=True)
    site_id: Mapped[int] = mapped_column(primary_key=True)
    stock: Mapped[Decimal]
    holding_cost: Mapped[Decimal]

class RunLimit(Base):
    """A limit at its bound in one period of a run, with its exact one-sided values (migration 0004).

    ``limit_kind`` is ``lane_capacity``, ``lane_minimum`` (``ref_id`` a lane),
    ``throughput`` or ``storage`` (``ref_id`` a site).
    """

    __tablename__ = "run_limit"
    __table_args__ = (
        sa.CheckConstraint(_in_list("limit_kind", LIMIT_KINDS), name="limit_kind"),
        sa.CheckConstraint("loosen_value >= 0", name="loosen_value_nonnegative"),
        sa.CheckConstraint("(tighten_cost IS NULL) = (tighten_blocked IS NOT NULL)", name="tighten_or_blocked"),
        sa.CheckConstraint("exact OR (loosen_units IS NULL AND tighten_cost IS NULL)", name="legacy"),
        sa.CheckConstraint("NOT exact OR loosen_units IS NOT NULL", name="exact_units"),
        _BY_PERIOD,
    )

    run_id: Mapped[int] = mapped_column(sa.BigInteger, primary_key=True)
    period: Mapped[str] = mapped_column(sa.Text, primary_key=True)
    limit_kind: Mapped[str] = mapped_column(sa.Text, primary_key=True)
    ref_id: Mapped[int] = mapped_column(primary_key=True)
    bound: Mapped[Decimal]
    flow: Mapped[Decimal]
    loosen_value: Mapped[Decimal]
    #: None only for limits converted from runs stored before 0004 (``exact`` false).
    loosen_units: Mapped[Decimal | None]
    tighten_cost: Mapped[Decimal | None]
    tighten_units: Mapped[Decimal | None]
    tighten_blocked: Mapped[str | None] = mapped_column(sa.Text)
    rate_low: Mapped[Decimal | None]
    rate_high: Mapped[Decimal | None]
    #: False for a run stored before 0004: ``loosen_value`` is one dual's bound, nothing else is known.
    exact: Mapped[bool] = mapped_column(server_default=sa.true())


class RunPin(Base):
    """A run kept by retention whatever its age (migration 0006)."""

    __tablename__ = "run_pin"

    run_id: Mapped[int] = mapped_column(
        sa.BigInteger, sa.ForeignKey("solve_run.id", ondelete="CASCADE"), primary_key=True
    )
    pinned_at: Mapped[datetime.datetime] = mapped_column(sa.DateTime(timezone=True), server_default=sa.func.now())
    pinned_by: Mapped[str] = mapped_column(sa.Text, server_default=sa.text("current_user"))
    note: Mapped[str | None] = mapped_column(sa.Text)


class Scenario(Base):
    """A named what-if on a base week or linked horizon; its edits never touch the base (migrations 0009, 0011)."""

    __tablename__ = "scenario"

    id: Mapped[int] = mapped_column(sa.BigInteger, sa.Identity(), primary_key=True)
    name: Mapped[str] = mapped_column(sa.Text, unique=True)
    description: Mapped[str | None] = mapped_column(sa.Text)
    period_id: Mapped[int] = mapped_column(sa.ForeignKey("period.id"))
    #: The last week of a linked-horizon base (NULL: the base is the week ``period_id``).
    last_period_id: Mapped[int | None] = mapped_column(sa.ForeignKey("period.id"))
    #: The batch whose snapshot the edits were checked against (a horizon's first week's).
    batch_id: Mapped[int] = mapped_column(sa.BigInteger, sa.ForeignKey("load_batch.id"))
    #: A horizon's input when the scenario was made (its weeks' snapshots).
    base_fingerprint: Mapped[str | None] = mapped_column(sa.Text)
    cost_decimals: Mapped[int]
    quantity_decimals: Mapped[int]
    created_at: Mapped[datetime.datetime] = mapped_column(sa.DateTime(timezone=True), server_default=sa.func.now())
    created_by: Mapped[str] = mapped_column(sa.Text, server_default=sa.text("current_user"))


EDIT_ACTIONS = ("close", "open", "demand", "supply", "rate", "capacity", "minimum", "throughput", "handling",
                "holding", "storage", "add-lane")


class ScenarioEdit(Base):
    """One edit of a scenario, as written, in order."""

    __tablename__ = "scenario_edit"
    __table_args__ = (
        sa.CheckConstraint(_in_list("action", EDIT_ACTIONS), name="action"),
        sa.CheckConstraint(_in_list("change", ("set", "percent", "remove")), name="change"),
    )

    scenario_id: Mapped[int] = mapped_column(
        sa.BigInteger, sa.ForeignKey("scenario.id", ondelete="CASCADE"), primary_key=True
    )
    position: Mapped[int] = mapped_column(primary_key=True)
    action: Mapped[str] = mapped_column(sa.Text)
    target: Mapped[str] = mapped_column(sa.Text)
    value: Mapped[str] = mapped_column(sa.Text, server_default=sa.text("''"))
    #: How the value changes the figure: set, percent or remove; None for close/open.
    change: Mapped[str | None] = mapped_column(sa.Text)
    source: Mapped[str] = mapped_column(sa.Text)
    source_line: Mapped[int]


class RunLaneEdit(Base):
    """A lane figure a scenario run used where it differs from the base snapshot (edited or added lanes)."""

    __tablename__ = "run_lane_edit"

    run_id: Mapped[int] = mapped_column(
        sa.BigInteger, sa.ForeignKey("solve_run.id", ondelete="CASCADE"), primary_key=True
    )
    lane_id: Mapped[int] = mapped_column(primary_key=True)
    unit_cost: Mapped[Decimal]
    capacity: Mapped[Decimal | None]
    min_quantity: Mapped[Decimal]


class PlannerLock(Base):
    """A row the planner locks to serialise loads (``load``) or a week's solves (``week 2026-W49``).

    Held with ``SELECT ... FOR UPDATE`` for the guarded work (migration 0007);
    the reporting role has no right on the table, so it cannot take these locks.
    """

    __tablename__ = "planner_lock"
    __table_args__ = {"comment": "rows the planner locks (FOR UPDATE) to serialise loads and each week's solves; no other role may take them"}

    name: Mapped[str] = mapped_column(sa.Text, primary_key=True)


class Setting(Base):
    """A setting kept once per database (migration 0008): ``currency``, an ISO 4217 code."""

    __tablename__ = "setting"
    __table_args__ = (sa.CheckConstraint("name <> 'currency' OR value ~ '^[A-Z]{3}$'", name="currency_code"),)

    name: Mapped[str] = mapped_column(sa.Text, primary_key=True)
    value: Mapped[str] = mapped_column(sa.Text)
    changed_at: Mapped[datetime.datetime] = mapped_column(server_default=sa.func.now())


#: The ``site_price_history`` view (created by migration 0001) for Core queries; it is
#: deliberately not part of ``Base.metadata``, since it is not a table.
site_price_history = sa.table(
    "site_price_history",
    sa.column("period", sa.Text),
    sa.column("starts_on", sa.Date),
    sa.column("site", sa.Text),
    sa.column("kind", sa.Text),
    sa.column("name", sa.Text),
    sa.column("region", sa.Text),
    sa.column("price", sa.Numeric),
    sa.column("price_low", sa.Numeric),
    sa.column("price_high", sa.Numeric),
    sa.column("degenerate", sa.Boolean),
    sa.column("price_change", sa.Numeric),
    sa.column("run_id", sa.BigInteger),
)
