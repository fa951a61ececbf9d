"""Benchmark one large week end to end: load, solve, prices, store.

Generates 200 plants + 800 warehouses, 50,000 customers and 500,000 lanes,
writes the CSVs, loads them (CSV to committed rows), solves the week through
``solve_period`` and times the bare OR-Tools solve on the same arrays in the
same process; then runs ``planner solve --period`` as its own process, as a
user does (start-up, read, solve, prices, ranges, limit values, certificate,
store), with its peak memory. Figures are ratios measured in one run.

    python benchmarks/bench_week.py [--database-url URL] [--lanes 500000]
"""

from __future__ import annotations

import argparse
import os
import resource
import tempfile
import time
from pathlib import Path

from process_timing import run_planner  # benchmarks/, the script's own folder

from planner.core.network import assemble_instance
from planner.core.solve import solve_flow
from planner.database import connect as db
from planner.database.ingest import load_folder
from planner.database.migrate import ensure_schema
from planner.database.snapshot import Scaling, read_snapshot
from planner.runs.weekly import solve_period
from planner.synthetic.benchmark_network import benchmark_network
from planner.synthetic.frames import write_folder


def peak_rss_gib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__)
    parser.add_argument("--database-url", default=None)
    parser.add_argument("--lanes", type=int, default=500_000)
    parser.add_argument("--customers", type=int, default=50_000)
    parser.add_argument("--repeat", type=int, default=3, help="bare solves to take the median of")
    args = parser.parse_args()

    engine = db.get_engine(db.database_url(args.database_url))
    ensure_schema(engine)
    frames = benchmark_network(n_customers=args.customers, n_lanes=args.lanes)
    week = str(frames.supply["period"].iloc[0])
    with tempfile.TemporaryDirectory() as tmp:
        folder = write_folder(frames, Path(tmp) / "week")
        start = time.perf_counter()
        result = load_folder(engine, folder)
        load_s = time.perf_counter() - start
    print(f"load: {load_s:.2f} s ({result.message.splitlines()[0]})")

    summary = solve_period(engine, week)
    s = summary.seconds
    pipeline = s["solver"] + s["prices"] + s["store"]
    print(
        f"run {summary.run_id}: {summary.status}, certificate "
        f"{'exact' if summary.certificate_ok else 'FAILED'}, cost {summary.cost}"
    )
    print(
        f"read snapshot {s['read']:.2f} s, solver {s['solver']:.2f} s, prices+ranges+certificate "
        f"{s['prices']:.2f} s, store {s['store']:.2f} s"
    )

    with engine.connect() as conn:
        snapshot = read_snapshot(conn, week)
    scaling = Scaling()
    inst = assemble_instance(snapshot.week, cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale)
    bare = sorted(solve_flow(inst).solver_seconds for _ in range(args.repeat))[args.repeat // 2]
    print(f"bare OR-Tools solve (median of {args.repeat}): {bare:.2f} s on {inst.n_nodes} nodes, {inst.n_arcs} arcs")
    print(f"ratio (solve + prices + store) / bare solve: {pipeline / bare:.2f}  (target < 3)")
    print(f"ratio (ranges + capacity values + certificate) / bare solve: {s['prices'] / bare:.2f}  (target < 0.5)")
    print(f"peak memory of this process: {peak_rss_gib():.2f} GiB")

    # The whole command as a user runs it: start-up, read, solve, prices, ranges,
    # limit values, certificate, store.
    url = engine.url.render_as_string(hide_password=False)
    whole = []
    for _ in range(args.repeat):
        seconds, peak, output = run_planner(url, "solve", "--period", week)
        whole.append((seconds, peak))
    seconds = sorted(w[0] for w in whole)[args.repeat // 2]
    peak = max(w[1] for w in whole)
    again = sorted(solve_flow(inst).solver_seconds for _ in range(args.repeat))[args.repeat // 2]
    print(f"planner solve --period {week} as a process (median of {args.repeat}): {seconds:.2f} s, "
          f"peak memory {peak:.0f} MiB (target < 1024); bare solve measured again: {again:.2f} s")
    print(f"ratio whole process / bare solve: {seconds / min(bare, again):.2f}  (target < 2)")
    print(f"load average {os.getloadavg()[0]:.2f}")


if __name__ == "__main__":
    main()
