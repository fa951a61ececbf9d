"""One solve, start to finish, on arrays: flow, prices, ranges, certificate, diagnosis.

This is the functional core's single entry point: it takes an
:class:`~planner.core.network.Instance` and returns everything a run stores,
knowing nothing of the database.
"""

from __future__ import annotations

import time
from dataclasses import dataclass, field

import numpy as np

from planner.core.certificate import Certificate, certify
from planner.core.diagnose import (
    describe_cycle,
    diagnose_infeasible,
    find_unbounded_cycle,
)
from planner.core.engines import COLD, WarmState, solve_with
from planner.core.limits import CAPACITY, LimitValues, limit_values
from planner.core.network import ArcKind, Instance, OverflowError_
from planner.core.paths import PathError
from planner.core.prices import PriceRanges, price_ranges, reduced_costs
from planner.core.residual import (
    DualError,
    Residual,
    feasible_potential,
    residual_graph,
)
from planner.core.solve import INFEASIBLE, OPTIMAL, UNBOUNDED, solve_flow

FAILED = "failed"


@dataclass
class Outcome:
    """Result of :func:`optimize`.

    ``status`` is ``optimal``, ``infeasible``, ``unbounded`` or ``failed``
    (overflow, or a certificate that did not hold). Arrays are None unless the
    flow is optimal. All money figures are scaled integers of the instance.
    """

    status: str
    message: str = ""
    flow: np.ndarray | None = None
    ranges: PriceRanges | None = None
    residual: Residual | None = None
    reduced: np.ndarray | None = None
    capacity_value: np.ndarray | None = None
    limits: LimitValues | None = None
    certificate: Certificate | None = None
    solver_seconds: float = 0.0
    dual_seconds: float = 0.0
    timings: dict = field(default_factory=dict)
    #: Which engine produced the flow: ``ortools`` (cold), ``warm``, or
    #: ``ortools after warm`` (a warm answer that did not prove itself).
    engine: str = COLD

    @property
    def ok(self) -> bool:
        return self.status == OPTIMAL


def optimize(
    inst: Instance,
    *,
    site_codes=None,
    lane_labels=None,
    period_codes=None,
    warm: WarmState | None = None,
) -> Outcome:
    """Solve ``inst`` and derive its prices, ranges, exact values of its limits and certificate.

    Parameters
    ----------
    inst : Instance
    site_codes, lane_labels, period_codes : sequence of str, optional
        Names used in the messages of bad weeks.
    warm : WarmState, optional
        An optimum of a similar week of the same arc layout: the warm engine
        starts from it (:func:`planner.core.engines.solve_with`). A warm flow
        counts only when its certificate holds; otherwise the week is solved
        again cold. ``Outcome.engine`` says which engine produced the flow.

    Returns
    -------
    Outcome
        Never raises for a bad week: infeasible, unbounded and overflowing
        instances come back with their status and a message a planner can act on.

    Examples
    --------
    >>> from planner.core.week import WeekData
    >>> from planner.core.network import assemble_instance
    >>> w = WeekData.from_arrays([0, 2], [0], [1], [70_000], supply=[5, 0], demand=[0, 3])
    >>> out = optimize(assemble_instance(w))
    >>> out.status, out.certificate.ok, int(out.ranges.price[1])
    ('optimal', True, 70000)
    """
    try:
        cycle = find_unbounded_cycle(inst)
        if cycle is not None:
            return Outcome(UNBOUNDED, describe_cycle(inst, cycle, lane_labels=lane_labels))
        sol, engine = (solve_flow(inst), COLD) if warm is None else solve_with(inst, warm)
    except OverflowError_ as err:
        return Outcome(FAILED, str(err))
    if sol.status == INFEASIBLE:
        diagnosis = diagnose_infeasible(
            inst, site_codes=site_codes, lane_labels=lane_labels, period_codes=period_codes
        )
        return Outcome(INFEASIBLE, diagnosis.message, solver_seconds=sol.solver_seconds, engine=engine)

    try:
        out = analyse_flow(inst, sol.flow, solver_seconds=sol.solver_seconds)
    except (DualError, PathError) as err:
        out = Outcome(FAILED, f"the solver's flow could not be proved optimal: {err}", solver_seconds=sol.solver_seconds)
    if not out.ok and engine != COLD:
        # A warm flow that does not prove itself is never kept: solve cold.
        return optimize(inst, site_codes=site_codes, lane_labels=lane_labels, period_codes=period_codes)
    out.engine = engine
    return out


def analyse_flow(inst: Instance, flow: np.ndarray, *, solver_seconds: float = 0.0) -> Outcome:
    """Prices, ranges, capacity values and certificate of a flow claimed optimal.

    Whatever engine produced ``flow``, the outcome is ``optimal`` only when
    its certificate holds; otherwise it is ``failed`` with the certificate's
    figures in the message.

    Raises
    ------
    planner.core.residual.DualError, planner.core.paths.PathError
        When the residual graph of ``flow`` has a negative cycle, or a distance
        fails its exact check.
    """
    start = time.perf_counter()
    res = residual_graph(inst, flow)
    potential = feasible_potential(inst, res)
    t_potential = time.perf_counter()
    ranges = price_ranges(inst, res, potential)
    t_ranges = time.perf_counter()
    reduced = reduced_costs(inst, ranges.price)
    limits = limit_values(
        inst, flow, res, ranges.price,
        other_duals=((ranges.low, ranges.has_low), (ranges.high, ranges.has_high), (potential, np.ones(inst.n_nodes, bool))),
    )
    t_limits = time.perf_counter()
    cert = certify(inst, flow, ranges.price)
    end = time.perf_counter()
    out = Outcome(
        OPTIMAL,
        flow=flow,
        ranges=ranges,
        residual=res,
        reduced=reduced,
        capacity_value=limits.per_arc(inst.n_arcs, CAPACITY),
        limits=limits,
        certificate=cert,
        solver_seconds=solver_seconds,
        dual_seconds=end - start,
        timings={
            "potential": t_potential - start,
            "ranges": t_ranges - t_potential,
            "limits": t_limits - t_ranges,
            "certificate": end - t_limits,
        },
    )
    if not cert.ok:
        out.status = FAILED
        out.message = (
            "optimality certificate failed: "
            f"conservation {cert.max_conservation_violation}, bounds {cert.max_bound_violation}, "
            f"min reduced cost {cert.min_reduced_cost}, primal {cert.primal_cost}, "
            f"dual {cert.dual_objective}, gap {cert.gap} (scaled integers)"
        )
    return out


def shortage_units(inst: Instance, flow: np.ndarray) -> int:
    """Scaled units delivered by SHORT (demand not met)."""
    return int(flow[inst.arc_kind == ArcKind.SHORTAGE].sum())


def spare_units(inst: Instance, flow: np.ndarray) -> int:
    """Scaled units of plant supply left unused."""
    return int(flow[inst.arc_kind == ArcKind.TO_SPARE].sum())
