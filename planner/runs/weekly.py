"""Solve periods stored in PostgreSQL and persist the runs.

``solve_period`` is what ``planner solve --period`` calls: read the current
snapshot, build the instance, optimise, and store the run with its flows,
prices and certificate in one transaction. A bad week is stored as a run with
its status and message; it never leaves half a run behind.
"""

from __future__ import annotations

import time
from dataclasses import dataclass
from decimal import Decimal

import numpy as np
from sqlalchemy import Engine, text

from planner.core.engines import WarmState, state_of
from planner.core.network import assemble_instance
from planner.core.optimize import FAILED, Outcome, optimize, shortage_units
from planner.database.history import ensure_partitions
from planner.database.results import RunKey, insert_run, store_results, to_decimal
from planner.database.snapshot import (
    Scaling,
    Snapshot,
    current_batch,
    read_snapshot,
    run_fingerprint,
)
from planner.errors import PlannerError


@dataclass(frozen=True)
class RunSummary:
    """What a finished run reports back."""

    run_id: int
    period: str
    status: str
    cost: Decimal | None
    shortage: Decimal | None
    certificate_ok: bool | None
    message: str
    seconds: dict
    #: The engine that produced the flow (``ortools``, ``warm``, ``ortools after warm``).
    engine: str = "ortools"

    @property
    def ok(self) -> bool:
        return self.status == "optimal"


def certificate_word(ok: bool | None) -> str:
    """How a run's certificate reads: ``exact``, ``FAILED``, or ``-`` when it has none."""
    return {True: "exact", False: "FAILED", None: "-"}[ok]


class _LaneLabels:
    """A snapshot's lane labels, built on the first lookup.

    Only the messages of infeasible and unbounded weeks name lanes, and
    building the labels of a 100,000-lane week takes about a third of its
    bare solve time.
    """

    def __init__(self, snapshot: Snapshot) -> None:
        self._snapshot = snapshot
        self._labels: np.ndarray | None = None

    def __getitem__(self, lane: int) -> str:
        if self._labels is None:
            self._labels = self._snapshot.lane_labels()
        return self._labels[lane]


def solve_snapshot(snapshot: Snapshot, scaling: Scaling, state: WarmState | None = None) -> tuple:
    """Build and optimise one snapshot (no database): ``(instance, outcome)``.

    With ``state`` (an optimum of a similar week of the same arc layout), the
    warm engine solves first; see :func:`planner.core.optimize.optimize`.
    """
    inst = assemble_instance(
        snapshot.week, cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale
    )
    outcome = optimize(
        inst,
        site_codes=snapshot.site_code,
        lane_labels=_LaneLabels(snapshot),
        period_codes=[snapshot.period],
        warm=state,
    )
    return inst, outcome


#: Per process, the warm state of the latest week it solved optimally, for
#: chains of weeks (:func:`solve_period` with ``chain=True``): consecutive weeks
#: of one network differ by drift, so each starts warm from the one before.
_chain: dict[tuple[int, int], WarmState] = {}


def solve_period(engine: Engine, period: str, scaling: Scaling = Scaling(), *, chain: bool = False) -> RunSummary:
    """Solve the current snapshot of ``period`` and store the run.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    period : str
        ISO week, for example ``"2026-W49"``.
    scaling : Scaling
        Decimal places kept for unit costs and quantities.
    chain : bool
        Start warm from the week this process solved last (``solve --all``);
        the certificate decides as for every run.

    Returns
    -------
    RunSummary
        Also for infeasible, unbounded and failed weeks (``ok`` is False).

    Raises
    ------
    PlannerError
        When the period has no snapshot.
    """
    start = time.perf_counter()
    with engine.connect() as conn:
        period_id, batch_id, snapshot_fp = current_batch(conn, period)
        key = RunKey(
            kind="week",
            period_id=period_id,
            first_period_id=period_id,
            last_period_id=period_id,
            batch_id=batch_id,
            input_fingerprint=run_fingerprint(snapshot_fp, scaling),
        )
        try:
            snapshot = read_snapshot(conn, period, scaling, batch_id=batch_id)
        except PlannerError as err:
            # A figure the chosen precision cannot hold: the attempt is a failed run.
            snapshot = None
            failure = Outcome(FAILED, str(err))
    if snapshot is None:
        return store_and_summarise(
            engine, key, scaling, None, failure, start, label=period,
            periods=None, site_ids=None, lane_ids=None, site_kind=None,
        )
    precision = (scaling.cost_decimals, scaling.quantity_decimals)
    state = _chain.get(precision) if chain else None
    try:
        inst, outcome = solve_snapshot(snapshot, scaling, state)
    except PlannerError as err:
        inst, outcome = None, Outcome(FAILED, str(err))
    if chain and outcome.ok:
        # The week's prices prove its flow optimal: the next week starts from both.
        _chain[precision] = state_of(inst, outcome.flow, outcome.ranges.price)
    return store_and_summarise(
        engine, key, scaling, inst, outcome, start,
        label=period,
        periods=[snapshot.period],
        site_ids=snapshot.site_id,
        lane_ids=snapshot.lane_id,
        site_kind=snapshot.week.site_kind,
    )


def store_and_summarise(
    engine: Engine, key: RunKey, scaling: Scaling, inst, outcome: Outcome, start: float, *,
    label: str, periods, site_ids, lane_ids, site_kind, lane_present=None,
    engine_name: str | None = None, also_store=None,
) -> RunSummary:
    """Store a run (row, flows, prices, stock) in one transaction and summarise it.

    ``engine_name`` is recorded as the run's engine (default: the outcome's own,
    :attr:`planner.core.optimize.Outcome.engine`); ``also_store(conn, run_id)``,
    when given, writes more rows of the run in the same transaction.
    """
    t_solve = time.perf_counter()
    if outcome.ok:
        with engine.begin() as conn:
            ensure_partitions(conn, periods)
    with engine.begin() as conn:
        run_id = insert_run(conn, key, scaling, inst, outcome, t_solve - start,
                            engine=(engine_name or outcome.engine) if inst is not None else None)
        if outcome.ok:
            store_results(
                conn, run_id, inst, outcome, scaling,
                periods=periods, site_ids=site_ids, lane_ids=lane_ids,
                site_kind=site_kind, lane_present=lane_present,
            )
        if also_store is not None:
            also_store(conn, run_id)
        t_store = time.perf_counter()
        conn.execute(
            text("UPDATE solve_run SET total_seconds = :s WHERE id = :id"),
            {"s": t_store - start, "id": run_id},
        )
    cert = outcome.certificate
    td = scaling.cost_decimals + scaling.quantity_decimals
    return RunSummary(
        run_id=run_id,
        period=label,
        status=outcome.status,
        cost=to_decimal(cert.primal_cost, td) if cert is not None and outcome.ok else None,
        shortage=(
            to_decimal(shortage_units(inst, outcome.flow), scaling.quantity_decimals)
            if outcome.ok
            else None
        ),
        certificate_ok=None if cert is None else cert.ok,
        message=outcome.message,
        seconds={
            # reading the snapshot and assembling the instance
            "read": (t_solve - start) - outcome.solver_seconds - outcome.dual_seconds,
            "solver": outcome.solver_seconds,
            "prices": outcome.dual_seconds,
            "store": t_store - t_solve,
            "total": t_store - start,
        },
        engine=engine_name or outcome.engine,
    )


def select_periods(
    engine: Engine,
    *,
    period: str | None = None,
    all_periods: bool = False,
    first: str | None = None,
    last: str | None = None,
) -> list[str]:
    """The loaded periods a solve command asks for, in time order.

    Raises
    ------
    PlannerError
        When the choice is empty, ambiguous or names an unknown period.
    """
    from planner.database.snapshot import loaded_periods
    from planner.periods import parse_week

    chosen = sum([period is not None, all_periods, first is not None or last is not None])
    if chosen != 1:
        raise PlannerError("choose exactly one of --period P, --all, or --from A/--to B")
    with engine.connect() as conn:
        loaded = loaded_periods(conn)
    if period is not None:
        parse_week(period)
        if period not in loaded:
            raise PlannerError(f"period {period} has no loaded snapshot; loaded: {_listing(loaded)}")
        return [period]
    if all_periods:
        if not loaded:
            raise PlannerError("no periods loaded yet; load a folder with `planner load DIR`")
        return loaded
    lo = parse_week(first) if first else None
    hi = parse_week(last) if last else None
    picked = [p for p in loaded if (lo is None or parse_week(p) >= lo) and (hi is None or parse_week(p) <= hi)]
    if not picked:
        raise PlannerError(f"no loaded period between {first or 'the start'} and {last or 'the end'}")
    return picked


def _listing(codes: list[str]) -> str:
    if not codes:
        return "none"
    return ", ".join(codes[:8]) + (f" and {len(codes) - 8} more" if len(codes) > 8 else "")


def period_overview(engine: Engine) -> list[dict]:
    """Each loaded period with its current batch and its latest run."""
    with engine.connect() as conn:
        rows = conn.execute(
            text(
                "SELECT p.code AS period, cur.batch_id, r.id AS run_id, r.status, r.primal_cost AS cost, "
                "r.certificate_ok FROM period p "
                "JOIN LATERAL (SELECT max(batch_id) AS batch_id FROM period_snapshot ps "
                "WHERE ps.period_id = p.id) cur ON cur.batch_id IS NOT NULL "
                "LEFT JOIN newest_week_run nw ON nw.period_id = p.id "
                "LEFT JOIN solve_run r ON r.id = nw.run_id "
                "ORDER BY p.starts_on"
            )
        ).mappings()
        return [dict(r) for r in rows]


def run_certificate(engine: Engine, *, period: str | None = None, run_id: int | None = None) -> dict:
    """The stored certificate of a run (by id, or the latest run of a period).

    Returns
    -------
    dict
        Label -> value, ending with ``certificate``: ``exact`` or ``FAILED``.
    """
    if (period is None) == (run_id is None):
        raise PlannerError("give either --period P or --run ID")
    with engine.connect() as conn:
        row = conn.execute(
            text(
                "SELECT r.*, p.code AS period_code FROM solve_run r "
                "LEFT JOIN period p ON p.id = r.period_id "
                "WHERE (CAST(:run AS bigint) IS NULL OR r.id = :run) "
                # a week's certificate is its plan's: scenario runs answer by id only
                "AND (CAST(:period AS text) IS NULL OR (p.code = :period AND r.scenario_id IS NULL)) "
                "ORDER BY r.finished_at DESC, r.id DESC LIMIT 1"
            ),
            {"run": run_id, "period": period},
        ).mappings().first()
    if row is None:
        raise PlannerError("no such run; list runs with `planner periods`")
    return {
        "run": row["id"],
        "period": row["period_code"],
        "status": row["status"],
        "message": row["message"],
        "max conservation violation (units)": row["max_conservation_violation"],
        "max bound violation (units)": row["max_bound_violation"],
        "min reduced cost over residual arcs": row["min_reduced_cost"],
        "primal cost": row["primal_cost"],
        "dual objective": row["dual_objective"],
        "difference": row["duality_gap"],
        "precision": f"{row['cost_decimals']} cost decimals, {row['quantity_decimals']} quantity decimals",
        "certificate": certificate_word(bool(row["certificate_ok"])),
    }
