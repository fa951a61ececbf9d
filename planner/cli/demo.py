"""The ``demo`` command: a fictional network loaded, solved and summarised in one go."""

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
def demo(
    folder: Optional[Path] = typer.Option(None, "--folder", help="Where to write the demo CSVs (default: $PLANNER_HOME/demo)."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Build a fictional network, load it, solve every week, show what moved and what a warehouse closure would do.

    Example: planner demo
    """
    from planner.database import connect
    from planner.runs.demo import run_demo

    try:
        url = connect.database_url(database_url)
        db_engine = engine(url)
        target = folder or (connect.planner_home() / "demo")
        report = run_demo(db_engine, target)
    except PlannerError as err:
        fail(err)
    say(f"demo network written to {report.folder}")
    say(report.load_message)
    weeks = Table("week", "status", "cost", "shortage", "certificate", title="Cost of each week")
    for s in report.runs:
        weeks.add_row(s.period, s.status, money(s.cost), f"{s.shortage or 0:,}", certificate_text(s.certificate_ok))
    console.print(weeks)
    movers = Table("site", "kind", "region", "lowest", "highest", "moved by", title="Ten sites whose price moved most")
    for m in report.movers:
        movers.add_row(m["site"], m["kind"], m["region"] or "", money(m["low"]), money(m["high"]), money(m["moved"]))
    console.print(movers)
    say(
        "open the database with psql:\n  psql " + _psql_target(url)
        + "\nthen for example: SELECT * FROM site_price_history WHERE site = "
        f"'{report.movers[0]['site'] if report.movers else 'C0001'}' ORDER BY period;"
    )
    if report.scenario is not None:
        _print_scenario(db_engine, report)
    if any(not s.ok for s in report.runs):
        raise typer.Exit(1)


def _print_scenario(db_engine, report) -> None:
    """The closure scenario's comparison with its base week, as one short table."""
    from planner.cli.scenarios import comparison_table
    from planner.reports.compare import compare_runs

    done = report.scenario
    say(f"\nscenario {done.scenario!r}: {done.summary.status}, engine {done.engine or '-'}")
    if report.compared is None:
        say(done.summary.message)
        return
    result = compare_runs(db_engine, *report.compared)
    say(result.headline())
    console.print(comparison_table(result, "prices", 5))
    say(f"more: planner compare --scenario '{done.scenario}'   (or --format csv, --section flows)")


def _psql_target(url: str) -> str:
    """A libpq URL for psql, without the password (psql asks for it, or reads ~/.pgpass)."""
    from sqlalchemy.engine import make_url

    # URL.set() treats None as "keep"; URL is a named tuple, so _replace drops it.
    bare = make_url(url)._replace(password=None).set(drivername="postgresql")
    return "'" + bare.render_as_string(hide_password=False) + "'"
