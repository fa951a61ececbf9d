"""A stored week run read back as arrays: its snapshot, its instance and the flow it stored.

Explanations and rate ranges of a stored run are computed on the plan that was
stored, not on a fresh solve: the run's own snapshot (its batch) is read at the
run's precision, the instance is built from it, and the stored flows (lanes,
warehouse throughput, spare supply, shortage) are put back on its arcs.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
from sqlalchemy import Connection, text

from planner.core.edits import Edit, apply_edits
from planner.core.explain import stored_flow
from planner.core.network import Instance, assemble_instance
from planner.database.snapshot import Scaling, Snapshot, fetch_columns, read_snapshot, snapshot_names
from planner.errors import PlannerError

__all__ = ["StoredWeek", "reopen_week"]


@dataclass(frozen=True)
class StoredWeek:
    """An optimal week run read back."""

    run_id: int
    period: str
    scaling: Scaling
    snapshot: Snapshot
    instance: Instance
    flow: np.ndarray


def reopen_week(conn: Connection, period: str, run_id: int | None = None, snapshot: Snapshot | None = None) -> StoredWeek:
    """The latest optimal run of ``period`` (or run ``run_id``) read back as arrays.

    ``snapshot``, when given, must have been read at the run's precision; when it
    is of the run's batch it is used instead of reading the snapshot again.

    A scenario's run comes back on its own figures: the snapshot it was solved
    on with the scenario's edits applied (added lanes at the end).

    Raises
    ------
    PlannerError
        When there is no such optimal week run.
    """
    chosen = (
        "SELECT run_id FROM latest_week_run WHERE period = :period"
        if run_id is None
        else "SELECT r.id FROM solve_run r JOIN period p ON p.id = r.period_id WHERE r.id = :run "
        "AND p.code = :period AND r.kind = 'week' AND r.status = 'optimal'"
    )
    row = conn.execute(
        text(
            "SELECT r.id, r.batch_id, r.cost_decimals, r.quantity_decimals, coalesce(r.scenario_id, 0) FROM solve_run r "
            f"WHERE r.id = ({chosen})"
        ),
        {"period": period, "run": run_id},
    ).first()
    if row is None:
        raise PlannerError(
            f"no optimal run of {period}" + (f" with id {run_id}" if run_id else "")
            + f"; solve it first with `planner solve --period {period}`"
        )
    run, batch, cd, qd, scenario = (int(v) for v in row)
    scaling = Scaling(cd, qd)
    same = snapshot is not None and snapshot.batch_id == batch
    snap = snapshot if same else read_snapshot(conn, period, scaling, batch_id=batch)
    if scenario:
        snap = _with_edits(conn, snap, scenario, scaling)
    # The week's code reaches the result tables' partition key: one partition read.
    params = {"q": scaling.quantity_scale, "r": run, "p": period}
    lanes = fetch_columns(
        conn,
        "SELECT lane_id, (flow * %(q)s)::bigint AS flow FROM run_flow WHERE run_id = %(r)s AND period = %(p)s",
        params,
        ints=["lane_id", "flow"],
    )
    sites = fetch_columns(
        conn,
        "SELECT site_id, (coalesce(spare, 0) * %(q)s)::bigint AS spare, "
        "(coalesce(shortage, 0) * %(q)s)::bigint AS shortage, "
        "(coalesce(throughput_flow, 0) * %(q)s)::bigint AS throughput "
        "FROM run_site_price WHERE run_id = %(r)s AND period = %(p)s",
        params,
        ints=["site_id", "spare", "shortage", "throughput"],
    )
    inst = assemble_instance(snap.week, cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale)
    lane_flow = np.zeros(snap.lane_id.shape[0], np.int64)
    order = np.argsort(snap.lane_id, kind="stable")  # a scenario's added lanes come last, whatever their ids
    lane_flow[order[np.searchsorted(snap.lane_id[order], lanes["lane_id"])]] = lanes["flow"]
    per_site = np.searchsorted(snap.site_id, sites["site_id"])

    def site_values(column: str) -> np.ndarray:
        out = np.zeros(snap.site_id.shape[0], np.int64)
        out[per_site] = sites[column]
        return out

    flow = stored_flow(inst, lane_flow, site_values("spare"), site_values("shortage"), site_values("throughput"))
    return StoredWeek(run, period, scaling, snap, inst, flow)


def _with_edits(conn: Connection, snap: Snapshot, scenario: int, scaling: Scaling) -> Snapshot:
    """The snapshot with the scenario's edits applied, and the database ids of its added lanes."""
    edits = [
        Edit(r.action, r.target, r.value, r.source, r.source_line)
        for r in conn.execute(text("SELECT * FROM scenario_edit WHERE scenario_id = :s ORDER BY position"),
                              {"s": scenario})
    ]
    week, names = apply_edits(snap.week, snapshot_names(conn, snap), edits, cost_decimals=scaling.cost_decimals,
                              quantity_decimals=scaling.quantity_decimals)
    n = snap.lane_id.shape[0]
    added = [
        conn.execute(
            text("SELECT id FROM lane WHERE origin_id = :o AND destination_id = :d AND mode = :m"),
            {"o": int(snap.site_id[week.lane_origin[k]]), "d": int(snap.site_id[week.lane_destination[k]]),
             "m": str(names.lane_mode[k])},
        ).scalar_one()
        for k in range(n, week.n_lanes)
    ]
    return dataclasses.replace(
        snap, week=week, lane_mode=np.asarray(names.lane_mode, dtype=object),
        lane_id=np.concatenate([snap.lane_id, np.array(added, dtype=np.int64)]),
    )
