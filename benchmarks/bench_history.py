"""Benchmark years of weekly history: a new week stored, read and pruned, at the start and after 156 weeks.

1. A fresh database gets three weeks of the same 100,000-lane network
   (``planner.synthetic.benchmark_network``), loaded by the planner: the
   first week of the history (``A``), the week before it (stored once, so
   that ``A`` has a previous week to compare prices with, as ``B`` has) and
   the week after its end (``B``). The week is solved once in this process;
   the same outcome is then stored as new runs of a week, so that every store
   writes exactly the same rows.
2. Start: ``A`` is stored ``--runs`` + 1 times (store time: the median), read
   (the queries below, each the median of three), and pruned with ``--keep``
   = ``--runs`` (one run of ``A`` dropped).
3. History: ``--weeks`` weeks between ``A`` and ``B`` are filled in SQL, with
   no solving: their snapshots (copies of ``A``'s rows) in a load batch of
   their own, ``--runs`` optimal runs per week, and each run's result rows
   (copies of ``A``'s stored rows under the new run and week).
4. End: ``B`` is stored, read and pruned as ``A`` was. The report prints each
   time at the start and at the end and their ratio (target: every ratio within
   1.1), the rows in the result tables, and the view queries' times at the end
   (target: under a second each).

    python benchmarks/bench_history.py [--database-url URL] [--weeks 156] [--runs 3] [--lanes 100000] [--keep]

``--database-url`` names any database on the server (default
``$PLANNER_DATABASE_URL``, else the embedded server); the benchmark creates its
own database ``planner_bench_history`` beside it and drops it at the end unless
``--keep``.
"""

from __future__ import annotations

import argparse
import os
import statistics
import tempfile
import time
from pathlib import Path

import pandas as pd
import psycopg
import sqlalchemy as sa
from scratch_database import ScratchDatabase  # benchmarks/, the script's own folder

from planner.database import connect as db
from planner.database.history import prune
from planner.database.ingest import load_folder
from planner.database.migrate import migrate
from planner.database.results import RunKey
from planner.database.snapshot import Scaling, current_batch, read_snapshot, run_fingerprint
from planner.periods import parse_week
from planner.reports import queries as report
from planner.runs.weekly import solve_snapshot, store_and_summarise
from planner.synthetic.benchmark_network import benchmark_network
from planner.synthetic.frames import NetworkFrames, consecutive_weeks, write_folder

BENCH_DATABASE = "planner_bench_history"


def week_queries(week: str, origin: str, customer: str) -> list[tuple[str, str]]:
    """(label, SQL) of the reads of one week timed at the start and at the end."""
    return [
        ("lane_flow: every lane of the week", f"SELECT * FROM lane_flow WHERE period = '{week}'"),
        ("lane_flow: busiest 20 lanes", f"SELECT * FROM lane_flow WHERE period = '{week}' AND flow > 0 "
                                        "ORDER BY flow DESC LIMIT 20"),
        ("lane_flow: one origin", f"SELECT * FROM lane_flow WHERE period = '{week}' AND origin = '{origin}'"),
        ("binding_capacity: top 20", f"SELECT * FROM binding_capacity WHERE period = '{week}' ORDER BY rank LIMIT 20"),
        ("limit_value: the week", f"SELECT * FROM limit_value WHERE period = '{week}'"),
        ("shortage: the week", f"SELECT * FROM shortage WHERE period = '{week}'"),
        ("site_price_history: the week", f"SELECT * FROM site_price_history WHERE period = '{week}'"),
        ("site_price_history: one customer, all weeks",
         f"SELECT * FROM site_price_history WHERE site = '{customer}' ORDER BY period"),
        ("run_summary: every latest run", "SELECT * FROM run_summary ORDER BY period"),
    ]


def timed(call, repeat: int = 3) -> float:
    """Median seconds of ``repeat`` calls after one warm-up call."""
    call()
    times = []
    for _ in range(repeat):
        start = time.perf_counter()
        call()
        times.append(time.perf_counter() - start)
    return statistics.median(times)


def same_week(frames: NetworkFrames, weeks: list[str]) -> NetworkFrames:
    """One week's rows under several week codes."""

    def copies(frame: pd.DataFrame) -> pd.DataFrame:
        return pd.concat([frame.assign(period=week) for week in weeks], ignore_index=True)

    return NetworkFrames(frames.sites, copies(frames.supply), copies(frames.demand), copies(frames.lanes))


class Week:
    """One week's solved outcome, stored again and again as new runs of a week."""

    def __init__(self, engine: sa.Engine, week: str, scaling: Scaling) -> None:
        with engine.connect() as conn:
            self.snapshot = read_snapshot(conn, week, scaling)
        self.inst, self.outcome = solve_snapshot(self.snapshot, scaling)
        assert self.outcome.ok, self.outcome.message
        self.scaling = scaling

    def store(self, engine: sa.Engine, week: str) -> float:
        """Store the outcome as a new run of ``week``; the seconds of the store."""
        with engine.connect() as conn:
            period_id, batch_id, fingerprint = current_batch(conn, week)
        key = RunKey("week", period_id, period_id, period_id, batch_id, run_fingerprint(fingerprint, self.scaling))
        start = time.perf_counter()
        store_and_summarise(
            engine, key, self.scaling, self.inst, self.outcome, start, label=week, periods=[week],
            site_ids=self.snapshot.site_id, lane_ids=self.snapshot.lane_id,
            site_kind=self.snapshot.week.site_kind,
        )
        return time.perf_counter() - start


def measure(engine: sa.Engine, url: str, solved: Week, week: str, runs: int, keep: int, queries) -> dict[str, float]:
    """Store ``week`` ``runs`` + 1 times, read it, prune it: seconds per step."""
    stores = [solved.store(engine, week) for _ in range(runs + 1)]
    out = {"store a week (median)": statistics.median(stores)}
    with psycopg.connect(url, autocommit=True) as conn:
        conn.execute("ANALYZE run_flow, run_site_price, run_limit, run_stock, solve_run")
        for label, query in queries:
            out[label] = timed(lambda: conn.execute(query).fetchall())
    out["report.week_report (library)"] = timed(lambda: report.week_report(engine, week))
    start = time.perf_counter()
    plan = prune(engine, keep)
    out["prune one old run of the week"] = time.perf_counter() - start
    assert [d[2] for d in plan.dropped] == [week], plan.dropped
    return out


def fill_history(url: str, first: str, weeks: list[str], runs: int) -> None:
    """``weeks`` of snapshots and ``runs`` runs each, copied in SQL from week ``first`` and its latest run."""
    with psycopg.connect(url, autocommit=True) as conn:
        conn.execute("SET maintenance_work_mem = '1GB'")
        source = conn.execute(
            "SELECT p.id, s.batch_id, r.run_id FROM period p JOIN period_snapshot s ON s.period_id = p.id "
            "JOIN latest_week_run r ON r.period_id = p.id WHERE p.code = %s", (first,)
        ).fetchone()
        period_id, batch_id, run_id = source
        history_batch = conn.execute(
            "INSERT INTO load_batch (source, files, content_sha256) "
            "VALUES ('synthetic history', '{}', 'synthetic history') RETURNING id"
        ).fetchone()[0]
        conn.execute(
            "INSERT INTO period (code, starts_on, ends_on) SELECT w, d, d + 6 FROM unnest(%s::text[], %s::date[]) "
            "AS t(w, d)", ([w for w in weeks], [parse_week(w) for w in weeks]),
        )
        copies = {
            "snapshots": "INSERT INTO period_snapshot (period_id, batch_id, fingerprint) "
                         "SELECT p.id, %(hb)s, md5(p.code) FROM period p WHERE p.code = ANY(%(weeks)s)",
            "site versions": "INSERT INTO site_version (batch_id, site_id, kind, name, region, throughput_capacity, "
                             "handling_cost, holding_cost, storage_capacity, x, y) SELECT %(hb)s, site_id, kind, name, "
                             "region, throughput_capacity, handling_cost, holding_cost, storage_capacity, x, y "
                             "FROM site_version WHERE batch_id = %(b)s",
            "supply": "INSERT INTO supply (batch_id, period_id, site_id, quantity) SELECT %(hb)s, p.id, s.site_id, "
                      "s.quantity FROM supply s, period p WHERE s.batch_id = %(b)s AND s.period_id = %(p)s "
                      "AND p.code = ANY(%(weeks)s)",
            "demand": "INSERT INTO demand (batch_id, period_id, site_id, quantity, shortage_penalty) SELECT %(hb)s, "
                      "p.id, d.site_id, d.quantity, d.shortage_penalty FROM demand d, period p "
                      "WHERE d.batch_id = %(b)s AND d.period_id = %(p)s AND p.code = ANY(%(weeks)s)",
            "lane rates": "INSERT INTO lane_rate (batch_id, period_id, lane_id, unit_cost, capacity, min_quantity) "
                          "SELECT %(hb)s, p.id, r.lane_id, r.unit_cost, r.capacity, r.min_quantity "
                          "FROM lane_rate r, period p WHERE r.batch_id = %(b)s AND r.period_id = %(p)s "
                          "AND p.code = ANY(%(weeks)s) ORDER BY p.id, r.lane_id",
            "partitions": "SELECT planner_result_partitions(code) FROM period WHERE code = ANY(%(weeks)s)",
            "runs": "INSERT INTO solve_run (kind, period_id, first_period_id, last_period_id, batch_id, "
                    "input_fingerprint, status, started_at, finished_at, cost_decimals, quantity_decimals, "
                    "solver_seconds, total_seconds, primal_cost, dual_objective, duality_gap, certificate_ok, "
                    "shortage_units, spare_units, node_count, arc_count, planner_version) "
                    "SELECT 'week', p.id, p.id, p.id, %(hb)s, md5(p.code), 'optimal', "
                    "r.started_at + k * interval '1 min', r.finished_at + k * interval '1 min', r.cost_decimals, "
                    "r.quantity_decimals, r.solver_seconds, r.total_seconds, r.primal_cost, r.dual_objective, "
                    "r.duality_gap, r.certificate_ok, r.shortage_units, r.spare_units, r.node_count, r.arc_count, "
                    "r.planner_version FROM solve_run r, period p, generate_series(1, %(runs)s) k "
                    "WHERE r.id = %(r)s AND p.code = ANY(%(weeks)s) ORDER BY p.starts_on, k",
        }
        params = {"hb": history_batch, "b": batch_id, "p": period_id, "r": run_id, "weeks": weeks, "runs": runs}
        for label, statement in copies.items():
            start = time.perf_counter()
            conn.execute(statement, params)
            print(f"  {label}: {time.perf_counter() - start:.1f} s", flush=True)
        start = time.perf_counter()
        tables = {
            "run_flow": "lane_id, flow",
            "run_site_price": "site_id, price, price_low, price_high, low_reason, high_reason, high_units, "
                              "throughput_flow, shortage, spare, price_out",
            "run_limit": "limit_kind, ref_id, bound, flow, loosen_value, loosen_units, tighten_cost, tighten_units, "
                         "tighten_blocked, rate_low, rate_high, exact",
        }
        for week in weeks:
            for table, columns in tables.items():
                conn.execute(
                    f"INSERT INTO {table} (run_id, period, {columns}) SELECT r.id, %(w)s, {columns} FROM {table} x, "
                    "solve_run r JOIN period p ON p.id = r.period_id "
                    "WHERE x.run_id = %(r)s AND x.period = %(first)s AND p.code = %(w)s",
                    {"w": week, "r": run_id, "first": first},
                )
        print(f"  result rows: {time.perf_counter() - start:.1f} s", flush=True)
        start = time.perf_counter()
        conn.execute("ANALYZE")
        print(f"  statistics: {time.perf_counter() - start:.1f} s", flush=True)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--database-url", default=None)
    parser.add_argument("--weeks", type=int, default=156)
    parser.add_argument("--runs", type=int, default=3, help="runs per week in the history")
    parser.add_argument("--lanes", type=int, default=100_000)
    parser.add_argument("--customers", type=int, default=10_000)
    parser.add_argument("--keep", action="store_true", help="keep the filled database")
    args = parser.parse_args()

    scratch = ScratchDatabase(args.database_url, BENCH_DATABASE)
    bench_url = scratch.create()
    engine = db.get_engine(bench_url)
    try:
        migrate(engine)
        # The week before the start has one run, so that the start's week, like
        # the end's, has a previous week to compare prices with.
        calendar = consecutive_weeks("2023-W52", args.weeks + 3)
        before, first, history, last = calendar[0], calendar[1], calendar[2:-1], calendar[-1]
        frames = benchmark_network(n_plants=40, n_warehouses=160, n_customers=args.customers, n_lanes=args.lanes,
                                   weeks=1, first_week=first)
        with tempfile.TemporaryDirectory() as folder:
            load_folder(engine, write_folder(same_week(frames, [before, first, last]), Path(folder)))
        solved = Week(engine, first, Scaling())
        solved.store(engine, before)
        customer = frames.demand["site"].iloc[len(frames.demand) // 2]
        origin = frames.lanes["origin"].iloc[0]
        print(f"{args.lanes:,} lanes; weeks {first} (start) and {last} (end); {args.weeks} weeks between; "
              f"load average {os.getloadavg()[0]:.2f}")
        start = measure(engine, bench_url, solved, first, args.runs, args.runs, week_queries(first, origin, customer))
        print(f"filling {args.weeks} weeks x {args.runs} runs in SQL", flush=True)
        fill_history(bench_url, first, history, args.runs)
        end = measure(engine, bench_url, solved, last, args.runs, args.runs, week_queries(last, origin, customer))
        with psycopg.connect(bench_url, autocommit=True) as conn:
            counts = conn.execute(
                "SELECT (SELECT count(*) FROM run_flow), (SELECT count(*) FROM run_site_price), "
                "(SELECT count(*) FROM run_limit), (SELECT count(*) FROM solve_run), (SELECT count(*) FROM lane_rate), "
                "pg_size_pretty(pg_database_size(current_database()))"
            ).fetchone()
        print(f"rows at the end: run_flow {counts[0]:,}, run_site_price {counts[1]:,}, run_limit {counts[2]:,}, "
              f"solve_run {counts[3]:,}, lane_rate {counts[4]:,}; database {counts[5]}; "
              f"load average {os.getloadavg()[0]:.2f}")
        print(f"{'':50s} {'start':>10s} {'end':>10s} {'end/start':>10s}")
        for label in start:
            ratio = end[label] / start[label]
            print(f"{label:50s} {start[label] * 1000:8.1f}ms {end[label] * 1000:8.1f}ms {ratio:10.2f}")
        slow = max(v for k, v in end.items() if "store" not in k and "prune" not in k)
        print(f"slowest read at the end: {slow * 1000:.1f} ms (target < 1000 ms)")
    finally:
        engine.dispose()
        if not args.keep:
            scratch.drop()


if __name__ == "__main__":
    main()
