"""Site prices, their exact ranges and the certificate against outside references (no database).

Sign convention of the planner: ``r = c + pi(tail) - pi(head) >= 0`` on
residual arcs, ``pi(SPARE) = 0``; ``price_high(v)`` and ``price_low(v)`` are
the right and left derivatives of the optimal cost in the units needed at
``v`` (R. K. Ahuja, T. L. Magnanti and J. B. Orlin, "Network Flows", Prentice
Hall, 1993, the sensitivity analysis section of the minimum cost flow
chapters, from memory).
"""

from __future__ import annotations

import numpy as np
import ot
from hypothesis import assume, given
from hypothesis import strategies as st

from planner.core.certificate import certify
from planner.core.network import ArcKind, assemble_instance
from planner.core.optimize import optimize
from planner.core.solve import OPTIMAL
from planner.core.week import NONE, SiteKind, WeekData
from tests.helpers import (
    analyse,
    certified_dual_objective,
    lagrangian_bound,
    reference_node,
    throughput_arc_of,
)
from tests.reference_model import TOLERANCE, optimal_cost, reference_network, solve_lp
from tests.strategies import (
    balanced_transport,
    degenerate_week,
    replace_week,
    transport_week,
    tree_week,
    week_data,
)

any_week = st.one_of(degenerate_week(), week_data(feasible=True), week_data())
FLOAT_TOLERANCE = TOLERANCE


def optimal(week: WeekData):
    found = analyse(assemble_instance(week))
    assume(found is not None)
    return found


def reference_potential(week: WeekData, inst) -> np.ndarray:
    """scipy HiGHS's dual on the model from the input, read at the planner's nodes (SPARE at 0)."""
    net = reference_network(week)
    lp = solve_lp(net)
    assert lp.status == OPTIMAL
    return lp.potential[[reference_node(net, inst, v) for v in range(inst.n_nodes)]]


def cost_with_extra_need(week: WeekData, inst, node: int, units: int) -> int | None:
    """Optimal cost by scipy HiGHS with ``units`` more needed at the planner's ``node``; None when infeasible."""
    net = reference_network(week)
    lp = solve_lp(net.with_need(reference_node(net, inst, node), units))
    return lp.cost if lp.status == OPTIMAL else None


# ---------------------------------------------------------------- HiGHS duals lie in [low, high]


@given(any_week)
def test_highs_duals_lie_inside_price_ranges(week):
    found = optimal(week)
    ranges = found.ranges
    assert optimal_cost(week) == found.cost  # scipy linprog (HiGHS) optimal cost
    pi = reference_potential(week, found.inst)  # HiGHS eqlin.marginals, negated, SPARE = 0
    tol = FLOAT_TOLERANCE * (1 + np.abs(pi))
    high_ok = ~ranges.has_high | (pi <= ranges.high + tol)
    low_ok = ~ranges.has_low | (pi >= ranges.low - tol)
    assert np.all(high_ok), (pi, ranges.high)  # scipy HiGHS dual <= price_high where finite
    assert np.all(low_ok), (pi, ranges.low)  # scipy HiGHS dual >= price_low where finite
    assert np.all(~(ranges.has_high & ranges.has_low) | (ranges.low <= ranges.high))


# ---------------------------------------------------------------- POT potentials


@given(balanced_transport())
def test_pot_potentials_lie_inside_price_ranges(instance):
    a, b, cost = instance
    n_p = cost.shape[0]
    inst = assemble_instance(transport_week(a, b, cost))
    found = analyse(inst)
    assert found is not None
    ranges = found.ranges
    plant_nodes = inst.site_node[0, :n_p]
    customer_nodes = inst.site_node[0, n_p:]
    sites = np.concatenate([plant_nodes, customer_nodes])

    plan, log = ot.emd(a.astype(np.float64), b.astype(np.float64), cost.astype(np.float64), log=True)
    assert log["warning"] is None
    assert abs(float(log["cost"]) - found.cost) < 1e-6  # POT ot.emd optimal cost
    u, v = np.asarray(log["u"]), np.asarray(log["v"])
    # POT's dual: max a.u + b.v s.t. u_i + v_j <= M_ij. Ours: M_ij + pi_i - pi_j >= 0,
    # so pi_plant = -u + k, pi_customer = v + k for a constant k. All supply is
    # used, so SPARE's only residual arcs are plant -> SPARE (cost 0, unused
    # capacity), which ask pi_plant >= pi(SPARE) = 0: SPARE = 0 fixes k only
    # from below; take the least k, max(u).
    k = u.max()
    pi_plant, pi_customer = -u + k, v + k
    pot = np.concatenate([pi_plant, pi_customer])
    assert np.all(~ranges.has_high[sites])  # no spare supply: one more unit cannot be had
    assert np.all(ranges.has_low[sites])
    assert np.all(pot >= ranges.low[sites] - 1e-6)  # POT ot.emd potentials >= price_low

    # Our low vector read back as a POT dual is feasible and optimal for POT's LP.
    u_ours, v_ours = -ranges.low[plant_nodes], ranges.low[customer_nodes]
    assert np.all(u_ours[:, None] + v_ours[None, :] <= cost)  # POT dual constraint u_i + v_j <= M_ij
    assert int(a @ u_ours + b @ v_ours) == found.cost  # equals ot.emd's optimal cost
    # And POT's plan, priced by us, is optimal.
    assert abs(float((plan * cost).sum()) - found.cost) < 1e-6


# ---------------------------------------------------------------- weak duality


@given(any_week, st.data())
def test_weak_duality_for_any_potential(week, data):
    found = optimal(week)
    inst = found.inst
    n = inst.n_nodes
    arbitrary = np.array(data.draw(st.lists(st.integers(-60, 60), min_size=n, max_size=n)), np.int64)
    noise = np.array(data.draw(st.lists(st.integers(-2, 2), min_size=n, max_size=n)), np.int64)
    weight = data.draw(st.sampled_from([0.0, 0.25, 0.5, 1.0]))
    mixed = np.floor(weight * found.ranges.price + (1 - weight) * arbitrary).astype(np.int64)
    for pi in (arbitrary, found.ranges.price + noise, mixed):
        bound = certified_dual_objective(inst, found.flow, pi)
        assert bound == lagrangian_bound(inst, pi)  # Lagrangian dual, recomputed on Python ints
        assert bound <= found.cost  # weak duality (Lagrangian relaxation of conservation)


# ---------------------------------------------------------------- unique dual


def test_non_degenerate_hand_example_has_one_price_per_site():
    # Hand computed. Plants P1 (supply 10), P2 (supply 6); warehouse W with
    # handling 2 and throughput capacity 9; customers C1 (4), C2 (3), C3 (2).
    # Tree: P1 -> W (3), W -> C1 (1), W -> C2 (4), P2 -> C3 (5); idle lane
    # P2 -> C1 (20). Flows 7, 4, 3, 2; throughput 7 < 9; P1 spares 3, P2 spares 4.
    # Prices: P1 = P2 = 0, W in = 3, W out = 5, C1 = 6, C2 = 9, C3 = 5.
    P1, P2, W, C1, C2, C3 = range(6)
    week = WeekData.from_arrays(
        [SiteKind.PLANT, SiteKind.PLANT, SiteKind.WAREHOUSE, SiteKind.CUSTOMER, SiteKind.CUSTOMER, SiteKind.CUSTOMER],
        [P1, W, W, P2, P2],
        [W, C1, C2, C3, C1],
        [3, 1, 4, 5, 20],
        supply=[10, 6, 0, 0, 0, 0],
        demand=[0, 0, 0, 4, 3, 2],
        throughput_capacity=[NONE, NONE, 9, NONE, NONE, NONE],
        handling_cost=[0, 0, 2, 0, 0, 0],
    )
    inst = assemble_instance(week)
    found = analyse(inst)
    ranges = found.ranges
    expected = {inst.site_node[0, P1]: 0, inst.site_node[0, P2]: 0, inst.site_node[0, W]: 3,
                inst.site_out_node[0, W]: 5, inst.site_node[0, C1]: 6, inst.site_node[0, C2]: 9,
                inst.site_node[0, C3]: 5, inst.spare: 0}
    nodes = np.array(list(expected))
    assert found.cost == 7 * 3 + 4 * 1 + 3 * 4 + 2 * 5 + 7 * 2  # hand computed
    assert ranges.high[nodes].tolist() == list(expected.values())  # hand computed
    assert ranges.low[nodes].tolist() == list(expected.values())  # hand computed
    assert np.allclose(reference_potential(week, inst)[nodes], list(expected.values()))  # scipy HiGHS dual
    assert not ranges.has_high[inst.short] and not ranges.has_low[inst.short]  # SHORT unused, no arcs


@given(tree_week())
def test_non_degenerate_tree_has_low_equal_high(tree):
    inst = assemble_instance(tree.week)
    found = analyse(inst)
    assert found is not None
    ranges = found.ranges
    nodes = np.concatenate([inst.site_node[0], inst.site_out_node[0], [inst.spare]])
    expected = np.concatenate([tree.price_in, tree.price_out, [0]])
    assert np.all(ranges.has_high[nodes] & ranges.has_low[nodes])
    assert np.array_equal(ranges.low[nodes], ranges.high[nodes])  # unique dual: low == high
    assert np.array_equal(ranges.high[nodes], expected)  # hand rule: parent's price + lane (+ handling)
    potential = reference_potential(tree.week, inst)
    assert np.allclose(potential[nodes], expected, atol=1e-6)  # scipy HiGHS dual, the only one


# ---------------------------------------------------------------- the certificate


@given(any_week, st.data())
def test_certificate_holds_and_fails_when_perturbed(week, data):
    found = optimal(week)
    inst, flow, ranges = found.inst, found.flow, found.ranges
    cert = certify(inst, flow, ranges.price)
    assert cert.ok
    assert cert.primal_cost == cert.dual_objective == found.cost  # strong duality, exact
    assert cert.primal_cost == optimal_cost(week)  # scipy linprog (HiGHS)
    shifted = certify(inst, flow, ranges.price + data.draw(st.integers(-50, 50)))
    assert shifted.ok  # potentials are fixed only up to a constant
    # Both extreme vectors are optimal duals where they are finite everywhere.
    for vector, finite in ((ranges.high, ranges.has_high), (ranges.low, ranges.has_low)):
        if finite.all():
            assert certify(inst, flow, vector).ok

    # One unit moved along one lane breaks conservation at both of its ends.
    lanes = inst.lane_arc[0]
    if lanes.shape[0]:
        arc = int(data.draw(st.sampled_from(lanes.tolist())))
        moved = flow.copy()
        moved[arc] += 1 if (inst.unlimited[arc] or flow[arc] < inst.upper[arc]) else -1
        bad = certify(inst, moved, ranges.price)
        assert not bad.ok and bad.max_conservation_violation == 1

    # A price raised at the head of one residual arc makes its reduced cost -1.
    res = found.residual
    if res.tail.shape[0]:
        i = data.draw(st.integers(0, res.tail.shape[0] - 1))
        reduced = res.weight[i] + ranges.price[res.tail[i]] - ranges.price[res.head[i]]
        assert reduced >= 0
        priced = ranges.price.copy()
        priced[res.head[i]] += reduced + 1
        bad = certify(inst, flow, priced)
        assert not bad.ok and bad.min_reduced_cost <= -1


def test_certificate_fails_for_a_feasible_but_dearer_flow():
    # Hand computed: one plant, one customer needing 4, two modes at 3 and 5.
    # Moving one unit to the dear mode keeps the flow feasible but costs 2 more.
    week = WeekData.from_arrays([SiteKind.PLANT, SiteKind.CUSTOMER], [0, 0], [1, 1], [3, 5],
                                supply=[4, 0], demand=[0, 4])
    inst = assemble_instance(week)
    found = analyse(inst)
    cheap, dear = inst.lane_arc[0]
    worse = found.flow.copy()
    worse[cheap] -= 1
    worse[dear] += 1
    cert = certify(inst, worse, found.ranges.price)
    assert cert.max_conservation_violation == 0 and cert.max_bound_violation == 0
    assert cert.gap == 2 and not cert.ok  # hand computed
    assert cert.min_reduced_cost == -2  # the dear mode is in use at reduced cost 2


# ---------------------------------------------------------------- prices as derivatives


@given(any_week)
def test_price_range_is_the_derivative_of_the_optimal_cost(week):
    found = optimal(week)
    inst, ranges = found.inst, found.ranges
    for node in range(inst.n_nodes):
        if node == inst.spare:
            continue
        more = cost_with_extra_need(week, inst, node, 1)
        if ranges.has_high[node]:
            # Right derivative (Ahuja, Magnanti & Orlin 1993, from memory); re-solved by scipy HiGHS.
            assert more is not None and more - found.cost == ranges.high[node]
            assert ranges.high_units[node] >= 1  # a reachable node has a path with room for a unit
            k = int(min(ranges.high_units[node], 4))
            if k > 1:
                many = cost_with_extra_need(week, inst, node, k)
                assert many - found.cost == k * ranges.high[node]  # linear for high_units units (HiGHS)
        else:
            assert more is None  # scipy HiGHS: one more unit cannot be had at any cost
        less = cost_with_extra_need(week, inst, node, -1)
        if ranges.has_low[node]:
            assert less is not None and found.cost - less == ranges.low[node]  # left derivative (HiGHS)
        else:
            assert less is None  # scipy HiGHS: one unit less cannot be placed


def test_high_units_with_many_tied_modes_on_one_pair():
    # Hand computed: a plant with 10 units serves a customer needing 3 over six
    # unlimited modes at the same cost 3; 7 more units cost 3 each, the 8th
    # cannot be had.
    modes = 6
    week = WeekData.from_arrays([SiteKind.PLANT, SiteKind.CUSTOMER], [0] * modes, [1] * modes, [3] * modes,
                                supply=[10, 0], demand=[0, 3])
    inst = assemble_instance(week)
    found = analyse(inst)
    customer = inst.site_node[0, 1]
    assert found.ranges.high[customer] == 3 and found.ranges.high_units[customer] == 7  # hand computed
    assert cost_with_extra_need(week, inst, customer, 7) == found.cost + 7 * 3  # scipy HiGHS re-solve
    assert cost_with_extra_need(week, inst, customer, 8) is None  # scipy HiGHS: infeasible


@given(any_week)
def test_customer_price_is_the_cost_of_one_more_unit_of_demand(week):
    found = optimal(week)
    inst, ranges = found.inst, found.ranges
    for site in np.flatnonzero(week.site_kind == SiteKind.CUSTOMER):
        node = inst.site_node[0, site]
        demand = week.demand.copy()
        demand[site] += 1
        more = optimal_cost(replace_week(week, demand=demand))
        if ranges.has_high[node]:
            assert more is not None and more - found.cost == ranges.high[node]  # HiGHS re-solve
        else:
            assert more is None  # HiGHS re-solve: infeasible
        if week.demand[site] == 0:
            continue
        demand[site] -= 2
        less = optimal_cost(replace_week(week, demand=demand))
        if ranges.has_low[node]:
            assert less is not None and found.cost - less == ranges.low[node]  # HiGHS re-solve
        else:
            assert less is None  # HiGHS re-solve: infeasible


@given(any_week)
def test_plant_price_is_the_value_of_supply(week):
    found = optimal(week)
    inst, ranges, flow = found.inst, found.ranges, found.flow
    unused = np.zeros(week.n_sites, np.int64)
    spare_arcs = np.flatnonzero(inst.arc_kind == ArcKind.TO_SPARE)
    unused[inst.arc_ref[spare_arcs]] = flow[spare_arcs]
    for site in np.flatnonzero((week.site_kind == SiteKind.PLANT) & (week.supply > 0)):
        node = inst.site_node[0, site]
        supply = week.supply.copy()
        supply[site] += 1
        more = optimal_cost(replace_week(week, supply=supply))
        ships = unused[site] < week.supply[site]
        # One more unit of supply also widens the plant -> SPARE arc, so a
        # plant that ships nothing gains nothing (common practice, no source).
        assert found.cost - more == (ranges.low[node] if ships else 0)  # scipy HiGHS re-solve
        supply[site] -= 2
        less = optimal_cost(replace_week(week, supply=supply))
        if ranges.has_high[node]:
            assert less is not None and less - found.cost == ranges.high[node]  # scipy HiGHS re-solve
        else:
            assert less is None  # scipy HiGHS re-solve: infeasible
        if unused[site] > 0:
            assert ranges.high[node] == 0 and ranges.price[node] == 0  # spare supply is worth nothing


# ---------------------------------------------------------------- capacity values


def test_capacity_value_of_a_full_lane_hand_example():
    # Hand computed. P1 and P2 (supply 10 each) serve C (demand 8): P1 -> C
    # costs 2 with capacity 5, P2 -> C costs 7 unlimited. Flow 5 and 3, cost 31;
    # price(C) = 7 (P2 has spare), so the full lane is worth 7 - 2 = 5 a unit:
    # capacity 6 gives 6 * 2 + 2 * 7 = 26.
    week = WeekData.from_arrays([SiteKind.PLANT, SiteKind.PLANT, SiteKind.CUSTOMER], [0, 1], [2, 2], [2, 7],
                                supply=[10, 10, 0], demand=[0, 0, 8], lane_capacity=[5, NONE])
    inst = assemble_instance(week)
    found = optimize(inst)
    values = found.capacity_value
    assert found.certificate.primal_cost == 31  # hand computed
    assert values[inst.lane_arc[0]].tolist() == [5, 0]  # hand computed
    wider = optimal_cost(replace_week(week, lane_capacity=[6, NONE]))
    assert wider == 26  # hand computed; re-solved with scipy HiGHS


def test_capacity_value_of_a_full_warehouse_hand_example():
    # Hand computed. P (supply 10) -> W (handling 1, throughput 4) -> C (demand 6),
    # lanes P -> W at 1 and W -> C at 1, plus a direct lane P -> C at 9.
    # Through W costs 3 a unit, direct 9: W is full (4 units), 2 go direct,
    # cost 4 * 3 + 2 * 9 = 30. One more unit of throughput saves 9 - 3 = 6.
    week = WeekData.from_arrays([SiteKind.PLANT, SiteKind.WAREHOUSE, SiteKind.CUSTOMER], [0, 1, 0], [1, 2, 2],
                                [1, 1, 9], supply=[10, 0, 0], demand=[0, 0, 6],
                                throughput_capacity=[NONE, 4, NONE], handling_cost=[0, 1, 0])
    inst = assemble_instance(week)
    found = optimize(inst)
    values = found.capacity_value
    assert found.certificate.primal_cost == 30  # hand computed
    assert values[throughput_arc_of(inst, 1)] == 6  # hand computed
    wider = optimal_cost(replace_week(week, throughput_capacity=[NONE, 5, NONE]))
    assert wider == 24  # hand computed: 5 * 3 + 1 * 9; re-solved with scipy HiGHS


# Exactness of every limit's value against re-solving: tests/test_limit_values.py.


