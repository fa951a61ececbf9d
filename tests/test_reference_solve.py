"""Optimal costs and flows of the functional core against outside references (no database).

References: scipy's ``linprog`` with HiGHS and networkx's ``network_simplex``
on the model written from the input (``tests/reference_model.py``), POT's
``ot.emd2``, published textbook transportation examples, and the monotone
matching on a line.
"""

from __future__ import annotations

import numpy as np
import ot
from hypothesis import assume, given
from hypothesis import strategies as st

from planner.core.certificate import certify
from planner.core.network import assemble_instance
from planner.core.solve import OPTIMAL, exact_dot, solve_flow
from tests.helpers import analyse
from tests.reference_model import optimal_cost, reference_network, solve_lp, solve_networkx
from tests.strategies import balanced_transport, degenerate_week, transport_week, week_data

any_week = st.one_of(degenerate_week(), week_data(feasible=True), week_data())


@given(any_week)
def test_optimal_cost_matches_highs_and_networkx(week):
    inst = assemble_instance(week)
    ours = solve_flow(inst)
    net = reference_network(week)
    lp = solve_lp(net)
    simplex = solve_networkx(net)
    if ours.status != OPTIMAL:
        assert lp.status == "infeasible"  # scipy linprog (HiGHS) agrees the week is infeasible
        assert simplex.status == "infeasible"  # networkx network_simplex agrees
        return
    assert lp.status == OPTIMAL  # scipy linprog (HiGHS)
    assert ours.cost == lp.cost  # scipy linprog (HiGHS) optimal cost
    assert ours.cost == simplex.cost  # networkx network_simplex optimal cost
    # networkx's lane flows, priced at the week's rates, cost what the planner's do.
    lanes = np.array(net.lane[0], dtype=np.int64)
    ours_lanes = ours.flow[inst.lane_arc[0]]
    assert exact_dot(week.lane_cost, simplex.flow[lanes]) + _off_lanes(net, simplex.flow) == ours.cost
    assert exact_dot(inst.cost, ours.flow) == ours.cost
    assert np.all(ours_lanes >= week.lane_min)
    cert = certify(inst, ours.flow, np.zeros(inst.n_nodes, np.int64))
    assert cert.max_conservation_violation == 0 and cert.max_bound_violation == 0
    # Our flow is feasible in the LP without the finite stand-in for "unlimited".
    assert np.all(ours.flow[~inst.unlimited] <= inst.upper[~inst.unlimited])


def _off_lanes(net, flow) -> int:
    """Cost of a reference flow off the lanes: handling, shortage penalties, stock."""
    lanes = set(net.lane[0])
    return sum(int(c) * int(f) for a, (c, f) in enumerate(zip(net.cost, flow)) if a not in lanes)


@given(any_week)
def test_lane_minimums_match_highs(week):
    assume(np.any(week.lane_min > 0))
    inst = assemble_instance(week)
    lp = solve_lp(reference_network(week))
    found = analyse(inst)
    if found is None:
        assert lp.status == "infeasible"  # scipy linprog (HiGHS) agrees the minimums cannot be met
        return
    assert found.cost == lp.cost  # scipy linprog (HiGHS) optimal cost with lower bounds
    assert np.all(found.flow >= inst.lower)
    cert = certify(inst, found.flow, found.ranges.price)
    assert cert.ok and cert.primal_cost == cert.dual_objective == lp.cost  # HiGHS optimum, certified


# Textbook transportation examples. Each known optimum is cross-checked with
# HiGHS in the same test, so a misremembered figure fails loudly.

TEXTBOOK = {
    # W. L. Winston, "Operations Research: Applications and Algorithms", 4th ed.,
    # section 7.1, example 1 (Powerco: 3 power plants, 4 cities), from memory.
    "winston_powerco": (
        [35, 50, 40],
        [45, 20, 30, 30],
        [[8, 6, 10, 9], [9, 12, 13, 7], [14, 9, 16, 5]],
        1020,
    ),
    # F. S. Hillier and G. J. Lieberman, "Introduction to Operations Research",
    # 9th ed., section 9.1, the P&T Company prototype example (3 canneries,
    # 4 warehouses, truckloads), from memory.
    "hillier_lieberman_canneries": (
        [75, 125, 100],
        [80, 65, 70, 85],
        [[464, 513, 654, 867], [352, 416, 690, 791], [995, 682, 388, 685]],
        152_535,
    ),
    # H. A. Taha, "Operations Research: An Introduction", 8th ed., example 5.1-1
    # (MG Auto: 3 plants, 2 distribution centres, cars), from memory.
    "taha_mg_auto": (
        [1000, 1500, 1200],
        [2300, 1400],
        [[80, 215], [100, 108], [102, 68]],
        313_200,
    ),
}


def test_textbook_transportation_examples():
    for name, (supply, demand, cost, known) in TEXTBOOK.items():
        week = transport_week(np.array(supply), np.array(demand), np.array(cost))
        inst = assemble_instance(week)
        sol = solve_flow(inst)
        assert sol.status == OPTIMAL, name
        assert optimal_cost(week) == known, name  # scipy linprog (HiGHS) confirms the book's figure
        assert sol.cost == known, name  # the book's optimal cost (named in TEXTBOOK)


@given(balanced_transport())
def test_pot_emd2_equals_optimal_cost(instance):
    a, b, cost = instance
    sol = solve_flow(assemble_instance(transport_week(a, b, cost)))
    assert sol.status == OPTIMAL
    emd2 = ot.emd2(a.astype(np.float64), b.astype(np.float64), cost.astype(np.float64))
    assert abs(float(emd2) - sol.cost) < 1e-6  # POT ot.emd2 (network simplex on the transport LP)


@given(
    st.integers(1, 8).flatmap(
        lambda n: st.tuples(
            st.lists(st.integers(-40, 40), min_size=n, max_size=n, unique=True),
            st.lists(st.integers(-40, 40), min_size=n, max_size=n, unique=True),
        )
    )
)
def test_points_on_a_line_are_matched_in_sorted_order(points):
    # Common practice, no source: for points on a line and a strictly convex
    # cost of the distance, the optimal plan is the monotone (sorted) matching.
    # Distinct positions on each side make it the unique optimum.
    xs, ys = (np.array(p, np.int64) for p in points)
    n = xs.shape[0]
    cost = (xs[:, None] - ys[None, :]) ** 2
    week = transport_week(np.ones(n, np.int64), np.ones(n, np.int64), cost)
    inst = assemble_instance(week)
    sol = solve_flow(inst)
    assert sol.status == OPTIMAL
    lane_flow = sol.flow[inst.lane_arc[0]].reshape(n, n)
    expected = np.zeros((n, n), np.int64)
    expected[np.argsort(xs), np.argsort(ys)] = 1
    assert np.array_equal(lane_flow, expected)  # monotone matching (common practice, no source)
    assert sol.cost == int(((np.sort(xs) - np.sort(ys)) ** 2).sum())


def test_textbook_week_with_one_unit_less_supply_is_infeasible():
    # The textbook weeks allow no shortage: one unit less supply than demand
    # makes the week infeasible.
    supply, demand, cost, _ = TEXTBOOK["winston_powerco"]
    short_supply = np.array(supply)
    short_supply[0] -= 1
    week = transport_week(short_supply, np.array(demand), np.array(cost))
    inst = assemble_instance(week)
    assert solve_flow(inst).status == "infeasible"
    assert optimal_cost(week) is None  # scipy linprog (HiGHS): infeasible
