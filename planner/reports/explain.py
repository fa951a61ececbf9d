"""Explanations of a stored run: read its flow back and follow the marginal route.

:func:`explain_site` rebuilds the instance of a run's snapshot and the flow
the run stored, and hands them to :func:`planner.core.explain.explain_node`,
so the route shown is the one of the plan that was stored.
"""

from __future__ import annotations

import numpy as np
from sqlalchemy import Engine, text

from planner.core.explain import Explanation, explain_node, node_of, stored_flow
from planner.core.network import assemble_instance
from planner.core.prices import price_ranges
from planner.core.residual import feasible_potential, residual_graph
from planner.database.snapshot import Scaling, fetch_columns, read_snapshot
from planner.errors import PlannerError

__all__ = ["explain_site"]


def explain_site(engine: Engine, site: str, period: str, run_id: int | None = None) -> Explanation:
    """Explain a site's price in the latest optimal run of ``period`` (or run ``run_id``).

    The flow is read back from the stored run, so the route shown is the one
    of the plan that was stored.

    Raises
    ------
    PlannerError
        When there is no optimal run of the period or the site is not in it.
    """
    snap, scaling, lanes, sites = _stored_week(engine, period, run_id)
    matches = np.flatnonzero(snap.site_code == site)
    if matches.shape[0] == 0:
        raise PlannerError(f"site {site} is not in the snapshot of {period}; check the site code")
    inst = assemble_instance(snap.week, cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale)
    lane_flow = np.zeros(snap.lane_id.shape[0], np.int64)
    lane_flow[np.searchsorted(snap.lane_id, lanes["lane_id"])] = lanes["flow"]
    per_site = np.searchsorted(snap.site_id, sites["site_id"])

    def site_values(column: str) -> np.ndarray:
        out = np.zeros(snap.site_id.shape[0], np.int64)
        out[per_site] = sites[column]
        return out

    flow = stored_flow(inst, lane_flow, site_values("spare"), site_values("shortage"), site_values("throughput"))
    res = residual_graph(inst, flow)
    ranges = price_ranges(inst, res, feasible_potential(inst, res))
    return explain_node(
        inst,
        ranges,
        res,
        node_of(inst, int(matches[0])),
        site_codes=snap.site_code,
        lane_labels=snap.lane_labels(),
        period_codes=[period],
        site_kinds=snap.site_kind_name,
    )


def _stored_week(engine: Engine, period: str, run_id: int | None):
    """The snapshot, scaling, lane flows and per-site flows of a stored optimal week run."""
    with engine.connect() as conn:
        row = conn.execute(
            text(
                "SELECT r.id, r.batch_id, r.cost_decimals, r.quantity_decimals FROM solve_run r "
                "JOIN period p ON p.id = r.period_id WHERE p.code = :period AND r.kind = 'week' "
                "AND r.status = 'optimal' AND (CAST(:run AS bigint) IS NULL OR r.id = :run) "
                "ORDER BY r.finished_at DESC, r.id DESC LIMIT 1"
            ),
            {"period": period, "run": run_id},
        ).first()
        if row is None:
            raise PlannerError(
                f"no optimal run of {period}" + (f" with id {run_id}" if run_id else "")
                + f"; solve it first with `planner solve --period {period}`"
            )
        run, batch, cd, qd = (int(v) for v in row)
        scaling = Scaling(cd, qd)
        snap = read_snapshot(conn, period, scaling, batch_id=batch)
        params = {"q": scaling.quantity_scale, "r": run}
        lanes = fetch_columns(
            conn,
            "SELECT lane_id, (flow * %(q)s)::bigint AS flow FROM run_flow WHERE run_id = %(r)s",
            params,
            ints=["lane_id", "flow"],
        )
        sites = fetch_columns(
            conn,
            "SELECT site_id, (coalesce(spare, 0) * %(q)s)::bigint AS spare, "
            "(coalesce(shortage, 0) * %(q)s)::bigint AS shortage, "
            "(coalesce(throughput_flow, 0) * %(q)s)::bigint AS throughput "
            "FROM run_site_price WHERE run_id = %(r)s",
            params,
            ints=["site_id", "spare", "shortage", "throughput"],
        )
    return snap, scaling, lanes, sites
