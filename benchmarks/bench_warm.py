"""Warm re-solves against OR-Tools cold on the 500,000-lane benchmark week, in one run.

Cases, each re-solved warm from the optimum of the unedited week
(:mod:`planner.core.engines`) and certified with the core's certificate:

(a) 100 random edits of mixed kinds (rates, lane capacities, lane minimums,
    plant supplies, customer demands);
(b) one lane's rate changed: 100 different rates of one busy lane (total time);
(c) a week's drift: the second week of ``benchmark_network(weeks=2)`` (rates
    +1 %, demand noise) after its first week, both on one lane list;
(d) every lane rate changed by up to 10 %.

Warm figures are the bare warm solve without a budget unless ``--budget``
gives one in settled nodes per node; ``solve_with`` (warm with its default
budget, certificate, cold on failure) is timed beside it. With ``--pylmcf``
the stateful network simplex of the pylmcf package (LEMON, warm restarts) is
timed on the same cases, when it is installed. Ratios are warm / cold measured
in this run; peak memory is the process's.

    python benchmarks/bench_warm.py [--lanes 500000] [--budget 20] [--pylmcf]
"""

from __future__ import annotations

import argparse
import dataclasses
import resource
import statistics
import time

import numpy as np

from planner.core.certificate import certify
from planner.core.engines import solve_warm, solve_with, state_of
from planner.core.network import assemble_instance
from planner.core.solve import OPTIMAL, solve_flow
from planner.core.week import NONE, SiteKind, WeekData
from planner.synthetic.benchmark_network import benchmark_network
from planner.synthetic.frames import frames_to_weeks


def peak_rss_gib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20


def mixed_edits(week: WeekData, flow_by_lane: np.ndarray, rng: np.random.Generator, count: int) -> WeekData:
    """``count`` edits of mixed kinds; the arc layout stays (plants keep a positive supply)."""
    cost, cap, low = week.lane_cost.copy(), week.lane_capacity.copy(), week.lane_min.copy()
    supply, demand = week.supply.copy(), week.demand.copy()
    kinds = rng.integers(0, 5, count)
    lanes = rng.integers(0, week.n_lanes, count)
    plants = np.flatnonzero(week.supply > 0)
    customers = np.flatnonzero(week.site_kind == SiteKind.CUSTOMER)
    for kind, lane in zip(kinds, lanes):
        if kind == 0:  # a rate up or down by up to 20 %
            cost[lane] = max(0, int(round(cost[lane] * rng.uniform(0.8, 1.2))))
        elif kind == 1:  # a capacity around the lane's flow
            cap[lane] = int(flow_by_lane[lane] * rng.uniform(0.5, 1.5)) + int(rng.integers(0, 20))
        elif kind == 2:  # a minimum commitment below what the lane may carry
            room = int(flow_by_lane[lane]) if cap[lane] == NONE else int(min(cap[lane], flow_by_lane[lane]))
            low[lane] = int(rng.integers(0, room + 1))
        elif kind == 3:
            p = rng.choice(plants)
            supply[p] = max(1, int(supply[p] * rng.uniform(0.9, 1.1)))
        else:
            c = rng.choice(customers)
            demand[c] = int(demand[c] * rng.uniform(0.8, 1.2))
    return dataclasses.replace(week, lane_cost=cost, lane_capacity=cap, lane_min=low, supply=supply, demand=demand)


def all_rates(week: WeekData, rng: np.random.Generator) -> WeekData:
    factor = rng.uniform(0.9, 1.1, week.n_lanes)
    return dataclasses.replace(week, lane_cost=np.round(week.lane_cost * factor).astype(np.int64))


def timed_cold(inst, repeat: int = 1):
    runs = [solve_flow(inst) for _ in range(repeat)]
    return runs[0], statistics.median(r.solver_seconds for r in runs)


def warm_case(name, inst, state, cold_seconds, budget, expected_cost=None) -> dict:
    """One warm solve, its certificate, and solve_with beside it."""
    start = time.perf_counter()
    warm = solve_warm(inst, state, budget=None if budget is None else budget * inst.n_nodes)
    warm_s = time.perf_counter() - start
    certified = warm.status == OPTIMAL and certify(inst, warm.flow, warm.potential).ok
    cert_s = time.perf_counter() - start - warm_s
    start = time.perf_counter()
    chosen, engine = solve_with(inst, state)
    with_s = time.perf_counter() - start
    agree = expected_cost is None or (warm.status == OPTIMAL and warm.cost == expected_cost)
    print(f"({name}) warm {warm_s:7.3f} s ({warm.status}), certificate {cert_s:.3f} s "
          f"{'certified' if certified else 'NOT certified'}, warm/cold {warm_s / cold_seconds:.4f}; "
          f"solve_with {with_s:7.3f} s via {engine!r} ({with_s / cold_seconds:.3f} of cold)"
          + ("" if expected_cost is None else f"; cost equals cold: {agree}"))
    return {"warm": warm, "engine": engine}


def one_lane_rates(week, inst, state, flow_by_lane, rng, cold_seconds, count: int = 100) -> None:
    """Case (b): ``count`` rates of one busy lane, each re-solved warm from the base state."""
    lane = int(np.argmax(flow_by_lane))
    arc = int(inst.lane_arc[0, lane])
    rates = np.round(inst.cost[arc] * rng.uniform(0.5, 1.5, count)).astype(np.int64)
    certified, start = 0, time.perf_counter()
    for rate in rates:
        cost = inst.cost.copy()
        cost[arc] = rate
        edited = dataclasses.replace(inst, cost=cost)
        warm = solve_warm(edited, state)
        certified += warm.status == OPTIMAL and certify(edited, warm.flow, warm.potential).ok
    total = time.perf_counter() - start
    print(f"(b) {count} rates of lane {lane}: warm {total:.3f} s in all (certificates included), "
          f"{total / count * 1000:.1f} ms each; {certified}/{count} certified; "
          f"warm/cold {total / (count * cold_seconds):.4f} (against {count} cold solves of {cold_seconds:.2f} s)")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--lanes", type=int, default=500_000)
    parser.add_argument("--customers", type=int, default=50_000)
    parser.add_argument("--budget", type=int, default=None, help="settled nodes per node before a warm solve gives up")
    parser.add_argument("--pylmcf", action="store_true", help="also time pylmcf's warm restarts, if installed")
    parser.add_argument("--seed", type=int, default=7)
    args = parser.parse_args()
    rng = np.random.default_rng(args.seed)

    frames = benchmark_network(n_customers=args.customers, n_lanes=args.lanes, weeks=2)
    _, (week, next_week) = frames_to_weeks(frames)
    inst = assemble_instance(week)
    print(f"week: {inst.n_nodes} nodes, {inst.n_arcs} arcs")
    cold, cold_s = timed_cold(inst, 3)
    print(f"OR-Tools cold: {cold_s:.3f} s (median of 3), cost {cold.cost}")
    start = time.perf_counter()
    state = state_of(inst, cold.flow)
    print(f"warm state from the cold optimum (label-correcting potential): {time.perf_counter() - start:.3f} s")
    flow_by_lane = cold.flow[inst.lane_arc[0]]

    cases = {
        "a": assemble_instance(mixed_edits(week, flow_by_lane, rng, 100)),
        "c": assemble_instance(next_week),
        "d": assemble_instance(all_rates(week, rng)),
    }
    for name, edited in cases.items():
        reference, seconds = timed_cold(edited)
        print(f"({name}) OR-Tools cold on the edited week: {seconds:.3f} s, cost {reference.cost}")
        warm_case(name, edited, state, cold_s, args.budget, reference.cost)
        if name == "a":
            one_lane_rates(week, inst, state, flow_by_lane, rng, cold_s)
    if args.pylmcf:
        pylmcf_cases(inst, cases, cold_s, rng)
    print(f"peak memory: {peak_rss_gib():.2f} GiB")


def pylmcf_graph(inst):
    """pylmcf's stateful graph of ``inst`` (arcs sorted by tail and head, lower bounds shifted out)."""
    import pylmcf

    order = np.lexsort((inst.head, inst.tail))
    graph = pylmcf.Graph(inst.n_nodes, inst.tail[order].copy(), inst.head[order].copy())
    load_pylmcf(graph, inst, order)
    return graph, order


def load_pylmcf(graph, inst, order) -> None:
    supply = inst.supply.copy()
    np.subtract.at(supply, inst.tail, inst.lower)
    np.add.at(supply, inst.head, inst.lower)
    graph.set_node_supply(supply)
    graph.set_edge_costs(np.ascontiguousarray(inst.cost[order]))
    graph.set_edge_capacities(np.ascontiguousarray((inst.upper - inst.lower)[order]))


def pylmcf_flow(graph, inst, order) -> np.ndarray:
    flow = np.empty(inst.n_arcs, np.int64)
    flow[order] = graph.result()
    return flow + inst.lower


def pylmcf_cases(inst, cases, cold_s, rng) -> None:
    """The same cases with pylmcf (network simplex, warm restarts on one stateful graph)."""
    try:
        import pylmcf  # noqa: F401
    except ImportError:
        print("pylmcf: not installed")
        return
    if (inst.cost < 0).any():
        print("pylmcf: negative rates, which it does not take")
        return
    start = time.perf_counter()
    graph, order = pylmcf_graph(inst)
    graph.solve()
    print(f"pylmcf cold: {time.perf_counter() - start:.3f} s, cost equals OR-Tools: "
          f"{int(inst.cost @ pylmcf_flow(graph, inst, order)) == solve_flow(inst).cost}")
    for name, edited in cases.items():
        load_pylmcf(graph, inst, order)  # back to the base week (its basis is kept)
        graph.solve()
        start = time.perf_counter()
        load_pylmcf(graph, edited, order)
        graph.solve()
        seconds = time.perf_counter() - start
        flow = pylmcf_flow(graph, edited, order)
        cert = certify(edited, flow, np.zeros(edited.n_nodes, np.int64))  # primal feasibility only
        feasible = cert.max_conservation_violation == 0 and cert.max_bound_violation == 0
        print(f"pylmcf ({name}) warm {seconds:.3f} s, warm/cold {seconds / cold_s:.4f}, "
              f"cost {int(edited.cost @ flow)}, flow feasible: {feasible}; warm starts {graph.warm_start_count()}, "
              f"cold starts {graph.cold_start_count()}")


if __name__ == "__main__":
    main()
