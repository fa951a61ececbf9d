"""Benchmark the exact values of limits and rate ranges on the 500,000-lane week (no database).

Builds the benchmark week in memory, solves it, and times in one run:

* the bare OR-Tools solve (median of ``--repeat``),
* the exact values of every limit at its bound (compiled search kernel, and the
  scipy reference path when ``--scipy``), with the number of limits and how
  many of one dual's reduced costs overstate the exact value,
* the rate range of one lane of each state (idle, in use, at capacity), with
  and without routes,
* the same limit values on a maximally degenerate variant of the week (every
  lane that carries flow capped at its flow, every warehouse at its
  throughput): a stress case, not a target.

    python benchmarks/bench_limits.py [--lanes 500000] [--repeat 3] [--scipy]
"""

from __future__ import annotations

import argparse
import dataclasses
import os
import time
from statistics import median

import numpy as np

from planner.core.limits import CAPACITY, limit_values
from planner.core.network import ArcKind, assemble_instance
from planner.core.optimize import optimize
from planner.core.rates import rate_ranges
from planner.core.search import compiled_kernel
from planner.core.solve import solve_flow
from planner.synthetic.benchmark_network import benchmark_network
from planner.synthetic.frames import frames_to_weeks


def timed(call, *args, **kwargs):
    start = time.perf_counter()
    result = call(*args, **kwargs)
    return result, time.perf_counter() - start


def limits_of(inst, out, engine: str):
    ranges = out.ranges
    return timed(
        limit_values, inst, out.flow, out.residual, ranges.price,
        other_duals=((ranges.low, ranges.has_low), (ranges.high, ranges.has_high)), engine=engine,
    )


def report_limits(label: str, inst, out, bare: float, scipy: bool) -> None:
    values, seconds = limits_of(inst, out, "auto")
    capacity = values.side == CAPACITY
    reduced = inst.cost + out.ranges.price[inst.tail] - out.ranges.price[inst.head]
    one_dual = np.maximum(-reduced[values.arc[capacity]], 0)
    overstated = int((one_dual > values.loosen[capacity]).sum())
    print(
        f"{label}: {values.arc.shape[0]:,} limits at their bound ({int(capacity.sum()):,} capacities, "
        f"{int((inst.arc_kind[values.arc] == ArcKind.LANE).sum()):,} on lanes); exact values "
        f"{seconds:.3f} s = {seconds / bare:.3f} x bare solve"
    )
    print(f"  one dual's reduced cost overstates the value of one more unit on {overstated:,} capacities")
    if scipy:
        _, reference = limits_of(inst, out, "scipy")
        print(f"  scipy reference path: {reference:.3f} s = {reference / bare:.3f} x bare solve")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--lanes", type=int, default=500_000)
    parser.add_argument("--customers", type=int, default=50_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--scipy", action="store_true", help="also time the scipy reference path")
    args = parser.parse_args()
    print(f"machine: {os.cpu_count()} cores, load average {os.getloadavg()[0]:.2f}; "
          f"compiled kernel {'built' if compiled_kernel() else 'NOT built (scipy path)'}")

    frames = benchmark_network(n_customers=args.customers, n_lanes=args.lanes)
    (week,) = frames_to_weeks(frames)[1]
    inst = assemble_instance(week)
    bare = median(timed(solve_flow, inst)[1] for _ in range(args.repeat))
    print(f"bare OR-Tools solve (median of {args.repeat}): {bare:.2f} s on {inst.n_nodes:,} nodes, {inst.n_arcs:,} arcs")
    out = optimize(inst)
    print("optimize timings: " + ", ".join(f"{k} {v:.3f} s" for k, v in out.timings.items()))
    report_limits("benchmark week", inst, out, bare, args.scipy)

    flow = out.flow
    lanes = inst.lane_arc[0]
    state = {
        "idle": lanes[flow[lanes] == 0],
        "in use": lanes[(flow[lanes] > 0) & (inst.unlimited[lanes] | (flow[lanes] < inst.upper[lanes]))],
        "at capacity": lanes[~inst.unlimited[lanes] & (flow[lanes] >= inst.upper[lanes])],
    }
    for name, arcs in state.items():
        _, plain = timed(rate_ranges, inst, flow, out.residual, out.ranges.price, arcs[:1])
        _, routed = timed(rate_ranges, inst, flow, out.residual, out.ranges.price, arcs[:1], routes=True)
        print(f"rate range of one lane {name}: {plain:.3f} s, with routes {routed:.3f} s")

    upper, unlimited = inst.upper.copy(), inst.unlimited.copy()
    tight = (np.isin(inst.arc_kind, [ArcKind.LANE, ArcKind.THROUGHPUT])) & (flow > 0)
    upper[tight], unlimited[tight] = flow[tight], False
    degenerate = dataclasses.replace(inst, upper=upper, unlimited=unlimited)
    bare_degenerate = median(timed(solve_flow, degenerate)[1] for _ in range(args.repeat))
    report_limits("maximally degenerate variant (stress case)", degenerate, optimize(degenerate), bare_degenerate, False)


if __name__ == "__main__":
    main()
