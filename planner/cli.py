"""The ``planner`` command line: thin wrappers over the library.

Each command parses its options, calls one library function and prints the
result with rich. Exit codes: 0 success, 1 a run did not end optimal,
2 bad input or usage.
"""

from __future__ import annotations

import sys
from pathlib import Path
from typing import Optional

import typer
from rich.console import Console
from rich.table import Column, Table
from rich.text import Text

from planner.errors import PlannerError

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
COST_DECIMALS = typer.Option(4, "--cost-decimals", min=0, max=12, help="Decimal places kept for unit costs.")
QUANTITY_DECIMALS = typer.Option(0, "--quantity-decimals", min=0, max=6, help="Decimal places kept for quantities.")


def _engine(database_url: Optional[str]):
    from planner import db

    engine = db.get_engine(db.database_url(database_url))
    db.ensure_schema(engine)
    return engine


def _fail(err: Exception, code: int = 2) -> None:
    # Messages quote user data (codes, values), so they are never read as markup.
    err_console.print(Text.assemble(("error: ", "bold red"), str(err)), highlight=False, soft_wrap=True)
    raise typer.Exit(code)


@app.command()
def init(database_url: Optional[str] = typer.Option(None, "--database-url", help=DB_HELP)) -> None:
    """Create or upgrade the database schema (Alembic migrations).

    Example: planner init
    """
    from planner import db

    try:
        url = db.database_url(database_url)
        db.migrate(db.get_engine(url))
    except PlannerError as err:
        _fail(err)
    console.print(f"schema is up to date on {db.masked_url(url)}", markup=False, highlight=False)


@app.command()
def load(
    folder: Path = typer.Argument(..., exists=True, file_okay=False, help="Folder with sites.csv, supply.csv, demand.csv, lanes.csv."),
    database_url: Optional[str] = typer.Option(None, "--database-url", help=DB_HELP),
) -> None:
    """Validate and load a folder of CSV files as one load batch.

    Example: planner load seeds/
    """
    from planner.ingest import load_folder

    try:
        result = load_folder(_engine(database_url), folder)
    except PlannerError as err:
        _fail(err)
    console.print(result.message, markup=False, highlight=False, soft_wrap=True)


@app.command()
def periods(database_url: Optional[str] = typer.Option(None, "--database-url", help=DB_HELP)) -> None:
    """List the loaded periods with their current batch and latest run.

    Example: planner periods
    """
    from planner.runs import period_overview

    rows = period_overview(_engine(database_url))
    if not rows:
        console.print("no periods loaded yet; load a folder with `planner load DIR`")
        return
    table = Table("period", "batch", "latest run", "status", "cost", "certificate")
    for r in rows:
        table.add_row(
            r["period"], str(r["batch_id"]), str(r["run_id"] or "-"), r["status"] or "not solved",
            _money(r["cost"]), _cert(r["certificate_ok"]),
        )
    console.print(table)


def _money(value) -> str:
    return "-" if value is None else f"{value:,.2f}"


def _cert(ok) -> str:
    from planner.runs import certificate_word

    return certificate_word(ok)


@app.command()
def solve(
    period: Optional[str] = typer.Option(None, "--period", "-p", help="ISO week to solve, e.g. 2026-W49."),
    all_periods: bool = typer.Option(False, "--all", help="Solve every loaded week."),
    first: Optional[str] = typer.Option(None, "--from", help="First ISO week of a range."),
    last: Optional[str] = typer.Option(None, "--to", help="Last ISO week of a range."),
    horizon: Optional[str] = typer.Option(None, "--horizon", help="Solve A..B as one linked horizon with stock, e.g. 2026-W40..2026-W52."),
    workers: Optional[int] = typer.Option(None, "--workers", min=1, help="Worker processes for several weeks (default: CPU cores)."),
    cost_decimals: int = COST_DECIMALS,
    quantity_decimals: int = QUANTITY_DECIMALS,
    database_url: Optional[str] = typer.Option(None, "--database-url", help=DB_HELP),
) -> None:
    """Solve weeks (or a linked horizon) and store flows, prices, ranges and certificates.

    Example: planner solve --period 2026-W49
    """
    from planner import db
    from planner.periods import parse_week_span
    from planner.runs import select_periods, solve_horizon
    from planner.schedule import solve_many
    from planner.snapshot import Scaling

    try:
        url = db.database_url(database_url)
        engine = _engine(url)
        scaling = Scaling(cost_decimals, quantity_decimals)
        if horizon is not None:
            if period or all_periods or first or last:
                raise PlannerError("--horizon cannot be combined with --period, --all, --from or --to")
            summary = solve_horizon(engine, parse_week_span(horizon), scaling)
            _summary_table([summary], title="Linked horizon")
            if summary.message:
                err_console.print(summary.message, markup=False, highlight=False, soft_wrap=True)
            raise typer.Exit(0 if summary.ok else 1)
        chosen = select_periods(engine, period=period, all_periods=all_periods, first=first, last=last)
    except (PlannerError, ValueError) as err:
        _fail(err)
    from rich.progress import BarColumn, MofNCompleteColumn, Progress, TextColumn, TimeElapsedColumn

    with Progress(
        TextColumn("solving"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
        console=err_console, disable=len(chosen) < 2,
    ) as progress:
        task = progress.add_task("weeks", total=len(chosen))
        outcomes = solve_many(
            url, chosen, scaling, workers=workers, on_done=lambda _o: progress.advance(task)
        )
    summaries = [o.summary for o in outcomes if o.summary is not None]
    _summary_table(summaries, title=None)
    for o in outcomes:
        message = o.note if o.summary is None else o.summary.message
        if message:
            err_console.print(f"{o.period}: {message}", markup=False, highlight=False, soft_wrap=True)
    if any(not o.ok for o in outcomes):
        raise typer.Exit(1)


def _summary_table(summaries, title) -> None:
    table = Table("run", "status", "cost", "shortage", "certificate", "seconds", title=title)
    table.columns.insert(0, Column("period", no_wrap=True))
    for s in summaries:
        table.add_row(
            s.period, str(s.run_id), s.status, _money(s.cost),
            "-" if s.shortage is None else f"{s.shortage:,}",
            _cert(s.certificate_ok), f"{s.seconds['total']:.2f}",
        )
    console.print(table)


@app.command()
def resolve(
    dry_run: bool = typer.Option(False, "--dry-run", help="List the weeks that would be solved, solve nothing."),
    cost_decimals: int = COST_DECIMALS,
    quantity_decimals: int = QUANTITY_DECIMALS,
    database_url: Optional[str] = typer.Option(None, "--database-url", help=DB_HELP),
) -> None:
    """Solve exactly the weeks whose input changed since their latest optimal run (for cron).

    Safe to run from several processes or machines at once: a week is never
    solved twice. One log line per week; exit 1 if any week solved ended non-optimal.

    Example: planner resolve --dry-run
    """
    from planner.schedule import resolve as resolve_weeks
    from planner.schedule import stale_periods
    from planner.snapshot import Scaling

    try:
        engine = _engine(database_url)
        scaling = Scaling(cost_decimals, quantity_decimals)
        if dry_run:
            stale = stale_periods(engine, scaling)
            for code, why in stale:
                print(f"{code} would be solved: {why}")
            if not stale:
                print("nothing to solve: every loaded week is up to date")
            return
        outcomes = resolve_weeks(engine, scaling, log=lambda line: print(line, flush=True))
    except PlannerError as err:
        _fail(err)
    if any(not o.ok for o in outcomes):
        raise typer.Exit(1)


@app.command()
def certificate(
    period: Optional[str] = typer.Option(None, "--period", "-p", help="Latest run of this ISO week."),
    run_id: Optional[int] = typer.Option(None, "--run", help="A run id."),
    database_url: Optional[str] = typer.Option(None, "--database-url", help=DB_HELP),
) -> None:
    """Show a run's optimality certificate.

    Example: planner certificate --period 2026-W49
    """
    from planner.runs import run_certificate

    try:
        cert = run_certificate(_engine(database_url), period=period, run_id=run_id)
    except PlannerError as err:
        _fail(err)
    table = Table("check", "value", show_header=True)
    for label, value in cert.items():
        table.add_row(label, "-" if value is None else str(value))
    console.print(table)
    if cert["certificate"] != "exact":
        raise typer.Exit(1)


@app.command()
def explain(
    site: str = typer.Argument(..., help="Site code."),
    period: str = typer.Option(..., "--period", "-p", help="ISO week."),
    run_id: Optional[int] = typer.Option(None, "--run", help="A run id (default: latest optimal run)."),
    database_url: Optional[str] = typer.Option(None, "--database-url", help=DB_HELP),
) -> None:
    """Show the chain of lanes the marginal unit to SITE travels, with the running cost.

    Example: planner explain C017 --period 2026-W49
    """
    from planner.explain import explain_site

    try:
        explanation = explain_site(_engine(database_url), site, period, run_id=run_id)
    except PlannerError as err:
        _fail(err)
    console.print(explanation.text(), markup=False, highlight=False, soft_wrap=True)
    if explanation.steps:
        table = Table("step", "unit cost", "running")
        for step in explanation.steps:
            if step.kind == "spare":
                what = f"spare supply of {step.label}"
            else:
                what = step.label if step.forward else f"one unit less: {step.label}"
            table.add_row(f"{step.kind}: {what}", f"{step.unit_cost:,.4f}", f"{step.running:,.4f}")
        console.print(table)


@app.command()
def demo(
    folder: Optional[Path] = typer.Option(None, "--folder", help="Where to write the demo CSVs (default: $PLANNER_HOME/demo)."),
    database_url: Optional[str] = typer.Option(None, "--database-url", help=DB_HELP),
) -> None:
    """Build a fictional network, load it, solve every week and show what moved.

    Example: planner demo
    """
    from planner import db
    from planner.demo import run_demo

    try:
        url = db.database_url(database_url)
        engine = _engine(url)
        target = folder or (db.planner_home() / "demo")
        report = run_demo(engine, target)
    except PlannerError as err:
        _fail(err)
    console.print(f"demo network written to {report.folder}", markup=False, highlight=False, soft_wrap=True)
    console.print(report.load_message, markup=False, highlight=False, soft_wrap=True)
    weeks = Table("week", "status", "cost", "shortage", "certificate", title="Cost of each week")
    for s in report.runs:
        weeks.add_row(s.period, s.status, _money(s.cost), f"{s.shortage or 0:,}", _cert(s.certificate_ok))
    console.print(weeks)
    movers = Table("site", "kind", "region", "lowest", "highest", "moved by", title="Ten sites whose price moved most")
    for m in report.movers:
        movers.add_row(m["site"], m["kind"], m["region"] or "", _money(m["low"]), _money(m["high"]), _money(m["moved"]))
    console.print(movers)
    console.print(
        "open the database with psql:\n  psql " + _psql_target(url) +
        "\nthen for example: SELECT * FROM site_price_history WHERE site = "
        f"'{report.movers[0]['site'] if report.movers else 'C0001'}' ORDER BY period;",
        markup=False, highlight=False, soft_wrap=True,
    )
    if any(not s.ok for s in report.runs):
        raise typer.Exit(1)


def _psql_target(url: str) -> str:
    """A libpq URL for psql, without the password (psql asks for it, or reads ~/.pgpass)."""
    from sqlalchemy.engine import make_url

    # URL.set() treats None as "keep"; URL is a named tuple, so _replace drops it.
    bare = make_url(url)._replace(password=None).set(drivername="postgresql")
    return "'" + bare.render_as_string(hide_password=False) + "'"


def _register_report_commands() -> None:
    # The reporting commands live in their own module (planner.cli_report).
    from planner import cli_report

    cli_report.register(app, console=console, err_console=err_console, engine=_engine, fail=_fail)


_register_report_commands()

if __name__ == "__main__":
    app()
