"""Years of runs that stay fast: one result partition per week, retention, pinned runs.

The result tables (``run_flow``, ``run_site_price``, ``run_stock``,
``run_limit``) are LIST-partitioned by period, one partition per week
(migration 0006). Storing a week writes its partition, reading a week reads
it, and retention deletes old runs' rows inside it, so each costs what the
week's own retained runs cost, however long the history.

Retention (:func:`prune`) keeps, per week, its newest ``keep`` week runs and,
per span of weeks, its newest ``keep`` horizon runs; and always the runs a
user pinned (:func:`pin`), runs still running, and the latest optimal run of
each week and of each span (the views and ``resolve`` stand on those). It
deletes the other runs and their rows in one transaction.
"""

from __future__ import annotations

from dataclasses import dataclass

from sqlalchemy import Connection, Engine, text

from planner.errors import PlannerError

__all__ = ["PrunePlan", "ensure_partitions", "pin", "pinned_runs", "prune", "prune_plan", "unpin"]

RESULT_TABLES = ("run_flow", "run_site_price", "run_stock", "run_limit")


def ensure_partitions(conn: Connection, periods) -> None:
    """Create the result-table partitions of these periods (codes) where missing.

    Run it in its own short transaction before a store: creating a partition
    locks its parent table, which must not stay locked for a whole store. A
    period whose partitions exist costs one catalogue lookup per table.
    """
    codes = sorted(set(periods))
    if codes:
        conn.execute(text("SELECT planner_result_partitions(p) FROM unnest(CAST(:codes AS text[])) AS p"),
                     {"codes": codes})


# Every run with its group (a week, or a span of weeks for horizon runs), its
# place among the group's runs (newest first; running runs count as newest) and
# why it is kept. The latest optimal run of a group is the one the views show.
_RANKED = """
WITH ranked AS (
    SELECT r.id, r.kind, r.status, r.first_period_id, r.last_period_id,
           row_number() OVER (PARTITION BY r.kind, r.scenario_id, r.first_period_id, r.last_period_id
                              ORDER BY r.finished_at DESC NULLS FIRST, r.id DESC) AS place,
           row_number() OVER (PARTITION BY r.kind, r.scenario_id, r.first_period_id, r.last_period_id, r.status = 'optimal'
                              ORDER BY r.finished_at DESC NULLS FIRST, r.id DESC) AS place_in_status,
           EXISTS (SELECT FROM run_pin pin WHERE pin.run_id = r.id) AS pinned
    FROM solve_run r
)
SELECT k.id, k.kind, k.status, fp.code AS first_period, lp.code AS last_period, k.place,
       CASE WHEN k.pinned THEN 'pinned'
            WHEN k.status = 'running' THEN 'running'
            WHEN k.status = 'optimal' AND k.place_in_status = 1 THEN 'latest optimal'
            WHEN k.place <= :keep THEN 'newest'
       END AS kept_because
FROM ranked k
JOIN period fp ON fp.id = k.first_period_id
JOIN period lp ON lp.id = k.last_period_id
ORDER BY fp.starts_on, lp.starts_on, k.kind, k.place
"""


@dataclass(frozen=True)
class PrunePlan:
    """What :func:`prune` keeps and drops."""

    keep: int
    kept: int
    #: ``(run id, kind, first period, last period, status)`` of each run to drop.
    dropped: list[tuple[int, str, str, str, str]]
    #: Result rows of the dropped runs per table.
    rows: dict[str, int]
    #: Runs kept only because they are pinned.
    pinned: int

    @property
    def groups(self) -> dict[str, list[int]]:
        """Dropped run ids per week (or span ``first..last``)."""
        out: dict[str, list[int]] = {}
        for run_id, _, first, last, _ in self.dropped:
            out.setdefault(first if first == last else f"{first}..{last}", []).append(run_id)
        return out


def prune_plan(conn: Connection, keep: int) -> PrunePlan:
    """The runs :func:`prune` would drop, and their rows, without changing anything."""
    if keep < 1:
        raise PlannerError(f"--keep must be at least 1, got {keep}")
    runs = conn.execute(text(_RANKED), {"keep": keep}).all()
    dropped = [(r.id, r.kind, r.first_period, r.last_period, r.status) for r in runs if r.kept_because is None]
    pinned = sum(1 for r in runs if r.kept_because == "pinned" and r.place > keep)
    pairs = _run_periods(conn, [d[0] for d in dropped])
    rows = {table: 0 for table in RESULT_TABLES}
    for period, run_ids in pairs.items():
        for table in RESULT_TABLES:
            rows[table] += conn.execute(
                text(f"SELECT count(*) FROM {table} WHERE period = :p AND run_id = ANY(:runs)"),
                {"p": period, "runs": run_ids},
            ).scalar_one()
    return PrunePlan(keep, len(runs) - len(dropped), dropped, rows, pinned)


def _run_periods(conn: Connection, run_ids: list[int]) -> dict[str, list[int]]:
    """``period code -> run ids`` of the given runs' periods (a horizon run spans several)."""
    if not run_ids:
        return {}
    pairs = conn.execute(
        text(
            "SELECT p.code AS period, array_agg(r.id ORDER BY r.id) AS runs FROM solve_run r "
            "JOIN period fp ON fp.id = r.first_period_id JOIN period lp ON lp.id = r.last_period_id "
            "JOIN period p ON p.starts_on BETWEEN fp.starts_on AND lp.starts_on "
            "WHERE r.id = ANY(:runs) GROUP BY p.code, p.starts_on ORDER BY p.starts_on"
        ),
        {"runs": run_ids},
    ).all()
    return {row.period: list(row.runs) for row in pairs}


def prune(engine: Engine, keep: int, *, dry_run: bool = False) -> PrunePlan:
    """Drop every run retention does not keep, with its result rows, in one transaction.

    Each week's rows are deleted with the week's code in the statement, so
    each delete reads one partition only.

    Returns
    -------
    PrunePlan
        What was dropped (with ``dry_run``: what would be).
    """
    with engine.begin() as conn:
        # Runs stored while pruning are newer than every run it drops. The share
        # lock waits for pins being made and holds new ones until the commit.
        conn.execute(text("LOCK TABLE run_pin IN SHARE MODE"))
        plan = prune_plan(conn, keep)
        if dry_run or not plan.dropped:
            return plan
        run_ids = [d[0] for d in plan.dropped]
        for period, runs in _run_periods(conn, run_ids).items():
            for table in RESULT_TABLES:
                conn.execute(
                    text(f"DELETE FROM {table} WHERE period = :p AND run_id = ANY(:runs)"),
                    {"p": period, "runs": runs},
                )
        conn.execute(text("DELETE FROM solve_run WHERE id = ANY(:runs)"), {"runs": run_ids})
    return plan


def pin(engine: Engine, run_ids: list[int], note: str | None = None) -> list[int]:
    """Pin runs so that retention keeps them; returns the ids newly pinned.

    Raises
    ------
    PlannerError
        When a run id does not exist (nothing is pinned then).
    """
    with engine.begin() as conn:
        found = set(
            conn.execute(text("SELECT id FROM solve_run WHERE id = ANY(:ids) FOR SHARE"), {"ids": run_ids}).scalars()
        )
        missing = sorted(set(run_ids) - found)
        if missing:
            raise PlannerError(f"no run with id {', '.join(map(str, missing))}; `planner runs` lists the runs")
        return list(
            conn.execute(
                text(
                    "INSERT INTO run_pin (run_id, note) SELECT unnest(CAST(:ids AS bigint[])), :note "
                    "ON CONFLICT (run_id) DO NOTHING RETURNING run_id"
                ),
                {"ids": sorted(found), "note": note},
            ).scalars()
        )


def unpin(engine: Engine, run_ids: list[int]) -> list[int]:
    """Unpin runs; returns the ids that were pinned."""
    with engine.begin() as conn:
        return list(
            conn.execute(
                text("DELETE FROM run_pin WHERE run_id = ANY(:ids) RETURNING run_id"), {"ids": run_ids}
            ).scalars()
        )


def pinned_runs(engine: Engine) -> list[dict]:
    """Every pinned run: id, kind, weeks, status, when and by whom pinned, note."""
    with engine.connect() as conn:
        rows = conn.execute(
            text(
                "SELECT pin.run_id, r.kind, fp.code AS first_period, lp.code AS last_period, r.status, "
                "pin.pinned_at, pin.pinned_by, pin.note FROM run_pin pin JOIN solve_run r ON r.id = pin.run_id "
                "JOIN period fp ON fp.id = r.first_period_id JOIN period lp ON lp.id = r.last_period_id "
                "ORDER BY pin.run_id"
            )
        ).mappings()
        return [dict(row) for row in rows]
