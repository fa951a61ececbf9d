"""Exact sweeps of one lane's rate: the optimal cost is piecewise linear and concave, with the lane's flows as slopes."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from planner.core.engines import compiled_kernel
from planner.core.network import assemble_instance
from planner.core.solve import OPTIMAL, solve_flow
from planner.core.sweep import (
    NoPlanInSweep,
    _rate_sweep_by_routes,
    capacity_sweep,
    demand_sweep,
    rate_sweep,
    throughput_sweep,
)
from planner.core.week import WeekData
from planner.errors import PlannerError
from tests.reference_model import optimal_cost
from tests.strategies import degenerate_week, week_data


def at_rate(week: WeekData, lane: int, rate: int) -> WeekData:
    cost = week.lane_cost.copy()
    cost[lane] = rate
    return dataclasses.replace(week, lane_cost=cost)


needs_kernel = pytest.mark.skipif(compiled_kernel() is None, reason="the compiled warm kernel is not built")
ENGINES = ["solves", pytest.param("routes", marks=needs_kernel)]


def check_against_highs(week: WeekData, lane: int, start: int, end: int, engine: str = "solves") -> list:
    if engine == "routes":
        pieces = _rate_sweep_by_routes(compiled_kernel(), week, lane, start, end, 10_000, 1)
        assert pieces is not None  # the kernel's last plan certified
    else:
        pieces = rate_sweep(week, lane, start, end, engine=engine)
    assert pieces[0].start == start and pieces[-1].end == end
    for before, after in zip(pieces, pieces[1:]):
        assert before.end == after.start  # the pieces meet at each breakpoint
        assert before.flow > after.flow  # slopes fall: the cost is concave (common practice, no source)
        assert before.cost_at(before.end) == after.cost_at_start  # and continuous
    for piece in pieces:
        middle = (piece.start + piece.end) // 2
        for rate in {piece.start, middle, piece.end}:
            # scipy linprog(method="highs") on the week with the lane at that rate
            assert piece.cost_at(rate) == optimal_cost(at_rate(week, lane, rate))
        # the slope of the optimal cost over the piece is the lane's flow (parametric cost analysis)
        width = piece.end - piece.start
        if width:
            rise = optimal_cost(at_rate(week, lane, piece.end)) - optimal_cost(at_rate(week, lane, piece.start))
            assert rise == piece.flow * width
    return pieces


@pytest.mark.parametrize("engine", ENGINES)
@given(week=st.one_of(week_data(feasible=True, lane_minimums=True), degenerate_week()), data=st.data())
def test_sweep_pieces_match_highs_at_every_breakpoint_and_between(engine: str, week: WeekData, data) -> None:
    lane = data.draw(st.integers(0, week.n_lanes - 1))
    start = data.draw(st.integers(-5, 10))
    check_against_highs(week, lane, start, start + data.draw(st.integers(0, 30)), engine)


@needs_kernel
@given(week=st.one_of(week_data(feasible=True, lane_minimums=True), degenerate_week()), data=st.data())
def test_the_kernel_s_routes_give_the_pieces_of_one_solve_per_piece(week: WeekData, data) -> None:
    lane = data.draw(st.integers(0, week.n_lanes - 1))
    start = data.draw(st.integers(-5, 10))
    end = start + data.draw(st.integers(0, 30))
    routes = _rate_sweep_by_routes(compiled_kernel(), week, lane, start, end, 10_000, 1)
    solves = rate_sweep(week, lane, start, end, engine="solves")
    # the same function: equal costs at every breakpoint of either (zero-width pieces aside)
    points = sorted({p.start for p in routes + solves} | {end})

    def cost(pieces, x):
        return next(p for p in pieces if p.start <= x <= p.end).cost_at(x)

    assert [cost(routes, x) for x in points] == [cost(solves, x) for x in points]
    assert all(p.end > p.start for p in routes) or len(routes) == 1


def test_sweep_of_a_lane_shared_with_a_limited_alternative() -> None:
    # Two plants, one customer needing 6; the other lane (rate 9) carries at most 4.
    week = WeekData.from_arrays([0, 0, 2], [0, 1], [2, 2], [5, 9], supply=[10, 10, 0], demand=[0, 0, 6],
                                lane_capacity=[-1, 4])
    for engine in ("solves", "routes") if compiled_kernel() else ("solves",):
        pieces = check_against_highs(week, 0, 0, 20, engine)
        assert [(p.start, p.end, p.flow) for p in pieces] == [(0, 9, 6), (9, 20, 2)]
    assert np.all(np.diff([p.flow for p in pieces]) < 0)


def test_sweep_refuses_a_backward_range() -> None:
    week = WeekData.from_arrays([0, 2], [0], [1], [5], supply=[5, 0], demand=[0, 3])
    with pytest.raises(PlannerError, match="from a lower rate"):
        rate_sweep(week, 0, 10, 2)


# Capacity and demand sweeps move the right-hand side: the optimal cost is convex
# in them (common practice, no source: parametric right-hand-side analysis).
def check_convex_sweep(sweep, week: WeekData, index: int, start: int, end: int, edited) -> list:
    """Each piece agrees with scipy HiGHS at its ends and middle; slopes rise strictly at each breakpoint."""
    try:
        pieces = sweep(week, index, start, end)
    except NoPlanInSweep as error:
        # The sweep stopped where the week has no plan: HiGHS agrees (one unit further when "above").
        if error.above:
            assert optimal_cost(edited(week, error.figure)) is not None
            assert optimal_cost(edited(week, error.figure + 1)) is None
        else:
            assert optimal_cost(edited(week, error.figure)) is None
        return []
    assert pieces[0].start == start and pieces[-1].end == end
    for before, after in zip(pieces, pieces[1:]):
        assert before.end == after.start
        assert before.slope < after.slope  # a true breakpoint: the cost is convex and bends there
        assert before.cost_at(before.end) == after.cost_at_start
    for piece in pieces:
        for figure in {piece.start, (piece.start + piece.end) // 2, piece.end}:
            # scipy linprog(method="highs") on the week with the figure changed
            assert piece.cost_at(figure) == optimal_cost(edited(week, figure))
    return pieces


def with_capacity(week: WeekData, lane: int, capacity: int) -> WeekData:
    values = week.lane_capacity.copy()
    values[lane] = capacity
    return dataclasses.replace(week, lane_capacity=values)


def with_demand(week: WeekData, site: int, demand: int) -> WeekData:
    values = week.demand.copy()
    values[site] = demand
    return dataclasses.replace(week, demand=values)


@given(week=st.one_of(degenerate_week(), week_data(feasible=True)), data=st.data())
def test_capacity_sweep_matches_highs_and_bends_only_at_breakpoints(week: WeekData, data) -> None:
    # Mostly a lane that carries flow, swept from near its minimum: it binds, so the sweep has pieces.
    inst = assemble_instance(week)
    solution = solve_flow(inst)
    carrying = np.flatnonzero(solution.flow[inst.lane_arc[0]] > 0) if solution.status == OPTIMAL else []
    lanes = st.integers(0, week.n_lanes - 1)
    lane = data.draw(st.one_of(st.sampled_from(carrying.tolist()), lanes) if len(carrying) else lanes)
    start = data.draw(st.integers(int(week.lane_min[lane]), int(week.lane_min[lane]) + 2))
    end = start + data.draw(st.integers(1, 25))
    check_convex_sweep(capacity_sweep, week, lane, start, end, lambda w, c: with_capacity(w, lane, c))


@given(week=st.one_of(degenerate_week(), week_data(feasible=True)), data=st.data())
def test_demand_sweep_matches_highs_and_bends_only_at_breakpoints(week: WeekData, data) -> None:
    customers = np.flatnonzero(week.site_kind == 2)
    site = int(data.draw(st.sampled_from(customers.tolist())))
    start = data.draw(st.integers(0, 3))
    end = start + data.draw(st.integers(1, 30))
    check_convex_sweep(demand_sweep, week, site, start, end, lambda w, d: with_demand(w, site, d))


def test_throughput_sweep_against_highs() -> None:
    # Plant 0 -> warehouse 1 -> customer 2 at 1 + 1 (handling 0), or directly at 9; the customer needs 6.
    week = WeekData.from_arrays([0, 1, 2], [0, 1, 0], [1, 2, 2], [1, 1, 9], supply=[10, 0, 0], demand=[0, 0, 6])

    def with_throughput(w: WeekData, capacity: int) -> WeekData:
        values = w.throughput_capacity.copy()
        values[1] = capacity
        return dataclasses.replace(w, throughput_capacity=values)

    pieces = check_convex_sweep(throughput_sweep, week, 1, 0, 12, with_throughput)
    assert [(p.start, p.end, p.slope) for p in pieces] == [(0, 6, -7), (6, 12, 0)]


def test_demand_sweep_names_the_largest_demand_with_a_plan() -> None:
    # Two plants of 4 units each, no shortage penalty: 8 units at most.
    week = WeekData.from_arrays([0, 0, 2], [0, 1], [2, 2], [5, 9], supply=[4, 4, 0], demand=[0, 0, 0])
    with pytest.raises(PlannerError, match="no plan above demand 8"):
        demand_sweep(week, 2, 0, 12)
    assert [(p.start, p.end, p.slope) for p in demand_sweep(week, 2, 0, 8)] == [(0, 4, 5), (4, 8, 9)]


def test_capacity_and_demand_sweeps_refuse_bad_ranges() -> None:
    week = WeekData.from_arrays([0, 2], [0], [1], [5], supply=[5, 0], demand=[0, 3], lane_min=[2])
    with pytest.raises(PlannerError, match="below the lane's minimum of 2"):
        capacity_sweep(week, 0, 1, 5)
    with pytest.raises(PlannerError, match="from a lower capacity"):
        capacity_sweep(week, 0, 5, 5)
    with pytest.raises(PlannerError, match="only a customer"):
        demand_sweep(week, 0, 0, 5)
