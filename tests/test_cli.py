"""The ``planner`` command line end to end on a real PostgreSQL.

Most tests run the Typer app in-process with ``typer.testing.CliRunner``; the
textbook example runs the installed ``planner`` script in a subprocess, as a
user would.
"""

from __future__ import annotations

import os
import re
import shutil
import subprocess
import sys
from decimal import Decimal
from pathlib import Path

import numpy as np
import psycopg
import pytest
from psycopg import sql
from scipy.optimize import linprog
from sqlalchemy import text
from sqlalchemy.engine import make_url
from typer.testing import CliRunner

from planner.cli import app
from planner.database.connect import DATABASE_URL_ENV
from planner.database.migrate import head_revision
from planner.runs.demo import price_movers

runner = CliRunner()

INPUT_TABLES = (
    "load_batch", "site", "site_version", "period", "period_snapshot", "supply", "demand", "lane", "lane_rate",
)


def invoke(*args: str):
    return runner.invoke(app, list(args))


def flat(output: str) -> str:
    """Output with line breaks and runs of spaces collapsed (rich wraps long messages)."""
    return " ".join(output.split())


def table_counts(engine, tables=INPUT_TABLES) -> dict[str, int]:
    with engine.connect() as conn:
        return {t: conn.execute(text(f"SELECT count(*) FROM {t}")).scalar_one() for t in tables}


def planner_script() -> str:
    """The ``planner`` console script installed next to this interpreter."""
    script = Path(sys.executable).with_name("planner")
    found = str(script) if script.exists() else shutil.which("planner")
    assert found, "the planner console script is not installed"
    return found


# --------------------------------------------------------------------------- init and load


def test_init_creates_the_schema_on_an_empty_database_and_is_idempotent(test_server, database_url):
    name = f"planner_cli_init_{os.getpid()}"
    admin = test_server.set(drivername="postgresql").render_as_string(hide_password=False)
    target_url = make_url(database_url).set(database=name)
    target = target_url.render_as_string(hide_password=False)
    with psycopg.connect(admin, autocommit=True) as conn:
        conn.execute(sql.SQL("DROP DATABASE IF EXISTS {} WITH (FORCE)").format(sql.Identifier(name)))
        conn.execute(sql.SQL("CREATE DATABASE {}").format(sql.Identifier(name)))
    try:
        first = invoke("init", "--database-url", target)
        assert first.exit_code == 0, first.output
        assert f"created the schema (revision {head_revision()}) on postgresql://" in first.stdout
        assert name in first.stdout
        with psycopg.connect(target_url.set(drivername="postgresql").render_as_string(hide_password=False)) as conn:
            tables = {r[0] for r in conn.execute("SELECT tablename FROM pg_tables WHERE schemaname = 'public'")}
            views = {r[0] for r in conn.execute("SELECT viewname FROM pg_views WHERE schemaname = 'public'")}
        assert {"alembic_version", "solve_run", "run_flow", "run_site_price", *INPUT_TABLES} <= tables
        assert "site_price_history" in views
        again = invoke("init", "--database-url", target)
        assert again.exit_code == 0, again.output
        assert f"schema already up to date (revision {head_revision()})" in again.stdout
    finally:
        with psycopg.connect(admin, autocommit=True) as conn:
            conn.execute(sql.SQL("DROP DATABASE IF EXISTS {} WITH (FORCE)").format(sql.Identifier(name)))


def test_load_reports_the_batch_and_a_reload_is_a_no_op(engine, write_folder, network_files):
    folder = write_folder(network_files)
    result = invoke("load", str(folder))
    assert result.exit_code == 0, result.output
    assert f"loaded batch 1 from {folder}: 2 periods 2026-W40..2026-W41" in flat(result.stdout)
    assert "sites.csv 6, supply.csv 4, demand.csv 6, lanes.csv 12" in flat(result.stdout)
    before = table_counts(engine)
    assert before["load_batch"] == 1 and before["lane_rate"] == 12

    # The same bytes in another folder are still the same batch.
    for source in (folder, write_folder(network_files)):
        again = invoke("load", str(source))
        assert again.exit_code == 0, again.output
        assert f"{source} is identical to batch 1" in flat(again.stdout)
        assert "nothing was loaded" in flat(again.stdout)
    assert table_counts(engine) == before


def broken(network_files: dict[str, str]) -> dict[str, str]:
    files = dict(network_files)
    files["lanes.csv"] = files["lanes.csv"].replace("2026-W40,P2,W1,road,3,,", "2026-W40,P2,W1,road,3,-5,")
    files["supply.csv"] = files["supply.csv"].replace("2026-W41,P2,40", "2026-W41,P7,40")
    return files


def test_load_errors_exit_2_name_file_line_column_value_and_write_nothing(engine, write_folder, network_files):
    result = invoke("load", str(write_folder(broken(network_files))))
    assert result.exit_code == 2
    assert "lanes.csv:3: column capacity: value '-5': capacity must be >= 0" in result.stderr
    assert "supply.csv:5: column site: value 'P7': unknown site" in result.stderr
    assert "nothing was loaded" in result.stderr
    assert "loaded batch" not in result.stdout
    assert set(table_counts(engine).values()) == {0}


def test_a_bad_load_after_a_good_one_leaves_the_database_as_it_was(engine, write_folder, network_files):
    assert invoke("load", str(write_folder(network_files))).exit_code == 0
    before = table_counts(engine)
    result = invoke("load", str(write_folder(broken(network_files))))
    assert result.exit_code == 2
    assert "lanes.csv:3: column capacity: value '-5'" in result.stderr
    assert table_counts(engine) == before


# --------------------------------------------------------------------------- solve, certificate, periods


def test_solve_one_period_prints_the_run_table(engine, write_folder, network_files):
    assert invoke("load", str(write_folder(network_files))).exit_code == 0
    result = invoke("solve", "--period", "2026-W40")
    assert result.exit_code == 0, result.output
    row = next(line for line in result.stdout.splitlines() if "2026-W40" in line)
    for column in ("period", "run", "status", "cost", "shortage", "certificate"):
        assert column in result.stdout
    with engine.connect() as conn:
        run_id, cost = conn.execute(text("SELECT id, primal_cost FROM solve_run")).one()
    assert re.search(rf"\b{run_id}\b", row)
    assert "optimal" in row and f"{cost:,.2f}" in row and "exact" in row
    assert "cost (XXX)" in result.stdout  # no currency set yet: ISO 4217's "no currency"
    assert invoke("currency", "EUR").exit_code == 0
    again = invoke("solve", "--period", "2026-W41")
    assert again.exit_code == 0 and "cost (EUR)" in again.stdout


@pytest.mark.parametrize(
    "options",
    [
        pytest.param([], id="no-selection"),
        pytest.param(["--period", "2026-W40", "--all"], id="two-selections"),
        pytest.param(["--period", "2026-W40", "--horizon", "2026-W40..2026-W41"], id="week-and-horizon"),
    ],
)
def test_solve_without_exactly_one_period_selection_is_a_usage_error(engine, write_folder, network_files, options):
    assert invoke("load", str(write_folder(network_files))).exit_code == 0
    result = invoke("solve", *options)
    assert result.exit_code == 2
    assert (
        "choose exactly one of --period WEEK, --all, --from WEEK/--to WEEK, or --horizon FIRST..LAST"
        in result.stderr
    )
    assert table_counts(engine, ("solve_run",)) == {"solve_run": 0}


def test_solve_an_unloaded_period_is_a_usage_error(engine, write_folder, network_files):
    assert invoke("load", str(write_folder(network_files))).exit_code == 0
    result = invoke("solve", "--period", "2026-W39")
    assert result.exit_code == 2
    assert "period 2026-W39 has no loaded snapshot; loaded: 2026-W40, 2026-W41" in result.stderr


def test_certificate_of_a_period_shows_exact(engine, write_folder, network_files):
    assert invoke("load", str(write_folder(network_files))).exit_code == 0
    assert invoke("solve", "--period", "2026-W41").exit_code == 0
    result = invoke("certificate", "--period", "2026-W41")
    assert result.exit_code == 0, result.output
    cells = [line.split("│") for line in result.stdout.splitlines() if line.count("│") == 3]
    lines = {row[1].strip(): row[2].strip() for row in cells}
    assert lines["certificate"] == "exact"
    assert lines["primal cost"] == lines["dual objective"]
    assert Decimal(lines["difference"]) == 0
    assert lines["max conservation violation (units)"] == "0"
    missing = invoke("certificate", "--period", "2026-W40")
    assert missing.exit_code == 2
    assert "2026-W40 is loaded but not solved yet; solve it with `planner solve --period 2026-W40`" in missing.stderr


def test_periods_lists_loaded_weeks_and_their_latest_run(engine, write_folder, network_files):
    empty = invoke("periods")
    assert empty.exit_code == 0 and "no periods loaded yet" in empty.stdout
    assert invoke("load", str(write_folder(network_files))).exit_code == 0
    assert invoke("solve", "--period", "2026-W40").exit_code == 0
    result = invoke("periods")
    assert result.exit_code == 0, result.output
    w40 = next(line for line in result.stdout.splitlines() if "2026-W40" in line)
    w41 = next(line for line in result.stdout.splitlines() if "2026-W41" in line)
    assert "optimal" in w40 and "310.00" in w40 and "exact" in w40
    assert "not solved" in w41


# --------------------------------------------------------------------------- precision


def one_lane_files(unit_cost: str = "2", demand: str = "3") -> dict[str, str]:
    return {
        "sites.csv": "site,kind\nP,plant\nC,customer\n",
        "supply.csv": "period,site,quantity\n2026-W30,P,10\n",
        "demand.csv": f"period,site,quantity\n2026-W30,C,{demand}\n",
        "lanes.csv": f"period,origin,destination,unit_cost\n2026-W30,P,C,{unit_cost}\n",
    }


def test_a_unit_cost_beyond_the_cost_precision_is_refused_naming_file_column_and_value(engine, write_folder):
    assert invoke("load", str(write_folder(one_lane_files(unit_cost="1.234")))).exit_code == 0
    refused = invoke("solve", "--period", "2026-W30", "--cost-decimals", "2")
    # The attempt is stored as a failed run, like any week that did not end optimal.
    assert refused.exit_code == 1
    assert "lanes.csv column unit_cost: value 1.234 has more than 2 decimals" in refused.stderr
    assert "--cost-decimals" in refused.stderr
    with engine.connect() as conn:
        status, message = conn.execute(text("SELECT status, message FROM solve_run")).one()
    assert status == "failed" and "lanes.csv column unit_cost: value 1.234" in message

    enough = invoke("solve", "--period", "2026-W30", "--cost-decimals", "3")
    assert enough.exit_code == 0, enough.output
    with engine.connect() as conn:
        cost, decimals = conn.execute(
            text("SELECT primal_cost, cost_decimals FROM solve_run WHERE status = 'optimal'")
        ).one()
    assert (cost, decimals) == (Decimal("3.702"), 3)


def test_fractional_quantities_solve_with_quantity_decimals_and_are_stored_exactly(engine, write_folder):
    folder = write_folder(one_lane_files(demand="2.5"))
    at_load = invoke("load", str(folder))
    assert at_load.exit_code == 2
    assert "demand.csv:2: column quantity: value '2.5': 1 decimal" in flat(at_load.output)
    assert "--quantity-decimals 1" in flat(at_load.output)
    # Loaded for one decimal, a solve at the default precision still refuses the figure.
    assert invoke("load", str(folder), "--quantity-decimals", "1").exit_code == 0
    refused = invoke("solve", "--period", "2026-W30")
    assert refused.exit_code == 1
    assert "demand.csv column quantity: value 2.5 has more than 0 decimals" in refused.stderr

    result = invoke("solve", "--period", "2026-W30", "--quantity-decimals", "1")
    assert result.exit_code == 0, result.output
    with engine.connect() as conn:
        run = conn.execute(
            text(
                "SELECT primal_cost, quantity_decimals, spare_units, certificate_ok FROM solve_run "
                "WHERE status = 'optimal'"
            )
        ).one()
        flow = conn.execute(text("SELECT flow FROM run_flow")).scalar_one()
        spare = conn.execute(text("SELECT spare FROM run_site_price WHERE spare IS NOT NULL")).scalar_one()
    assert flow == Decimal("2.5")
    assert run == (Decimal("5"), 1, Decimal("7.5"), True)
    assert spare == Decimal("7.5")


def test_a_figure_too_large_for_64_bit_integers_is_refused_without_a_traceback(engine, write_folder):
    files = one_lane_files()
    files["lanes.csv"] = "period,origin,destination,unit_cost,capacity\n2026-W30,P,C,2,100000000000000000000\n"
    assert invoke("load", str(write_folder(files))).exit_code == 0
    refused = invoke("solve", "--period", "2026-W30")
    assert refused.exit_code == 1
    assert refused.exception is None or isinstance(refused.exception, SystemExit)
    assert (
        "lanes.csv column capacity: value 100000000000000000000 does not fit 64-bit integers at 0 decimals"
        in refused.stderr
    )
    with engine.connect() as conn:
        assert conn.execute(text("SELECT status FROM solve_run")).scalar_one() == "failed"


# --------------------------------------------------------------------------- demo


def test_demo_solves_every_week_prints_costs_movers_and_a_psql_line_without_password(
    database_url, engine, tmp_path, monkeypatch
):
    # The test server trusts local connections, so a made-up password still
    # connects; it must never be printed.
    with_password = make_url(database_url).set(password="secret").render_as_string(hide_password=False)
    monkeypatch.setenv(DATABASE_URL_ENV, with_password)
    folder = tmp_path / "demo"
    result = invoke("demo", "--folder", str(folder))
    assert result.exit_code == 0, result.output
    assert "secret" not in result.output
    assert {p.name for p in folder.iterdir()} >= {"sites.csv", "supply.csv", "demand.csv", "lanes.csv"}

    lines = result.stdout.splitlines()
    with engine.connect() as conn:
        runs = conn.execute(
            text("SELECT p.code, r.primal_cost, r.status, r.certificate_ok FROM solve_run r "
                 "JOIN period p ON p.id = r.period_id WHERE r.scenario_id IS NULL ORDER BY p.starts_on")
        ).all()
        closure = conn.execute(text("SELECT s.name, r.status, r.certificate_ok FROM solve_run r "
                                    "JOIN scenario s ON s.id = r.scenario_id")).one()
    assert len(runs) == 8
    # the demo ends with a warehouse closure on the last week, compared with that week's plan
    assert closure.name.startswith("close W") and closure.name.endswith(runs[-1][0])
    assert closure.status == "optimal" and closure.certificate_ok
    assert f"scenario '{closure.name}': optimal" in result.stdout and "determined" in result.stdout
    for code, cost, status, ok in runs:
        assert status == "optimal" and ok
        row = next(line for line in lines if line.startswith(f"│ {code} "))
        assert f"{cost:,.2f}" in row and "exact" in row

    movers = price_movers(engine)
    assert len(movers) == 10
    before_scenario = lines[: next(i for i, line in enumerate(lines) if line.startswith("scenario "))]
    mover_lines = [line for line in before_scenario if re.search(r"│\s*(C|W|P)\d+\s*│", line)]
    assert [re.search(r"│\s*(\S+)", line).group(1) for line in mover_lines] == [m["site"] for m in movers]

    # The last lines advise what works after the command has ended.
    assert any("planner sql" in line for line in lines)
    psql = next(line.strip() for line in lines if "psql '" in line)
    server = make_url(database_url)
    assert psql.endswith(f"psql 'postgresql://postgres@{server.host}:{server.port}/{server.database}'")
    assert "planner server start" not in result.stdout  # not the embedded server: nothing to keep up


def test_demo_flows_reproduce_the_stored_cost_exactly_in_sql(engine, tmp_path):
    assert invoke("demo", "--folder", str(tmp_path / "demo")).exit_code == 0
    with engine.connect() as conn:
        rows = conn.execute(
            text(
                """
                WITH runs AS (SELECT id, batch_id, period_id, primal_cost FROM solve_run WHERE status = 'optimal'),
                lanes AS (
                  SELECT f.run_id, sum(f.flow * lr.unit_cost) AS cost FROM run_flow f
                  JOIN runs r ON r.id = f.run_id
                  JOIN LATERAL run_lane_rate(r.id) lr ON lr.lane_id = f.lane_id
                  GROUP BY f.run_id),
                handling AS (
                  SELECT p.run_id, sum(coalesce(p.throughput_flow * sv.handling_cost, 0)) AS cost
                  FROM run_site_price p JOIN runs r ON r.id = p.run_id
                  JOIN site_version sv ON sv.batch_id = r.batch_id AND sv.site_id = p.site_id
                  GROUP BY p.run_id),
                shortage AS (
                  SELECT p.run_id, sum(coalesce(p.shortage * d.shortage_penalty, 0)) AS cost
                  FROM run_site_price p JOIN runs r ON r.id = p.run_id
                  LEFT JOIN demand d ON d.batch_id = r.batch_id AND d.period_id = r.period_id
                                    AND d.site_id = p.site_id
                  GROUP BY p.run_id)
                SELECT r.id, r.primal_cost, l.cost + h.cost + s.cost AS rebuilt,
                       r.primal_cost = l.cost + h.cost + s.cost AS equal, h.cost AS handling
                FROM runs r JOIN lanes l ON l.run_id = r.id JOIN handling h ON h.run_id = r.id
                JOIN shortage s ON s.run_id = r.id ORDER BY r.id
                """
            )
        ).mappings().all()
    assert len(rows) == 9  # eight weeks and the closure scenario, whose closed lanes' figures are its own
    assert all(r["equal"] for r in rows), [dict(r) for r in rows if not r["equal"]]
    assert all(r["handling"] > 0 for r in rows)  # the identity is not carried by lanes alone


# --------------------------------------------------------------------------- textbook example, installed script

# W. L. Winston, "Operations Research: Applications and Algorithms", 4th edition,
# section 7.1, the Powerco example (from memory): three plants supplying 35, 50
# and 40 units, four cities needing 45, 20, 30 and 30, and the cost matrix below;
# the optimal cost is 1020. Balanced: every unit of supply is used.
POWERCO_SUPPLY = [35, 50, 40]
POWERCO_DEMAND = [45, 20, 30, 30]
POWERCO_COST = [[8, 6, 10, 9], [9, 12, 13, 7], [14, 9, 16, 5]]
POWERCO_OPTIMUM = Decimal(1020)


def powerco_files() -> dict[str, str]:
    plants = [f"P{i + 1}" for i in range(3)]
    cities = [f"C{j + 1}" for j in range(4)]
    return {
        "sites.csv": "site,kind\n"
        + "".join(f"{p},plant\n" for p in plants)
        + "".join(f"{c},customer\n" for c in cities),
        "supply.csv": "period,site,quantity\n"
        + "".join(f"2026-W02,{p},{s}\n" for p, s in zip(plants, POWERCO_SUPPLY)),
        "demand.csv": "period,site,quantity\n"
        + "".join(f"2026-W02,{c},{d}\n" for c, d in zip(cities, POWERCO_DEMAND)),
        "lanes.csv": "period,origin,destination,mode,unit_cost\n"
        + "".join(
            f"2026-W02,{p},{c},wire,{POWERCO_COST[i][j]}\n" for i, p in enumerate(plants) for j, c in enumerate(cities)
        ),
    }


def powerco_highs():
    """scipy ``linprog(method="highs")`` on the transportation LP: cost and (supply, demand) duals."""
    cost = np.array(POWERCO_COST, float)
    rows, cols = cost.shape
    a_ub = np.kron(np.eye(rows), np.ones(cols))  # sum_j x_ij <= supply_i
    a_eq = np.kron(np.ones(rows), np.eye(cols))  # sum_i x_ij = demand_j
    res = linprog(cost.ravel(), A_ub=a_ub, b_ub=POWERCO_SUPPLY, A_eq=a_eq, b_eq=POWERCO_DEMAND, method="highs")
    assert res.status == 0, res.message
    return res.fun, res.ineqlin.marginals, res.eqlin.marginals


def test_powerco_textbook_example_end_to_end_through_the_installed_script(engine, write_folder, database_url):
    planner = planner_script()
    env = {**os.environ, DATABASE_URL_ENV: database_url}

    def run(*args: str) -> subprocess.CompletedProcess:
        return subprocess.run([planner, *args], env=env, capture_output=True, text=True, timeout=120)

    loaded = run("load", str(write_folder(powerco_files())))
    assert loaded.returncode == 0, loaded.stderr
    assert "loaded batch 1" in loaded.stdout
    solved = run("solve", "--period", "2026-W02")
    assert solved.returncode == 0, solved.stderr
    assert "1,020.00" in solved.stdout and "exact" in solved.stdout
    certificate = run("certificate", "--period", "2026-W02")
    assert certificate.returncode == 0, certificate.stderr
    assert "exact" in certificate.stdout

    highs_cost, supply_dual, demand_dual = powerco_highs()
    with engine.connect() as conn:
        cost, dual = conn.execute(text("SELECT primal_cost, dual_objective FROM solve_run")).one()
        prices = dict(
            conn.execute(text("SELECT s.code, p.price FROM run_site_price p JOIN site s ON s.id = p.site_id")).all()
        )
        highs_missing = conn.execute(text("SELECT count(*) FROM run_site_price WHERE price_high IS NULL")).scalar_one()
    # Winston's optimum (from memory) and scipy's HiGHS agree with the stored run.
    assert cost == POWERCO_OPTIMUM == dual
    assert highs_cost == pytest.approx(float(POWERCO_OPTIMUM), abs=1e-9)
    # The optimal basis is not degenerate (6 positive flows = 3 + 4 - 1), so the
    # dual is unique up to a constant: every delivered-cost difference matches
    # HiGHS' (v_j + y_i with y the supply-row and v the demand-row marginals).
    for i in range(3):
        for j in range(4):
            stored = prices[f"C{j + 1}"] - prices[f"P{i + 1}"]
            assert float(stored) == pytest.approx(demand_dual[j] + supply_dual[i], abs=1e-9), (i, j)
    # Balanced: one more unit cannot be had anywhere, so no price_high is stored.
    assert highs_missing == 7


# --------------------------------------------------------------------------- help text


def all_commands() -> list[list[str]]:
    """Every command, sub-commands of groups included, in the order ``planner --help`` lists them."""
    import typer.main

    group = typer.main.get_command(app)
    found = []
    for name in group.list_commands(None):
        command = group.get_command(None, name)
        subs = getattr(command, "list_commands", None)
        found += [[name, sub] for sub in subs(None)] if subs else [[name]]
    return found


def test_help_lists_the_commands_in_the_order_of_the_workflow_and_shows_the_version() -> None:
    from planner import __version__

    top = invoke("--help")
    listed = re.findall(r"^  ([a-z-]+)  ", top.stdout.split("Commands:", 1)[1], flags=re.M)
    # The order of the work (common practice, no source): set up, load, solve, look at the runs, then tools.
    assert listed[:12] == ["init", "currency", "load", "periods", "solve", "resolve", "runs", "certificate",
                           "report", "explain", "prices", "rate-ranges"]
    assert listed[-1] == "demo"
    assert invoke("--version").stdout == f"planner {__version__}\n"


@pytest.mark.parametrize("command", all_commands(), ids=" ".join)
def test_each_help_text_is_plain_and_its_example_uses_the_demo_s_own_codes(command: list[str]) -> None:
    result = invoke(*command, "--help")
    assert result.exit_code == 0, result.output
    out = result.stdout
    assert "<bool>" not in out and "<str>" not in out and "<int>" not in out and "{" not in out.split("Options")[0]
    assert not any(line != line.rstrip() for line in out.splitlines()), "trailing spaces"
    assert not re.search(r"\S  +[.,;:]|\s[.,;]\s", out), "a stray space before punctuation"
    usage = out.splitlines()[0]
    arguments = re.findall(r"\[?([A-Za-z_]+)\]?", usage.split("[OPTIONS]", 1)[1]) if "[OPTIONS]" in usage else []
    assert all(a.isupper() for a in arguments), usage
    examples = re.findall(r"Example: (planner .*)", out)
    assert examples and all(e.startswith("planner " + " ".join(command)) for e in examples), examples
    # Site codes and weeks in the example exist in the demo network (seeds/ is kept equal to it).
    seeds = Path(__file__).resolve().parents[1] / "seeds"
    sites = {line.split(",")[0] for line in (seeds / "sites.csv").read_text().splitlines()[1:]}
    weeks = {line.split(",")[0] for line in (seeds / "demand.csv").read_text().splitlines()[1:]}
    for example in examples:
        assert set(re.findall(r"(?<![-\w])[PWC]\d+\b", example)) <= sites, example
        assert set(re.findall(r"\b\d{4}-W\d{2}\b", example)) <= weeks, example


def test_resolve_dry_run_on_an_empty_database_says_nothing_is_loaded(engine) -> None:
    result = invoke("resolve", "--dry-run")
    assert result.exit_code == 0, result.output
    assert result.stdout == "nothing is loaded yet, so nothing would be solved; load a folder with `planner load DIR`\n"
