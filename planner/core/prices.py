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
and two exact Dijkstra runs (:mod:`planner.core.paths`) on the non-negative
reduced costs [1]_ [2]_.

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

from planner.core.network import Instance
from planner.core.paths import UNLIMITED, ArcTable, shortest_paths, tree_minimum
from planner.core.residual import DualError, Residual

__all__ = [
    "HIGH_REASON",
    "LOW_REASON",
    "PriceRanges",
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

    forward = ArcTable.merge(n, res.tail, res.head, reduced, res.capacity)
    fwd = shortest_paths(forward, [inst.spare])
    rev = shortest_paths(ArcTable.merge(n, res.head, res.tail, reduced, res.capacity), [inst.spare])
    has_high, has_low = fwd.reached[0], rev.reached[0]
    high = np.where(has_high, fwd.dist[0] + pi, 0)
    low = np.where(has_low, pi - rev.dist[0], 0)
    tree_arc = fwd.pred_arc[0]
    into = tree_arc >= 0
    tree_cap = np.full(n, UNLIMITED, dtype=np.int64)
    tree_cap[into] = forward.capacity[tree_arc[into]]
    pred_high_arc = np.full(n, -1, dtype=np.int64)
    pred_high_arc[into] = forward.arc[tree_arc[into]]

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
        high_units=np.where(has_high, tree_minimum(fwd.pred[0], tree_cap), 0),
        price=price,
        pred_high=fwd.pred[0],
        pred_high_arc=pred_high_arc,
    )


def reduced_costs(inst: Instance, price: np.ndarray) -> np.ndarray:
    """Reduced cost ``c + pi(tail) - pi(head)`` of every arc (scaled integers)."""
    pi = np.asarray(price, dtype=np.int64)
    return inst.cost + pi[inst.tail] - pi[inst.head]


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
