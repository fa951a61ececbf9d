"""Scenarios, sweeps and comparisons on the 500,000-lane benchmark week, as ratios measured in one run.

1. The week is loaded and solved as a plain week run (``solve_period``: read,
   solve, prices, ranges, limit values, certificate, store), and its bare cold
   OR-Tools solve is timed on the same arrays (median of three).
2. A scenario with 100 edits (rates of 100 random lanes changed by -5 % to
   +5 %) is created and solved (warm from the week's run where it certifies),
   priced and stored: its time against the plain solve (target: within 1.2 x).
3. One lane's rate is swept over the range of 100 rate scenarios (its rate
   -50 % to +50 %): the exact sweep's time against one bare cold OR-Tools
   solve (target: under 3 x for all of it).
   A full lane's capacity and a customer's demand are swept from half to one
   and a half times their figure (no target; the time per piece is printed).
4. The scenario run is compared with the week's run (``compare_runs``: cost by
   echelon and mode, prices, flows, binding limits): target under 2 s.

    python benchmarks/bench_scenarios.py [--database-url URL] [--lanes 500000] [--keep]

The benchmark creates and drops its own database beside the one the URL names.
"""

from __future__ import annotations

import argparse
import os
import statistics
import tempfile
import time
from decimal import Decimal
from pathlib import Path

import numpy as np
import sqlalchemy as sa
from scratch_database import ScratchDatabase  # benchmarks/, the script's own folder

from planner.core.network import assemble_instance
from planner.core.solve import solve_flow
from planner.database import connect as db
from planner.database.ingest import load_folder
from planner.database.migrate import migrate
from planner.database.snapshot import Scaling, read_snapshot
from planner.reports.compare import compare_runs
from planner.runs.scenarios import command_line_edits, create_scenario, solve_scenario, sweep, sweep_rate
from planner.runs.weekly import solve_period
from planner.synthetic.benchmark_network import benchmark_network
from planner.synthetic.frames import write_folder

BENCH_DATABASE = "planner_bench_scenarios"


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--database-url", default=None)
    parser.add_argument("--lanes", type=int, default=500_000)
    parser.add_argument("--edits", type=int, default=100)
    parser.add_argument("--keep", action="store_true", help="keep the benchmark's database")
    args = parser.parse_args()

    scratch = ScratchDatabase(args.database_url, BENCH_DATABASE)
    engine = db.get_engine(scratch.create())
    try:
        migrate(engine)
        frames = benchmark_network(n_lanes=args.lanes, seed=1)
        week = str(frames.supply["period"].iloc[0])
        with tempfile.TemporaryDirectory() as folder:
            load_folder(engine, write_folder(frames, Path(folder)))
        print(f"{args.lanes:,} lanes, week {week}; load average {os.getloadavg()[0]:.2f}", flush=True)

        start = time.perf_counter()
        base = solve_period(engine, week)
        plain = time.perf_counter() - start
        assert base.ok, base.message
        scaling = Scaling()
        with engine.connect() as conn:
            snapshot = read_snapshot(conn, week, scaling)
        inst = assemble_instance(snapshot.week, cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale)
        bare = statistics.median(solve_flow(inst).solver_seconds for _ in range(3))
        print(f"plain week solve (solve_period): {plain:.2f} s; bare cold OR-Tools solve: {bare:.2f} s")

        rng = np.random.default_rng(7)
        picked = rng.choice(len(frames.lanes), size=args.edits, replace=False)
        lanes = frames.lanes.iloc[picked]
        words = [
            f"rate {o}->{d}{' ' + m if m else ''} {p:+d}%"
            for o, d, m, p in zip(lanes["origin"], lanes["destination"], lanes["mode"].fillna(""),
                                  rng.integers(-5, 6, size=args.edits))
        ]
        create_scenario(engine, "bench-rates", week, command_line_edits(words))
        start = time.perf_counter()
        run = solve_scenario(engine, "bench-rates")
        scenario_s = time.perf_counter() - start
        assert run.summary.ok, run.summary.message
        print(f"scenario with {args.edits} rate edits: {scenario_s:.2f} s (engine {run.engine}), "
              f"{scenario_s / plain:.2f} x the plain solve (target <= 1.2)")

        # The lane of the sweep: one that carries flow, its rate -50 % .. +50 %.
        with engine.connect() as conn:
            label, rate = conn.execute(sa.text(
                "SELECT label, unit_cost FROM lane_flow_of_run(:r) WHERE flow > 0 ORDER BY flow DESC LIMIT 1"
            ), {"r": base.run_id}).one()
        low, high = (rate * Decimal("0.5")).quantize(Decimal("0.0001")), (rate * Decimal("1.5")).quantize(
            Decimal("0.0001"))
        start = time.perf_counter()
        pieces = sweep_rate(engine, label, str(low), str(high), period=week)
        sweep_s = time.perf_counter() - start
        print(f"exact sweep of {label} from {low} to {high}: {len(pieces)} pieces in {sweep_s:.2f} s, "
              f"{sweep_s / bare:.2f} x one bare cold solve (target < 3 for the range of 100 rate scenarios)")

        # A full lane and a customer, each swept from half to one and a half times its figure.
        with engine.connect() as conn:
            full, bound = conn.execute(sa.text(
                "SELECT label, bound FROM limit_value_of_run(:r) WHERE kind = 'lane capacity' "
                "ORDER BY loosen_value DESC, label LIMIT 1"), {"r": base.run_id}).one()
            customer, demand = conn.execute(sa.text(
                "SELECT s.code, d.quantity FROM demand d JOIN site s ON s.id = d.site_id "
                "JOIN solve_run r ON r.id = :r AND d.batch_id = r.batch_id AND d.period_id = r.period_id "
                "ORDER BY d.quantity DESC, s.code LIMIT 1"), {"r": base.run_id}).one()
        for figure, target, middle in (("capacity", full, bound), ("demand", customer, demand)):
            low, high = (int(middle * Decimal(f)) for f in ("0.5", "1.5"))
            start = time.perf_counter()
            pieces = sweep(engine, figure, target, str(low), str(high), period=week)
            took = time.perf_counter() - start
            print(f"exact sweep of the {figure} of {target} from {low} to {high}: {len(pieces)} pieces in "
                  f"{took:.2f} s, {took / bare:.2f} x one bare cold solve")

        start = time.perf_counter()
        comparison = compare_runs(engine, base.run_id, run.summary.run_id)
        compare_s = time.perf_counter() - start
        print(f"comparison of the two 500,000-lane runs: {compare_s:.2f} s (target < 2); {comparison.headline()}")
        print(f"load average {os.getloadavg()[0]:.2f}")
    finally:
        engine.dispose()
        if not args.keep:
            scratch.drop()


if __name__ == "__main__":
    main()
