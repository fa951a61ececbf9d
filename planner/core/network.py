"""Min-cost-flow instances of one or more planning periods, as integer numpy arrays.

A week's network (sites, supply, demand, lanes) becomes a directed graph whose
arcs carry an integer unit cost and integer lower and upper bounds, plus an
integer net supply per node. Two virtual nodes make real weeks balance:

* ``SPARE`` absorbs the supply that plants do not ship, at zero cost. Its
  potential is fixed at 0, so a price reads "relative to a unit that would
  otherwise stay unused".
* ``SHORT`` delivers the demand that cannot (or should not) be met, at the
  customer's shortage penalty per unit. It is fed from ``SPARE`` at zero cost,
  so a unit short is equivalent to a unit of supply left unused.

A warehouse with a throughput capacity or a handling cost becomes two nodes,
``in -> out``, joined by one arc that carries that capacity and cost. Lanes
arrive at the ``in`` node and leave from the ``out`` node.

Several consecutive periods form a time-expanded network: each site in each
period is a node, and a stock arc joins a site in period ``t`` to the same site
in period ``t + 1`` at the site's holding cost per unit, up to its storage
capacity. One ``SPARE`` and one ``SHORT`` node serve all periods, so every
price of a horizon is measured against the same reference. A single week is
the one-period case of the same construction (:func:`assemble_instance`).

Costs are scaled to integers with ``cost_scale`` (10**4 by default, four
decimals) and quantities with ``quantity_scale`` (whole units by default), so
that the optimum, the prices and the certificate are exact integers.

References
----------
.. [1] L. R. Ford and D. R. Fulkerson, "Constructing maximal dynamic flows
   from static flows", Operations Research 6(3), 1958 (time-expanded networks).
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass, field
from enum import IntEnum

import numpy as np

from planner.core.week import NONE, SiteKind, WeekData
from planner.errors import PlannerError

__all__ = [
    "ArcKind",
    "Instance",
    "NodeRole",
    "OverflowError_",
    "assemble_instance",
    "check_int64",
    "time_expand",
]


class NodeRole(IntEnum):
    """What a node of the flow graph stands for."""

    SITE = 0  #: a site (the ``in`` node of a split warehouse)
    SITE_OUT = 1  #: the ``out`` node of a split warehouse
    SPARE = 2
    SHORT = 3


class ArcKind(IntEnum):
    """What an arc of the flow graph stands for."""

    LANE = 0  #: a lane of the input; ``arc_ref`` is the lane index
    THROUGHPUT = 1  #: warehouse in -> out; ``arc_ref`` is the site index
    TO_SPARE = 2  #: plant -> SPARE (unused supply); ``arc_ref`` is the site
    SHORTAGE = 3  #: SHORT -> customer (unmet demand); ``arc_ref`` is the site
    SPARE_TO_SHORT = 4  #: SPARE -> SHORT; ``arc_ref`` is -1
    STOCK = 5  #: inventory carried to the next period; ``arc_ref`` is the site


class OverflowError_(PlannerError):
    """The scaled instance does not fit the solver's 64-bit integers."""


@dataclass(frozen=True)
class Instance:
    """A min-cost-flow instance: integer arrays plus the map back to sites and lanes.

    ``supply`` is the net supply ``b`` of each node (positive at sources).
    ``upper`` holds a finite bound on every arc; where the input had none,
    ``unlimited`` is True and ``upper`` is a bound no optimal flow reaches.
    ``node_site``/``node_period`` and ``arc_ref``/``arc_period`` map nodes and
    arcs back to sites, lanes and periods (period 0 for a single week).
    """

    supply: np.ndarray
    tail: np.ndarray
    head: np.ndarray
    cost: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    unlimited: np.ndarray
    arc_kind: np.ndarray
    arc_ref: np.ndarray
    arc_period: np.ndarray
    node_role: np.ndarray
    node_site: np.ndarray
    node_period: np.ndarray
    site_node: np.ndarray  #: (n_periods, n_sites) node where a site's units arrive
    site_out_node: np.ndarray  #: (n_periods, n_sites) node lanes leave from
    spare: int
    short: int
    cost_scale: int = 10_000
    quantity_scale: int = 1
    lane_arc: np.ndarray = field(default_factory=lambda: np.empty((0, 0), np.int64))

    @property
    def n_nodes(self) -> int:
        return int(self.supply.shape[0])

    @property
    def n_arcs(self) -> int:
        return int(self.tail.shape[0])

    def currency(self, scaled_cost_per_unit):
        """Scaled cost per scaled quantity unit -> currency per quantity unit."""
        return np.asarray(scaled_cost_per_unit, dtype=np.float64) * (
            self.quantity_scale / self.cost_scale
        )

    def units(self, scaled_quantity):
        """Scaled quantity -> quantity in the stated unit."""
        return np.asarray(scaled_quantity, dtype=np.float64) / self.quantity_scale


def assemble_instance(week: WeekData, *, cost_scale: int = 10_000, quantity_scale: int = 1) -> Instance:
    """Turn one week into a min-cost-flow :class:`Instance`.

    Parameters
    ----------
    week : WeekData
        Scaled integer input of one period.
    cost_scale, quantity_scale : int
        The factors the input was scaled with (kept for reporting back).

    Returns
    -------
    Instance

    Examples
    --------
    Two plants, one customer needing 5 units:

    >>> w = WeekData.from_arrays([0, 0, 2], [0, 1], [2, 2], [10, 30],
    ...                          supply=[3, 4, 0], demand=[0, 0, 5])
    >>> inst = assemble_instance(w)
    >>> inst.n_nodes, inst.n_arcs, int(inst.supply[inst.spare])
    (5, 4, -2)
    """
    return time_expand([week], cost_scale=cost_scale, quantity_scale=quantity_scale)


def time_expand(
    weeks: Sequence[WeekData], *, cost_scale: int = 10_000, quantity_scale: int = 1
) -> Instance:
    """Build the time-expanded min-cost-flow instance of consecutive periods.

    Parameters
    ----------
    weeks : sequence of WeekData
        Consecutive periods over the same list of sites (same site indices).
        Stock carried out of period ``t`` uses period ``t``'s holding cost and
        storage capacity; the last period carries no stock.
    cost_scale, quantity_scale : int
        The factors the figures were scaled with.

    Returns
    -------
    Instance

    Raises
    ------
    PlannerError
        When the periods do not share one site list, or a lane names a site
        outside it.

    Examples
    --------
    A plant that can hold 5 units feeds a customer over two weeks:

    >>> w1 = WeekData.from_arrays([0, 2], [0], [1], [10], supply=[8, 0], demand=[0, 3],
    ...                           holding_cost=[1, 0], storage_capacity=[5, 0])
    >>> w2 = WeekData.from_arrays([0, 2], [0], [1], [10], supply=[0, 0], demand=[0, 4])
    >>> inst = time_expand([w1, w2])
    >>> int((inst.arc_kind == ArcKind.STOCK).sum())
    1
    """
    _check_periods(weeks)
    layout = _Layout.of(weeks)
    arcs = _ArcList()
    supply = np.zeros(layout.n_nodes, dtype=np.int64)
    lane_arcs, penalised = [], False
    for t, week in enumerate(weeks):
        supply[layout.site_node[t]] += week.supply - week.demand
        lane_arcs.append(_add_lanes(arcs, layout, t, week))
        _add_throughput(arcs, layout, t, week)
        _add_spare(arcs, layout, t, week)
        penalised |= _add_shortage(arcs, layout, t, week)
        if t + 1 < layout.n_periods:
            _add_stock(arcs, layout, t, week)
    if penalised:
        arcs.add([layout.spare], [layout.short], [0], [0], [0], [True], ArcKind.SPARE_TO_SHORT, [-1], -1)
    supply[layout.spare] = -int(supply[: layout.spare].sum())
    tail, head, cost, lower, upper, unlimited, arc_kind, arc_ref, arc_period = arcs.arrays()
    node_role, node_site, node_period = layout.node_labels()
    return Instance(
        supply=supply,
        tail=tail,
        head=head,
        cost=cost,
        lower=lower,
        upper=_finite_upper(supply, cost, lower, upper, unlimited),
        unlimited=unlimited,
        arc_kind=arc_kind,
        arc_ref=arc_ref,
        arc_period=arc_period,
        node_role=node_role,
        node_site=node_site,
        node_period=node_period,
        site_node=layout.site_node,
        site_out_node=layout.site_out_node,
        spare=layout.spare,
        short=layout.short,
        cost_scale=cost_scale,
        quantity_scale=quantity_scale,
        lane_arc=_lane_arc_table(lane_arcs),
    )


def _check_periods(weeks: Sequence[WeekData]) -> None:
    """Refuse an empty horizon, periods over different site lists, and lanes off the list."""
    if not weeks:
        raise PlannerError("a horizon needs at least one period")
    n_sites = weeks[0].n_sites
    if any(w.n_sites != n_sites for w in weeks):
        raise PlannerError("all periods of a horizon must share one site list")
    for w in weeks:
        ends = np.concatenate([w.lane_origin, w.lane_destination])
        if ends.shape[0] and (ends.min() < 0 or ends.max() >= n_sites):
            raise PlannerError("a lane refers to a site index outside the site list")


@dataclass(frozen=True)
class _Layout:
    """Node numbering: sites per period, then the ``out`` nodes of split warehouses, SPARE, SHORT."""

    n_sites: int
    n_periods: int
    split_sites: np.ndarray
    site_node: np.ndarray
    site_out_node: np.ndarray
    spare: int
    short: int

    @property
    def n_nodes(self) -> int:
        return self.short + 1

    @classmethod
    def of(cls, weeks: Sequence[WeekData]) -> "_Layout":
        n_sites, n_periods = weeks[0].n_sites, len(weeks)
        is_wh = weeks[0].site_kind == SiteKind.WAREHOUSE
        # A warehouse is split into in -> out when any period gives it a throughput
        # limit or a handling cost; periods without one get a free, unlimited arc.
        split = np.zeros(n_sites, dtype=bool)
        for w in weeks:
            split |= is_wh & ((w.throughput_capacity != NONE) | (w.handling_cost != 0))
        split_sites = np.flatnonzero(split)
        n_split = split_sites.shape[0]
        site_node = np.arange(n_periods * n_sites, dtype=np.int64).reshape(n_periods, n_sites)
        site_out_node = site_node.copy()
        out_base = n_periods * n_sites
        if n_split:
            site_out_node[:, split_sites] = out_base + (
                np.arange(n_periods, dtype=np.int64)[:, None] * n_split + np.arange(n_split)[None, :]
            )
        spare = out_base + n_periods * n_split
        return cls(n_sites, n_periods, split_sites, site_node, site_out_node, int(spare), int(spare + 1))

    def node_labels(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """``node_role``, ``node_site`` and ``node_period`` of every node."""
        out_base = self.n_periods * self.n_sites
        node_role = np.full(self.n_nodes, NodeRole.SITE, dtype=np.int8)
        node_role[out_base : self.spare] = NodeRole.SITE_OUT
        node_role[self.spare] = NodeRole.SPARE
        node_role[self.short] = NodeRole.SHORT
        node_site = np.full(self.n_nodes, -1, dtype=np.int64)
        node_site[:out_base] = np.tile(np.arange(self.n_sites), self.n_periods)
        node_site[out_base : self.spare] = np.tile(self.split_sites, self.n_periods)
        node_period = np.full(self.n_nodes, -1, dtype=np.int64)
        node_period[:out_base] = np.repeat(np.arange(self.n_periods), self.n_sites)
        node_period[out_base : self.spare] = np.repeat(np.arange(self.n_periods), self.split_sites.shape[0])
        return node_role, node_site, node_period


class _ArcList:
    """Arcs added in groups, concatenated once at the end."""

    _DTYPES = (np.int64, np.int64, np.int64, np.int64, np.int64, bool)

    def __init__(self) -> None:
        self.parts: list[tuple[np.ndarray, ...]] = []
        self.count = 0

    def add(self, tail, head, cost, lower, upper, unlimited, kind, ref, period) -> np.ndarray:
        """Append a group of arcs; return their indices."""
        columns = tuple(np.asarray(v, dtype=d) for v, d in zip((tail, head, cost, lower, upper, unlimited), self._DTYPES))
        m = columns[0].shape[0]
        self.parts.append(
            columns + (np.full(m, kind, np.int8), np.asarray(ref, np.int64), np.full(m, period, np.int64))
        )
        start, self.count = self.count, self.count + m
        return np.arange(start, self.count, dtype=np.int64)

    def arrays(self) -> tuple[np.ndarray, ...]:
        """``tail, head, cost, lower, upper, unlimited, kind, ref, period`` of all arcs."""
        return tuple(np.concatenate([p[i] for p in self.parts]) for i in range(9))


def _add_lanes(arcs: _ArcList, layout: _Layout, t: int, w: WeekData) -> np.ndarray:
    """Lanes leave from the origin's out node and arrive at the destination's in node."""
    cap = w.lane_capacity
    return arcs.add(
        layout.site_out_node[t, w.lane_origin],
        layout.site_node[t, w.lane_destination],
        w.lane_cost,
        w.lane_min,
        np.where(cap == NONE, 0, cap),
        cap == NONE,
        ArcKind.LANE,
        np.arange(w.n_lanes),
        t,
    )


def _add_throughput(arcs: _ArcList, layout: _Layout, t: int, w: WeekData) -> None:
    """Warehouse in -> out with its handling cost and throughput capacity."""
    split = layout.split_sites
    if split.shape[0] == 0:
        return
    cap = w.throughput_capacity[split]
    arcs.add(
        layout.site_node[t, split],
        layout.site_out_node[t, split],
        w.handling_cost[split],
        np.zeros(split.shape[0]),
        np.where(cap == NONE, 0, cap),
        cap == NONE,
        ArcKind.THROUGHPUT,
        split,
        t,
    )


def _add_spare(arcs: _ArcList, layout: _Layout, t: int, w: WeekData) -> None:
    """Unused plant supply flows to SPARE at zero cost."""
    plants = np.flatnonzero(w.supply > 0)
    k = plants.shape[0]
    arcs.add(
        layout.site_node[t, plants], np.full(k, layout.spare), np.zeros(k), np.zeros(k),
        w.supply[plants], np.zeros(k, bool), ArcKind.TO_SPARE, plants, t,
    )


def _add_shortage(arcs: _ArcList, layout: _Layout, t: int, w: WeekData) -> bool:
    """Unmet demand comes from SHORT at the customer's penalty; True when any customer has one.

    A customer with a penalty keeps its arc even at zero demand, so its price
    (the cost of one more unit) still sees the penalty as an option.
    """
    penalised = np.flatnonzero(w.shortage_penalty != NONE)
    k = penalised.shape[0]
    arcs.add(
        np.full(k, layout.short), layout.site_node[t, penalised], w.shortage_penalty[penalised],
        np.zeros(k), np.zeros(k), np.ones(k, bool), ArcKind.SHORTAGE, penalised, t,
    )
    return k > 0


def _add_stock(arcs: _ArcList, layout: _Layout, t: int, w: WeekData) -> None:
    """Stock carried from period ``t`` to ``t + 1`` at the holding cost, up to the storage capacity."""
    n = layout.n_sites
    hold = w.holding_cost if w.holding_cost is not None else np.zeros(n, np.int64)
    store = w.storage_capacity if w.storage_capacity is not None else np.zeros(n, np.int64)
    keeps = np.flatnonzero((store != 0) & (w.site_kind != SiteKind.CUSTOMER))
    arcs.add(
        layout.site_node[t, keeps],
        layout.site_node[t + 1, keeps],
        hold[keeps],
        np.zeros(keeps.shape[0]),
        np.where(store[keeps] == NONE, 0, store[keeps]),
        store[keeps] == NONE,
        ArcKind.STOCK,
        keeps,
        t,
    )


def _finite_upper(supply, cost, lower, upper, unlimited) -> np.ndarray:
    """Upper bounds with "unlimited" replaced by a bound that no optimal flow reaches.

    That is more than all units that can enter the network plus all committed
    minimums; with a negative cost somewhere, a negative-cost cycle that has a
    capacity somewhere carries up to that capacity round it, on top.
    """
    total_in = int(np.abs(supply).sum()) + int(lower.sum())
    if np.any(cost < 0):
        total_in += int(upper[~unlimited].sum())
    return np.where(unlimited, total_in + 1, upper)


def _lane_arc_table(lane_arcs: list[np.ndarray]) -> np.ndarray:
    """``(period, lane)`` -> arc index; -1 where a period has fewer lanes."""
    if len(lane_arcs) == 1:
        return lane_arcs[0][None, :]
    table = np.full((len(lane_arcs), max(a.shape[0] for a in lane_arcs)), -1, dtype=np.int64)
    for t, arcs in enumerate(lane_arcs):
        table[t, : arcs.shape[0]] = arcs
    return table


def check_int64(inst: Instance) -> None:
    """Refuse instances whose cost sums could overflow the solver's int64.

    The cost-scaling solver multiplies unit costs by ``n_nodes + 1``
    internally, and the objective is a sum of cost times flow; both must stay
    inside 64-bit integers.

    Raises
    ------
    OverflowError_
        Naming the largest figure and a cost precision that would fit.
    """
    if inst.n_arcs == 0:
        return
    abs_cost = np.abs(inst.cost).astype(np.float64)
    max_cost = float(abs_cost.max())
    bound = float(np.dot(abs_cost, inst.upper.astype(np.float64)))
    limit = 2.0**62
    factor = max(max_cost * (inst.n_nodes + 1), bound) / limit
    if factor <= 1.0:
        return
    worst = int(np.argmax(abs_cost * inst.upper))
    drop = int(np.ceil(np.log10(factor)))
    # cost_scale = 10^(cost decimals + quantity decimals); advise on the cost decimals.
    decimals = int(round(np.log10(inst.cost_scale))) - int(round(np.log10(inst.quantity_scale)))
    kind = ArcKind(int(inst.arc_kind[worst])).name.lower()
    column = {
        "lane": "lanes.csv unit_cost",
        "throughput": "sites.csv handling_cost",
        "shortage": "demand.csv shortage_penalty",
        "stock": "sites.csv holding_cost",
    }.get(kind, kind)
    fits = decimals - drop
    advice = (
        f"use a cost precision of {fits} decimals (--cost-decimals {fits})"
        if fits >= 0
        else "reduce the figures or the quantity unit: no cost precision fits"
    )
    raise OverflowError_(
        f"costs at {decimals} decimals overflow 64-bit integers by a factor of about {factor:.3g}; "
        f"the largest cost x capacity term is in {column} (arc {worst}, scaled cost "
        f"{int(inst.cost[worst])}, bound {int(inst.upper[worst])}); {advice}"
    )
