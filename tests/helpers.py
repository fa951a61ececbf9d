"""Helpers shared by the tests: running the command line, reading its CSV, the core in one call."""

from __future__ import annotations

import csv
import io
import subprocess
import sys
from dataclasses import dataclass

import numpy as np
from typer.testing import CliRunner

from planner.cli import app
from planner.core.certificate import certify
from planner.core.network import ArcKind, Instance, NodeRole
from planner.core.prices import PriceRanges, price_ranges
from planner.core.residual import Residual, feasible_potential, residual_graph
from planner.core.solve import OPTIMAL, solve_flow

#: The ``planner`` command as a subprocess (the database comes from PLANNER_DATABASE_URL).
PLANNER = [sys.executable, "-m", "planner.cli"]


def planner(*args: str, timeout: int = 120) -> subprocess.CompletedProcess:
    """Run the real ``planner`` command in a subprocess."""
    return subprocess.run([*PLANNER, *args], capture_output=True, text=True, timeout=timeout, check=False)


def invoke(*args: str):
    """Run a ``planner`` command in-process (commands that start no worker processes)."""
    return CliRunner().invoke(app, list(args))


def csv_rows(text: str) -> list[dict[str, str]]:
    """The rows of a CSV text as dicts."""
    return list(csv.DictReader(io.StringIO(text)))


@dataclass(frozen=True)
class Analysis:
    """An instance solved by the planner, with its residual graph and price ranges."""

    inst: Instance
    flow: np.ndarray
    cost: int
    residual: Residual
    ranges: PriceRanges


def analyse(inst: Instance) -> Analysis | None:
    """Solve ``inst`` with the planner and compute its price ranges; None when infeasible."""
    sol = solve_flow(inst)
    if sol.status != OPTIMAL:
        return None
    res = residual_graph(inst, sol.flow)
    return Analysis(inst, sol.flow, sol.cost, res, price_ranges(inst, res, feasible_potential(inst, res)))


def reference_node(net, inst: Instance, node: int) -> int:
    """The node of the reference network (``tests.reference_model``) that stands where ``node`` stands."""
    role, site, period = int(inst.node_role[node]), int(inst.node_site[node]), int(inst.node_period[node])
    if role == NodeRole.SPARE:
        return net.spare
    if role == NodeRole.SHORT:
        return net.short
    return (net.site_out if role == NodeRole.SITE_OUT else net.site_in)[period][site]


def lagrangian_bound(inst: Instance, pi) -> int:
    """Lagrangian dual value of any potential, recomputed on Python integers.

    Relaxing conservation with multipliers ``pi`` leaves
    ``min_{l <= x <= u} sum_a r_a x_a - b.pi`` with ``r = c + pi(tail) - pi(head)``,
    i.e. ``-b.pi + sum_a (l_a max(r_a, 0) + u_a min(r_a, 0))``: a lower bound on
    the optimal cost for every ``pi`` (weak duality).
    """
    pi = [int(p) for p in pi]
    total = -sum(int(bv) * p for bv, p in zip(inst.supply, pi))
    for a in range(inst.n_arcs):
        r = int(inst.cost[a]) + pi[int(inst.tail[a])] - pi[int(inst.head[a])]
        total += int(inst.lower[a]) * max(r, 0) + int(inst.upper[a]) * min(r, 0)
    return total


def certified_dual_objective(inst: Instance, flow: np.ndarray, pi) -> int:
    """The dual objective that :func:`planner.core.certificate.certify` computes for any potential ``pi``."""
    return certify(inst, flow, np.asarray(pi, dtype=np.int64)).dual_objective


def throughput_arc_of(inst: Instance, site: int) -> int:
    """Instance arc of a split warehouse's throughput."""
    (arc,) = np.flatnonzero((inst.arc_kind == ArcKind.THROUGHPUT) & (inst.arc_ref == site))
    return int(arc)
