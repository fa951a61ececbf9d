"""Shortest paths on non-negative integer lengths, exact, with the capacity along each path.

Residual graphs have parallel arcs (several modes of one lane, an arc and its
reverse cancelled by zero flow), zero lengths (arcs of a degenerate optimum)
and integer lengths that must come out exact. :class:`ArcTable` merges the
parallel arcs of a graph (least length kept, capacities of the tied arcs
summed) into a CSR layout built by hand, so that zero lengths stay explicit
entries (scipy's sparse constructors and csgraph may drop explicit zeros
otherwise). :func:`shortest_paths` runs scipy's Dijkstra from one or several
sources on it and proves every distance exact on the integers: no arc improves
a label and every reached node is tight on its tree arc [1]_.

References
----------
.. [1] E. W. Dijkstra, "A note on two problems in connexion with graphs",
   Numerische Mathematik 1, 1959; R. K. Ahuja, T. L. Magnanti and J. B. Orlin,
   *Network Flows*, Prentice Hall, 1993, section 4.5 (shortest path optimality
   conditions).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.sparse.csgraph import dijkstra

from planner.core.week import INT64_MAX

__all__ = ["UNLIMITED", "ArcTable", "PathError", "ShortestPaths", "shortest_paths", "tree_minimum"]

#: Capacity of an arc without an upper bound.
UNLIMITED = INT64_MAX


class PathError(RuntimeError):
    """A shortest-path distance failed its exact check."""


@dataclass(frozen=True)
class ArcTable:
    """A graph with parallel arcs merged, in CSR order (sorted by tail, then head).

    ``weight`` is each group's least length, ``capacity`` the summed capacity
    of the group's arcs of that length (``UNLIMITED`` when one is unlimited or
    the sum would not fit), ``arc`` the input position of its first such arc.
    """

    n: int
    tail: np.ndarray
    head: np.ndarray
    weight: np.ndarray
    capacity: np.ndarray
    arc: np.ndarray
    indptr: np.ndarray

    @classmethod
    def merge(cls, n: int, tail, head, weight, capacity) -> "ArcTable":
        """Merge the parallel arcs of ``(tail, head, weight, capacity)`` over ``n`` nodes.

        Examples
        --------
        >>> t = ArcTable.merge(3, np.array([0, 0, 1]), np.array([1, 1, 2]),
        ...                    np.array([5, 5, 0]), np.array([2, 3, 1]))
        >>> t.weight.tolist(), t.capacity.tolist(), t.arc.tolist()
        ([5, 0], [5, 1], [0, 2])
        """
        key = np.asarray(tail, np.int64) * n + np.asarray(head, np.int64)
        # A stable sort on one key is much cheaper than a two-key lexsort.
        order = np.argsort(key, kind="stable")
        key_s, w_s, cap_s = key[order], np.asarray(weight, np.int64)[order], np.asarray(capacity, np.int64)[order]
        first = np.ones(key_s.shape[0], dtype=bool)
        first[1:] = key_s[1:] != key_s[:-1]
        starts = np.flatnonzero(first)
        if starts.shape[0] == 0:
            empty = np.empty(0, np.int64)
            return cls(n, empty, empty, empty, empty, empty, np.zeros(n + 1, np.int64))
        group = np.cumsum(first) - 1
        w_min = np.minimum.reduceat(w_s, starts)
        tied = w_s == w_min[group]
        # Sum tied capacities without wrapping int64: five or more tied unlimited
        # arcs (modes of one lane) would overflow a clipped sum, so a group with
        # an unlimited arc, or a finite sum past UNLIMITED // 4 (judged in floating
        # point), is unlimited.
        cap_finite = np.where(tied & (cap_s < UNLIMITED), cap_s, 0)
        huge = np.logical_or.reduceat(tied & (cap_s >= UNLIMITED), starts) | (
            np.add.reduceat(cap_finite.astype(np.float64), starts) >= UNLIMITED // 4
        )
        cap = np.where(huge, UNLIMITED, np.add.reduceat(cap_finite, starts))
        tied_at = np.flatnonzero(tied)
        arc = order[tied_at[np.searchsorted(tied_at, starts)]]
        merged = key_s[starts]
        rows, cols = merged // n, merged % n
        return cls(n, rows, cols, w_min, cap, arc, np.searchsorted(rows, np.arange(n + 1)))

    def position(self, tail, head) -> np.ndarray:
        """Position of the merged arc ``tail -> head`` (each pair must exist)."""
        return np.searchsorted(self.tail * self.n + self.head, np.asarray(tail) * self.n + np.asarray(head))

    def csr(self) -> sp.csr_matrix:
        return sp.csr_matrix((self.weight.astype(np.float64), self.head, self.indptr), shape=(self.n, self.n))


@dataclass(frozen=True)
class ShortestPaths:
    """Exact distances from each source (one row per source).

    ``reached`` is False where a node cannot be reached (or lies beyond the
    limit). ``pred`` is the previous node on a shortest path (-1 at the source
    and where unreached), ``pred_arc`` the merged arc that leads into the node.
    """

    dist: np.ndarray
    reached: np.ndarray
    pred: np.ndarray
    pred_arc: np.ndarray


def shortest_paths(table: ArcTable, sources, limit: int | None = None) -> ShortestPaths:
    """Dijkstra from every source of ``sources`` on ``table``, exact on the integers.

    Parameters
    ----------
    table : ArcTable
        Non-negative integer lengths.
    sources : array of int
        One row of the result per source.
    limit : int, optional
        Stop at this distance: farther nodes count as unreached.

    Returns
    -------
    ShortestPaths

    Raises
    ------
    PathError
        When a distance fails its exact check (lengths beyond float precision).

    Examples
    --------
    >>> t = ArcTable.merge(3, np.array([0, 1, 0]), np.array([1, 2, 2]),
    ...                    np.array([0, 2, 5]), np.array([9, 9, 9]))
    >>> found = shortest_paths(t, [0])
    >>> found.dist.tolist(), found.pred.tolist()
    ([[0, 0, 2]], [[-1, 0, 1]])
    """
    sources = np.atleast_1d(np.asarray(sources, np.int64))
    n = table.n
    if sources.shape[0] == 0:
        empty = np.zeros((0, n), np.int64)
        return ShortestPaths(empty, empty.astype(bool), empty, empty)
    kwargs = {} if limit is None else {"limit": float(limit)}
    dist, pred = dijkstra(table.csr(), directed=True, indices=sources, return_predecessors=True, **kwargs)
    dist, pred = np.atleast_2d(dist), np.atleast_2d(pred)
    reached = np.isfinite(dist)
    exact = np.where(reached, np.rint(np.where(reached, dist, 0)), 0).astype(np.int64)
    pred = np.where(pred < 0, -1, pred).astype(np.int64)
    pred_arc = _check(table, exact, reached, pred, limit)
    return ShortestPaths(exact, reached, pred, pred_arc)


def _check(table: ArcTable, dist, reached, pred, limit) -> np.ndarray:
    """Prove the distances exact: no arc improves a label, every reached node is tight on its tree arc.

    Returns the merged arc into each reached node (-1 elsewhere).
    """
    rows, cols, weight = table.tail, table.head, table.weight
    r, c = reached[:, rows], reached[:, cols]
    through = dist[:, rows] + weight
    if limit is None:
        if np.any(r & ~c):
            raise PathError("shortest-path check failed: an arc leaves the reached set")
    elif np.any(r & ~c & (through <= limit)):
        raise PathError("shortest-path check failed: an arc reaches a node within the limit")
    both = r & c
    if np.any(both & (dist[:, cols] > through)):
        raise PathError("shortest-path check failed: a distance is not minimal")
    s, v = np.nonzero(reached & (pred >= 0))
    pos = table.position(pred[s, v], v)
    if np.any(dist[s, v] != dist[s, pred[s, v]] + weight[pos]):
        raise PathError("shortest-path check failed: a tree arc is not tight")
    pred_arc = np.full(dist.shape, -1, dtype=np.int64)
    pred_arc[s, v] = pos
    return pred_arc


def tree_minimum(parent: np.ndarray, value: np.ndarray) -> np.ndarray:
    """Least ``value`` on the path from each node up to its tree's root (pointer jumping).

    ``parent`` is -1 at roots; ``value[v]`` belongs to the tree arc into ``v``
    (ignored at roots).

    Examples
    --------
    >>> tree_minimum(np.array([-1, 0, 1, 0]), np.array([0, 7, 3, 9])).tolist()
    [9223372036854775807, 7, 3, 9]
    """
    n = parent.shape[0]
    anc = np.where(parent >= 0, parent, np.arange(n))
    val = np.where(parent >= 0, value, UNLIMITED).astype(np.int64)
    while True:
        nxt = anc[anc]
        val = np.minimum(val, val[anc])
        if np.array_equal(nxt, anc):
            return val
        anc = nxt
