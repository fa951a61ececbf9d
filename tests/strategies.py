"""Random planning weeks for property tests, built to reach the hard cases.

:func:`degenerate_week` is the main strategy: a small network that is
feasible by construction, solved once, then tightened around its optimal
flow so that the week is degenerate in every way real weeks are (ties in
rates, supply used exactly, lanes and warehouses exactly full, minimums
binding), with shortages taken and customers that need nothing but have a
shortage penalty. :data:`CASES` names those cases and :func:`cases_of` says
which a week hits; ``tests/test_strategies.py`` measures the share of examples
that hit each (at least 30 % each; the shares measured in the derandomised CI
profile are stated there).

:func:`week_data` draws less shaped weeks, some infeasible, some with
negative rates; :func:`tree_week` non-degenerate weeks whose prices follow a
hand rule; :func:`balanced_transport` balanced transport problems.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from hypothesis import strategies as st

from planner.core.network import assemble_instance
from planner.core.optimize import optimize
from planner.core.solve import OPTIMAL, solve_flow
from planner.core.week import NONE, SiteKind, WeekData

__all__ = [
    "CASES",
    "MORE_CASES",
    "TreeWeek",
    "balanced_transport",
    "cases_of",
    "degenerate_week",
    "tightened",
    "transport_week",
    "tree_week",
    "week_data",
]


def replace_week(week: WeekData, **arrays) -> WeekData:
    """A copy of ``week`` with some arrays replaced."""
    import dataclasses

    return dataclasses.replace(week, **{k: np.asarray(v, dtype=np.int64) for k, v in arrays.items()})


def _split(draw, total: int, parts: int) -> list[int]:
    """Non-negative integers summing to ``total``."""
    cuts = sorted(draw(st.lists(st.integers(0, total), min_size=parts - 1, max_size=parts - 1)))
    return [b - a for a, b in zip([0, *cuts], [*cuts, total])]


@st.composite
def week_data(
    draw,
    *,
    feasible: bool = False,
    lane_minimums: bool = True,
    negative_costs: bool = True,
    max_plants: int = 3,
    max_warehouses: int = 3,
    max_customers: int = 4,
    max_extra_lanes: int = 8,
) -> WeekData:
    """A small random week.

    Lanes run plant -> warehouse/customer and warehouse -> warehouse/customer,
    so the only cycles pass through warehouses; those lanes and handling
    costs are non-negative, so no negative-cost cycle exists, while lanes out
    of plants or into customers may have negative costs.

    With ``feasible=True`` every customer has an unlimited direct lane from a
    plant that has enough supply for the customers it covers, and no random
    lane minimums are drawn: the week always has a feasible plan.
    """
    n_p = draw(st.integers(1, max_plants))
    n_w = draw(st.integers(0, max_warehouses))
    n_c = draw(st.integers(1, max_customers))
    n = n_p + n_w + n_c
    plants = list(range(n_p))
    warehouses = list(range(n_p, n_p + n_w))
    customers = list(range(n_p + n_w, n))
    kind = [SiteKind.PLANT] * n_p + [SiteKind.WAREHOUSE] * n_w + [SiteKind.CUSTOMER] * n_c

    demand = np.zeros(n, np.int64)
    demand[customers] = draw(st.lists(st.integers(0, 12), min_size=n_c, max_size=n_c))
    supply = np.zeros(n, np.int64)
    supply[plants] = draw(st.lists(st.integers(0, 15), min_size=n_p, max_size=n_p))

    penalty = np.full(n, NONE, np.int64)
    for c in customers:
        penalty[c] = draw(st.one_of(st.just(NONE), st.integers(0, 40)))
    throughput = np.full(n, NONE, np.int64)
    handling = np.zeros(n, np.int64)
    for w in warehouses:
        throughput[w] = draw(st.one_of(st.just(NONE), st.integers(0, 20)))
        handling[w] = draw(st.sampled_from([0, 0, 1, 2, 3]))

    origins = plants + warehouses
    coverage = [(draw(st.sampled_from(plants if feasible else origins)), c) for c in customers]
    pairs = coverage + [(draw(st.sampled_from(plants)), w) for w in warehouses]
    extra = draw(
        st.lists(st.tuples(st.sampled_from(origins), st.sampled_from(warehouses + customers)), max_size=max_extra_lanes)
    )
    pairs += [(o, d) for o, d in extra if o != d]
    # Several modes on one origin-destination pair, sometimes many, at tied costs.
    modes = draw(st.lists(st.integers(0, len(pairs) - 1), max_size=6))
    pairs += [pairs[i] for i in modes]

    balance = draw(st.sampled_from(["exact", "surplus"] if feasible else ["as drawn", "exact", "surplus"]))
    if feasible:
        covered = np.zeros(n, np.int64)
        for o, c in coverage:
            covered[o] += demand[c]
        supply[plants] = covered[plants]
        if balance == "surplus":
            supply[plants] += draw(st.lists(st.integers(0, 6), min_size=n_p, max_size=n_p))
    elif balance == "exact":
        supply[plants] = _split(draw, int(demand.sum()), n_p)
    elif balance == "surplus":
        supply[plants[0]] += max(0, int(demand.sum() - supply.sum())) + draw(st.integers(0, 5))

    low_cost = -3 if negative_costs else 0
    cost, capacity, minimum = [], [], []
    for i, (o, d) in enumerate(pairs):
        between_warehouses = kind[o] == SiteKind.WAREHOUSE and kind[d] == SiteKind.WAREHOUSE
        cost.append(draw(st.integers(0 if between_warehouses else low_cost, 8)))
        if feasible and i < len(coverage):
            capacity.append(NONE)
            minimum.append(0)
            continue
        cap = draw(st.one_of(st.just(NONE), st.integers(0, 15)))
        least = draw(st.sampled_from([0, 0, 0, 1, 2, 4])) if lane_minimums and not feasible else 0
        capacity.append(cap)
        minimum.append(least if cap == NONE else min(least, cap))

    # One lane repeated as many tied modes (five or more once overflowed a capacity sum).
    copies = draw(st.sampled_from([0, 0, 0, 5, 6]))
    if copies:
        i = draw(st.integers(0, len(pairs) - 1))
        pairs += [pairs[i]] * copies
        cost += [cost[i]] * copies
        capacity += [capacity[i]] * copies
        minimum += [minimum[i]] * copies

    week = WeekData.from_arrays(
        kind,
        [o for o, _ in pairs],
        [d for _, d in pairs],
        cost,
        supply=supply,
        demand=demand,
        shortage_penalty=penalty,
        throughput_capacity=throughput,
        handling_cost=handling,
        lane_capacity=capacity,
        lane_min=minimum,
    )
    if draw(st.booleans()):
        week = draw(tightened(week))
    return week


@st.composite
def tightened(draw, week: WeekData) -> WeekData:
    """``week`` with some bounds moved onto an optimal flow, which stays optimal.

    Lanes get capacity or minimum exactly equal to the flow they carry,
    warehouses a throughput capacity equal to their throughput, plants a
    supply equal to what they ship. Each change only shrinks the feasible set
    around a plan that stays feasible, so the optimum is unchanged, and the new
    optimal flow is degenerate (basic arcs at their bounds).
    """
    inst = assemble_instance(week)
    sol = solve_flow(inst)
    if sol.status != OPTIMAL:
        return week
    lane_flow = sol.flow[inst.lane_arc[0]]
    m, n = week.n_lanes, week.n_sites
    at_cap = np.array(draw(st.lists(st.booleans(), min_size=m, max_size=m)), dtype=bool)
    at_min = np.array(draw(st.lists(st.booleans(), min_size=m, max_size=m)), dtype=bool)
    capacity = np.where(at_cap, lane_flow, week.lane_capacity)
    minimum = np.where(at_min, lane_flow, week.lane_min)

    out_flow = np.zeros(n, np.int64)
    np.add.at(out_flow, week.lane_origin, lane_flow)
    pick = np.array(draw(st.lists(st.booleans(), min_size=n, max_size=n)), dtype=bool)
    is_wh = week.site_kind == SiteKind.WAREHOUSE
    is_plant = week.site_kind == SiteKind.PLANT
    throughput = np.where(pick & is_wh, out_flow, week.throughput_capacity)
    supply = np.where(pick & is_plant, out_flow, week.supply)
    return replace_week(
        week, lane_capacity=capacity, lane_min=minimum, throughput_capacity=throughput, supply=supply
    )


@st.composite
def balanced_transport(draw, max_plants: int = 4, max_customers: int = 5):
    """Integer masses ``a`` (plants), ``b`` (customers) with equal totals and an integer cost matrix."""
    n_p = draw(st.integers(1, max_plants))
    n_c = draw(st.integers(1, max_customers))
    a = draw(st.lists(st.integers(1, 10), min_size=n_p, max_size=n_p))
    b = draw(st.lists(st.integers(1, 10), min_size=n_c, max_size=n_c))
    gap = sum(a) - sum(b)
    if gap > 0:
        b[-1] += gap
    else:
        a[-1] -= gap
    cost = draw(st.lists(st.integers(0, 12), min_size=n_p * n_c, max_size=n_p * n_c))
    return np.array(a, np.int64), np.array(b, np.int64), np.array(cost, np.int64).reshape(n_p, n_c)


def transport_week(a: np.ndarray, b: np.ndarray, cost: np.ndarray) -> WeekData:
    """Plants with supply ``a``, customers with demand ``b``, a lane per pair at ``cost[i, j]``."""
    n_p, n_c = cost.shape
    origin, destination = np.meshgrid(np.arange(n_p), n_p + np.arange(n_c), indexing="ij")
    return WeekData.from_arrays(
        [SiteKind.PLANT] * n_p + [SiteKind.CUSTOMER] * n_c,
        origin.ravel(),
        destination.ravel(),
        cost.ravel(),
        supply=np.concatenate([a, np.zeros(n_c, np.int64)]),
        demand=np.concatenate([np.zeros(n_p, np.int64), b]),
    )


@dataclass(frozen=True)
class TreeWeek:
    """A week with a unique, non-degenerate optimal basis and its hand-rule prices."""

    week: WeekData
    #: price of each site's arrival node and of each site's departure node
    #: (they differ only for warehouses with a throughput arc)
    price_in: np.ndarray
    price_out: np.ndarray


@st.composite
def tree_week(draw, max_plants: int = 3, max_warehouses: int = 3, max_extra_customers: int = 3) -> TreeWeek:
    """A forest of lanes rooted at the plants, every lane and site strictly inside its bounds.

    Each warehouse hangs off a plant or an earlier warehouse, each plant and
    warehouse has a customer of its own, further customers hang anywhere;
    demands are positive, every plant keeps spare supply, and lane and
    throughput capacities exceed the flow. So every arc of the spanning tree
    (lanes, throughput arcs, plant -> SPARE) is strictly between its bounds,
    and the dual is unique: a site's price is its parent's price plus the lane
    cost (plus the handling cost through a warehouse). Idle lanes are added at
    a cost strictly above the tree route, so they stay at zero with a positive
    reduced cost and the optimal flow is unique too. No shortage penalties.
    """
    n_p = draw(st.integers(1, max_plants))
    n_w = draw(st.integers(0, max_warehouses))
    plants = list(range(n_p))
    warehouses = list(range(n_p, n_p + n_w))
    parent = {w: draw(st.sampled_from(plants + warehouses[: w - n_p])) for w in warehouses}
    extra = draw(st.lists(st.sampled_from(plants + warehouses), max_size=max_extra_customers))
    customer_parent = plants + warehouses + extra
    n_c = len(customer_parent)
    customers = list(range(n_p + n_w, n_p + n_w + n_c))
    parent.update(zip(customers, customer_parent))
    n = n_p + n_w + n_c
    kind = [SiteKind.PLANT] * n_p + [SiteKind.WAREHOUSE] * n_w + [SiteKind.CUSTOMER] * n_c

    demand = np.zeros(n, np.int64)
    demand[customers] = draw(st.lists(st.integers(1, 9), min_size=n_c, max_size=n_c))
    through = demand.copy()  # units passing each site = its subtree's demand
    for v in sorted(parent, reverse=True):  # children have larger indices than parents
        through[parent[v]] += through[v]
    supply = np.zeros(n, np.int64)
    supply[plants] = through[plants] + np.array(draw(st.lists(st.integers(1, 5), min_size=n_p, max_size=n_p)))

    handling = np.zeros(n, np.int64)
    throughput = np.full(n, NONE, np.int64)
    for w in warehouses:
        handling[w] = draw(st.integers(0, 3))
        throughput[w] = draw(st.one_of(st.just(NONE), st.integers(1, 5).map(lambda k, w=w: int(through[w]) + k)))

    price_in = np.zeros(n, np.int64)
    price_out = np.zeros(n, np.int64)
    origin, destination, cost, capacity = [], [], [], []
    for v in sorted(parent):
        c = draw(st.integers(-3, 9))
        price_in[v] = price_out[parent[v]] + c
        price_out[v] = price_in[v] + handling[v]
        origin.append(parent[v])
        destination.append(v)
        cost.append(c)
        capacity.append(draw(st.one_of(st.just(NONE), st.integers(1, 5).map(lambda k, v=v: int(through[v]) + k))))
    idle = draw(st.lists(st.tuples(st.sampled_from(plants + warehouses), st.sampled_from(warehouses + customers)), max_size=4))
    for o, d in idle:
        if o == d:
            continue
        origin.append(o)
        destination.append(d)
        cost.append(int(price_in[d] - price_out[o]) + draw(st.integers(1, 4)))
        capacity.append(draw(st.one_of(st.just(NONE), st.integers(0, 5))))

    week = WeekData.from_arrays(
        kind,
        origin,
        destination,
        cost,
        supply=supply,
        demand=demand,
        throughput_capacity=throughput,
        handling_cost=handling,
        lane_capacity=capacity,
    )
    return TreeWeek(week, price_in, price_out)


#: The hard cases a degenerate week must reach, each in at least 30 % of examples.
CASES = (
    "ties in rates",
    "supply used exactly",
    "lane exactly full",
    "warehouse exactly full",
    "minimum binding",
    "shortage taken",
    "zero demand with a penalty",
)
#: Further cases worth knowing the share of (no least share asked).
MORE_CASES = ("a limit worth more", "one more unit and one less differ")


@st.composite
def degenerate_week(draw, *, max_plants: int = 3, max_warehouses: int = 3, max_customers: int = 5) -> WeekData:
    """A small feasible week, tightened around its optimal flow (see :data:`CASES`).

    Rates are 1 or 2 into and out of warehouses and 3 or 4 direct (ties
    everywhere, several modes on one pair at one rate, warehouses worth
    using); every customer has a lane from a plant and one from a warehouse;
    small capacities on some lanes hold the plan back, so that capacities are
    worth something and penalties of 3 or 4 (near the delivered cost) are
    taken; one customer in three needs nothing but has a penalty. After the
    week is solved, some bounds it uses move onto its flow (see
    :func:`_tighten_some`): the same flow stays optimal and is degenerate at
    every bound it now touches.
    """
    n_p = draw(st.integers(1, max_plants))
    n_w = draw(st.integers(1, max_warehouses))
    n_c = draw(st.integers(2, max_customers))
    plants, warehouses = list(range(n_p)), list(range(n_p, n_p + n_w))
    customers = list(range(n_p + n_w, n_p + n_w + n_c))
    n = n_p + n_w + n_c
    kind = [SiteKind.PLANT] * n_p + [SiteKind.WAREHOUSE] * n_w + [SiteKind.CUSTOMER] * n_c
    demand = np.zeros(n, np.int64)
    penalty = np.full(n, NONE, np.int64)
    for c in customers:
        demand[c] = draw(st.sampled_from([0, 2, 3, 5, 8]))
        penalty[c] = draw(st.sampled_from([NONE, 3, 3, 5]))
        if draw(st.integers(0, 2)) == 0:
            demand[c], penalty[c] = 0, draw(st.sampled_from([1, 4]))
    origin, destination = [], []
    for w in warehouses:  # every warehouse is served by the first plant, and serves
        origin.append(plants[0])
        destination.append(w)
    for c in customers:
        origin += [plants[0], draw(st.sampled_from(warehouses))]
        destination += [c, c]
    extra = draw(st.lists(st.tuples(st.sampled_from(plants + warehouses), st.sampled_from(warehouses + customers)), max_size=6))
    for o, d in extra:
        if o != d:
            origin.append(o)
            destination.append(d)
    modes = draw(st.lists(st.integers(0, len(origin) - 1), max_size=3))
    origin += [origin[i] for i in modes]
    destination += [destination[i] for i in modes]
    # Through a warehouse (1 + 1, handling 0 or 1) is cheaper than direct (3 or 6)
    # or as cheap; a shortage penalty of 3 or 5 undercuts the dear direct lanes.
    rates = {SiteKind.PLANT: {SiteKind.WAREHOUSE: [1], SiteKind.CUSTOMER: [3, 6]},
             SiteKind.WAREHOUSE: {SiteKind.WAREHOUSE: [1, 2], SiteKind.CUSTOMER: [1]}}
    cost = [draw(st.sampled_from(rates[kind[o]][kind[d]])) for o, d in zip(origin, destination)]
    for k, i in enumerate(modes):  # a second mode at the same rate
        cost[len(cost) - len(modes) + k] = cost[i]
    supply = np.zeros(n, np.int64)
    total = int(demand.sum())
    # The first plant reaches every site and can always cover the week alone:
    # with exactly what is needed, or with some to spare.
    supply[plants] = [draw(st.integers(0, 3)) for _ in plants]
    supply[plants[0]] = total + draw(st.sampled_from([0, 0, 2]))
    # Small capacities on the cheap lanes out of warehouses make the plan pay for
    # what they hold back; the direct lanes stay unlimited, so the week stays feasible.
    capacity = [
        draw(st.sampled_from([1, 2, 4])) if kind[o] == SiteKind.WAREHOUSE else NONE
        for o in origin
    ]
    week = WeekData.from_arrays(
        kind, origin, destination, cost, supply=supply, demand=demand, shortage_penalty=penalty,
        handling_cost=[draw(st.sampled_from([0, 0, 1])) if s in warehouses else 0 for s in range(n)],
        lane_capacity=capacity,
    )
    return _tighten_some(draw, week)


def _tighten_some(draw, week: WeekData) -> WeekData:
    """Bounds moved onto the optimal flow, sparingly: the plan stays optimal and becomes degenerate.

    Only bounds the plan uses move, each with its own chance (a lane's
    capacity one in three, its minimum one in four, a plant's supply one in
    three, a warehouse's throughput one in two), so that the capacities that
    held the plan back keep their value.
    """
    inst = assemble_instance(week)
    sol = solve_flow(inst)
    if sol.status != OPTIMAL:
        return week
    lane_flow = sol.flow[inst.lane_arc[0]]
    used = lane_flow > 0

    def chance(count: int, out_of: int, size: int) -> np.ndarray:
        return np.array(draw(st.lists(st.integers(1, out_of), min_size=size, max_size=size))) <= count

    m, n = week.n_lanes, week.n_sites
    capacity = np.where(used & chance(1, 3, m), lane_flow, week.lane_capacity)
    minimum = np.where(used & chance(1, 4, m), lane_flow, week.lane_min)
    shipped = np.zeros(n, np.int64)
    np.add.at(shipped, week.lane_origin, lane_flow)
    is_plant = (week.site_kind == SiteKind.PLANT) & (shipped > 0)
    is_wh = (week.site_kind == SiteKind.WAREHOUSE) & (shipped > 0)
    supply = np.where(is_plant & chance(1, 3, n), shipped, week.supply)
    throughput = np.where(is_wh & chance(1, 2, n), shipped, week.throughput_capacity)
    return replace_week(week, lane_capacity=capacity, lane_min=minimum, throughput_capacity=throughput, supply=supply)


def cases_of(week: WeekData) -> set[str]:
    """The cases of :data:`CASES` that ``week`` hits (solving it with the planner to see its plan)."""
    found = set()
    if len(set(week.lane_cost.tolist())) < week.n_lanes:
        found.add("ties in rates")
    zero_need = (week.site_kind == SiteKind.CUSTOMER) & (week.demand == 0) & (week.shortage_penalty != NONE)
    if zero_need.any():
        found.add("zero demand with a penalty")
    inst = assemble_instance(week)
    sol = solve_flow(inst)
    if sol.status != OPTIMAL:
        return found
    lanes = inst.lane_arc[0]
    flow = sol.flow[lanes]
    if ((week.lane_capacity != NONE) & (flow == week.lane_capacity) & (flow > 0)).any():
        found.add("lane exactly full")
    if ((week.lane_min > 0) & (flow == week.lane_min)).any():
        found.add("minimum binding")
    shipped = np.zeros(week.n_sites, np.int64)
    np.add.at(shipped, week.lane_origin, flow)
    plants = (week.site_kind == SiteKind.PLANT) & (week.supply > 0)
    if (plants & (shipped == week.supply)).any():
        found.add("supply used exactly")
    warehouses = (week.site_kind == SiteKind.WAREHOUSE) & (week.throughput_capacity != NONE)
    if (warehouses & (shipped == week.throughput_capacity) & (shipped > 0)).any():
        found.add("warehouse exactly full")
    short = inst.arc_kind == 3  # ArcKind.SHORTAGE
    if (sol.flow[short] > 0).any():
        found.add("shortage taken")
    limits = optimize(inst).limits
    if limits is not None and (limits.loosen > 0).any():
        found.add("a limit worth more")
    if limits is not None and ((limits.blocked == 0) & (limits.tighten != limits.loosen)).any():
        found.add("one more unit and one less differ")
    return found
