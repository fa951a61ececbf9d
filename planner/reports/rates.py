"""Rate ranges of a stored run's lanes: how much a rate may move before the plan changes, and why.

For one lane, the lanes of a site, or every lane of a week matching a filter,
:func:`lane_rate_ranges` reads the stored plan back and computes each lane's
rate range with :func:`planner.core.rates.rate_ranges`, with the route that
sets each end: below the lower end flow joins the lane along that route (for
an idle lane, the rate at which it starts to be used); above the upper end
flow leaves the lane along that route.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from decimal import Decimal

import numpy as np
from sqlalchemy import Engine

from planner.core.explain import RouteNames, Step, route_steps
from planner.core.network import ArcKind
from planner.core.prices import price_ranges
from planner.core.rates import rate_ranges
from planner.core.residual import feasible_potential, residual_graph
from planner.database.reopen import reopen_run
from planner.errors import PlannerError
from planner.reports.catalog import choose_run

__all__ = ["LANE_STATES", "LaneRateRange", "lane_rate_ranges"]

#: How a lane sits in the stored plan.
LANE_STATES = ("idle", "in use", "at capacity", "at minimum")


@dataclass
class LaneRateRange:
    """A lane's rate range in one run; money in currency per unit, ``None`` for an open end."""

    period: str
    lane: str
    state: str
    rate: Decimal
    flow: Decimal
    low: Decimal | None
    high: Decimal | None
    low_route: list[Step] = field(default_factory=list)
    high_route: list[Step] = field(default_factory=list)

    def text(self) -> str:
        """A line for the range, and a line per end that has a route."""
        low = "no lower limit" if self.low is None else f"{self.low:.2f}"
        high = "no upper limit" if self.high is None else f"{self.high:.2f}"
        lines = [
            f"{self.lane} in {self.period} ({self.state}, flow {self.flow:,}): rate {self.rate:.2f} keeps the plan "
            f"optimal from {low} to {high}"
        ]
        if self.low_route:
            lines.append(f"  below {low}, flow joins the lane and leaves: {_route_text(self.low_route)}")
        if self.high_route:
            lines.append(f"  above {high}, flow leaves the lane for: {_route_text(self.high_route)}")
        return "\n".join(lines)


def _route_text(steps: list[Step]) -> str:
    parts = []
    for step in steps:
        if step.kind == "lane":
            parts.append(f"{'' if step.forward else 'one unit less on '}lane {step.label} {step.unit_cost:.2f}")
        elif step.kind == "throughput":
            parts.append(f"{'' if step.forward else 'one unit less '}handled at {step.label} {step.unit_cost:.2f}")
        elif step.kind in ("spare", "short-feed"):
            parts.append(f"spare supply of {step.label}" if step.kind == "spare" else "unmet demand")
        else:
            parts.append(f"{'' if step.forward else 'one unit less '}{step.kind} {step.label} {step.unit_cost:.2f}")
    return " -> ".join(parts)


def lane_rate_ranges(
    engine: Engine,
    period: str | None,
    *,
    lanes: list[str] | None = None,
    site: str | None = None,
    state: str | None = None,
    run_id: int | None = None,
    routes: bool = False,
) -> list[LaneRateRange]:
    """Rate ranges of lanes of the latest optimal run of ``period`` (or run ``run_id``).

    Parameters
    ----------
    engine : sqlalchemy.Engine
    period : str, optional
        ISO week; may be left out with a ``run_id`` of one week.
    lanes : list of str, optional
        Lane labels as the reports write them (``W01->C03 road``).
    site : str, optional
        Only lanes leaving or entering this site.
    state : {"idle", "in use", "at capacity", "at minimum"}, optional
        Only lanes in this state.
    run_id : int, optional
        Any optimal run instead of the week's latest optimal one; for a linked
        horizon, ``period`` picks the week.
    routes : bool
        Also give the route that sets each end.

    Raises
    ------
    PlannerError
        When the run does not exist, a lane or site is unknown, or nothing matches.
    """
    if state is not None and state not in LANE_STATES:
        raise PlannerError(f"unknown lane state {state!r}; choose one of {', '.join(LANE_STATES)}")
    picked = choose_run(engine, period=period, run_id=run_id)
    if picked.run is None:
        raise PlannerError(picked.message)
    period = picked.period
    with engine.connect() as conn:
        stored = reopen_run(conn, picked.run.run_id)
    inst, flow, labels = stored.instance, stored.flow, stored.lane_labels
    t = stored.period_index(period)
    arcs = inst.lane_arc[t]
    states = _states(inst, flow, arcs)
    chosen = _chosen_lanes(stored, t, states, lanes, site, state, period)
    res = residual_graph(inst, flow)
    pi = price_ranges(inst, res, feasible_potential(inst, res)).price
    found = rate_ranges(inst, flow, res, pi, arcs[chosen], routes=routes)
    names = RouteNames(stored.site_code, labels, stored.periods, stored.site_kind_name)
    cd, qd = stored.scaling.cost_decimals, stored.scaling.quantity_decimals
    out = []
    for i, lane in enumerate(chosen.tolist()):
        out.append(
            LaneRateRange(
                period=period,
                lane=str(labels[lane]),
                state=str(states[lane]),
                rate=Decimal(int(found.rate[i])).scaleb(-cd),
                flow=Decimal(int(flow[arcs[lane]])).scaleb(-qd),
                low=Decimal(int(found.low[i])).scaleb(-cd) if found.has_low[i] else None,
                high=Decimal(int(found.high[i])).scaleb(-cd) if found.has_high[i] else None,
                low_route=route_steps(inst, found.low_route[i], names) if routes else [],
                high_route=route_steps(inst, found.high_route[i], names) if routes else [],
            )
        )
    return out


def _states(inst, flow: np.ndarray, arcs: np.ndarray) -> np.ndarray:
    full = ~inst.unlimited[arcs] & (flow[arcs] >= inst.upper[arcs])
    at_minimum = (inst.lower[arcs] > 0) & (flow[arcs] <= inst.lower[arcs])
    state = np.where(flow[arcs] > 0, "in use", "idle").astype(object)
    state[at_minimum] = "at minimum"
    state[full & (inst.arc_kind[arcs] == ArcKind.LANE)] = "at capacity"
    return state


def _chosen_lanes(stored, t: int, states, lanes, site, state, period) -> np.ndarray:
    """Indices of the lanes of week ``t`` of the stored run that match the filters, in label order."""
    labels = stored.lane_labels
    keep = stored.lane_present[t].copy()
    if lanes:
        present = labels[keep]
        unknown = sorted(set(lanes) - set(present.tolist()))
        if unknown:
            example = present[0] if present.shape[0] else "P01->W01 road"
            raise PlannerError(
                f"no lane {', '.join(unknown)} in {period}; write lanes as ORIGIN->DESTINATION MODE, e.g. {example}"
            )
        keep &= np.isin(labels, lanes)
    if site is not None:
        at = np.flatnonzero(stored.site_code == site)
        if at.shape[0] == 0:
            raise PlannerError(f"site {site} is not in the input of {period}; check the site code")
        week = stored.weeks[t]
        keep &= (week.lane_origin == at[0]) | (week.lane_destination == at[0])
    if state is not None:
        keep &= states == state
    chosen = np.flatnonzero(keep)
    if chosen.shape[0] == 0:
        raise PlannerError(f"no lane of {period} matches; loosen the filters")
    return chosen[np.argsort(labels[chosen], kind="stable")]
