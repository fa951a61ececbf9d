"""Commands that solve weeks and look at the runs: ``solve``, ``resolve``, ``runs``, ``certificate``."""

from __future__ import annotations

from enum import Enum
from typing import Optional

import typer
from rich.table import Column, Table

from planner.cli.common import (
    COST_DECIMALS,
    DATABASE_URL,
    EXIT_DATABASE,
    EXIT_LOCKED,
    EXIT_NOT_OPTIMAL,
    QUANTITY_DECIMALS,
    app,
    certificate_text,
    connection_failure,
    console,
    database_target,
    engine,
    err_console,
    money,
    say,
)
from planner.errors import PlannerError

#: Every way ``planner solve`` can be told what to solve.
SOLVE_MODES = "--period WEEK, --all, --from WEEK/--to WEEK, or --horizon FIRST..LAST"


@app.command()
def solve(
    period: Optional[str] = typer.Option(None, "--period", "-p", metavar="WEEK", help="ISO week to solve, e.g. 2026-W49."),
    all_periods: bool = typer.Option(False, "--all", help="Solve every loaded week."),
    first: Optional[str] = typer.Option(None, "--from", metavar="WEEK", help="First ISO week of a range."),
    last: Optional[str] = typer.Option(None, "--to", metavar="WEEK", help="Last ISO week of a range."),
    horizon: Optional[str] = typer.Option(None, "--horizon", metavar="FIRST..LAST", help="Solve these weeks as one linked horizon with stock, e.g. 2026-W45..2026-W52."),
    workers: Optional[int] = typer.Option(None, "--workers", min=1, metavar="N", help="Worker processes for several weeks (default: CPU cores)."),
    warm: bool = typer.Option(False, "--warm", help="Start each week warm from the week solved before it (kept only when certified)."),
    cost_decimals: int = COST_DECIMALS,
    quantity_decimals: int = QUANTITY_DECIMALS,
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Solve weeks or a linked horizon; store flows and prices.

    Stores flows, prices with their ranges and a certificate per run. Choose one of --period WEEK, --all, --from WEEK/--to WEEK or --horizon FIRST..LAST.

    Example: planner solve --period 2026-W49
    """
    from planner.database.settings import currency
    from planner.database.snapshot import Scaling
    from planner.periods import parse_week_span
    from planner.runs.horizon import solve_horizon
    from planner.runs.weekly import select_periods

    chosen_modes = sum([period is not None, all_periods, first is not None or last is not None, horizon is not None])
    if chosen_modes != 1:
        raise PlannerError(f"choose exactly one of {SOLVE_MODES}")
    try:
        url = database_target(database_url)
        db_engine = engine(url)
        scaling = Scaling(cost_decimals, quantity_decimals)
        if horizon is not None:
            summary = solve_horizon(db_engine, parse_week_span(horizon), scaling)
            _summary_table([summary], title="Linked horizon", code=currency(db_engine))
            if summary.message:
                err_console.print(summary.message, markup=False, highlight=False, soft_wrap=True)
            raise typer.Exit(0 if summary.ok else EXIT_NOT_OPTIMAL)
        chosen = select_periods(db_engine, period=period, all_periods=all_periods, first=first, last=last)
    except ValueError as err:
        raise PlannerError(str(err)) from err
    _solve_weeks(url, chosen, scaling, workers, currency(db_engine), warm=warm)


def _solve_weeks(url: str, chosen: list[str], scaling, workers: Optional[int], code: str, *, warm: bool = False) -> None:
    """Solve ``chosen`` weeks in parallel with a progress bar; print a summary.

    Exits 3 when the database could not be reached or the connection was lost
    for a week, else 4 when a week's lock was held by another session for
    longer than the lock timeout, else 1 when a week did not end optimal.
    """
    from rich.progress import (
        BarColumn,
        MofNCompleteColumn,
        Progress,
        TextColumn,
        TimeElapsedColumn,
    )

    from planner.runs.schedule import solve_many

    with Progress(
        TextColumn("solving"), BarColumn(), MofNCompleteColumn(), TimeElapsedColumn(),
        console=err_console, disable=len(chosen) < 2,
    ) as progress:
        task = progress.add_task("weeks", total=len(chosen))
        outcomes = solve_many(
            url, chosen, scaling, workers=workers, warm=warm, on_done=lambda _o: progress.advance(task)
        )
    summaries = [o.summary for o in outcomes if o.summary is not None]
    if summaries:
        _summary_table(summaries, title=None, code=code)
    for o in outcomes:
        message = o.note if o.summary is None else o.summary.message
        if o.lost is not None:
            message = "error: " + connection_failure(o.lost, url)[0][0]
        if message:
            err_console.print(f"{o.period}: {message}", markup=False, highlight=False, soft_wrap=True)
    if any(o.lost is not None for o in outcomes):
        err_console.print(
            "try: nothing of those weeks was stored (each run is one transaction); check the server, then solve them again",
            markup=False, highlight=False, soft_wrap=True,
        )
        raise typer.Exit(EXIT_DATABASE)
    if any(o.locked for o in outcomes):
        raise typer.Exit(EXIT_LOCKED)
    if any(not o.ok for o in outcomes):
        raise typer.Exit(EXIT_NOT_OPTIMAL)


def _summary_table(summaries, title, code: str) -> None:
    table = Table("run", "status", f"cost ({code})", "shortage", "certificate", "seconds", title=title)
    table.columns.insert(0, Column("period", no_wrap=True))
    for s in summaries:
        table.add_row(
            s.period, str(s.run_id), s.status, money(s.cost),
            "-" if s.shortage is None else f"{s.shortage:,}",
            certificate_text(s.certificate_ok), f"{s.seconds['total']:.2f}",
        )
    console.print(table)


@app.command()
def resolve(
    dry_run: bool = typer.Option(False, "--dry-run", help="List the weeks that would be solved, solve nothing."),
    cost_decimals: int = COST_DECIMALS,
    quantity_decimals: int = QUANTITY_DECIMALS,
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Solve only the weeks whose input changed (for cron).

    Solves exactly the weeks whose input changed since their latest optimal run.
    Safe to run from several processes or machines at once: a week is never
    solved twice. One log line per week and a summary line; exit 3 if the
    connection to the database was lost for a week, else 4 if a week
    was left unsolved because another session held its lock for longer than
    the lock timeout ($PLANNER_LOCK_TIMEOUT, 60 s), else 1 if a week solved
    ended non-optimal.

    Example: planner resolve --dry-run
    """
    from planner.database.snapshot import Scaling, loaded_periods
    from planner.runs.schedule import resolve as resolve_weeks
    from planner.runs.schedule import stale_periods

    db_engine = engine(database_url)
    scaling = Scaling(cost_decimals, quantity_decimals)
    if dry_run:
        with db_engine.connect() as conn:
            loaded = loaded_periods(conn)
        if not loaded:
            print("nothing is loaded yet, so nothing would be solved; load a folder with `planner load DIR`")
            return
        stale = stale_periods(db_engine, scaling)
        for code, why in stale:
            print(f"{code} would be solved: {why}")
        if not stale:
            print("nothing to solve: every loaded week is up to date")
        return
    report = resolve_weeks(db_engine, scaling, log=lambda line: print(line, flush=True))
    if any(o.lost is not None for o in report.outcomes):
        raise typer.Exit(EXIT_DATABASE)
    if report.locked:
        raise typer.Exit(EXIT_LOCKED)
    if any(not o.ok for o in report.outcomes):
        raise typer.Exit(EXIT_NOT_OPTIMAL)


class RunListFormat(str, Enum):
    """How ``planner runs`` prints its rows."""

    table = "table"
    csv = "csv"
    json = "json"


@app.command()
def runs(
    period: Optional[str] = typer.Option(None, "--period", "-p", metavar="WEEK", help="Only runs that cover this ISO week (its week runs and the linked horizons over it)."),
    status: Optional[str] = typer.Option(None, "--status", metavar="STATUS", help="Only runs that ended optimal, infeasible, unbounded or failed (or are running)."),
    kind: Optional[str] = typer.Option(None, "--kind", metavar="KIND", help="Only week runs or linked horizon runs: week or horizon."),
    last: Optional[int] = typer.Option(None, "--last", min=1, metavar="N", help="Only the N newest runs."),
    output_format: RunListFormat = typer.Option(RunListFormat.table, "--format", metavar="FORMAT", help="table, csv or json."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """List stored runs: status, cost, certificate, batch, time.

    One row per run: week or span, kind, status, cost, certificate, input batch,
    when it was solved and how long it took. The run ids work with report, explain, prices, rate-ranges and certificate (--run ID).

    Example: planner runs --period 2026-W49 --status optimal
    """
    import json

    from planner.database.settings import currency
    from planner.reports.catalog import run_list
    from planner.reports.formats import csv_text, records

    db_engine = engine(database_url)
    frame = run_list(db_engine, period=period, status=status, kind=kind, last=last)
    code = currency(db_engine)
    if output_format == RunListFormat.csv:
        print(csv_text(frame.assign(currency=code)), end="")
        return
    if output_format == RunListFormat.json:
        print(json.dumps(records(frame.assign(currency=code)), indent=2))
        return
    if frame.empty:
        say("no runs match; solve weeks with `planner solve`" if period or status or kind else
            "no runs yet; solve weeks with `planner solve --all`")
        return
    table = Table("run", Column("week or span", no_wrap=True), "kind", "status", f"cost ({code})", "certificate",
                  "batch", "solved at", "seconds", "shown in reports",
                  caption="shown in reports: the run the views and reports use for its week (or span)")
    for r in frame.to_dict(orient="records"):
        table.add_row(
            str(r["run_id"]), r["period"], r["kind"], r["status"], money(r["cost"]), certificate_text(r["certificate_ok"]),
            r["batch"] or "-", "-" if r["solved_at"] is None else f"{r['solved_at']:%Y-%m-%d %H:%M}",
            "-" if r["seconds"] is None else f"{r['seconds']:.2f}", "yes" if r["latest"] else "",
        )
    console.print(table)


@app.command()
def certificate(
    period: Optional[str] = typer.Option(None, "--period", "-p", metavar="WEEK", help="The newest run of this ISO week."),
    run_id: Optional[int] = typer.Option(None, "--run", metavar="ID", help="A run id of any kind (see `planner runs`)."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Show a run's optimality certificate.

    Exits 1 when the run did not end optimal.

    Example: planner certificate --period 2026-W49
    """
    from sqlalchemy import text

    from planner.reports.catalog import checked_week, nothing_for, run_info
    from planner.runs.weekly import run_certificate

    if (period is None) == (run_id is None):
        raise PlannerError("give either --period WEEK or --run ID (list the runs with `planner runs`)")
    db_engine = engine(database_url)
    with db_engine.connect() as conn:
        if run_id is None:
            found = conn.execute(
                text("SELECT run_id FROM newest_week_run WHERE period = :p"), {"p": checked_week(period)}
            ).scalar()
            if found is None:
                raise PlannerError(nothing_for(conn, period))
            run_id = int(found)
        info = run_info(conn, run_id)
    cert = run_certificate(db_engine, run_id=run_id)
    cert["period"] = info.span if info.kind == "week" else f"{info.span} (linked horizon)"
    if not info.ok:
        cert["certificate"] = f"none: the run ended {info.status}"
    table = Table("check", "value", show_header=True)
    for label, value in cert.items():
        table.add_row(label, "-" if value is None or value == "" else str(value))
    console.print(table)
    if cert["certificate"] != "exact":
        raise typer.Exit(EXIT_NOT_OPTIMAL)
