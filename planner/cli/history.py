"""Commands for stored runs over time: ``prune``, ``pin``, ``unpin``."""

from __future__ import annotations

from typing import List, Optional

import typer
from rich.table import Table

from planner.cli.common import DATABASE_URL, app, console, engine, say


def _runs(count: int) -> str:
    return f"{count:,} run" + ("" if count == 1 else "s")


@app.command()
def prune(
    keep: int = typer.Option(..., "--keep", min=1, metavar="N", help="Newest runs kept per week (and per span of a linked horizon)."),
    dry_run: bool = typer.Option(False, "--dry-run", help="Only list what would be dropped."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Drop old runs: keep per week its newest KEEP runs, its latest optimal run and every pinned run.

    Runs still running are kept too. Everything goes in one transaction.

    Example: planner prune --keep 3 --dry-run
    """
    from planner.database.history import prune as prune_runs

    plan = prune_runs(engine(database_url), keep, dry_run=dry_run)
    if not plan.dropped:
        say(f"nothing to drop: {_runs(plan.kept)} kept (newest {keep} per week, latest optimal, pinned)")
        return
    table = Table("week", "runs dropped")
    for group, runs in plan.groups.items():
        table.add_row(group, ", ".join(map(str, runs)))
    console.print(table)
    rows = ", ".join(f"{name} {count:,}" for name, count in plan.rows.items())
    verb = "would drop" if dry_run else "dropped"
    pinned = f"; {_runs(plan.pinned)} kept only because pinned" if plan.pinned else ""
    say(f"{verb} {_runs(len(plan.dropped))} ({rows} rows), kept {plan.kept:,}{pinned}")
    if dry_run:
        say("nothing was dropped (--dry-run)")


@app.command()
def pin(
    run_ids: List[int] = typer.Argument(None, metavar="RUN_IDS", help="Run ids to pin; none lists the pinned runs."),
    note: Optional[str] = typer.Option(None, "--note", metavar="TEXT", help="Why the runs are kept."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Pin runs so that `planner prune` keeps them; without RUN_IDS list the pinned runs.

    Example: planner pin 42 --note "board review plan"
    """
    from planner.database.history import pin as pin_runs
    from planner.database.history import pinned_runs

    db = engine(database_url)
    if not run_ids:
        rows = pinned_runs(db)
        if not rows:
            say("no pinned runs")
            return
        table = Table("run", "kind", "weeks", "status", "pinned at", "by", "note")
        for r in rows:
            weeks = r["first_period"] if r["kind"] == "week" else f"{r['first_period']}..{r['last_period']}"
            table.add_row(str(r["run_id"]), r["kind"], weeks, r["status"],
                          f"{r['pinned_at']:%Y-%m-%d %H:%M}", r["pinned_by"], r["note"] or "")
        console.print(table)
        return
    added = pin_runs(db, run_ids, note)
    already = sorted(set(run_ids) - set(added))
    say(f"pinned {', '.join(map(str, added)) or 'nothing new'}"
        + (f"; already pinned: {', '.join(map(str, already))}" if already else ""))


@app.command()
def unpin(
    run_ids: List[int] = typer.Argument(..., metavar="RUN_IDS", help="Run ids to unpin."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Unpin runs: `planner prune` may drop them again.

    Example: planner unpin 42
    """
    from planner.database.history import unpin as unpin_runs

    removed = unpin_runs(engine(database_url), run_ids)
    missing = sorted(set(run_ids) - set(removed))
    say(f"unpinned {', '.join(map(str, removed)) or 'nothing'}"
        + (f"; not pinned: {', '.join(map(str, missing))}" if missing else ""))
