"""The planning model written once, from the input as a user gives it, for outside solvers.

Every test that checks the planner against scipy's HiGHS, networkx or POT
builds its reference here, from ``WeekData`` arrays or straight from the CSV
files (:func:`week_from_files`), following the README's description of the
model and sharing no code with the planner's network construction:

* each site in each week is a node; plant supply is an upper bound: unused
  supply flows to a virtual node SPARE at zero cost, up to the plant's supply;
* a customer with a shortage penalty may be delivered by a virtual node SHORT
  at that penalty per unit (also at zero demand); SHORT is fed from SPARE;
* a warehouse with a handling cost or a throughput capacity in any week is
  two nodes, in and out, joined by an arc carrying the handling cost and the
  throughput capacity; lanes arrive at ``in`` and leave from ``out``;
* lanes carry their unit cost, capacity (none: unlimited) and minimum;
* in a linked horizon, stock moves from a site in week ``t`` to the same site
  in week ``t + 1`` (before handling) at the week's holding cost, up to its
  storage capacity (0: none; unset with a holding cost: unlimited); customers
  and the last week carry none.

:func:`solve_lp` solves the node-arc LP with scipy's ``linprog(method="highs")``
(cost, flows, a dual), :func:`solve_networkx` with networkx's
``network_simplex``, :func:`highs_cost_ranging` asks HiGHS (``highspy``) for its
cost ranging.
"""

from __future__ import annotations

import csv
import dataclasses
import io
import math
from dataclasses import dataclass, field
from decimal import Decimal

import networkx as nx
import numpy as np
import scipy.sparse as sp
from scipy.optimize import linprog

from planner.core.week import NONE, SiteKind, WeekData

#: HiGHS answers in floats; integer data has integer optima.
TOLERANCE = 1e-6
KINDS = {"plant": SiteKind.PLANT, "warehouse": SiteKind.WAREHOUSE, "customer": SiteKind.CUSTOMER}


@dataclass
class Network:
    """Nodes with net supply, arcs with cost and bounds (``high`` is inf where unlimited).

    ``site_in[t][s]`` / ``site_out[t][s]`` name the nodes of site ``s`` in week
    ``t`` (equal unless the warehouse is split); ``lane[t][l]`` the arc of lane
    ``l``; ``through[t][s]`` the in -> out arc of a split warehouse;
    ``stock[(t, s)]`` the stock arc out of week ``t``.
    """

    supply: list[int] = field(default_factory=list)
    tail: list[int] = field(default_factory=list)
    head: list[int] = field(default_factory=list)
    cost: list[int] = field(default_factory=list)
    low: list[int] = field(default_factory=list)
    high: list[float] = field(default_factory=list)
    site_in: list[list[int]] = field(default_factory=list)
    site_out: list[list[int]] = field(default_factory=list)
    lane: list[list[int]] = field(default_factory=list)
    through: list[dict] = field(default_factory=list)
    stock: dict = field(default_factory=dict)
    spare: int = -1
    short: int = -1

    def node(self, net_supply: int = 0) -> int:
        self.supply.append(int(net_supply))
        return len(self.supply) - 1

    def arc(self, tail: int, head: int, cost, low=0, high=None) -> int:
        self.tail.append(tail)
        self.head.append(head)
        self.cost.append(int(cost))
        self.low.append(int(low))
        self.high.append(math.inf if high is None else float(high))
        return len(self.tail) - 1

    def with_need(self, node: int, units: int) -> "Network":
        """The same network with ``units`` more needed at ``node`` (fewer when negative), SPARE balancing."""
        supply = list(self.supply)
        supply[node] -= units
        supply[self.spare] += units
        return dataclasses.replace(self, supply=supply)


def reference_network(weeks: list[WeekData] | WeekData) -> Network:
    """The README's model of consecutive weeks (one week is the one-week case)."""
    weeks = [weeks] if isinstance(weeks, WeekData) else list(weeks)
    kind = weeks[0].site_kind
    n_sites = weeks[0].n_sites
    split = [
        kind[s] == SiteKind.WAREHOUSE
        and any(w.handling_cost[s] != 0 or w.throughput_capacity[s] != NONE for w in weeks)
        for s in range(n_sites)
    ]
    net = Network()
    for w in weeks:
        ins = [net.node(w.supply[s] - w.demand[s]) for s in range(n_sites)]
        outs = [net.node() if split[s] else ins[s] for s in range(n_sites)]
        net.site_in.append(ins)
        net.site_out.append(outs)
    net.spare = net.node(-sum(int(w.supply.sum() - w.demand.sum()) for w in weeks))
    net.short = net.node()
    for t, w in enumerate(weeks):
        _week_arcs(net, t, w, split, last=t == len(weeks) - 1)
    if any((w.shortage_penalty != NONE).any() for w in weeks):
        net.arc(net.spare, net.short, 0)
    return net


def _week_arcs(net: Network, t: int, w: WeekData, split: list[bool], last: bool) -> None:
    ins, outs = net.site_in[t], net.site_out[t]
    net.lane.append([
        net.arc(outs[int(o)], ins[int(d)], c, low, None if cap == NONE else cap)
        for o, d, c, cap, low in zip(w.lane_origin, w.lane_destination, w.lane_cost, w.lane_capacity, w.lane_min)
    ])
    through = {}
    for s in range(w.n_sites):
        if split[s]:
            cap = int(w.throughput_capacity[s])
            through[s] = net.arc(ins[s], outs[s], w.handling_cost[s], 0, None if cap == NONE else cap)
        if w.supply[s] > 0:
            net.arc(ins[s], net.spare, 0, 0, w.supply[s])
        if w.shortage_penalty[s] != NONE:
            net.arc(net.short, ins[s], w.shortage_penalty[s])
        store = 0 if w.storage_capacity is None else int(w.storage_capacity[s])
        if not last and store != 0 and w.site_kind[s] != SiteKind.CUSTOMER:
            holding = 0 if w.holding_cost is None else w.holding_cost[s]
            net.stock[(t, s)] = net.arc(ins[s], net.site_in[t + 1][s], holding, 0, None if store == NONE else store)
    net.through.append(through)


@dataclass(frozen=True)
class Answer:
    """A reference solver's answer: ``status`` is optimal, infeasible or unbounded."""

    status: str
    cost: int | float | None = None  #: exact integer; minus infinity when unbounded
    flow: np.ndarray | None = None  #: per arc of the network
    potential: np.ndarray | None = None  #: per node, the planner's sign, SPARE at 0 (floats)


def exact_integer(value: float, what: str) -> int:
    """The integer a float from a reference solver stands for; fail loudly if it is not one."""
    nearest = round(value)
    assert abs(value - nearest) <= TOLERANCE * max(1.0, abs(value)), f"{what} {value!r} is not integral"
    return int(nearest)


def solve_lp(net: Network) -> Answer:
    """The node-arc LP solved by scipy's ``linprog(method="highs")``.

    HiGHS's ``eqlin.marginals[v]`` is d(cost)/d(b_v); the planner's price is
    its negative (``c + pi(tail) - pi(head) >= 0``), shifted so that SPARE is 0.
    """
    m = len(net.tail)
    if any(lo > hi for lo, hi in zip(net.low, net.high)):
        return Answer("infeasible")
    a_eq = sp.csr_matrix(
        (np.r_[np.ones(m), -np.ones(m)], (np.r_[net.tail, net.head], np.r_[np.arange(m), np.arange(m)])),
        shape=(len(net.supply), m),
    )
    bounds = [(lo, None if math.isinf(hi) else hi) for lo, hi in zip(net.low, net.high)]
    result = linprog(net.cost, A_eq=a_eq, b_eq=net.supply, bounds=bounds or None, method="highs")
    if result.status == 2:
        return Answer("infeasible")
    if result.status == 3:
        return Answer("unbounded", -math.inf)
    assert result.status == 0, f"HiGHS stopped with status {result.status}: {result.message}"
    potential = -np.asarray(result.eqlin.marginals, dtype=np.float64)
    potential -= potential[net.spare]
    return Answer("optimal", exact_integer(result.fun, "HiGHS optimal cost"), np.asarray(result.x), potential)


def solve_networkx(net: Network) -> Answer:
    """The network solved by networkx's ``network_simplex`` (lower bounds shifted out by hand)."""
    need = list(net.supply)
    graph = nx.MultiDiGraph()
    for a, (t, h, lo, hi) in enumerate(zip(net.tail, net.head, net.low, net.high)):
        need[t] -= lo
        need[h] += lo
        attrs = {"weight": net.cost[a]}
        if not math.isinf(hi):
            attrs["capacity"] = int(hi) - lo
        graph.add_edge(t, h, key=a, **attrs)
    for v, b in enumerate(need):
        graph.add_node(v, demand=-b)  # networkx's demand is inflow minus outflow
    try:
        cost, flow_dict = nx.network_simplex(graph)
    except nx.NetworkXUnfeasible:
        return Answer("infeasible")
    except nx.NetworkXUnbounded:
        return Answer("unbounded", -math.inf)
    flow = np.array(
        [lo + flow_dict[t][h][a] for a, (t, h, lo) in enumerate(zip(net.tail, net.head, net.low))], dtype=np.int64
    )
    return Answer("optimal", int(cost) + sum(c * lo for c, lo in zip(net.cost, net.low)), flow)


def optimal_cost(weeks: list[WeekData] | WeekData) -> int | float | None:
    """The optimal cost by scipy HiGHS: None when no plan exists, minus infinity when unbounded."""
    answer = solve_lp(reference_network(weeks))
    return None if answer.status == "infeasible" else answer.cost


def highs_cost_ranging(week: WeekData) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """HiGHS's cost ranging of each lane of one week: ``(down, up, value)``.

    ``down``/``up`` are the lowest and highest rates for which HiGHS's optimal
    basis stays optimal (infinite where unbounded); ``value`` its lane flows.
    """
    import highspy

    net = reference_network(week)
    m, n = len(net.tail), len(net.supply)
    a = sp.csc_matrix(
        (np.r_[np.ones(m), -np.ones(m)], (np.r_[net.tail, net.head], np.r_[np.arange(m), np.arange(m)])), shape=(n, m)
    )
    model = highspy.HighsLp()
    model.num_col_, model.num_row_ = m, n
    model.col_cost_ = np.array(net.cost, dtype=np.float64)
    model.col_lower_ = np.array(net.low, dtype=np.float64)
    model.col_upper_ = np.where(np.isinf(net.high), highspy.kHighsInf, net.high)
    model.row_lower_ = model.row_upper_ = np.array(net.supply, dtype=np.float64)
    model.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    model.a_matrix_.start_, model.a_matrix_.index_, model.a_matrix_.value_ = a.indptr, a.indices, a.data
    highs = highspy.Highs()
    highs.setOptionValue("output_flag", False)
    highs.passModel(model)
    highs.run()
    assert highs.getModelStatus() == highspy.HighsModelStatus.kOptimal
    _, ranging = highs.getRanging()
    lanes = np.array(net.lane[0], dtype=np.int64)
    value = np.asarray(highs.getSolution().col_value)[lanes]
    return np.asarray(ranging.col_cost_dn.value_)[lanes], np.asarray(ranging.col_cost_up.value_)[lanes], value


def with_lane(week: WeekData, lane: int, **changes: int) -> WeekData:
    """``week`` with one lane's ``capacity``, ``minimum`` or ``cost`` changed by the given amounts."""
    fields = {"capacity": "lane_capacity", "minimum": "lane_min", "cost": "lane_cost"}
    return _changed(week, fields, lane, changes)


def with_site(week: WeekData, site: int, **changes: int) -> WeekData:
    """``week`` with one site's ``throughput``, ``storage``, ``supply`` or ``demand`` changed by the given amounts."""
    fields = {"throughput": "throughput_capacity", "storage": "storage_capacity", "supply": "supply", "demand": "demand"}
    return _changed(week, fields, site, changes)


def _changed(week: WeekData, fields: dict, index: int, changes: dict) -> WeekData:
    arrays = {}
    for name, delta in changes.items():
        values = getattr(week, fields[name]).copy()
        values[index] += delta
        arrays[fields[name]] = values
    return dataclasses.replace(week, **arrays)


def _input_rows(text: str) -> list[dict[str, str]]:
    """The rows of an input CSV as dicts (header names lower-cased, cells stripped)."""
    reader = csv.DictReader(io.StringIO(text))
    return [{k.strip().lower(): (v or "").strip() for k, v in row.items()} for row in reader]


def _scaled(text: str, decimals: int, default: int) -> int:
    return default if text == "" else int(Decimal(text).scaleb(decimals))


@dataclass(frozen=True)
class FileWeek:
    """One week read straight from a folder's CSV texts: the arrays and the names behind them."""

    week: WeekData
    site_codes: list[str]
    lane_keys: list[tuple[str, str, str]]  #: (origin, destination, mode) per lane, in file order


def week_from_files(files: dict[str, str], period: str, cost_decimals: int = 4) -> FileWeek:
    """One week of a load folder's CSV texts as ``WeekData`` (costs scaled by ``10**cost_decimals``)."""
    sites = _input_rows(files["sites.csv"])
    codes = [s["site"] for s in sites]
    index = {c: i for i, c in enumerate(codes)}
    n = len(codes)

    def site_array(column, decimals, default):
        return np.array([_scaled(s.get(column, ""), decimals, default) for s in sites], dtype=np.int64)

    supply, demand, penalty = np.zeros(n, np.int64), np.zeros(n, np.int64), np.full(n, NONE, np.int64)
    for r in _input_rows(files["supply.csv"]):
        if r["period"] == period:
            supply[index[r["site"]]] = _scaled(r["quantity"], 0, 0)
    for r in _input_rows(files["demand.csv"]):
        if r["period"] == period:
            demand[index[r["site"]]] = _scaled(r["quantity"], 0, 0)
            penalty[index[r["site"]]] = _scaled(r.get("shortage_penalty", ""), cost_decimals, NONE)
    lanes = [r for r in _input_rows(files["lanes.csv"]) if r["period"] == period]
    holding = site_array("holding_cost", cost_decimals, 0)
    storage = np.array(
        [_scaled(s.get("storage_capacity", ""), 0, NONE if s.get("holding_cost") else 0) for s in sites], np.int64
    )
    week = WeekData.from_arrays(
        [KINDS[s["kind"].lower()] for s in sites],
        [index[r["origin"]] for r in lanes],
        [index[r["destination"]] for r in lanes],
        [_scaled(r["unit_cost"], cost_decimals, 0) for r in lanes],
        supply=supply, demand=demand, shortage_penalty=penalty,
        throughput_capacity=site_array("throughput_capacity", 0, NONE),
        handling_cost=site_array("handling_cost", cost_decimals, 0),
        lane_capacity=[_scaled(r.get("capacity", ""), 0, NONE) for r in lanes],
        lane_min=[_scaled(r.get("min_quantity", ""), 0, 0) for r in lanes],
        holding_cost=holding, storage_capacity=storage,
    )
    return FileWeek(week, codes, [(r["origin"], r["destination"], r.get("mode", "")) for r in lanes])
