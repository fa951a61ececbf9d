"""Many weeks at once: parallel solves, and cron re-solves that never double-solve.

``solve_many`` spreads independent weeks over worker processes; each week's
run is committed by its worker as soon as it finishes, and one failing week
does not stop the others. Each week is solved under its week lock, so an
explicit solve and a running ``resolve`` never work on the same week at once.

``resolve`` solves exactly the weeks whose current snapshot differs from the
one their latest successful run used (the run's input fingerprint). A lock
per week (a row of ``planner_lock``, see :mod:`planner.database.locks`), taken
without waiting and followed by a fresh staleness check, guarantees that
several processes, on one machine or many, never solve the same week twice.
Only the planner's own role can take these locks, and every wait for one is
bounded by the lock timeout.
"""

from __future__ import annotations

import os
from concurrent.futures import ProcessPoolExecutor, as_completed
from concurrent.futures.process import BrokenProcessPool
from contextlib import contextmanager
from dataclasses import dataclass, field
from typing import Callable, Iterable, Iterator

import psycopg
from sqlalchemy import Connection, Engine, text
from sqlalchemy.exc import InterfaceError, OperationalError, SQLAlchemyError

from planner import __version__
from planner.database.connect import database_error_cause
from planner.database.locks import lock_timeout, planner_lock, week_lock_name
from planner.database.snapshot import Scaling, current_batch, run_fingerprint
from planner.errors import DatabaseUnavailable, LockTimeout, PlannerError
from planner.runs.weekly import RunSummary, solve_period

#: Longest stored message a resolve log line quotes.
MESSAGE_CHARS = 240


@dataclass(frozen=True)
class WeekOutcome:
    """One week of a many-week command: a run, or why there is none.

    ``locked`` is True when the week was not solved because another session
    held its lock for longer than the lock timeout; ``lost`` holds the error
    when the database could not be reached or the connection was lost (nothing
    of that week was stored: a run is stored in one transaction).
    """

    period: str
    summary: RunSummary | None
    note: str = ""
    locked: bool = False
    lost: BaseException | None = None

    @property
    def ok(self) -> bool:
        return self.summary is not None and self.summary.ok


@contextmanager
def week_lock(
    engine: Engine, period: str, *, wait: bool = True, timeout: float | None = None
) -> Iterator[bool]:
    """Hold the lock of ``period`` for the block; yield whether it is held.

    With ``wait`` the block starts once the lock is free (an explicit solve),
    waiting at most ``timeout`` seconds (default: the lock timeout,
    ``PLANNER_LOCK_TIMEOUT``); without, it starts at once and gets False when
    another session holds the lock (``resolve`` then comes back to the week).
    Either way an explicit solve and a cron re-solve never work on the same
    week at the same time.

    Raises
    ------
    PlannerError
        When the period has no snapshot.
    LockTimeout
        When another session held the lock for longer than ``timeout``.
    """
    with engine.connect() as conn:
        current_batch(conn, period)  # an unknown week is refused before it gets a lock row
    with planner_lock(
        engine,
        week_lock_name(period),
        what=f"week {period}",
        advice="let that solve finish and solve the week again",
        wait=wait,
        timeout=timeout,
    ) as held:
        yield held


def solve_locked(engine: Engine, period: str, scaling: Scaling, *, chain: bool = False) -> RunSummary:
    """:func:`~planner.runs.solve_period` under the week's lock (waiting at most the lock timeout)."""
    with week_lock(engine, period):
        return solve_period(engine, period, scaling, chain=chain)


def _solve_in_worker(url: str, period: str, scaling: Scaling, chain: bool) -> RunSummary:
    from planner.database.connect import get_engine

    engine = get_engine(url)
    try:
        return solve_locked(engine, period, scaling, chain=chain)
    finally:
        engine.dispose()


def solve_many(
    url: str,
    periods: Iterable[str],
    scaling: Scaling = Scaling(),
    *,
    workers: int | None = None,
    on_done: Callable[[WeekOutcome], None] | None = None,
    warm: bool = False,
) -> list[WeekOutcome]:
    """Solve independent weeks in parallel worker processes.

    Weeks are handed out in calendar order. With ``warm`` each worker starts
    each week from the optimum of the week it solved before (a chain:
    consecutive weeks of one network differ by drift); a warm answer is kept
    only when its certificate holds, else the week is solved cold. Off by
    default: on weeks whose every rate drifts, the warm engine gives up and the
    cold solve after it costs more than a cold solve alone
    (``benchmarks/bench_weeks.py``).

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
    warm : bool
        Chain the weeks of each worker warm; default False (each week cold).

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
                outcomes[period] = _guarded(lambda: solve_locked(engine, period, scaling, chain=warm), period)
                if on_done:
                    on_done(outcomes[period])
        finally:
            engine.dispose()
        return [outcomes[p] for p in periods]
    with ProcessPoolExecutor(max_workers=workers) as pool:
        futures = {pool.submit(_solve_in_worker, url, p, scaling, warm): p for p in sorted(periods)}
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
    except (PlannerError, BrokenProcessPool) as err:
        note = str(err) if isinstance(err, PlannerError) else f"{type(err).__name__}: {err}"
        lost = err if isinstance(err, DatabaseUnavailable) else None
        return WeekOutcome(period, None, note, locked=isinstance(err, LockTimeout), lost=lost)
    except (SQLAlchemyError, psycopg.Error) as err:
        # One line: the driver's own first line, not SQLAlchemy's statement dump and link.
        cause = database_error_cause(err)
        connection = (OperationalError, InterfaceError, psycopg.OperationalError, psycopg.InterfaceError)
        lost = err if isinstance(err, connection) else None
        what = "the database connection failed" if lost is not None else "the database refused the run"
        note = f"{what} ({cause}); nothing was stored for this week, it is still to be solved"
        return WeekOutcome(period, None, note, lost=lost)


def is_stale(conn: Connection, period: str, scaling: Scaling) -> tuple[bool, str]:
    """Whether ``period`` needs a solve, and why (one line).

    A week is stale when its latest optimal run used another input
    fingerprint, or it has none. A week whose current input already ended
    infeasible or unbounded, or failed under this version of the planner, is
    not stale: solving the same input again gives the same verdict. A run is
    stored as failed only for what the input and the planner decide (a figure
    with more decimals than the precision, sums past 64 bits, a certificate
    that does not hold); a lost connection stores no run, so its week stays
    stale. A failure stored by another planner version is tried again.
    """
    _, _, snapshot_fp = current_batch(conn, period)
    fingerprint = run_fingerprint(snapshot_fp, scaling)
    latest = conn.execute(
        text("SELECT run_id, finished_at, input_fingerprint FROM latest_week_run WHERE period = :period"),
        {"period": period},
    ).first()
    settled = conn.execute(
        text(
            "SELECT r.id, r.status, r.message FROM solve_run r JOIN period p ON p.id = r.period_id "
            "WHERE p.code = :period AND r.kind = 'week' AND r.scenario_id IS NULL AND r.input_fingerprint = :fp "
            "AND (r.status IN ('infeasible', 'unbounded') OR (r.status = 'failed' AND r.planner_version = :version)) "
            "AND (CAST(:since AS timestamptz) IS NULL OR r.finished_at > :since) "
            "ORDER BY r.finished_at DESC, r.id DESC LIMIT 1"
        ),
        {
            "period": period,
            "fp": fingerprint,
            "version": __version__,
            "since": None if latest is None else latest.finished_at,
        },
    ).first()
    if settled is not None:
        verdict = "failed" if settled.status == "failed" else f"was {settled.status}"
        return False, f"input unchanged since run {settled.id}, which {verdict}: {brief(settled.message)}"
    if latest is None:
        return True, "never solved"
    if latest.input_fingerprint != fingerprint:
        return True, f"input changed since run {latest.run_id}"
    return False, f"up to date (run {latest.run_id})"


def brief(message: str | None) -> str:
    """A stored message on one line, cut to :data:`MESSAGE_CHARS`.

    Examples
    --------
    >>> brief("week 2026-W49 is infeasible:   30 units  short")
    'week 2026-W49 is infeasible: 30 units short'
    >>> len(brief("x" * 1000)) == MESSAGE_CHARS
    True
    """
    line = " ".join((message or "no message stored").split())
    return line if len(line) <= MESSAGE_CHARS else line[: MESSAGE_CHARS - 3] + "..."


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


@dataclass
class ResolveReport:
    """What one ``resolve`` did.

    Attributes
    ----------
    timeout : float
        Seconds it waited at most for a week's lock.
    outcomes : list of WeekOutcome
        The weeks this process solved or tried to.
    unchanged : list of str
        Weeks skipped because their input had not changed.
    solved_elsewhere : list of str
        Weeks another process solved while this one looked at them.
    locked : list of str
        Weeks not solved because another session held their lock for longer than ``timeout``.
    """

    timeout: float
    outcomes: list[WeekOutcome] = field(default_factory=list)
    unchanged: list[str] = field(default_factory=list)
    solved_elsewhere: list[str] = field(default_factory=list)
    locked: list[str] = field(default_factory=list)

    def summary(self) -> str:
        """The closing log line: counts, and the weeks that need a look."""
        bad = [o.period for o in self.outcomes if not o.ok]
        parts = [f"{len(self.outcomes)} solved" + (f" ({len(bad)} not optimal: {', '.join(bad)})" if bad else "")]
        if self.unchanged:
            parts.append(f"{len(self.unchanged)} unchanged")
        if self.solved_elsewhere:
            parts.append(f"{len(self.solved_elsewhere)} solved by another process ({', '.join(self.solved_elsewhere)})")
        if self.locked:
            parts.append(
                f"{len(self.locked)} not solved because another session held the lock for more than "
                f"{self.timeout:g} s ({', '.join(self.locked)}); run resolve again once it is released"
            )
        return "resolve: " + ", ".join(parts)


def resolve(
    engine: Engine,
    scaling: Scaling = Scaling(),
    *,
    log: Callable[[str], None] = print,
    timeout: float | None = None,
) -> ResolveReport:
    """Solve every stale week exactly once, sharing the work with other processes.

    For each stale week: take its lock without waiting, check again that it is
    still stale (another process may have just finished it), solve, commit,
    release. A week whose lock another session holds is put off; once the
    other weeks are done, ``resolve`` waits for each such lock, at most
    ``timeout`` seconds, and looks again: normally the other process has solved
    the week by then, and otherwise it is solved here. A week whose lock stays
    held for longer is not solved and is listed in the report's ``locked``.

    Logs one line per week, then :meth:`ResolveReport.summary`.

    Parameters
    ----------
    timeout : float, optional
        Seconds; default the lock timeout (``PLANNER_LOCK_TIMEOUT``, 60).
    """
    from planner.database.snapshot import loaded_periods

    report = ResolveReport(timeout=lock_timeout() if timeout is None else timeout)
    with engine.connect() as conn:
        weeks = [(p, *is_stale(conn, p, scaling)) for p in loaded_periods(conn)]
    busy = []
    for period, stale, why in weeks:
        if not stale:
            log(f"{period} skipped: {why}")
            report.unchanged.append(period)
            continue
        with week_lock(engine, period, wait=False) as held:
            if held:
                _solve_if_stale(engine, period, scaling, log, report)
            else:
                busy.append(period)
    for period in busy:
        try:
            with week_lock(engine, period, timeout=report.timeout):
                _solve_if_stale(engine, period, scaling, log, report)
        except LockTimeout as err:
            holder = "" if err.holder is None else f" ({err.holder})"
            log(f"{period} skipped: locked by another session{holder} for more than {report.timeout:g} s")
            report.locked.append(period)
    log(report.summary())
    return report


def _solve_if_stale(
    engine: Engine, period: str, scaling: Scaling, log: Callable[[str], None], report: ResolveReport
) -> None:
    """Under the week's lock: solve ``period`` if it is still stale, and log what happened."""
    with engine.connect() as conn:
        stale, why = is_stale(conn, period, scaling)
    if not stale:
        # It was stale when resolve began: another process has solved it since.
        log(f"{period} skipped: being solved by another process; {why}")
        report.solved_elsewhere.append(period)
        return
    outcome = _guarded(lambda: solve_period(engine, period, scaling), period)
    report.outcomes.append(outcome)
    s = outcome.summary
    if s is None:
        log(f"{period} failed: {brief(outcome.note)}")
        return
    cost = "-" if s.cost is None else f"{s.cost:.2f}"
    line = f"{period} {s.status} run {s.run_id} cost {cost} ({why}) {s.seconds['total']:.2f}s"
    log(line if s.ok else f"{line}: {brief(s.message)}")
