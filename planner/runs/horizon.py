"""Linked horizons: consecutive weeks solved as one time-expanded network with stock.

``solve_horizon`` is what ``planner solve --horizon A..B`` calls: read the
current snapshot of every week, put them on one site and lane list, build the
time-expanded instance, optimise, and store one run with flows per week,
stock per site and week, and a price per site and week.
"""

from __future__ import annotations

import hashlib
import time

import numpy as np
from sqlalchemy import Engine

from planner.core.network import time_expand
from planner.core.optimize import FAILED, Outcome, optimize
from planner.core.week import NONE, WeekData
from planner.database.results import RunKey
from planner.database.snapshot import (
    Scaling,
    Snapshot,
    read_lanes,
    read_snapshot,
    run_fingerprint,
)
from planner.errors import PlannerError
from planner.runs.weekly import RunSummary, store_and_summarise

__all__ = ["horizon_snapshots", "solve_horizon"]


def horizon_snapshots(conn, periods: list[str], scaling: Scaling) -> tuple[list[Snapshot], dict]:
    """The current snapshots of ``periods`` re-indexed onto one site and lane list.

    Returns the snapshots and a dict with ``site_id``, ``site_code``,
    ``site_kind``, ``lane_id``, ``lane_labels``, ``lane_present`` (period x lane)
    and the re-indexed ``weeks`` (:class:`WeekData` per period).
    """
    registry = read_lanes(conn)
    snaps = [read_snapshot(conn, p, scaling, lanes=registry) for p in periods]
    site_id = np.unique(np.concatenate([s.site_id for s in snaps]))
    lane_id = np.unique(np.concatenate([s.lane_id for s in snaps]))
    n, m = site_id.shape[0], lane_id.shape[0]
    code = np.empty(n, dtype=object)
    kind = np.zeros(n, dtype=np.int8)
    kind_name = np.empty(n, dtype=object)
    labels = np.empty(m, dtype=object)
    present = np.zeros((len(snaps), m), dtype=bool)
    weeks = []
    # A lane's origin and destination are part of its identity, the same in
    # every period; a lane missing from a period exists there with no
    # capacity, so lane indices mean the same in every period of the horizon.
    origin = np.zeros(m, np.int64)
    destination = np.zeros(m, np.int64)
    # Each period's site and lane indices on the merged lists.
    indices = [(np.searchsorted(site_id, s.site_id), np.searchsorted(lane_id, s.lane_id)) for s in snaps]
    for t, (s, (si, li)) in enumerate(zip(snaps, indices)):
        code[si], kind[si], kind_name[si] = s.site_code, s.week.site_kind, s.site_kind_name
        labels[li] = s.lane_labels()
        present[t, li] = True
        origin[li] = si[s.week.lane_origin]
        destination[li] = si[s.week.lane_destination]
    for s, (si, li) in zip(snaps, indices):
        w = s.week

        def sites(values, default):
            out = np.full(n, default, dtype=np.int64)
            out[si] = values
            return out

        def lanes(values, default):
            out = np.full(m, default, dtype=np.int64)
            out[li] = values
            return out

        weeks.append(
            WeekData(
                site_kind=kind,
                supply=sites(w.supply, 0),
                demand=sites(w.demand, 0),
                shortage_penalty=sites(w.shortage_penalty, NONE),
                throughput_capacity=sites(w.throughput_capacity, NONE),
                handling_cost=sites(w.handling_cost, 0),
                lane_origin=origin,
                lane_destination=destination,
                lane_cost=lanes(w.lane_cost, 0),
                lane_capacity=lanes(w.lane_capacity, 0),
                lane_min=lanes(w.lane_min, 0),
                holding_cost=sites(w.holding_cost, 0),
                storage_capacity=sites(w.storage_capacity, 0),
            )
        )
    return snaps, {
        "site_id": site_id,
        "site_code": code,
        "site_kind": kind,
        "site_kind_name": kind_name,
        "lane_id": lane_id,
        "lane_labels": labels,
        "lane_present": present,
        "weeks": weeks,
    }


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
    fingerprint = hashlib.sha256(
        "|".join(run_fingerprint(s.fingerprint, scaling) for s in snaps).encode()
    ).hexdigest()
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
