"""Solver engines: OR-Tools cold, and a warm re-solve from the optimal flow of a similar week.

A scenario (a what-if edit of a week) and the next week of one network differ
from a solved week in few figures. The warm engine starts from that week's
optimal flow ``x`` and a potential ``pi`` proving it optimal (a
:class:`WarmState`), and repairs them for the new figures instead of solving
from nothing:

1. Dual repair: the arcs with reduced cost 0 under the earlier costs and
   potentials are tight; a spanning forest of them, grown breadth-first and
   taking arcs strictly inside their bounds first, gets new potentials that
   keep its arcs tight under the new costs (each tree keeps its root's earlier
   potential). This is the potential a network simplex would compute for a
   basis made of those arcs [1]_, and it keeps most of the earlier flow in
   place when many rates change a little.
2. Clip ``x`` into the new bounds; take the new reduced cost
   ``r = c + pi(tail) - pi(head)`` of every arc and put the arc at its upper
   bound where ``r < 0`` and at its lower bound where ``r > 0``; arcs with
   ``r = 0`` keep their flow. Now ``x`` and ``pi`` satisfy the reduced-cost
   optimality conditions, but ``x`` is a pseudoflow: nodes have an excess or a
   deficit (the edited supplies and demands, the moved arcs) [1]_. Deepest
   first, every node then passes its excess or deficit up its tree arc as far
   as the arc's bounds allow (tree arcs are tight, so nothing else changes):
   the two ends of an edit meet where their tree paths join and mostly cancel.
3. Successive shortest paths: from each node with excess, a Dijkstra search on
   reduced costs runs to the nearest node with a deficit; the nodes it
   settled lower their potentials by their distance short of that deficit's
   (which keeps every reduced cost non-negative and makes the path tight), and
   the path carries as much as it can. Repeat until every node is balanced [1]_
   [2]_ [3]_. A search that finds no deficit proves that no plan exists: the
   nodes it reached form a cut that must send out more than its arcs can carry,
   which :func:`cut_proves_infeasible` checks exactly.

The flow is optimal for the new week whatever state it started from (an
unrelated state only costs more searches), and the final potential proves it.
Exact int64 arithmetic throughout; steps 1 and 3 run in a small compiled
kernel (``_warm.c``, built at install, loaded with ctypes) that checks every
sum for overflow, with a numpy/scipy reference path used when the kernel is
not built and compared with it in the tests.

OR-Tools stays the cold solver. :func:`solve_with` tries the warm engine when
it has a state of the same arc layout, keeps its answer only when the core's
certificate holds (:func:`planner.core.certificate.certify`; an infeasible
answer only when its cut proves it) and otherwise solves cold, saying which
engine produced the answer. An edit that changes the arc layout (a plant whose
supply becomes zero or positive, a warehouse newly split by a throughput
limit or handling cost, a customer gaining or losing its shortage penalty, a
lane added or removed) needs a cold solve.

References
----------
.. [1] R. K. Ahuja, T. L. Magnanti and J. B. Orlin, *Network Flows: Theory,
   Algorithms, and Applications*, Prentice Hall, 1993, sections 9.3
   (reduced cost optimality conditions), 9.7 (the successive shortest path
   algorithm on pseudoflows) and 9.11 (sensitivity analysis: reoptimising after
   a change of costs, capacities or supplies) and chapter 11 (network
   simplex: the node potentials of a spanning tree).
.. [2] J. Edmonds and R. M. Karp, "Theoretical improvements in algorithmic
   efficiency for network flow problems", Journal of the ACM 19(2), 1972
   (Dijkstra's algorithm on reduced costs).
.. [3] N. Tomizawa, "On some techniques useful for solution of transportation
   network problems", Networks 1(2), 1971.
"""

from __future__ import annotations

import ctypes
import dataclasses
import functools
import time
from dataclasses import dataclass, field
from importlib.machinery import EXTENSION_SUFFIXES
from pathlib import Path

import numpy as np

from planner.core.certificate import certify
from planner.core.network import Instance, check_int64
from planner.core.paths import ArcTable, shortest_paths
from planner.core.solve import INFEASIBLE, OPTIMAL, FlowSolution, exact_dot, solve_flow
from planner.errors import PlannerError

__all__ = [
    "COLD",
    "FAILED",
    "FALLBACK",
    "WARM",
    "LayoutError",
    "WarmState",
    "compiled_kernel",
    "cut_proves_infeasible",
    "same_layout",
    "solve_warm",
    "solve_with",
    "state_of",
]

#: Engine names :func:`solve_with` reports: OR-Tools without a usable state, the
#: warm engine, OR-Tools after a warm answer that did not prove itself.
COLD, WARM, FALLBACK = "ortools", "warm", "ortools after warm"
#: Status of a warm solve that gave up (overflow, broken input): solve cold.
FAILED = "failed"
#: Potentials beyond this size are dropped (all zero): the sums stay inside int64.
_POTENTIAL_LIMIT = 2**61
_KERNEL_STATUS = {0: OPTIMAL, 1: INFEASIBLE, -1: "out of memory", -2: "int64 overflow", -3: "negative reduced cost",
                  -5: "over budget"}
#: The warm attempt of :func:`solve_with` gives up (and solves cold) once its searches
#: have settled this many nodes per node of the network.
BUDGET_PER_NODE = 20


class LayoutError(PlannerError):
    """The warm state belongs to an instance with another arc layout."""


@dataclass(frozen=True)
class Incidence:
    """Every node's arcs in CSR form: code ``2a`` leaves arc ``a`` forwards from its
    tail, code ``2a + 1`` backwards from its head."""

    first_out: np.ndarray
    code: np.ndarray

    @classmethod
    def of(cls, n: int, tail: np.ndarray, head: np.ndarray) -> "Incidence":
        m = tail.shape[0]
        ends = np.concatenate([tail, head])
        order = np.argsort(ends, kind="stable")
        code = np.concatenate([2 * np.arange(m, dtype=np.int64), 2 * np.arange(m, dtype=np.int64) + 1])[order]
        return cls(np.searchsorted(ends[order], np.arange(n + 1)).astype(np.int64), code)


@dataclass(frozen=True)
class WarmState:
    """What a warm solve needs from an earlier solve of the same arc layout.

    Attributes
    ----------
    tail, head : numpy.ndarray
        The arc layout (int64 per arc).
    cost : numpy.ndarray
        The earlier unit costs (int64 per arc): they say which arcs were tight.
    flow : numpy.ndarray
        The earlier optimal flow (int64 per arc, lower bounds included).
    potential : numpy.ndarray
        int64 per node; best a potential proving ``flow`` optimal (a stored
        run's prices are one), but any potential gives a correct answer.
    """

    tail: np.ndarray
    head: np.ndarray
    cost: np.ndarray
    flow: np.ndarray
    potential: np.ndarray
    incidence: Incidence = field(repr=False, compare=False, default=None)

    @property
    def n_nodes(self) -> int:
        return int(self.potential.shape[0])

    def advanced(self, inst: Instance, solution: FlowSolution) -> "WarmState":
        """The state of ``solution``, a warm optimum of ``inst`` (same layout: the node lists are kept)."""
        if solution.potential is None:
            return state_of(inst, solution.flow)
        return dataclasses.replace(self, cost=inst.cost, flow=solution.flow, potential=solution.potential)


def state_of(inst: Instance, flow: np.ndarray, potential: np.ndarray | None = None) -> WarmState:
    """The warm state of an optimal ``flow`` of ``inst``.

    Parameters
    ----------
    inst : Instance
    flow : numpy.ndarray
        Optimal int64 flow per arc, lower bounds included.
    potential : numpy.ndarray, optional
        A potential proving ``flow`` optimal (for example a run's prices, or
        ``FlowSolution.potential`` of a warm solve); computed from the residual
        graph when omitted (:func:`planner.core.residual.feasible_potential`).

    Returns
    -------
    WarmState

    Examples
    --------
    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> inst = assemble_instance(WeekData.from_arrays([0, 2], [0], [1], [7], supply=[5, 0], demand=[0, 3]))
    >>> state = state_of(inst, solve_flow(inst).flow)
    >>> state.potential.tolist()
    [0, 7, 0, 7]
    """
    flow = np.asarray(flow, dtype=np.int64)
    if potential is None:
        from planner.core.residual import feasible_potential, residual_graph

        potential = feasible_potential(inst, residual_graph(inst, flow))
    return WarmState(inst.tail, inst.head, inst.cost, flow, np.asarray(potential, dtype=np.int64),
                     Incidence.of(inst.n_nodes, inst.tail, inst.head))


def same_layout(inst: Instance, state: WarmState) -> bool:
    """Whether ``state`` belongs to an instance with the arcs of ``inst`` (same tails and heads)."""
    return (
        state.n_nodes == inst.n_nodes
        and np.array_equal(state.tail, inst.tail)
        and np.array_equal(state.head, inst.head)
    )


@dataclass(frozen=True)
class _Kernel:
    tree_potential: ctypes._CFuncPtr
    tree_push: ctypes._CFuncPtr
    route: ctypes._CFuncPtr
    rate_sweep: ctypes._CFuncPtr


@functools.cache
def compiled_kernel() -> _Kernel | None:
    """The compiled dual repair and routing loop, or None when the extension was not built."""
    folder = Path(__file__).resolve().parent
    for suffix in EXTENSION_SUFFIXES:
        path = folder / f"_warm{suffix}"
        if path.exists():
            library = ctypes.CDLL(str(path))
            tree, route = library.planner_warm_tree_potential, library.planner_warm_route
            tree.restype = route.restype = ctypes.c_int
            push = library.planner_warm_tree_push
            push.restype = None
            tree.argtypes = [ctypes.c_int64] + [ctypes.c_void_p] * 10
            push.argtypes = [ctypes.c_int64] + [ctypes.c_void_p] * 8
            route.argtypes = [ctypes.c_int64] + [ctypes.c_void_p] * 10 + [ctypes.c_int64, ctypes.c_void_p,
                                                                           ctypes.c_int64, ctypes.c_void_p, ctypes.c_void_p]
            sweep = library.planner_warm_rate_sweep
            sweep.restype = ctypes.c_int
            sweep.argtypes = [ctypes.c_int64] + [ctypes.c_void_p] * 10 + [ctypes.c_int64] * 5 + [ctypes.c_void_p] * 4
            return _Kernel(tree, push, route, sweep)
    return None


@dataclass
class _Routed:
    """What the routing loop left: a status, the flow and potential, the cut of an infeasible week."""

    status: str
    flow: np.ndarray
    potential: np.ndarray
    reached: np.ndarray | None = None
    searches: int = 0
    settled: int = 0


def solve_warm(inst: Instance, state: WarmState, *, engine: str = "auto", budget: int | None = None) -> FlowSolution:
    """Solve ``inst`` warm from ``state``.

    Parameters
    ----------
    inst : Instance
    state : WarmState
        From a solve of an instance with the same arcs; costs, bounds and
        supplies may differ.
    engine : {"auto", "compiled", "numpy"}
        ``auto`` takes the compiled kernel when it is built; ``numpy`` is the
        reference path (scipy's Dijkstra, one search per call).
    budget : int, optional
        Give up (status ``failed``) once the searches have settled more than
        this many nodes; no limit by default.

    Returns
    -------
    FlowSolution
        ``optimal`` with the flow, its exact cost and the potential that
        proves it; ``infeasible``; or ``failed`` when the engine gave up (solve
        cold then). The answer is not certified here: :func:`solve_with` does.

    Raises
    ------
    LayoutError
        When ``state`` belongs to another arc layout.
    planner.core.network.OverflowError_
        When the scaled figures could overflow 64-bit integers.

    Examples
    --------
    A customer needing 3 units of a plant's 5, then 4 at a dearer rate:

    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> week = WeekData.from_arrays([0, 2], [0], [1], [7], supply=[5, 0], demand=[0, 3])
    >>> first = assemble_instance(week)
    >>> state = state_of(first, solve_flow(first).flow)
    >>> later = assemble_instance(WeekData.from_arrays([0, 2], [0], [1], [9], supply=[5, 0], demand=[0, 4]))
    >>> sol = solve_warm(later, state)
    >>> sol.status, sol.cost, sol.flow.tolist()
    ('optimal', 36, [4, 1])
    """
    check_int64(inst)
    if not same_layout(inst, state):
        raise LayoutError("the warm state belongs to an instance with other arcs; solve cold")
    start = time.perf_counter()
    routed = _route(inst, state, engine, -1 if budget is None else int(budget))
    elapsed = time.perf_counter() - start
    if routed.status == OPTIMAL:
        return FlowSolution(OPTIMAL, routed.flow, exact_dot(inst.cost, routed.flow), elapsed, routed.potential)
    return FlowSolution(routed.status, None, 0, elapsed)


def solve_with(inst: Instance, state: WarmState | None = None) -> tuple[FlowSolution, str]:
    """Warm when a state of the same layout is given and its answer proves itself, cold otherwise.

    A warm optimum counts only when :func:`planner.core.certificate.certify`
    holds for its flow and potential; a warm "no plan" only when its cut
    proves it (:func:`cut_proves_infeasible`). Anything else is solved again
    with OR-Tools, and so is a warm attempt whose searches settle more than
    :data:`BUDGET_PER_NODE` nodes per node of the network (broad edits).

    Returns
    -------
    solution : FlowSolution
    engine : str
        :data:`WARM`, :data:`COLD` (no usable state) or :data:`FALLBACK` (a warm
        answer did not prove itself).

    Examples
    --------
    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> inst = assemble_instance(WeekData.from_arrays([0, 2], [0], [1], [7], supply=[5, 0], demand=[0, 3]))
    >>> cold, engine = solve_with(inst)
    >>> engine, cold.cost
    ('ortools', 21)
    >>> warm, engine = solve_with(inst, state_of(inst, cold.flow))
    >>> engine, warm.cost
    ('warm', 21)
    """
    if state is None or not same_layout(inst, state):
        return solve_flow(inst), COLD
    check_int64(inst)
    start = time.perf_counter()
    routed = _route(inst, state, "auto", BUDGET_PER_NODE * inst.n_nodes)
    elapsed = time.perf_counter() - start
    if routed.status == OPTIMAL and certify(inst, routed.flow, routed.potential).ok:
        return FlowSolution(OPTIMAL, routed.flow, exact_dot(inst.cost, routed.flow), elapsed, routed.potential), WARM
    if routed.status == INFEASIBLE and (routed.reached is None or cut_proves_infeasible(inst, routed.reached)):
        return FlowSolution(INFEASIBLE, None, 0, elapsed), WARM
    return solve_flow(inst), FALLBACK


def cut_proves_infeasible(inst: Instance, inside: np.ndarray) -> bool:
    """Whether the node set ``inside`` must send out more than its arcs allow.

    Every plan sends ``b(S)`` net out of a node set ``S``, at most the upper
    bounds of the arcs leaving ``S`` less the lower bounds of those entering
    it; a set whose ``b(S)`` exceeds that proves no plan exists. Arcs without
    a limit never prove it.

    Examples
    --------
    A customer needing 3 units over a lane that carries 2: the plant and
    SPARE (nodes 0 and 2) must send out 3 units, and only the lane leaves them.

    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> inst = assemble_instance(WeekData.from_arrays([0, 2], [0], [1], [7], supply=[5, 0], demand=[0, 3],
    ...                                               lane_capacity=[2]))
    >>> cut_proves_infeasible(inst, np.array([True, False, True, False]))
    True
    >>> cut_proves_infeasible(inst, np.array([False, True, False, False]))
    False
    """
    inside = np.asarray(inside, dtype=bool)
    leaving = inside[inst.tail] & ~inside[inst.head]
    entering = ~inside[inst.tail] & inside[inst.head]
    if np.any(leaving & inst.unlimited):
        return False
    must_send = int(inst.supply[inside].astype(object).sum())
    can_send = int(inst.upper[leaving].astype(object).sum()) - int(inst.lower[entering].astype(object).sum())
    return must_send > can_send


def _route(inst: Instance, state: WarmState, engine: str, budget: int = -1) -> _Routed:
    """Steps 1 to 3 of the module docstring."""
    if np.any(inst.lower > inst.upper):
        return _Routed(INFEASIBLE, state.flow, state.potential)
    kernel = compiled_kernel() if engine in ("auto", "compiled") else None
    if engine == "compiled" and kernel is None:
        raise RuntimeError("the compiled warm kernel is not built; reinstall the planner with a C compiler")
    incidence = state.incidence or Incidence.of(inst.n_nodes, inst.tail, inst.head)
    forest = _forest(kernel, inst, state, incidence)
    if forest is None:
        return _Routed(FAILED, state.flow, state.potential)
    potential, parent, visit = forest
    flow, excess = _pseudoflow(inst, state.flow, potential)
    _tree_push(kernel, inst, parent, visit, flow, excess)
    sources = np.flatnonzero(excess > 0).astype(np.int64)
    if kernel is not None:
        routed = _compiled(kernel, inst, incidence, flow, potential, excess, sources, budget)
    else:
        routed = _reference(inst, flow, potential, excess, sources, budget)
    if routed.status == OPTIMAL:
        routed.potential = routed.potential - routed.potential[inst.spare]
    return routed


def _forest(kernel, inst: Instance, state: WarmState, incidence: Incidence):
    """Step 1: potentials keeping a forest of the earlier tight arcs tight; None on overflow.

    Returns the potentials, each node's tree arc (incidence code, -1 at roots)
    and the nodes in the order the forest reached them.
    """
    potential = np.array(state.potential, dtype=np.int64)
    if potential.shape[0] and int(np.abs(potential).max()) > _POTENTIAL_LIMIT:
        potential[:] = 0
    tight = (np.asarray(state.cost, np.int64) + potential[inst.tail] - potential[inst.head]) == 0
    inside = (inst.lower < state.flow) & (state.flow < inst.upper)
    kind = np.where(tight, np.where(inside, 2, 1), 0).astype(np.int8)
    order = np.concatenate([[inst.spare], np.delete(np.arange(inst.n_nodes, dtype=np.int64), inst.spare)])
    if kernel is None:
        potential, parent, visit = _tree_potential_reference(inst, incidence, kind, order, potential)
    else:
        parent, visit = np.empty(inst.n_nodes, np.int64), np.empty(inst.n_nodes, np.int64)
        held = [np.ascontiguousarray(a, dtype=np.int64) for a in (
            inst.tail, inst.head, inst.cost, incidence.first_out, incidence.code)]
        if kernel.tree_potential(inst.n_nodes, *(a.ctypes.data for a in held), kind.ctypes.data,
                                 order.ctypes.data, potential.ctypes.data, parent.ctypes.data, visit.ctypes.data):
            return None
    if potential.shape[0] and int(np.abs(potential).max()) > _POTENTIAL_LIMIT:
        return None
    return potential, parent, visit


def _tree_potential_reference(inst: Instance, incidence: Incidence, kind, order, potential) -> np.ndarray:
    """Step 1 in Python, node by node, in the order of the compiled kernel (small instances)."""
    pi = [int(p) for p in potential]
    seen = np.zeros(inst.n_nodes, dtype=bool)
    parent, visit = np.full(inst.n_nodes, -1, np.int64), []
    tail, head, cost, code_of = inst.tail.tolist(), inst.head.tolist(), inst.cost.tolist(), incidence.code.tolist()
    first = incidence.first_out.tolist()

    def hang(code: int) -> int:
        a = code >> 1
        child = tail[a] if code & 1 else head[a]
        pi[child] = pi[head[a]] - cost[a] if code & 1 else pi[tail[a]] + cost[a]
        seen[child], parent[child] = True, code
        return child

    for root in order.tolist():
        if seen[root]:
            continue
        seen[root], level = True, [root]
        while level:
            later, i = [], 0
            while i < len(level):
                for code in code_of[first[level[i]]:first[level[i] + 1]]:
                    a = code >> 1
                    child = tail[a] if code & 1 else head[a]
                    if seen[child] or kind[a] == 0:
                        continue
                    if kind[a] == 1:
                        later.append(code)
                    else:
                        level.append(hang(code))
                i += 1
            visit += level
            level = [hang(code) for code in later if not seen[tail[code >> 1] if code & 1 else head[code >> 1]]]
    return np.array(pi, dtype=np.int64), parent, np.array(visit, dtype=np.int64)


def _pseudoflow(inst: Instance, earlier: np.ndarray, potential: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Step 2: the earlier flow clipped to the new bounds and moved to the bound its reduced cost asks for."""
    reduced = inst.cost + potential[inst.tail] - potential[inst.head]
    flow = np.clip(np.asarray(earlier, np.int64), inst.lower, inst.upper)
    flow = np.where(reduced < 0, inst.upper, np.where(reduced > 0, inst.lower, flow))
    excess = inst.supply.copy()
    np.subtract.at(excess, inst.tail, flow)
    np.add.at(excess, inst.head, flow)
    return flow, excess


def _tree_push(kernel, inst: Instance, parent, visit, flow, excess) -> None:
    """Step 2b: every node passes its excess or deficit up its tree arc, deepest first, within the bounds."""
    if kernel is not None:
        held = [np.ascontiguousarray(a, dtype=np.int64) for a in (inst.tail, inst.head, inst.lower, inst.upper)]
        kernel.tree_push(inst.n_nodes, *(a.ctypes.data for a in held), parent.ctypes.data, visit.ctypes.data,
                         flow.ctypes.data, excess.ctypes.data)
        return
    for v in visit[::-1].tolist():
        code, e = int(parent[v]), int(excess[v])
        if code < 0 or e == 0:
            continue
        a, backward = code >> 1, bool(code & 1)
        up = int(inst.head[a] if backward else inst.tail[a])
        raise_it = (e > 0) == backward  # raising v -> up, or lowering up -> v, sends from v
        room = int(inst.upper[a] - flow[a]) if raise_it else int(flow[a] - inst.lower[a])
        moved = min(abs(e), room)
        if moved <= 0:
            continue
        sign = 1 if e > 0 else -1
        flow[a] += moved if raise_it else -moved
        excess[v] -= sign * moved
        excess[up] += sign * moved


def _compiled(kernel: _Kernel, inst, incidence, flow, potential, excess, sources, budget: int) -> _Routed:
    stats = np.zeros(2, dtype=np.int64)
    reached = np.zeros(inst.n_nodes, dtype=np.int8)
    held = [np.ascontiguousarray(a, dtype=np.int64) for a in (
        inst.tail, inst.head, inst.cost, inst.lower, inst.upper, incidence.first_out, incidence.code)]
    code = kernel.route(
        inst.n_nodes, *(a.ctypes.data for a in held), flow.ctypes.data, potential.ctypes.data, excess.ctypes.data,
        sources.shape[0], sources.ctypes.data, budget, stats.ctypes.data, reached.ctypes.data,
    )
    status = _KERNEL_STATUS.get(code, FAILED)
    status = status if status in (OPTIMAL, INFEASIBLE) else FAILED
    cut = reached.astype(bool) if status == INFEASIBLE else None
    return _Routed(status, flow, potential, cut, int(stats[0]), int(stats[1]))


def _reference(inst: Instance, flow, potential, excess, sources, budget: int) -> _Routed:
    """Step 2 on numpy and scipy: one full Dijkstra (scipy) per search."""
    searches = settled = 0
    for s in sources:
        while excess[s] > 0:
            table, code = _residual_table(inst, flow, potential)
            if table is None:
                return _Routed(FAILED, flow, potential, None, searches, settled)
            found = shortest_paths(table, [s])
            dist, reached = found.dist[0], found.reached[0]
            searches, settled = searches + 1, settled + int(reached.sum())
            if 0 <= budget < settled:
                return _Routed(FAILED, flow, potential, None, searches, settled)
            deficit = np.flatnonzero(reached & (excess < 0))
            if deficit.shape[0] == 0:
                return _Routed(INFEASIBLE, flow, potential, reached, searches, settled)
            t = int(deficit[np.argmin(dist[deficit])])
            far = int(dist[t])
            potential += np.where(reached, np.minimum(dist, far) - far, 0)
            path = _path_codes(table, code, found, int(s), t)
            _push(inst, flow, excess, path, int(s), t)
    return _Routed(OPTIMAL, flow, potential, None, searches, settled)


def _residual_table(inst: Instance, flow, potential):
    """Residual arcs on reduced costs, merged for scipy; None when a reduced cost is negative."""
    fwd = np.flatnonzero(flow < inst.upper)
    bwd = np.flatnonzero(flow > inst.lower)
    tail = np.concatenate([inst.tail[fwd], inst.head[bwd]])
    head = np.concatenate([inst.head[fwd], inst.tail[bwd]])
    reduced = inst.cost + potential[inst.tail] - potential[inst.head]
    weight = np.concatenate([reduced[fwd], -reduced[bwd]])
    if np.any(weight < 0):
        return None, None
    capacity = np.concatenate([inst.upper[fwd] - flow[fwd], flow[bwd] - inst.lower[bwd]])
    code = np.concatenate([2 * fwd, 2 * bwd + 1])
    return ArcTable.merge(inst.n_nodes, tail, head, weight, capacity), code


def _path_codes(table: ArcTable, code: np.ndarray, found, s: int, t: int) -> list[int]:
    """Incidence codes of the search tree's path from ``s`` to ``t``."""
    path, v = [], t
    while v != s:
        path.append(int(code[table.arc[found.pred_arc[0, v]]]))
        v = int(found.pred[0, v])
    return path


def _push(inst: Instance, flow, excess, path: list[int], s: int, t: int) -> None:
    """Send as much as the path, the excess at ``s`` and the deficit at ``t`` allow."""
    arcs = np.array([c >> 1 for c in path], dtype=np.int64)
    backward = np.array([c & 1 for c in path], dtype=bool)
    room = np.where(backward, flow[arcs] - inst.lower[arcs], inst.upper[arcs] - flow[arcs])
    delta = min(int(excess[s]), -int(excess[t]), int(room.min(initial=np.iinfo(np.int64).max)))
    np.add.at(flow, arcs, np.where(backward, -delta, delta))
    excess[s] -= delta
    excess[t] += delta
