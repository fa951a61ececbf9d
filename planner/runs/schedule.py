"""Many weeks at once: parallel solves, and cron re-solves that never double-solve.

``solve_many`` spreads independent weeks over worker processes; each week's
run is committed by its worker as soon as it finishes, and one failing week
does not stop the others. Each week is solved under its advisory lock, so an
explicit solve and a running ``resolve`` never work on the same week at once.

``resolve`` solves exactly the weeks whose current snapshot differs from the
one their latest successful run used (the run's input fingerprint). A
PostgreSQL advisory lock per week, taken with ``pg_try_advisory_lock`` and
followed by a fresh staleness check, guarantees that several processes, on one
machine or many, never solve the same week twice.
"""

from __future__ import annotations

import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from contextlib import contextmanager
from dataclasses import dataclass
from typing import Callable, Iterable, Iterator

from sqlalchemy import Connection, Engine, text
from sqlalchemy.exc import SQLAlchemyError

from planner.database.snapshot import Scaling, current_batch, run_fingerprint
from planner.errors import PlannerError
from planner.runs.weekly import RunSummary, solve_period

#: First key of the two-key advisory locks the planner takes (ASCII "PLAN").
LOCK_NAMESPACE = 0x504C414E


@dataclass(frozen=True)
class WeekOutcome:
    """One week of a many-week command: a run, or why there is none."""

    period: str
    summary: RunSummary | None
    note: str = ""

    @property
    def ok(self) -> bool:
        return self.summary is not None and self.summary.ok


@contextmanager
def week_lock(engine: Engine, period: str, *, wait: bool = True) -> Iterator[bool]:
    """Hold the advisory lock of ``period`` for the block; yield whether it is held.

    With ``wait`` the block starts once the lock is free (an explicit solve);
    without, it starts at once and gets False when another session holds the
    lock (``resolve`` then skips the week). Either way an explicit solve and a
    cron re-solve never work on the same week at the same time.
    """
    with engine.connect() as conn:
        key = {"ns": LOCK_NAMESPACE, "id": current_batch(conn, period)[0]}
        if wait:
            conn.execute(text("SELECT pg_advisory_lock(:ns, :id)"), key)
            held = True
        else:
            held = conn.execute(text("SELECT pg_try_advisory_lock(:ns, :id)"), key).scalar_one()
        conn.commit()
        try:
            yield held
        finally:
            if held:
                conn.execute(text("SELECT pg_advisory_unlock(:ns, :id)"), key)
                conn.commit()


def solve_locked(engine: Engine, period: str, scaling: Scaling) -> RunSummary:
    """:func:`~planner.runs.solve_period` under the week's advisory lock."""
    with week_lock(engine, period):
        return solve_period(engine, period, scaling)


def _solve_in_worker(url: str, period: str, scaling: Scaling) -> RunSummary:
    from planner.database.connect import get_engine

    engine = get_engine(url)
    try:
        return solve_locked(engine, period, scaling)
    finally:
        engine.dispose()


def solve_many(
    url: str,
    periods: Iterable[str],
    scaling: Scaling = Scaling(),
    *,
    workers: int | None = None,
    on_done: Callable[[WeekOutcome], None] | None = None,
) -> list[WeekOutcome]:
    """Solve independent weeks in parallel worker processes.

    Parameters
    ----------
    url : str
        Database URL the workers connect to.
    periods : iterable of str
    scaling : Scaling
    workers : int, optional
        Worker processes (default: the number of CPU cores, at most the weeks).
    on_done : callable, optional
        Called in the parent with each week's outcome as it finishes (progress).

    Returns
    -------
    list of WeekOutcome, in the order of ``periods``.
    """
    periods = list(periods)
    workers = max(1, min(workers or os.cpu_count() or 1, len(periods)))
    outcomes: dict[str, WeekOutcome] = {}
    if workers == 1:
        from planner.database.connect import get_engine

        engine = get_engine(url)
        try:
            for period in periods:
                outcomes[period] = _guarded(lambda: solve_locked(engine, period, scaling), period)
                if on_done:
                    on_done(outcomes[period])
        finally:
            engine.dispose()
        return [outcomes[p] for p in periods]
    with ProcessPoolExecutor(max_workers=workers) as pool:
        futures = {pool.submit(_solve_in_worker, url, p, scaling): p for p in periods}
        for future in as_completed(futures):
            period = futures[future]
            outcomes[period] = _guarded(future.result, period)
            if on_done:
                on_done(outcomes[period])
    return [outcomes[p] for p in periods]


def _guarded(call: Callable[[], RunSummary], period: str) -> WeekOutcome:
    # A week that cannot be read or stored (no snapshot, a lost connection, a
    # worker that died) is reported, and the other weeks go on.
    try:
        return WeekOutcome(period, call())
    except (PlannerError, SQLAlchemyError, BrokenProcessPool) as err:
        note = str(err) if isinstance(err, PlannerError) else f"{type(err).__name__}: {err}"
        return WeekOutcome(period, None, note)


def is_stale(conn: Connection, period: str, scaling: Scaling) -> tuple[bool, str]:
    """Whether ``period`` needs a solve, and why (one line).

    A week is stale when its latest optimal run used another input
    fingerprint, or it has none. A week whose current input already ended
    infeasible or unbounded is not stale: solving the same input again gives
    the same verdict.
    """
    _, _, snapshot_fp = current_batch(conn, period)
    fingerprint = run_fingerprint(snapshot_fp, scaling)
    latest = conn.execute(
        text("SELECT run_id, finished_at, input_fingerprint FROM latest_week_run WHERE period = :period"),
        {"period": period},
    ).first()
    failed = conn.execute(
        text(
            "SELECT r.id, r.status FROM solve_run r JOIN period p ON p.id = r.period_id "
            "WHERE p.code = :period AND r.kind = 'week' AND r.input_fingerprint = :fp "
            "AND r.status IN ('infeasible', 'unbounded') "
            "AND (CAST(:since AS timestamptz) IS NULL OR r.finished_at > :since) "
            "ORDER BY r.finished_at DESC, r.id DESC LIMIT 1"
        ),
        {"period": period, "fp": fingerprint, "since": None if latest is None else latest.finished_at},
    ).first()
    if failed is not None:
        return False, f"input unchanged since run {failed.id}, which was {failed.status}"
    if latest is None:
        return True, "never solved"
    if latest.input_fingerprint != fingerprint:
        return True, f"input changed since run {latest.run_id}"
    return False, f"up to date (run {latest.run_id})"


def stale_periods(engine: Engine, scaling: Scaling = Scaling()) -> list[tuple[str, str]]:
    """``(period, reason)`` of every loaded week that ``resolve`` would solve."""
    from planner.database.snapshot import loaded_periods

    with engine.connect() as conn:
        out = []
        for period in loaded_periods(conn):
            stale, reason = is_stale(conn, period, scaling)
            if stale:
                out.append((period, reason))
        return out


def resolve(
    engine: Engine,
    scaling: Scaling = Scaling(),
    *,
    log: Callable[[str], None] = print,
) -> list[WeekOutcome]:
    """Solve every stale week exactly once, sharing the work with other processes.

    For each stale week: take its advisory lock without waiting (another
    process holding it is solving that week: skip it), check again that it is
    still stale (another process may have just finished it), solve, commit,
    release. Logs one line per week.

    Returns
    -------
    list of WeekOutcome
        Only the weeks this process solved or tried to.
    """
    from planner.database.snapshot import loaded_periods

    with engine.connect() as conn:
        weeks = [(p, *is_stale(conn, p, scaling)) for p in loaded_periods(conn)]
    done: list[WeekOutcome] = []
    for period, stale, why in weeks:
        if not stale:
            log(f"{period} skipped: {why}")
            continue
        with week_lock(engine, period, wait=False) as held:
            if not held:
                log(f"{period} skipped: being solved by another process")
                continue
            with engine.connect() as conn:
                stale, why = is_stale(conn, period, scaling)
            if not stale:
                log(f"{period} skipped: {why}")
                continue
            outcome = _guarded(lambda: solve_period(engine, period, scaling), period)
            done.append(outcome)
            s = outcome.summary
            if s is None:
                log(f"{period} failed: {outcome.note}")
            else:
                cost = "-" if s.cost is None else f"{s.cost:.2f}"
                log(f"{period} {s.status} run {s.run_id} cost {cost} ({why}) {s.seconds['total']:.2f}s")
    return done
