"""A stored run read back as arrays: its input, its instance and the flow it stored.

Explanations and rate ranges of a stored run are computed on the plan that was
stored, not on a fresh solve: the run's own input is read at the run's
precision (a week run's batch; for a linked horizon, each week's snapshot as it
stood when the run was stored, checked against the run's input fingerprint),
the instance is built from it, and the stored flows (lanes, warehouse
throughput, spare supply, shortage, stock carried between weeks) are put back
on its arcs. A flow that does not balance on the rebuilt instance is refused.
A scenario's run comes back on its own figures: the snapshot it was solved on
with the scenario's edits applied (added lanes at the end).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np
from sqlalchemy import Connection, text

from planner.core.edits import Edit, apply_edits
from planner.core.network import ArcKind, Instance, time_expand
from planner.core.week import WeekData
from planner.database.linked import horizon_fingerprint, horizon_snapshots
from planner.database.snapshot import Scaling, Snapshot, fetch_columns, read_snapshot, snapshot_names
from planner.errors import PlannerError

__all__ = ["StoredRun", "StoredWeek", "edited_lane_ids", "reopen_run", "reopen_week", "scenario_edits"]


@dataclass(frozen=True)
class StoredRun:
    """An optimal run (one week or a linked horizon) read back.

    Sites and lanes are indexed on one list for all the run's periods
    (``weeks[t]`` is period ``periods[t]``); ``lane_present[t, lane]`` says
    whether the lane has a rate in that period.
    """

    run_id: int
    kind: str
    periods: list[str]
    scaling: Scaling
    site_id: np.ndarray
    site_code: np.ndarray
    site_kind_name: np.ndarray
    lane_id: np.ndarray
    lane_labels: np.ndarray
    lane_present: np.ndarray
    weeks: list[WeekData]
    instance: Instance
    flow: np.ndarray

    @property
    def span(self) -> str:
        """``2026-W49`` for a week run, ``FIRST..LAST`` for a horizon."""
        return self.periods[0] if len(self.periods) == 1 else f"{self.periods[0]}..{self.periods[-1]}"

    def period_index(self, period: str) -> int:
        """Index of ``period`` in the run.

        Raises
        ------
        PlannerError
            When the run does not cover ``period``.
        """
        if period not in self.periods:
            raise PlannerError(f"run {self.run_id} covers {self.span}, not {period}; choose a week in it")
        return self.periods.index(period)


@dataclass(frozen=True)
class StoredWeek:
    """An optimal week run read back (see :func:`reopen_week`)."""

    run_id: int
    period: str
    scaling: Scaling
    snapshot: Snapshot
    instance: Instance
    flow: np.ndarray


def reopen_run(conn: Connection, run_id: int) -> StoredRun:
    """Run ``run_id`` (a week or a linked horizon) read back as arrays.

    Raises
    ------
    PlannerError
        When there is no such run, it did not end optimal (it stored no plan),
        or its input can no longer be read back as it was.
    """
    return _reopen(conn, run_id)[0]


def _reopen(conn: Connection, run_id: int, snapshot: Snapshot | None = None) -> tuple[StoredRun, Snapshot | None]:
    """The run read back, and the snapshot of a week run (None for a horizon).

    ``snapshot``, when given, must have been read at the run's precision; when it
    is of a week run's batch it is used instead of reading the snapshot again.
    """
    snap = None
    row = conn.execute(
        text(
            "SELECT r.kind, r.status, r.batch_id, r.cost_decimals, r.quantity_decimals, r.input_fingerprint, "
            "coalesce(r.scenario_id, 0) AS scenario, "
            "f.code AS first_period, l.code AS last_period FROM solve_run r "
            "JOIN period f ON f.id = r.first_period_id JOIN period l ON l.id = r.last_period_id WHERE r.id = :run"
        ),
        {"run": run_id},
    ).mappings().first()
    if row is None:
        raise PlannerError(f"there is no run {run_id}; list runs with `planner runs`")
    if row["status"] != "optimal":
        raise PlannerError(f"run {run_id} ended {row['status']}: it stored no plan to read back")
    scaling = Scaling(int(row["cost_decimals"]), int(row["quantity_decimals"]))
    if row["kind"] == "week":
        batch = int(row["batch_id"])
        same = snapshot is not None and snapshot.batch_id == batch
        snap = snapshot if same else read_snapshot(conn, row["first_period"], scaling, batch_id=batch)
        if row["scenario"]:
            snap = _with_edits(conn, snap, int(row["scenario"]), scaling)
        merged = _one_week(snap)
        periods, period_ids = [snap.period], np.array([snap.period_id])
    else:
        periods, batches = _horizon_batches(conn, run_id)
        snaps, merged = horizon_snapshots(conn, periods, scaling, batch_ids=batches)
        if horizon_fingerprint(snaps, scaling) != row["input_fingerprint"]:
            raise PlannerError(
                f"the input of run {run_id} ({periods[0]}..{periods[-1]}) can no longer be read back as it was "
                "(a load changed its weeks while it was solved); solve the horizon again"
            )
        period_ids = np.array([s.period_id for s in snaps])
    inst = time_expand(merged["weeks"], cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale)
    flow = _stored_flow(conn, run_id, inst, scaling, periods, period_ids, merged)
    return StoredRun(
        run_id, str(row["kind"]), periods, scaling, merged["site_id"], merged["site_code"],
        merged["site_kind_name"], merged["lane_id"], merged["lane_labels"], merged["lane_present"],
        merged["weeks"], inst, flow,
    ), snap


def _one_week(snap: Snapshot) -> dict:
    return {
        "site_id": snap.site_id,
        "site_code": snap.site_code,
        "site_kind_name": snap.site_kind_name,
        "lane_id": snap.lane_id,
        "lane_labels": snap.lane_labels(),
        "lane_present": np.ones((1, snap.lane_id.shape[0]), dtype=bool),
        "weeks": [snap.week],
    }


def _horizon_batches(conn: Connection, run_id: int) -> tuple[list[str], list[int]]:
    """The weeks of a horizon run and, for each, the newest batch loaded before the run was stored."""
    rows = conn.execute(
        text(
            "SELECT p.code, (SELECT max(ps.batch_id) FROM period_snapshot ps JOIN load_batch b ON b.id = ps.batch_id "
            "WHERE ps.period_id = p.id AND b.loaded_at <= r.started_at) AS batch_id "
            "FROM solve_run r JOIN period f ON f.id = r.first_period_id JOIN period l ON l.id = r.last_period_id "
            "JOIN period p ON p.starts_on BETWEEN f.starts_on AND l.starts_on WHERE r.id = :run ORDER BY p.starts_on"
        ),
        {"run": run_id},
    ).all()
    if any(batch is None for _, batch in rows):
        raise PlannerError(f"the input of run {run_id} can no longer be found; solve the horizon again")
    return [str(code) for code, _ in rows], [int(batch) for _, batch in rows]


def _stored_flow(
    conn: Connection, run_id: int, inst: Instance, scaling: Scaling, periods: list[str], period_ids, merged
) -> np.ndarray:
    """The run's stored flows put back on the arcs of ``inst``; refused when they do not balance.

    The result tables are partitioned by the week's code: the codes are given
    as constants, so only the run's weeks' partitions are read. ``run_flow``
    holds only the lanes that carry flow; every other lane's flow is zero.
    """
    params = {"q": scaling.quantity_scale, "r": run_id, "codes": list(periods)}
    per = "JOIN period p ON p.code = x.period WHERE x.run_id = %(r)s AND x.period = ANY(%(codes)s)"
    lanes = fetch_columns(
        conn, "SELECT p.id AS period_id, x.lane_id, (x.flow * %(q)s)::bigint AS flow FROM run_flow x " + per,
        params, ints=["period_id", "lane_id", "flow"],
    )
    sites = fetch_columns(
        conn,
        "SELECT p.id AS period_id, x.site_id, (coalesce(x.spare, 0) * %(q)s)::bigint AS spare, "
        "(coalesce(x.shortage, 0) * %(q)s)::bigint AS shortage, "
        "(coalesce(x.throughput_flow, 0) * %(q)s)::bigint AS throughput "
        "FROM run_site_price x " + per,
        params, ints=["period_id", "site_id", "spare", "shortage", "throughput"],
    )
    stock = fetch_columns(
        conn, "SELECT p.id AS period_id, x.site_id, (x.stock * %(q)s)::bigint AS stock FROM run_stock x " + per,
        params, ints=["period_id", "site_id", "stock"],
    )
    order = np.argsort(period_ids)

    def table(found: dict, ids: np.ndarray, key: str, column: str) -> np.ndarray:
        out = np.zeros((len(period_ids), ids.shape[0]), np.int64)
        t = order[np.searchsorted(period_ids[order], found["period_id"])]
        by_id = np.argsort(ids, kind="stable")  # a scenario's added lanes come last, whatever their ids
        out[t, by_id[np.searchsorted(ids[by_id], found[key])]] = found[column]
        return out

    site_ids, lane_ids = merged["site_id"], merged["lane_id"]
    per_arc = {
        ArcKind.LANE: table(lanes, lane_ids, "lane_id", "flow"),
        ArcKind.TO_SPARE: table(sites, site_ids, "site_id", "spare"),
        ArcKind.SHORTAGE: table(sites, site_ids, "site_id", "shortage"),
        ArcKind.THROUGHPUT: table(sites, site_ids, "site_id", "throughput"),
        ArcKind.STOCK: table(stock, site_ids, "site_id", "stock"),
    }
    flow = np.zeros(inst.n_arcs, dtype=np.int64)
    for kind, values in per_arc.items():
        sel = inst.arc_kind == kind
        flow[sel] = values[inst.arc_period[sel], inst.arc_ref[sel]]
    flow[inst.arc_kind == ArcKind.SPARE_TO_SHORT] = int(per_arc[ArcKind.SHORTAGE].sum())
    net = np.zeros(inst.n_nodes, np.int64)
    np.add.at(net, inst.tail, flow)
    np.subtract.at(net, inst.head, flow)
    if not np.array_equal(net, inst.supply):
        raise PlannerError(f"the stored flows of run {run_id} do not balance on its input; solve it again")
    return flow


def reopen_week(conn: Connection, period: str, run_id: int | None = None, snapshot: Snapshot | None = None) -> StoredWeek:
    """The latest optimal run of ``period`` (or week run ``run_id`` of it) read back as arrays.

    ``snapshot``, when given, must have been read at the run's precision; when it
    is of the run's batch it is used instead of reading the snapshot again.

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
    found = conn.execute(text(chosen), {"period": period, "run": run_id}).scalar()
    if found is None:
        raise PlannerError(
            f"no optimal run of {period}" + (f" with id {run_id}" if run_id else "")
            + "; list runs with `planner runs`"
        )
    stored, snap = _reopen(conn, int(found), snapshot)
    return StoredWeek(stored.run_id, period, stored.scaling, snap, stored.instance, stored.flow)


def scenario_edits(conn: Connection, scenario_id: int) -> list[Edit]:
    """A scenario's stored edits, in the order they apply."""
    return [
        Edit(r.action, r.target, r.value, r.source, r.source_line)
        for r in conn.execute(text("SELECT * FROM scenario_edit WHERE scenario_id = :s ORDER BY position"),
                              {"s": scenario_id})
    ]


def edited_lane_ids(conn: Connection, snap: Snapshot, week, lane_mode, *, register: bool = False) -> np.ndarray:
    """Database ids of an edited week's lanes: the snapshot's, then those the edits added.

    With ``register`` the added lanes' identities are inserted first where new
    (that changes no snapshot: a week's lanes are its lane_rate rows).
    """
    n = snap.lane_id.shape[0]
    if week.n_lanes == n:
        return snap.lane_id
    rows = [{"o": int(snap.site_id[week.lane_origin[k]]), "d": int(snap.site_id[week.lane_destination[k]]),
             "m": str(lane_mode[k])} for k in range(n, week.n_lanes)]
    if register:
        conn.execute(text("INSERT INTO lane (origin_id, destination_id, mode) VALUES (:o, :d, :m) "
                          "ON CONFLICT DO NOTHING"), rows)
    added = [conn.execute(text("SELECT id FROM lane WHERE origin_id = :o AND destination_id = :d AND mode = :m"),
                          r).scalar_one() for r in rows]
    return np.concatenate([snap.lane_id, np.array(added, dtype=np.int64)])


def _with_edits(conn: Connection, snap: Snapshot, scenario: int, scaling: Scaling) -> Snapshot:
    """The snapshot with the scenario's edits applied, and the database ids of its added lanes."""
    week, names = apply_edits(snap.week, snapshot_names(conn, snap), scenario_edits(conn, scenario),
                              cost_decimals=scaling.cost_decimals, quantity_decimals=scaling.quantity_decimals)
    return dataclasses.replace(
        snap, week=week, lane_mode=np.asarray(names.lane_mode, dtype=object),
        lane_id=edited_lane_ids(conn, snap, week, names.lane_mode),
    )
