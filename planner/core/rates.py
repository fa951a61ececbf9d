"""Rate ranges: how far a lane's unit cost can move before the stored plan stops being optimal.

For a lane ``a = (t, h)`` with rate ``c`` the stored flow stays optimal while
the rate stays in ``[-dist(h -> t), dist(t -> h)]`` [1]_, both distances in the
residual graph of the flow without the lane's own residual arcs:

* the lower end applies while the lane has room: below it, sending one more
  unit along the lane and back along the path ``h -> t`` pays, so flow joins
  the lane (for an idle lane, the rate at which it starts to carry flow);
* the upper end applies while the lane carries flow above its minimum: above
  it, one unit less on the lane, rerouted along ``t -> h``, pays, so flow
  leaves the lane.

An end is open (no limit) where it does not apply or no such path exists. The
lane's own residual arcs matter only for a lane strictly inside its bounds
(both arcs exist); there the distances are measured on the residual graph
without them. Elsewhere :class:`planner.core.limits.ZeroComponents` answers
for many lanes at once. Each end can come with its route: the residual arcs of
the path that sets it.

References
----------
.. [1] R. K. Ahuja, T. L. Magnanti and J. B. Orlin, *Network Flows: Theory,
   Algorithms, and Applications*, Prentice Hall, 1993, section 9.11 (cost
   sensitivity of minimum cost flows).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from planner.core.limits import CAPACITY, MINIMUM, LimitValues, TightenBlock, ZeroComponents
from planner.core.network import ArcKind, Instance
from planner.core.paths import UNLIMITED, ArcTable, shortest_paths
from planner.core.residual import Residual
from planner.core.search import Lifting, Searches, run_searches

__all__ = ["RateRanges", "limit_rate_ranges", "rate_ranges"]


@dataclass(frozen=True)
class RateRanges:
    """Rate range of each lane arc asked for (scaled cost per scaled unit).

    ``low``/``high`` hold where ``has_low``/``has_high``; elsewhere that end is
    open. ``low_route``/``high_route`` (when asked for) list, per arc, the
    ``(instance arc, forward)`` steps of the path that sets each end: for the
    lower end from the lane's destination back to its origin, for the upper end
    from its origin to its destination.
    """

    arc: np.ndarray
    rate: np.ndarray
    low: np.ndarray
    has_low: np.ndarray
    high: np.ndarray
    has_high: np.ndarray
    low_route: list | None = None
    high_route: list | None = None


def rate_ranges(
    inst: Instance,
    flow: np.ndarray,
    res: Residual,
    potential: np.ndarray,
    arcs,
    *,
    routes: bool = False,
    graph: ZeroComponents | None = None,
) -> RateRanges:
    """Rate range of every arc of ``arcs`` (lanes or any other arc with a cost).

    Parameters
    ----------
    inst, flow, res
        An instance, an optimal flow and its residual graph.
    potential : numpy.ndarray
        A dual-feasible potential.
    arcs : array of int
        Instance arcs.
    routes : bool
        Also return the path behind each end.
    graph : ZeroComponents, optional
        The contracted residual graph, when already built.

    Returns
    -------
    RateRanges

    Examples
    --------
    Two plants, one customer; the cheap lane (5) carries all 6 units, the dear
    one (9) is idle. The cheap lane may rise to 9 before the plan changes and
    fall without limit; the dear one must fall to 5 before it is used:

    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> from planner.core.solve import solve_flow
    >>> from planner.core.residual import feasible_potential, residual_graph
    >>> inst = assemble_instance(WeekData.from_arrays([0, 0, 2], [0, 1], [2, 2], [5, 9],
    ...                                               supply=[10, 10, 0], demand=[0, 0, 6]))
    >>> flow = solve_flow(inst).flow
    >>> res = residual_graph(inst, flow)
    >>> rr = rate_ranges(inst, flow, res, feasible_potential(inst, res), [0, 1])
    >>> rr.low.tolist(), rr.has_low.tolist(), rr.high.tolist(), rr.has_high.tolist()
    ([0, 5], [False, True], [9, 0], [True, False])
    """
    arcs = np.atleast_1d(np.asarray(arcs, np.int64))
    flow = np.asarray(flow, np.int64)
    pi = np.asarray(potential, np.int64)
    t, h = inst.tail[arcs], inst.head[arcs]
    r = inst.cost[arcs] + pi[t] - pi[h]
    room = inst.unlimited[arcs] | (flow[arcs] < inst.upper[arcs])
    carries = flow[arcs] > inst.lower[arcs]
    reduced = res.weight + pi[res.tail] - pi[res.head]
    searcher = _Without(inst.n_nodes, res, reduced) if (room & carries).any() or routes else None
    down, found_down, up, found_up = _end_distances(inst, res, reduced, arcs, room, carries, graph, searcher)
    has_low = room & found_down
    has_high = carries & found_up
    rate = inst.cost[arcs]
    low = np.where(has_low, rate - (r + down), 0)
    high = np.where(has_high, rate + (up - r), 0)
    if not routes:
        return RateRanges(arcs, rate, low, has_low, high, has_high)
    low_route = [searcher.route(int(a), int(b), int(c)) if ok else [] for a, b, c, ok in zip(arcs, h, t, has_low)]
    high_route = [searcher.route(int(a), int(b), int(c)) if ok else [] for a, b, c, ok in zip(arcs, t, h, has_high)]
    return RateRanges(arcs, rate, low, has_low, high, has_high, low_route, high_route)


def _end_distances(inst, res, reduced, arcs, room, carries, graph, searcher) -> tuple:
    """Reduced distances ``h -> t`` (for the lower ends) and ``t -> h`` (for the upper ends), and whether found.

    Arcs strictly inside their bounds are searched one by one without their
    own residual arcs; the others all at once on the contracted graph.
    """
    t, h = inst.tail[arcs], inst.head[arcs]
    m = arcs.shape[0]
    down, up = np.zeros(m, np.int64), np.zeros(m, np.int64)
    found_down, found_up = np.zeros(m, bool), np.zeros(m, bool)
    inside = room & carries
    edge = np.flatnonzero(~inside)
    if edge.shape[0]:
        graph = graph if graph is not None else ZeroComponents(inst.n_nodes, res, reduced)
        pick = edge[room[edge]]
        down[pick], found_down[pick], _ = graph.distances(h[pick], t[pick])
        pick = edge[carries[edge]]
        up[pick], found_up[pick], _ = graph.distances(t[pick], h[pick])
    for i in np.flatnonzero(inside):
        down[i], found_down[i] = searcher.distance(int(arcs[i]), int(h[i]), int(t[i]))
        up[i], found_up[i] = searcher.distance(int(arcs[i]), int(t[i]), int(h[i]))
    return down, found_down, up, found_up


class _Without:
    """The merged residual graph, searched without one arc's own residual arcs.

    The graph is merged once; for each search the one or two merged arcs that
    hold the lane's residual arcs are set to the best of their other members
    (parallel modes), or taken out, and put back afterwards.
    """

    def __init__(self, n: int, res: Residual, reduced: np.ndarray) -> None:
        self.res = res
        self.reduced = reduced
        self.table = ArcTable.merge(n, res.tail, res.head, reduced, res.capacity)
        self.no_lifting = Lifting(self.table.tail, self.table.head, np.full(n, UNLIMITED), np.full(n, UNLIMITED))

    def _without(self, arc: int) -> ArcTable:
        weight, capacity, first = self.table.weight.copy(), self.table.capacity.copy(), self.table.arc.copy()
        res = self.res
        mine = np.flatnonzero(res.arc == arc)
        for u, v in set(zip(res.tail[mine].tolist(), res.head[mine].tolist())):
            e = int(self.table.position(u, v))
            others = np.flatnonzero((res.tail == u) & (res.head == v) & (res.arc != arc))
            if others.shape[0] == 0:
                weight[e] = -1
                continue
            best = others[self.reduced[others] == self.reduced[others].min()]
            weight[e], capacity[e], first[e] = self.reduced[best[0]], min(int(self.res.capacity[best].sum()), UNLIMITED), best[0]
        t = self.table
        return ArcTable(t.n, t.tail, t.head, weight, capacity, first, t.indptr)

    def distance(self, arc: int, source: int, target: int) -> tuple[int, bool]:
        """Reduced distance from ``source`` to ``target`` without ``arc``'s residual arcs."""
        searches = Searches(
            np.array([source]), np.array([0, 1]), np.array([target]), np.array([target]), np.array([-1])
        )
        dist, _, _ = run_searches(self._without(arc), self.no_lifting, searches)
        return max(int(dist[0]), 0), bool(dist[0] >= 0)

    def route(self, arc: int, source: int, target: int) -> list[tuple[int, bool]]:
        """``(instance arc, forward)`` steps of a shortest path from ``source`` to ``target`` without ``arc``."""
        table = self._without(arc)
        kept = np.flatnonzero(table.weight >= 0)
        rows = table.tail[kept]
        table = ArcTable(table.n, rows, table.head[kept], table.weight[kept], table.capacity[kept], table.arc[kept],
                         np.searchsorted(rows, np.arange(table.n + 1)))
        found = shortest_paths(table, [source])
        steps = []
        v = target
        while v != source:
            residual_arc = int(table.arc[found.pred_arc[0, v]])
            steps.append((int(self.res.arc[residual_arc]), bool(self.res.forward[residual_arc])))
            v = int(found.pred[0, v])
        steps.reverse()
        return steps


def limit_rate_ranges(inst: Instance, limits: LimitValues) -> RateRanges:
    """Rate ranges of the lanes at a limit, one per row of ``limits`` on a lane, read off its values.

    A lane full to its capacity keeps its flow however low its rate goes (no
    lower end) and until rerouting one unit off it is cheaper: its upper end
    is the rate plus the cost of one unit less capacity, open where no reroute
    exists or the lane also sits at its minimum. A lane at its minimum mirrors
    this: its lower end is the rate minus the cost of one more committed unit.
    No search is needed.
    """
    lane = inst.arc_kind[limits.arc] == ArcKind.LANE
    arc, side = limits.arc[lane], limits.side[lane]
    rate = inst.cost[arc]
    possible = limits.blocked[lane] == TightenBlock.NONE
    has_high = (side == CAPACITY) & possible
    has_low = (side == MINIMUM) & possible
    tighten = limits.tighten[lane]
    return RateRanges(
        arc=arc, rate=rate,
        low=np.where(has_low, rate - tighten, 0), has_low=has_low,
        high=np.where(has_high, rate + tighten, 0), has_high=has_high,
    )
