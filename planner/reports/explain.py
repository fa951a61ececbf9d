"""Explanations of a stored run: read its flow back and follow the marginal route.

:func:`explain_site` rebuilds the instance of a run's input and the flow the
run stored (a week run, or one week of a linked horizon), and hands them to
:func:`planner.core.explain.explain_node`, so the route shown is the one of
the plan that was stored.
"""

from __future__ import annotations

import numpy as np
from sqlalchemy import Engine

from planner.core.explain import Explanation, explain_node, node_of
from planner.core.prices import price_ranges
from planner.core.residual import feasible_potential, residual_graph
from planner.database.reopen import reopen_run
from planner.errors import PlannerError
from planner.reports.catalog import choose_run

__all__ = ["explain_site"]


def explain_site(engine: Engine, site: str, period: str | None = None, run_id: int | None = None) -> Explanation:
    """Explain a site's price in the latest optimal run of ``period``, or in run ``run_id``.

    The flow is read back from the stored run, so the route shown is the one
    of the plan that was stored. ``run_id`` may be any optimal run; for a
    linked horizon, ``period`` picks the week (it may be left out for a run
    of one week).

    Raises
    ------
    PlannerError
        When there is no optimal run of the period (the message says what to
        do), the week is not in the run, or the site is not in it.
    NotOptimal
        When run ``run_id`` did not end optimal.
    """
    chosen = choose_run(engine, period=period, run_id=run_id)
    if chosen.run is None:
        raise PlannerError(chosen.message)
    with engine.connect() as conn:
        stored = reopen_run(conn, chosen.run.run_id)
    inst, flow = stored.instance, stored.flow
    matches = np.flatnonzero(stored.site_code == site)
    if matches.shape[0] == 0:
        raise PlannerError(f"site {site} is not in {chosen.run.describe()}; check the site code")
    res = residual_graph(inst, flow)
    ranges = price_ranges(inst, res, feasible_potential(inst, res))
    return explain_node(
        inst,
        ranges,
        res,
        node_of(inst, int(matches[0]), stored.period_index(chosen.period)),
        site_codes=stored.site_code,
        lane_labels=stored.lane_labels,
        period_codes=stored.periods,
        site_kinds=stored.site_kind_name,
    )
