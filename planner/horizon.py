"""Time-expanded networks: one node per site and period, stock arcs between periods.

A single week is the one-period case of the same construction, so
:func:`planner.instance.assemble_instance` and a linked horizon share this code.

Each site in each period is a node. A stock arc joins a site in period ``t``
to the same site in period ``t + 1`` at the site's holding cost per unit, up
to its storage capacity; a site with no storage carries nothing. One ``SPARE``
and one ``SHORT`` node serve all periods, so every price of the horizon is
measured against the same reference (``price(SPARE) = 0``).

References
----------
.. [1] L. R. Ford and D. R. Fulkerson, "Constructing maximal dynamic flows
   from static flows", Operations Research 6(3), 1958 (time-expanded networks).
"""

from __future__ import annotations

from typing import Sequence

import numpy as np

from planner.errors import PlannerError
from planner.instance import NONE, ArcKind, Instance, NodeRole, SiteKind, WeekData


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
        When the periods do not share one site list.

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
    if not weeks:
        raise PlannerError("a horizon needs at least one period")
    n_sites = weeks[0].n_sites
    if any(w.n_sites != n_sites for w in weeks):
        raise PlannerError("all periods of a horizon must share one site list")
    n_periods = len(weeks)

    kind = weeks[0].site_kind
    is_wh = kind == SiteKind.WAREHOUSE
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
    short = spare + 1
    n_nodes = short + 1

    supply = np.zeros(n_nodes, dtype=np.int64)
    node_role = np.full(n_nodes, NodeRole.SITE, dtype=np.int8)
    node_role[out_base:spare] = NodeRole.SITE_OUT
    node_role[spare] = NodeRole.SPARE
    node_role[short] = NodeRole.SHORT
    node_site = np.full(n_nodes, -1, dtype=np.int64)
    node_site[:out_base] = np.tile(np.arange(n_sites), n_periods)
    node_site[out_base:spare] = np.tile(split_sites, n_periods)
    node_period = np.full(n_nodes, -1, dtype=np.int64)
    node_period[:out_base] = np.repeat(np.arange(n_periods), n_sites)
    node_period[out_base:spare] = np.repeat(np.arange(n_periods), n_split)

    parts: list[tuple] = []  # (tail, head, cost, lower, upper, unlimited, kind, ref, period)
    lane_arc = np.empty((n_periods, weeks[0].n_lanes), dtype=np.int64) if n_periods == 1 else None
    lane_arcs: list[np.ndarray] = []
    offset = 0

    def add(tail, head, cost, lower, upper, unlimited, kind_code, ref, period):
        nonlocal offset
        m = len(tail)
        parts.append(
            (
                np.asarray(tail, np.int64),
                np.asarray(head, np.int64),
                np.asarray(cost, np.int64),
                np.asarray(lower, np.int64),
                np.asarray(upper, np.int64),
                np.asarray(unlimited, bool),
                np.full(m, kind_code, np.int8),
                np.asarray(ref, np.int64),
                np.full(m, period, np.int64),
            )
        )
        start = offset
        offset += m
        return np.arange(start, offset, dtype=np.int64)

    any_penalty = False
    for t, w in enumerate(weeks):
        if w.n_lanes and (
            np.any(w.lane_origin < 0)
            or np.any(w.lane_origin >= n_sites)
            or np.any(w.lane_destination < 0)
            or np.any(w.lane_destination >= n_sites)
        ):
            raise PlannerError("a lane refers to a site index outside the site list")
        nodes = site_node[t]
        supply[nodes] += w.supply - w.demand

        # Lanes: leave from the origin's out node, arrive at the destination's in node.
        cap = w.lane_capacity
        lane_arcs.append(
            add(
                site_out_node[t, w.lane_origin],
                nodes[w.lane_destination],
                w.lane_cost,
                w.lane_min,
                np.where(cap == NONE, 0, cap),
                cap == NONE,
                ArcKind.LANE,
                np.arange(w.n_lanes),
                t,
            )
        )
        # Warehouse throughput: in -> out with handling cost and capacity.
        if n_split:
            tcap = w.throughput_capacity[split_sites]
            add(
                nodes[split_sites],
                site_out_node[t, split_sites],
                w.handling_cost[split_sites],
                np.zeros(n_split),
                np.where(tcap == NONE, 0, tcap),
                tcap == NONE,
                ArcKind.THROUGHPUT,
                split_sites,
                t,
            )
        # Unused plant supply flows to SPARE at zero cost.
        plants = np.flatnonzero(w.supply > 0)
        add(
            nodes[plants],
            np.full(plants.shape[0], spare),
            np.zeros(plants.shape[0]),
            np.zeros(plants.shape[0]),
            w.supply[plants],
            np.zeros(plants.shape[0], bool),
            ArcKind.TO_SPARE,
            plants,
            t,
        )
        # Unmet demand comes from SHORT at the customer's penalty. A customer
        # with a penalty keeps its arc even at zero demand, so its price (the
        # cost of one more unit) still sees the penalty as an option.
        penalised = np.flatnonzero(w.shortage_penalty != NONE)
        any_penalty |= penalised.shape[0] > 0
        add(
            np.full(penalised.shape[0], short),
            nodes[penalised],
            w.shortage_penalty[penalised],
            np.zeros(penalised.shape[0]),
            np.zeros(penalised.shape[0]),
            np.ones(penalised.shape[0], bool),
            ArcKind.SHORTAGE,
            penalised,
            t,
        )
        # Stock carried to the next period.
        if t + 1 < n_periods:
            hold = w.holding_cost if w.holding_cost is not None else np.zeros(n_sites, np.int64)
            store = (
                w.storage_capacity
                if w.storage_capacity is not None
                else np.zeros(n_sites, np.int64)
            )
            keeps = np.flatnonzero((store != 0) & (kind != SiteKind.CUSTOMER))
            add(
                nodes[keeps],
                site_node[t + 1, keeps],
                hold[keeps],
                np.zeros(keeps.shape[0]),
                np.where(store[keeps] == NONE, 0, store[keeps]),
                store[keeps] == NONE,
                ArcKind.STOCK,
                keeps,
                t,
            )
    if any_penalty:
        add([spare], [short], [0], [0], [0], [True], ArcKind.SPARE_TO_SHORT, [-1], -1)

    supply[spare] = -int(supply[:spare].sum())
    tail, head, cost, lower, upper, unlimited, arc_kind, arc_ref, arc_period = (
        np.concatenate([p[i] for p in parts]) for i in range(9)
    )
    # "Unlimited" becomes a bound that no optimal flow reaches: more than all
    # units that can enter the network plus all committed minimums.
    total_in = int(np.abs(supply).sum()) + int(lower.sum())
    if np.any(cost < 0):
        # A negative-cost cycle that has a capacity somewhere carries up to
        # that capacity round it, on top of the units entering the network.
        total_in += int(upper[~unlimited].sum())
    big = total_in + 1
    upper = np.where(unlimited, big, upper)

    if lane_arc is not None:
        lane_arc = lane_arcs[0][None, :]
    else:
        lane_arc = np.full((n_periods, max(w.n_lanes for w in weeks)), -1, dtype=np.int64)
        for t, arcs in enumerate(lane_arcs):
            lane_arc[t, : arcs.shape[0]] = arcs

    return Instance(
        supply=supply,
        tail=tail,
        head=head,
        cost=cost,
        lower=lower,
        upper=upper,
        unlimited=unlimited,
        arc_kind=arc_kind,
        arc_ref=arc_ref,
        arc_period=arc_period,
        node_role=node_role,
        node_site=node_site,
        node_period=node_period,
        site_node=site_node,
        site_out_node=site_out_node,
        spare=int(spare),
        short=int(short),
        cost_scale=cost_scale,
        quantity_scale=quantity_scale,
        lane_arc=lane_arc,
    )
