"""``planner load`` of the 500,000-lane benchmark week against a raw COPY of the same files.

The floor: the four CSV files copied as they are (``COPY ... FROM STDIN WITH
(FORMAT csv, HEADER)``) into plain logged tables with the column types the
planner stores (text codes, numeric figures, double coordinates), in one
transaction, measured in the same run. Against it, the whole ``planner load``
process (start-up, reading, every validation, the load's one transaction,
statistics), three times each:

1. a first load into an empty database (every site and lane new),
2. a reload of the same files (a no-op: the same content),
3. a load of the same network with changed rates and volumes (a new batch).

It prints each time, its ratio to the raw COPY (target: within 5 x) and the
peak resident memory of each ``planner load`` process (target: under 1 GiB),
and the machine's load average.

    python benchmarks/bench_load.py [--database-url URL] [--lanes 500000] [--profile DIR]

``--profile DIR`` also records a py-spy flame graph of the first load (py-spy
must be installed). The benchmark creates and drops its own database beside
the one the URL names.
"""

from __future__ import annotations

import argparse
import os
import shutil
import statistics
import tempfile
import time
from pathlib import Path

import psycopg
from process_timing import run_planner  # benchmarks/, the script's own folder
from psycopg import sql
from scratch_database import ScratchDatabase

from planner.contract import FILE_ORDER, LANES
from planner.synthetic.benchmark_network import benchmark_network
from planner.synthetic.frames import write_folder

BENCH_DATABASE = "planner_bench_load"

#: Plain tables of the same column types as the planner's, one per file.
RAW_TABLES = {
    "sites.csv": "site text, kind text, name text, region text, throughput_capacity numeric, handling_cost numeric, "
                 "holding_cost numeric, storage_capacity numeric, x double precision, y double precision",
    "supply.csv": "period text, site text, quantity numeric",
    "demand.csv": "period text, site text, quantity numeric, shortage_penalty numeric",
    "lanes.csv": "period text, origin text, destination text, mode text, unit_cost numeric, capacity numeric, "
                 "min_quantity numeric",
}


def raw_copy(url: str, folder: Path) -> float:
    """Seconds to COPY the four files into fresh plain tables, in one transaction."""
    with psycopg.connect(url) as conn:
        start = time.perf_counter()
        for name in FILE_ORDER:
            table = sql.Identifier("raw_" + name.removesuffix(".csv"))
            conn.execute(sql.SQL("DROP TABLE IF EXISTS {}").format(table))
            conn.execute(sql.SQL("CREATE TABLE {} ({})").format(table, sql.SQL(RAW_TABLES[name])))
            header = (folder / name).open("rb").readline().decode().strip()
            columns = sql.SQL(", ").join(sql.Identifier(c) for c in header.split(","))
            with conn.cursor().copy(
                sql.SQL("COPY {} ({}) FROM STDIN WITH (FORMAT csv, HEADER true)").format(table, columns)
            ) as copy, (folder / name).open("rb") as f:
                while data := f.read(1 << 20):
                    copy.write(data)
        conn.commit()
        return time.perf_counter() - start


def planner_load(url: str, folder: Path, profile: Path | None = None) -> tuple[float, float, str]:
    """Seconds and peak memory (MiB) of a whole ``planner load`` process, and its last output line."""
    wrap = None
    if profile is not None:
        wrap = ["py-spy", "record", "--rate", "200", "--format", "speedscope", "-o", str(profile), "--"]
    seconds, peak, output = run_planner(url, "load", str(folder), wrap=wrap)
    return seconds, peak, output[-1] if output else ""


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__, formatter_class=argparse.RawDescriptionHelpFormatter)
    parser.add_argument("--database-url", default=None)
    parser.add_argument("--lanes", type=int, default=500_000)
    parser.add_argument("--repeat", type=int, default=3)
    parser.add_argument("--profile", type=Path, default=None, help="folder for a py-spy profile of the first load")
    args = parser.parse_args()

    scratch = ScratchDatabase(args.database_url, BENCH_DATABASE)
    bench_url = scratch.url

    work = Path(tempfile.mkdtemp(prefix="bench_load_"))
    try:
        first = write_folder(benchmark_network(n_lanes=args.lanes, seed=1), work / "first")
        same = write_folder(benchmark_network(n_lanes=args.lanes, seed=1), work / "same")
        drifted = benchmark_network(n_lanes=args.lanes, seed=1)
        drifted.lanes["unit_cost"] = (drifted.lanes["unit_cost"] * 1.03).round(2)
        drifted.demand["quantity"] = drifted.demand["quantity"] + 1
        drifted_folder = write_folder(drifted, work / "drifted")
        sizes = ", ".join(f"{name} {(first / name).stat().st_size / 2**20:.0f} MiB" for name in FILE_ORDER)
        lanes = sum(1 for _ in (first / LANES).open()) - 1
        print(f"{lanes:,} lanes; files: {sizes}; load average {os.getloadavg()[0]:.2f}", flush=True)

        results: dict[str, list[float]] = {"raw COPY": [], "first load": [], "reload (no-op)": [],
                                           "load with changed rates": []}
        peaks: dict[str, float] = {}
        last_lines: dict[str, str] = {}
        for attempt in range(args.repeat):
            results["raw COPY"].append(raw_copy(scratch.create(), first))
            run_planner(scratch.create(), "init")
            profile = args.profile / "load.speedscope.json" if args.profile and attempt == 0 else None
            for label, folder in (("first load", first), ("reload (no-op)", same),
                                  ("load with changed rates", drifted_folder)):
                seconds, peak, line = planner_load(bench_url, folder, profile if label == "first load" else None)
                results[label].append(seconds)
                peaks[label] = max(peaks.get(label, 0.0), peak)
                last_lines[label] = line
        floor = statistics.median(results["raw COPY"])
        print(f"{'':28s} {'median':>9s} {'x raw COPY':>11s} {'peak MiB':>9s}")
        for label, times in results.items():
            median = statistics.median(times)
            peak = f"{peaks[label]:9.0f}" if label in peaks else f"{'':9s}"
            print(f"{label:28s} {median:8.2f}s {median / floor:10.1f}x {peak}")
        for label, line in last_lines.items():
            print(f"{label}: {line[:160]}")
        print(f"load average {os.getloadavg()[0]:.2f}")
    finally:
        shutil.rmtree(work, ignore_errors=True)
        scratch.drop()


if __name__ == "__main__":
    main()
