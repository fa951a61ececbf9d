"""Why a week cannot be planned: infeasible weeks and unbounded cycles.

Two things stop a min-cost flow from having an optimal plan, and both deserve a
message a planner can act on rather than a solver status:

* **Infeasible**: not every unit can be moved as required. After removing the
  lower bounds (``x = l + x'``, as :func:`planner.core.solve.shifted_supply` does),
  a super source feeds every node with surplus and a super sink drains every
  node with a need. The week is feasible exactly when a maximum flow
  saturates every source arc (Gale's and Hoffman's feasibility theorem); the
  units it leaves over are the shortfall. A cut of saturated arcs names the
  bottleneck: the customers left short, the lanes, warehouses and storage at
  capacity in front of them, the supply that is used up, and the lane
  minimums that cannot be met.
* **Unbounded**: a cycle of lanes without capacity whose costs add up to less
  than zero pays for sending units round it forever. The planner gives such
  lanes a large artificial bound so the solver would only saturate it;
  :func:`find_unbounded_cycle` finds the cycle before solving.

The cut is taken nearest the unmet needs: its far side is the set of nodes
that can still reach an unmet need in the residual graph of the maximum flow,
so every arc entering it is full and every arc leaving it is empty. When the
needs are all at sites this is the minimum cut nearest the sink; unlike the
one nearest the source, it does not list lanes that are full only because they
serve customers who are satisfied.

References
----------
.. [1] L. R. Ford and D. R. Fulkerson, "Maximal flow through a network",
   Canadian Journal of Mathematics 8, 1956 (max-flow min-cut).
.. [2] D. Gale, "A theorem on flows in networks", Pacific Journal of
   Mathematics 7(2), 1957, and A. J. Hoffman, "Some recent applications of the
   theory of linear inequalities to extremal combinatorial analysis",
   Proceedings of Symposia in Applied Mathematics 10, 1960 (feasible flows
   with supplies, demands and bounds).
.. [3] R. Bellman, "On a routing problem", Quarterly of Applied Mathematics
   16, 1958, and R. K. Ahuja, T. L. Magnanti and J. B. Orlin, *Network
   Flows*, Prentice Hall, 1993, chapter 5 (label-correcting algorithms and
   detecting negative cycles).
"""

from __future__ import annotations

import re
from collections.abc import Sequence
from dataclasses import dataclass, field
from decimal import Decimal

import numpy as np
import scipy.sparse as sp
from ortools.graph.python import max_flow
from scipy.sparse.csgraph import breadth_first_order

from planner.core.network import ArcKind, Instance, NodeRole
from planner.core.residual import label_correcting
from planner.core.solve import shifted_supply

__all__ = ["Infeasibility", "diagnose_infeasible", "find_unbounded_cycle", "describe_cycle"]

#: How many names a message lists before summarising the rest as a count.
MAX_NAMES = 10

_ISO_WEEK = re.compile(r"^\d{4}-W\d{2}$")


@dataclass(frozen=True)
class Infeasibility:
    """What makes an instance infeasible, from a minimum cut.

    Attributes
    ----------
    shortfall : int
        Scaled units that cannot be moved as required (surplus the maximum
        flow cannot place).
    short_customers : list of (site, period, units)
        Sites with a need that the maximum flow leaves unmet, and the scaled
        units missing at each, largest first. When several customers sit
        behind one bottleneck, the split between them is one of many; the
        total is exact.
    limiting_arcs : list of int
        Instance arcs with a capacity (lanes, warehouse throughput, storage)
        that are full and cross the cut into the short region.
    unmet_minimums : list of int
        Lane arcs whose minimum commitment cannot be met: their origin cannot
        receive the units the minimum takes out, their destination cannot pass
        on the units it forces in, or the minimum exceeds the capacity.
    message : str
        The diagnosis in words.
    exhausted_supply : list of (site, period, units)
        Sources whose whole surplus (scaled units) is used inside the short
        region: more supply there would help as much as more capacity.
    """

    shortfall: int
    short_customers: list[tuple[int, int, int]]
    limiting_arcs: list[int]
    unmet_minimums: list[int]
    message: str
    exhausted_supply: list[tuple[int, int, int]] = field(default_factory=list)


class _Names:
    """Words for the nodes and arcs of an instance."""

    def __init__(self, inst: Instance, site_codes, lane_labels, period_codes):
        self.inst = inst
        self.site_codes = site_codes
        self.lane_labels = lane_labels
        self.period_codes = period_codes
        self.multi_period = inst.site_node.shape[0] > 1

    def site(self, s: int) -> str:
        return str(self.site_codes[s]) if self.site_codes is not None else f"site {s}"

    def period(self, t: int) -> str:
        """The period's code, ``period 3`` without codes."""
        return str(self.period_codes[t]) if self.period_codes is not None else f"period {t}"

    def bucket(self, t: int) -> str:
        """``week 2026-W49`` for ISO weeks, ``period X`` otherwise."""
        if self.period_codes is None:
            return self.period(t)
        code = self.period(t)
        return f"week {code}" if _ISO_WEEK.match(code) else f"period {code}"

    def lane(self, lane: int) -> str:
        return str(self.lane_labels[lane]) if self.lane_labels is not None else f"lane {lane}"

    def site_in_period(self, s: int, t: int) -> str:
        return f"{self.site(s)} in {self.period(t)}" if self.multi_period else self.site(s)

    def arc(self, a: int, grouped: bool = False) -> str:
        """Name of arc ``a``; ``grouped`` drops the words a group title already says."""
        inst = self.inst
        kind = int(inst.arc_kind[a])
        ref = int(inst.arc_ref[a])
        t = int(inst.arc_period[a])
        if kind == ArcKind.LANE:
            return f"{self.lane(ref)} in {self.period(t)}" if self.multi_period else self.lane(ref)
        if kind == ArcKind.THROUGHPUT:
            where = self.site_in_period(ref, t)
            return where if grouped else f"throughput of {where}"
        if kind == ArcKind.STOCK:
            where = f"{self.site(ref)} after {self.period(t)}"
            return where if grouped else f"storage at {where}"
        return f"{ArcKind(kind).name.lower()} arc {a}"


def _units(scaled: int, scale: int) -> str:
    """Exact decimal text of a scaled figure."""
    return format((Decimal(int(scaled)) / Decimal(int(scale))).normalize(), "f")


def _count(scaled: int, scale: int) -> str:
    """``1 unit``, ``30 units``, ``2.5 units``."""
    text = _units(scaled, scale)
    return f"{text} unit" if text == "1" else f"{text} units"


def _money(scaled_cost: int, inst: Instance) -> str:
    """Currency per unit of a scaled cost, two decimals unless more are needed."""
    value = Decimal(int(scaled_cost) * inst.quantity_scale) / Decimal(inst.cost_scale)
    cents = value.quantize(Decimal("0.01"))
    return f"{cents}" if cents == value else format(value.normalize(), "f")


def _listing(names: Sequence[str]) -> str:
    shown = ", ".join(names[:MAX_NAMES])
    hidden = len(names) - MAX_NAMES
    return f"{shown} and {hidden} more" if hidden > 0 else shown


def diagnose_infeasible(
    inst: Instance,
    site_codes: Sequence[str] | None = None,
    lane_labels: Sequence[str] | None = None,
    period_codes: Sequence[str] | None = None,
) -> Infeasibility:
    """Explain why an instance has no feasible flow, from a maximum flow and a minimum cut.

    Parameters
    ----------
    inst : Instance
        An instance the min-cost-flow solver reported infeasible.
    site_codes : sequence of str, optional
        ``site_codes[s]`` names site index ``s``; indices are used when None.
    lane_labels : sequence of str, optional
        ``lane_labels[l]`` names lane index ``l`` (for example ``"W2->C017 road"``).
    period_codes : sequence of str, optional
        ``period_codes[t]`` names period ``t`` (``node_period``/``arc_period``).

    Returns
    -------
    Infeasibility

    Raises
    ------
    ValueError
        When the instance is feasible: there is nothing to diagnose.
    RuntimeError
        When the maximum-flow solver does not report an optimal flow.

    Examples
    --------
    A customer needing 80 units behind a lane that carries 50:

    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> week = WeekData.from_arrays([0, 2], [0], [1], [10], supply=[100, 0],
    ...                             demand=[0, 80], lane_capacity=[50])
    >>> d = diagnose_infeasible(assemble_instance(week), site_codes=["P1", "C017"],
    ...                         lane_labels=["P1->C017 road"], period_codes=["2026-W49"])
    >>> d.shortfall, d.short_customers, d.limiting_arcs
    (30, [(1, 0, 30)], [0])
    >>> print(d.message)  # doctest: +NORMALIZE_WHITESPACE
    week 2026-W49 is infeasible: 30 units of demand cannot be served.
    Customers short: C017 (30). Limiting lanes (at capacity): P1->C017 road (cap 50).
    Raise these capacities, add supply reachable from them, or give these customers
    a shortage_penalty.
    """
    names = _Names(inst, site_codes, lane_labels, period_codes)
    gaps = _feasibility_flow(inst)
    if gaps.shortfall == 0 and gaps.over_committed.shape[0] == 0:
        raise ValueError("the instance is feasible: every unit can be moved as required")
    near_need = _can_reach(
        inst, gaps.room, gaps.flow, np.flatnonzero(gaps.deficit > 0), exclude=inst.spare
    )
    capacity_kinds = np.isin(inst.arc_kind, [ArcKind.LANE, ArcKind.THROUGHPUT, ArcKind.STOCK])
    limiting = np.flatnonzero(
        capacity_kinds & ~inst.unlimited & ~near_need[inst.tail] & near_need[inst.head]
    )
    short_customers = _short_customers(inst, gaps.deficit)
    exhausted = np.flatnonzero(near_need & (gaps.b > 0) & (inst.node_role == NodeRole.SITE))
    exhausted_supply = [
        (int(inst.node_site[v]), int(inst.node_period[v]), int(gaps.b[v])) for v in exhausted
    ]
    committed = (inst.arc_kind == ArcKind.LANE) & (inst.lower > 0)
    unmet = committed & ((gaps.deficit[inst.tail] > 0) | (gaps.excess[inst.head] > 0))
    unmet[gaps.over_committed] = True
    unmet_minimums = np.flatnonzero(unmet)
    unreached = _unreached(inst, names, short_customers)
    findings = _Findings(short_customers, limiting, unmet_minimums, exhausted_supply, unreached)
    return Infeasibility(
        shortfall=gaps.shortfall,
        short_customers=short_customers,
        limiting_arcs=[int(a) for a in limiting],
        unmet_minimums=[int(a) for a in unmet_minimums],
        message=_infeasible_message(inst, names, gaps, findings),
        exhausted_supply=exhausted_supply,
    )


@dataclass(frozen=True)
class _Gaps:
    """A maximum flow from the surplus nodes to the needy ones, and what it leaves over."""

    b: np.ndarray  #: net supply after removing the lower bounds
    room: np.ndarray  #: capacity above the lower bound, 0 where the minimum exceeds it
    over_committed: np.ndarray  #: arcs whose minimum exceeds their capacity
    flow: np.ndarray  #: maximum flow on each arc
    excess: np.ndarray  #: surplus per node the flow could not place
    deficit: np.ndarray  #: need per node the flow could not meet

    @property
    def shortfall(self) -> int:
        return int(self.excess.sum())


def _feasibility_flow(inst: Instance) -> _Gaps:
    """Maximum flow from a super source (feeding every surplus) to a super sink (draining every need)."""
    n = inst.n_nodes
    b = shifted_supply(inst)
    room = inst.upper - inst.lower
    over_committed = np.flatnonzero(room < 0)
    room = np.maximum(room, 0)
    source, sink = n, n + 1
    sources = np.flatnonzero(b > 0)
    sinks = np.flatnonzero(b < 0)
    solver = max_flow.SimpleMaxFlow()
    arcs = solver.add_arcs_with_capacity(
        np.concatenate([inst.tail, np.full(sources.shape[0], source), sinks]).astype(np.int64),
        np.concatenate([inst.head, sources, np.full(sinks.shape[0], sink)]).astype(np.int64),
        np.concatenate([room, b[sources], -b[sinks]]).astype(np.int64),
    )
    status = solver.solve(source, sink)
    if status != solver.OPTIMAL:
        raise RuntimeError(f"the maximum-flow solver stopped with status {status.name}")
    flows = np.asarray(solver.flows(arcs), dtype=np.int64)
    m = inst.n_arcs
    excess = np.zeros(n, dtype=np.int64)
    excess[sources] = b[sources] - flows[m : m + sources.shape[0]]
    deficit = np.zeros(n, dtype=np.int64)
    deficit[sinks] = -b[sinks] - flows[m + sources.shape[0] :]
    return _Gaps(b, room, over_committed, flows[:m], excess, deficit)


def _short_customers(inst: Instance, deficit: np.ndarray) -> list[tuple[int, int, int]]:
    """``(site, period, units)`` of the sites whose demand the maximum flow leaves unmet, largest first."""
    short_nodes = np.flatnonzero((deficit > 0) & (inst.supply < 0) & (inst.node_role == NodeRole.SITE))
    short_units = np.minimum(deficit[short_nodes], -inst.supply[short_nodes])
    order = np.lexsort((short_nodes, -short_units))
    return [
        (int(inst.node_site[v]), int(inst.node_period[v]), int(u))
        for v, u in zip(short_nodes[order], short_units[order])
    ]


def _unreached(inst: Instance, names: _Names, short_customers) -> list[str]:
    """Short customers that no arc enters at all (no lane this period)."""
    entered = np.zeros(inst.n_nodes, dtype=bool)
    entered[inst.head[inst.arc_kind != ArcKind.SHORTAGE]] = True
    return [names.site_in_period(s, t) for s, t, _ in short_customers if not entered[inst.site_node[t, s]]]


def _can_reach(inst: Instance, room, flow, targets, exclude: int) -> np.ndarray:
    """Nodes from which the residual graph of ``flow`` reaches one of ``targets``.

    ``exclude`` is left out of the targets: a need at SPARE only says that
    minimums force units where nothing can take them, and every plant can
    reach SPARE, so it would name all of them.
    """
    n = inst.n_nodes
    targets = targets[targets != exclude]
    reach = np.zeros(n, dtype=bool)
    if targets.shape[0] == 0:
        return reach
    fwd = flow < room
    bwd = flow > 0
    # Residual arcs reversed (we search backwards from the needs), plus a root
    # n joined to every target. Weights are 1: csgraph drops explicit zeros.
    rows = np.concatenate([inst.head[fwd], inst.tail[bwd], np.full(targets.shape[0], n)])
    cols = np.concatenate([inst.tail[fwd], inst.head[bwd], targets])
    graph = sp.csr_matrix((np.ones(rows.shape[0]), (rows, cols)), shape=(n + 1, n + 1))
    order = breadth_first_order(graph, n, directed=True, return_predecessors=False)
    reach[order[order < n]] = True
    return reach


@dataclass(frozen=True)
class _Findings:
    """What the cut names, for the message."""

    short_customers: list[tuple[int, int, int]]
    limiting: np.ndarray
    unmet_minimums: np.ndarray
    exhausted_supply: list[tuple[int, int, int]]
    unreached: list[str]


def _infeasible_message(inst: Instance, names: _Names, gaps: _Gaps, found: _Findings) -> str:
    qs = inst.quantity_scale
    parts = [f"{_where(inst, names)} is infeasible: {_what(gaps.shortfall, found.short_customers, qs)}."]
    # SPARE is a source when demand exceeds supply; it says so only when the
    # shortage penalties cannot absorb the difference.
    spare_need = int(inst.supply[inst.spare])
    if gaps.excess[inst.spare] > 0:
        covered = spare_need - int(gaps.excess[inst.spare])
        sentence = f"Total demand exceeds total supply by {_count(spare_need, qs)}"
        if covered > 0:
            sentence += f"; shortage penalties can cover only {_units(covered, qs)} of them"
        parts.append(sentence + ".")
    if found.short_customers:
        parts.append("Customers short: " + _site_units(names, found.short_customers, qs) + ".")
    if found.unreached:
        parts.append(f"No lane reaches: {_listing(found.unreached)}.")
    parts += _limiting_sentences(inst, names, found.limiting)
    if found.exhausted_supply:
        parts.append(
            "All supply that could close the gap is used: "
            + _site_units(names, found.exhausted_supply, qs) + "."
        )
    if found.short_customers:
        parts.append(_advice(found))
    if found.unmet_minimums.shape[0]:
        parts += _minimum_sentences(inst, names, gaps, found.unmet_minimums)
    return " ".join(parts)


def _where(inst: Instance, names: _Names) -> str:
    n_periods = inst.site_node.shape[0]
    if n_periods == 1:
        return names.bucket(0)
    if names.period_codes is None:
        return f"the horizon of periods 0 to {n_periods - 1}"
    return f"the horizon {names.period(0)} to {names.period(n_periods - 1)}"


def _what(shortfall: int, short_customers, qs: int) -> str:
    short_total = sum(u for _, _, u in short_customers)
    if shortfall == 0:
        return "a lane minimum exceeds the lane's capacity"
    if short_total == shortfall:
        return f"{_count(shortfall, qs)} of demand cannot be served"
    if short_total > 0:
        return (
            f"{_count(shortfall, qs)} cannot be moved as required, "
            f"{_units(short_total, qs)} of them demand that cannot be served"
        )
    return f"{_count(shortfall, qs)} cannot be moved as required"


def _site_units(names: _Names, rows, qs: int) -> str:
    return _listing([f"{names.site_in_period(s, t)} ({_units(u, qs)})" for s, t, u in rows])


def _limiting_sentences(inst: Instance, names: _Names, limiting: np.ndarray) -> list[str]:
    groups = {
        ArcKind.LANE: "Limiting lanes (at capacity)",
        ArcKind.THROUGHPUT: "Limiting warehouse throughput",
        ArcKind.STOCK: "Limiting storage",
    }
    out = []
    for kind, title in groups.items():
        arcs = [int(a) for a in limiting if int(inst.arc_kind[a]) == kind]
        if arcs:
            labels = [
                f"{names.arc(a, grouped=True)} (cap {_units(inst.upper[a], inst.quantity_scale)})" for a in arcs
            ]
            out.append(f"{title}: {_listing(labels)}.")
    return out


def _advice(found: _Findings) -> str:
    actions = []
    if found.limiting.shape[0]:
        actions += ["raise these capacities", "add supply reachable from them"]
    else:
        actions.append("add supply that can reach these customers")
    if found.unreached:
        actions.append("open lanes to the customers no lane reaches")
    actions.append("give these customers a shortage_penalty")
    advice = " or ".join(actions) if len(actions) == 2 else ", ".join(actions[:-1]) + ", or " + actions[-1]
    return advice[0].upper() + advice[1:] + "."


def _minimum_sentences(inst: Instance, names: _Names, gaps: _Gaps, unmet: np.ndarray) -> list[str]:
    qs = inst.quantity_scale
    above = set(int(a) for a in gaps.over_committed)
    labels = []
    for a in unmet:
        a = int(a)
        label = f"{names.arc(a)} (min {_units(inst.lower[a], qs)})"
        if a in above:
            label += f" above its capacity {_units(inst.upper[a], qs)}"
        elif gaps.deficit[inst.tail[a]] > 0:
            label += f": {names.site_in_period(*_site_period(inst, inst.tail[a]))} cannot receive it"
        else:
            label += f": {names.site_in_period(*_site_period(inst, inst.head[a]))} cannot pass it on"
        labels.append(label)
    return [
        f"Lane minimums that cannot be met: {_listing(labels)}.",
        "Lower these minimums or route supply to the sites that must ship them.",
    ]


def _site_period(inst: Instance, node) -> tuple[int, int]:
    return int(inst.node_site[node]), int(inst.node_period[node])


def find_unbounded_cycle(inst: Instance) -> list[int] | None:
    """A negative-cost cycle of arcs without an upper bound, or None.

    Such a cycle makes the problem unbounded: every unit sent round it lowers
    the cost, and nothing limits the units. Only arcs with ``inst.unlimited``
    True are searched, so a negative cycle that has a capacity somewhere is
    bounded and not reported.

    The label-correcting pass of :func:`planner.core.residual.label_correcting`
    runs on those arcs alone; a cycle of its predecessor graph has negative
    cost [1]_.

    Parameters
    ----------
    inst : Instance

    Returns
    -------
    list of int or None
        The instance arc indices of the cycle in order (the head of each is
        the tail of the next, the last returns to the first), starting at the
        smallest arc index; None when there is no such cycle.

    Examples
    --------
    Two warehouses with lanes both ways, one of them paid to take units back:

    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> week = WeekData.from_arrays([0, 1, 1, 2], [0, 1, 2, 1], [1, 2, 1, 3],
    ...                             [10, -50000, 15000, 5],
    ...                             supply=[5, 0, 0, 0], demand=[0, 0, 0, 5])
    >>> inst = assemble_instance(week)
    >>> find_unbounded_cycle(inst)
    [1, 2]
    >>> labels = ["P1->W1 road", "W1->W2 road", "W2->W1 rail", "W1->C1 road"]
    >>> print(describe_cycle(inst, [1, 2], lane_labels=labels))  # doctest: +NORMALIZE_WHITESPACE
    unbounded: the lanes W1->W2 road, W2->W1 rail form a cycle of cost -3.50 per unit
    with no capacity; give one of them a capacity or correct the rates

    References
    ----------
    .. [1] T. H. Cormen, C. E. Leiserson, R. L. Rivest and C. Stein,
       *Introduction to Algorithms*, 3rd ed., MIT Press, 2009, section 24.1
       and the proof of lemma 24.16 (a cycle of the predecessor graph has
       negative weight).
    """
    arcs = np.flatnonzero(inst.unlimited)
    if inst.n_nodes == 0 or not np.any(inst.cost[arcs] < 0):
        return None
    found = label_correcting(inst.n_nodes, inst.tail[arcs], inst.head[arcs], inst.cost[arcs])
    if found.cycle is None:
        return None
    cycle = [int(arcs[p]) for p in found.cycle]
    if _scaled_cost(inst, cycle) >= 0:
        raise RuntimeError("negative-cycle search found a cycle that is not negative")
    start = cycle.index(min(cycle))
    return cycle[start:] + cycle[:start]


def _scaled_cost(inst: Instance, arcs: Sequence[int]) -> int:
    """Scaled cost of sending one unit along ``arcs`` (exact Python int)."""
    return sum(int(inst.cost[a]) for a in arcs)


def describe_cycle(
    inst: Instance,
    arcs: Sequence[int],
    lane_labels: Sequence[str] | None = None,
    *,
    site_codes: Sequence[str] | None = None,
    period_codes: Sequence[str] | None = None,
) -> str:
    """A message naming the arcs of an unbounded cycle and its cost per unit.

    Parameters
    ----------
    inst : Instance
    arcs : sequence of int
        Instance arc indices of the cycle, as :func:`find_unbounded_cycle` gives them.
    lane_labels : sequence of str, optional
        ``lane_labels[l]`` names lane index ``l``; indices are used when None.
    site_codes, period_codes : sequence of str, optional
        Names of sites (for warehouse throughput arcs) and periods.

    Returns
    -------
    str
        The cost is in currency per quantity unit
        (scaled cost x ``quantity_scale`` / ``cost_scale``).

    Examples
    --------
    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> inst = assemble_instance(WeekData.from_arrays([1, 1], [0, 1], [1, 0], [-20000, 5000]))
    >>> print(describe_cycle(inst, [0, 1]))  # doctest: +NORMALIZE_WHITESPACE
    unbounded: the lanes lane 0, lane 1 form a cycle of cost -1.50 per unit
    with no capacity; give one of them a capacity or correct the rates
    """
    names = _Names(inst, site_codes, lane_labels, period_codes)
    all_lanes = all(int(inst.arc_kind[a]) == ArcKind.LANE for a in arcs)
    noun = "lanes" if all_lanes else "links"
    return (
        f"unbounded: the {noun} {', '.join(names.arc(int(a)) for a in arcs)} form a cycle of cost "
        f"{_money(_scaled_cost(inst, arcs), inst)} per unit with no capacity; "
        "give one of them a capacity or correct the rates"
    )
