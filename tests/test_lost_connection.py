"""A planner backend terminated in the middle of a load or of a store.

Another session holds a table lock the planner's transaction must wait for
(``lane`` for a load's new lane identities, ``run_flow`` for a run's flows);
once the planner's backend is seen waiting for it, it is ended with
``pg_terminate_backend``, as an operator or a server restart would. The
command must exit non-zero with a short message and no traceback, and the
database must hold exactly what it held before: a load and a store are each
one transaction.
"""

from __future__ import annotations

import os
import subprocess
import time

import psycopg
import pytest
import sqlalchemy as sa

from planner.database.ingest import load_folder
from tests.helpers import PLANNER

SNAPSHOT_TABLES = (
    "load_batch", "site", "site_version", "period", "period_snapshot", "supply", "demand", "lane", "lane_rate",
)
RESULT_TABLES = ("solve_run", "run_flow", "run_site_price", "run_stock", "run_limit")
WAIT_SECONDS = 60


def libpq(url: str) -> str:
    return sa.make_url(url).set(drivername="postgresql").render_as_string(hide_password=False)


def row_counts(engine: sa.Engine, tables) -> dict[str, int]:
    with engine.connect() as connection:
        return {table: connection.execute(sa.text(f"SELECT count(*) FROM {table}")).scalar_one() for table in tables}


def terminate_when_waiting(url: str, locker: psycopg.Connection, statement: str) -> int:
    """Wait until a backend of the database waits for a lock running ``statement``; end it.

    Returns the pid that was terminated. The lock ``locker`` holds is released
    only afterwards, so the planner never gets past the statement.
    """
    deadline = time.monotonic() + WAIT_SECONDS
    with psycopg.connect(libpq(url), autocommit=True) as admin:
        while time.monotonic() < deadline:
            row = admin.execute(
                "SELECT pid FROM pg_stat_activity WHERE datname = current_database() "
                "AND pid NOT IN (pg_backend_pid(), %s) AND wait_event_type = 'Lock' "
                "AND query ILIKE %s",
                (locker.info.backend_pid, f"%{statement}%"),
            ).fetchone()
            if row is not None:
                assert admin.execute("SELECT pg_terminate_backend(%s)", (row[0],)).fetchone()[0]
                return row[0]
            time.sleep(0.05)
    pytest.fail(f"no planner backend waited on {statement!r} within {WAIT_SECONDS} s")


def run_while_terminated(url: str, args: list[str], table: str, statement: str) -> subprocess.CompletedProcess:
    """Run ``planner ARGS`` while ``table`` is locked; end its backend once it waits at ``statement``."""
    with psycopg.connect(libpq(url)) as locker:
        locker.execute(f"LOCK TABLE {table} IN EXCLUSIVE MODE")
        env = {**os.environ, "PLANNER_DATABASE_URL": url}
        process = subprocess.Popen(
            [*PLANNER, *args], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env
        )
        try:
            terminate_when_waiting(url, locker, statement)
        finally:
            locker.rollback()
        stdout, stderr = process.communicate(timeout=120)
    return subprocess.CompletedProcess(process.args, process.returncode, stdout, stderr)


def test_backend_terminated_during_a_load(database_url, engine, write_folder, network_files) -> None:
    load_folder(engine, write_folder(network_files))
    before = row_counts(engine, SNAPSHOT_TABLES)
    # A changed folder with a new lane: the load copies and inserts everything up to
    # the new site and lane identities, then waits for its lock on ``lane``.
    lanes = network_files["lanes.csv"] + "2026-W41,P1,C2,,7,,\n"
    folder = write_folder({**network_files, "lanes.csv": lanes})

    done = run_while_terminated(database_url, ["load", str(folder)], "lane", "LOCK TABLE site, lane")

    assert done.returncode != 0
    assert "Traceback" not in done.stderr
    assert "connection" in done.stderr and "load" in done.stderr
    assert len(done.stderr.strip().splitlines()) <= 3, done.stderr
    assert row_counts(engine, SNAPSHOT_TABLES) == before
    # The next load of the same folder goes through: nothing was left locked or half-written.
    # (Its batch id is 3: the terminated transaction had drawn 2 from the sequence.)
    assert load_folder(engine, folder).created
    assert row_counts(engine, ("load_batch",))["load_batch"] == 2


def test_backend_terminated_during_a_store(database_url, engine, write_folder, network_files) -> None:
    load_folder(engine, write_folder(network_files))
    before = row_counts(engine, (*SNAPSHOT_TABLES, *RESULT_TABLES))

    done = run_while_terminated(database_url, ["solve", "--period", "2026-W40"], "run_flow", "COPY run_flow")

    assert done.returncode != 0
    assert "Traceback" not in done.stderr
    assert "2026-W40" in done.stderr and "connection" in done.stderr
    assert len(done.stderr.strip().splitlines()) <= 3, done.stderr
    assert row_counts(engine, (*SNAPSHOT_TABLES, *RESULT_TABLES)) == before
    # The week is still to be solved, and solves.
    retry = subprocess.run(
        [*PLANNER, "solve", "--period", "2026-W40"], capture_output=True, text=True, timeout=120,
        env={**os.environ, "PLANNER_DATABASE_URL": database_url},
    )
    assert retry.returncode == 0, retry.stderr
    assert row_counts(engine, ("solve_run",))["solve_run"] == before["solve_run"] + 1


def test_backend_terminated_during_a_resolve_store_leaves_that_week_to_solve(
    database_url, engine, write_folder, network_files
) -> None:
    load_folder(engine, write_folder(network_files))

    done = run_while_terminated(database_url, ["resolve"], "run_flow", "COPY run_flow")

    assert done.returncode != 0
    assert "Traceback" not in done.stderr + done.stdout
    with engine.connect() as connection:
        stored = connection.execute(
            sa.text("SELECT p.code FROM solve_run r JOIN period p ON p.id = r.period_id ORDER BY p.code")
        ).scalars().all()
    # The first week's store was the one ended; the other week went on and was stored.
    assert stored == ["2026-W41"]
    dry = subprocess.run(
        [*PLANNER, "resolve", "--dry-run"], capture_output=True, text=True, timeout=120,
        env={**os.environ, "PLANNER_DATABASE_URL": database_url},
    )
    assert dry.stdout.startswith("2026-W40 would be solved"), dry.stdout
