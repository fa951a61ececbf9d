"""Optimal flows with OR-Tools' min-cost-flow solver.

OR-Tools' ``SimpleMinCostFlow`` implements Goldberg and Tarjan's cost-scaling
push-relabel algorithm on integer costs and capacities [1]_. It is not a
network simplex, and it does not hand back node potentials; the planner
computes those itself from the residual graph of the optimal flow
(:mod:`planner.core.prices`), so the prices do not depend on the algorithm that found
the flow, and the certificate proves them.

Lower bounds (lane minimum commitments) are removed before solving in the
standard way: ``x = l + x'`` with ``0 <= x' <= u - l``, the tail supplying
``l`` less and the head ``l`` more.

References
----------
.. [1] A. V. Goldberg and R. E. Tarjan, "Finding minimum-cost circulations by
   successive approximation", Mathematics of Operations Research 15(3), 1990.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
from ortools.graph.python import min_cost_flow

from planner.core.network import Instance, check_int64

OPTIMAL = "optimal"
INFEASIBLE = "infeasible"
UNBOUNDED = "unbounded"


@dataclass(frozen=True)
class FlowSolution:
    """The solver's answer.

    Attributes
    ----------
    status : str
        ``"optimal"`` or ``"infeasible"``.
    flow : numpy.ndarray or None
        int64 flow per arc (lower bounds included) when optimal.
    cost : int
        Scaled optimal cost, exact.
    solver_seconds : float
        Wall time of building the solver's graph and solving.
    potential : numpy.ndarray or None
        int64 potential per node that proves ``flow`` optimal (non-negative
        reduced cost ``c + pi(tail) - pi(head)`` on every residual arc), when
        the engine gives one: the warm engine does (:mod:`planner.core.engines`),
        OR-Tools does not.
    """

    status: str
    flow: np.ndarray | None
    cost: int
    solver_seconds: float
    potential: np.ndarray | None = None


def shifted_supply(inst: Instance) -> np.ndarray:
    """Net supplies after removing the lower bounds (``x = l + x'``)."""
    b = inst.supply.copy()
    if np.any(inst.lower):
        np.subtract.at(b, inst.tail, inst.lower)
        np.add.at(b, inst.head, inst.lower)
    return b


def solve_flow(inst: Instance) -> FlowSolution:
    """Solve the instance with OR-Tools' ``SimpleMinCostFlow``.

    Parameters
    ----------
    inst : Instance

    Returns
    -------
    FlowSolution

    Raises
    ------
    planner.core.network.OverflowError_
        When the scaled figures could overflow 64-bit integers.
    RuntimeError
        When the solver reports a status other than optimal or infeasible.

    Examples
    --------
    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> w = WeekData.from_arrays([0, 0, 2], [0, 1], [2, 2], [10, 30],
    ...                          supply=[3, 4, 0], demand=[0, 0, 5])
    >>> sol = solve_flow(assemble_instance(w))
    >>> sol.status, sol.cost
    ('optimal', 90)
    """
    check_int64(inst)
    start = time.perf_counter()
    if np.any(inst.lower > inst.upper):
        # A minimum above its capacity admits no flow; the solver must never
        # see the negative capacity u - l (it does not return on one).
        return FlowSolution(INFEASIBLE, None, 0, time.perf_counter() - start)
    solver = min_cost_flow.SimpleMinCostFlow()
    if inst.n_arcs:
        arcs = solver.add_arcs_with_capacity_and_unit_cost(
            inst.tail, inst.head, inst.upper - inst.lower, inst.cost
        )
    else:
        arcs = np.empty(0, dtype=np.int64)
    b = shifted_supply(inst)
    solver.set_nodes_supplies(np.arange(inst.n_nodes, dtype=np.int64), b)
    status = solver.solve()
    if status == solver.OPTIMAL:
        flow = solver.flows(arcs).astype(np.int64) + inst.lower
        elapsed = time.perf_counter() - start
        return FlowSolution(OPTIMAL, flow, exact_dot(inst.cost, flow), elapsed)
    elapsed = time.perf_counter() - start
    if status == solver.INFEASIBLE:
        return FlowSolution(INFEASIBLE, None, 0, elapsed)
    raise RuntimeError(f"the min-cost-flow solver stopped with status {status.name}")


def exact_dot(a: np.ndarray, b: np.ndarray) -> int:
    """Exact integer dot product of two int64 arrays, as a Python int.

    Uses int64 arithmetic when a bound proves it cannot overflow, and Python
    integers otherwise.

    Examples
    --------
    >>> exact_dot(np.array([2**40, 3]), np.array([2**30, 1]))
    1180591620717411303427
    """
    a = np.asarray(a, dtype=np.int64)
    b = np.asarray(b, dtype=np.int64)
    if a.size == 0:
        return 0
    bound = float(np.dot(np.abs(a).astype(np.float64), np.abs(b).astype(np.float64)))
    if bound < 2.0**62:
        return int(np.dot(a, b))
    return int(np.dot(a.astype(object), b.astype(object)))
