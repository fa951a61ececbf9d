"""Database-free tests of :mod:`planner.core.diagnose`: whole messages of small weeks, hand computed.

Each week is small enough to follow the maximum flow by hand: the surplus
nodes (plants, and SPARE when demand exceeds supply) send what they can to
the needy ones; what is left over is the shortfall, and the message names the
cut nearest the unmet needs.
"""

from __future__ import annotations

import pytest

from planner.core.diagnose import describe_cycle, diagnose_infeasible, find_unbounded_cycle
from planner.core.network import assemble_instance, time_expand
from planner.core.week import NONE, WeekData

P, W, C = 0, 1, 2
WEEK = ["2026-W10"]


def test_one_unit_short_behind_a_full_lane():
    # Plant (10) -> customer (5) on a lane of capacity 4: 1 unit short, the lane is the cut.
    week = WeekData.from_arrays([P, C], [0], [1], [1], supply=[10, 0], demand=[0, 5], lane_capacity=[4])
    d = diagnose_infeasible(assemble_instance(week), site_codes=["P", "C"], lane_labels=["P->C road"],
                            period_codes=WEEK)
    assert (d.shortfall, d.short_customers, d.limiting_arcs, d.exhausted_supply) == (1, [(1, 0, 1)], [0], [])
    assert d.message == (
        "week 2026-W10 is infeasible: 1 unit of demand cannot be served. Customers short: C (1). "
        "Limiting lanes (at capacity): P->C road (cap 4). Raise these capacities, add supply reachable "
        "from them, or give these customers a shortage_penalty."
    )


def test_a_plant_with_one_unit_is_exhausted_and_a_warehouse_is_not_named():
    # Plant (1) -> warehouse -> customer (3), no capacities: 2 short; the plant's 1 unit is used up.
    week = WeekData.from_arrays([P, W, C], [0, 1], [1, 2], [1, 1], supply=[1, 0, 0], demand=[0, 0, 3])
    d = diagnose_infeasible(assemble_instance(week), site_codes=["P", "W", "C"], period_codes=["P7"])
    assert d.exhausted_supply == [(0, 0, 1)] and d.limiting_arcs == []
    assert d.message == (
        "period P7 is infeasible: 2 units of demand cannot be served. "
        "Total demand exceeds total supply by 2 units. Customers short: C (2). "
        "All supply that could close the gap is used: P (1). "
        "Add supply that can reach these customers or give these customers a shortage_penalty."
    )


def test_penalties_that_cover_one_unit_of_the_gap():
    # Plant (4) serves C1 (1, with a penalty) and C2 (5). Demand exceeds supply by 2; the maximum
    # flow sends the plant's 4 to C2 and covers C1 from SHORT, so C2 misses 1 and SPARE keeps 1.
    week = WeekData.from_arrays([P, C, C], [0, 0], [1, 2], [1, 1], supply=[4, 0, 0], demand=[0, 1, 5],
                                shortage_penalty=[NONE, 100, NONE])
    d = diagnose_infeasible(assemble_instance(week), site_codes=["P", "C1", "C2"], period_codes=WEEK)
    assert d.shortfall == 1 and d.short_customers == [(2, 0, 1)]
    assert "Total demand exceeds total supply by 2 units; shortage penalties can cover only 1 of them." in d.message


def test_demand_above_supply_by_exactly_one_unit():
    week = WeekData.from_arrays([P, C], [0], [1], [1], supply=[4, 0], demand=[0, 5])
    d = diagnose_infeasible(assemble_instance(week), site_codes=["P", "C"], period_codes=WEEK)
    assert d.message.startswith(
        "week 2026-W10 is infeasible: 1 unit of demand cannot be served. "
        "Total demand exceeds total supply by 1 unit. Customers short: C (1)."
    )


def test_a_minimum_forcing_units_nowhere_names_no_plant():
    # Plant (10) -> customer (3) with a minimum of 5: 2 units are forced into the customer and have
    # nowhere to go. SPARE misses them, but every plant reaches SPARE: no plant is named.
    week = WeekData.from_arrays([P, C, C], [0], [1], [1], supply=[10, 0, 0], demand=[0, 3, 1], lane_min=[5])
    d = diagnose_infeasible(assemble_instance(week), site_codes=["P", "C", "D"], lane_labels=["P->C road"],
                            period_codes=WEEK)
    # D (1 unit, no lane) is short too: 2 units cannot be moved, 1 of them demand.
    assert (d.shortfall, d.short_customers, d.exhausted_supply, d.unmet_minimums) == (2, [(2, 0, 1)], [], [0])
    assert d.message == (
        "week 2026-W10 is infeasible: 2 units cannot be moved as required, 1 of them demand that cannot be "
        "served. Customers short: D (1). No lane reaches: D. Add supply that can reach these customers, "
        "open lanes to the customers no lane reaches, or give these customers a shortage_penalty. "
        "Lane minimums that cannot be met: P->C road (min 5): C cannot pass it on. "
        "Lower these minimums or route supply to the sites that must ship them."
    )


def test_a_warehouse_one_unit_short_of_its_minimum():
    # Plant (2) -> warehouse -> customer (3) with a minimum of 3 out of the warehouse: it gets 2.
    week = WeekData.from_arrays([P, W, C], [0, 1], [1, 2], [1, 1], supply=[2, 0, 0], demand=[0, 0, 3],
                                lane_min=[0, 3])
    d = diagnose_infeasible(assemble_instance(week), site_codes=["P", "W", "C"],
                            lane_labels=["P->W road", "W->C road"], period_codes=WEEK)
    assert d.message == (
        "week 2026-W10 is infeasible: 1 unit cannot be moved as required. "
        "Total demand exceeds total supply by 1 unit. All supply that could close the gap is used: P (2). "
        "Lane minimums that cannot be met: W->C road (min 3): W cannot receive it. "
        "Lower these minimums or route supply to the sites that must ship them."
    )


def test_ten_names_are_listed_without_a_count():
    kinds = [P] + [C] * 10
    week = WeekData.from_arrays(kinds, [], [], [], supply=[100] + [0] * 10, demand=[0] + [1] * 10)
    codes = ["P"] + [f"C{i:02d}" for i in range(1, 11)]
    d = diagnose_infeasible(assemble_instance(week), site_codes=codes)
    shown = ", ".join(f"C{i:02d} (1)" for i in range(1, 11))
    assert f"Customers short: {shown}. No lane reaches: " in d.message and " more" not in d.message
    assert d.message.startswith("period 0 is infeasible: 10 units of demand cannot be served.")


def horizon(period_codes=None):
    # Two periods, the customer (2 units a period) has a lane only in period 0.
    w0 = WeekData.from_arrays([P, C], [0], [1], [1], supply=[5, 0], demand=[0, 2])
    w1 = WeekData.from_arrays([P, C], [], [], [], supply=[5, 0], demand=[0, 2])
    return diagnose_infeasible(time_expand([w0, w1]), site_codes=["P", "C"], period_codes=period_codes)


def test_horizons_are_named_by_their_ends():
    assert horizon().message.startswith(
        "the horizon of periods 0 to 1 is infeasible: 2 units of demand cannot be served. "
        "Customers short: C in period 1 (2). No lane reaches: C in period 1."
    )
    assert horizon(["2026-W10", "2026-W11"]).message.startswith(
        "the horizon 2026-W10 to 2026-W11 is infeasible: 2 units of demand cannot be served. "
        "Customers short: C in 2026-W11 (2). No lane reaches: C in 2026-W11."
    )


def test_the_refusal_of_a_feasible_week_says_why():
    week = WeekData.from_arrays([P, C], [0], [1], [10], supply=[5, 0], demand=[0, 5])
    with pytest.raises(ValueError, match="^the instance is feasible: every unit can be moved as required$"):
        diagnose_infeasible(assemble_instance(week))


def test_cycle_costs_in_currency_per_quantity_unit():
    week = WeekData.from_arrays([W, W], [0, 1], [1, 0], [-20000, 5000])
    # -15000 scaled x 10 (quantity scale) / 10000 (cost scale) = -15.00 per unit (hand computed).
    inst = assemble_instance(week, cost_scale=10_000, quantity_scale=10)
    assert " cost -15.00 per unit " in describe_cycle(inst, find_unbounded_cycle(inst))
    # One hundred-millionth: written out in full, never in exponent form.
    tiny = assemble_instance(WeekData.from_arrays([W, W], [0, 1], [1, 0], [-2, 1]), cost_scale=10**8)
    assert " cost -0.00000001 per unit " in describe_cycle(tiny, find_unbounded_cycle(tiny))
    # Four decimals are kept as they are.
    four = assemble_instance(WeekData.from_arrays([W, W], [0, 1], [1, 0], [-12345, 0]))
    assert " cost -1.2345 per unit " in describe_cycle(four, find_unbounded_cycle(four))


def test_cycle_in_a_later_period_is_named_with_its_period():
    w0 = WeekData.from_arrays([W, W], [0], [1], [1])
    w1 = WeekData.from_arrays([W, W], [0, 1], [1, 0], [-20000, 5000])
    inst = time_expand([w0, w1])
    cycle = find_unbounded_cycle(inst)
    assert describe_cycle(inst, cycle, ["A", "B"], period_codes=["2026-W10", "2026-W11"]).startswith(
        "unbounded: the lanes A in 2026-W11, B in 2026-W11 form a cycle of cost -1.50 per unit"
    )


def test_eleven_names_are_ten_and_one_more():
    kinds = [P] + [C] * 11
    week = WeekData.from_arrays(kinds, [], [], [], supply=[100] + [0] * 11, demand=[0] + [1] * 11)
    codes = ["P"] + [f"C{i:02d}" for i in range(1, 12)]
    d = diagnose_infeasible(assemble_instance(week), site_codes=codes)
    shown = ", ".join(f"C{i:02d} (1)" for i in range(1, 11))
    assert f"Customers short: {shown} and 1 more. " in d.message


def test_only_minimums_that_cannot_be_met_are_named():
    # Plant P (10) -> customer C (needs nothing) with a minimum of 1, plant Q (nothing) -> C without
    # a minimum, P -> customer D (2) with a minimum of 1. The unit forced into C has nowhere to go;
    # D's minimum is met; Q -> C commits nothing (hand computed).
    week = WeekData.from_arrays([P, P, C, C], [0, 1, 0], [2, 2, 3], [1, 1, 1], supply=[10, 0, 0, 0],
                                demand=[0, 0, 0, 2], lane_min=[1, 0, 1])
    d = diagnose_infeasible(assemble_instance(week), site_codes=["P", "Q", "C", "D"],
                            lane_labels=["P->C road", "Q->C road", "P->D road"], period_codes=WEEK)
    assert (d.shortfall, d.unmet_minimums, d.short_customers, d.limiting_arcs) == (1, [0], [], [])
    assert d.message == (
        "week 2026-W10 is infeasible: 1 unit cannot be moved as required. "
        "Lane minimums that cannot be met: P->C road (min 1): C cannot pass it on. "
        "Lower these minimums or route supply to the sites that must ship them."
    )


def test_the_cut_follows_a_unit_that_could_be_sent_elsewhere():
    # Plant P (2) -> warehouse W -> customers X (1) and C2 (2); plant Q (5) -> X on a lane of capacity
    # 0. One unit is short. Whichever customer the maximum flow leaves short, the short region holds
    # X (a unit W sends to X could go to C2 instead), so Q -> X is a limiting lane: capacity there
    # lets Q serve X and frees W's unit (hand computed).
    week = WeekData.from_arrays([P, P, W, C, C], [0, 2, 2, 1], [2, 3, 4, 3], [1, 1, 1, 1],
                                supply=[2, 5, 0, 0, 0], demand=[0, 0, 0, 1, 2], lane_capacity=[NONE, NONE, NONE, 0])
    d = diagnose_infeasible(assemble_instance(week), site_codes=["P", "Q", "W", "X", "C2"],
                            lane_labels=["P->W road", "W->X road", "W->C2 road", "Q->X road"], period_codes=WEEK)
    assert d.shortfall == 1 and d.limiting_arcs == [3] and d.exhausted_supply == [(0, 0, 2)]
    assert "Limiting lanes (at capacity): Q->X road (cap 0)." in d.message
