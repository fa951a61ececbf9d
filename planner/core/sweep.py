"""The optimal cost of a week as one figure varies: exact breakpoints, no grid.

With every other figure fixed, the optimal cost is a piecewise linear, concave
function of one lane's rate ``c``: the minimum over plans of
``fixed cost + c * flow on the lane``. On each piece one plan is optimal and the
slope is that plan's flow on the lane [1]_. Every number is an exact integer.

The sweep solves once, at the lane's own rate (kept within the range), and
then moves the lane's flow route by route in the compiled kernel (``_warm.c``),
upwards and downwards at once: with the lane held fixed, the cheapest other
route from its origin to its destination (successive shortest paths on the
residual graph, which keep the plan optimal for the flow the lane still
carries [2]_) costs ``D``, so above rate ``D`` the plan moves as many units to
it as the route can take; below the own rate, the lane takes units back from
the cheapest routes the other way. Routes come in order of cost, and each
distinct cost is a breakpoint. The plans at both ends of the range are
certified, at the costs the pieces say; if one is not (or the kernel is not
built), the sweep falls back to its reference path: one warm solve per piece,
each piece ending where the lane's rate range under its plan ends
(:func:`planner.core.rates.rate_ranges`).

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
.. [2] Same book, section 9.7 (successive shortest paths and their
   reduced-cost optimality).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Callable
from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np

from planner.core.certificate import certify
from planner.core.engines import Incidence, WarmState, compiled_kernel, same_layout, solve_with, state_of
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
               quantity_scale: int = 1, engine: str = "auto", warm: WarmState | None = None) -> list[Piece]:
    """The pieces of the optimal cost as lane ``lane``'s rate goes from ``start`` to ``end`` (scaled).

    ``engine`` ``"auto"`` solves once and lets the compiled kernel give up the
    lane's flow route by route (falling back to one solve per piece when the
    kernel is not built or its last plan does not certify); ``"solves"`` always
    solves once per piece (the reference); ``"compiled"`` requires the kernel.
    ``warm`` (an optimum of the week at other rates, for example its stored
    run) starts the first solve (:func:`planner.core.engines.solve_with`).

    Returns
    -------
    list of Piece
        In order; consecutive pieces meet at a breakpoint (``end`` of one is
        ``start`` of the next) and their flows decrease (the cost is concave).

    Raises
    ------
    PlannerError
        When ``start > end``, or the week has no optimal plan at some rate
        (:class:`NoPlanInSweep`).

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
    kernel = compiled_kernel() if engine in ("auto", "compiled") else None
    if engine == "compiled" and kernel is None:
        raise RuntimeError("the compiled warm kernel is not built; reinstall the planner with a C compiler")
    if kernel is not None:
        pieces = _rate_sweep_by_routes(kernel, week, lane, start, end, cost_scale, quantity_scale, warm)
        if pieces is not None:
            return pieces
    return _rate_sweep_by_solves(week, lane, start, end, cost_scale, quantity_scale, warm)


def _at_rate(week: WeekData, lane: int, rate: int, cost_scale: int, quantity_scale: int) -> Instance:
    edited = dataclasses.replace(week, lane_cost=_with(week.lane_cost, lane, rate))
    return assemble_instance(edited, cost_scale=cost_scale, quantity_scale=quantity_scale)


def _optimum(inst: Instance, state: WarmState | None, what: str, figure: int):
    """An optimal flow of ``inst``, its engine, residual graph and a feasible potential.

    Raises :class:`NoPlanInSweep` when the week has no optimal plan at ``what`` ``figure``.
    """
    solution, engine = solve_with(inst, state)
    if solution.status != OPTIMAL:
        raise NoPlanInSweep(f"the week has no optimal plan at {what} {figure} ({solution.status})", figure, False)
    res = residual_graph(inst, solution.flow)
    potential = solution.potential if solution.potential is not None else feasible_potential(inst, res)
    return solution.flow, engine, res, potential


def _rate_sweep_by_routes(kernel, week: WeekData, lane: int, start: int, end: int, cost_scale: int,
                          quantity_scale: int, warm: WarmState | None = None) -> list[Piece] | None:
    """One solve at the lane's own rate (kept within the range), then routes both ways (the compiled kernel).

    Above that rate the lane gives up its flow route by route, below it takes
    more; the two run at once on separate copies. The plans at ``start`` and
    ``end`` are certified, at the costs the pieces say; None (the caller then
    re-solves piece by piece) when one is not or the kernel stops early.
    """
    pivot = min(max(int(week.lane_cost[lane]), start), end)
    inst = _at_rate(week, lane, pivot, cost_scale, quantity_scale)
    flow, engine, _, potential = _optimum(inst, warm, "rate", pivot)
    arc = int(inst.lane_arc[0, lane])
    carried = int(flow[arc])
    cost = exact_dot(inst.cost, flow)
    incidence = Incidence.of(inst.n_nodes, inst.tail, inst.head)
    # Rising: routes that cost at most end - 1 take units (a bend at end changes nothing inside the range).
    # Falling: the lane takes units back from routes h -> t costing at most -start - 1 (bends above start).
    jobs = [(False, carried - int(inst.lower[arc]), end - 1, pivot < end),
            (True, int(inst.upper[arc]) - carried, -start - 1, start < pivot)]

    def moved(job) -> tuple | None:
        reverse, units, limit, needed = job
        final = flow.copy()
        if not needed or units <= 0:
            return np.empty(0, np.int64), np.empty(0, np.int64), final
        routes = _kernel_routes(kernel, inst, incidence, final, potential, arc, reverse, units, limit)
        if routes is None:
            return None
        rates, taken = routes
        final[arc] = carried + (int(taken.sum()) if reverse else -int(taken.sum()))
        return rates, taken, final

    with ThreadPoolExecutor(max_workers=2) as pool:  # the kernel releases the GIL
        up, down = pool.map(moved, jobs)
    if up is None or down is None or (up[0].shape[0] and up[0][0] < pivot) or (
            down[0].shape[0] and -down[0][0] > pivot):
        return None
    pieces = _pieces_below(start, pivot, carried, cost, -down[0], down[1], engine)
    pieces += _pieces_above(pivot, end, carried, cost, up[0], up[1], engine if not pieces else REROUTED)
    pieces = _joined([p for p in pieces if p.end > p.start] or pieces[-1:])
    for figure, final in ((start, down[2]), (end, up[2])):
        # The plan at each end of the range proves itself, at the cost the pieces say.
        last = _at_rate(week, lane, figure, cost_scale, quantity_scale)
        proof = certify(last, final, feasible_potential(last, residual_graph(last, final)))
        at = next(p for p in pieces if p.start <= figure <= p.end)
        if not proof.ok or proof.primal_cost != at.cost_at(figure):
            return None
    return pieces


def _joined(pieces: list[Piece]) -> list[Piece]:
    """Neighbouring pieces of equal slope as one (the pivot is no breakpoint unless the slope changes there)."""
    joined = pieces[:1]
    for piece in pieces[1:]:
        if piece.slope == joined[-1].slope:
            joined[-1] = dataclasses.replace(joined[-1], end=piece.end)
        else:
            joined.append(piece)
    return joined


def _kernel_routes(kernel, inst: Instance, incidence: Incidence, final: np.ndarray, potential: np.ndarray, arc: int,
                   reverse: bool, units: int, limit: int) -> tuple[np.ndarray, np.ndarray] | None:
    """The kernel's routes (cost, units) for the lane's units; ``final`` becomes the last plan (the lane pinned)."""
    lower, upper = inst.lower.copy(), inst.upper.copy()
    lower[arc] = upper[arc] = final[arc]  # pinned: no search takes the lane itself
    pi = np.array(potential, dtype=np.int64)
    excess = np.zeros(inst.n_nodes, dtype=np.int64)
    steps = min(MAX_ROUTES, units)
    rates, taken = np.empty(steps, np.int64), np.empty(steps, np.int64)
    count, stats = np.zeros(1, np.int64), np.zeros(2, np.int64)
    held = [np.ascontiguousarray(a, dtype=np.int64) for a in (
        inst.tail, inst.head, inst.cost, lower, upper, incidence.first_out, incidence.code)]
    status = kernel.rate_sweep(
        inst.n_nodes, *(a.ctypes.data for a in held), final.ctypes.data, pi.ctypes.data, excess.ctypes.data,
        arc, int(reverse), units, limit, steps, rates.ctypes.data, taken.ctypes.data, count.ctypes.data,
        stats.ctypes.data)
    if status != 0:
        return None
    return rates[: count[0]], taken[: count[0]]


def _pieces_above(pivot: int, end: int, carried: int, cost: int, rates, units, engine: str) -> list[Piece]:
    """Pieces from ``pivot`` up: the lane gives up units at each route's cost, in rising order."""
    pieces: list[Piece] = []
    piece_start, flow, at_start = pivot, carried, cost
    for rate, moved in zip(rates.tolist(), units.tolist()):
        if rate > piece_start:
            pieces.append(Piece(piece_start, rate, flow, at_start, engine if not pieces else REROUTED))
            at_start += (rate - piece_start) * flow
            piece_start = rate
        flow -= moved
    pieces.append(Piece(piece_start, end, flow, at_start, engine if not pieces else REROUTED))
    return pieces


def _pieces_below(start: int, pivot: int, carried: int, cost: int, rates, units, engine: str) -> list[Piece]:
    """Pieces from ``start`` up to ``pivot``: below each bend (falling order) the lane carries more."""
    pieces: list[Piece] = []  # built from the pivot down, then reversed
    piece_end, flow, at_end = pivot, carried, cost
    for rate, moved in zip(rates.tolist(), units.tolist()):
        if rate < piece_end:
            at_rate = at_end - (piece_end - rate) * flow
            pieces.append(Piece(rate, piece_end, flow, at_rate, REROUTED))
            piece_end, at_end = rate, at_rate
        flow += moved
    if start < piece_end:
        pieces.append(Piece(start, piece_end, flow, at_end - (piece_end - start) * flow, REROUTED))
    pieces.reverse()
    if pieces:
        pieces[0] = dataclasses.replace(pieces[0], engine=engine)
    return pieces


def _rate_sweep_by_solves(week: WeekData, lane: int, start: int, end: int, cost_scale: int,
                          quantity_scale: int, warm: WarmState | None = None) -> list[Piece]:
    """One warm solve per piece, its end from the lane's rate range (the reference path)."""
    pieces: list[Piece] = []
    rate, state = start, warm
    while True:
        inst = _at_rate(week, lane, rate, cost_scale, quantity_scale)
        flow, engine, res, potential = _optimum(inst, state, "rate", rate)
        arc = int(inst.lane_arc[0, lane])
        ends = rate_ranges(inst, flow, res, potential, [arc])
        last = int(ends.high[0]) if ends.has_high[0] else end
        cost = exact_dot(inst.cost, flow)
        piece_start = pieces[-1].end if pieces else start
        carried = int(flow[arc])
        pieces.append(Piece(piece_start, min(last, end), carried, cost - (rate - piece_start) * carried, engine))
        if last >= end:
            return pieces
        # The layout never changes along a sweep: a warm state keeps its node lists.
        rate = last + 1
        state = _next_state(state, inst, flow, potential)


#: The engine of pieces found by giving up the swept lane's flow route by route.
REROUTED = "rerouted"
#: Routes the kernel may take in one sweep before the sweep solves piece by piece instead.
MAX_ROUTES = 1_000_000


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
                   quantity_scale: int = 1, warm: WarmState | None = None) -> list[Piece]:
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

    return _step_sweep(week_at, _capacity_slope(arc_of), start, end, "capacity", cost_scale, quantity_scale, warm)


def throughput_sweep(week: WeekData, site: int, start: int, end: int, *, cost_scale: int = 10_000,
                     quantity_scale: int = 1, warm: WarmState | None = None) -> list[Piece]:
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
                       quantity_scale, warm)


def demand_sweep(week: WeekData, site: int, start: int, end: int, *, cost_scale: int = 10_000,
                 quantity_scale: int = 1, warm: WarmState | None = None) -> list[Piece]:
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

    return _step_sweep(week_at, right_slope, start, end, "demand", cost_scale, quantity_scale, warm)


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
                cost_scale: int, quantity_scale: int, warm: WarmState | None) -> list[Piece]:
    """Step from ``start`` to ``end`` by the units each exact right slope holds for; join equal slopes."""
    pieces: list[Piece] = []
    figure, state, promised = start, warm, None
    while True:
        inst = assemble_instance(week_at(figure), cost_scale=cost_scale, quantity_scale=quantity_scale)
        flow, engine, res, potential = _optimum(inst, state, what, figure)
        cost = exact_dot(inst.cost, flow)
        if promised is not None and cost != promised:
            raise PlannerError(f"internal error: the sweep expected a cost of {promised} at {what} {figure}, "
                               f"a re-solve gives {cost}")
        right = right_slope(inst, flow, res, potential)
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
        state = _next_state(state, inst, flow, potential)


def _next_state(state: WarmState | None, inst: Instance, flow: np.ndarray, potential: np.ndarray) -> WarmState:
    """The warm state of this step's optimum; a state of the same layout keeps its node lists."""
    if state is None or not same_layout(inst, state):
        return state_of(inst, flow, potential)
    return dataclasses.replace(state, cost=inst.cost, flow=flow, potential=potential)
