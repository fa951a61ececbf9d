"""The stored runs: list them, find the one a command asks about, and say what to do next.

Every command that shows a stored run (``report``, ``explain``, ``rate-ranges``,
``prices``, ``certificate``) finds it here, so they all accept the same things:
a run id of any kind (a week, or a linked horizon, whose week is then picked
with the period), or a period alone (its latest optimal week run). When there
is nothing to show, :func:`nothing_for` says why and advises a next step that
works: load a week that was never loaded, solve a week that was loaded, look at
the certificate of a week whose runs did not end optimal.
"""

from __future__ import annotations

import datetime
from dataclasses import dataclass
from decimal import Decimal

import pandas as pd
from sqlalchemy import Connection, Engine, text

from planner.database.models import RUN_KINDS, RUN_STATUSES
from planner.errors import NotOptimal, PlannerError
from planner.periods import parse_week

__all__ = ["Chosen", "RUN_LIST_COLUMNS", "RunInfo", "checked_week", "choose_run", "nothing_for", "run_info", "run_list"]

#: Columns of :func:`run_list`, in the order the ``planner runs`` command shows them.
RUN_LIST_COLUMNS = (
    "run_id", "kind", "period", "status", "cost", "certificate_ok", "shortage_units", "batch",
    "solved_at", "seconds", "latest", "first_period", "last_period", "message",
)


def checked_week(code: str) -> str:
    """``code`` if it is an ISO week, else a :class:`PlannerError` saying how to write one.

    Examples
    --------
    >>> checked_week("2026-W49")
    '2026-W49'
    """
    try:
        parse_week(code)
    except ValueError as err:
        raise PlannerError(str(err)) from err
    return code


@dataclass(frozen=True)
class RunInfo:
    """One stored run, whatever its kind and status."""

    run_id: int
    kind: str
    status: str
    first_period: str
    last_period: str
    cost: Decimal | None
    certificate_ok: bool | None
    message: str
    solved_at: datetime.datetime | None
    cost_decimals: int
    quantity_decimals: int

    @property
    def span(self) -> str:
        """The week of a week run, ``FIRST..LAST`` for a linked horizon.

        Examples
        --------
        >>> RunInfo(9, "horizon", "optimal", "2026-W45", "2026-W52", None, True, "", None, 4, 0).span
        '2026-W45..2026-W52'
        """
        return self.first_period if self.kind == "week" else f"{self.first_period}..{self.last_period}"

    @property
    def ok(self) -> bool:
        return self.status == "optimal"

    def covers(self, period: str) -> bool:
        return parse_week(self.first_period) <= parse_week(period) <= parse_week(self.last_period)

    def describe(self) -> str:
        """``run 9 (linked horizon 2026-W45..2026-W52)`` or ``run 3 (week 2026-W47)``."""
        what = "week" if self.kind == "week" else "linked horizon" if self.kind == "horizon" else self.kind
        return f"run {self.run_id} ({what} {self.span})"

    def not_optimal(self) -> NotOptimal:
        """The error to raise when a command needs this run's plan and it has none."""
        why = f": {self.message}" if self.message else ""
        return NotOptimal(
            f"{self.describe()} ended {self.status}{why}; it stored no plan. "
            f"Its certificate: `planner certificate --run {self.run_id}`"
        )


_RUN_ROW = """
SELECT r.id AS run_id, r.kind, r.status, f.code AS first_period, l.code AS last_period,
       r.primal_cost AS cost, r.certificate_ok, coalesce(r.message, '') AS message, r.finished_at AS solved_at,
       r.cost_decimals, r.quantity_decimals
FROM solve_run r JOIN period f ON f.id = r.first_period_id JOIN period l ON l.id = r.last_period_id
"""


def run_info(conn: Connection, run_id: int) -> RunInfo:
    """The stored run ``run_id``.

    Raises
    ------
    PlannerError
        When there is no such run.
    """
    row = conn.execute(text(_RUN_ROW + "WHERE r.id = :run"), {"run": run_id}).mappings().first()
    if row is None:
        raise PlannerError(f"there is no run {run_id}; list the runs with `planner runs`")
    return RunInfo(**dict(row))


@dataclass(frozen=True)
class Chosen:
    """The run a command shows and the week it shows; ``run`` None when there is nothing to show (see ``message``)."""

    run: RunInfo | None
    period: str | None
    message: str = ""


def choose_run(
    engine: Engine, *, period: str | None, run_id: int | None, need_week: bool = True, optimal: bool = True
) -> Chosen:
    """The run and week a command asks about.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    period : str, optional
        An ISO week. Alone: its latest optimal week run. With ``run_id``: the
        week inside that run (for a linked horizon); may be left out when the
        run has one week.
    run_id : int, optional
        Any stored run, of any kind.
    need_week : bool
        Whether the command shows one week (then a horizon of several weeks
        needs ``period``).
    optimal : bool
        Whether the command needs the run's plan (then a run that did not end
        optimal raises :class:`~planner.errors.NotOptimal`).

    Returns
    -------
    Chosen
        With ``run`` None and a ``message`` when ``period`` alone has no
        optimal run.

    Raises
    ------
    PlannerError
        Unknown run, a week outside the run, a horizon without the week, neither given.
    NotOptimal
        The run (given, or the week's newest) did not end optimal.
    """
    if period is not None:
        checked_week(period)
    with engine.connect() as conn:
        if run_id is None:
            if period is None:
                raise PlannerError("name a week with --period WEEK or a run with --run ID (list them with `planner runs`)")
            found = conn.execute(
                text("SELECT run_id FROM latest_week_run WHERE period = :period"), {"period": period}
            ).scalar()
            if found is None:
                return Chosen(None, period, nothing_for(conn, period))
            run_id = int(found)
        info = run_info(conn, run_id)
    if optimal and not info.ok:
        raise info.not_optimal()
    return Chosen(info, _week_of(info, period, need_week))


def _week_of(info: RunInfo, period: str | None, need_week: bool) -> str | None:
    if period is None:
        if info.first_period == info.last_period:
            return info.first_period
        if need_week:
            raise PlannerError(
                f"{info.describe()} covers several weeks: choose one with --period, e.g. --period {info.first_period}"
            )
        return None
    if not info.covers(period):
        raise PlannerError(f"{info.describe()} does not cover {period}; choose a week from {info.span}")
    return period


def nothing_for(conn: Connection, period: str) -> str:
    """Why ``period`` has no optimal week run, and the next step that works.

    Returns
    -------
    str
        "not loaded: load it", "loaded, not solved: solve it", or "its newest
        run ended infeasible: see its certificate"; with the optimal linked
        horizon runs that cover the week, if any.
    """
    loaded = conn.execute(
        text("SELECT 1 FROM period p JOIN period_snapshot ps ON ps.period_id = p.id WHERE p.code = :p LIMIT 1"),
        {"p": period},
    ).first()
    if loaded is None:
        any_loaded = conn.execute(text("SELECT 1 FROM period_snapshot LIMIT 1")).first()
        if any_loaded is None:
            return f"nothing is loaded yet, so there is no run of {period}; load a folder with `planner load DIR`"
        return f"{period} was never loaded; load a folder that has it with `planner load DIR` (see `planner periods`)"
    newest = conn.execute(
        text("SELECT run_id, status FROM newest_week_run WHERE period = :p"), {"p": period}
    ).first()
    if newest is None:
        message = f"{period} is loaded but not solved yet; solve it with `planner solve --period {period}`"
    else:
        message = (
            f"no optimal run of {period}: its newest run {newest[0]} ended {newest[1]}; "
            f"see `planner certificate --run {newest[0]}`"
        )
    return message + _horizons_covering(conn, period)


def _horizons_covering(conn: Connection, period: str) -> str:
    found = conn.execute(
        text(
            "SELECT r.id, f.code, l.code FROM solve_run r JOIN period f ON f.id = r.first_period_id "
            "JOIN period l ON l.id = r.last_period_id JOIN period p ON p.code = :p "
            "WHERE r.kind = 'horizon' AND r.status = 'optimal' AND p.starts_on BETWEEN f.starts_on AND l.starts_on "
            "ORDER BY r.id DESC LIMIT 3"
        ),
        {"p": period},
    ).all()
    if not found:
        return ""
    runs = ", ".join(f"run {run} ({first}..{last})" for run, first, last in found)
    return f"; linked horizon runs that cover it: {runs} (add --run ID)"


_RUN_LIST = """
SELECT r.id AS run_id, r.kind,
       CASE WHEN r.kind = 'week' THEN f.code ELSE f.code || '..' || l.code END AS period,
       r.status, r.primal_cost AS cost, r.certificate_ok, r.shortage_units,
       coalesce(r.batch_id::text, (
           SELECT CASE WHEN min(b) = max(b) THEN min(b)::text ELSE min(b) || '..' || max(b) END FROM (
               SELECT (SELECT max(ps.batch_id) FROM period_snapshot ps JOIN load_batch lb ON lb.id = ps.batch_id
                       WHERE ps.period_id = p.id AND lb.loaded_at <= r.started_at) AS b
               FROM period p WHERE p.starts_on BETWEEN f.starts_on AND l.starts_on) batches
       )) AS batch,
       r.finished_at AS solved_at, round(r.total_seconds::numeric, 3) AS seconds,
       (lw.run_id IS NOT NULL OR lh.id IS NOT NULL) AS latest,
       f.code AS first_period, l.code AS last_period, coalesce(r.message, '') AS message
FROM solve_run r
JOIN period f ON f.id = r.first_period_id
JOIN period l ON l.id = r.last_period_id
LEFT JOIN latest_week_run lw ON lw.run_id = r.id
LEFT JOIN LATERAL (
    SELECT h.id FROM solve_run h
    WHERE r.kind = 'horizon' AND h.kind = 'horizon' AND h.status = 'optimal' AND h.scenario_id IS NULL
      AND h.first_period_id = r.first_period_id AND h.last_period_id = r.last_period_id
    ORDER BY h.finished_at DESC, h.id DESC LIMIT 1
) lh ON lh.id = r.id
WHERE (CAST(:kind AS text) IS NULL OR r.kind = :kind)
  AND (CAST(:status AS text) IS NULL OR r.status = :status)
  AND (CAST(:starts AS date) IS NULL OR CAST(:starts AS date) BETWEEN f.starts_on AND l.starts_on)
ORDER BY r.id DESC
LIMIT :last
"""


def run_list(
    engine: Engine,
    *,
    period: str | None = None,
    status: str | None = None,
    kind: str | None = None,
    last: int | None = None,
) -> pd.DataFrame:
    """Stored runs, oldest first: the week or span, status, cost, certificate, input batch, when, how long.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    period : str, optional
        Only runs that cover this ISO week (its week runs and the linked horizons over it).
    status : {"optimal", "infeasible", "unbounded", "failed", "running"}, optional
    kind : {"week", "horizon"}, optional
    last : int, optional
        Only the newest ``last`` runs (after the filters).

    Returns
    -------
    pandas.DataFrame
        :data:`RUN_LIST_COLUMNS`: ``period`` is ``FIRST..LAST`` for a horizon;
        ``batch`` the input batch (for a horizon, the range of its weeks'
        batches); ``seconds`` the whole run, store included; ``latest`` whether
        the views and reports show this run for its week (or span).

    Raises
    ------
    PlannerError
        For an unknown status or kind, or a bad week code.
    """
    if status is not None and status not in RUN_STATUSES:
        raise PlannerError(f"unknown run status {status!r}; choose one of {', '.join(RUN_STATUSES)}")
    if kind is not None and kind not in RUN_KINDS:
        raise PlannerError(f"unknown run kind {kind!r}; choose one of {', '.join(RUN_KINDS)}")
    starts = None if period is None else parse_week(checked_week(period))
    params = {"kind": kind, "status": status, "starts": starts, "last": last}
    with engine.connect() as conn:
        result = conn.execute(text(_RUN_LIST), params)
        rows = [dict(r) for r in result.mappings()]
    frame = pd.DataFrame(rows, columns=list(RUN_LIST_COLUMNS), dtype=object)
    return frame.iloc[::-1].reset_index(drop=True)
