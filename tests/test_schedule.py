"""Many weeks through the command line: ``planner solve --all/--from/--to`` and ``planner resolve``.

Each test loads CSV folders into a fresh database and runs the real command in
subprocesses, as cron would (quick follow-up commands that start no worker
processes run in-process with typer's CliRunner), then counts the stored runs
with SQL. The
concurrency test starts two ``planner resolve`` processes at the same moment
on the same PostgreSQL database and checks that every stale week was solved
exactly once between them. Lock waits are seen in ``pg_locks`` (polled, never
slept on); lock timeouts are made short with ``PLANNER_LOCK_TIMEOUT``.
"""

from __future__ import annotations

import re
import subprocess
import time
from collections import Counter

import sqlalchemy as sa

from planner.database.locks import LOCK_TIMEOUT_ENV, week_lock_name
from planner.runs.schedule import week_lock
from planner.runs.weekly import solve_period
from planner.synthetic.benchmark_network import benchmark_network
from planner.synthetic.frames import write_folder as write_network
from tests.helpers import PLANNER, invoke, planner

#: A resolve log line: the week code, then what happened to it.
LOG_LINE = re.compile(r"^(\d{4}-W\d{2}) (optimal|infeasible|unbounded|failed|skipped:)")
#: The line that closes a resolve's log.
SUMMARY_LINE = re.compile(r"^resolve: \d+ solved")

# Week 42 is infeasible: C3 has no shortage penalty and no lane leads to it.
INFEASIBLE_WEEK = {
    "supply.csv": "2026-W42,P1,60\n",
    "demand.csv": "2026-W42,C1,20,90\n2026-W42,C3,50,\n",
    "lanes.csv": "2026-W42,P1,W1,road,2.50,80,\n2026-W42,W1,C1,,1,,\n",
}






def load(folder, *options: str) -> None:
    result = invoke("load", str(folder), *options)
    assert result.exit_code == 0, result.output


def with_infeasible_week(files: dict[str, str]) -> dict[str, str]:
    return {name: text + INFEASIBLE_WEEK.get(name, "") for name, text in files.items()}


def week_runs(engine: sa.Engine) -> list[sa.Row]:
    with engine.connect() as conn:
        return conn.execute(
            sa.text(
                "SELECT r.id, p.code AS period, r.status, r.batch_id, r.certificate_ok "
                "FROM solve_run r JOIN period p ON p.id = r.period_id "
                "WHERE r.kind = 'week' ORDER BY r.id"
            )
        ).all()


def log_lines(stdout: str) -> dict[str, str]:
    """Week code -> its one log line; fails on a second line for the same week or a missing summary."""
    *weeks, summary = stdout.splitlines()
    assert SUMMARY_LINE.match(summary), f"no summary line at the end: {summary!r}"
    lines: dict[str, str] = {}
    for line in weeks:
        match = LOG_LINE.match(line)
        assert match, f"unexpected log line {line!r}"
        assert match[1] not in lines, f"two log lines for {match[1]}"
        lines[match[1]] = line
    return lines


def solved(lines: dict[str, str]) -> set[str]:
    return {week for week, line in lines.items() if " skipped: " not in line}


# --------------------------------------------------------------------------- solve --all


def test_solve_all_stores_every_week_despite_one_infeasible(
    engine: sa.Engine, write_folder, network_files
) -> None:
    load(write_folder(with_infeasible_week(network_files)))
    result = planner("solve", "--all", "--workers", "2")
    assert result.returncode == 1
    assert "Traceback" not in result.stderr

    by_week = {r.period: r for r in week_runs(engine)}
    assert set(by_week) == {"2026-W40", "2026-W41", "2026-W42"}
    assert len(week_runs(engine)) == 3
    for week in ("2026-W40", "2026-W41"):
        assert by_week[week].status == "optimal" and by_week[week].certificate_ok is True
    assert by_week["2026-W42"].status == "infeasible"

    # The summary table lists every week with its status; the bad week's
    # diagnosis follows on stderr.
    table = {line.split()[1]: line for line in result.stdout.splitlines() if "2026-W4" in line}
    assert set(table) == {"2026-W40", "2026-W41", "2026-W42"}
    assert "optimal" in table["2026-W40"] and "optimal" in table["2026-W41"]
    assert "infeasible" in table["2026-W42"]
    assert "2026-W42: week 2026-W42 is infeasible" in result.stderr
    assert "C3 (50)" in result.stderr


def test_solve_from_to_solves_only_that_range(engine: sa.Engine, write_folder, network_files) -> None:
    load(write_folder(with_infeasible_week(network_files)))
    result = planner("solve", "--from", "2026-W41", "--to", "2026-W42", "--workers", "2")
    assert result.returncode == 1  # week 42 is infeasible
    assert sorted(r.period for r in week_runs(engine)) == ["2026-W41", "2026-W42"]
    only_first = invoke("solve", "--to", "2026-W40")
    assert only_first.exit_code == 0, only_first.output
    assert Counter(r.period for r in week_runs(engine)) == Counter(
        {"2026-W40": 1, "2026-W41": 1, "2026-W42": 1}
    )


# --------------------------------------------------------------------------- resolve


def test_resolve_solves_exactly_the_weeks_whose_input_changed(
    engine: sa.Engine, write_folder, network_files
) -> None:
    load(write_folder(network_files))
    first = planner("resolve")
    assert first.returncode == 0, first.stderr
    lines = log_lines(first.stdout)
    assert solved(lines) == {"2026-W40", "2026-W41"}
    assert "never solved" in lines["2026-W40"]
    assert [r.status for r in week_runs(engine)] == ["optimal", "optimal"]

    again = planner("resolve")
    assert again.returncode == 0, again.stderr
    lines = log_lines(again.stdout)
    assert set(lines) == {"2026-W40", "2026-W41"} and not solved(lines)
    assert all("skipped: up to date" in line for line in lines.values())
    assert len(week_runs(engine)) == 2

    # A new batch: week 40 with identical rows, week 41 with one demand changed.
    changed = dict(network_files)
    changed["demand.csv"] = changed["demand.csv"].replace("2026-W41,C1,35,90", "2026-W41,C1,36,90")
    load(write_folder(changed))

    dry = invoke("resolve", "--dry-run")
    assert dry.exit_code == 0, dry.output
    (listed,) = dry.stdout.splitlines()
    assert listed.startswith("2026-W41 would be solved: input changed since run ")
    assert len(week_runs(engine)) == 2

    third = planner("resolve")
    assert third.returncode == 0, third.stderr
    lines = log_lines(third.stdout)
    assert solved(lines) == {"2026-W41"}
    assert "input changed since run" in lines["2026-W41"]
    runs = week_runs(engine)
    assert Counter(r.period for r in runs) == Counter({"2026-W40": 1, "2026-W41": 2})
    assert runs[-1].period == "2026-W41" and runs[-1].batch_id == 2

    quiet = invoke("resolve", "--dry-run")
    assert quiet.stdout.strip() == "nothing to solve: every loaded week is up to date"


def test_resolve_reports_an_infeasible_week_once_and_then_leaves_it(
    engine: sa.Engine, write_folder, network_files
) -> None:
    load(write_folder(with_infeasible_week(network_files)))
    first = planner("resolve")
    assert first.returncode == 1
    assert "Traceback" not in first.stderr
    lines = log_lines(first.stdout)
    assert solved(lines) == {"2026-W40", "2026-W41", "2026-W42"}
    assert lines["2026-W42"].startswith("2026-W42 infeasible run ")

    # Solving the same input again would give the same verdict: cron moves on.
    second = planner("resolve")
    assert second.returncode == 0, second.stderr
    assert "which was infeasible" in log_lines(second.stdout)["2026-W42"]
    assert len(week_runs(engine)) == 3


def hold_week_lock(conn: sa.Connection, period: str) -> int:
    """Hold the planner's lock of ``period`` on ``conn`` (until it rolls back), as a solve does; its pid."""
    name = week_lock_name(period)
    conn.execute(sa.text("INSERT INTO planner_lock (name) VALUES (:name) ON CONFLICT DO NOTHING"), {"name": name})
    conn.commit()
    conn.execute(sa.text("SELECT name FROM planner_lock WHERE name = :name FOR UPDATE"), {"name": name})
    return conn.execute(sa.text("SELECT pg_backend_pid()")).scalar_one()


def test_a_solve_and_resolve_give_up_on_a_week_whose_lock_is_held_past_the_timeout(
    engine: sa.Engine, write_folder, network_files, monkeypatch
) -> None:
    monkeypatch.setenv(LOCK_TIMEOUT_ENV, "2")
    load(write_folder(network_files))
    with engine.connect() as holder:
        holder_pid = hold_week_lock(holder, "2026-W41")
        solve = subprocess.Popen(
            [*PLANNER, "solve", "--period", "2026-W41"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
        )
        # The solve really waits for the held lock before it gives up.
        assert wait_until(lambda: lock_waiters(engine, holder_pid) == 1 or solve.poll() is not None)
        assert solve.poll() is None, "the solve did not wait for the lock"
        _, stderr = solve.communicate(timeout=60)
        busy = planner("resolve")
        holder.rollback()
    assert solve.returncode == 4, stderr
    assert "Traceback" not in stderr
    message = " ".join(stderr.split())
    assert f"2026-W41: week 2026-W41: locked by another session (pid {holder_pid}, user " in message
    assert "which did not release it within 2 s; let that solve finish and solve the week again, " in message
    assert "or set PLANNER_LOCK_TIMEOUT to wait longer" in message

    assert busy.returncode == 4, busy.stderr
    lines = log_lines(busy.stdout)
    assert solved(lines) == {"2026-W40"}
    assert lines["2026-W41"].startswith(f"2026-W41 skipped: locked by another session (pid {holder_pid}, user ")
    assert lines["2026-W41"].endswith(" for more than 2 s")
    summary = busy.stdout.splitlines()[-1]
    assert summary == (
        "resolve: 1 solved, 1 not solved because another session held the lock for more than 2 s "
        "(2026-W41); run resolve again once it is released"
    )
    assert [r.period for r in week_runs(engine)] == ["2026-W40"]

    free = invoke("resolve")
    assert free.exit_code == 0, free.output
    assert solved(log_lines(free.stdout)) == {"2026-W41"}
    assert Counter(r.period for r in week_runs(engine)) == Counter({"2026-W40": 1, "2026-W41": 1})


def test_resolve_waits_for_a_week_another_process_is_solving_and_leaves_it_to_that_process(
    engine: sa.Engine, write_folder, network_files
) -> None:
    load(write_folder(network_files))
    with week_lock(engine, "2026-W41") as held:
        assert held
        resolving = subprocess.Popen([*PLANNER, "resolve"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True)
        # resolve has solved week 40 and now waits for week 41, which this
        # process is solving (within the default timeout of 60 s).
        assert wait_until(lambda: lock_waiters(engine) == 1 or resolving.poll() is not None)
        assert resolving.poll() is None, "resolve did not wait for the week's lock"
        run_id = solve_period(engine, "2026-W41").run_id
    stdout, stderr = resolving.communicate(timeout=120)
    assert resolving.returncode == 0, stderr
    lines = log_lines(stdout)
    assert solved(lines) == {"2026-W40"}
    assert lines["2026-W41"] == f"2026-W41 skipped: being solved by another process; up to date (run {run_id})"
    assert stdout.splitlines()[-1] == "resolve: 1 solved, 1 solved by another process (2026-W41)"
    assert Counter(r.period for r in week_runs(engine)) == Counter({"2026-W40": 1, "2026-W41": 1})


def test_resolve_does_not_solve_again_a_week_that_failed_on_its_unchanged_input(
    engine: sa.Engine, write_folder, network_files
) -> None:
    files = dict(network_files)
    files["lanes.csv"] = files["lanes.csv"].replace("2026-W41,W1,C3,,2,,", "2026-W41,W1,C3,,2.000001,,")
    # Loaded for a finer precision than the resolve below uses (the load checks its own).
    load(write_folder(files), "--cost-decimals", "6")
    first = planner("resolve")
    assert first.returncode == 1, first.stderr
    lines = log_lines(first.stdout)
    assert solved(lines) == {"2026-W40", "2026-W41"}
    assert lines["2026-W41"].startswith("2026-W41 failed run ")
    # The failure line says why: the figure and the precision.
    assert "value 2.000001 has more than 4 decimals" in lines["2026-W41"]
    assert "solve with a larger --cost-decimals" in lines["2026-W41"]
    (failed,) = [r for r in week_runs(engine) if r.status == "failed"]

    second = planner("resolve")
    assert second.returncode == 0, second.stderr
    line = log_lines(second.stdout)["2026-W41"]
    assert line.startswith(f"2026-W41 skipped: input unchanged since run {failed.id}, which failed: ")
    assert "value 2.000001 has more than 4 decimals" in line
    assert len(week_runs(engine)) == 2

    # A run failed by another version of the planner is tried again.
    with engine.begin() as conn:
        conn.execute(sa.text("UPDATE solve_run SET planner_version = '0.0.1' WHERE id = :id"), {"id": failed.id})
    newer = invoke("resolve")
    assert newer.exit_code == 1, newer.output
    assert solved(log_lines(newer.stdout)) == {"2026-W41"}
    assert [r.status for r in week_runs(engine)] == ["optimal", "failed", "failed"]

    # Enough decimals make another input: both weeks are solved at the new precision.
    precise = invoke("resolve", "--cost-decimals", "6")
    assert precise.exit_code == 0, precise.output
    assert solved(log_lines(precise.stdout)) == {"2026-W40", "2026-W41"}
    assert week_runs(engine)[-1].status == "optimal"


def test_two_resolves_started_together_solve_each_week_once(engine: sa.Engine, tmp_path) -> None:
    frames = benchmark_network(
        n_plants=10, n_warehouses=40, n_customers=4000, n_lanes=30_000, weeks=8, seed=5
    )
    load(write_network(frames, tmp_path / "eight-weeks"))
    weeks = sorted(set(frames.supply["period"]))
    assert len(weeks) == 8

    processes = [
        subprocess.Popen(
            [*PLANNER, "resolve"], stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True
        )
        for _ in range(2)
    ]
    outputs = [p.communicate(timeout=180) for p in processes]

    for process, (stdout, stderr) in zip(processes, outputs):
        assert process.returncode == 0, stderr
        assert "Traceback" not in stderr
        # One line per week in each process: solved, or skipped with the reason.
        assert set(log_lines(stdout)) == set(weeks)
    solved_by = [solved(log_lines(stdout)) for stdout, _ in outputs]
    assert solved_by[0].isdisjoint(solved_by[1])
    assert solved_by[0] | solved_by[1] == set(weeks)
    # They really ran at the same time: each solved some weeks and skipped
    # weeks the other was solving or had just solved.
    assert solved_by[0] and solved_by[1], solved_by

    runs = week_runs(engine)
    assert Counter(r.period for r in runs) == Counter({w: 1 for w in weeks})
    assert all(r.status == "optimal" and r.certificate_ok for r in runs)


def lock_waiters(engine: sa.Engine, holder_pid: int | None = None) -> int:
    """Sessions waiting for a planner lock (a row of ``planner_lock``), held by ``holder_pid`` if given."""
    with engine.connect() as conn:
        return conn.execute(
            sa.text(
                "SELECT count(*) FROM pg_stat_activity a "
                "WHERE a.datname = current_database() AND cardinality(pg_blocking_pids(a.pid)) > 0 "
                "AND (CAST(:holder AS int) IS NULL OR :holder = ANY(pg_blocking_pids(a.pid))) "
                "AND EXISTS (SELECT FROM pg_locks l WHERE l.pid = a.pid AND l.locktype = 'tuple' "
                "AND l.relation = 'planner_lock'::regclass)"
            ),
            {"holder": holder_pid},
        ).scalar_one()


def wait_until(condition, timeout: float = 60.0) -> bool:
    """Poll ``condition`` until it holds or ``timeout`` seconds pass."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline:
        if condition():
            return True
        time.sleep(0.05)
    return False


def test_solve_all_waits_for_a_week_that_resolve_holds(engine: sa.Engine, write_folder, network_files) -> None:
    import threading

    from planner.runs.schedule import solve_many

    load(write_folder(network_files))
    url = engine.url.render_as_string(hide_password=False)
    with week_lock(engine, "2026-W40", wait=False) as held:
        assert held
        result = {}
        worker = threading.Thread(
            target=lambda: result.update(out=solve_many(url, ["2026-W40"], workers=1))
        )
        worker.start()
        # The explicit solve waits for the week's lock: the server shows its
        # session waiting on that row (polled, never a fixed sleep).
        assert wait_until(lambda: lock_waiters(engine) == 1), "the solve never waited for the lock"
        assert worker.is_alive()
        assert week_runs(engine) == []
    worker.join(timeout=60)
    assert not worker.is_alive()
    assert [o.ok for o in result["out"]] == [True]
    assert [r.period for r in week_runs(engine)] == ["2026-W40"]


def test_weeks_chained_warm_cost_what_ortools_gives_cold_and_certify(engine: sa.Engine, database_url: str,
                                                                     tmp_path) -> None:
    # Reference: OR-Tools' min-cost-flow solver, solving each week cold
    # (solve_many(..., warm=False)); the warm chain must reach the same optimal
    # cost on every week, each proved by its own certificate.
    from planner.database.connect import get_engine
    from planner.runs.schedule import solve_many

    frames = benchmark_network(n_plants=6, n_warehouses=20, n_customers=800, n_lanes=6_000, weeks=5, seed=11)
    load(write_network(frames, tmp_path / "five-weeks"))
    weeks = sorted(set(frames.supply["period"]))
    url = engine.url.render_as_string(hide_password=False)
    warm = solve_many(url, weeks, workers=1, warm=True)
    cold = solve_many(url, weeks, workers=1, warm=False)
    assert [o.summary.status for o in warm] == ["optimal"] * 5
    assert [o.summary.cost for o in warm] == [o.summary.cost for o in cold]
    assert all(o.summary.certificate_ok for o in warm + cold)
    assert {o.summary.engine for o in cold} == {"ortools"}
    # The first week has nothing to start from (or a state of another layout);
    # the later weeks of one network start warm from the week before.
    assert [o.summary.engine for o in warm[1:]] == ["warm"] * 4
    get_engine(url).dispose()
    # Both chains stored the same price ranges for every site of every week: the
    # ends are the cost of one unit less or more, whichever optimal flow was found.
    with engine.connect() as conn:
        prices = conn.execute(sa.text(
            "SELECT r.period, r.site_id, r.price_low, r.price_high FROM run_site_price r"
        )).all()
    by_key: dict = {}
    for period, site_id, low, high in prices:
        by_key.setdefault((period, site_id), set()).add((low, high))
    assert len(by_key) == len(prices) // 2
    assert all(len(ends) == 1 for ends in by_key.values())


def test_solve_all_warm_records_the_engine_of_each_week(engine: sa.Engine, tmp_path) -> None:
    frames = benchmark_network(n_plants=6, n_warehouses=20, n_customers=800, n_lanes=6_000, weeks=3, seed=11)
    load(write_network(frames, tmp_path / "three-weeks"))
    cold = invoke("solve", "--all", "--workers", "1")
    warm = invoke("solve", "--all", "--workers", "1", "--warm")
    assert cold.exit_code == 0 and warm.exit_code == 0, (cold.output, warm.output)
    with engine.connect() as conn:
        engines = conn.execute(sa.text("SELECT engine FROM solve_run ORDER BY id")).scalars().all()
    # Cold: OR-Tools every week. Warm: each week after the first starts from the one before.
    assert engines[:3] == ["ortools"] * 3
    assert engines[4:] == ["warm", "warm"]

