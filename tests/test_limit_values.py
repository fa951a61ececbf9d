"""Exact marginal values of limits and rate ranges, against re-solving (no database).

Every figure is checked the way it is defined: the value of one more unit of a
limit is the change of the optimal cost when the limit moves by one unit, so
the week is solved again with the limit moved, by scipy's
``linprog(method="highs")`` on the model written from the input
(``tests/reference_model.py``, outside reference). The weeks come from
``tests/strategies.py``, built to be degenerate (see ``tests/test_strategies.py``
for how often each hard case is reached). A rate range's end is
tight: at the end the stored flow is still optimal, one scaled unit past it the
re-solved optimum is strictly cheaper than the stored flow. HiGHS's own cost
ranging (``highspy``, ``getRanging``) is compared on non-degenerate weeks,
where the range of the optimal basis and the range of the plan coincide.
"""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from hypothesis import event, given
from hypothesis import strategies as st

from planner.core.limits import CAPACITY, MINIMUM, TightenBlock, ZeroComponents
from planner.core.network import ArcKind, assemble_instance, time_expand
from planner.core.optimize import optimize
from planner.core.paths import UNLIMITED
from planner.core.rates import limit_rate_ranges, rate_ranges
from planner.core.search import compiled_kernel
from planner.core.solve import exact_dot
from planner.core.week import NONE, SiteKind, WeekData
from tests.reference_model import highs_cost_ranging, optimal_cost, with_lane, with_site
from tests.strategies import degenerate_week, tree_week, week_data

PLANT, WAREHOUSE, CUSTOMER = SiteKind.PLANT, SiteKind.WAREHOUSE, SiteKind.CUSTOMER
any_week = st.one_of(degenerate_week(), week_data(feasible=True), week_data())


def solved(weeks: list[WeekData]):
    inst = time_expand(weeks)
    out = optimize(inst)
    return inst, out


def moved(weeks: list[WeekData], inst, arc: int, side: int, delta: int) -> list[WeekData] | None:
    """The input with the limit of ``arc`` moved by ``delta`` units; None when that is no valid input."""
    kind, ref, t = int(inst.arc_kind[arc]), int(inst.arc_ref[arc]), max(int(inst.arc_period[arc]), 0)
    week = weeks[t]
    if kind == ArcKind.LANE and side == CAPACITY:
        if week.lane_capacity[ref] + delta < 0:
            return None
        week = with_lane(week, ref, capacity=delta)
    elif kind == ArcKind.LANE:
        if week.lane_min[ref] + delta < 0:
            return None
        week = with_lane(week, ref, minimum=delta)
    elif kind == ArcKind.THROUGHPUT:
        if week.throughput_capacity[ref] + delta < 0:
            return None
        week = with_site(week, ref, throughput=delta)
    else:
        if week.storage_capacity[ref] + delta < 0:
            return None
        week = with_site(week, ref, storage=delta)
    return weeks[:t] + [week] + weeks[t + 1 :]


def check_limits_by_resolving(weeks: list[WeekData]) -> None:
    inst, out = solved(weeks)
    if not out.ok:
        return
    base = optimal_cost(weeks)
    assert base == out.certificate.primal_cost  # scipy linprog (HiGHS) on the model from the input
    limits = out.limits
    for i in range(limits.arc.shape[0]):
        arc, side = int(limits.arc[i]), int(limits.side[i])
        loosen = 1 if side == CAPACITY else -1
        event(f"limit: {ArcKind(int(inst.arc_kind[arc])).name.lower()} {'capacity' if side == CAPACITY else 'minimum'}")
        # Loosening by k units saves k times the value, for k up to its units (HiGHS re-solve).
        for k in sorted({1, int(min(limits.loosen_units[i], 3))}):
            bigger = moved(weeks, inst, arc, side, loosen * k)
            if bigger is None:
                continue
            assert base - optimal_cost(bigger) == k * int(limits.loosen[i]), (arc, side, k)
        if limits.loosen[i] > 0:
            event("loosening saves")
        tighter = moved(weeks, inst, arc, side, -loosen)
        if limits.blocked[i] != TightenBlock.NONE:
            event(f"tightening blocked: {TightenBlock(int(limits.blocked[i])).name.lower()}")
            assert tighter is None or optimal_cost(tighter) is None, (arc, side)  # HiGHS: no plan
            continue
        for k in sorted({1, int(min(limits.tighten_units[i], 3))}):
            assert k >= 1
            tighter = moved(weeks, inst, arc, side, -loosen * k)
            assert optimal_cost(tighter) - base == k * int(limits.tighten[i]), (arc, side, k)
        if limits.tighten[i] != limits.loosen[i]:
            event("the two sides differ")


@given(degenerate_week())
def test_every_limit_value_equals_the_cost_change_of_resolving(week):
    check_limits_by_resolving([week])


@given(
    week_data(feasible=True, lane_minimums=False, max_warehouses=2),
    st.lists(st.integers(0, 6), min_size=1, max_size=2),
    st.integers(0, 3),
)
def test_storage_values_in_a_horizon_equal_resolving(week, storage, holding):
    # The week repeated: twice the supply in the first, half of it later, so
    # stock carried forward is worth something and storage often fills up.
    weeks = []
    for t in range(len(storage) + 1):
        store = storage[t] if t < len(storage) else 0
        weeks.append(
            dataclasses.replace(
                week,
                supply=week.supply * 2 if t == 0 else week.supply // 2,
                holding_cost=np.full(week.n_sites, holding, np.int64),
                storage_capacity=np.where(week.site_kind == CUSTOMER, 0, store).astype(np.int64),
            )
        )
    check_limits_by_resolving(weeks)


def test_a_full_lane_behind_a_full_lane_is_worth_nothing_hand_example():
    # Hand computed. P (supply 10) -> W (capacity 5, cost 1) -> C (capacity 5,
    # cost 1); C needs 8 with a shortage penalty of 20. Both lanes are full;
    # one more unit on P->W alone cannot reach C, so it is worth 0, although a
    # dual of the week prices the lane's reduced cost at -18 or more.
    week = WeekData.from_arrays(
        [PLANT, WAREHOUSE, CUSTOMER], [0, 1], [1, 2], [1, 1],
        supply=[10, 0, 0], demand=[0, 0, 8], shortage_penalty=[NONE, NONE, 20], lane_capacity=[5, 5],
    )
    inst, out = solved([week])
    by_arc = {(int(a), int(s)): i for i, (a, s) in enumerate(zip(out.limits.arc, out.limits.side))}
    first, second = by_arc[(0, CAPACITY)], by_arc[(1, CAPACITY)]
    assert out.limits.loosen[first] == 0 and out.limits.loosen_units[first] == UNLIMITED
    assert out.limits.loosen[second] == 0
    # One unit less on either lane leaves one more unit short: 20 - 2 = 18.
    assert out.limits.tighten[first] == out.limits.tighten[second] == 18
    # Both together are worth 18 per unit, for 3 units (the shortage).
    both = optimal_cost([with_lane(with_lane(week, 0, capacity=1), 1, capacity=1)])
    assert optimal_cost([week]) - both == 18  # scipy linprog (HiGHS)


def test_minimum_commitment_values_hand_example():
    # Hand computed. Plants A (cost 2 to C) and B (cost 5 to C, minimum 4);
    # C needs 6. The minimum forces 4 units on the dear lane: relaxing it by
    # one saves 5 - 2 = 3 (for 4 units); tightening it costs 3 (for 2 units
    # more, until the lane from A is empty).
    week = WeekData.from_arrays(
        [PLANT, PLANT, CUSTOMER], [0, 1], [2, 2], [2, 5], supply=[10, 10, 0], demand=[0, 0, 6], lane_min=[0, 4],
    )
    inst, out = solved([week])
    (row,) = np.flatnonzero(out.limits.side == MINIMUM)
    assert (out.limits.loosen[row], out.limits.loosen_units[row]) == (3, 4)
    assert (out.limits.tighten[row], out.limits.tighten_units[row]) == (3, 2)
    assert optimal_cost([with_lane(week, 1, minimum=-1)]) == optimal_cost([week]) - 3  # scipy HiGHS


@pytest.mark.skipif(compiled_kernel() is None, reason="the compiled search kernel is not built")
@given(any_week)
def test_compiled_search_kernel_agrees_with_the_scipy_reference_path(week):
    inst, out = solved([week])
    if not out.ok:
        return
    res, pi = out.residual, out.ranges.price
    graph = ZeroComponents(inst.n_nodes, res, res.weight + pi[res.tail] - pi[res.head])
    rng = np.random.default_rng(inst.n_arcs)
    source, target = rng.integers(0, inst.n_nodes, size=(2, 40))
    radius = rng.integers(0, 12, size=40)
    for given_radius in (None, radius):
        dist, reached, units = graph.distances(source, target, given_radius, engine="compiled")
        ref_dist, ref_reached, ref_units = graph.distances(source, target, given_radius, engine="scipy")
        assert np.array_equal(reached, ref_reached) and np.array_equal(dist[reached], ref_dist[reached])
        # Tied shortest paths may differ between the engines; each path's capacity is a valid bound.
        assert np.all(units[reached] >= 1) and np.all(ref_units[reached] >= 1)


def check_rate_ranges_by_resolving(week: WeekData) -> None:
    inst, out = solved([week])
    if not out.ok:
        return
    lanes = inst.lane_arc[0]
    ranges = rate_ranges(inst, out.flow, out.residual, out.ranges.price, lanes)
    stored = out.flow[lanes]
    for i, lane in enumerate(range(week.n_lanes)):
        for has, end, step in ((ranges.has_low[i], ranges.low[i], -1), (ranges.has_high[i], ranges.high[i], 1)):
            if not has:
                continue
            event("rate range end")
            moved_week = with_lane(week, lane, cost=int(end) - int(week.lane_cost[lane]))
            plan_cost = exact_dot(assemble_instance(moved_week).cost[lanes], stored) + _fixed(inst, out.flow)
            assert optimal_cost([moved_week]) == plan_cost, (lane, step)  # HiGHS: still optimal at the end
            past = with_lane(moved_week, lane, cost=step)
            past_cost = exact_dot(assemble_instance(past).cost[lanes], stored) + _fixed(inst, out.flow)
            assert optimal_cost([past]) < past_cost, (lane, step)  # HiGHS: strictly cheaper past it


def _fixed(inst, flow) -> int:
    """Cost of the stored flow on everything but the lanes (handling, shortage)."""
    others = inst.arc_kind != ArcKind.LANE
    return exact_dot(inst.cost[others], flow[others])


@given(degenerate_week())
def test_rate_range_ends_are_tight_when_resolved(week):
    check_rate_ranges_by_resolving(week)


@given(tree_week())
def test_rate_ranges_match_highs_cost_ranging_on_non_degenerate_weeks(tree):
    week = tree.week
    inst, out = solved([week])
    lanes = inst.lane_arc[0]
    ranges = rate_ranges(inst, out.flow, out.residual, out.ranges.price, lanes)
    down, up, value = highs_cost_ranging(week)  # highspy getRanging: the basis's cost range
    assert np.array_equal(np.rint(value), out.flow[lanes])
    low = np.where(ranges.has_low, ranges.low, -np.inf)
    high = np.where(ranges.has_high, ranges.high, np.inf)
    assert np.allclose(low, down) and np.allclose(high, up), (low, down, high, up)


def test_rate_ranges_of_a_textbook_transportation_problem():
    # Winston, Operations Research: Applications and Algorithms, 4th ed.,
    # Powerco (chapter 7, transportation problems; from memory): supplies 35,
    # 50, 40; demands 45, 20, 30, 30; costs 8 6 10 9 / 9 12 13 7 / 14 9 16 5;
    # optimal cost 1020, non-degenerate. Hand computed with the u-v method: the
    # idle x11 (cost 8, reduced cost 2) enters below 6; the basic x13 (cost 10)
    # keeps the basis from 8 to 12. Its section on sensitivity analysis of
    # transportation problems treats these two cases.
    cost = np.array([[8, 6, 10, 9], [9, 12, 13, 7], [14, 9, 16, 5]])
    origin, destination = np.meshgrid(np.arange(3), 3 + np.arange(4), indexing="ij")
    week = WeekData.from_arrays(
        [PLANT] * 3 + [CUSTOMER] * 4, origin.ravel(), destination.ravel(), cost.ravel(),
        supply=[35, 50, 40, 0, 0, 0, 0], demand=[0, 0, 0, 45, 20, 30, 30],
    )
    inst, out = solved([week])
    assert out.certificate.primal_cost == 1020  # the book's optimal cost
    ranges = rate_ranges(inst, out.flow, out.residual, out.ranges.price, inst.lane_arc[0])
    x11, x13 = 0, 2
    assert (ranges.low[x11], ranges.has_high[x11]) == (6, False)  # hand computed, u-v method
    assert (ranges.low[x13], ranges.high[x13]) == (8, 12)  # hand computed, u-v method
    # HiGHS's basis holds a column of unused supply at zero (the week is
    # balanced), so its cost ranges are those of one degenerate basis: each lies
    # inside the plan's range, which is at least as wide (x13: HiGHS [8, 10]).
    down, up, _ = highs_cost_ranging(week)  # highspy getRanging
    assert (down[x11], up[x11]) == (6, np.inf)
    low = np.where(ranges.has_low, ranges.low, -np.inf)
    high = np.where(ranges.has_high, ranges.high, np.inf)
    assert np.all((low <= down + 1e-9) & (up <= high + 1e-9))


@given(any_week)
def test_rate_ranges_read_off_limit_values_equal_the_searched_ones(week):
    inst, out = solved([week])
    if not out.ok:
        return
    read_off = limit_rate_ranges(inst, out.limits)
    searched = rate_ranges(inst, out.flow, out.residual, out.ranges.price, read_off.arc)
    for column in ("has_low", "low", "has_high", "high"):
        assert np.array_equal(getattr(read_off, column), getattr(searched, column)), column
