"""The optimality certificate of a flow and a potential, exact on scaled integers.

It checks primal feasibility (conservation at every node, bounds on every
arc), dual feasibility (no residual arc with a negative reduced cost) and
strong duality: the primal cost equals the dual objective
``-sum_v b_v pi_v + sum_a (l_a max(r_a, 0) + u_a min(r_a, 0))`` exactly [1]_.
A flow and a potential that pass are both optimal, whatever produced them.

References
----------
.. [1] L. V. Kantorovich, "On the translocation of masses", Doklady Akademii
   Nauk SSSR 37, 1942 (the dual of the transport problem); R. K. Ahuja,
   T. L. Magnanti and J. B. Orlin, *Network Flows*, Prentice Hall, 1993,
   section 9.4 (the minimum cost flow dual).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from planner.core.network import Instance
from planner.core.solve import exact_dot

__all__ = ["Certificate", "certify"]


@dataclass(frozen=True)
class Certificate:
    """Optimality certificate of a flow and a potential, exact on scaled integers."""

    max_conservation_violation: int
    max_bound_violation: int
    min_reduced_cost: int | None
    primal_cost: int
    dual_objective: int

    @property
    def gap(self) -> int:
        return self.primal_cost - self.dual_objective

    @property
    def ok(self) -> bool:
        return (
            self.max_conservation_violation == 0
            and self.max_bound_violation == 0
            and (self.min_reduced_cost is None or self.min_reduced_cost >= 0)
            and self.gap == 0
        )


def certify(inst: Instance, flow: np.ndarray, price: np.ndarray) -> Certificate:
    """Check primal feasibility, dual feasibility and strong duality exactly.

    Parameters
    ----------
    inst : Instance
    flow : numpy.ndarray of int64, one entry per arc.
    price : numpy.ndarray of int64, one potential per node.

    Returns
    -------
    Certificate

    Examples
    --------
    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> from planner.core.solve import solve_flow
    >>> from planner.core.residual import feasible_potential, residual_graph
    >>> from planner.core.prices import price_ranges
    >>> inst = assemble_instance(WeekData.from_arrays([0, 2], [0], [1], [7],
    ...                                                supply=[5, 0], demand=[0, 3]))
    >>> flow = solve_flow(inst).flow
    >>> res = residual_graph(inst, flow)
    >>> cert = certify(inst, flow, price_ranges(inst, res, feasible_potential(inst, res)).price)
    >>> cert.ok, cert.primal_cost, cert.dual_objective
    (True, 21, 21)
    """
    flow = np.asarray(flow, dtype=np.int64)
    pi = np.asarray(price, dtype=np.int64)
    net = inst.supply.copy()
    np.subtract.at(net, inst.tail, flow)
    np.add.at(net, inst.head, flow)
    conservation = int(np.abs(net).max()) if net.shape[0] else 0
    bounds = int(max(0, (inst.lower - flow).max(initial=0), (flow - inst.upper).max(initial=0)))

    r = inst.cost + pi[inst.tail] - pi[inst.head]
    forward_open = inst.unlimited | (flow < inst.upper)
    backward_open = flow > inst.lower
    candidates = np.concatenate([r[forward_open], -r[backward_open]])
    min_rc = int(candidates.min()) if candidates.shape[0] else None

    primal = exact_dot(inst.cost, flow)
    dual = (
        -exact_dot(inst.supply, pi)
        + exact_dot(inst.lower, np.maximum(r, 0))
        + exact_dot(inst.upper, np.minimum(r, 0))
    )
    return Certificate(conservation, bounds, min_rc, primal, dual)
