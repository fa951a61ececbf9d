"""Benchmark a 52-week linked horizon: prices and certificate against the bare solve.

Generates a benchmark network (``planner.synthetic.benchmark_network``) of
about 20,000 lanes and 2,000 customers over 52 consecutive weeks, gives its
plants and warehouses a holding cost and a storage capacity so stock arcs link
the weeks, scales it exactly (4 cost decimals, whole units, as ``Scaling()``)
into one ``WeekData`` per week and builds the time-expanded instance in memory.
Then it times, on that same instance,

* the bare OR-Tools solve (``planner.core.solve.solve_flow``: building the solver's
  graph, solving, reading the flows), median of ``--repeat`` runs, and
* ``planner.core.optimize.optimize``: the solve plus the feasible potential, the
  exact price ranges, reduced costs, capacity values and the certificate,

and prints their ratio (target < 5). With ``--database-url`` it also loads
the weeks into that database and times ``planner.runs.solve_horizon`` end to
end (reading 52 snapshots, solving, storing flows, stock and prices). Figures
are measured in one run.

    python benchmarks/bench_horizon.py [--weeks 52] [--lanes 20000] [--customers 2000]
                                       [--database-url URL]
"""

from __future__ import annotations

import argparse
import resource
import tempfile
import time
from pathlib import Path

import numpy as np
import sqlalchemy as sa

from planner.core.network import ArcKind, Instance, time_expand
from planner.core.optimize import optimize
from planner.core.solve import solve_flow
from planner.core.week import SiteKind
from planner.database import connect as db
from planner.database.ingest import load_folder
from planner.database.migrate import ensure_schema
from planner.database.snapshot import Scaling
from planner.runs.horizon import solve_horizon
from planner.synthetic.benchmark_network import benchmark_network
from planner.synthetic.frames import NetworkFrames, frames_to_weeks, write_folder

#: Fresh statistics after a large load, as autovacuum would gather them.
ANALYZE_SNAPSHOT_TABLES = (
    "ANALYZE site, site_version, period, period_snapshot, supply, demand, lane, lane_rate"
)
KINDS = {"plant": SiteKind.PLANT, "warehouse": SiteKind.WAREHOUSE, "customer": SiteKind.CUSTOMER}


def peak_rss_gib() -> float:
    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 2**20


def with_storage(frames: NetworkFrames, seed: int) -> NetworkFrames:
    """The network with holding costs and storage capacities at plants and warehouses.

    Holding costs of 0.01 to 0.05 per unit and week are below the weekly rise
    of the lane rates (1 % of 0.3 to 20 per unit), so carrying stock forward
    pays on part of the network; capacities are a few weeks of a typical
    site's flow, so some of them bind.
    """
    rng = np.random.default_rng(seed)
    sites = frames.sites.copy()
    stocks = sites["kind"].isin(["plant", "warehouse"]).to_numpy()
    weekly_demand = frames.demand.groupby("period")["quantity"].sum().mean()
    typical = weekly_demand / stocks.sum()
    sites.loc[stocks, "holding_cost"] = np.round(rng.uniform(0.01, 0.05, stocks.sum()), 2)
    sites.loc[stocks, "storage_capacity"] = np.floor(typical * rng.uniform(0.5, 3.0, stocks.sum()))
    return NetworkFrames(sites=sites, supply=frames.supply, demand=frames.demand, lanes=frames.lanes)


def through_database(url: str, frames: NetworkFrames, periods: list[str], bare: float) -> None:
    """Load the horizon's weeks and time ``solve_horizon`` on them."""
    engine = db.get_engine(db.database_url(url))
    ensure_schema(engine)
    with tempfile.TemporaryDirectory() as tmp:
        start = time.perf_counter()
        loaded = load_folder(engine, write_folder(frames, Path(tmp) / "horizon"))
        print(f"load: {time.perf_counter() - start:.1f} s ({loaded.message.splitlines()[0]})")
    with engine.begin() as conn:
        conn.execute(sa.text(ANALYZE_SNAPSHOT_TABLES))
    summary = solve_horizon(engine, periods)
    s = summary.seconds
    print(
        f"solve_horizon: run {summary.run_id} {summary.status}, certificate "
        f"{'exact' if summary.certificate_ok else 'FAILED'}, cost {summary.cost}"
    )
    print(
        f"read {len(periods)} snapshots + time_expand {s['read']:.2f} s, solver {s['solver']:.2f} s, "
        f"prices+certificate {s['prices']:.2f} s, store {s['store']:.2f} s, total {s['total']:.2f} s"
    )
    print(f"ratio solve_horizon total / bare solve: {s['total'] / bare:.2f}")
    engine.dispose()


def main() -> None:
    parser = argparse.ArgumentParser(
        description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter
    )
    parser.add_argument("--weeks", type=int, default=52)
    parser.add_argument("--lanes", type=int, default=20_000)
    parser.add_argument("--customers", type=int, default=2_000)
    parser.add_argument("--plants", type=int, default=40)
    parser.add_argument("--warehouses", type=int, default=160)
    parser.add_argument("--repeat", type=int, default=3, help="bare solves to take the median of")
    parser.add_argument("--seed", type=int, default=1)
    parser.add_argument("--database-url", default=None, help="also time solve_horizon through this database")
    args = parser.parse_args()

    scaling = Scaling()
    start = time.perf_counter()
    frames = with_storage(
        benchmark_network(
            n_plants=args.plants, n_warehouses=args.warehouses, n_customers=args.customers,
            n_lanes=args.lanes, weeks=args.weeks, seed=args.seed,
        ),
        args.seed,
    )
    periods, weeks = frames_to_weeks(frames, scaling.cost_decimals, scaling.quantity_decimals)
    t_arrays = time.perf_counter()
    inst: Instance = time_expand(weeks, cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale)
    t_expand = time.perf_counter()
    n_stock = int((inst.arc_kind == ArcKind.STOCK).sum())
    print(
        f"{len(periods)} weeks {periods[0]}..{periods[-1]}, {args.lanes} lanes per week: "
        f"{inst.n_nodes:,} nodes, {inst.n_arcs:,} arcs ({n_stock:,} stock arcs)"
    )
    print(f"generate + scale: {t_arrays - start:.2f} s, time_expand: {t_expand - t_arrays:.2f} s")

    bare_runs = []
    for _ in range(args.repeat):
        sol = solve_flow(inst)
        assert sol.status == "optimal", sol.status
        bare_runs.append(sol.solver_seconds)
    bare = sorted(bare_runs)[args.repeat // 2]

    t0 = time.perf_counter()
    outcome = optimize(inst, period_codes=periods)
    optimize_s = time.perf_counter() - t0
    assert outcome.ok, outcome.message
    cert = outcome.certificate
    stock_flow = outcome.flow[inst.arc_kind == ArcKind.STOCK]
    print(
        f"certificate {'exact' if cert.ok else 'FAILED'} (gap {cert.gap}), cost "
        f"{cert.primal_cost / scaling.cost_scale:,.2f}, stock carried on "
        f"{int((stock_flow > 0).sum()):,} stock arcs ({int(stock_flow.sum()):,} unit-weeks)"
    )
    print(f"bare OR-Tools solve (median of {args.repeat}): {bare:.2f} s  {sorted(bare_runs)}")
    unbounded_check = optimize_s - outcome.solver_seconds - outcome.dual_seconds
    timings = ", ".join(f"{k} {v:.2f} s" for k, v in outcome.timings.items())
    print(
        f"optimize: {optimize_s:.2f} s = solver {outcome.solver_seconds:.2f} s + duals "
        f"{outcome.dual_seconds:.2f} s ({timings}) + checks before solving {unbounded_check:.2f} s"
    )
    print(f"ratio optimize / bare solve: {optimize_s / bare:.2f}  (target < 5)")
    print(f"ratio (time_expand + optimize) / bare solve: {(t_expand - t_arrays + optimize_s) / bare:.2f}")
    print(f"peak memory: {peak_rss_gib():.2f} GiB")
    if args.database_url:
        through_database(args.database_url, frames, periods, bare)


if __name__ == "__main__":
    main()
