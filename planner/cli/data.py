"""Commands for the database and its input: ``init``, ``load``, ``periods``."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer
from rich.table import Table

from planner.cli.common import (
    COST_DECIMALS,
    DATABASE_URL,
    EXIT_CONNECTION,
    QUANTITY_DECIMALS,
    app,
    certificate_text,
    console,
    engine,
    err_console,
    fail,
    money,
    say,
)
from planner.errors import PlannerError


@app.command()
def init(database_url: Optional[str] = DATABASE_URL) -> None:
    """Create or upgrade the database schema (Alembic migrations).

    Example: planner init
    """
    from planner.database import connect
    from planner.database.migrate import migrate

    try:
        url = connect.database_url(database_url)
        migrate(connect.get_engine(url))
    except PlannerError as err:
        fail(err)
    say(f"schema is up to date on {connect.masked_url(url)}")


@app.command()
def load(
    folder: Path = typer.Argument(..., exists=True, file_okay=False, help="Folder with sites.csv, supply.csv, demand.csv, lanes.csv."),
    allow_empty: bool = typer.Option(False, "--allow-empty", help="Accept a file with a header but no rows."),
    allow_missing_periods: bool = typer.Option(
        False, "--allow-missing-periods", help="Accept a period that has rows in some files but not in all of supply, demand and lanes."
    ),
    cost_decimals: int = COST_DECIMALS,
    quantity_decimals: int = QUANTITY_DECIMALS,
    change_warning: Optional[float] = typer.Option(
        None, "--change-warning", metavar="PERCENT",
        help="Warn when a period's total supply, demand, lanes or capacity moves by more than this (default: $PLANNER_CHANGE_WARNING, else 50).",
    ),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Validate and load a folder of CSV files as one load batch.

    Figures must fit the precision the weeks will be solved with (the same
    --cost-decimals and --quantity-decimals as the solve). The summary says how
    each period's totals move versus its current snapshot.

    Example: planner load seeds/
    """
    import psycopg
    import sqlalchemy as sa

    from planner.database.ingest import LoadOptions, change_warning_percent, load_folder
    from planner.database.snapshot import Scaling

    try:
        options = LoadOptions(
            allow_empty=allow_empty,
            allow_missing_periods=allow_missing_periods,
            scaling=Scaling(cost_decimals, quantity_decimals),
            change_warning=change_warning_percent(change_warning),
        )
        result = load_folder(engine(database_url), folder, options)
    except PlannerError as err:
        fail(err)
    except (psycopg.OperationalError, sa.exc.OperationalError, sa.exc.InterfaceError) as err:
        from planner.database.connect import database_error_cause

        cause = database_error_cause(err)
        fail(PlannerError(
            f"the database connection failed during the load ({cause}); a load is one transaction, "
            "committed whole or not at all: `planner periods` shows the batches now current"
        ), EXIT_CONNECTION)
    say(result.message)
    for warning in result.warnings:
        err_console.print(f"warning: {warning}", markup=False, highlight=False, soft_wrap=True)


@app.command()
def periods(database_url: Optional[str] = DATABASE_URL) -> None:
    """List the loaded periods with their current batch and latest run.

    Example: planner periods
    """
    from planner.runs.weekly import period_overview

    try:
        rows = period_overview(engine(database_url))
    except PlannerError as err:
        fail(err)
    if not rows:
        console.print("no periods loaded yet; load a folder with `planner load DIR`")
        return
    table = Table("period", "batch", "latest run", "status", "cost", "certificate")
    for r in rows:
        table.add_row(
            r["period"], str(r["batch_id"]), str(r["run_id"] or "-"), r["status"] or "not solved",
            money(r["cost"]), certificate_text(r["certificate_ok"]),
        )
    console.print(table)
