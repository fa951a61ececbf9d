"""Benchmark many independent weeks solved in parallel, as ``planner solve --all`` does.

Generates a benchmark network (``planner.synthetic.benchmark_network``) of
about 100,000 lanes over 52 consecutive weeks, loads it into the database as
one load batch (nothing is loaded when the same folder is already the latest
batch), then

1. reads every week's snapshot, builds its instance and times the bare
   OR-Tools solve on it (``planner.core.solve.solve_flow``: building the solver's
   graph, solving, reading the flows; median of ``--repeat`` solves), one
   week after the other in this process, and sums those times;
2. times ``planner.runs.schedule.solve_many(url, weeks, workers=2)``: every week
   read from PostgreSQL, solved, priced, certified and stored by two worker
   processes, each week committed as it finishes;

once cold and once as warm chains (each worker starts each week from the week
it solved before), and prints wall time / sum of the bare solves (target
<= 1.0), with the
per-stage sums of the stored runs to show where the time goes, and the ratio
the solves with their prices and certificates would reach if reading and
storing cost nothing. Figures are
measured in one run.

    python benchmarks/bench_weeks.py [--database-url URL] [--weeks 52] [--lanes 100000]
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from collections import Counter
from pathlib import Path

import sqlalchemy as sa

from planner.core.network import assemble_instance
from planner.core.solve import solve_flow
from planner.database import connect as db
from planner.database.ingest import load_folder
from planner.database.migrate import ensure_schema
from planner.database.snapshot import Scaling, read_snapshot
from planner.runs.schedule import solve_many
from planner.synthetic.benchmark_network import benchmark_network
from planner.synthetic.frames import write_folder


def main() -> None:
    parser = argparse.ArgumentParser(
        description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter
    )
    parser.add_argument("--database-url", default=None, help="default: $PLANNER_DATABASE_URL")
    parser.add_argument("--weeks", type=int, default=52)
    parser.add_argument("--lanes", type=int, default=100_000)
    parser.add_argument("--customers", type=int, default=10_000)
    parser.add_argument("--plants", type=int, default=40)
    parser.add_argument("--warehouses", type=int, default=160)
    parser.add_argument("--workers", type=int, default=2, help="worker processes of solve_many")
    parser.add_argument(
        "--cores", type=int, default=2, help="cores the target shares the bare time over (sum bare / cores)"
    )
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument(
        "--repeat", type=int, default=3, help="bare solves of each week to take the median of"
    )
    args = parser.parse_args()

    url = db.database_url(args.database_url)
    engine = db.get_engine(url)
    ensure_schema(engine)
    scaling = Scaling()

    start = time.perf_counter()
    frames = benchmark_network(
        n_plants=args.plants, n_warehouses=args.warehouses, n_customers=args.customers,
        n_lanes=args.lanes, weeks=args.weeks, seed=args.seed,
    )
    weeks = sorted(frames.lanes["period"].unique())
    with tempfile.TemporaryDirectory() as tmp:
        folder = write_folder(frames, Path(tmp) / "weeks")
        t_written = time.perf_counter()
        loaded = load_folder(engine, folder)
    t_loaded = time.perf_counter()
    del frames
    print(f"generate + write CSV: {t_written - start:.1f} s, load: {t_loaded - t_written:.1f} s")
    print(loaded.message.splitlines()[0])
    # Fresh statistics, as autovacuum would gather after a large load (it may be
    # off on a test server); without them the snapshot reads get poor plans.
    with engine.begin() as conn:
        conn.execute(
            sa.text("ANALYZE site, site_version, period, period_snapshot, supply, demand, lane, lane_rate")
        )
        jit = conn.execute(sa.text("SHOW jit")).scalar_one()
    print(f"server setting jit = {jit}")

    bare = {}
    for week in weeks:
        with engine.connect() as conn:
            snapshot = read_snapshot(conn, week, scaling)
        inst = assemble_instance(
            snapshot.week, cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale
        )
        seconds = []
        for _ in range(args.repeat):
            solution = solve_flow(inst)
            assert solution.status == "optimal", (week, solution.status)
            seconds.append(solution.solver_seconds)
        bare[week] = sorted(seconds)[args.repeat // 2]
    total_bare = sum(bare.values())
    print(
        f"bare OR-Tools solves (median of {args.repeat} per week): {total_bare:.2f} s over "
        f"{len(weeks)} weeks "
        f"({min(bare.values()):.3f}..{max(bare.values()):.3f} s a week, {inst.n_nodes:,} nodes, "
        f"{inst.n_arcs:,} arcs)"
    )
    engine.dispose()

    for mode, warm in (("cold", False), ("warm chain", True)):
        t0 = time.perf_counter()
        outcomes = solve_many(url, weeks, scaling, workers=args.workers, warm=warm)
        wall = time.perf_counter() - t0
        failed = [o.period for o in outcomes if not o.ok]
        assert not failed, f"weeks not optimal: {failed}"
        assert all(o.summary.certificate_ok for o in outcomes)
        engines = Counter(o.summary.engine for o in outcomes)
        stages = ("read", "solver", "prices", "store", "total")
        sums = {k: sum(o.summary.seconds[k] for o in outcomes) for k in stages}
        print(
            f"solve_many {mode} with {args.workers} workers: {wall:.2f} s wall, all {len(weeks)} weeks "
            f"optimal, certificates exact; engines {dict(engines)}"
        )
        print(
            "  summed over the weeks (worker time): "
            + ", ".join(f"{k} {v:.2f} s" for k, v in sums.items())
            + f"; solver in workers / bare: {sums['solver'] / total_bare:.2f}"
        )
        print(f"  ratio wall / sum of bare solves: {wall / total_bare:.2f}  (target <= 1.0); "
              f"wall / (sum bare / {args.cores}): {wall / (total_bare / args.cores):.2f}")
        # What the ratio would be if reading and storing cost nothing.
        floor = (sums["solver"] + sums["prices"]) / args.workers / total_bare
        print(f"  (solver + prices) per worker / sum bare (the ratio with free I/O): {floor:.2f}")
    print(f"load average {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
