"""Database-free tests of :mod:`planner.core.prices` on hand-computed weeks.

The first week is ``one_week`` of ``test_core_network`` with its hand-computed
optimum (``test_core_solve``'s docstring). Its price ranges, hand computed:
``high(v)`` is the cheapest way to bring one more unit to ``v`` from SPARE,
``low(v)`` minus the cheapest way to take one unit from ``v`` back to SPARE.

* plant 0: spare supply both ways, 0 / 0;
* warehouse 1 (in): 3 / 3 along lane 0 -> 1, used strictly inside its bounds;
* out node 4 and warehouse 3: 5 / 5; customer 2: 9 / 9 (the route through
  warehouse 1 has room both ways; lane 3 -> 2 is full);
* SHORT: high 0 (SPARE -> SHORT is free), low -91 (SHORT -> customer 100,
  then back to SPARE through warehouse 1 at -9).
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from planner.core.network import assemble_instance
from planner.core.paths import UNLIMITED
from planner.core.prices import marginal_path, price_ranges, reduced_costs
from planner.core.residual import DualError, feasible_potential, residual_graph
from planner.core.solve import solve_flow
from planner.core.week import WeekData
from tests.core.test_core_network import one_week

FLOW = [4, 4, 4, 4, 4, 2, 0, 0]


def hand_ranges():
    inst = assemble_instance(one_week())
    res = residual_graph(inst, np.array(FLOW))
    return inst, res, price_ranges(inst, res, feasible_potential(inst, res))


def test_price_ranges_of_the_hand_week():
    inst, res, pr = hand_ranges()
    assert pr.high.tolist() == [0, 3, 9, 5, 5, 0, 0]
    assert pr.low.tolist() == [0, 3, 9, 5, 5, 0, -91]
    assert pr.has_high.all() and pr.has_low.all()
    assert pr.price.tolist() == pr.high.tolist()
    # One more unit at the customer comes from the plant's 2 spare units (lane 0 -> 1 has 3 left, the
    # throughput 2): 2 units at that price. Nothing limits SPARE -> SHORT, and SPARE is the root.
    assert pr.high_units.tolist() == [2, 2, 2, 2, 2, UNLIMITED, UNLIMITED]
    assert pr.pred_high.tolist() == [5, 0, 4, 0, 1, -1, 5]


def test_marginal_route_of_the_hand_week():
    inst, res, pr = hand_ranges()
    # SPARE -> plant (one unit less to SPARE), lane 0 -> 1, throughput 1 -> 4, lane 4 -> 2.
    assert marginal_path(inst, pr, res, 2) == [(5, False), (0, True), (4, True), (1, True)]
    assert marginal_path(inst, pr, res, 6) == [(7, True)]
    assert marginal_path(inst, pr, res, inst.spare) == []


def test_reduced_costs_of_the_hand_prices():
    inst, _, pr = hand_ranges()
    # c + pi(tail) - pi(head), hand computed: lane 3 -> 2 is 1 + 5 - 9 = -3, the shortage 100 + 0 - 9 = 91.
    assert reduced_costs(inst, pr.price).tolist() == [0, 0, 0, -3, 0, 0, 91, 0]


def lift_week():
    """Plant A=0 (5 units) serves customer C1=1 (5) by lane A->C1 (1); plant B=2 (10 units) serves
    customer C2=3 (2) by lane B->C2 (10); warehouse W=4 idle: lanes B->W (4), W->C2 (100), A->W (1)."""
    return WeekData.from_arrays([0, 2, 0, 2, 1], [0, 2, 2, 4, 0], [1, 3, 4, 3, 4], [1, 10, 4, 100, 1],
                                supply=[5, 0, 10, 0, 0], demand=[0, 5, 0, 2, 0])


def test_prices_of_sites_spare_supply_cannot_reach_are_lifted_by_the_least_constant():
    inst = assemble_instance(lift_week())
    flow = solve_flow(inst).flow
    # Hand computed: A ships all 5 to C1, B ships 2 to C2 and keeps 8; nothing else moves.
    assert flow.tolist() == [5, 2, 0, 0, 0, 0, 8]
    res = residual_graph(inst, flow)
    # A feasible potential chosen by hand: A 0, C1 1, B 0, C2 10, W 0, SPARE 0, SHORT 0.
    pr = price_ranges(inst, res, np.array([0, 1, 0, 10, 0, 0, 0]))
    # SPARE reaches B (0), C2 (10) and W (4 via B->W). A, C1 and SHORT lie beyond its reach; the arc
    # A->W needs pi(A) + 1 >= 4, so the least lift is 3: A 3, C1 4, SHORT 3.
    assert pr.has_high.tolist() == [False, False, True, True, True, True, False]
    assert pr.high.tolist() == [0, 0, 0, 10, 4, 0, 0]
    assert pr.price.tolist() == [3, 4, 0, 10, 4, 0, 3]
    # low: A 0 (its spare arc has room), C1 1, B 0, C2 10, W 0 - 90 (W->C2 has reduced cost 90).
    assert pr.has_low.tolist() == [True] * 6 + [False]
    assert pr.low.tolist() == [0, 1, 0, 10, -90, 0, 0]
    # B keeps 8 spare units: the marginal unit at C2 and W holds for 8.
    assert pr.high_units.tolist() == [0, 0, 8, 8, 8, UNLIMITED, 0]
    assert pr.pred_high_arc[[0, 1, 6]].tolist() == [-1, -1, -1]
    assert marginal_path(inst, pr, res, 0) == []
    assert marginal_path(inst, pr, res, 3) == [(6, False), (1, True)]


def test_no_lift_when_the_unreached_sites_already_sit_high_enough():
    inst = assemble_instance(lift_week())
    flow = solve_flow(inst).flow
    res = residual_graph(inst, flow)
    # pi(A) = 5 keeps A->W at 1 + 5 - 4 >= 0 already: lift 0.
    pr = price_ranges(inst, res, np.array([5, 6, 0, 10, 0, 0, 7]))
    assert pr.price.tolist() == [5, 6, 0, 10, 4, 0, 7]


def test_a_potential_that_is_not_dual_feasible_is_refused():
    inst = assemble_instance(lift_week())
    res = residual_graph(inst, solve_flow(inst).flow)
    with pytest.raises(DualError, match="not dual feasible"):
        price_ranges(inst, res, np.array([0, 1, 0, 11, 0, 0, 0]))


def chain_week():
    """Plant 0 -> warehouses 1, 2, 3 -> customer 4, lanes of cost 1, 2, 3, 4; 1 spare unit."""
    return WeekData.from_arrays([0, 1, 1, 1, 2], [0, 1, 2, 3], [1, 2, 3, 4], [1, 2, 3, 4],
                                supply=[3, 0, 0, 0, 0], demand=[0, 0, 0, 0, 2])


def test_marginal_route_along_a_chain_as_long_as_the_graph_allows():
    inst = assemble_instance(chain_week())
    res = residual_graph(inst, solve_flow(inst).flow)
    pr = price_ranges(inst, res, feasible_potential(inst, res))
    assert pr.high.tolist()[:5] == [0, 1, 3, 6, 10]  # prefix sums of the lane costs, hand computed
    # Five steps out of seven nodes: SPARE -> plant, then the four lanes.
    assert marginal_path(inst, pr, res, 4) == [(4, False), (0, True), (1, True), (2, True), (3, True)]


def test_marginal_route_stops_on_a_broken_tree():
    inst = assemble_instance(chain_week())
    res = residual_graph(inst, solve_flow(inst).flow)
    pr = price_ranges(inst, res, feasible_potential(inst, res))
    # A predecessor cycle 3 -> 2 -> 3 never reaches SPARE: the walk gives up after n steps.
    pred = pr.pred_high.copy()
    pred[2] = 3
    broken = dataclasses.replace(pr, pred_high=pred)
    assert len(marginal_path(inst, broken, res, 3)) == inst.n_nodes


def test_price_ranges_are_exact_integer_arrays():
    # Common practice, no source: prices stay exact integers (int64) with boolean masks.
    _, _, pr = hand_ranges()
    for name in ("potential", "high", "low", "high_units", "price", "pred_high", "pred_high_arc"):
        assert getattr(pr, name).dtype == np.int64, name
    assert pr.has_high.dtype == bool and pr.has_low.dtype == bool
