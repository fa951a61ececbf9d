"""The warm engine against OR-Tools cold and scipy's HiGHS, on random weeks and random edits.

A week is solved cold, edited (rates, lane capacities, lane minimums, plant
supplies, customer demands; the arc layout stays), and solved again warm from
the first week's optimum. Every answer is checked against outside sources
named beside each check. Database-free.
"""

from __future__ import annotations

import dataclasses
import math

import numpy as np
import pytest
from hypothesis import assume, given
from hypothesis import strategies as st

from planner.core import engines
from planner.core.certificate import certify
from planner.core.engines import (
    COLD,
    FALLBACK,
    WARM,
    LayoutError,
    compiled_kernel,
    cut_proves_infeasible,
    same_layout,
    solve_warm,
    solve_with,
    state_of,
)
from planner.core.network import assemble_instance
from planner.core.optimize import optimize
from planner.core.residual import feasible_potential, residual_graph
from planner.core.solve import INFEASIBLE, OPTIMAL, solve_flow
from planner.core.week import NONE, SiteKind, WeekData
from tests.reference_model import optimal_cost
from tests.strategies import degenerate_week, replace_week, week_data

needs_kernel = pytest.mark.skipif(compiled_kernel() is None, reason="the compiled warm kernel is not built")
ENGINES = ["numpy", pytest.param("compiled", marks=needs_kernel)]


@st.composite
def edited(draw, week: WeekData) -> WeekData:
    """``week`` with a few figures changed, its arc layout kept.

    Plants keep a positive supply (a plant without one has no arc to SPARE),
    rates that were not negative stay so (no negative cycle through warehouses).
    """
    cost, capacity, minimum = week.lane_cost.copy(), week.lane_capacity.copy(), week.lane_min.copy()
    lanes = st.integers(0, week.n_lanes - 1)
    for lane in draw(st.lists(lanes, max_size=4)):
        changed = draw(st.sampled_from(["rate", "capacity", "minimum"]))
        if changed == "rate":
            rate = int(cost[lane]) + draw(st.integers(-3, 3))
            cost[lane] = rate if cost[lane] < 0 else max(rate, 0)
        elif changed == "capacity":
            capacity[lane] = draw(st.one_of(st.just(NONE), st.integers(0, 15)))
        else:
            minimum[lane] = draw(st.integers(0, 4))
    supply, demand = week.supply.copy(), week.demand.copy()
    sites = st.integers(0, week.n_sites - 1)
    for site in draw(st.lists(sites, max_size=3)):
        if supply[site] > 0:
            supply[site] = draw(st.integers(1, 20))
        elif week.site_kind[site] == SiteKind.CUSTOMER:
            demand[site] = draw(st.integers(0, 12))
    return replace_week(week, lane_cost=cost, lane_capacity=capacity, lane_min=minimum, supply=supply, demand=demand)


@st.composite
def week_and_edit(draw):
    """A solved week, its warm state (from a feasible potential or from the run's prices) and an edit of it."""
    week = draw(st.one_of(degenerate_week(), week_data(feasible=True), week_data()))
    inst = assemble_instance(week)
    outcome = optimize(inst)
    assume(outcome.status == OPTIMAL)
    if draw(st.booleans()):
        state = state_of(inst, outcome.flow)
    else:
        state = state_of(inst, outcome.flow, outcome.ranges.price)
    return week, state, draw(edited(week))


@pytest.mark.parametrize("engine", ENGINES)
@given(case=week_and_edit())
def test_warm_solve_after_an_edit_is_optimal(engine, case) -> None:
    week, state, new_week = case
    inst = assemble_instance(new_week)
    assert same_layout(inst, state)
    reference = optimal_cost(new_week)  # scipy linprog (HiGHS) on the model written from the input
    assume(reference != -math.inf)
    warm = solve_warm(inst, state, engine=engine)
    cold = solve_flow(inst)
    if reference is None:
        assert warm.status == INFEASIBLE  # HiGHS: no plan
        assert cold.status == INFEASIBLE
        return
    assert warm.status == OPTIMAL
    assert warm.cost == reference  # scipy linprog (HiGHS)
    assert warm.cost == cold.cost  # OR-Tools, cold
    # The certificate (primal and dual feasibility, zero gap), with the engine's
    # potential and with one computed apart from the flow alone (common practice, no source).
    assert certify(inst, warm.flow, warm.potential).ok
    assert certify(inst, warm.flow, feasible_potential(inst, residual_graph(inst, warm.flow))).ok


@needs_kernel
@given(case=week_and_edit())
def test_compiled_and_reference_paths_agree(case) -> None:
    _, state, new_week = case
    inst = assemble_instance(new_week)
    kernel = compiled_kernel()
    # Step 1 (the forest and its potentials) is the same walk in both paths: equal to the last figure.
    compiled = engines._forest(kernel, inst, state, state.incidence)
    reference = engines._forest(None, inst, state, state.incidence)
    for a, b in zip(compiled, reference):
        np.testing.assert_array_equal(a, b)
    # The routing may break ties differently; the optimum is unique in cost (common practice, no source).
    fast, slow = solve_warm(inst, state, engine="compiled"), solve_warm(inst, state, engine="numpy")
    assert (fast.status, fast.cost) == (slow.status, slow.cost)


@given(case=week_and_edit(), seed=st.integers(0, 2**32 - 1))
def test_any_potential_gives_the_optimum(case, seed) -> None:
    """A state whose potential proves nothing still leads to the optimum, only with more searches."""
    _, state, new_week = case
    inst = assemble_instance(new_week)
    noise = np.random.default_rng(seed).integers(-50, 50, inst.n_nodes)
    state = dataclasses.replace(state, potential=noise)
    reference = optimal_cost(new_week)  # scipy linprog (HiGHS)
    assume(reference is not None and reference != -math.inf)
    warm = solve_warm(inst, state)
    assert (warm.status, warm.cost) == (OPTIMAL, reference)
    assert certify(inst, warm.flow, warm.potential).ok


def small_week(demand: int = 3, capacity: int = NONE, rate: int = 7, supply: int = 5) -> WeekData:
    """One plant, one customer, one lane (a figure by hand, common practice, no source)."""
    return WeekData.from_arrays([SiteKind.PLANT, SiteKind.CUSTOMER], [0], [1], [rate], supply=[supply, 0],
                                demand=[0, demand], lane_capacity=[capacity])


def test_an_infeasible_edit_is_reported_infeasible_with_a_cut() -> None:
    first = assemble_instance(small_week())
    state = state_of(first, solve_flow(first).flow)
    tight = small_week(demand=4, capacity=2)
    inst = assemble_instance(tight)
    assert optimal_cost(tight) is None  # scipy linprog (HiGHS): no plan
    assert solve_warm(inst, state).status == INFEASIBLE
    routed = engines._route(inst, state, "auto")
    assert routed.reached is not None and cut_proves_infeasible(inst, routed.reached)
    solution, engine = solve_with(inst, state)
    assert (solution.status, engine) == (INFEASIBLE, WARM)


def test_a_minimum_above_its_capacity_is_infeasible() -> None:
    first = assemble_instance(small_week())
    state = state_of(first, solve_flow(first).flow)
    week = replace_week(small_week(capacity=2), lane_min=[3])
    assert optimal_cost(week) is None  # scipy linprog (HiGHS): no plan
    assert solve_warm(assemble_instance(week), state).status == INFEASIBLE


def test_solve_with_names_the_engine_and_falls_back(monkeypatch) -> None:
    first = assemble_instance(small_week())
    cold, engine = solve_with(first)
    assert engine == COLD
    state = state_of(first, cold.flow)
    dearer = small_week(demand=4, rate=9)
    warm, engine = solve_with(assemble_instance(dearer), state)
    assert (engine, warm.cost) == (WARM, optimal_cost(dearer))  # scipy linprog (HiGHS)
    # Another layout (the plant has no supply, so no arc to SPARE): cold.
    other = assemble_instance(small_week(demand=0, supply=0))
    assert not same_layout(other, state)
    assert solve_with(other, state)[1] == COLD
    with pytest.raises(LayoutError):
        solve_warm(other, state)


def two_plants(demand: int) -> WeekData:
    """A cheap plant with 3 units and a dear one with 5 serve one customer (by hand, no source)."""
    return WeekData.from_arrays([SiteKind.PLANT, SiteKind.PLANT, SiteKind.CUSTOMER], [0, 1], [2, 2], [2, 5],
                                supply=[3, 5, 0], demand=[0, 0, demand])


def test_over_its_budget_the_warm_attempt_gives_way(monkeypatch) -> None:
    first = assemble_instance(two_plants(3))
    state = state_of(first, solve_flow(first).flow)
    more = two_plants(5)  # the dear plant must start shipping: a search is needed
    assert engines._route(assemble_instance(more), state, "auto").searches > 0
    assert solve_with(assemble_instance(more), state)[1] == WARM
    monkeypatch.setattr(engines, "BUDGET_PER_NODE", 0)
    solution, engine = solve_with(assemble_instance(more), state)
    assert (engine, solution.cost) == (FALLBACK, optimal_cost(more))  # scipy linprog (HiGHS)
    assert optimal_cost(more) == 3 * 2 + 2 * 5  # by hand


def test_a_warm_answer_that_does_not_prove_itself_is_solved_cold(monkeypatch) -> None:
    first = assemble_instance(small_week())
    state = state_of(first, solve_flow(first).flow)
    inst = assemble_instance(small_week(demand=4))
    wrong = engines._Routed(OPTIMAL, np.array([3, 2]), np.zeros(inst.n_nodes, np.int64))  # one unit short of 4
    monkeypatch.setattr(engines, "_route", lambda *args: wrong)
    solution, engine = solve_with(inst, state)
    assert engine == FALLBACK
    assert solution.cost == optimal_cost(small_week(demand=4))  # scipy linprog (HiGHS)


def test_the_same_week_needs_no_search() -> None:
    week = small_week()
    inst = assemble_instance(week)
    state = state_of(inst, solve_flow(inst).flow)
    routed = engines._route(inst, state, "auto")
    assert (routed.status, routed.searches) == (OPTIMAL, 0)
    assert int(inst.cost @ routed.flow) == optimal_cost(week)  # scipy linprog (HiGHS)
