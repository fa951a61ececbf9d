"""Benchmark the reporting views on 52 weeks of 500,000 lanes.

Fills a fresh database synthetically with SQL ``generate_series`` (no solving):
200 plants, 800 warehouses, 50,000 customers, 500,000 lanes (50,000 plant to
warehouse, nine warehouses per customer), one load batch defining 52 weeks, one
optimal run per week plus older superseded optimal runs and failed runs, so the
views must pick the latest run out of several. Then runs the analysts' queries
of the README and the planner's own report queries under ``EXPLAIN (ANALYZE,
BUFFERS)`` and prints each plan's execution time (target: under a second each,
warm cache).

    python benchmarks/bench_views.py [--database-url URL] [--weeks 52] [--lanes-per-customer 9]
                                     [--keep] [--reuse NAME] [--plans]

``--database-url`` names any database on the server (default
``$PLANNER_DATABASE_URL``, else the embedded server); the benchmark creates its
own database ``planner_bench_views`` beside it and drops it at the end unless
``--keep``. ``--reuse NAME`` skips the fill and queries an existing filled
database. ``--plans`` prints the full plans.
"""

from __future__ import annotations

import argparse
import re
import time

import psycopg
import sqlalchemy as sa
from scratch_database import ScratchDatabase  # benchmarks/, the script's own folder

from planner.database import connect as db
from planner.database.migrate import migrate
from planner.reports import queries as report

BENCH_DATABASE = "planner_bench_views"
PLANTS, WAREHOUSES, CUSTOMERS = 200, 800, 50_000
LANES_PER_PLANT = 250  # 200 x 250 = 50,000 plant -> warehouse lanes
OLDER_RUN_WEEKS = 4  # weeks that also keep an older optimal run
FAILED_RUNS = 10


def fill_statements(weeks: int, lanes_per_customer: int) -> list[tuple[str, str]]:
    """(label, SQL) statements that fill a migrated, empty database."""
    sites = PLANTS + WAREHOUSES + CUSTOMERS
    return [
        ("sites", f"""
INSERT INTO site (id, code)
SELECT i, CASE WHEN i <= {PLANTS} THEN 'P' || lpad(i::text, 4, '0')
               WHEN i <= {PLANTS + WAREHOUSES} THEN 'W' || lpad((i - {PLANTS})::text, 4, '0')
               ELSE 'C' || lpad((i - {PLANTS + WAREHOUSES})::text, 5, '0') END
FROM generate_series(1, {sites}) i"""),
        ("batch", """
INSERT INTO load_batch (id, source, files, content_sha256)
VALUES (1, 'synthetic', '{}', 'synthetic')"""),
        ("site versions", f"""
INSERT INTO site_version (batch_id, site_id, kind, name, region, throughput_capacity,
                          handling_cost, x, y)
SELECT 1, i,
       CASE WHEN i <= {PLANTS} THEN 'plant' WHEN i <= {PLANTS + WAREHOUSES} THEN 'warehouse'
            ELSE 'customer' END,
       'Site ' || i, 'region ' || (i % 12),
       CASE WHEN i > {PLANTS} AND i <= {PLANTS + WAREHOUSES} THEN 5000 END,
       CASE WHEN i > {PLANTS} AND i <= {PLANTS + WAREHOUSES} THEN 0.5 END,
       (i::bigint * 7919 % 1000)::float8, (i::bigint * 104729 % 1000)::float8
FROM generate_series(1, {sites}) i"""),
        ("periods", f"""
INSERT INTO period (id, code, starts_on, ends_on)
SELECT w, '2026-W' || lpad(w::text, 2, '0'), date '2025-12-29' + 7 * (w - 1),
       date '2025-12-29' + 7 * (w - 1) + 6
FROM generate_series(1, {weeks}) w"""),
        ("snapshots", f"""
INSERT INTO period_snapshot (period_id, batch_id, fingerprint)
SELECT w, 1, md5(w::text) FROM generate_series(1, {weeks}) w"""),
        ("lanes", f"""
INSERT INTO lane (id, origin_id, destination_id, mode)
SELECT p * {LANES_PER_PLANT} + k + 1, p + 1, {PLANTS} + (p * 7 + k) % {WAREHOUSES} + 1, 'road'
FROM generate_series(0, {PLANTS - 1}) p, generate_series(0, {LANES_PER_PLANT - 1}) k
UNION ALL
SELECT {PLANTS * LANES_PER_PLANT} + c * {lanes_per_customer} + k + 1,
       {PLANTS} + (c * 7 + k * 89) % {WAREHOUSES} + 1, {PLANTS + WAREHOUSES} + c + 1,
       CASE WHEN k % 3 = 0 THEN 'rail' ELSE 'road' END
FROM generate_series(0, {CUSTOMERS - 1}) c, generate_series(0, {lanes_per_customer - 1}) k"""),
        ("supply", f"""
INSERT INTO supply (batch_id, period_id, site_id, quantity)
SELECT 1, w, i, 3000 FROM generate_series(1, {weeks}) w, generate_series(1, {PLANTS}) i"""),
        ("demand", f"""
INSERT INTO demand (batch_id, period_id, site_id, quantity, shortage_penalty)
SELECT 1, w, i, 10 + i % 7, CASE WHEN i % 4 = 0 THEN 40 END
FROM generate_series(1, {weeks}) w,
     generate_series({PLANTS + WAREHOUSES + 1}, {sites}) i"""),
        ("lane rates", f"""
INSERT INTO lane_rate (batch_id, period_id, lane_id, unit_cost, capacity, min_quantity)
SELECT 1, w, l.id, 1 + (l.id * 31 + w) % 900 / 100.0,
       CASE WHEN l.id % 5 = 0 THEN 20 END, 0
FROM generate_series(1, {weeks}) w, lane l"""),
        # Run ids: week w's latest optimal run is w; older optimal runs and failed
        # runs come after, with earlier finished_at or a non-optimal status.
        ("runs", f"""
INSERT INTO solve_run (id, kind, period_id, first_period_id, last_period_id, batch_id,
                       input_fingerprint, status, started_at, finished_at, cost_decimals,
                       quantity_decimals, solver_seconds, total_seconds, primal_cost,
                       dual_objective, duality_gap, certificate_ok, shortage_units, spare_units)
SELECT w, 'week', w, w, w, 1, md5(w::text), 'optimal', ts, ts + interval '5 s', 4, 0, 3.5, 9.1,
       1000000 + w, 1000000 + w, 0, true, w % 3, 100
FROM generate_series(1, {weeks}) w, LATERAL (SELECT timestamptz '2026-06-01' + w * interval '1 h' AS ts) t
UNION ALL
SELECT {weeks} + w, 'week', w, w, w, 1, md5(w::text), 'optimal', ts, ts + interval '5 s', 4, 0, 3.5,
       9.1, 999000 + w, 999000 + w, 0, true, 0, 100
FROM generate_series(1, {min(OLDER_RUN_WEEKS, weeks)}) w, LATERAL (SELECT timestamptz '2026-05-01' + w * interval '1 h' AS ts) t
UNION ALL
SELECT {weeks + OLDER_RUN_WEEKS} + k, 'week', 1 + k % {weeks}, 1 + k % {weeks}, 1 + k % {weeks}, 1,
       'x', 'infeasible', ts, ts + interval '1 s', 4, 0, 1.0, 2.0, NULL, NULL, NULL, NULL, NULL, NULL
FROM generate_series(1, {FAILED_RUNS}) k, LATERAL (SELECT timestamptz '2026-07-01' + k * interval '1 h' AS ts) t"""),
        ("partitions", "SELECT planner_result_partitions(code) FROM period ORDER BY id"),
        # About 15% of lanes carry flow, as in a solved week (a basic optimal flow uses
        # few more lanes than there are sites); only those are stored. Every 50th lane
        # is at its capacity, and so is every fourth warehouse: their limit rows.
        ("flows", """
INSERT INTO run_flow (run_id, period, lane_id, flow)
SELECT r.id, p.code, l.id, CASE WHEN l.id % 50 = 0 THEN 20 ELSE 7 END
FROM solve_run r JOIN period p ON p.id = r.period_id, lane l
WHERE r.status = 'optimal' AND (l.id % 50 = 0 OR l.id % 7 = 0)
ORDER BY r.id, l.id"""),
        ("prices", f"""
INSERT INTO run_site_price (run_id, period, site_id, price, price_low, price_high,
                            throughput_flow, shortage, spare, price_out)
SELECT r.id, (SELECT code FROM period WHERE id = r.period_id), s.id, (s.id * 17 + r.id * 3) % 2000 / 100.0,
       (s.id * 17 + r.id * 3) % 2000 / 100.0 - CASE WHEN s.id % 10 = 0 THEN 1 ELSE 0 END,
       (s.id * 17 + r.id * 3) % 2000 / 100.0,
       CASE WHEN s.id > {PLANTS} AND s.id <= {PLANTS + WAREHOUSES} THEN
            CASE WHEN s.id % 4 = 0 THEN 5000 ELSE 3000 END END,
       CASE WHEN s.id > {PLANTS + WAREHOUSES} THEN CASE WHEN s.id % 97 = 0 THEN 3 ELSE 0 END END,
       CASE WHEN s.id <= {PLANTS} THEN 10 END,
       CASE WHEN s.id > {PLANTS} AND s.id <= {PLANTS + WAREHOUSES} THEN
            (s.id * 17 + r.id * 3) % 2000 / 100.0 + 0.5 + CASE WHEN s.id % 4 = 0 THEN (s.id % 300) / 100.0 ELSE 0 END END
FROM solve_run r, site s WHERE r.status = 'optimal'
ORDER BY r.id, s.id"""),
        ("limits", f"""
INSERT INTO run_limit (run_id, period, limit_kind, ref_id, bound, flow, loosen_value, loosen_units,
                       tighten_cost, tighten_units, rate_low, rate_high)
SELECT r.id, (SELECT code FROM period WHERE id = r.period_id), 'lane_capacity', l.id, 20, 20, ((l.id * 13 + r.id) % 500) / 100.0, 5,
       ((l.id * 13 + r.id) % 500) / 100.0 + 0.25, 3, '-Infinity'::numeric, 1 + (l.id * 31 + r.period_id) % 900 / 100.0
FROM solve_run r, lane l WHERE r.status = 'optimal' AND l.id % 50 = 0
UNION ALL
SELECT r.id, (SELECT code FROM period WHERE id = r.period_id), 'throughput', s.id, 5000, 5000, (s.id % 300) / 100.0, 40,
       (s.id % 300) / 100.0 + 0.5, 40, NULL, NULL
FROM solve_run r, site s WHERE r.status = 'optimal' AND s.id > {PLANTS} AND s.id <= {PLANTS + WAREHOUSES}
     AND s.id % 4 = 0
ORDER BY 1, 4"""),
        ("statistics", "ANALYZE"),
    ]


def analyst_queries(week: str) -> list[tuple[str, str, dict]]:
    """(label, SQL, parameters) of the queries timed: README examples and the report's."""
    return [
        ("run_summary: every latest run", "SELECT * FROM run_summary ORDER BY period", {}),
        (
            "lane_flow: one week, one origin",
            "SELECT * FROM lane_flow WHERE period = %(week)s AND origin = 'W0017'",
            {"week": week},
        ),
        (
            "lane_flow: one week, one destination",
            "SELECT * FROM lane_flow WHERE period = %(week)s AND destination = 'C00017'",
            {"week": week},
        ),
        (
            "lane_flow: one lane over 52 weeks",
            "SELECT period, flow, utilisation, reduced_cost FROM lane_flow "
            "WHERE origin = 'W0008' AND destination = 'C00002' AND mode = 'rail' ORDER BY period",
            {},
        ),
        (
            "lane_flow: busiest 20 lanes of a week",
            "SELECT * FROM lane_flow WHERE period = %(week)s AND flow > 0 ORDER BY flow DESC LIMIT 20",
            {"week": week},
        ),
        (
            "binding_capacity: top 20 of a week",
            "SELECT * FROM binding_capacity WHERE period = %(week)s ORDER BY rank LIMIT 20",
            {"week": week},
        ),
        ("shortage: one week", "SELECT * FROM shortage WHERE period = %(week)s", {"week": week}),
        (
            "site_price_history: one site over 52 weeks",
            "SELECT * FROM site_price_history WHERE site = 'C00054' ORDER BY period",
            {},
        ),
        (
            "site_price_history: biggest rises of a week",
            "SELECT site, price, price_change FROM site_price_history "
            "WHERE period = %(week)s AND NOT degenerate "
            "ORDER BY price_change DESC NULLS LAST LIMIT 10",
            {"week": week},
        ),
        (
            "lane_flow_of_run: one run, one origin",
            "SELECT * FROM lane_flow_of_run(1) WHERE origin = 'W0017'",
            {},
        ),
        (
            "site_price_history_of_run: one run",
            "SELECT * FROM site_price_history_of_run(2) WHERE site = 'C00054'",
            {},
        ),
    ]


# Not a target: every row of a week, whose time grows with the rows returned.
WHOLE_WEEK = ("lane_flow: all 500,000 lanes of a week (not a target)", "SELECT * FROM lane_flow WHERE period = %(week)s")


def library_calls(engine: sa.Engine, week: str) -> list[tuple[str, object]]:
    """(label, call) of the planner's own report functions, timed end to end."""
    return [
        ("report.week_report (cost, binding, moves, shortages)", lambda: report.week_report(engine, week)),
        ("report.cost_breakdown", lambda: report.cost_breakdown(engine, week)),
        ("report.price_moves", lambda: report.price_moves(engine, week)),
        ("report.site_prices, one site, 52 weeks", lambda: report.site_prices(engine, "C00054")),
        ("report.network_of_week (3,000 busiest lanes)", lambda: report.network_of_week(engine, week)),
    ]


_EXECUTION_TIME = re.compile(r"Execution Time: ([0-9.]+) ms")
_ROWS = re.compile(r"actual time=[0-9.]+\.\.[0-9.]+ rows=([0-9]+)")


def explain_ms(connection: psycopg.Connection, query: str, params: dict) -> tuple[float, int, str]:
    """Execution time in ms of ``query`` (second of two runs: warm cache), rows, plan."""
    plan = ""
    for _ in range(2):
        rows = connection.execute(f"EXPLAIN (ANALYZE, BUFFERS) {query}", params).fetchall()
        plan = "\n".join(row[0] for row in rows)
    return float(_EXECUTION_TIME.search(plan).group(1)), int(_ROWS.search(plan).group(1)), plan


#: Plan checks: a query, the index it must use, and the tables it must not scan whole.
PLAN_CHECKS = (
    ("SELECT * FROM lane_flow WHERE period = %(week)s", "pk_run_flow", ("solve_run", "run_flow", "run_site_price", "lane_rate")),
    ("SELECT * FROM binding_capacity WHERE period = %(week)s", "pk_run_limit", ("solve_run", "run_limit")),
    ("SELECT * FROM shortage WHERE period = %(week)s", "pk_run_site_price", ("solve_run", "run_site_price")),
    ("SELECT * FROM site_price_history WHERE site = 'C00017'", "pk_run_site_price", ("solve_run", "run_site_price")),
    ("SELECT * FROM run_summary", "ix_solve_run_period_id_status_finished_at", ("run_flow", "run_site_price")),
    ("SELECT * FROM lane_flow_of_run(1) WHERE origin = 'P0001'", "pk_run_flow", ("run_flow",)),
)


def check_plans(connection: psycopg.Connection, week: str) -> bool:
    """Print, per query, whether its plan uses the expected index and scans no big table whole."""
    good = True
    for query, index, not_scanned in PLAN_CHECKS:
        plan = "\n".join(row[0] for row in connection.execute(f"EXPLAIN {query}", {"week": week}).fetchall())
        # A result table is scanned whole when any of its week partitions is.
        scanned = [t for t in not_scanned if re.search(rf"Seq Scan on {t}(_\d{{4}}_w\d\d)?\b", plan)]
        ok = f"using {index}" in plan and not scanned
        good &= ok
        print(f"  {'ok  ' if ok else 'FAIL'} {query}: uses {index}" + (f"; scans {', '.join(scanned)} whole" if scanned else ""))
    return good


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--database-url", default=None)
    parser.add_argument("--weeks", type=int, default=52)
    parser.add_argument("--lanes-per-customer", type=int, default=9)
    parser.add_argument("--keep", action="store_true", help="keep the filled database")
    parser.add_argument("--reuse", metavar="NAME", help="query this filled database, no fill")
    parser.add_argument("--plans", action="store_true", help="print the full plans")
    args = parser.parse_args()

    scratch = ScratchDatabase(args.database_url, args.reuse or BENCH_DATABASE)
    name, bench_url = scratch.name, scratch.url
    if not args.reuse:
        scratch.create()
        engine = db.get_engine(bench_url)
        migrate(engine)
        engine.dispose()
        lanes = PLANTS * LANES_PER_PLANT + CUSTOMERS * args.lanes_per_customer
        print(f"filling {name}: {args.weeks} weeks x {lanes:,} lanes")
        with psycopg.connect(bench_url, autocommit=True) as connection:
            connection.execute("SET maintenance_work_mem = '1GB'")
            # The synthetic ids are consistent by construction: skip the row-by-row
            # foreign key checks where allowed (superuser), which triples the fill speed.
            try:
                connection.execute("SET session_replication_role = replica")
            except psycopg.errors.InsufficientPrivilege:
                print("  (not a superuser: foreign keys are checked, the fill is slower)")
            for label, statement in fill_statements(args.weeks, args.lanes_per_customer):
                start = time.perf_counter()
                connection.execute(statement)
                print(f"  {label}: {time.perf_counter() - start:.1f} s", flush=True)
    try:
        with psycopg.connect(bench_url, autocommit=True) as connection:
            counts = connection.execute(
                "SELECT (SELECT count(*) FROM run_flow), (SELECT count(*) FROM lane_rate), "
                "(SELECT count(*) FROM run_site_price), (SELECT count(*) FROM solve_run), "
                "(SELECT max(code) FROM period)"
            ).fetchone()
            print(
                f"rows: run_flow {counts[0]:,}, lane_rate {counts[1]:,}, run_site_price {counts[2]:,}, "
                f"solve_run {counts[3]:,}"
            )
            week = counts[4]
            worst = 0.0
            for label, query, params in analyst_queries(week):
                ms, rows, plan = explain_ms(connection, query, params)
                worst = max(worst, ms)
                print(f"{ms:9.1f} ms  {rows:>7,} rows  {label}", flush=True)
                if args.plans:
                    print(plan, "\n")
            print(f"slowest view query: {worst:.1f} ms  (target < 1000 ms)")
            print("query plans (the latest run of a week found by index, results read by primary key):")
            check_plans(connection, week)
            ms, rows, _ = explain_ms(connection, WHOLE_WEEK[1], {"week": week})
            print(f"{ms:9.1f} ms  {rows:>7,} rows  {WHOLE_WEEK[0]}")
        engine = db.get_engine(bench_url)
        try:
            for label, call in library_calls(engine, week):
                call()  # warm
                start = time.perf_counter()
                call()
                print(f"{(time.perf_counter() - start) * 1000:9.1f} ms  {label} (wall clock)")
        finally:
            engine.dispose()
    finally:
        if not args.reuse and not args.keep:
            scratch.drop()


if __name__ == "__main__":
    main()
