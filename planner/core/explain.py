"""Why a site has its price: the chain of lanes the marginal unit travels (on arrays).

A site's ``price_high`` is the length of the cheapest residual path from
SPARE to the site. Following that path names every step the next unit would
take: which plant's spare supply it comes from, which lanes carry it (or carry
one unit less, when a route is rearranged), which warehouse handles it, and
the running cost.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

from planner.core.network import ArcKind, Instance, NodeRole
from planner.core.prices import HIGH_REASON, PriceRanges, marginal_path
from planner.core.residual import Residual

#: How the virtual nodes read in words: never by their internal names.
_VIRTUAL_WORDS = {NodeRole.SPARE: "spare supply", NodeRole.SHORT: "unmet demand"}


@dataclass(frozen=True)
class Step:
    """One step of a marginal route; money in currency per unit."""

    kind: str  #: "lane", "throughput", "spare", "shortage", "stock", "short-feed"
    forward: bool  #: False when the step carries one unit LESS along the arc
    label: str
    unit_cost: float
    running: float


@dataclass
class Explanation:
    """The marginal route into a site and its price."""

    site: str
    period: str
    price: float | None
    steps: list[Step] = field(default_factory=list)
    reason: str = ""

    def text(self) -> str:
        """One line: ``plant A (value 0.00) -> lane A->W2 road 12.30 -> ... = 42.10``."""
        if self.price is None:
            return f"{self.site} in {self.period}: {self.reason}"
        parts = []
        for step in self.steps:
            if step.kind == "spare":
                parts.append(f"{step.label} (value {step.running:.2f})")
            elif step.kind == "short-feed":
                parts.append("unmet demand")
            elif step.kind == "lane":
                sign = "" if step.forward else "one unit less on "
                parts.append(f"{sign}lane {step.label} {step.unit_cost:.2f}")
            elif step.kind == "throughput":
                sign = "" if step.forward else "one unit less "
                parts.append(f"{sign}handling at {step.label} {step.unit_cost:.2f}")
            elif step.kind == "shortage":
                parts.append(f"short at {step.label} {step.unit_cost:.2f}")
            elif step.kind == "stock":
                parts.append(f"{'stock' if step.forward else 'one unit less stock'} {step.label} {step.unit_cost:.2f}")
        if not parts:
            return f"{self.site} in {self.period}: spare supply itself, price {self.price:.2f}"
        return " -> ".join(parts) + f" = {self.price:.2f}"


def explain_node(
    inst: Instance,
    ranges: PriceRanges,
    res: Residual,
    node: int,
    *,
    site_codes,
    lane_labels,
    period_codes,
    site_kinds=None,
) -> Explanation:
    """Explain ``price_high`` at ``node`` by its cheapest residual path from SPARE.

    Parameters
    ----------
    inst, ranges, res
        An instance, its price ranges and the residual graph they came from.
    node : int
        Node index (``inst.site_node[t, s]`` for site ``s`` in period ``t``).
    site_codes, lane_labels, period_codes : sequences of str
        Names for sites, lanes (per lane index) and periods.
    site_kinds : sequence of str, optional
        ``plant``/``warehouse``/``customer`` per site, to prefix site names.

    Returns
    -------
    Explanation

    Examples
    --------
    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> from planner.core.optimize import optimize
    >>> w = WeekData.from_arrays([0, 1, 2], [0, 1], [1, 2], [123_000, 298_000],
    ...                          supply=[9, 0, 0], demand=[0, 0, 4])
    >>> inst = assemble_instance(w)
    >>> out = optimize(inst)
    >>> e = explain_node(inst, out.ranges, out.residual, 2, site_codes=["A", "W2", "C17"],
    ...                  lane_labels=["A->W2 road", "W2->C17 road"], period_codes=["2026-W49"],
    ...                  site_kinds=["plant", "warehouse", "customer"])
    >>> e.text()
    'plant A (value 0.00) -> lane A->W2 road 12.30 -> lane W2->C17 road 29.80 = 42.10'
    """
    site = int(inst.node_site[node])
    period = int(inst.node_period[node])
    site_name = str(site_codes[site]) if site >= 0 else _VIRTUAL_WORDS[NodeRole(int(inst.node_role[node]))]
    period_name = str(period_codes[period]) if period >= 0 else ""
    if not ranges.has_high[node]:
        return Explanation(site_name, period_name, None, reason=HIGH_REASON)

    names = RouteNames(site_codes, lane_labels, period_codes, site_kinds)
    steps = route_steps(inst, marginal_path(inst, ranges, res, node), names)
    to_money = inst.quantity_scale / inst.cost_scale
    return Explanation(site_name, period_name, float(ranges.high[node]) * to_money, steps)


def node_of(inst: Instance, site_index: int, period_index: int = 0) -> int:
    """The node where site ``site_index``'s units arrive in ``period_index``."""
    return int(np.asarray(inst.site_node)[period_index, site_index])


def stored_flow(inst: Instance, lane_flow: np.ndarray, site_spare: np.ndarray,
                site_shortage: np.ndarray, site_throughput: np.ndarray) -> np.ndarray:
    """Rebuild the flow on every arc of a one-period instance from a stored run.

    Parameters
    ----------
    lane_flow : scaled flow per lane index.
    site_spare, site_shortage, site_throughput : scaled figures per site index.
    """
    flow = np.zeros(inst.n_arcs, dtype=np.int64)
    kind, ref = inst.arc_kind, inst.arc_ref
    for arc_kind, per_ref in (
        (ArcKind.LANE, lane_flow),
        (ArcKind.TO_SPARE, site_spare),
        (ArcKind.SHORTAGE, site_shortage),
        (ArcKind.THROUGHPUT, site_throughput),
    ):
        sel = kind == arc_kind
        flow[sel] = np.asarray(per_ref, dtype=np.int64)[ref[sel]]
    flow[kind == ArcKind.SPARE_TO_SHORT] = int(np.asarray(site_shortage).sum())
    return flow


@dataclass(frozen=True)
class RouteNames:
    """Words for the arcs of a route: site codes, lane labels, period codes, site kinds (optional)."""

    site_codes: object
    lane_labels: object
    period_codes: object
    site_kinds: object = None

    def site(self, s: int) -> str:
        prefix = f"{self.site_kinds[s]} " if self.site_kinds is not None else ""
        return f"{prefix}{self.site_codes[s]}"


def route_steps(inst: Instance, path: list[tuple[int, bool]], names: RouteNames) -> list[Step]:
    """The steps of a route of ``(arc, forward)`` pairs, with unit costs and the running total.

    A backward step carries one unit less along its arc (its cost counts negative).
    """
    to_money = inst.quantity_scale / inst.cost_scale
    periods = names.period_codes
    steps: list[Step] = []
    running = 0
    for arc, forward in path:
        kind = ArcKind(int(inst.arc_kind[arc]))
        cost = int(inst.cost[arc]) if forward else -int(inst.cost[arc])
        running += cost
        ref = int(inst.arc_ref[arc])
        t = int(inst.arc_period[arc])
        when = f" in {periods[t]}" if len(periods) > 1 and t >= 0 else ""
        if kind == ArcKind.TO_SPARE:
            label, k = names.site(ref) + when, "spare"
        elif kind == ArcKind.SPARE_TO_SHORT:
            label, k = "unmet demand", "short-feed"
        elif kind == ArcKind.LANE:
            label, k = str(names.lane_labels[ref]) + when, "lane"
        elif kind == ArcKind.THROUGHPUT:
            label, k = names.site(ref) + when, "throughput"
        elif kind == ArcKind.SHORTAGE:
            label, k = names.site(ref) + when, "shortage"
        else:
            label, k = f"at {names.site(ref)} from {periods[t]}", "stock"
        steps.append(Step(k, forward, label, cost * to_money, running * to_money))
    return steps
