"""Diagnosis of weeks without an optimal plan: infeasible weeks, unbounded cycles, overflow.

The infeasible weeks are built by hand so that the shortfall, the customers
left short and the bottleneck lanes can be worked out on paper; the expected
figures in each test are those hand computations. The shortfall is also
checked against networkx's ``maximum_flow_value`` (outside reference) on the
lower-bound-shifted network, built here from the instance arrays without the
planner's code, and unbounded cycles against networkx's
``negative_edge_cycle`` (outside reference).
"""

from __future__ import annotations

import dataclasses

import networkx as nx
import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from planner.core.diagnose import (
    describe_cycle,
    diagnose_infeasible,
    find_unbounded_cycle,
)
from planner.core.network import (
    ArcKind,
    OverflowError_,
    assemble_instance,
    check_int64,
    time_expand,
)
from planner.core.solve import INFEASIBLE, OPTIMAL, solve_flow
from planner.core.week import NONE, SiteKind, WeekData, scale_exact

PLANT, WAREHOUSE, CUSTOMER = SiteKind.PLANT, SiteKind.WAREHOUSE, SiteKind.CUSTOMER


def networkx_shortfall(inst) -> int:
    """Units a feasible flow would have to place but cannot (networkx, outside reference).

    Lower bounds are removed by hand (``x = l + x'``); arcs without an upper
    bound get no capacity attribute, which networkx reads as infinite.
    """
    need = [int(v) for v in inst.supply]
    graph = nx.DiGraph()
    for a in range(inst.n_arcs):
        t, h, low = int(inst.tail[a]), int(inst.head[a]), int(inst.lower[a])
        need[t] -= low
        need[h] += low
        finite = not bool(inst.unlimited[a])
        if graph.has_edge(t, h):
            edge = graph[t][h]
            if finite and "capacity" in edge:
                edge["capacity"] += int(inst.upper[a]) - low
            else:
                edge.pop("capacity", None)
        elif finite:
            graph.add_edge(t, h, capacity=int(inst.upper[a]) - low)
        else:
            graph.add_edge(t, h)
    graph.add_node("source")
    graph.add_node("sink")
    for v, units in enumerate(need):
        if units > 0:
            graph.add_edge("source", v, capacity=units)
        elif units < 0:
            graph.add_edge(v, "sink", capacity=-units)
    surplus = sum(units for units in need if units > 0)
    return surplus - nx.maximum_flow_value(graph, "source", "sink")


def lane_arc(inst, lane: int, period: int = 0) -> int:
    return int(inst.lane_arc[period, lane])


# --------------------------------------------------------------------------- infeasible weeks


def test_customers_behind_a_capacitated_lane_and_without_any_lane():
    # P1 (200) feeds W1, W2 freely; C017 (130) only via W2->C017 road (cap 50);
    # C022 (40) has no lane this week; C005 (20) is served by a full lane (cap 20).
    # Hand computation: C017 misses 130 - 50 = 80, C022 misses 40, shortfall 120.
    # P1->C005 is at capacity but its customer is served: it must not be named.
    sites = ["P1", "W1", "W2", "C017", "C022", "C005"]
    lanes = ["P1->W1 road", "P1->W2 road", "W2->C017 road", "P1->C005 road"]
    week = WeekData.from_arrays(
        [PLANT, WAREHOUSE, WAREHOUSE, CUSTOMER, CUSTOMER, CUSTOMER],
        [0, 0, 2, 0],
        [1, 2, 3, 5],
        [10000, 10000, 20000, 30000],
        supply=[200, 0, 0, 0, 0, 0],
        demand=[0, 0, 0, 130, 40, 20],
        lane_capacity=[NONE, NONE, 50, 20],
    )
    inst = assemble_instance(week)
    assert solve_flow(inst).status == INFEASIBLE
    d = diagnose_infeasible(inst, site_codes=sites, lane_labels=lanes, period_codes=["2026-W49"])
    assert d.shortfall == 120
    assert networkx_shortfall(inst) == 120
    assert d.short_customers == [(3, 0, 80), (4, 0, 40)]
    assert d.limiting_arcs == [lane_arc(inst, 2)]
    assert d.unmet_minimums == []
    assert d.exhausted_supply == []
    assert d.message == (
        "week 2026-W49 is infeasible: 120 units of demand cannot be served. "
        "Customers short: C017 (80), C022 (40). No lane reaches: C022. "
        "Limiting lanes (at capacity): W2->C017 road (cap 50). "
        "Raise these capacities, add supply reachable from them, open lanes to the "
        "customers no lane reaches, or give these customers a shortage_penalty."
    )

    # Following the advice works: with a shortage penalty on the two customers
    # the week solves, and exactly the diagnosed units are short.
    penalised = dataclasses.replace(
        week, shortage_penalty=np.array([NONE, NONE, NONE, 10**6, 10**6, NONE], dtype=np.int64)
    )
    relaxed = assemble_instance(penalised)
    solution = solve_flow(relaxed)
    assert solution.status == OPTIMAL
    short = relaxed.arc_kind == ArcKind.SHORTAGE
    assert dict(zip(relaxed.arc_ref[short].tolist(), solution.flow[short].tolist())) == {3: 80, 4: 40}


def test_demand_above_total_supply_without_penalty():
    # P1 (50) -> C1 (60), P2 (30) -> C2 (40), lanes without capacity.
    # Hand computation: total demand 100 exceeds total supply 80 by 20;
    # each customer misses 10; both plants are used up; no lane is limiting.
    week = WeekData.from_arrays(
        [PLANT, PLANT, CUSTOMER, CUSTOMER],
        [0, 1],
        [2, 3],
        [10000, 10000],
        supply=[50, 30, 0, 0],
        demand=[0, 0, 60, 40],
    )
    inst = assemble_instance(week)
    assert int(inst.supply[inst.spare]) == 20  # SPARE becomes a source
    assert solve_flow(inst).status == INFEASIBLE
    d = diagnose_infeasible(inst, site_codes=["P1", "P2", "C1", "C2"], period_codes=["2026-W49"])
    assert d.shortfall == 20
    assert networkx_shortfall(inst) == 20
    assert d.short_customers == [(2, 0, 10), (3, 0, 10)]
    assert d.limiting_arcs == []
    assert d.exhausted_supply == [(0, 0, 50), (1, 0, 30)]
    assert d.message == (
        "week 2026-W49 is infeasible: 20 units of demand cannot be served. "
        "Total demand exceeds total supply by 20 units. "
        "Customers short: C1 (10), C2 (10). "
        "All supply that could close the gap is used: P1 (50), P2 (30). "
        "Add supply that can reach these customers or give these customers a shortage_penalty."
    )


def test_demand_above_supply_beyond_what_penalties_cover():
    # P1 (50) serves C1 (30, with a shortage penalty) and C2 (70, without).
    # Hand computation: demand 100 exceeds supply by 50; C1's penalty can cover
    # its 30 units, the other 20 fall on C2.
    week = WeekData.from_arrays(
        [PLANT, CUSTOMER, CUSTOMER], [0, 0], [1, 2], [10000, 10000],
        supply=[50, 0, 0], demand=[0, 30, 70], shortage_penalty=[NONE, 900000, NONE],
    )
    inst = assemble_instance(week)
    assert solve_flow(inst).status == INFEASIBLE
    d = diagnose_infeasible(inst, site_codes=["P1", "C1", "C2"])
    assert d.shortfall == 20 == networkx_shortfall(inst)
    assert d.short_customers == [(2, 0, 20)]
    assert (
        "Total demand exceeds total supply by 50 units; shortage penalties can cover only 30 of them. "
        "Customers short: C2 (20)." in d.message
    )


def test_demand_above_supply_shared_plants_total_is_exact():
    # Both plants reach both customers, so the split of the 20 missing units
    # between C1 and C2 is not unique; the total is (hand computation 100 - 80).
    week = WeekData.from_arrays(
        [PLANT, PLANT, CUSTOMER, CUSTOMER],
        [0, 0, 1, 1],
        [2, 3, 2, 3],
        [1, 2, 3, 4],
        supply=[50, 30, 0, 0],
        demand=[0, 0, 60, 40],
    )
    inst = assemble_instance(week)
    d = diagnose_infeasible(inst)
    assert d.shortfall == 20 == networkx_shortfall(inst)
    assert sum(units for _, _, units in d.short_customers) == 20
    assert {site for site, _, _ in d.short_customers} <= {2, 3}
    assert d.message.startswith("period 0 is infeasible: 20 units of demand cannot be served.")
    assert "Total demand exceeds total supply by 20 units." in d.message


def test_lane_minimum_out_of_a_warehouse_that_receives_nothing():
    # W1 must ship at least 30 to C1, but no lane enters W1. C1 (50) is served
    # by P1 (100). Hand computation: shortfall 30, nobody is short, the
    # minimum of W1->C1 is the one that cannot be met.
    week = WeekData.from_arrays(
        [PLANT, WAREHOUSE, CUSTOMER],
        [0, 1],
        [2, 2],
        [10000, 5000],
        supply=[100, 0, 0],
        demand=[0, 0, 50],
        lane_min=[0, 30],
    )
    inst = assemble_instance(week)
    assert solve_flow(inst).status == INFEASIBLE
    d = diagnose_infeasible(
        inst, site_codes=["P1", "W1", "C1"], lane_labels=["P1->C1 road", "W1->C1 road"],
        period_codes=["2026-W49"],
    )
    assert d.shortfall == 30 == networkx_shortfall(inst)
    assert d.short_customers == []
    assert d.unmet_minimums == [lane_arc(inst, 1)]
    assert d.limiting_arcs == []
    assert d.message == (
        "week 2026-W49 is infeasible: 30 units cannot be moved as required. "
        "Lane minimums that cannot be met: W1->C1 road (min 30): W1 cannot receive it. "
        "Lower these minimums or route supply to the sites that must ship them."
    )


def test_lane_minimum_out_of_a_warehouse_fed_too_little():
    # As above, but P1->W1 (cap 10) feeds W1: 20 of the 30 units still cannot
    # reach W1 (hand computation), and the full feeding lane is named.
    week = WeekData.from_arrays(
        [PLANT, WAREHOUSE, CUSTOMER],
        [0, 1, 0],
        [2, 2, 1],
        [10000, 5000, 1000],
        supply=[100, 0, 0],
        demand=[0, 0, 50],
        lane_min=[0, 30, 0],
        lane_capacity=[NONE, NONE, 10],
    )
    inst = assemble_instance(week)
    d = diagnose_infeasible(
        inst, site_codes=["P1", "W1", "C1"],
        lane_labels=["P1->C1 road", "W1->C1 road", "P1->W1 road"],
    )
    assert d.shortfall == 20 == networkx_shortfall(inst)
    assert d.unmet_minimums == [lane_arc(inst, 1)]
    assert d.limiting_arcs == [lane_arc(inst, 2)]
    assert "Limiting lanes (at capacity): P1->W1 road (cap 10)." in d.message


def test_lane_minimum_forcing_more_than_the_customer_needs():
    # P1 must send at least 40 to C1, which needs 25 and cannot pass units on:
    # 15 units have nowhere to go (hand computation).
    week = WeekData.from_arrays(
        [PLANT, CUSTOMER], [0], [1], [10000], supply=[100, 0], demand=[0, 25], lane_min=[40]
    )
    inst = assemble_instance(week)
    d = diagnose_infeasible(inst, site_codes=["P1", "C1"], lane_labels=["P1->C1 road"])
    assert d.shortfall == 15 == networkx_shortfall(inst)
    assert d.unmet_minimums == [0]
    assert d.short_customers == []
    assert "P1->C1 road (min 40): C1 cannot pass it on" in d.message


@pytest.mark.parametrize(
    "demand, shortfall, opening",
    [
        # 30 forced onto a lane that carries 20, for a customer needing 25:
        # the 20 that fit leave 5 too many at C1 (hand computation).
        (25, 5, "period 0 is infeasible: 5 units cannot be moved as required."),
        # For a customer needing 30 the units balance; only the bounds clash.
        (30, 0, "period 0 is infeasible: a lane minimum exceeds the lane's capacity."),
    ],
)
def test_lane_minimum_above_its_capacity(demand, shortfall, opening):
    week = WeekData.from_arrays(
        [PLANT, CUSTOMER], [0], [1], [10], supply=[100, 0], demand=[0, demand],
        lane_min=[30], lane_capacity=[20],
    )
    inst = assemble_instance(week)
    assert solve_flow(inst).status == INFEASIBLE
    d = diagnose_infeasible(inst, site_codes=["P1", "C1"], lane_labels=["P1->C1 road"])
    assert d.shortfall == shortfall
    assert d.unmet_minimums == [0]
    assert d.message.startswith(opening)
    assert "P1->C1 road (min 30) above its capacity 20." in d.message


def test_throughput_limited_warehouse():
    # P1 (100) -> W1 -> C1 (80); W1 handles at most 60 a week. C2 (10) is
    # served by a full lane P1->C2 (cap 10) that must not be named.
    # Hand computation: C1 misses 80 - 60 = 20.
    week = WeekData.from_arrays(
        [PLANT, WAREHOUSE, CUSTOMER, CUSTOMER],
        [0, 1, 0],
        [1, 2, 3],
        [10000, 10000, 40000],
        supply=[100, 0, 0, 0],
        demand=[0, 0, 80, 10],
        throughput_capacity=[NONE, 60, NONE, NONE],
        lane_capacity=[NONE, NONE, 10],
    )
    inst = assemble_instance(week)
    throughput = int(np.flatnonzero(inst.arc_kind == ArcKind.THROUGHPUT)[0])
    assert solve_flow(inst).status == INFEASIBLE
    d = diagnose_infeasible(
        inst, site_codes=["P1", "W1", "C1", "C2"],
        lane_labels=["P1->W1 road", "W1->C1 road", "P1->C2 road"], period_codes=["2026-W49"],
    )
    assert d.shortfall == 20 == networkx_shortfall(inst)
    assert d.short_customers == [(2, 0, 20)]
    assert d.limiting_arcs == [throughput]
    assert "Customers short: C1 (20). Limiting warehouse throughput: W1 (cap 60)." in d.message
    assert "P1->C2" not in d.message


def test_storage_limits_a_linked_horizon():
    # P1 ships 10 in week 1 only and can store 4; C1 needs 10 in week 2.
    # Hand computation: 6 units short in week 2, the storage is the bottleneck.
    week1 = WeekData.from_arrays(
        [PLANT, CUSTOMER], [0], [1], [10000], supply=[10, 0], demand=[0, 0],
        holding_cost=[100, 0], storage_capacity=[4, 0],
    )
    week2 = WeekData.from_arrays([PLANT, CUSTOMER], [0], [1], [10000], supply=[0, 0], demand=[0, 10])
    inst = time_expand([week1, week2])
    assert solve_flow(inst).status == INFEASIBLE
    d = diagnose_infeasible(
        inst, site_codes=["P1", "C1"], lane_labels=["P1->C1 road"], period_codes=["2026-W49", "2026-W50"]
    )
    stock = int(np.flatnonzero(inst.arc_kind == ArcKind.STOCK)[0])
    assert d.shortfall == 6 == networkx_shortfall(inst)
    assert d.short_customers == [(1, 1, 6)]
    assert d.limiting_arcs == [stock]
    assert d.message.startswith(
        "the horizon 2026-W49 to 2026-W50 is infeasible: 6 units of demand cannot be served. "
        "Customers short: C1 in 2026-W50 (6). Limiting storage: P1 after 2026-W49 (cap 4)."
    )


def test_long_lists_are_capped_at_ten_names():
    # 13 customers of 1 unit each, none with a lane: 13 short, 10 named.
    kinds = [PLANT] + [CUSTOMER] * 13
    week = WeekData.from_arrays(kinds, [], [], [], supply=[100] + [0] * 13, demand=[0] + [1] * 13)
    codes = ["P1"] + [f"C{i:03d}" for i in range(1, 14)]
    d = diagnose_infeasible(assemble_instance(week), site_codes=codes)
    assert d.shortfall == 13
    assert len(d.short_customers) == 13
    shown = ", ".join(f"C{i:03d} (1)" for i in range(1, 11))
    assert f"Customers short: {shown} and 3 more." in d.message


def test_quantities_are_reported_in_their_unit():
    # Quantities at three decimals: 80.5 needed, 50.25 deliverable, 30.25 short.
    week = WeekData.from_arrays(
        [PLANT, CUSTOMER], [0], [1], [10], supply=[100_000, 0], demand=[0, 80_500],
        lane_capacity=[50_250],
    )
    inst = assemble_instance(week, quantity_scale=1000)
    d = diagnose_infeasible(inst, site_codes=["P1", "C1"], lane_labels=["P1->C1 road"])
    assert d.shortfall == 30_250
    assert "30.25 units of demand" in d.message and "(cap 50.25)" in d.message


def test_feasible_instance_is_refused():
    week = WeekData.from_arrays([PLANT, CUSTOMER], [0], [1], [10], supply=[5, 0], demand=[0, 5])
    with pytest.raises(ValueError, match="feasible"):
        diagnose_infeasible(assemble_instance(week))


@st.composite
def small_weeks(draw, with_minimums: bool):
    """Small weeks without shortage penalties, often infeasible."""
    n_plants = draw(st.integers(1, 3))
    n_wh = draw(st.integers(0, 2))
    n_cust = draw(st.integers(1, 4))
    kinds = [PLANT] * n_plants + [WAREHOUSE] * n_wh + [CUSTOMER] * n_cust
    origins = list(range(n_plants + n_wh))
    dests = list(range(n_plants, len(kinds)))
    pairs = draw(
        st.lists(
            st.tuples(st.sampled_from(origins), st.sampled_from(dests)).filter(lambda p: p[0] != p[1]),
            max_size=10,
        )
    )
    caps = [draw(st.one_of(st.just(NONE), st.integers(0, 40))) for _ in pairs]
    mins = [
        draw(st.integers(0, min(10, c) if c != NONE else 10)) if with_minimums and draw(st.booleans()) else 0
        for c in caps
    ]
    return WeekData.from_arrays(
        kinds,
        [p[0] for p in pairs],
        [p[1] for p in pairs],
        [draw(st.integers(0, 20)) for _ in pairs],
        supply=[draw(st.integers(0, 60)) for _ in range(n_plants)] + [0] * (n_wh + n_cust),
        demand=[0] * (n_plants + n_wh) + [draw(st.integers(0, 50)) for _ in range(n_cust)],
        throughput_capacity=[NONE] * n_plants
        + [draw(st.one_of(st.just(NONE), st.integers(0, 50))) for _ in range(n_wh)]
        + [NONE] * n_cust,
        handling_cost=[0] * n_plants + [draw(st.integers(0, 3)) for _ in range(n_wh)] + [0] * n_cust,
        lane_capacity=caps,
        lane_min=mins,
    )


@given(small_weeks(with_minimums=False))
def test_shortfall_is_the_least_total_shortage(week):
    # Without lane minimums the shortfall is the least total unmet demand.
    # Check it three ways: networkx's max flow (outside reference), the
    # solver's status, and a min-cost solve with a shortage penalty larger than
    # any path cost (so it first minimises the shortage).
    inst = assemble_instance(week)
    status = solve_flow(inst).status
    expected = networkx_shortfall(inst)
    penalty = 1 + int(np.abs(week.lane_cost).sum() + np.abs(week.handling_cost).sum())
    relaxed = assemble_instance(
        dataclasses.replace(week, shortage_penalty=np.full(week.n_sites, penalty, dtype=np.int64))
    )
    solution = solve_flow(relaxed)
    assert solution.status == OPTIMAL
    least_shortage = int(solution.flow[relaxed.arc_kind == ArcKind.SHORTAGE].sum())
    assert least_shortage == expected
    if expected == 0:
        assert status == OPTIMAL
        with pytest.raises(ValueError):
            diagnose_infeasible(inst)
        return
    assert status == INFEASIBLE
    d = diagnose_infeasible(inst)
    assert d.shortfall == expected
    assert sum(units for _, _, units in d.short_customers) == expected
    assert d.unmet_minimums == []
    assert all(not inst.unlimited[a] for a in d.limiting_arcs)


@given(small_weeks(with_minimums=True))
def test_shortfall_with_minimums_matches_networkx(week):
    inst = assemble_instance(week)
    expected = networkx_shortfall(inst)  # networkx, outside reference
    status = solve_flow(inst).status
    assert (status == INFEASIBLE) == (expected > 0)
    if expected > 0:
        d = diagnose_infeasible(inst)
        assert d.shortfall == expected
        assert d.short_customers or d.unmet_minimums


# --------------------------------------------------------------------------- unbounded cycles


def warehouses_week(origin, destination, cost, capacity=None, **extra):
    n = max(max(origin), max(destination)) + 1
    return WeekData.from_arrays([WAREHOUSE] * n, origin, destination, cost, lane_capacity=capacity, **extra)


def test_two_lane_cycle_is_found_and_named():
    # W1->W2 road at -5.00 and W2->W1 rail at +1.50: -3.50 per unit round the cycle.
    costs = scale_exact([-5.0, 1.5], 4, "unit_cost")
    inst = assemble_instance(warehouses_week([0, 1], [1, 0], costs))
    cycle = find_unbounded_cycle(inst)
    assert cycle == [0, 1]
    assert describe_cycle(inst, cycle, lane_labels=["W1->W2 road", "W2->W1 rail"]) == (
        "unbounded: the lanes W1->W2 road, W2->W1 rail form a cycle of cost -3.50 per unit "
        "with no capacity; give one of them a capacity or correct the rates"
    )


def test_cycle_behind_a_path_is_returned_without_the_path():
    # A plant feeds W1 -> W2 -> W3 -> W1 (cost -1 in total) and a customer.
    # Lanes: 0 P->W1, 1 W2->W3, 2 W1->W2, 3 W3->W1, 4 W1->C.
    week = WeekData.from_arrays(
        [PLANT, WAREHOUSE, WAREHOUSE, WAREHOUSE, CUSTOMER],
        [0, 2, 1, 3, 1],
        [1, 3, 2, 1, 4],
        [5, 2, -6, 3, 1],
        supply=[10, 0, 0, 0, 0],
        demand=[0, 0, 0, 0, 10],
    )
    inst = assemble_instance(week)
    cycle = find_unbounded_cycle(inst)
    assert cycle == [1, 3, 2]  # W2->W3, W3->W1, W1->W2: starts at the smallest arc index
    assert [int(inst.head[a]) for a in cycle] == [int(inst.tail[a]) for a in cycle[1:] + cycle[:1]]
    assert "cost -0.0001 per unit" in describe_cycle(inst, cycle)


def test_cycle_through_warehouse_handling_is_named():
    # W1 is split by a (refund) handling cost of -4.00; W1->W2 1.00, W2->W1 1.00.
    costs = scale_exact([1.0, 1.0], 4, "unit_cost")
    week = warehouses_week([0, 1], [1, 0], costs, handling_cost=scale_exact([-4.0, 0.0], 4, "handling_cost"))
    inst = assemble_instance(week)
    cycle = find_unbounded_cycle(inst)
    assert cycle is not None and len(cycle) == 3
    assert ArcKind.THROUGHPUT in inst.arc_kind[cycle]
    message = describe_cycle(inst, cycle, site_codes=["W1", "W2"])
    assert message.startswith("unbounded: the links ")
    assert "throughput of W1" in message and "cost -2.00 per unit" in message


def test_negative_cycle_with_a_capacity_is_bounded():
    costs = scale_exact([-5.0, 1.5], 4, "unit_cost")
    inst = assemble_instance(warehouses_week([0, 1], [1, 0], costs, capacity=[NONE, 40]))
    assert find_unbounded_cycle(inst) is None
    # The solver then finds a finite optimum: 40 units round the cycle.
    solution = solve_flow(inst)
    assert solution.status == OPTIMAL and solution.cost == 40 * (-50000 + 15000)


def test_zero_cost_cycle_and_plain_week_are_bounded():
    assert find_unbounded_cycle(assemble_instance(warehouses_week([0, 1], [1, 0], [-3, 3]))) is None
    week = WeekData.from_arrays(
        [PLANT, WAREHOUSE, CUSTOMER], [0, 1], [1, 2], [-2, 7], supply=[5, 0, 0], demand=[0, 0, 5]
    )
    assert find_unbounded_cycle(assemble_instance(week)) is None


@given(st.data())
def test_unbounded_cycles_match_networkx(data):
    n = data.draw(st.integers(2, 7))
    pairs = data.draw(
        st.lists(
            st.tuples(st.integers(0, n - 1), st.integers(0, n - 1)).filter(lambda p: p[0] != p[1]),
            min_size=1,
            max_size=14,
        )
    )
    costs = [data.draw(st.integers(-10, 10)) for _ in pairs]
    caps = [data.draw(st.sampled_from([NONE, NONE, 5])) for _ in pairs]
    week = WeekData.from_arrays(
        [WAREHOUSE] * n, [p[0] for p in pairs], [p[1] for p in pairs], costs, lane_capacity=caps
    )
    inst = assemble_instance(week)
    unlimited = nx.DiGraph()
    unlimited.add_nodes_from(range(n))
    for (o, d), c, cap in zip(pairs, costs, caps):
        if cap == NONE and (not unlimited.has_edge(o, d) or unlimited[o][d]["weight"] > c):
            unlimited.add_edge(o, d, weight=c)
    cycle = find_unbounded_cycle(inst)
    assert (cycle is not None) == nx.negative_edge_cycle(unlimited)  # networkx, outside reference
    if cycle is not None:
        assert all(inst.unlimited[a] for a in cycle)
        assert [int(inst.head[a]) for a in cycle] == [int(inst.tail[a]) for a in cycle[1:] + cycle[:1]]
        assert len(set(int(inst.tail[a]) for a in cycle)) == len(cycle)  # a simple cycle
        assert int(inst.cost[cycle].sum()) < 0


# --------------------------------------------------------------------------- int64 overflow


def big_lane_week(unit_cost: float, decimals: int, capacity: int, handling: float = 0.0) -> WeekData:
    return WeekData.from_arrays(
        [PLANT, WAREHOUSE, CUSTOMER],
        [0, 1],
        [1, 2],
        scale_exact([unit_cost, 1.0], decimals, "unit_cost"),
        supply=[capacity, 0, 0],
        demand=[0, 0, capacity],
        lane_capacity=[capacity, capacity],
        handling_cost=scale_exact([0.0, handling, 0.0], decimals, "handling_cost"),
    )


def test_overflow_names_the_column_and_the_precision_that_fits():
    # 1e9 per unit at 4 decimals is 1e13 scaled; times 1e7 units is 1e20, about
    # 21.7 times 2**62, so two decimals fewer fit: 2 decimals (1e18 < 2**62),
    # while 3 decimals (1e19) would still overflow.
    inst = assemble_instance(big_lane_week(1e9, 4, 10**7), cost_scale=10**4)
    with pytest.raises(OverflowError_) as caught:
        check_int64(inst)
    message = str(caught.value)
    assert "lanes.csv unit_cost" in message
    assert "use a cost precision of 2 decimals" in message
    check_int64(assemble_instance(big_lane_week(1e9, 2, 10**7), cost_scale=10**2))
    with pytest.raises(OverflowError_):
        check_int64(assemble_instance(big_lane_week(1e9, 3, 10**7), cost_scale=10**3))
    with pytest.raises(OverflowError_):
        solve_flow(inst)


def test_overflow_of_unit_costs_of_a_trillion():
    # 1e12 at 4 decimals with 1e6 units: 1e22 against 2**62, about 2168 times
    # too large, so 4 decimals fewer: 0 decimals (1e18 fits).
    inst = assemble_instance(big_lane_week(1e12, 4, 10**6), cost_scale=10**4)
    with pytest.raises(OverflowError_, match=r"lanes\.csv unit_cost.*cost precision of 0 decimals"):
        check_int64(inst)
    check_int64(assemble_instance(big_lane_week(1e12, 0, 10**6), cost_scale=1))


def test_overflow_in_handling_cost_is_named():
    inst = assemble_instance(big_lane_week(1.0, 4, 10**7, handling=1e9), cost_scale=10**4)
    with pytest.raises(OverflowError_, match=r"sites\.csv handling_cost.*cost precision of 2 decimals"):
        check_int64(inst)


def test_overflow_without_any_precision_that_fits():
    # 1e12 per unit even at 0 decimals times 1e8 units is 1e20 > 2**62.
    inst = assemble_instance(big_lane_week(1e12, 0, 10**8), cost_scale=1)
    with pytest.raises(OverflowError_, match="no cost precision fits"):
        check_int64(inst)
