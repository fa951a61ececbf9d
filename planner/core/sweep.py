"""The optimal cost of a week as one lane's rate varies: exact breakpoints, no grid.

With every other figure fixed, the optimal cost is a piecewise linear, concave
function of one lane's rate ``c``: the minimum over plans of
``fixed cost + c * flow on the lane``. On each piece one plan is optimal and the
slope is that plan's flow on the lane [1]_. The rate range of the lane under a
plan (:func:`planner.core.rates.rate_ranges`) ends exactly where the next plan
becomes as cheap, so the sweep solves once per piece: at the start of the sweep,
then one scaled unit past each range's upper end, warm from the previous plan
(:func:`planner.core.engines.solve_with`). Every number is an exact integer.

References
----------
.. [1] R. K. Ahuja, T. L. Magnanti and J. B. Orlin, *Network Flows: Theory,
   Algorithms, and Applications*, Prentice Hall, 1993, section 9.11 (cost
   sensitivity) and section 11.8 (parametric analysis).
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import numpy as np

from planner.core.engines import solve_with, state_of
from planner.core.network import assemble_instance
from planner.core.rates import rate_ranges
from planner.core.residual import feasible_potential, residual_graph
from planner.core.solve import OPTIMAL, exact_dot
from planner.core.week import WeekData
from planner.errors import PlannerError

__all__ = ["Piece", "rate_sweep"]


@dataclass(frozen=True)
class Piece:
    """One piece of the optimal cost: on ``[start, end]`` the same plan is optimal.

    ``cost_at_start`` is the optimal total cost (scaled) at rate ``start``; the
    cost at rate ``c`` of the piece is ``cost_at_start + (c - start) * flow``.
    ``engine`` says what produced the plan.
    """

    start: int
    end: int
    flow: int
    cost_at_start: int
    engine: str

    def cost_at(self, rate: int) -> int:
        """Optimal cost at ``rate`` (inside the piece)."""
        return self.cost_at_start + (rate - self.start) * self.flow


def rate_sweep(week: WeekData, lane: int, start: int, end: int, *, cost_scale: int = 10_000,
               quantity_scale: int = 1) -> list[Piece]:
    """The pieces of the optimal cost as lane ``lane``'s rate goes from ``start`` to ``end`` (scaled).

    Returns
    -------
    list of Piece
        In order; consecutive pieces meet at a breakpoint (``end`` of one is
        ``start`` of the next) and their flows decrease (the cost is concave).

    Raises
    ------
    PlannerError
        When ``start > end``, or the week has no optimal plan at some rate.

    Examples
    --------
    A customer needing 6 units from two plants: the first lane (rate swept from
    0 to 12) takes them all until it costs more than the other lane's 9, then
    only what the other lane (capacity 4) cannot carry:

    >>> w = WeekData.from_arrays([0, 0, 2], [0, 1], [2, 2], [5, 9], supply=[10, 10, 0],
    ...                          demand=[0, 0, 6], lane_capacity=[-1, 4])
    >>> [(p.start, p.end, p.flow, p.cost_at_start) for p in rate_sweep(w, 0, 0, 12)]
    [(0, 9, 6, 0), (9, 12, 2, 54)]
    """
    if start > end:
        raise PlannerError(f"a sweep runs from a lower rate to a higher one, not from {start} to {end}")
    pieces: list[Piece] = []
    rate, state = start, None
    while True:
        edited = dataclasses.replace(week, lane_cost=np.where(np.arange(week.n_lanes) == lane, rate, week.lane_cost))
        inst = assemble_instance(edited, cost_scale=cost_scale, quantity_scale=quantity_scale)
        solution, engine = solve_with(inst, state)
        if solution.status != OPTIMAL:
            raise PlannerError(f"the week has no optimal plan at rate {rate} of the swept lane ({solution.status})")
        res = residual_graph(inst, solution.flow)
        potential = solution.potential if solution.potential is not None else feasible_potential(inst, res)
        arc = int(inst.lane_arc[0, lane])
        ends = rate_ranges(inst, solution.flow, res, potential, [arc])
        last = int(ends.high[0]) if ends.has_high[0] else end
        cost = exact_dot(inst.cost, solution.flow)
        piece_start = pieces[-1].end if pieces else start
        flow = int(solution.flow[arc])
        pieces.append(Piece(piece_start, min(last, end), flow, cost - (rate - piece_start) * flow, engine))
        if last >= end:
            return pieces
        # The layout never changes along a sweep: a warm state keeps its node lists.
        rate = last + 1
        state = state_of(inst, solution.flow, potential) if state is None else dataclasses.replace(
            state, cost=inst.cost, flow=solution.flow, potential=potential)
