"""The optimal cost of a week as one figure varies: exact breakpoints, no grid.

With every other figure fixed, the optimal cost is a piecewise linear, concave
function of one lane's rate ``c``: the minimum over plans of
``fixed cost + c * flow on the lane``. On each piece one plan is optimal and the
slope is that plan's flow on the lane [1]_. The rate range of the lane under a
plan (:func:`planner.core.rates.rate_ranges`) ends exactly where the next plan
becomes as cheap, so the sweep solves once per piece: at the start of the sweep,
then one scaled unit past each range's upper end, warm from the previous plan
(:func:`planner.core.engines.solve_with`). Every number is an exact integer.

A capacity (of a lane or of a warehouse's throughput) or a customer's demand
moves the right-hand side instead, and the optimal cost is piecewise linear and
*convex* in it. Its right derivative at a figure is exact and known with the
number of units for which it holds at least: minus the capacity's loosening
value (:func:`planner.core.limits.limit_values`) or the customer's
``price_high`` (:func:`planner.core.prices.price_ranges`). The sweep steps by
those units, re-solving warm at each step, checks that the re-solved cost is
the one the slope promised, and joins steps of equal slope into one piece, so
every breakpoint it reports is where the slope really changes.

References
----------
.. [1] R. K. Ahuja, T. L. Magnanti and J. B. Orlin, *Network Flows: Theory,
   Algorithms, and Applications*, Prentice Hall, 1993, section 9.11 (cost
   sensitivity) and section 11.8 (parametric analysis).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from dataclasses import dataclass

import numpy as np

from planner.core.engines import solve_with, state_of
from planner.core.limits import CAPACITY, limit_values
from planner.core.network import ArcKind, Instance, assemble_instance
from planner.core.paths import UNLIMITED
from planner.core.prices import price_ranges
from planner.core.rates import rate_ranges
from planner.core.residual import Residual, feasible_potential, residual_graph
from planner.core.solve import OPTIMAL, exact_dot
from planner.core.week import SiteKind, WeekData
from planner.errors import PlannerError

__all__ = ["NoPlanInSweep", "Piece", "capacity_sweep", "demand_sweep", "rate_sweep", "throughput_sweep"]


@dataclass(frozen=True)
class Piece:
    """One piece of the optimal cost: on ``[start, end]`` it is linear with slope ``slope``.

    ``cost_at_start`` is the optimal total cost (scaled) at figure ``start``;
    the cost at figure ``x`` of the piece is ``cost_at_start + (x - start) * slope``.
    In a rate sweep the slope is the lane's flow (one plan is optimal on the
    whole piece); in a capacity sweep it is minus the value of one more unit,
    in a demand sweep the cost of one more unit. ``engine`` says what produced
    the plan at ``start``.
    """

    start: int
    end: int
    slope: int
    cost_at_start: int
    engine: str

    @property
    def flow(self) -> int:
        """The swept lane's flow on the piece (rate sweeps: the slope)."""
        return self.slope

    def cost_at(self, figure: int) -> int:
        """Optimal cost at ``figure`` (inside the piece)."""
        return self.cost_at_start + (figure - self.start) * self.slope


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


class NoPlanInSweep(PlannerError):
    """The week has no plan at ``figure`` (``above`` False) or just above it (``above`` True)."""

    def __init__(self, message: str, figure: int, above: bool) -> None:
        super().__init__(message)
        self.figure, self.above = figure, above


#: The right derivative of the optimal cost at a figure and the units it holds
#: for at least (``UNLIMITED``: to the end); ``None`` when one unit more leaves
#: the week without a plan.
RightSlope = Callable[[Instance, np.ndarray, Residual, np.ndarray], "tuple[int, int] | None"]


def capacity_sweep(week: WeekData, lane: int, start: int, end: int, *, cost_scale: int = 10_000,
                   quantity_scale: int = 1) -> list[Piece]:
    """The pieces of the optimal cost as lane ``lane``'s capacity goes from ``start`` to ``end`` (scaled units).

    The cost is convex and falls (or stays) as the capacity grows; each slope is
    minus the exact value of one more unit of capacity on its piece.

    Raises
    ------
    PlannerError
        When ``start >= end``, ``start`` is below the lane's minimum, or the week
        has no plan at ``start``.

    Examples
    --------
    A customer needing 6 units over a lane at 5 and one at 9: each unit of the
    cheap lane's capacity saves 4, until it carries all 6:

    >>> w = WeekData.from_arrays([0, 0, 2], [0, 1], [2, 2], [5, 9], supply=[10, 10, 0], demand=[0, 0, 6])
    >>> [(p.start, p.end, p.slope, p.cost_at_start) for p in capacity_sweep(w, 0, 0, 10)]
    [(0, 6, -4, 54), (6, 10, 0, 30)]
    """
    _check_range(start, end, "capacity")
    if start < int(week.lane_min[lane]):
        raise PlannerError(f"a capacity of {start} is below the lane's minimum of {int(week.lane_min[lane])}")

    def week_at(capacity: int) -> WeekData:
        return dataclasses.replace(week, lane_capacity=_with(week.lane_capacity, lane, capacity))

    def arc_of(inst: Instance) -> int:
        return int(inst.lane_arc[0, lane])

    return _step_sweep(week_at, _capacity_slope(arc_of), start, end, "capacity", cost_scale, quantity_scale)


def throughput_sweep(week: WeekData, site: int, start: int, end: int, *, cost_scale: int = 10_000,
                     quantity_scale: int = 1) -> list[Piece]:
    """The pieces of the optimal cost as warehouse ``site``'s throughput capacity goes from ``start`` to ``end``.

    Examples
    --------
    Plant 0 reaches customer 2 through warehouse 1 at 1 + 1, or directly at 9:

    >>> w = WeekData.from_arrays([0, 1, 2], [0, 1, 0], [1, 2, 2], [1, 1, 9], supply=[10, 0, 0],
    ...                          demand=[0, 0, 6])
    >>> [(p.start, p.end, p.slope) for p in throughput_sweep(w, 1, 2, 9)]
    [(2, 6, -7), (6, 9, 0)]
    """
    _check_range(start, end, "throughput capacity")
    if int(week.site_kind[site]) != SiteKind.WAREHOUSE:
        raise PlannerError("only a warehouse has a throughput capacity")
    if start < 0:
        raise PlannerError(f"a throughput capacity of {start} is below zero")

    def week_at(capacity: int) -> WeekData:
        return dataclasses.replace(week, throughput_capacity=_with(week.throughput_capacity, site, capacity))

    def arc_of(inst: Instance) -> int:
        return int(np.flatnonzero((inst.arc_kind == ArcKind.THROUGHPUT) & (inst.arc_ref == site))[0])

    return _step_sweep(week_at, _capacity_slope(arc_of), start, end, "throughput capacity", cost_scale,
                       quantity_scale)


def demand_sweep(week: WeekData, site: int, start: int, end: int, *, cost_scale: int = 10_000,
                 quantity_scale: int = 1) -> list[Piece]:
    """The pieces of the optimal cost as customer ``site``'s demand goes from ``start`` to ``end`` (scaled units).

    The cost is convex and rises with the demand; each slope is the customer's
    price over its piece (the exact cost of one more unit, ``price_high``).

    Raises
    ------
    PlannerError
        When ``start >= end`` or is negative, the site is not a customer, or the
        week has no plan somewhere in the range (the message names the largest
        demand that has one).

    Examples
    --------
    Plant 0 sends 4 units at 5 and plant 1 any number at 9:

    >>> w = WeekData.from_arrays([0, 0, 2], [0, 1], [2, 2], [5, 9], supply=[4, 10, 0], demand=[0, 0, 0])
    >>> [(p.start, p.end, p.slope, p.cost_at_start) for p in demand_sweep(w, 2, 0, 8)]
    [(0, 4, 5, 0), (4, 8, 9, 20)]
    """
    _check_range(start, end, "demand")
    if int(week.site_kind[site]) != SiteKind.CUSTOMER:
        raise PlannerError("only a customer has a demand to sweep")
    if start < 0:
        raise PlannerError(f"a demand of {start} is below zero")

    def week_at(demand: int) -> WeekData:
        return dataclasses.replace(week, demand=_with(week.demand, site, demand))

    def right_slope(inst: Instance, flow: np.ndarray, res: Residual, potential: np.ndarray):
        ranges = price_ranges(inst, res, potential - potential[inst.spare])
        node = int(inst.site_node[0, site])
        if not ranges.has_high[node]:
            return None
        return int(ranges.high[node]), int(ranges.high_units[node])

    return _step_sweep(week_at, right_slope, start, end, "demand", cost_scale, quantity_scale)


def _check_range(start: int, end: int, what: str) -> None:
    if start >= end:
        raise PlannerError(f"a sweep runs from a lower {what} to a higher one, not from {start} to {end}")


def _with(values: np.ndarray, index: int, value: int) -> np.ndarray:
    changed = values.copy()
    changed[index] = value
    return changed


def _capacity_slope(arc_of: Callable[[Instance], int]) -> RightSlope:
    """Minus the value of one more unit of an arc's capacity: zero unless the arc is full."""

    def right_slope(inst: Instance, flow: np.ndarray, res: Residual, potential: np.ndarray):
        arc = arc_of(inst)
        if flow[arc] < inst.upper[arc]:
            return 0, UNLIMITED  # room left: more capacity is worth nothing, now and further up (convexity)
        values = limit_values(inst, flow, res, potential, only=[arc])
        row = np.flatnonzero((values.arc == arc) & (values.side == CAPACITY))[0]
        loosen = int(values.loosen[row])
        return (-loosen, int(values.loosen_units[row])) if loosen else (0, UNLIMITED)

    return right_slope


def _step_sweep(week_at: Callable[[int], WeekData], right_slope: RightSlope, start: int, end: int, what: str,
                cost_scale: int, quantity_scale: int) -> list[Piece]:
    """Step from ``start`` to ``end`` by the units each exact right slope holds for; join equal slopes."""
    pieces: list[Piece] = []
    figure, state, promised = start, None, None
    while True:
        inst = assemble_instance(week_at(figure), cost_scale=cost_scale, quantity_scale=quantity_scale)
        solution, engine = solve_with(inst, state)
        if solution.status != OPTIMAL:
            raise NoPlanInSweep(f"the week has no optimal plan at {what} {figure} ({solution.status})", figure, False)
        cost = exact_dot(inst.cost, solution.flow)
        if promised is not None and cost != promised:
            raise PlannerError(f"internal error: the sweep expected a cost of {promised} at {what} {figure}, "
                               f"a re-solve gives {cost}")
        res = residual_graph(inst, solution.flow)
        potential = solution.potential if solution.potential is not None else feasible_potential(inst, res)
        right = right_slope(inst, solution.flow, res, potential)
        if right is None:
            raise NoPlanInSweep(f"the week has no plan above {what} {figure}: one more unit cannot be had at any cost",
                                figure, True)
        slope, units = right
        step_end = end if units >= end - figure else figure + units
        if pieces and pieces[-1].slope == slope:
            pieces[-1] = dataclasses.replace(pieces[-1], end=step_end)
        else:
            pieces.append(Piece(figure, step_end, slope, cost, engine))
        if step_end >= end:
            return pieces
        promised, figure = cost + slope * (step_end - figure), step_end
        state = state_of(inst, solution.flow, potential) if state is None else dataclasses.replace(
            state, cost=inst.cost, flow=solution.flow, potential=potential)
