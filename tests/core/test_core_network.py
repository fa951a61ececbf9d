"""Database-free tests of :mod:`planner.core.network`: every array of small instances, built by hand.

Each expected array below is hand computed from the construction the module
docstring describes (node numbering: sites per period, then the ``out`` nodes
of split warehouses per period, then SPARE, then SHORT; arcs in the order
lanes, throughput, to-SPARE, shortage, stock per period, then SPARE -> SHORT).
"""

from __future__ import annotations

import re

import numpy as np
import pytest

from planner.core.network import (
    ArcKind,
    NodeRole,
    OverflowError_,
    assemble_instance,
    check_int64,
    time_expand,
)
from planner.core.week import NONE, SiteKind, WeekData
from planner.errors import PlannerError

L, T, S, SH, SS, ST = (ArcKind.LANE, ArcKind.THROUGHPUT, ArcKind.TO_SPARE, ArcKind.SHORTAGE,
                       ArcKind.SPARE_TO_SHORT, ArcKind.STOCK)


def one_week():
    """Plant 0 (10 units), warehouse 1 (throughput 6, handling 2), customer 2 (8 units, penalty 100),
    warehouse 3 without limits; lanes 0->1 (3, cap 7, min 1), 1->2 (4), 0->3 (5), 3->2 (1, cap 4)."""
    return WeekData.from_arrays(
        [SiteKind.PLANT, SiteKind.WAREHOUSE, SiteKind.CUSTOMER, SiteKind.WAREHOUSE],
        [0, 1, 0, 3], [1, 2, 3, 2], [3, 4, 5, 1],
        supply=[10, 0, 0, 0], demand=[0, 0, 8, 0], shortage_penalty=[NONE, NONE, 100, NONE],
        throughput_capacity=[NONE, 6, NONE, NONE], handling_cost=[0, 2, 0, 0],
        lane_capacity=[7, NONE, NONE, 4], lane_min=[1, 0, 0, 0],
    )


def test_one_week_instance_hand_built():
    inst = assemble_instance(one_week(), cost_scale=100, quantity_scale=10)
    # Nodes: sites 0..3, out node of warehouse 1 is 4, SPARE 5, SHORT 6.
    assert (inst.n_nodes, inst.spare, inst.short) == (7, 5, 6)
    assert inst.site_node.tolist() == [[0, 1, 2, 3]]
    assert inst.site_out_node.tolist() == [[0, 4, 2, 3]]
    assert inst.node_role.tolist() == [NodeRole.SITE] * 4 + [NodeRole.SITE_OUT, NodeRole.SPARE, NodeRole.SHORT]
    assert inst.node_site.tolist() == [0, 1, 2, 3, 1, -1, -1]
    assert inst.node_period.tolist() == [0, 0, 0, 0, 0, -1, -1]
    # Net supply: 10 at the plant, -8 at the customer, SPARE takes the 2 left over.
    assert inst.supply.tolist() == [10, 0, -8, 0, 0, -2, 0]
    # Arcs: 4 lanes, throughput 1 -> 4, plant -> SPARE, SHORT -> customer, SPARE -> SHORT.
    assert inst.n_arcs == 8
    assert inst.tail.tolist() == [0, 4, 0, 3, 1, 0, 6, 5]
    assert inst.head.tolist() == [1, 2, 3, 2, 4, 5, 2, 6]
    assert inst.cost.tolist() == [3, 4, 5, 1, 2, 0, 100, 0]
    assert inst.lower.tolist() == [1, 0, 0, 0, 0, 0, 0, 0]
    # "Unlimited" becomes |supply| summed (10 + 8 + 2) + minimums (1) + 1 = 22.
    assert inst.upper.tolist() == [7, 22, 22, 4, 6, 10, 22, 22]
    assert inst.unlimited.tolist() == [False, True, True, False, False, False, True, True]
    assert inst.arc_kind.tolist() == [L, L, L, L, T, S, SH, SS]
    assert inst.arc_ref.tolist() == [0, 1, 2, 3, 1, 0, 2, -1]
    assert inst.arc_period.tolist() == [0, 0, 0, 0, 0, 0, 0, -1]
    assert inst.lane_arc.tolist() == [[0, 1, 2, 3]]
    assert (inst.cost_scale, inst.quantity_scale) == (100, 10)
    for array in (inst.supply, inst.tail, inst.head, inst.cost, inst.lower, inst.upper, inst.arc_ref):
        assert array.dtype == np.int64
    assert inst.unlimited.dtype == bool and inst.arc_kind.dtype == np.int8 and inst.node_role.dtype == np.int8


def two_weeks():
    """Plant 0, warehouse 1, customer 2 over two periods; stock at the plant (unlimited, holding 1)
    and the warehouse (3 units, holding 2) after period 0; handling 1 at the warehouse in period 0 only."""
    w0 = WeekData.from_arrays(
        [0, 1, 2], [0, 1], [1, 2], [2, 3], supply=[5, 0, 0], demand=[0, 0, 2],
        handling_cost=[0, 1, 0], holding_cost=[1, 2, 0], storage_capacity=[NONE, 3, 0],
    )
    w1 = WeekData.from_arrays([0, 1, 2], [0, 1, 0], [1, 2, 2], [2, 3, 9], demand=[0, 0, 3])
    return [w0, w1]


def test_two_period_instance_hand_built():
    inst = time_expand(two_weeks())
    # Sites of period 0 are nodes 0-2, of period 1 nodes 3-5; the warehouse's out nodes 6 and 7.
    assert inst.site_node.tolist() == [[0, 1, 2], [3, 4, 5]]
    assert inst.site_out_node.tolist() == [[0, 6, 2], [3, 7, 5]]
    assert (inst.n_nodes, inst.spare, inst.short) == (10, 8, 9)
    assert inst.node_role.tolist() == [NodeRole.SITE] * 6 + [NodeRole.SITE_OUT] * 2 + [NodeRole.SPARE, NodeRole.SHORT]
    assert inst.node_site.tolist() == [0, 1, 2, 0, 1, 2, 1, 1, -1, -1]
    assert inst.node_period.tolist() == [0, 0, 0, 1, 1, 1, 0, 1, -1, -1]
    assert inst.supply.tolist() == [5, 0, -2, 0, 0, -3, 0, 0, 0, 0]
    # Period 0: lanes, throughput (handling 1, no capacity), plant -> SPARE, stock of sites 0 and 1.
    # Period 1: lanes, a free throughput arc, no spare arc (no supply). No penalties: no SHORT arcs.
    assert inst.tail.tolist() == [0, 6, 1, 0, 0, 1, 3, 7, 3, 4]
    assert inst.head.tolist() == [1, 2, 6, 8, 3, 4, 4, 5, 5, 7]
    assert inst.cost.tolist() == [2, 3, 1, 0, 1, 2, 2, 3, 9, 0]
    assert inst.lower.tolist() == [0] * 10
    # "Unlimited" is |supply| summed (5 + 2 + 3) + 1 = 11.
    assert inst.upper.tolist() == [11, 11, 11, 5, 11, 3, 11, 11, 11, 11]
    assert inst.unlimited.tolist() == [True, True, True, False, True, False, True, True, True, True]
    assert inst.arc_kind.tolist() == [L, L, T, S, ST, ST, L, L, L, T]
    assert inst.arc_ref.tolist() == [0, 1, 1, 0, 0, 1, 0, 1, 2, 1]
    assert inst.arc_period.tolist() == [0, 0, 0, 0, 0, 0, 1, 1, 1, 1]
    # Period 0 has two lanes, period 1 three: the table is padded with -1.
    assert inst.lane_arc.tolist() == [[0, 1, -1], [6, 7, 8]]


def test_stock_without_holding_or_storage_arrays():
    # WeekData built directly leaves holding_cost and storage_capacity None: no stock is carried.
    kw = dict(site_kind=np.array([0, 2], np.int8), supply=np.array([4, 0]), demand=np.array([0, 1]),
              shortage_penalty=np.array([NONE, NONE]), throughput_capacity=np.array([NONE, NONE]),
              handling_cost=np.array([0, 0]), lane_origin=np.array([0]), lane_destination=np.array([1]),
              lane_cost=np.array([5]), lane_capacity=np.array([NONE]), lane_min=np.array([0]))
    plain = WeekData(**kw)
    assert not np.any(time_expand([plain, plain]).arc_kind == ArcKind.STOCK)
    # Storage given, holding cost None: the plant's stock arc is free (cost 0), up to 2 units.
    stored = WeekData(**kw, storage_capacity=np.array([2, 0]))
    inst = time_expand([stored, plain])
    stock = np.flatnonzero(inst.arc_kind == ArcKind.STOCK)
    assert inst.cost[stock].tolist() == [0] and inst.upper[stock].tolist() == [2]
    assert inst.tail[stock].tolist() == [0] and inst.head[stock].tolist() == [2]
    assert inst.unlimited[stock].tolist() == [False]


def test_unlimited_bound_counts_capacities_when_a_cost_is_negative():
    # Hand computed: supply 4 and demand 4 (|b| summed 8), no minimum, one negative lane cost,
    # finite capacities 3 (lane) and 4 (plant -> SPARE): 8 + 3 + 4 + 1 = 16.
    w = WeekData.from_arrays([0, 1, 2], [0, 1, 1], [1, 2, 0], [2, -1, 3], supply=[4, 0, 0], demand=[0, 0, 4],
                             lane_capacity=[NONE, NONE, 3])
    inst = assemble_instance(w)
    assert inst.upper.tolist() == [16, 16, 3, 4]
    assert inst.supply.tolist() == [4, 0, -4, 0, 0]


def test_currency_and_units_convert_scaled_figures():
    inst = assemble_instance(one_week(), cost_scale=10_000, quantity_scale=100)
    # Hand computed: 250 scaled cost per scaled unit x 100 / 10000 = 2.5 per unit; 350 / 100 = 3.5 units.
    assert inst.currency([250, -4]).tolist() == [2.5, -0.04]
    assert inst.units([350, 7]).tolist() == [3.5, 0.07]
    assert inst.currency(3).dtype == np.float64 and inst.units(3).dtype == np.float64


def test_periods_that_do_not_fit_together_are_refused():
    w = WeekData.from_arrays([0, 2], [0], [1], [5])
    with pytest.raises(PlannerError, match="at least one period"):
        time_expand([])
    with pytest.raises(PlannerError, match="share one site list"):
        time_expand([w, WeekData.from_arrays([0, 2, 2], [0], [1], [5])])
    for origin, destination in [([2], [1]), ([0], [-1]), ([-1], [0])]:
        with pytest.raises(PlannerError, match="outside the site list"):
            time_expand([w, WeekData.from_arrays([0, 2], origin, destination, [5])])
    # A week without lanes or supply is fine: no arc at all.
    assert time_expand([WeekData.from_arrays([0, 2], [], [], [])]).n_arcs == 0


def test_check_int64_at_the_edge():
    # One lane, cost c, unlimited: bound 2 * 2 + 1 = 5 units; 4 nodes, so the solver's factor is c * 5.
    def instance(cost, cost_scale=10_000):
        w = WeekData.from_arrays([0, 2], [0], [1], [cost], supply=[2, 0], demand=[0, 2])
        return assemble_instance(w, cost_scale=cost_scale)

    inst = instance(2**62 // 5)
    assert inst.n_nodes == 4 and inst.upper.tolist() == [5, 2]
    check_int64(inst)  # 5 * (2**62 // 5) <= 2**62: fits
    # 2**62 // 4 x 5 units is above 2**62 by a factor 1.25: one decimal less fits (hand computed).
    message = re.escape("costs at 4 decimals overflow 64-bit integers by a factor of about 1.25; "
                        "the largest cost x capacity term is in lanes.csv unit_cost (arc 0, scaled cost "
                        f"{2**62 // 4}, bound 5); use a cost precision of 3 decimals (--cost-decimals 3)")
    with pytest.raises(OverflowError_, match="^" + message + "$"):
        check_int64(instance(2**62 // 4))
    # At 0 decimals nothing fits.
    with pytest.raises(OverflowError_, match="no cost precision fits"):
        check_int64(instance(2**62 // 4, cost_scale=1))
    # The empty instance has nothing to check.
    check_int64(assemble_instance(WeekData.from_arrays([1], [], [], [])))
