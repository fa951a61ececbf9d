"""The linked horizon against the model written from the input (``tests/reference_model.py``).

The reference states the multi-period plan from the ``WeekData`` arrays alone,
following the README (one node per site and week, stock arcs between weeks at
the holding cost up to the storage capacity, SPARE and SHORT), without the
planner's time-expanded graph. It is solved with scipy's
``linprog(method="highs")`` (outside reference), which also gives the site
duals compared with the planner's exact price ranges.
"""

from __future__ import annotations

import dataclasses

import numpy as np
from hypothesis import given
from hypothesis import strategies as st

from planner.core.certificate import certify
from planner.core.diagnose import find_unbounded_cycle
from planner.core.network import ArcKind, assemble_instance, time_expand
from planner.core.prices import price_ranges
from planner.core.residual import feasible_potential, residual_graph
from planner.core.solve import INFEASIBLE, OPTIMAL, solve_flow
from planner.core.week import NONE, SiteKind, WeekData
from tests.helpers import reference_node
from tests.reference_model import TOLERANCE, reference_network, solve_lp

PLANT, WAREHOUSE, CUSTOMER = SiteKind.PLANT, SiteKind.WAREHOUSE, SiteKind.CUSTOMER


def planner_stock(inst, flow) -> np.ndarray:
    """Units the planner carries out of each week at each site."""
    stock = np.zeros(inst.site_node.shape, dtype=np.int64)
    arcs = np.flatnonzero(inst.arc_kind == ArcKind.STOCK)
    stock[inst.arc_period[arcs], inst.arc_ref[arcs]] = flow[arcs]
    return stock


def check_against_reference(weeks: list[WeekData]):
    """Solve the horizon both ways; compare cost, certificate and duals. Returns both answers."""
    inst = time_expand(weeks)
    solution = solve_flow(inst)
    net = reference_network(weeks)
    reference = solve_lp(net)  # scipy linprog HiGHS on the model from the input, outside reference
    assert (solution.status == INFEASIBLE) == (reference.status == "infeasible")
    if solution.status != OPTIMAL:
        return inst, solution, reference
    assert reference.cost == solution.cost

    res = residual_graph(inst, solution.flow)
    ranges = price_ranges(inst, res, feasible_potential(inst, res))
    cert = certify(inst, solution.flow, ranges.price)
    assert cert.ok, cert
    assert cert.primal_cost == solution.cost

    # Every optimal dual lies in [price_low, price_high]; HiGHS's is one of them.
    nodes = inst.site_node
    highs = reference.potential[np.vectorize(lambda v: reference_node(net, inst, v))(nodes)]
    has_high, has_low = ranges.has_high[nodes], ranges.has_low[nodes]
    assert np.all(~has_high | (highs <= ranges.high[nodes] + TOLERANCE)), (highs, ranges.high[nodes])
    assert np.all(~has_low | (highs >= ranges.low[nodes] - TOLERANCE)), (highs, ranges.low[nodes])
    return inst, solution, reference


# --------------------------------------------------------------------------- hand-built horizons


def spike_weeks(holding_cost: int) -> list[WeekData]:
    """Plant P, warehouse W (stores up to 20), customer C needing 10 a week.

    P->W costs 10 in week 1 and 50 in week 2 (a rate spike); W->C costs 1.
    """
    common = dict(
        supply=[30, 0, 0], demand=[0, 0, 10], holding_cost=[0, holding_cost, 0], storage_capacity=[0, 20, 0]
    )
    week1 = WeekData.from_arrays([PLANT, WAREHOUSE, CUSTOMER], [0, 1], [1, 2], [10, 1], **common)
    week2 = WeekData.from_arrays([PLANT, WAREHOUSE, CUSTOMER], [0, 1], [1, 2], [50, 1], **common)
    return [week1, week2]


def test_holding_stock_beats_a_later_rate_spike():
    # Hand computation: ship 20 to W in week 1 (200), hold 10 at 2 (20),
    # deliver 10 each week (20): 240, against 100 + 500 + 20 = 620 without stock.
    inst, solution, reference = check_against_reference(spike_weeks(holding_cost=2))
    assert solution.cost == 240
    stock = planner_stock(inst, solution.flow)
    assert stock[0].tolist() == [0, 10, 0]
    net = reference_network(spike_weeks(holding_cost=2))
    assert np.isclose(reference.flow[net.stock[(0, 1)]], 10)  # scipy HiGHS carries the same stock
    # One more unit at C in week 2 comes through week 1 and storage:
    # 10 + 2 + 1 = 13 (hand computation), not over the spiked lane (51).
    res = residual_graph(inst, solution.flow)
    ranges = price_ranges(inst, res, feasible_potential(inst, res))
    customer_week2 = int(inst.site_node[1, 2])
    assert ranges.has_high[customer_week2] and int(ranges.high[customer_week2]) == 13


def test_no_stock_when_holding_costs_more_than_the_spike():
    # Holding at 45 a unit costs more than the 40 the spike adds: no stock, 620.
    inst, solution, _ = check_against_reference(spike_weeks(holding_cost=45))
    assert solution.cost == 620
    assert not planner_stock(inst, solution.flow).any()


def weekly_sum(weeks: list[WeekData]) -> int | None:
    """Sum of the optimal costs of the weeks solved one by one, None if one is infeasible."""
    total = 0
    for w in weeks:
        solution = solve_flow(assemble_instance(w))
        if solution.status != OPTIMAL:
            return None
        total += solution.cost
    return total


def test_zero_storage_horizon_costs_the_sum_of_its_weeks():
    weeks = [
        dataclasses.replace(w, storage_capacity=np.zeros(w.n_sites, dtype=np.int64))
        for w in spike_weeks(holding_cost=2)
    ]
    inst, solution, _ = check_against_reference(weeks)
    assert not (inst.arc_kind == ArcKind.STOCK).any()
    assert solution.cost == weekly_sum(weeks) == 620  # 110 + 510, hand computation


def test_storage_feeds_a_week_without_supply():
    # The plant produces only in week 1 and stores for weeks 2 and 3 (cap 15
    # each time). Hand computation: 5 a week delivered at 3 (45), stock 10 then
    # 5 at holding 1 (15): 60.
    common = dict(holding_cost=[1, 0], storage_capacity=[15, 0])
    weeks = [
        WeekData.from_arrays([PLANT, CUSTOMER], [0], [1], [3], supply=[supply, 0], demand=[0, 5], **common)
        for supply in (15, 0, 0)
    ]
    inst, solution, reference = check_against_reference(weeks)
    assert solution.cost == 60
    assert planner_stock(inst, solution.flow)[:, 0].tolist() == [10, 5, 0]


# --------------------------------------------------------------------------- random horizons


@st.composite
def horizons(draw):
    """Two to four weeks over one site list and lane list, with stock, shortage and capacities."""
    n_plants = draw(st.integers(1, 2))
    n_wh = draw(st.integers(0, 2))
    n_cust = draw(st.integers(1, 3))
    kinds = [PLANT] * n_plants + [WAREHOUSE] * n_wh + [CUSTOMER] * n_cust
    n = len(kinds)
    pairs = draw(
        st.lists(
            st.tuples(st.integers(0, n_plants + n_wh - 1), st.integers(n_plants, n - 1)).filter(
                lambda p: p[0] != p[1]
            ),
            max_size=6,
        )
    )
    # Every customer has a lane; a week is infeasible for want of capacity or supply.
    pairs += [(draw(st.integers(0, n_plants + n_wh - 1)), c) for c in range(n_plants + n_wh, n)]
    penalised = [draw(st.integers(0, 11)) != 5 for _ in range(n_cust)]  # mostly penalised
    # Minimum commitments are contracts: the same on a lane every week, and rare.
    contract = [draw(st.sampled_from([0, 0, 0, 0, 0, 1, 3])) for _ in pairs]
    optional = lambda values: st.one_of(st.just(NONE), values)  # noqa: E731
    weeks = []
    for _ in range(draw(st.integers(2, 4))):
        caps = [draw(optional(st.integers(0, 30))) for _ in pairs]
        # Negative rates only on lanes with a capacity, so no unbounded cycle.
        lane_cost = [draw(st.integers(0 if c == NONE else -5, 20)) for c in caps]
        lane_min = [m if c == NONE else min(m, c) for m, c in zip(contract, caps)]
        weeks.append(
            WeekData.from_arrays(
                kinds,
                [p[0] for p in pairs],
                [p[1] for p in pairs],
                lane_cost,
                supply=[draw(st.integers(0, 60)) for _ in range(n_plants)] + [0] * (n_wh + n_cust),
                demand=[0] * (n_plants + n_wh) + [draw(st.integers(0, 30)) for _ in range(n_cust)],
                shortage_penalty=[NONE] * (n_plants + n_wh)
                + [draw(st.integers(20, 200)) if p else NONE for p in penalised],
                throughput_capacity=[NONE] * n_plants
                + [draw(optional(st.integers(0, 40))) for _ in range(n_wh)]
                + [NONE] * n_cust,
                handling_cost=[0] * n_plants + [draw(st.integers(0, 3)) for _ in range(n_wh)] + [0] * n_cust,
                lane_capacity=caps,
                lane_min=lane_min,
                holding_cost=[draw(st.integers(0, 5)) for _ in range(n)],
                storage_capacity=[draw(st.one_of(st.just(NONE), st.just(0), st.integers(1, 20))) for _ in range(n)],
            )
        )
    return weeks


@given(horizons())
def test_random_horizons_match_highs(weeks):
    inst = time_expand(weeks)
    assert find_unbounded_cycle(inst) is None
    inst, solution, reference = check_against_reference(weeks)
    if solution.status == OPTIMAL:
        stock = planner_stock(inst, solution.flow)
        for t, w in enumerate(weeks[:-1]):
            cap = w.storage_capacity
            assert np.all((cap == NONE) | (stock[t] <= cap))
        assert not stock[-1].any()


@given(horizons())
def test_random_zero_storage_horizon_is_the_sum_of_its_weeks(weeks):
    weeks = [dataclasses.replace(w, storage_capacity=np.zeros(w.n_sites, dtype=np.int64)) for w in weeks]
    inst, solution, _ = check_against_reference(weeks)
    expected = weekly_sum(weeks)
    if expected is None:
        assert solution.status == INFEASIBLE
    else:
        assert solution.status == OPTIMAL and solution.cost == expected
