"""Locks only the planner can take, and waits for them that end.

A lock the planner itself holds makes a load or a schema upgrade give up after
the lock timeout with a message naming the holder. Every command runs as a
subprocess with a time limit, so a lock that did block fails the test instead
of hanging it.
"""

from __future__ import annotations

import pytest
import sqlalchemy as sa
from alembic import command

from planner.database.locks import LOAD_LOCK, LOCK_TIMEOUT_ENV
from planner.database.migrate import alembic_config, current_revision, head_revision, migrate
from planner.errors import LockTimeout
from tests.helpers import invoke, planner


def hold(conn: sa.Connection, name: str) -> int:
    """Hold the planner lock ``name`` on ``conn`` until it rolls back, as the planner does; its pid."""
    conn.execute(sa.text("INSERT INTO planner_lock (name) VALUES (:name) ON CONFLICT DO NOTHING"), {"name": name})
    conn.commit()
    conn.execute(sa.text("SELECT name FROM planner_lock WHERE name = :name FOR UPDATE"), {"name": name})
    return conn.execute(sa.text("SELECT pg_backend_pid()")).scalar_one()


def batches(engine: sa.Engine) -> int:
    with engine.connect() as conn:
        return conn.execute(sa.text("SELECT count(*) FROM load_batch")).scalar_one()


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
        command.downgrade(alembic_config(conn), "0005")
    monkeypatch.setenv(LOCK_TIMEOUT_ENV, "1")
    with engine.connect() as holder:
        # Another upgrade holds the migrations' lock.
        holder.execute(sa.text("LOCK TABLE alembic_version IN SHARE ROW EXCLUSIVE MODE"))
        with pytest.raises(LockTimeout, match=r"upgrading the schema of .* waited more than 1 s for a lock"):
            migrate(engine)
        holder.rollback()
    with engine.connect() as conn:
        assert current_revision(conn) == "0005"
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
