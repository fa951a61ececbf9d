"""Commands for the database and its input: ``init``, ``load``, ``periods``."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer
from rich.table import Table

from planner.cli.common import (
    COST_DECIMALS,
    DATABASE_URL,
    QUANTITY_DECIMALS,
    app,
    certificate_text,
    console,
    database_target,
    engine,
    err_console,
    money,
    say,
    shown_url,
)


@app.command()
def init(database_url: Optional[str] = DATABASE_URL) -> None:
    """Create or upgrade the database schema (Alembic migrations).

    Example: planner init
    """
    from planner.database import connect
    from planner.database.migrate import current_revision, head_revision, migrate

    url = database_target(database_url)
    db_engine = connect.get_engine(url)
    with db_engine.connect() as conn:
        before = current_revision(conn)
    migrate(db_engine)
    where = shown_url(url)
    head = head_revision()
    if before is None:
        say(f"created the schema (revision {head}) on {where}")
    elif before == head:
        say(f"schema already up to date (revision {head}) on {where}")
    else:
        say(f"upgraded the schema from revision {before} to {head} on {where}")


@app.command()
def currency(
    code: Optional[str] = typer.Argument(None, metavar="CODE", help="ISO 4217 code to set, e.g. EUR (default: show the current one)."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Show or set the currency of money figures (ISO 4217).

    One currency per database. Until it is set it is XXX, ISO 4217's code for "no currency". Setting it
    names the currency of the figures; nothing is converted.

    Example: planner currency EUR
    """
    from planner.database.settings import DEFAULT_CURRENCY, set_currency
    from planner.database.settings import currency as current

    db_engine = engine(database_url)
    if code is None:
        shown = current(db_engine)
        hint = "; set it with `planner currency CODE`, e.g. planner currency EUR" if shown == DEFAULT_CURRENCY else ""
        say(f"currency: {shown}{hint}")
        return
    say(f"currency set to {set_currency(db_engine, code)}")


@app.command()
def load(
    folder: Path = typer.Argument(
        ..., exists=True, file_okay=False, metavar="FOLDER",
        help="Folder with sites.csv, supply.csv, demand.csv and lanes.csv.",
    ),
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
    from planner.database.ingest import LoadOptions, change_warning_percent, load_folder
    from planner.database.snapshot import Scaling

    options = LoadOptions(
        allow_empty=allow_empty,
        allow_missing_periods=allow_missing_periods,
        scaling=Scaling(cost_decimals, quantity_decimals),
        change_warning=change_warning_percent(change_warning),
    )
    # A connection lost during the load is reported like for every command
    # (exit 3); the load is one transaction, so nothing of it was written.
    result = load_folder(engine(database_url), folder, options)
    say(result.message)
    for warning in result.warnings:
        err_console.print(f"warning: {warning}", markup=False, highlight=False, soft_wrap=True)


@app.command()
def periods(database_url: Optional[str] = DATABASE_URL) -> None:
    """List loaded weeks with their current batch and latest run.

    Example: planner periods
    """
    from planner.database.settings import currency
    from planner.runs.weekly import period_overview

    db_engine = engine(database_url)
    rows = period_overview(db_engine)
    if not rows:
        console.print("no periods loaded yet; load a folder with `planner load DIR`")
        return
    table = Table("period", "batch", "latest run", "status", f"cost ({currency(db_engine)})", "certificate")
    for r in rows:
        table.add_row(
            r["period"], str(r["batch_id"]), str(r["run_id"] or "-"), r["status"] or "not solved",
            money(r["cost"]), certificate_text(r["certificate_ok"]),
        )
    console.print(table)
