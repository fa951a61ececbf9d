"""Exact marginal values of every limit at its bound: one more unit, one unit less.

A limit is an arc's upper bound (a lane's capacity, a warehouse's throughput
capacity, a site's storage capacity) or a lane's lower bound (its minimum
commitment). Changing one limit by one unit changes the optimal cost by a
one-sided derivative of a piecewise-linear convex function; under degeneracy
the two sides differ, and neither is the reduced cost of one optimal dual
(that is only a bound). Both come exactly from shortest paths in the residual
graph of the optimal flow [1]_:

============================  ===============================================
capacity of ``a = (t, h)``     loosen (one more unit) saves
at its bound ``x = u``         ``max(0, -(c + dist(h -> t)))``; tighten (one
                               unit less) costs ``-c + dist(t -> h)``
minimum of ``a`` at its        loosen (one unit less committed) saves
bound ``x = l``                ``max(0, c - dist(t -> h))``; tighten (one more
                               unit committed) costs ``c + dist(h -> t)``
============================  ===============================================

No path means the unit cannot be rerouted: tightening leaves the week without
a feasible plan (the value is missing, with a reason), loosening saves
nothing. The arc's own residual arcs never shorten these paths usefully (a
path through them closes a cycle of cost zero with the arc), so the distances
are those of the whole residual graph.

With a feasible potential ``pi`` the reduced lengths are non-negative and
``dist(u -> v) = dist_pi(u -> v) - pi(u) + pi(v)``. Zero-length residual arcs
that lie on cycles join nodes into strongly connected components within
which every distance is zero, for every optimal dual alike; contracting them
leaves a small graph in which exact Dijkstra runs from each needed source are
cheap (:class:`ZeroComponents`). A loosening search only has to reach radius
``-r`` (``r`` the arc's reduced cost), and an arc whose reduced cost is zero
has a loosening value of zero without any search.

Each value also carries the number of units for which it holds at least: the
least residual capacity on the cycle that realises it (an arc's change by that
many units changes the cost by that many times the value, by convexity), and
for a tightening the room left above the minimum or below the capacity.

References
----------
.. [1] R. K. Ahuja, T. L. Magnanti and J. B. Orlin, *Network Flows: Theory,
   Algorithms, and Applications*, Prentice Hall, 1993, section 9.11
   (sensitivity analysis of minimum cost flows) and section 9.4 (reduced cost
   optimality conditions).
.. [2] R. E. Tarjan, "Depth-first search and linear graph algorithms", SIAM
   Journal on Computing 1(2), 1972 (strongly connected components).
"""

from __future__ import annotations

from dataclasses import dataclass
from enum import IntEnum

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import breadth_first_order, connected_components

from planner.core.network import ArcKind, Instance
from planner.core.paths import UNLIMITED, ArcTable, tree_minimum
from planner.core.residual import Residual
from planner.core.search import Lifting, Searches, run_searches

__all__ = [
    "CAPACITY",
    "MINIMUM",
    "LimitValues",
    "TightenBlock",
    "ZeroComponents",
    "limit_values",
]

#: Side of a limit: the arc's upper bound (capacity, throughput, storage).
CAPACITY = 0
#: Side of a limit: the arc's lower bound (a lane's minimum commitment).
MINIMUM = 1
#: Arcs whose upper bound is a limit a planner can buy or sell.
LIMITED_KINDS = (ArcKind.LANE, ArcKind.THROUGHPUT, ArcKind.STOCK)


class TightenBlock(IntEnum):
    """Why a limit cannot be tightened by one unit (0: it can)."""

    NONE = 0
    BELOW_MINIMUM = 1  #: one unit less capacity would fall below the minimum (or below 0)
    NO_ROUTE = 2  #: no other route can take the unit: the week would have no feasible plan
    ABOVE_CAPACITY = 3  #: one more committed unit would exceed the capacity


@dataclass(frozen=True)
class LimitValues:
    """One row per limit at its bound; money in scaled cost per scaled unit.

    ``loosen`` is what one unit more capacity (or one unit less commitment)
    saves, ``tighten`` what one unit less capacity (or one more unit committed)
    costs; ``tighten`` is meaningful only where ``blocked`` is ``NONE``. The
    ``*_units`` say for how many units each holds at least (``UNLIMITED``: no end).
    """

    arc: np.ndarray
    side: np.ndarray
    loosen: np.ndarray
    loosen_units: np.ndarray
    tighten: np.ndarray
    tighten_units: np.ndarray
    blocked: np.ndarray

    def per_arc(self, n_arcs: int, side: int = CAPACITY) -> np.ndarray:
        """``loosen`` of every arc on one side (0 for arcs not at that limit)."""
        out = np.zeros(n_arcs, dtype=np.int64)
        chosen = self.side == side
        out[self.arc[chosen]] = self.loosen[chosen]
        return out


def limit_values(
    inst: Instance,
    flow: np.ndarray,
    res: Residual,
    potential: np.ndarray,
    other_duals: tuple = (),
    *,
    engine: str = "auto",
    only=None,
) -> LimitValues:
    """Exact one-sided values of every limit at its bound.

    Parameters
    ----------
    inst : Instance
    flow : numpy.ndarray
        An optimal flow.
    res : Residual
        Its residual graph.
    potential : numpy.ndarray
        A dual-feasible potential (every residual reduced cost >= 0).
    other_duals : tuple of (numpy.ndarray, numpy.ndarray)
        More optimal duals, each with a mask of the nodes where it is finite
        (for example the ``low`` and ``high`` vectors of the price ranges).
        Every optimal dual bounds a loosening value from above (its reduced
        cost on the arc); where one of them shows it is zero, no search is run.
    engine : {"auto", "compiled", "scipy"}
        The search engine (:func:`planner.core.search.run_searches`).
    only : array-like of int, optional
        Value only the limits of these arcs (the others are left out).

    Returns
    -------
    LimitValues

    Examples
    --------
    Two lanes of capacity 4 into a customer needing 6; the cheap lane is full.
    One more unit on it saves 9 - 5 = 4, one unit less costs 4:

    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> from planner.core.solve import solve_flow
    >>> from planner.core.residual import feasible_potential, residual_graph
    >>> inst = assemble_instance(WeekData.from_arrays([0, 0, 2], [0, 1], [2, 2], [5, 9],
    ...     supply=[10, 10, 0], demand=[0, 0, 6], lane_capacity=[4, 4]))
    >>> flow = solve_flow(inst).flow
    >>> res = residual_graph(inst, flow)
    >>> v = limit_values(inst, flow, res, feasible_potential(inst, res))
    >>> v.arc.tolist(), v.loosen.tolist(), v.loosen_units.tolist(), v.tighten.tolist()
    ([0], [4], [2], [4])
    """
    flow = np.asarray(flow, dtype=np.int64)
    pi = np.asarray(potential, dtype=np.int64)
    r = inst.cost + pi[inst.tail] - pi[inst.head]
    graph = ZeroComponents(inst.n_nodes, res, res.weight + pi[res.tail] - pi[res.head], engine=engine)
    cap = np.flatnonzero(np.isin(inst.arc_kind, LIMITED_KINDS) & ~inst.unlimited & (flow >= inst.upper))
    low = np.flatnonzero((inst.arc_kind == ArcKind.LANE) & (inst.lower > 0) & (flow <= inst.lower))
    if only is not None:
        cap, low = (np.intersect1d(side, np.asarray(only, dtype=np.int64)) for side in (cap, low))
    duals = [(pi, np.ones(inst.n_nodes, dtype=bool))] + [
        (np.asarray(d, np.int64), np.asarray(m, bool)) for d, m in other_duals
    ]
    parts = [
        _capacity_side(inst, graph, cap, r[cap], _least_reduced(inst, cap, duals, sign=-1)),
        _minimum_side(inst, graph, low, r[low], _least_reduced(inst, low, duals, sign=1)),
    ]
    return LimitValues(*(np.concatenate([p[i] for p in parts]) for i in range(7)))


def _least_reduced(inst: Instance, arcs: np.ndarray, duals: list, sign: int) -> np.ndarray:
    """The least of ``sign * r_a`` over the duals finite at both ends of each arc: a bound on its loosening value."""
    t, h = inst.tail[arcs], inst.head[arcs]
    bound = np.full(arcs.shape[0], np.iinfo(np.int64).max, dtype=np.int64)
    for pi, finite in duals:
        known = finite[t] & finite[h]
        reduced = inst.cost[arcs] + pi[t] - pi[h]
        bound = np.where(known, np.minimum(bound, sign * reduced), bound)
    return bound


def _capacity_side(inst: Instance, graph: "ZeroComponents", arcs: np.ndarray, r: np.ndarray, bound) -> tuple:
    """Capacity at its bound: one more unit along ``a`` then back ``h -> t``; one unit less via ``t -> h``."""
    t, h = inst.tail[arcs], inst.head[arcs]
    loosen, loosen_units = _loosen(graph, h, t, -r, bound)
    room = inst.upper[arcs] - inst.lower[arcs]  # how far the capacity can fall before the minimum
    can = room >= 1
    tighten, tighten_units, reached = _tighten(graph, t, h, -r, can, room)
    blocked = np.where(~can, TightenBlock.BELOW_MINIMUM, np.where(reached, TightenBlock.NONE, TightenBlock.NO_ROUTE))
    side = np.full(arcs.shape[0], CAPACITY, dtype=np.int8)
    return arcs, side, loosen, loosen_units, tighten, tighten_units, blocked.astype(np.int8)


def _minimum_side(inst: Instance, graph: "ZeroComponents", arcs: np.ndarray, r: np.ndarray, bound) -> tuple:
    """Minimum at its bound: one unit less along ``a`` rerouted ``t -> h``; one more via ``h -> t``."""
    t, h = inst.tail[arcs], inst.head[arcs]
    committed = inst.lower[arcs]
    loosen, loosen_units = _loosen(graph, t, h, r, bound)
    # Relaxing holds at most down to a commitment of zero.
    loosen_units = np.minimum(loosen_units, committed)
    unlimited = inst.unlimited[arcs]
    room = np.where(unlimited, UNLIMITED, inst.upper[arcs] - committed)
    can = unlimited | (room >= 1)
    tighten, tighten_units, reached = _tighten(graph, h, t, r, can, room)
    blocked = np.where(~can, TightenBlock.ABOVE_CAPACITY, np.where(reached, TightenBlock.NONE, TightenBlock.NO_ROUTE))
    side = np.full(arcs.shape[0], MINIMUM, dtype=np.int8)
    return arcs, side, loosen, loosen_units, tighten, tighten_units, blocked.astype(np.int8)


def _loosen(graph: "ZeroComponents", source, target, gain, bound) -> tuple[np.ndarray, np.ndarray]:
    """``max(0, gain - dist_pi(source -> target))`` and the units it holds for.

    ``gain`` is minus the arc's reduced cost on the loosened side, ``bound`` the
    least such figure over other optimal duals; where either is not positive the
    value is zero without a search, and a zero value holds for every further unit.
    """
    value = np.zeros(source.shape[0], dtype=np.int64)
    units = np.full(source.shape[0], UNLIMITED, dtype=np.int64)
    need = np.flatnonzero((gain > 0) & (bound > 0))
    if need.shape[0]:
        dist, reached, bottleneck = graph.distances(source[need], target[need], radius=gain[need])
        saves = reached & (dist < gain[need])
        value[need[saves]] = (gain[need] - dist)[saves]
        units[need[saves]] = bottleneck[saves]
    return value, units


def _tighten(graph: "ZeroComponents", source, target, cost, can, room) -> tuple:
    """``cost + dist_pi(source -> target)`` where ``can``; units capped by ``room``."""
    value = np.zeros(source.shape[0], dtype=np.int64)
    units = np.zeros(source.shape[0], dtype=np.int64)
    reached = np.zeros(source.shape[0], dtype=bool)
    need = np.flatnonzero(can)
    if need.shape[0]:
        dist, found, bottleneck = graph.distances(source[need], target[need])
        value[need] = np.where(found, dist + cost[need], 0)
        units[need] = np.where(found, np.minimum(bottleneck, room[need]), 0)
        reached[need] = found
    return value, units, reached


class ZeroComponents:
    """A residual graph with its zero-length strongly connected components contracted.

    Inside a component every node reaches every other at distance zero; the
    contracted graph keeps, for each ordered pair of components, the least
    reduced length of a residual arc between them (and one arc that realises
    it). Paths are measured there, then lifted back through a fixed root of
    each component, which gives a lower bound on the residual capacity of the
    path that realises the distance.

    Parameters
    ----------
    n : int
        Number of nodes.
    res : Residual
        The residual graph.
    reduced : numpy.ndarray
        Non-negative reduced length of each residual arc.
    engine : {"auto", "compiled", "scipy"}
        The search engine of :meth:`distances`.
    """

    def __init__(self, n: int, res: Residual, reduced: np.ndarray, *, engine: str = "auto") -> None:
        self.engine = engine
        admissible = reduced == 0
        tail, head = res.tail[admissible], res.head[admissible]
        graph = sp.csr_matrix((np.ones(tail.shape[0]), (tail, head)), shape=(n, n))
        self.count, comp = connected_components(graph, directed=True, connection="strong")
        self.comp = comp.astype(np.int64)
        inside = self.comp[tail] == self.comp[head]
        zero = ArcTable.merge(n, tail[inside], head[inside], np.zeros(int(inside.sum()), np.int64),
                              res.capacity[admissible][inside])
        into_root = self._tree_bottleneck(zero, reverse=True)
        from_root = self._tree_bottleneck(zero, reverse=False)
        self.contracted, link_tail, link_head = self._contract(n, res, reduced)
        self.lifting = Lifting(link_tail, link_head, into_root, from_root)
        # The same graph backwards, for searches grouped by their targets: a path
        # found from t to s there is a path from s to t here, walked the other way.
        self.reversed, order = _reversed(self.contracted)
        self.reversed_lifting = Lifting(link_head[order], link_tail[order], from_root, into_root)
        self.region, self.region_entered = _regions(n, res)

    def _tree_bottleneck(self, zero: ArcTable, reverse: bool) -> np.ndarray:
        """Least capacity on the path from each component's root to each node (to the root if ``reverse``).

        A breadth-first tree per component on its zero arcs, grown from a
        virtual root joined to the first node of every component.
        """
        n = zero.n
        roots = np.unique(self.comp, return_index=True)[1]
        tail, head = (zero.head, zero.tail) if reverse else (zero.tail, zero.head)
        rows = np.concatenate([tail, np.full(roots.shape[0], n)])
        cols = np.concatenate([head, roots])
        graph = sp.csr_matrix((np.ones(rows.shape[0]), (rows, cols)), shape=(n + 1, n + 1))
        _, pred = breadth_first_order(graph, n, directed=True, return_predecessors=True)
        parent = pred[:n].astype(np.int64)
        parent[parent == n] = -1
        child = np.flatnonzero(parent >= 0)
        cap = np.full(n, UNLIMITED, dtype=np.int64)
        if reverse:  # tree arc child -> parent in the graph's direction
            cap[child] = zero.capacity[zero.position(child, parent[child])]
        else:
            cap[child] = zero.capacity[zero.position(parent[child], child)]
        return tree_minimum(parent, cap)

    def _contract(self, n: int, res: Residual, reduced: np.ndarray) -> tuple[ArcTable, np.ndarray, np.ndarray]:
        """The contracted graph, and the node-level tail and head of the arc realising each of its arcs."""
        comp = self.comp
        across = comp[res.tail] != comp[res.head]
        nodes = ArcTable.merge(n, res.tail[across], res.head[across], reduced[across], res.capacity[across])
        pair = comp[nodes.tail] * self.count + comp[nodes.head]
        order = np.lexsort((nodes.weight, pair))
        first = np.ones(order.shape[0], dtype=bool)
        first[1:] = pair[order][1:] != pair[order][:-1]
        best = order[first]
        rows, cols = comp[nodes.tail[best]], comp[nodes.head[best]]
        table = ArcTable(
            self.count, rows, cols, nodes.weight[best], nodes.capacity[best], best,
            np.searchsorted(rows, np.arange(self.count + 1)),
        )
        return table, nodes.tail[best], nodes.head[best]

    def distances(self, source, target, radius=None, *, engine: str | None = None) -> tuple:
        """Reduced distance from each ``source`` to its ``target``, whether reached, and the path's capacity bound.

        With ``radius``, a target farther than its radius counts as not reached.
        ``engine`` chooses the search (:func:`planner.core.search.run_searches`;
        default: the one the graph was built with).
        """
        source = np.asarray(source, np.int64)
        target = np.asarray(target, np.int64)
        m = source.shape[0]
        dist = np.zeros(m, dtype=np.int64)
        reached = np.ones(m, dtype=bool)
        units = self.lifting.segment(source, target)
        apart = self.comp[source] != self.comp[target]
        # A target in a strongly connected region of the residual graph that no
        # arc enters cannot be reached from outside that region.
        region = self.region
        unreachable = apart & (region[source] != region[target]) & ~self.region_entered[region[target]]
        reached[unreachable] = False
        units[unreachable] = 0
        apart = np.flatnonzero(apart & ~unreachable)
        if apart.shape[0] == 0:
            return dist, reached, units
        # Group the searches by whichever end has fewer distinct components.
        backwards = np.unique(self.comp[target[apart]]).shape[0] < np.unique(self.comp[source[apart]]).shape[0]
        start, goal = (target, source) if backwards else (source, target)
        table, lifting = (self.reversed, self.reversed_lifting) if backwards else (self.contracted, self.lifting)
        radius_of = None if radius is None else np.asarray(radius, np.int64)[apart]
        searches, order = Searches.grouped(self.comp[start[apart]], self.comp[goal[apart]], goal[apart], radius_of)
        order = apart[order]
        found, path_units, exit_node = run_searches(table, lifting, searches, engine=engine or self.engine)
        ok = found >= 0
        dist[order] = np.where(ok, found, 0)
        reached[order] = ok
        first_segment = lifting.segment(start[order], np.maximum(exit_node, 0))
        units[order] = np.where(ok, np.minimum(path_units, first_segment), 0)
        return dist, reached, units


def _reversed(table: ArcTable) -> tuple[ArcTable, np.ndarray]:
    """``table`` with every arc turned round, and where each reversed arc came from."""
    order = np.lexsort((table.tail, table.head))
    rows, cols = table.head[order], table.tail[order]
    reversed_table = ArcTable(
        table.n, rows, cols, table.weight[order], table.capacity[order], table.arc[order],
        np.searchsorted(rows, np.arange(table.n + 1)),
    )
    return reversed_table, order


def _regions(n: int, res: Residual) -> tuple[np.ndarray, np.ndarray]:
    """Strongly connected regions of the whole residual graph, and whether an arc enters each from outside."""
    graph = sp.csr_matrix((np.ones(res.tail.shape[0]), (res.tail, res.head)), shape=(n, n))
    count, region = connected_components(graph, directed=True, connection="strong")
    entered = np.zeros(count, dtype=bool)
    crossing = region[res.tail] != region[res.head]
    entered[region[res.head[crossing]]] = True
    return region.astype(np.int64), entered
