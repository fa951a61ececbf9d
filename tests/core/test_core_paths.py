"""Database-free tests of :mod:`planner.core.paths` and :mod:`planner.core.optimize` on hand-built graphs."""

from __future__ import annotations

import numpy as np
import pytest

import planner.core.optimize as optimize_module
from planner.core.network import assemble_instance
from planner.core.optimize import FAILED, analyse_flow, optimize, shortage_units, spare_units
from planner.core.paths import UNLIMITED, ArcTable, PathError, _check, shortest_paths, tree_minimum
from planner.core.solve import INFEASIBLE, OPTIMAL, UNBOUNDED, FlowSolution
from planner.core.week import NONE, WeekData
from tests.core.test_core_network import one_week

HUGE = 3 * 10**18  # above UNLIMITED // 4 (about 2.3e18)


def hand_table():
    # Input positions:   0        1        2        3        4          5        6           7
    tail = np.array([0, 2, 0, 1, 2, 0, 1, 1])
    head = np.array([1, 0, 1, 2, 0, 1, 0, 0])
    weight = np.array([7, 4, 5, 0, 4, 5, 1, 1])
    capacity = np.array([9, 6, 2, 1, UNLIMITED, 3, HUGE, HUGE])
    return ArcTable.merge(3, tail, head, weight, capacity)


def test_merge_keeps_the_least_length_and_sums_the_tied_capacities():
    t = hand_table()
    # Pairs in order 0->1, 1->0, 1->2, 2->0. 0->1: lengths 7, 5, 5 -> 5 with 2 + 3 from positions 2, 5.
    # 1->0: two tied arcs of 3e18 -> no finite sum: unlimited. 2->0: a tied unlimited arc -> unlimited.
    assert (t.n, t.tail.tolist(), t.head.tolist()) == (3, [0, 1, 1, 2], [1, 0, 2, 0])
    assert t.weight.tolist() == [5, 1, 0, 4]
    assert t.capacity.tolist() == [5, UNLIMITED, 1, UNLIMITED]
    assert t.arc.tolist() == [2, 6, 3, 1]
    assert t.indptr.tolist() == [0, 1, 3, 4]
    assert t.position([2, 0, 1], [0, 1, 2]).tolist() == [3, 0, 2]
    csr = t.csr()
    assert csr.shape == (3, 3) and csr.toarray().tolist() == [[0, 5, 0], [1, 0, 0], [4, 0, 0]]
    assert csr.nnz == 4  # the zero length 1 -> 2 stays an explicit entry


def test_merge_of_no_arcs_and_of_large_finite_capacities():
    empty = ArcTable.merge(2, [], [], [], [])
    assert empty.tail.tolist() == [] and empty.indptr.tolist() == [0, 0, 0]
    # 10**18 + 10**18 = 2e18 is below UNLIMITED // 4 (about 2.3e18): the sum stays finite; 3e18 is not.
    t = ArcTable.merge(2, [0, 0], [1, 1], [3, 3], [10**18, 10**18])
    assert t.capacity.tolist() == [2 * 10**18]
    t = ArcTable.merge(2, [0, 0, 0], [1, 1, 1], [3, 3, 3], [10**18, 10**18, 10**18])
    assert t.capacity.tolist() == [UNLIMITED]


def test_shortest_paths_from_two_sources_with_and_without_a_limit():
    t = hand_table()
    found = shortest_paths(t, [0, 2])
    # From 0: 0->1 (5), 1->2 (0); from 2: 2->0 (4), then 0->1 (9), 1->2 ... hand computed.
    assert found.dist.tolist() == [[0, 5, 5], [4, 9, 0]]
    assert found.reached.all()
    assert found.pred.tolist() == [[-1, 0, 1], [2, 0, -1]]
    assert found.pred_arc.tolist() == [[-1, 0, 2], [3, 0, -1]]
    limited = shortest_paths(t, [0], limit=4)
    assert limited.reached.tolist() == [[True, False, False]]
    assert limited.dist.tolist() == [[0, 0, 0]] and limited.pred.tolist() == [[-1, -1, -1]]
    assert limited.pred_arc.tolist() == [[-1, -1, -1]]
    exact = shortest_paths(t, 1, limit=5)  # 1 -> 0 is 1, 1 -> 2 is 0: all within 5
    assert exact.dist.tolist() == [[1, 0, 0]]
    none = shortest_paths(t, [])
    assert none.dist.shape == (0, 3) and none.reached.dtype == bool


def test_the_exact_check_refuses_wrong_distances():
    t = hand_table()
    found = shortest_paths(t, [0])
    dist, reached, pred = found.dist.copy(), found.reached.copy(), found.pred.copy()
    assert _check(t, dist, reached, pred, None).tolist() == [[-1, 0, 2]]
    with pytest.raises(PathError, match="not minimal"):
        _check(t, np.array([[0, 6, 6]]), reached, pred, None)
    with pytest.raises(PathError, match="not tight"):
        _check(t, np.array([[0, 4, 4]]), reached, pred, None)
    with pytest.raises(PathError, match="leaves the reached set"):
        _check(t, dist, np.array([[True, True, False]]), np.array([[-1, 0, -1]]), None)
    # With a limit of 5, node 2 at distance 5 is within reach and may not be left out.
    with pytest.raises(PathError, match="within the limit"):
        _check(t, dist, np.array([[True, True, False]]), np.array([[-1, 0, -1]]), 5)
    # With a limit of 4, node 1 (at 5) and node 2 may be left out.
    _check(t, np.array([[0, 0, 0]]), np.array([[True, False, False]]), np.array([[-1, -1, -1]]), 4)


def test_tree_minimum_over_a_deep_chain_and_two_roots():
    # Chain 0 <- 1 <- 2 <- 3 <- 4 and a second root 5 with child 6 (hand computed minima).
    parent = np.array([-1, 0, 1, 2, 3, -1, 5])
    value = np.array([1, 8, 6, 9, 2, 0, 4])
    assert tree_minimum(parent, value).tolist() == [UNLIMITED, 8, 6, 6, 2, UNLIMITED, 4]


def test_optimize_hand_week():
    out = optimize(assemble_instance(one_week()))
    # See test_core_solve and test_core_limits for the hand computation.
    assert out.ok and out.status == OPTIMAL and out.message == ""
    assert out.flow.tolist() == [4, 4, 4, 4, 4, 2, 0, 0]
    assert out.ranges.price.tolist() == [0, 3, 9, 5, 5, 0, 0]
    assert out.reduced.tolist() == [0, 0, 0, -3, 0, 0, 91, 0]
    assert out.capacity_value.tolist() == [0, 0, 0, 3, 0, 0, 0, 0]
    assert out.limits.arc.tolist() == [3] and out.certificate.ok and out.certificate.primal_cost == 60
    assert out.residual.arc.shape[0] == 13
    assert set(out.timings) == {"potential", "ranges", "limits", "certificate"}
    assert all(0.0 <= v < 60.0 for v in out.timings.values())
    assert 0.0 <= out.dual_seconds < 60.0 and 0.0 <= out.solver_seconds < 60.0
    assert out.dual_seconds >= max(out.timings.values())


def test_optimize_bad_weeks():
    short = WeekData.from_arrays([0, 2], [0], [1], [5], supply=[2, 0], demand=[0, 5])
    out = optimize(assemble_instance(short), site_codes=["P1", "C1"], period_codes=["2026-W02"])
    assert out.status == INFEASIBLE and not out.ok and out.flow is None
    assert out.message.startswith("week 2026-W02 is infeasible: 3 units of demand cannot be served.")
    assert "C1 (3)" in out.message
    cycle = WeekData.from_arrays([1, 1], [0, 1], [1, 0], [-20000, 5000])
    out = optimize(assemble_instance(cycle), lane_labels=["A", "B"])
    assert out.status == UNBOUNDED
    assert out.message.startswith("unbounded: the lanes A, B form a cycle of cost -1.50 per unit")
    huge = WeekData.from_arrays([0, 2], [0], [1], [2**62], supply=[2, 0], demand=[0, 2])
    out = optimize(assemble_instance(huge))
    assert out.status == FAILED and "overflow 64-bit integers" in out.message


def test_solver_time_and_lane_names_are_passed_on(monkeypatch):
    short = WeekData.from_arrays([0, 2], [0], [1], [5], supply=[9, 0], demand=[0, 5], lane_capacity=[4])
    inst = assemble_instance(short)
    infeasible = FlowSolution(INFEASIBLE, None, 0, 0.75)
    monkeypatch.setattr(optimize_module, "solve_flow", lambda _: infeasible)
    out = optimize(inst, site_codes=["P", "C"], lane_labels=["P->C road"], period_codes=["2026-W02"])
    assert out.status == INFEASIBLE and out.solver_seconds == 0.75
    assert "Limiting lanes (at capacity): P->C road (cap 4)." in out.message
    hand = assemble_instance(one_week())
    optimal = FlowSolution(OPTIMAL, np.array([4, 4, 4, 4, 4, 2, 0, 0]), 60, 0.5)
    monkeypatch.setattr(optimize_module, "solve_flow", lambda _: optimal)
    out = optimize(hand)
    assert out.ok and out.solver_seconds == 0.5
    assert analyse_flow(hand, optimal.flow).solver_seconds == 0.0


def test_a_flow_that_is_not_optimal_fails(monkeypatch):
    inst = assemble_instance(one_week())
    # All 8 units through warehouse 1: feasible, but a negative residual cycle is left.
    dear = np.array([8, 8, 0, 0, 8, 2, 0, 0])
    monkeypatch.setattr(optimize_module, "solve_flow", lambda _: FlowSolution(OPTIMAL, dear, 84, 0.5))
    out = optimize(inst)
    assert out.status == FAILED and out.solver_seconds == 0.5
    assert out.message.startswith("the solver's flow could not be proved optimal: the residual graph has a")


def test_a_warm_flow_that_does_not_prove_itself_is_solved_again_cold(monkeypatch):
    # The same dear flow, now claimed optimal by the warm engine: it is not kept;
    # OR-Tools solves the week cold and the outcome says so (cost 60 is the hand optimum above).
    from planner.core.engines import COLD, WARM, state_of

    inst = assemble_instance(one_week())
    dear = np.array([8, 8, 0, 0, 8, 2, 0, 0])
    monkeypatch.setattr(optimize_module, "solve_with", lambda _inst, _state: (FlowSolution(OPTIMAL, dear, 84, 0.5), WARM))
    out = optimize(inst, warm=state_of(inst, np.array([4, 4, 4, 4, 4, 2, 0, 0])))
    assert out.ok and out.engine == COLD
    assert int(inst.cost @ out.flow) == 60


def test_a_flow_that_breaks_conservation_fails_its_certificate():
    inst = assemble_instance(one_week())
    out = analyse_flow(inst, np.zeros(8, np.int64), solver_seconds=0.25)
    # No flow at all: the plant's 10 units stay put (conservation 10), lane 0 -> 1 misses its minimum by 1.
    assert out.status == FAILED and not out.ok and out.solver_seconds == 0.25
    assert out.message.startswith("optimality certificate failed: conservation 10, bounds 1, min reduced cost ")
    assert out.message.endswith(" (scaled integers)") and "primal 0, dual " in out.message


def test_shortage_and_spare_units():
    inst = assemble_instance(one_week())
    flow = np.array([4, 4, 4, 4, 4, 2, 0, 0])
    assert (shortage_units(inst, flow), spare_units(inst, flow)) == (0, 2)
    # Supply 3, demand 5 with a penalty: 2 short, nothing spare (hand computed).
    w = WeekData.from_arrays([0, 2], [0], [1], [5], supply=[3, 0], demand=[0, 5], shortage_penalty=[NONE, 50])
    inst = assemble_instance(w)
    out = optimize(inst)
    assert (shortage_units(inst, out.flow), spare_units(inst, out.flow)) == (2, 0)
