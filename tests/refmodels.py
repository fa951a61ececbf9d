"""Outside references for the functional core, and random planning weeks to feed them.

The references solve the same :class:`planner.core.network.Instance` with
general-purpose libraries that share no code with the planner:

* scipy's ``linprog`` with HiGHS, on the node-arc LP (one equality row per
  node, one bounded column per arc), for the optimal cost and a dual;
* networkx's ``network_simplex`` on a multigraph (several modes on one
  origin-destination pair are parallel arcs), for the optimal cost and flow.

The hypothesis strategies draw small weeks with the awkward features real
weeks have: tied costs, supply exactly equal to demand, lanes whose capacity
or minimum equals the flow they carry, zero-cost lanes, several modes on one
pair, warehouses with throughput capacity and handling cost, customers with
and without shortage penalties, lane minimums, and some infeasible weeks.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass

import networkx as nx
import numpy as np
import scipy.sparse as sp
from hypothesis import HealthCheck, settings
from hypothesis import strategies as st
from scipy.optimize import linprog

from planner.core.certificate import certify
from planner.core.network import ArcKind, Instance, assemble_instance
from planner.core.prices import price_ranges
from planner.core.residual import feasible_potential, residual_graph
from planner.core.solve import OPTIMAL, solve_flow
from planner.core.week import NONE, SiteKind, WeekData

#: Settings of the property tests: many examples, no per-example deadline
#: (the first call pays for imports), no example database written into the tree.
PROPERTY = settings(
    max_examples=150,
    deadline=None,
    database=None,
    suppress_health_check=[HealthCheck.too_slow],
)

#: HiGHS reports floats; integer data gives integer optima and basic duals.
FLOAT_TOLERANCE = 1e-6


# --------------------------------------------------------------------------- references


@dataclass(frozen=True)
class LPAnswer:
    """Answer of the HiGHS reference.

    ``cost`` is the optimal cost rounded to the integer it must be;
    ``potential`` is the dual in the planner's sign convention, shifted so
    that ``potential[spare] == 0`` (floats, as HiGHS gives them).
    """

    status: str
    cost: int | None
    potential: np.ndarray | None
    flow: np.ndarray | None


def node_arc_matrix(inst: Instance) -> sp.csr_matrix:
    """Node-arc incidence matrix: +1 at the tail row, -1 at the head row of each arc."""
    m = inst.n_arcs
    rows = np.concatenate([inst.tail, inst.head])
    cols = np.concatenate([np.arange(m), np.arange(m)])
    data = np.concatenate([np.ones(m), -np.ones(m)])
    return sp.csr_matrix((data, (rows, cols)), shape=(inst.n_nodes, m))


def exact_integer(value: float, what: str) -> int:
    """The integer a float from a reference solver stands for; fail loudly if it is not one."""
    nearest = round(value)
    assert abs(value - nearest) <= FLOAT_TOLERANCE * max(1.0, abs(value)), f"{what} {value!r} is not integral"
    return int(nearest)


def linprog_reference(inst: Instance) -> LPAnswer:
    """Solve the node-arc LP of ``inst`` with scipy's ``linprog(method="highs")``.

    Rows: ``sum_out x - sum_in x = b_v`` for every node; columns: one per arc
    with bounds ``[lower, upper]``, no upper bound where the arc is unlimited
    (the planner's finite stand-in for "unlimited" is not used here).

    Sign of the dual: HiGHS' ``eqlin.marginals[v]`` is d(optimal cost)/d(b_v).
    The LP dual is ``max b.y`` s.t. ``y_tail - y_head <= c`` on free arcs, so
    ``pi = -y`` gives the planner's ``c + pi(tail) - pi(head) >= 0`` and
    ``-b.pi`` as the objective; then ``pi - pi[spare]`` fixes SPARE at 0.
    """
    upper = np.where(inst.unlimited, np.inf, inst.upper.astype(np.float64))
    bounds = np.column_stack([inst.lower.astype(np.float64), upper])
    res = linprog(
        inst.cost.astype(np.float64),
        A_eq=node_arc_matrix(inst),
        b_eq=inst.supply.astype(np.float64),
        bounds=bounds,
        method="highs",
    )
    if res.status == 2:
        return LPAnswer("infeasible", None, None, None)
    assert res.status == 0, f"HiGHS stopped with status {res.status}: {res.message}"
    pi = -np.asarray(res.eqlin.marginals, dtype=np.float64)
    pi = pi - pi[inst.spare]
    return LPAnswer(OPTIMAL, exact_integer(res.fun, "HiGHS optimal cost"), pi, res.x)


def to_networkx(inst: Instance) -> tuple[nx.MultiDiGraph, int]:
    """The instance as a networkx multigraph for ``network_simplex``, lower bounds shifted out.

    networkx has no lower bounds, so ``x = l + x'``: the tail supplies ``l``
    less, the head needs ``l`` less, and the capacity becomes ``u - l``; the
    constant ``sum c l`` is returned to add back. networkx's node attribute
    ``demand`` is inflow minus outflow, i.e. ``-b``. Unlimited arcs get no
    ``capacity`` attribute (networkx reads that as infinite). Edge keys are the
    arc indices, so the flow maps back arc by arc.
    """
    b = inst.supply.astype(np.int64).copy()
    np.subtract.at(b, inst.tail, inst.lower)
    np.add.at(b, inst.head, inst.lower)
    graph = nx.MultiDiGraph()
    for v in range(inst.n_nodes):
        graph.add_node(v, demand=-int(b[v]))
    for a in range(inst.n_arcs):
        attrs = {"weight": int(inst.cost[a])}
        if not inst.unlimited[a]:
            attrs["capacity"] = int(inst.upper[a] - inst.lower[a])
        graph.add_edge(int(inst.tail[a]), int(inst.head[a]), key=a, **attrs)
    constant = sum(int(c) * int(l) for c, l in zip(inst.cost, inst.lower))
    return graph, constant


@dataclass(frozen=True)
class NetworkxAnswer:
    status: str
    cost: int | None
    flow: np.ndarray | None


def networkx_reference(inst: Instance) -> NetworkxAnswer:
    """Solve ``inst`` with networkx's ``network_simplex``; flow per arc includes the lower bounds."""
    graph, constant = to_networkx(inst)
    try:
        cost, flow_dict = nx.network_simplex(graph)
    except nx.NetworkXUnfeasible:
        return NetworkxAnswer("infeasible", None, None)
    flow = inst.lower.astype(np.int64).copy()
    for a in range(inst.n_arcs):
        flow[a] += flow_dict[int(inst.tail[a])][int(inst.head[a])][a]
    return NetworkxAnswer(OPTIMAL, int(cost) + constant, flow)


def networkx_cost(inst: Instance) -> int | None:
    """Optimal cost by networkx's ``min_cost_flow_cost``; None when infeasible."""
    graph, constant = to_networkx(inst)
    try:
        return int(nx.min_cost_flow_cost(graph)) + constant
    except nx.NetworkXUnfeasible:
        return None


def lagrangian_bound(inst: Instance, pi) -> int:
    """Lagrangian dual value of any potential, computed on Python integers.

    Relaxing conservation with multipliers ``pi`` leaves
    ``min_{l <= x <= u} sum_a r_a x_a - b.pi`` with ``r = c + pi(tail) - pi(head)``,
    i.e. ``-b.pi + sum_a (l_a max(r_a, 0) + u_a min(r_a, 0))``: a lower bound on
    the optimal cost for every ``pi`` (weak duality).
    """
    pi = [int(p) for p in pi]
    total = -sum(int(bv) * p for bv, p in zip(inst.supply, pi))
    for a in range(inst.n_arcs):
        r = int(inst.cost[a]) + pi[int(inst.tail[a])] - pi[int(inst.head[a])]
        total += int(inst.lower[a]) * max(r, 0) + int(inst.upper[a]) * min(r, 0)
    return total


def certified_dual_objective(inst: Instance, flow: np.ndarray, pi) -> int:
    """The dual objective that :func:`planner.core.certificate.certify` computes for any potential ``pi``."""
    return certify(inst, flow, np.asarray(pi, dtype=np.int64)).dual_objective


# --------------------------------------------------------------------------- the core, in one call


@dataclass(frozen=True)
class Analysis:
    inst: Instance
    flow: np.ndarray
    cost: int
    residual: object
    ranges: object


def analyse(inst: Instance) -> Analysis | None:
    """Solve ``inst`` with the planner and compute its price ranges; None when infeasible."""
    sol = solve_flow(inst)
    if sol.status != OPTIMAL:
        return None
    res = residual_graph(inst, sol.flow)
    ranges = price_ranges(inst, res, feasible_potential(inst, res))
    return Analysis(inst, sol.flow, sol.cost, res, ranges)


def with_extra_need(inst: Instance, node: int, units: int) -> Instance:
    """``inst`` with ``units`` more units needed at ``node`` (negative: fewer), SPARE balancing."""
    supply = inst.supply.copy()
    supply[node] -= units
    supply[inst.spare] += units
    return dataclasses.replace(inst, supply=supply)


def replace_week(week: WeekData, **arrays) -> WeekData:
    """A copy of ``week`` with some arrays replaced."""
    return dataclasses.replace(week, **{k: np.asarray(v, dtype=np.int64) for k, v in arrays.items()})


# --------------------------------------------------------------------------- strategies


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


def throughput_arc_of(inst: Instance, site: int) -> int:
    """Instance arc of a split warehouse's throughput."""
    (arc,) = np.flatnonzero((inst.arc_kind == ArcKind.THROUGHPUT) & (inst.arc_ref == site))
    return int(arc)


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
