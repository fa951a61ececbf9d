"""Time ``load_folder`` on one large week of invented data.

The week has 300 plants, 700 warehouses, 50,000 customers and 500,000 lanes
(200,000 plant -> warehouse, 300,000 warehouse -> customer, six warehouses per
customer). Site codes are invented (P0001, W0001, C00001). The script creates a
scratch database on the server named by ``--url`` (default: ``PLANNER_DATABASE_URL``
or the embedded server), migrates it, times a first load (all sites and lanes new)
and a second load of the same sites and lanes with changed rates, and drops the
database again.

Run::

    PYTHONPATH=. /work/venv/bin/python benchmarks/bench_load.py --url postgresql://postgres@127.0.0.1:5432/postgres
"""

from __future__ import annotations

import argparse
import os
import tempfile
import time
from pathlib import Path

import numpy as np
import pandas as pd
import psycopg
from psycopg import sql
from sqlalchemy.engine import make_url

from planner.database.connect import database_url, get_engine, masked_url
from planner.database.ingest import load_folder
from planner.database.migrate import migrate

PLANTS, WAREHOUSES, CUSTOMERS = 300, 700, 50_000
PLANT_LANES, LANES_PER_CUSTOMER = 200_000, 6
WEEK = "2026-W40"


def write_week(folder: Path, rate_seed: int) -> int:
    """Write a random but valid load folder; return its number of lanes.

    The sites and lanes are always the same; quantities and rates depend on ``rate_seed``.
    """
    structure = np.random.default_rng(0)
    rng = np.random.default_rng(rate_seed)
    plants = np.char.add("P", np.char.zfill(np.arange(1, PLANTS + 1).astype(str), 4))
    warehouses = np.char.add("W", np.char.zfill(np.arange(1, WAREHOUSES + 1).astype(str), 4))
    customers = np.char.add("C", np.char.zfill(np.arange(1, CUSTOMERS + 1).astype(str), 5))

    kinds = ["plant"] * PLANTS + ["warehouse"] * WAREHOUSES + ["customer"] * CUSTOMERS
    codes = np.concatenate([plants, warehouses, customers])
    regions = structure.choice(["north", "south"], len(codes))
    sites = pd.DataFrame({"site": codes, "kind": kinds, "region": regions})
    throughput = np.full(len(codes), "", dtype=object)
    throughput[PLANTS : PLANTS + WAREHOUSES] = structure.integers(5_000, 50_000, WAREHOUSES).astype(
        str
    )
    sites["throughput_capacity"] = throughput
    sites.to_csv(folder / "sites.csv", index=False)

    pd.DataFrame(
        {"period": WEEK, "site": plants, "quantity": rng.integers(5_000, 20_000, PLANTS)}
    ).to_csv(folder / "supply.csv", index=False)
    pd.DataFrame(
        {
            "period": WEEK,
            "site": customers,
            "quantity": rng.integers(1, 60, CUSTOMERS),
            "shortage_penalty": (rng.integers(5_000, 9_000, CUSTOMERS) / 100).round(2),
        }
    ).to_csv(folder / "demand.csv", index=False)

    # Distinct plant -> warehouse pairs: a sample of the flattened pair grid.
    pairs = structure.permutation(PLANTS * WAREHOUSES)[:PLANT_LANES]
    plant_lanes = pd.DataFrame(
        {"origin": plants[pairs // WAREHOUSES], "destination": warehouses[pairs % WAREHOUSES]}
    )
    # Six distinct warehouses per customer: a random start plus fixed strides below 700.
    start = structure.integers(0, WAREHOUSES, CUSTOMERS)
    picks = (start[:, None] + np.arange(LANES_PER_CUSTOMER) * 117) % WAREHOUSES
    customer_lanes = pd.DataFrame(
        {
            "origin": warehouses[picks.ravel()],
            "destination": np.repeat(customers, LANES_PER_CUSTOMER),
        }
    )
    lanes = pd.concat([plant_lanes, customer_lanes], ignore_index=True)
    lanes.insert(0, "period", WEEK)
    lanes["mode"] = "road"
    lanes["unit_cost"] = (rng.integers(10, 5_000, len(lanes)) / 100).round(2)
    capacity = rng.integers(100, 2_000, len(lanes)).astype(str)
    capacity[rng.random(len(lanes)) < 0.5] = ""
    lanes["capacity"] = capacity
    lanes["min_quantity"] = ""
    lanes.to_csv(folder / "lanes.csv", index=False)
    return len(lanes)


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument(
        "--url", help="server to use (any database on it); default PLANNER_DATABASE_URL or embedded"
    )
    arguments = parser.parse_args()

    server = make_url(database_url(arguments.url))
    scratch = f"planner_bench_{os.getpid()}"
    admin = server.set(drivername="postgresql").render_as_string(hide_password=False)
    with psycopg.connect(admin, autocommit=True) as connection:
        connection.execute(sql.SQL("CREATE DATABASE {}").format(sql.Identifier(scratch)))
    engine = get_engine(server.set(database=scratch).render_as_string(hide_password=False))
    print(f"server {masked_url(server)}, scratch database {scratch}")
    try:
        migrate(engine)
        with tempfile.TemporaryDirectory() as first, tempfile.TemporaryDirectory() as second:
            lane_count = write_week(Path(first), rate_seed=1)
            write_week(Path(second), rate_seed=2)
            runs = (
                ("first load (new sites and lanes)", first),
                ("second load (new rates)", second),
            )
            for label, folder in runs:
                started = time.perf_counter()
                result = load_folder(engine, folder)
                seconds = time.perf_counter() - started
                print(f"{label}: {seconds:.1f} s for {lane_count:,} lanes -- {result.message}")
    finally:
        engine.dispose()
        with psycopg.connect(admin, autocommit=True) as connection:
            connection.execute(
                sql.SQL("DROP DATABASE {} WITH (FORCE)").format(sql.Identifier(scratch))
            )


if __name__ == "__main__":
    main()
