"""Retention of stored runs (``planner prune``) and pinned runs (``planner pin`` / ``unpin``).

What retention must keep is the product's own rule (README, "Keeping years of
history"): per week the newest ``--keep`` runs, the latest optimal run (the
views stand on it), runs still running and every pinned run; everything else
goes, with its result rows, in one transaction; ``--dry-run`` changes nothing.
"""

from __future__ import annotations

import pytest
import sqlalchemy as sa

from planner.database.history import RESULT_TABLES, pin, prune, prune_plan
from planner.errors import PlannerError
from tests.helpers import invoke


def result_rows(engine: sa.Engine) -> dict[int, dict[str, int]]:
    """``run id -> table -> rows`` over every result table."""
    out: dict[int, dict[str, int]] = {}
    with engine.connect() as conn:
        for table in RESULT_TABLES:
            for run_id, count in conn.execute(sa.text(f"SELECT run_id, count(*) FROM {table} GROUP BY run_id")):
                out.setdefault(run_id, {})[table] = count
    return out


def runs(engine: sa.Engine) -> list[tuple[int, str, str]]:
    with engine.connect() as conn:
        return [
            tuple(r)
            for r in conn.execute(
                sa.text("SELECT r.id, p.code, r.status FROM solve_run r JOIN period p ON p.id = r.first_period_id "
                        "ORDER BY r.id")
            )
        ]


def view(engine: sa.Engine, sql: str) -> list[tuple]:
    with engine.connect() as conn:
        return [tuple(r) for r in conn.execute(sa.text(sql))]


@pytest.fixture
def history(engine: sa.Engine, write_folder, network_files) -> sa.Engine:
    """Week 2026-W40 solved three times, 2026-W41 once, a horizon over both, and a run still running."""
    assert invoke("load", str(write_folder(network_files))).exit_code == 0
    for _ in range(3):
        assert invoke("solve", "--period", "2026-W40").exit_code == 0
    assert invoke("solve", "--period", "2026-W41").exit_code == 0
    assert invoke("solve", "--horizon", "2026-W40..2026-W41").exit_code == 0
    with engine.begin() as conn:
        # A solve another process has begun on 2026-W41 (no results yet).
        conn.execute(sa.text(
            "INSERT INTO solve_run (kind, period_id, first_period_id, last_period_id, batch_id, input_fingerprint, "
            "status, cost_decimals, quantity_decimals) SELECT kind, period_id, first_period_id, last_period_id, "
            "batch_id, input_fingerprint, 'running', cost_decimals, quantity_decimals FROM solve_run WHERE id = 4"
        ))
    return engine


VIEWS = (
    "SELECT * FROM site_price_history ORDER BY 1, 2, 3",
    "SELECT * FROM lane_flow ORDER BY 1, 2, 3, 4",
    "SELECT * FROM binding_capacity ORDER BY 1, 2, 3",
)


def test_prune_keeps_newest_latest_optimal_running_and_pinned_runs_and_drops_the_rest(history: sa.Engine) -> None:
    engine = history
    assert [(r[0], r[1], r[2]) for r in runs(engine)] == [
        (1, "2026-W40", "optimal"), (2, "2026-W40", "optimal"), (3, "2026-W40", "optimal"),
        (4, "2026-W41", "optimal"), (5, "2026-W40", "optimal"), (6, "2026-W41", "running"),
    ]
    assert pin(engine, [1], "kept for the review") == [1]
    before_rows = result_rows(engine)
    before_views = [view(engine, sql) for sql in VIEWS]
    assert set(before_rows) == {1, 2, 3, 4, 5}

    # --dry-run lists run 2 only (run 1 pinned, run 3 newest and latest optimal of W40,
    # run 4 latest optimal of W41, run 5 the only horizon run, run 6 running) and changes nothing.
    dry = invoke("prune", "--keep", "1", "--dry-run")
    assert dry.exit_code == 0, dry.output
    assert "would drop 1 run (" in dry.output and "nothing was dropped (--dry-run)" in dry.output
    assert "1 run kept only because pinned" in dry.output
    assert result_rows(engine) == before_rows and len(runs(engine)) == 6

    done = invoke("prune", "--keep", "1")
    assert done.exit_code == 0, done.output
    assert "dropped 1 run (" in done.output
    assert [r[0] for r in runs(engine)] == [1, 3, 4, 5, 6]
    after_rows = result_rows(engine)
    assert 2 not in after_rows
    assert after_rows == {k: v for k, v in before_rows.items() if k != 2}
    # The views stand on the latest optimal runs, which stay.
    assert [view(engine, sql) for sql in VIEWS] == before_views

    again = invoke("prune", "--keep", "1")
    assert again.exit_code == 0 and "nothing to drop: 5 runs kept" in again.output


def test_unpinned_runs_go_and_the_latest_optimal_run_stays_even_when_newer_runs_failed(history: sa.Engine) -> None:
    engine = history
    with engine.begin() as conn:
        # Two newer runs of 2026-W40 that did not end optimal.
        for _ in range(2):
            conn.execute(sa.text(
                "INSERT INTO solve_run (kind, period_id, first_period_id, last_period_id, batch_id, "
                "input_fingerprint, status, message, finished_at, cost_decimals, quantity_decimals) "
                "SELECT kind, period_id, first_period_id, last_period_id, batch_id, input_fingerprint, 'failed', "
                "'test', now() + interval '1 hour', cost_decimals, quantity_decimals FROM solve_run WHERE id = 3"
            ))
    assert invoke("pin", "1", "2").exit_code == 0
    listed = invoke("pin")
    assert listed.exit_code == 0 and "2026-W40" in listed.output
    unpinned = invoke("unpin", "2", "9")
    assert unpinned.exit_code == 0 and "unpinned 2; not pinned: 9" in unpinned.output
    with engine.connect() as conn:
        plan = prune_plan(conn, 1)
    # W40: 8 (failed, newest) kept as newest, 3 kept as the latest optimal, 1 pinned; 2 and 7 go.
    assert sorted(d[0] for d in plan.dropped) == [2, 7]
    assert plan.rows["run_site_price"] == result_rows(engine)[2]["run_site_price"]
    prune(engine, 1)
    assert [r[0] for r in runs(engine)] == [1, 3, 4, 5, 6, 8]


def test_pin_refuses_unknown_runs_and_prune_refuses_keep_zero(history: sa.Engine) -> None:
    with pytest.raises(PlannerError, match="no run with id 99"):
        pin(history, [1, 99])
    assert invoke("pin").output.strip() == "no pinned runs"
    with pytest.raises(PlannerError, match="at least 1"):
        prune(history, 0)
    assert len(runs(history)) == 6


def test_a_pinned_run_is_unpinned_when_dropped_by_hand(history: sa.Engine) -> None:
    pin(history, [2])
    with history.begin() as conn:
        conn.execute(sa.text("DELETE FROM solve_run WHERE id = 2"))
        assert conn.execute(sa.text("SELECT count(*) FROM run_pin")).scalar_one() == 0
