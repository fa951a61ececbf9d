"""Explanations of a stored run: read its flow back and follow the marginal route.

:func:`explain_site` rebuilds the instance of a run's snapshot and the flow
the run stored, and hands them to :func:`planner.core.explain.explain_node`,
so the route shown is the one of the plan that was stored.
"""

from __future__ import annotations

import numpy as np
from sqlalchemy import Engine

from planner.core.explain import Explanation, explain_node, node_of
from planner.core.prices import price_ranges
from planner.core.residual import feasible_potential, residual_graph
from planner.database.reopen import reopen_week
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
    with engine.connect() as conn:
        stored = reopen_week(conn, period, run_id)
    snap, inst, flow = stored.snapshot, stored.instance, stored.flow
    matches = np.flatnonzero(snap.site_code == site)
    if matches.shape[0] == 0:
        raise PlannerError(f"site {site} is not in the snapshot of {period}; check the site code")
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
