"""Commands that solve weeks and show their certificates: ``solve``, ``resolve``, ``certificate``."""

from __future__ import annotations

from typing import Optional

import typer
from rich.table import Column, Table

from planner.cli.common import (
    COST_DECIMALS,
    DATABASE_URL,
    EXIT_CONNECTION,
    EXIT_LOCKED,
    QUANTITY_DECIMALS,
    app,
    certificate_text,
    console,
    engine,
    err_console,
    fail,
    money,
)
from planner.errors import PlannerError


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
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Solve weeks (or a linked horizon) and store flows, prices, ranges and certificates.

    Example: planner solve --period 2026-W49
    """
    from planner.database import connect
    from planner.database.snapshot import Scaling
    from planner.periods import parse_week_span
    from planner.runs.horizon import solve_horizon
    from planner.runs.weekly import select_periods

    try:
        url = connect.database_url(database_url)
        db_engine = engine(url)
        scaling = Scaling(cost_decimals, quantity_decimals)
        if horizon is not None:
            if period or all_periods or first or last:
                raise PlannerError("--horizon cannot be combined with --period, --all, --from or --to")
            summary = solve_horizon(db_engine, parse_week_span(horizon), scaling)
            _summary_table([summary], title="Linked horizon")
            if summary.message:
                err_console.print(summary.message, markup=False, highlight=False, soft_wrap=True)
            raise typer.Exit(0 if summary.ok else 1)
        chosen = select_periods(db_engine, period=period, all_periods=all_periods, first=first, last=last)
    except (PlannerError, ValueError) as err:
        fail(err)
    _solve_weeks(url, chosen, scaling, workers)


def _solve_weeks(url: str, chosen: list[str], scaling, workers: Optional[int]) -> None:
    """Solve ``chosen`` weeks in parallel with a progress bar; print a summary.

    Exits 4 when a week's lock was held by another session for longer than the
    lock timeout, else 1 when a week did not end optimal.
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
            url, chosen, scaling, workers=workers, on_done=lambda _o: progress.advance(task)
        )
    summaries = [o.summary for o in outcomes if o.summary is not None]
    if summaries:
        _summary_table(summaries, title=None)
    for o in outcomes:
        message = o.note if o.summary is None else o.summary.message
        if message:
            err_console.print(f"{o.period}: {message}", markup=False, highlight=False, soft_wrap=True)
    if any(o.locked for o in outcomes):
        raise typer.Exit(EXIT_LOCKED)
    if any(o.lost for o in outcomes):
        raise typer.Exit(EXIT_CONNECTION)
    if any(not o.ok for o in outcomes):
        raise typer.Exit(1)


def _summary_table(summaries, title) -> None:
    table = Table("run", "status", "cost", "shortage", "certificate", "seconds", title=title)
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
    """Solve exactly the weeks whose input changed since their latest optimal run (for cron).

    Safe to run from several processes or machines at once: a week is never
    solved twice. One log line per week and a summary line; exit 4 if a week
    was left unsolved because another session held its lock for longer than
    the lock timeout ($PLANNER_LOCK_TIMEOUT, 60 s), else 1 if a week solved
    ended non-optimal.

    Example: planner resolve --dry-run
    """
    from planner.database.snapshot import Scaling
    from planner.runs.schedule import resolve as resolve_weeks
    from planner.runs.schedule import stale_periods

    try:
        db_engine = engine(database_url)
        scaling = Scaling(cost_decimals, quantity_decimals)
        if dry_run:
            stale = stale_periods(db_engine, scaling)
            for code, why in stale:
                print(f"{code} would be solved: {why}")
            if not stale:
                print("nothing to solve: every loaded week is up to date")
            return
        report = resolve_weeks(db_engine, scaling, log=lambda line: print(line, flush=True))
    except PlannerError as err:
        fail(err)
    if report.locked:
        raise typer.Exit(EXIT_LOCKED)
    if any(o.lost for o in report.outcomes):
        raise typer.Exit(EXIT_CONNECTION)
    if any(not o.ok for o in report.outcomes):
        raise typer.Exit(1)


@app.command()
def certificate(
    period: Optional[str] = typer.Option(None, "--period", "-p", help="Latest run of this ISO week."),
    run_id: Optional[int] = typer.Option(None, "--run", help="A run id."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Show a run's optimality certificate.

    Example: planner certificate --period 2026-W49
    """
    from planner.runs.weekly import run_certificate

    try:
        cert = run_certificate(engine(database_url), period=period, run_id=run_id)
    except PlannerError as err:
        fail(err)
    table = Table("check", "value", show_header=True)
    for label, value in cert.items():
        table.add_row(label, "-" if value is None else str(value))
    console.print(table)
    if cert["certificate"] != "exact":
        raise typer.Exit(1)
