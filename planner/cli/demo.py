"""The ``demo`` command: a fictional network loaded, solved and summarised in one go."""

from __future__ import annotations

import os
from pathlib import Path
from typing import Optional

import typer
from rich.table import Table

from planner.cli.common import (
    DATABASE_URL,
    EXIT_NOT_OPTIMAL,
    app,
    certificate_text,
    console,
    database_target,
    engine,
    money,
    say,
)


@app.command()
def demo(
    folder: Optional[Path] = typer.Option(None, "--folder", metavar="FOLDER", help="Where to write the demo CSVs (default: $PLANNER_HOME/demo)."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Build, load and solve a fictional network; show what moved and what a warehouse closure would do.

    The demo network (plants P01-P03, warehouses W01-W06, customers C01-C60,
    weeks 2026-W45..2026-W52) is written as CSV files, loaded and solved week
    by week. It ends with a scenario: one warehouse closed in the last week,
    compared with that week's plan.

    Example: planner demo
    """
    from planner.database import connect
    from planner.database.settings import currency
    from planner.runs.demo import run_demo

    embedded = not (database_url or os.environ.get(connect.DATABASE_URL_ENV))
    url = database_target(database_url)
    db_engine = engine(url)
    report = run_demo(db_engine, folder or (connect.planner_home() / "demo"))
    code = currency(db_engine)
    say(f"demo network written to {report.folder}")
    say(report.load_message)
    weeks = Table("week", "status", f"cost ({code})", "shortage", "certificate", title="Cost of each week")
    for s in report.runs:
        weeks.add_row(s.period, s.status, money(s.cost), f"{s.shortage or 0:,}", certificate_text(s.certificate_ok))
    console.print(weeks)
    movers = Table("site", "kind", "region", f"lowest price ({code})", f"highest price ({code})", f"moved by ({code})",
                   title="Ten sites whose price moved most")
    for m in report.movers:
        movers.add_row(m["site"], m["kind"], m["region"] or "", money(m["low"]), money(m["high"]), money(m["moved"]))
    console.print(movers)
    if report.scenario is not None:
        _print_scenario(db_engine, report)
    site = report.movers[0]["site"] if report.movers else "C17"
    query = f"SELECT * FROM site_price_history WHERE site = '{site}' ORDER BY period;"
    for line in _next_steps(url, embedded, query):
        say(line)
    if database_url:
        say("(add the same --database-url to each of these commands)")
    if any(not s.ok for s in report.runs):
        raise typer.Exit(EXIT_NOT_OPTIMAL)


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


def _next_steps(url: str, embedded: bool, query: str) -> list[str]:
    """How to look at the demo's database afterwards: commands that work once this one has ended."""
    from planner.database.connect import libpq_url

    steps = [
        "next: planner report --period 2026-W52 --html week52.html, planner explain C17 --period 2026-W52, "
        "planner runs",
        f'look at the tables and views with SQL: planner sql   (then for example {query})',
    ]
    if embedded:
        steps += [
            "the embedded server stops when each planner command ends; to keep it up for psql or a reporting "
            "tool: planner server start (its URL: planner server status; stop it: planner server stop)",
        ]
    else:
        steps.append(f"or with psql directly: psql '{libpq_url(url)}'")
    return steps
