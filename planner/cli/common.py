"""What every command shares: the Typer app, the consoles, common options, errors.

Exit codes: 0 success, 1 a run did not end optimal, 2 bad input or usage,
3 the database connection failed or was lost midway (a load or a run's store
is one transaction: it was committed whole or not at all), 4 another session
held a lock the command needed for longer than the lock timeout
(``PLANNER_LOCK_TIMEOUT``); what the lock guards was not done.
"""

from __future__ import annotations

import sys
from typing import Optional

import typer
from rich.console import Console
from rich.text import Text

app = typer.Typer(
    help="Weekly network flow plans and site shadow prices, stored in PostgreSQL.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
)
# Piped output (cron logs, scripts) gets a fixed width wide enough for the tables.
console = Console(width=None if sys.stdout.isatty() else 132)
err_console = Console(stderr=True, width=None if sys.stderr.isatty() else 132)

DB_HELP = "PostgreSQL URL (default: $PLANNER_DATABASE_URL, else the embedded server)."
DATABASE_URL = typer.Option(None, "--database-url", help=DB_HELP)
COST_DECIMALS = typer.Option(4, "--cost-decimals", min=0, max=12, help="Decimal places kept for unit costs.")
#: Exit code of a command whose database connection failed or was lost midway.
EXIT_CONNECTION = 3
#: Exit code of a command that gave up waiting for a lock another session held.
EXIT_LOCKED = 4
QUANTITY_DECIMALS = typer.Option(0, "--quantity-decimals", min=0, max=6, help="Decimal places kept for quantities.")


def engine(database_url: Optional[str]):
    """A SQLAlchemy engine on the chosen database, its schema migrated."""
    from planner.database import connect
    from planner.database.locks import lock_timeout
    from planner.database.migrate import ensure_schema

    lock_timeout()  # a bad PLANNER_LOCK_TIMEOUT is refused before any work starts
    db_engine = connect.get_engine(connect.database_url(database_url))
    ensure_schema(db_engine)
    return db_engine


def fail(err: Exception, code: int | None = None) -> None:
    """Print ``err`` as one message (never read as markup: it quotes user data) and exit.

    The code is ``code`` if given, else :data:`EXIT_LOCKED` for a lock that was
    held too long and 2 for anything else.
    """
    from planner.errors import LockTimeout

    if code is None:
        code = EXIT_LOCKED if isinstance(err, LockTimeout) else 2
    err_console.print(Text.assemble(("error: ", "bold red"), str(err)), highlight=False, soft_wrap=True)
    raise typer.Exit(code)


def say(message: str) -> None:
    """Print a plain line of text (user data inside is never read as markup)."""
    console.print(message, markup=False, highlight=False, soft_wrap=True)


def money(value) -> str:
    return "-" if value is None else f"{value:,.2f}"


def certificate_text(ok) -> str:
    from planner.runs.weekly import certificate_word

    return certificate_word(ok)
