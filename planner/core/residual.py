"""Residual graphs of a flow, and the label-correcting pass that finds a potential or a negative cycle.

The residual graph of a flow ``x`` has a forward arc for every arc with spare
capacity (cost ``c``) and a backward arc for every arc whose flow is above its
lower bound (cost ``-c``). A flow is optimal exactly when its residual graph
has no negative cycle; then a potential ``pi`` with non-negative reduced costs
``c + pi(tail) - pi(head)`` on every residual arc exists [1]_.

:func:`label_correcting` is the one Bellman-Ford pass of the core: from a
virtual source joined to every node at cost 0 it lowers labels round by
round, touching only the arcs leaving the nodes whose label changed, fully
vectorised. It returns the labels (a feasible potential) or a negative cycle
of the predecessor graph; :func:`feasible_potential` and
:func:`planner.core.diagnose.find_unbounded_cycle` both use it.

References
----------
.. [1] R. K. Ahuja, T. L. Magnanti and J. B. Orlin, *Network Flows: Theory,
   Algorithms, and Applications*, Prentice Hall, 1993, chapter 9 (optimality
   conditions, reduced costs) and chapter 5 (label-correcting algorithms and
   detecting negative cycles).
.. [2] R. Bellman, "On a routing problem", Quarterly of Applied Mathematics
   16, 1958.
.. [3] T. H. Cormen, C. E. Leiserson, R. L. Rivest and C. Stein,
   *Introduction to Algorithms*, 3rd ed., MIT Press, 2009, section 24.1 and
   the proof of lemma 24.16 (a cycle of the predecessor graph has negative
   weight).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from planner.core.network import Instance
from planner.core.paths import UNLIMITED

__all__ = [
    "DualError",
    "LabelPass",
    "Residual",
    "arcs_leaving",
    "feasible_potential",
    "label_correcting",
    "residual_graph",
]

class DualError(RuntimeError):
    """The flow is not optimal (a negative residual cycle) or a check failed."""


@dataclass(frozen=True)
class Residual:
    """Residual graph of a flow: one row per residual arc.

    ``arc`` is the index of the instance arc; ``forward`` says whether the
    residual arc follows it (spare capacity, cost ``c``) or runs against it
    (positive flow above the lower bound, cost ``-c``).
    """

    tail: np.ndarray
    head: np.ndarray
    weight: np.ndarray
    capacity: np.ndarray
    arc: np.ndarray
    forward: np.ndarray


def residual_graph(inst: Instance, flow: np.ndarray) -> Residual:
    """Residual graph of ``flow`` in ``inst``.

    Examples
    --------
    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> from planner.core.solve import solve_flow
    >>> inst = assemble_instance(WeekData.from_arrays([0, 2], [0], [1], [7],
    ...                                                supply=[5, 0], demand=[0, 5]))
    >>> res = residual_graph(inst, solve_flow(inst).flow)
    >>> sorted(zip(res.tail.tolist(), res.head.tolist(), res.weight.tolist()))
    [(0, 1, 7), (0, 2, 0), (1, 0, -7)]
    """
    flow = np.asarray(flow, dtype=np.int64)
    fwd = np.flatnonzero(inst.unlimited | (flow < inst.upper))
    bwd = np.flatnonzero(flow > inst.lower)
    fcap = np.where(inst.unlimited[fwd], UNLIMITED, inst.upper[fwd] - flow[fwd])
    return Residual(
        tail=np.concatenate([inst.tail[fwd], inst.head[bwd]]),
        head=np.concatenate([inst.head[fwd], inst.tail[bwd]]),
        weight=np.concatenate([inst.cost[fwd], -inst.cost[bwd]]),
        capacity=np.concatenate([fcap, flow[bwd] - inst.lower[bwd]]),
        arc=np.concatenate([fwd, bwd]),
        forward=np.concatenate([np.ones(fwd.shape[0], bool), np.zeros(bwd.shape[0], bool)]),
    )


def arcs_leaving(first_out: np.ndarray, nodes: np.ndarray) -> np.ndarray:
    """Positions of the arcs leaving ``nodes`` in arcs sorted by tail (CSR offsets ``first_out``).

    Examples
    --------
    >>> arcs_leaving(np.array([0, 2, 2, 5]), np.array([0, 2])).tolist()
    [0, 1, 2, 3, 4]
    """
    starts = first_out[nodes]
    counts = first_out[nodes + 1] - starts
    total = int(counts.sum())
    if total == 0:
        return np.empty(0, dtype=np.int64)
    # One arange per node without a Python loop: offsets restart at each node.
    return np.arange(total, dtype=np.int64) + np.repeat(starts - np.cumsum(counts) + counts, counts)


@dataclass(frozen=True)
class LabelPass:
    """Outcome of :func:`label_correcting`.

    ``labels`` are shortest distances from the virtual source (a feasible
    potential) when ``cycle`` is None; otherwise ``cycle`` lists the input
    positions of a negative cycle's arcs in flow order.
    """

    labels: np.ndarray
    cycle: list[int] | None


def label_correcting(n: int, tail: np.ndarray, head: np.ndarray, weight: np.ndarray) -> LabelPass:
    """Bellman-Ford from a virtual source joined to every node at cost 0.

    Each round relaxes only the arcs leaving the nodes whose label fell in the
    round before. Every node remembers the arc that last lowered its label;
    a cycle of that predecessor graph is negative [3]_. The predecessor graph
    is searched at rounds 2, 4, 8, ... and ``n``, so a short cycle is found early.

    Parameters
    ----------
    n : int
        Number of nodes.
    tail, head, weight : int64 arrays
        The arcs.

    Returns
    -------
    LabelPass

    Examples
    --------
    >>> label_correcting(3, np.array([0, 1]), np.array([1, 2]), np.array([-2, 1])).labels.tolist()
    [0, -2, -1]
    >>> label_correcting(2, np.array([0, 1]), np.array([1, 0]), np.array([-2, 1])).cycle
    [0, 1]
    """
    order = np.argsort(tail, kind="stable")
    tail_s, head_s, weight_s = tail[order], head[order], weight[order]
    first_out = np.searchsorted(tail_s, np.arange(n + 1))
    label = np.zeros(n, dtype=np.int64)
    pred = np.full(n, -1, dtype=np.int64)  # sorted position of the arc that last lowered the label
    active = np.unique(tail_s[weight_s < 0])  # from labels all 0, only negative arcs lower one
    for round_ in range(1, n + 2):
        if active.shape[0] == 0:
            return LabelPass(label, None)
        pos = arcs_leaving(first_out, active)
        cand = label[tail_s[pos]] + weight_s[pos]
        better = cand < label[head_s[pos]]
        pos, cand = pos[better], cand[better]
        np.minimum.at(label, head_s[pos], cand)
        best = cand == label[head_s[pos]]
        pred[head_s[pos[best]]] = pos[best]
        active = np.unique(head_s[pos])
        if active.shape[0] and (round_ >= n or (round_ >= 2 and round_ & (round_ - 1) == 0)):
            cycle = _predecessor_cycle(pred, tail_s, n, active)
            if cycle is not None:
                return LabelPass(label, [int(order[p]) for p in cycle])
    raise DualError("label-correcting pass lost its predecessor chain")


def _predecessor_cycle(pred: np.ndarray, tail: np.ndarray, n: int, starts: np.ndarray) -> list[int] | None:
    """A cycle of the predecessor graph met walking ``n`` steps back from ``starts``.

    Returns the positions (into the sorted arcs) of the cycle's arcs in flow
    order, or None when every walk ends at a node without predecessor.
    """
    parent = np.where(pred >= 0, tail[np.maximum(pred, 0)], np.arange(n))
    node, jump, steps = starts, parent, n
    while steps:  # n steps by doubling
        if steps & 1:
            node = jump[node]
        jump = jump[jump]
        steps >>= 1
    on_cycle = node[pred[node] >= 0]
    if on_cycle.shape[0] == 0:
        return None
    first = int(on_cycle[0])
    cycle: list[int] = []
    v = first
    while True:
        p = int(pred[v])
        cycle.append(p)
        v = int(tail[p])
        if v == first:
            break
    cycle.reverse()
    return cycle


def feasible_potential(inst: Instance, res: Residual) -> np.ndarray:
    """A dual-feasible potential, normalised so that ``pi(SPARE) = 0``.

    Parameters
    ----------
    inst : Instance
    res : Residual
        Residual graph of an optimal flow.

    Returns
    -------
    numpy.ndarray of int64

    Raises
    ------
    DualError
        When the residual graph has a negative cycle, i.e. the flow is not optimal.
    """
    found = label_correcting(inst.n_nodes, res.tail, res.head, res.weight)
    if found.cycle is not None:
        raise DualError("the residual graph has a negative cycle: the flow is not optimal")
    return found.labels - found.labels[inst.spare]
