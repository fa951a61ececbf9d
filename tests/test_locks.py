"""Locks only the planner can take, and waits for them that end.

A login with nothing but the reporting role's rights tries every lock the
planner takes or ever took (the advisory keys of earlier versions, which any
role may take, and the rows of ``planner_lock``), holds what it gets, and the
planner still upgrades, loads, solves and re-solves. A lock the planner itself
holds makes a load or a schema upgrade give up after the lock timeout with a
message naming the holder. Every command runs as a subprocess with a time
limit, so a lock that did block fails the test instead of hanging it.
"""

from __future__ import annotations

import itertools
import os
from collections.abc import Iterator

import psycopg
import pytest
import sqlalchemy as sa
from alembic import command

from planner.database.locks import LOAD_LOCK, LOCK_TIMEOUT_ENV
from planner.database.migrate import alembic_config, current_revision, head_revision, migrate
from planner.errors import LockTimeout
from tests.helpers import invoke, planner

READER_ROLE = "planner_reader"
#: Advisory lock keys earlier planner versions used; any role that may connect can take them.
OLD_WEEK_NAMESPACE = 0x504C414E
OLD_LOAD_KEY = 0x706C616E6C6F6164
#: Still serialises the first upgrade of an empty database (which has no table to lock).
FIRST_MIGRATION_KEY = 0x706C616E6E6572
#: Statements that would lock, fill or read the lock table, or lock the migrations' table.
LOCKING_STATEMENTS = (
    "SELECT name FROM planner_lock",
    "SELECT name FROM planner_lock FOR UPDATE",
    "SELECT name FROM planner_lock FOR KEY SHARE SKIP LOCKED",
    "INSERT INTO planner_lock (name) VALUES ('week 2026-W41')",
    "UPDATE planner_lock SET name = name",
    "DELETE FROM planner_lock",
    "TRUNCATE planner_lock",
    "LOCK TABLE planner_lock IN ACCESS SHARE MODE",
    "LOCK TABLE planner_lock IN ACCESS EXCLUSIVE MODE",
    "LOCK TABLE alembic_version IN SHARE ROW EXCLUSIVE MODE",
    "SELECT version_num FROM alembic_version FOR UPDATE",
)
_logins = itertools.count()


def libpq(url: sa.URL | str) -> str:
    return sa.make_url(url).set(drivername="postgresql").render_as_string(hide_password=False)


@pytest.fixture
def reader_login(engine: sa.Engine, database_url: str) -> Iterator[str]:
    """URL of a new LOGIN role whose only rights are the reporting role's."""
    name = f"report_login_{os.getpid()}_{next(_logins)}"
    with engine.begin() as conn:
        conn.execute(sa.text(f"CREATE ROLE {name} LOGIN PASSWORD 'report' IN ROLE {READER_ROLE}"))
    yield libpq(sa.make_url(database_url).set(username=name, password="report"))
    with engine.begin() as conn:
        conn.execute(sa.text(f"DROP ROLE {name}"))


def hold(conn: sa.Connection, name: str) -> int:
    """Hold the planner lock ``name`` on ``conn`` until it rolls back, as the planner does; its pid."""
    conn.execute(sa.text("INSERT INTO planner_lock (name) VALUES (:name) ON CONFLICT DO NOTHING"), {"name": name})
    conn.commit()
    conn.execute(sa.text("SELECT name FROM planner_lock WHERE name = :name FOR UPDATE"), {"name": name})
    return conn.execute(sa.text("SELECT pg_backend_pid()")).scalar_one()


def week_runs(engine: sa.Engine) -> list[tuple[str, str]]:
    with engine.connect() as conn:
        return [
            tuple(row)
            for row in conn.execute(
                sa.text(
                    "SELECT p.code, r.status FROM solve_run r JOIN period p ON p.id = r.period_id "
                    "WHERE r.kind = 'week' ORDER BY r.id"
                )
            )
        ]


def batches(engine: sa.Engine) -> int:
    with engine.connect() as conn:
        return conn.execute(sa.text("SELECT count(*) FROM load_batch")).scalar_one()


def test_a_reporting_login_cannot_take_the_planner_locks_and_blocks_nothing(
    engine: sa.Engine, write_folder, network_files, reader_login: str, monkeypatch
) -> None:
    monkeypatch.setenv(LOCK_TIMEOUT_ENV, "5")
    assert invoke("load", str(write_folder(network_files))).exit_code == 0
    with engine.connect() as conn:
        period_ids = conn.execute(sa.text("SELECT id FROM period ORDER BY id")).scalars().all()
    with psycopg.connect(reader_login, autocommit=True) as reader, psycopg.connect(reader_login) as reading:
        assert reader.execute(f"SELECT pg_has_role('{READER_ROLE}', 'MEMBER')").fetchone() == (True,)
        # Any role may take advisory locks: the reader takes every key the planner ever used.
        for period_id in period_ids:
            reader.execute("SELECT pg_advisory_lock(%s, %s)", [OLD_WEEK_NAMESPACE, period_id])
        reader.execute("SELECT pg_advisory_lock(%s)", [OLD_LOAD_KEY])
        reader.execute("SELECT pg_advisory_lock(%s)", [FIRST_MIGRATION_KEY])
        # The planner's own locks are out of its reach.
        for statement in LOCKING_STATEMENTS:
            with pytest.raises(psycopg.errors.InsufficientPrivilege), reader.transaction():
                reader.execute(statement)
        granted = reader.execute(
            "SELECT privilege FROM unnest(ARRAY['SELECT', 'INSERT', 'UPDATE', 'DELETE', 'TRUNCATE', "
            "'REFERENCES', 'TRIGGER']) AS privilege WHERE has_table_privilege('planner_lock', privilege)"
        ).fetchall()
        assert granted == []
        # The planner upgrades the schema past the lock table's migration while
        # the reader holds every advisory key, without waiting.
        with engine.begin() as conn:
            command.downgrade(alembic_config(conn), "0006")
        init = planner("init", timeout=60)
        assert init.returncode == 0, init.stderr
        # A report left open in a transaction holds its tables' read locks throughout
        # (an upgrade that replaces views, as 0009 does, would wait for it; loads,
        # solves and re-solves do not).
        assert reading.execute("SELECT count(*) FROM site_price_history").fetchone() is not None

        # The planner loads, solves and re-solves meanwhile, none of it waiting.
        changed = dict(network_files)
        changed["demand.csv"] = changed["demand.csv"].replace("2026-W41,C1,35,90", "2026-W41,C1,36,90")
        loaded = planner("load", str(write_folder(changed)), timeout=60)
        assert loaded.returncode == 0, loaded.stderr
        solved = planner("solve", "--period", "2026-W40", timeout=60)
        assert solved.returncode == 0, solved.stderr
        resolved = planner("resolve", timeout=60)
        assert resolved.returncode == 0, resolved.stderr
        assert resolved.stdout.splitlines()[-1] == "resolve: 1 solved, 1 unchanged"
        reading.rollback()
    with engine.connect() as conn:
        assert current_revision(conn) == head_revision()
    assert batches(engine) == 2
    assert week_runs(engine) == [("2026-W40", "optimal"), ("2026-W41", "optimal")]


def test_a_load_gives_up_after_the_lock_timeout_naming_the_load_that_holds_the_lock(
    engine: sa.Engine, write_folder, network_files, monkeypatch
) -> None:
    monkeypatch.setenv(LOCK_TIMEOUT_ENV, "1.5")
    folder = write_folder(network_files)
    with engine.connect() as holder:
        holder_pid = hold(holder, LOAD_LOCK)
        waited = planner("load", str(folder), timeout=60)
        holder.rollback()
    assert waited.returncode == 4, waited.stderr
    message = " ".join(waited.stderr.split())
    assert f"error: loading: locked by another session (pid {holder_pid}, user " in message
    assert "which did not release it within 1.5 s; let that load finish and load again, " in message
    assert "or set PLANNER_LOCK_TIMEOUT to wait longer" in message
    assert "Traceback" not in waited.stderr
    assert batches(engine) == 0
    loaded = invoke("load", str(folder))
    assert loaded.exit_code == 0, loaded.output
    assert batches(engine) == 1


def test_a_schema_upgrade_gives_up_after_the_lock_timeout(engine: sa.Engine, monkeypatch) -> None:
    with engine.begin() as conn:
        command.downgrade(alembic_config(conn), "0006")
    monkeypatch.setenv(LOCK_TIMEOUT_ENV, "1")
    with engine.connect() as holder:
        # Another upgrade holds the migrations' lock.
        holder.execute(sa.text("LOCK TABLE alembic_version IN SHARE ROW EXCLUSIVE MODE"))
        with pytest.raises(LockTimeout, match=r"upgrading the schema of .* waited more than 1 s for a lock"):
            migrate(engine)
        holder.rollback()
    with engine.connect() as conn:
        assert current_revision(conn) == "0006"
    migrate(engine)
    with engine.connect() as conn:
        assert current_revision(conn) == head_revision()


@pytest.mark.parametrize("setting", ["soon", "0", "-3", "nan"])
def test_a_lock_timeout_that_is_not_a_positive_number_is_refused(setting: str, monkeypatch) -> None:
    monkeypatch.setenv(LOCK_TIMEOUT_ENV, setting)
    result = invoke("periods")
    assert result.exit_code == 2
    assert f"PLANNER_LOCK_TIMEOUT must be a positive number of seconds, not {setting!r}" in " ".join(
        result.stderr.split()
    )
