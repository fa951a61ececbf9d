"""Many shortest-path searches on one graph, each stopping at its targets or its radius.

The exact values of limits (:mod:`planner.core.limits`) ask for the distance
between thousands of pairs of nodes, most of them close together. A search
from each source that touches only what it visits and stops as soon as its
targets are settled (or its radius is passed) costs what it explores; scipy's
Dijkstra instead pays for every node of the graph per source. The planner
therefore runs a small compiled kernel (``_search.c``, built at install and
loaded with ctypes) and keeps scipy's Dijkstra as the reference path: used when
the kernel is not built, and compared with it in the tests.

Both return, for each query, the exact distance and the least residual
capacity on the path found, lifted through zero-length components (see
:class:`planner.core.limits.ZeroComponents`).
"""

from __future__ import annotations

import ctypes
import functools
from dataclasses import dataclass
from importlib.machinery import EXTENSION_SUFFIXES
from pathlib import Path

import numpy as np

from planner.core.paths import UNLIMITED, ArcTable, shortest_paths

__all__ = ["Searches", "compiled_kernel", "run_searches"]

#: Distances computed per scipy batch (reference path): sources x nodes.
_BATCH_CELLS = 4_000_000


@dataclass(frozen=True)
class Searches:
    """Queries grouped by source: search ``i`` starts at ``source[i]`` and serves
    queries ``qptr[i]:qptr[i + 1]``. Query ``q`` asks for ``target[q]`` (a node of
    the graph searched) within ``qradius[q]`` (-1: no radius) and ends its walk at
    ``target_node[q]`` (a node of the uncontracted graph). Within a search the
    queries are sorted by radius, largest first."""

    source: np.ndarray
    qptr: np.ndarray
    target: np.ndarray
    target_node: np.ndarray
    qradius: np.ndarray

    @classmethod
    def grouped(cls, start, goal, goal_node, radius=None) -> tuple["Searches", np.ndarray]:
        """Searches from the distinct ``start`` nodes; returns them and the query order used."""
        radius = np.full(start.shape[0], -1, np.int64) if radius is None else np.asarray(radius, np.int64)
        order = np.lexsort((-radius, start))
        starts, first = np.unique(start[order], return_index=True)
        qptr = np.append(first, order.shape[0]).astype(np.int64)
        return cls(starts, qptr, goal[order], goal_node[order], radius[order]), order

    @property
    def radius(self) -> np.ndarray:
        """Each search's widest radius (-1: none)."""
        return self.qradius[self.qptr[:-1]]


@dataclass(frozen=True)
class Lifting:
    """How arcs of the searched graph map to residual arcs, and the capacity inside components."""

    link_tail: np.ndarray
    link_head: np.ndarray
    in_bottleneck: np.ndarray
    out_bottleneck: np.ndarray

    def segment(self, start, end) -> np.ndarray:
        through_root = np.minimum(self.in_bottleneck[start], self.out_bottleneck[end])
        return np.where(start == end, UNLIMITED, through_root)


@functools.cache
def compiled_kernel():
    """The compiled search function, or None when the extension was not built."""
    folder = Path(__file__).resolve().parent
    for suffix in EXTENSION_SUFFIXES:
        path = folder / f"_search{suffix}"
        if path.exists():
            library = ctypes.CDLL(str(path))
            function = library.planner_many_searches
            function.restype = ctypes.c_int
            function.argtypes = [ctypes.c_int64] + [ctypes.c_void_p] * 8 + [ctypes.c_int64] + [ctypes.c_void_p] * 9
            return function
    return None


def run_searches(table: ArcTable, lifting: Lifting, searches: Searches, *, engine: str = "auto"):
    """Distance, path capacity and exit node of every query.

    Parameters
    ----------
    table : ArcTable
        The graph searched (non-negative integer lengths; an arc of length -1 is
        left out).
    lifting : Lifting
    searches : Searches
    engine : {"auto", "compiled", "scipy"}
        ``auto`` takes the compiled kernel when it is built.

    Returns
    -------
    dist, units, exit_node : numpy.ndarray
        ``dist`` is -1 where the target is not reached within the radius.
    """
    kernel = compiled_kernel() if engine in ("auto", "compiled") else None
    if engine == "compiled" and kernel is None:
        raise RuntimeError("the compiled search kernel is not built; reinstall the planner with a C compiler")
    if kernel is not None:
        return _compiled(kernel, table, lifting, searches)
    return _reference(table, lifting, searches)


def _compiled(kernel, table: ArcTable, lifting: Lifting, searches: Searches):
    m = searches.target.shape[0]
    dist, units, exit_node = (np.empty(m, dtype=np.int64) for _ in range(3))
    arrays = [
        table.indptr, table.head, table.weight, table.capacity,
        lifting.link_tail, lifting.link_head, lifting.in_bottleneck, lifting.out_bottleneck,
    ]
    query = [searches.source, searches.radius, searches.qptr, searches.target, searches.target_node, searches.qradius]
    held = [np.ascontiguousarray(a, dtype=np.int64) for a in arrays + query]  # kept alive for the call
    status = kernel(
        table.n, *(a.ctypes.data for a in held[:8]), searches.source.shape[0],
        *(a.ctypes.data for a in held[8:]), dist.ctypes.data, units.ctypes.data, exit_node.ctypes.data,
    )
    if status != 0:
        raise MemoryError("the search kernel ran out of memory")
    return dist, units, exit_node


def _reference(table: ArcTable, lifting: Lifting, searches: Searches):
    """The same answers from scipy's Dijkstra, a batch of sources at a time."""
    if (table.weight < 0).any():  # arcs taken out
        kept = np.flatnonzero(table.weight >= 0)
        link = Lifting(lifting.link_tail[kept], lifting.link_head[kept], lifting.in_bottleneck, lifting.out_bottleneck)
        rows = table.tail[kept]
        table = ArcTable(table.n, rows, table.head[kept], table.weight[kept], table.capacity[kept], table.arc[kept],
                         np.searchsorted(rows, np.arange(table.n + 1)))
        lifting = link
    m = searches.target.shape[0]
    dist = np.full(m, -1, dtype=np.int64)
    units = np.zeros(m, dtype=np.int64)
    exit_node = np.full(m, -1, dtype=np.int64)
    n_searches = searches.source.shape[0]
    per_batch = max(1, _BATCH_CELLS // max(table.n, 1))
    for first in range(0, n_searches, per_batch):
        chosen = np.arange(first, min(first + per_batch, n_searches))
        radius = searches.radius[chosen]
        limit = None if (radius < 0).any() else int(radius.max())
        found = shortest_paths(table, searches.source[chosen], limit=limit)
        for row, s in enumerate(chosen):
            q = np.arange(searches.qptr[s], searches.qptr[s + 1])
            goal = searches.target[q]
            ok = found.reached[row, goal] & ((searches.qradius[q] < 0) | (found.dist[row, goal] <= searches.qradius[q]))
            dist[q] = np.where(ok, found.dist[row, goal], -1)
            walked_units, walked_exit = _walk(table, found, row, searches.source[s], goal[ok],
                                              searches.target_node[q][ok], lifting)
            units[q[ok]] = walked_units
            exit_node[q[ok]] = walked_exit
    return dist, units, exit_node


def _walk(table: ArcTable, found, row: int, source: int, goal, end, lifting: Lifting):
    """Walk the shortest paths back from ``goal`` to ``source``, lifting each arc."""
    current = goal.copy()
    end = end.copy()
    units = np.full(goal.shape[0], UNLIMITED, dtype=np.int64)
    walking = current != source
    while walking.any():
        at = np.flatnonzero(walking)
        link = found.pred_arc[row, current[at]]
        hop = [units[at], table.capacity[link], lifting.segment(lifting.link_head[link], end[at])]
        units[at] = np.minimum.reduce(hop)
        end[at] = lifting.link_tail[link]
        current[at] = found.pred[row, current[at]]
        walking[at] = current[at] != source
    return units, end
