"""Commands for the database and its input: ``init``, ``load``, ``periods``."""

from __future__ import annotations

from pathlib import Path
from typing import Optional

import typer
from rich.table import Table

from planner.cli.common import (
    DATABASE_URL,
    app,
    certificate_text,
    console,
    engine,
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
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Validate and load a folder of CSV files as one load batch.

    Example: planner load seeds/
    """
    from planner.database.ingest import load_folder

    try:
        result = load_folder(engine(database_url), folder)
    except PlannerError as err:
        fail(err)
    say(result.message)


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
