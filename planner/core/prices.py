"""Site prices from the residual graph of an optimal flow: exact ranges and the marginal route.

Sign convention: a potential ``pi`` is dual feasible when every arc of the
residual graph has a non-negative reduced cost ``r = c + pi(tail) - pi(head)``
(forward arcs with spare capacity at cost ``c``, backward arcs of positive flow
at cost ``-c``). Prices then rise along the direction of flow: a customer's
price is the marginal delivered cost of one more unit there. Potentials are
fixed up to a constant; ``pi(SPARE) = 0`` reads "unused supply is worth
nothing".

When the optimal flow is degenerate the dual is not unique. The exact range of
optimal duals at a node ``v`` is

* ``price_high(v) = dist(SPARE -> v)``, the cost of one more unit needed at
  ``v`` (the right derivative of the optimal cost), and
* ``price_low(v) = -dist(v -> SPARE)``, the saving from one unit less needed
  at ``v`` (the left derivative),

with distances in the residual graph. Both vectors are optimal duals. They are
computed from one feasible potential (:func:`planner.core.residual.feasible_potential`)
and two Dijkstra runs on the non-negative reduced costs [1]_ [2]_.

References
----------
.. [1] R. K. Ahuja, T. L. Magnanti and J. B. Orlin, *Network Flows: Theory,
   Algorithms, and Applications*, Prentice Hall, 1993, chapter 9 (optimality
   conditions, reduced costs) and section 4.6 (potentials and Dijkstra).
.. [2] D. B. Johnson, "Efficient algorithms for shortest paths in sparse
   networks", Journal of the ACM 24(1), 1977 (reweighting with a potential).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import dijkstra

from planner.core.network import Instance
from planner.core.residual import UNLIMITED, DualError, Residual

__all__ = [
    "HIGH_REASON",
    "LOW_REASON",
    "PriceRanges",
    "capacity_values",
    "marginal_path",
    "price_ranges",
    "reduced_costs",
]

#: Why ``price_high`` is NULL at a site.
HIGH_REASON = (
    "no spare route into this site: all supply is in use or every route to it is at capacity, "
    "so one more unit cannot be had at any cost"
)
#: Why ``price_low`` is NULL at a site.
LOW_REASON = (
    "no route takes a unit from this site back to spare supply: nothing flows into it that "
    "could be cut and no lane out of it has room"
)


@dataclass(frozen=True)
class PriceRanges:
    """Exact range of optimal duals at every node (scaled integers).

    ``high``/``low`` are valid where ``has_high``/``has_low`` is True.
    ``high_units`` is the residual capacity of the cheapest path from SPARE
    (units for which ``high`` holds at least). ``price`` is the stored single
    optimal dual: ``high`` wherever it is finite, elsewhere the feasible
    potential lifted by the least constant that keeps it feasible.
    """

    potential: np.ndarray
    high: np.ndarray
    low: np.ndarray
    has_high: np.ndarray
    has_low: np.ndarray
    high_units: np.ndarray
    price: np.ndarray
    pred_high: np.ndarray
    pred_high_arc: np.ndarray


def price_ranges(inst: Instance, res: Residual, potential: np.ndarray) -> PriceRanges:
    """Left and right derivatives of the optimal cost at every node.

    Parameters
    ----------
    inst : Instance
    res : Residual
        Residual graph of an optimal flow.
    potential : numpy.ndarray
        A feasible potential with ``pi(SPARE) = 0`` (:func:`feasible_potential`).

    Returns
    -------
    PriceRanges

    Raises
    ------
    DualError
        When the potential is not feasible or a distance fails its exact check.

    Examples
    --------
    One plant with 2 spare units, one customer; the lane's cost is the price:

    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> from planner.core.solve import solve_flow
    >>> from planner.core.residual import feasible_potential, residual_graph
    >>> inst = assemble_instance(WeekData.from_arrays([0, 2], [0], [1], [7],
    ...                                                supply=[5, 0], demand=[0, 3]))
    >>> res = residual_graph(inst, solve_flow(inst).flow)
    >>> pr = price_ranges(inst, res, feasible_potential(inst, res))
    >>> pr.low.tolist()[:2], pr.high.tolist()[:2], pr.high_units.tolist()[:2]
    ([0, 7], [0, 7], [2, 2])
    """
    n = inst.n_nodes
    pi = np.asarray(potential, dtype=np.int64)
    reduced = res.weight + pi[res.tail] - pi[res.head]
    if reduced.shape[0] and reduced.min() < 0:
        raise DualError("the potential is not dual feasible")

    fwd = _ShortestPaths(n, res.tail, res.head, reduced, res.capacity, inst.spare)
    rev = _ShortestPaths(n, res.head, res.tail, reduced, res.capacity, inst.spare)
    has_high = fwd.reached
    has_low = rev.reached
    high = np.where(has_high, fwd.dist + pi, 0)
    low = np.where(has_low, pi - rev.dist, 0)

    # Stored price: high where finite; nodes that SPARE cannot reach form a set
    # with no residual arc entering from the reached set, so lifting the
    # feasible potential there by K keeps every reduced cost >= 0.
    cross = (~has_high[res.tail]) & has_high[res.head]
    lift = 0
    if cross.any():
        lift = max(0, int((high[res.head[cross]] - pi[res.tail[cross]] - res.weight[cross]).max()))
    price = np.where(has_high, high, pi + lift)

    return PriceRanges(
        potential=pi,
        high=high,
        low=low,
        has_high=has_high,
        has_low=has_low,
        high_units=fwd.bottleneck(),
        price=price,
        pred_high=fwd.pred,
        pred_high_arc=fwd.pred_arc,
    )


class _ShortestPaths:
    """Dijkstra from one source on non-negative integer weights, checked exactly.

    Parallel arcs are merged (least weight kept, capacities of the tied arcs
    summed); the CSR matrix is built by hand so that zero weights stay
    explicit entries (scipy's sparse constructors may drop or sum them).
    """

    def __init__(self, n, tail, head, weight, capacity, source):
        key = tail.astype(np.int64) * n + head
        # Group the parallel arcs (a stable sort on one key is much cheaper
        # than a two-key lexsort), then take each group's least weight.
        order = np.argsort(key, kind="stable")
        key_s, w_s, cap_s = key[order], weight[order], capacity[order]
        first = np.ones(key_s.shape[0], dtype=bool)
        first[1:] = key_s[1:] != key_s[:-1]
        group = np.cumsum(first) - 1
        starts = np.flatnonzero(first)
        w_min = np.minimum.reduceat(w_s, starts) if starts.shape[0] else w_s[:0]
        tied = w_s == w_min[group]
        # Sum tied capacities without wrapping int64: five or more tied
        # unlimited arcs (modes of one lane) would overflow a clipped sum, so
        # a group with an unlimited arc, or a finite sum past UNLIMITED // 4
        # (judged in floating point), is unlimited.
        cap_finite = np.where(tied & (cap_s < UNLIMITED), cap_s, 0)
        if starts.shape[0]:
            cap = np.add.reduceat(cap_finite, starts)
            huge = np.logical_or.reduceat(tied & (cap_s >= UNLIMITED), starts) | (
                np.add.reduceat(cap_finite.astype(np.float64), starts) >= UNLIMITED // 4
            )
            cap = np.where(huge, UNLIMITED, cap)
        else:
            cap = cap_finite[:0]
        self.key = key_s[starts]
        # Residual arc index of each group's first least-weight arc.
        tied_at = np.flatnonzero(tied)
        self.arc = order[tied_at[np.searchsorted(tied_at, starts)]]
        self.weight = w_min
        self.cap = cap
        self.n = n
        rows = self.key // n
        cols = self.key % n
        indptr = np.searchsorted(rows, np.arange(n + 1))
        graph = sp.csr_matrix((w_min.astype(np.float64), cols, indptr), shape=(n, n))
        dist, pred = dijkstra(graph, directed=True, indices=source, return_predecessors=True)
        self.reached = np.isfinite(dist)
        self.dist = np.where(self.reached, np.rint(np.where(self.reached, dist, 0)), 0).astype(np.int64)
        self.pred = np.where(pred < 0, -1, pred).astype(np.int64)
        self.source = source
        self._check(rows, cols)

    def _check(self, rows, cols):
        # Exact Bellman conditions: no arc improves a label, and every reached
        # node is tight on its tree arc. Together they prove exact distances.
        r, c = self.reached[rows], self.reached[cols]
        if np.any(r & ~c):
            raise DualError("shortest-path check failed: an arc leaves the reached set")
        both = r & c
        if np.any(self.dist[cols[both]] > self.dist[rows[both]] + self.weight[both]):
            raise DualError("shortest-path check failed: a distance is not minimal")
        v = np.flatnonzero(self.reached & (self.pred >= 0))
        pos = np.searchsorted(self.key, self.pred[v] * self.n + v)
        if np.any(self.dist[v] != self.dist[self.pred[v]] + self.weight[pos]):
            raise DualError("shortest-path check failed: a tree arc is not tight")
        self.pred_arc = np.full(self.n, -1, dtype=np.int64)
        self.pred_arc[v] = self.arc[pos]
        self._tree_cap = np.full(self.n, UNLIMITED, dtype=np.int64)
        self._tree_cap[v] = self.cap[pos]

    def bottleneck(self) -> np.ndarray:
        """Least residual capacity on the tree path from the source (pointer jumping)."""
        anc = np.where(self.pred >= 0, self.pred, np.arange(self.n))
        val = self._tree_cap.copy()
        while True:
            nxt = anc[anc]
            val = np.minimum(val, val[anc])
            if np.array_equal(nxt, anc):
                break
            anc = nxt
        return np.where(self.reached, val, 0)


def reduced_costs(inst: Instance, price: np.ndarray) -> np.ndarray:
    """Reduced cost ``c + pi(tail) - pi(head)`` of every arc (scaled integers)."""
    pi = np.asarray(price, dtype=np.int64)
    return inst.cost + pi[inst.tail] - pi[inst.head]


def capacity_values(inst: Instance, flow: np.ndarray, reduced: np.ndarray) -> np.ndarray:
    """Value of one more unit of capacity on each arc: ``-r`` where at capacity, else 0.

    Arcs without an upper bound are never at capacity and get 0.
    """
    at_cap = (~inst.unlimited) & (np.asarray(flow) >= inst.upper)
    return np.where(at_cap, np.maximum(-reduced, 0), 0)


def marginal_path(inst: Instance, ranges: PriceRanges, res: Residual, node: int) -> list[tuple[int, bool]]:
    """The residual arcs that the marginal unit travels from SPARE to ``node``.

    Returns a list of ``(arc index, forward)`` from SPARE outwards: a forward
    step sends one more unit along the arc, a backward step sends one unit
    less. Empty when ``node`` is SPARE or unreachable.
    """
    steps: list[tuple[int, bool]] = []
    v = int(node)
    if not ranges.has_high[v]:
        return steps
    guard = inst.n_nodes
    while v != inst.spare and guard > 0:
        ra = int(ranges.pred_high_arc[v])
        steps.append((int(res.arc[ra]), bool(res.forward[ra])))
        v = int(ranges.pred_high[v])
        guard -= 1
    steps.reverse()
    return steps
