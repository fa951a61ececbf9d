"""Database-free tests of :mod:`planner.core.solve`, :mod:`planner.core.residual` and
:mod:`planner.core.certificate` on the hand-built week of ``test_core_network``.

Hand computation of that week's optimum: the customer needs 8. The route
0 -> 3 -> 2 costs 5 + 1 = 6 per unit but lane 3 -> 2 holds 4; the route through
warehouse 1 costs 3 + 2 + 4 = 9 (lane 0 -> 1 holds 7, the throughput 6); a
shortage costs 100. So 4 units go each way: cost 4 x 6 + 4 x 9 = 60, and the
plant keeps 2 units spare. Flow per arc (order of ``test_core_network``):
``[4, 4, 4, 4, 4, 2, 0, 0]``.

Prices (``pi(SPARE) = 0``): the plant sends units to SPARE on an arc strictly
inside its bounds, so ``pi(0) = 0``; along arcs strictly inside their bounds
``pi(1) = 3``, ``pi(4) = 5``, ``pi(2) = 9`` and ``pi(3) = 5``. SHORT may lie
anywhere in ``[-91, 0]``: ``0 - pi(SHORT) >= 0`` on SPARE -> SHORT and
``100 + pi(SHORT) - 9 >= 0`` on the shortage arc.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest

from planner.core.certificate import certify
from planner.core.network import assemble_instance
from planner.core.paths import UNLIMITED
from planner.core.residual import DualError, feasible_potential, label_correcting, residual_graph
from planner.core.solve import INFEASIBLE, OPTIMAL, exact_dot, shifted_supply, solve_flow
from planner.core.week import WeekData
from tests.core.test_core_network import one_week

FLOW = [4, 4, 4, 4, 4, 2, 0, 0]
PRICE = [0, 3, 9, 5, 5, 0, 0]


def test_solve_hand_example():
    inst = assemble_instance(one_week())
    supply_before = inst.supply.copy()
    sol = solve_flow(inst)
    assert sol.status == OPTIMAL
    assert sol.flow.dtype == np.int64 and sol.flow.tolist() == FLOW  # hand computed, see the module docstring
    assert sol.cost == 60 and isinstance(sol.cost, int)
    assert 0.0 <= sol.solver_seconds < 60.0
    assert inst.supply.tolist() == supply_before.tolist()


def test_shifted_supply_moves_each_minimum_from_tail_to_head():
    inst = assemble_instance(one_week())
    # Lane 0 -> 1 commits 1 unit: the plant supplies 1 less, the warehouse 1 more (hand computed).
    assert shifted_supply(inst).tolist() == [9, 1, -8, 0, 0, -2, 0]
    assert inst.supply.tolist() == [10, 0, -8, 0, 0, -2, 0]
    # Two minimums on arcs that share a tail: both are taken off (np.subtract.at, not a plain index).
    w = WeekData.from_arrays([0, 2, 2], [0, 0], [1, 2], [1, 1], supply=[9, 0, 0], demand=[0, 3, 3],
                             lane_min=[2, 3])
    assert shifted_supply(assemble_instance(w)).tolist() == [4, -1, 0, -3, 0]


def test_a_minimum_above_its_capacity_is_infeasible_without_a_solve():
    w = WeekData.from_arrays([0, 2], [0], [1], [1], supply=[5, 0], demand=[0, 5], lane_capacity=[3],
                             lane_min=[4])
    sol = solve_flow(assemble_instance(w))
    assert (sol.status, sol.flow, sol.cost) == (INFEASIBLE, None, 0)
    assert 0.0 <= sol.solver_seconds < 60.0


def test_not_enough_supply_is_infeasible():
    w = WeekData.from_arrays([0, 2], [0], [1], [1], supply=[2, 0], demand=[0, 5])
    sol = solve_flow(assemble_instance(w))
    assert (sol.status, sol.flow, sol.cost) == (INFEASIBLE, None, 0)
    assert 0.0 <= sol.solver_seconds < 60.0


def test_an_instance_without_arcs_is_optimal_at_cost_zero():
    sol = solve_flow(assemble_instance(WeekData.from_arrays([1], [], [], [])))
    assert sol.status == OPTIMAL and sol.cost == 0 and sol.flow.tolist() == []


def test_unbalanced_supplies_are_a_solver_error():
    inst = assemble_instance(one_week())
    broken = dataclasses.replace(inst, supply=inst.supply + np.eye(inst.n_nodes, dtype=np.int64)[0])
    with pytest.raises(RuntimeError, match="stopped with status UNBALANCED"):
        solve_flow(broken)


def test_exact_dot_switches_to_python_integers_past_int64():
    assert exact_dot(np.array([3]), np.array([4])) == 12  # hand computed
    assert exact_dot(np.array([], np.int64), np.array([], np.int64)) == 0
    # 2**62 + 2**62 = 2**63 does not fit int64 (hand computed).
    assert exact_dot(np.array([2**62, 2**62]), np.array([1, 1])) == 2**63
    assert exact_dot([2**62, 1], [1, -1]) == 2**62 - 1
    assert isinstance(exact_dot(np.array([2]), np.array([3])), int)


def test_residual_graph_hand_example():
    inst = assemble_instance(one_week())
    res = residual_graph(inst, np.array(FLOW))
    # Forward: arcs below their bound or unlimited; backward: arcs above their minimum (hand computed).
    assert res.arc.tolist() == [0, 1, 2, 4, 5, 6, 7, 0, 1, 2, 3, 4, 5]
    assert res.forward.tolist() == [True] * 7 + [False] * 6
    assert res.tail.tolist() == [0, 4, 0, 1, 0, 6, 5, 1, 2, 3, 2, 4, 5]
    assert res.head.tolist() == [1, 2, 3, 4, 5, 2, 6, 0, 4, 0, 3, 1, 0]
    assert res.weight.tolist() == [3, 4, 5, 2, 0, 100, 0, -3, -4, -5, -1, -2, 0]
    assert res.capacity.tolist() == [3, UNLIMITED, UNLIMITED, 2, 8, UNLIMITED, UNLIMITED, 3, 4, 4, 4, 4, 2]


def test_feasible_potential_hand_example():
    inst = assemble_instance(one_week())
    res = residual_graph(inst, np.array(FLOW))
    pi = feasible_potential(inst, res)
    assert pi.tolist()[:6] == PRICE[:6]  # hand computed, see the module docstring
    assert -91 <= pi[6] <= 0


def test_feasible_potential_refuses_a_flow_that_is_not_optimal():
    inst = assemble_instance(one_week())
    # All 8 units through the dear warehouse route and none via warehouse 3: a negative cycle remains.
    flow = np.array([8, 8, 0, 0, 8, 2, 0, 0])
    with pytest.raises(DualError, match="negative cycle"):
        feasible_potential(inst, residual_graph(inst, flow))


def test_label_correcting_finds_a_cycle_behind_a_long_path():
    # Path 0 -> 1 -> ... -> 5 of cost -1 each, then the cycle 5 -> 6 -> 7 -> 5 of cost 1 + 1 - 3 = -1.
    tail = np.array([0, 1, 2, 3, 4, 5, 6, 7])
    head = np.array([1, 2, 3, 4, 5, 6, 7, 5])
    weight = np.array([-1, -1, -1, -1, -1, 1, 1, -3])
    found = label_correcting(8, tail, head, weight)
    assert found.cycle is not None
    cycle = found.cycle
    assert sorted(cycle) == [5, 6, 7]  # the three arcs of the cycle, hand computed
    assert all(head[a] == tail[b] for a, b in zip(cycle, cycle[1:] + cycle[:1]))
    # Without the closing arc the labels are the path's prefix sums (hand computed).
    found = label_correcting(8, tail[:7], head[:7], weight[:7])
    assert found.cycle is None and found.labels.tolist() == [0, -1, -2, -3, -4, -5, -4, -3]


def test_label_correcting_on_a_two_node_cycle_and_a_graph_without_arcs():
    found = label_correcting(2, np.array([1, 0]), np.array([0, 1]), np.array([1, -2]))
    assert found.cycle == [1, 0]  # the arc 0 -> 1, then 1 -> 0 back
    empty = label_correcting(3, np.array([], np.int64), np.array([], np.int64), np.array([], np.int64))
    assert empty.cycle is None and empty.labels.tolist() == [0, 0, 0]


def test_certificate_of_the_hand_optimum():
    inst = assemble_instance(one_week())
    cert = certify(inst, np.array(FLOW), np.array(PRICE))
    # Dual objective, hand computed: -(10*0 - 8*9 - 2*0) + 1*max(0, 0) + 4*min(1 + 5 - 9, 0) = 72 - 12 = 60.
    assert (cert.max_conservation_violation, cert.max_bound_violation, cert.min_reduced_cost) == (0, 0, 0)
    assert (cert.primal_cost, cert.dual_objective, cert.gap, cert.ok) == (60, 60, 0, True)


def test_certificate_of_a_price_that_is_not_dual_feasible():
    inst = assemble_instance(one_week())
    price = np.array(PRICE)
    price[2] = 10
    cert = certify(inst, np.array(FLOW), price)
    # Lane 1 now has r = 4 + 5 - 10 = -1 with room; lane 3 r = 1 + 5 - 10 = -4 (at its bound 4); the
    # unlimited lane 1's bound is 22. Dual: 80 + 4 * -4 + 22 * -1 = 42 (hand computed).
    assert cert.min_reduced_cost == -1 and cert.dual_objective == 42 and cert.gap == 18 and not cert.ok


def test_certificate_counts_conservation_and_bound_violations():
    inst = assemble_instance(one_week())
    zero = certify(inst, np.zeros(8, np.int64), np.array(PRICE))
    # No flow: the plant's 10 units stay put; lane 0 -> 1 misses its minimum by 1; every arc has room,
    # the least reduced cost is lane 3 -> 2's 1 + 5 - 9 = -3 (hand computed).
    assert (zero.max_conservation_violation, zero.max_bound_violation, zero.min_reduced_cost) == (10, 1, -3)
    assert (zero.primal_cost, zero.dual_objective, zero.ok) == (0, 60, False)
    over = np.array(FLOW)
    over[3] = 6  # 2 above lane 3 -> 2's capacity; node 3 is short 2 and the customer has 2 too many
    cert = certify(inst, over, np.array(PRICE))
    assert (cert.max_conservation_violation, cert.max_bound_violation) == (2, 2)
    assert cert.primal_cost == 62 and not cert.ok
    # One violation alone fails the certificate.
    assert not certify(inst, np.array([4, 4, 4, 4, 4, 3, 0, 0]), np.array(PRICE)).ok


def test_certificate_without_arcs():
    inst = assemble_instance(WeekData.from_arrays([1], [], [], []))
    cert = certify(inst, np.zeros(0, np.int64), np.zeros(inst.n_nodes, np.int64))
    assert cert.min_reduced_cost is None and cert.ok and cert.gap == 0
