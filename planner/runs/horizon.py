"""Linked horizons: consecutive weeks solved as one time-expanded network with stock.

``solve_horizon`` is what ``planner solve --horizon A..B`` calls: read the
current snapshot of every week, put them on one site and lane list, build the
time-expanded instance, optimise, and store one run with flows per week,
stock per site and week, and a price per site and week.
"""

from __future__ import annotations

import time

from sqlalchemy import Engine

from planner.core.network import time_expand
from planner.core.optimize import FAILED, Outcome, optimize
from planner.database.linked import horizon_fingerprint, horizon_snapshots
from planner.database.results import RunKey
from planner.database.snapshot import Scaling
from planner.errors import PlannerError
from planner.runs.weekly import RunSummary, store_and_summarise

__all__ = ["horizon_snapshots", "solve_horizon"]


def solve_horizon(engine: Engine, periods: list[str], scaling: Scaling = Scaling()) -> RunSummary:
    """Solve consecutive weeks as one time-expanded network with stock, and store one run.

    Stock moves from a week to the next at each site's holding cost, up to its
    storage capacity; supply in the first week includes any opening stock. The
    run stores flows per week, stock per site and week, and a price per site
    and week, with one certificate for the whole horizon.

    Raises
    ------
    PlannerError
        When a week of the span has no snapshot.
    """
    if not periods:
        raise PlannerError("the horizon names no weeks")
    start = time.perf_counter()
    with engine.connect() as conn:
        snaps, merged = horizon_snapshots(conn, periods, scaling)
    fingerprint = horizon_fingerprint(snaps, scaling)
    key = RunKey(
        kind="horizon",
        period_id=None,
        first_period_id=snaps[0].period_id,
        last_period_id=snaps[-1].period_id,
        batch_id=None,
        input_fingerprint=fingerprint,
    )
    try:
        inst = time_expand(merged["weeks"], cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale)
        outcome = optimize(
            inst,
            site_codes=merged["site_code"],
            lane_labels=merged["lane_labels"],
            period_codes=periods,
        )
    except PlannerError as err:
        inst, outcome = None, Outcome(FAILED, str(err))
    return store_and_summarise(
        engine, key, scaling, inst, outcome, start,
        label=f"{periods[0]}..{periods[-1]}",
        periods=[s.period for s in snaps],
        site_ids=merged["site_id"],
        lane_ids=merged["lane_id"],
        site_kind=merged["site_kind"],
        lane_present=merged["lane_present"],
    )
