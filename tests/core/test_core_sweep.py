"""Exact sweeps of one lane's rate: the optimal cost is piecewise linear and concave, with the lane's flows as slopes."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from planner.core.sweep import rate_sweep
from planner.core.week import WeekData
from planner.errors import PlannerError
from tests.reference_model import optimal_cost
from tests.strategies import week_data


def at_rate(week: WeekData, lane: int, rate: int) -> WeekData:
    cost = week.lane_cost.copy()
    cost[lane] = rate
    return dataclasses.replace(week, lane_cost=cost)


def check_against_highs(week: WeekData, lane: int, start: int, end: int) -> list:
    pieces = rate_sweep(week, lane, start, end)
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


@given(week=week_data(feasible=True, lane_minimums=True), data=st.data())
def test_sweep_pieces_match_highs_at_every_breakpoint_and_between(week: WeekData, data) -> None:
    lane = data.draw(st.integers(0, week.n_lanes - 1))
    start = data.draw(st.integers(-5, 10))
    check_against_highs(week, lane, start, start + data.draw(st.integers(0, 30)))


def test_sweep_of_a_lane_shared_with_a_limited_alternative() -> None:
    # Two plants, one customer needing 6; the other lane (rate 9) carries at most 4.
    week = WeekData.from_arrays([0, 0, 2], [0, 1], [2, 2], [5, 9], supply=[10, 10, 0], demand=[0, 0, 6],
                                lane_capacity=[-1, 4])
    pieces = check_against_highs(week, 0, 0, 20)
    assert [(p.start, p.end, p.flow) for p in pieces] == [(0, 9, 6), (9, 20, 2)]
    assert np.all(np.diff([p.flow for p in pieces]) < 0)


def test_sweep_refuses_a_backward_range() -> None:
    week = WeekData.from_arrays([0, 2], [0], [1], [5], supply=[5, 0], demand=[0, 3])
    with pytest.raises(PlannerError, match="from a lower rate"):
        rate_sweep(week, 0, 10, 2)
