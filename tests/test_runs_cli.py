"""Runs you can find and use: ``planner runs``, and every report command on every kind and status of run.

The hand network of tests/test_views.py (every figure computed by hand there)
is solved week by week (runs 1, 2) and as one linked horizon over both weeks
(run 3; no site stores stock, so it costs the sum of the weeks, 470 + 460);
then a week whose customer C2 cannot be served (run 4, infeasible) and a week
whose unit cost has more decimals than the precision asked for (run 5, failed).
"""

from __future__ import annotations

import json

import pytest
import sqlalchemy as sa

from planner.database.ingest import load_folder
from planner.reports.explain import explain_site
from planner.reports.queries import week_report
from planner.runs.horizon import solve_horizon
from planner.runs.weekly import solve_period
from tests.helpers import csv_rows, invoke
from tests.test_views import SITES, solve_hand_network

NOT_OPTIMAL, USAGE = 1, 2


@pytest.fixture
def stored(engine: sa.Engine, write_folder) -> dict[str, int]:
    weeks = solve_hand_network(engine, write_folder)
    horizon = solve_horizon(engine, ["2026-W10", "2026-W11"])
    assert horizon.status == "optimal"
    load_folder(engine, write_folder({  # C2 (no shortage penalty) has no lane into it
        "sites.csv": SITES,
        "supply.csv": "period,site,quantity\n2026-W12,P1,100\n",
        "demand.csv": "period,site,quantity,shortage_penalty\n2026-W12,C2,30,\n",
        "lanes.csv": "period,origin,destination,mode,unit_cost,capacity,min_quantity\n2026-W12,P1,W1,road,2,,\n",
    }))
    infeasible = solve_period(engine, "2026-W12")
    assert infeasible.status == "infeasible"
    load_folder(engine, write_folder({
        "sites.csv": "site,kind\nP9,plant\nC9,customer\n",
        "supply.csv": "period,site,quantity\n2026-W30,P9,10\n",
        "demand.csv": "period,site,quantity\n2026-W30,C9,3\n",
        "lanes.csv": "period,origin,destination,unit_cost\n2026-W30,P9,C9,1.234\n",
    }))
    failed = invoke("solve", "--period", "2026-W30", "--cost-decimals", "2")
    assert failed.exit_code == NOT_OPTIMAL
    return {**weeks, "horizon": horizon.run_id, "infeasible": infeasible.run_id, "failed": horizon.run_id + 2}


def listed(*args: str) -> list[dict[str, str]]:
    result = invoke("runs", "--format", "csv", *args)
    assert result.exit_code == 0, result.output
    return csv_rows(result.stdout)


def test_runs_lists_every_run_with_its_span_status_cost_and_batch(stored: dict[str, int]) -> None:
    rows = listed()
    assert [(r["run_id"], r["kind"], r["period"], r["status"]) for r in rows] == [
        (str(stored["2026-W10"]), "week", "2026-W10", "optimal"),
        (str(stored["2026-W11"]), "week", "2026-W11", "optimal"),
        (str(stored["horizon"]), "horizon", "2026-W10..2026-W11", "optimal"),
        (str(stored["infeasible"]), "week", "2026-W12", "infeasible"),
        (str(stored["failed"]), "week", "2026-W30", "failed"),
    ]
    by_kind = {r["period"]: r for r in rows}
    # Hand computed: 470 and 460, and the horizon without stock costs their sum.
    assert [by_kind[p]["cost"] for p in ("2026-W10", "2026-W11", "2026-W10..2026-W11")] == [
        "470.0000", "460.0000", "930.0000"
    ]
    assert by_kind["2026-W10"]["certificate_ok"] == "true" and by_kind["2026-W12"]["certificate_ok"] == ""
    assert by_kind["2026-W12"]["cost"] == "" and "C2" in by_kind["2026-W12"]["message"]
    assert [by_kind[p]["batch"] for p in ("2026-W10", "2026-W10..2026-W11", "2026-W12", "2026-W30")] == ["1", "1", "2", "3"]
    assert {r["latest"] for r in rows if r["status"] == "optimal"} == {"true"}
    assert all(float(r["seconds"]) >= 0 and r["solved_at"] for r in rows)
    assert {r["currency"] for r in rows} == {"XXX"}


def test_runs_filters_by_period_status_kind_and_count(stored: dict[str, int]) -> None:
    assert [r["run_id"] for r in listed("--period", "2026-W11")] == [str(stored["2026-W11"]), str(stored["horizon"])]
    assert [r["period"] for r in listed("--kind", "horizon")] == ["2026-W10..2026-W11"]
    assert [r["run_id"] for r in listed("--status", "infeasible")] == [str(stored["infeasible"])]
    assert [r["run_id"] for r in listed("--status", "optimal", "--period", "2026-W10", "--kind", "week")] == [
        str(stored["2026-W10"])
    ]
    assert [r["run_id"] for r in listed("--last", "2")] == [str(stored["infeasible"]), str(stored["failed"])]
    assert listed("--period", "2027-W01") == []
    as_json = json.loads(invoke("runs", "--format", "json", "--kind", "horizon").stdout)
    assert (as_json[0]["first_period"], as_json[0]["last_period"], as_json[0]["cost"]) == ("2026-W10", "2026-W11", "930.0000")
    table = invoke("runs")
    assert table.exit_code == 0 and "2026-W10..2026-W11" in table.stdout and "infeasible" in table.stdout
    for args, message in ((("--status", "done"), "unknown run status 'done'"), (("--kind", "month"), "unknown run kind"),
                          (("--period", "2026-10"), "not an ISO week code")):
        bad = invoke("runs", *args)
        assert bad.exit_code == USAGE and message in bad.stderr, args


def test_runs_on_an_empty_database(engine: sa.Engine) -> None:
    result = invoke("runs")
    assert result.exit_code == 0 and "no runs yet; solve weeks with `planner solve --all`" in result.stdout


@pytest.mark.parametrize("command", [
    ["report"], ["explain", "C1"], ["prices"], ["rate-ranges"],
])
@pytest.mark.parametrize("which", ["infeasible", "failed"])
def test_commands_on_a_run_that_did_not_end_optimal_say_so_and_exit_1(
    stored: dict[str, int], command: list[str], which: str
) -> None:
    run = stored[which]
    result = invoke(*command, "--run", str(run))
    assert result.exit_code == NOT_OPTIMAL, result.output
    assert result.exception is None or isinstance(result.exception, SystemExit)
    assert f"run {run} (week " in result.stderr and f"ended {which}" in result.stderr
    assert f"planner certificate --run {run}" in result.stderr
    assert "Traceback" not in result.output


def test_certificate_of_every_status(stored: dict[str, int]) -> None:
    def cells(result) -> dict[str, str]:
        rows = [line.split("│") for line in result.stdout.splitlines() if line.count("│") == 3]
        return {row[1].strip(): row[2].strip() for row in rows}

    infeasible = invoke("certificate", "--run", str(stored["infeasible"]))
    assert infeasible.exit_code == NOT_OPTIMAL
    assert cells(infeasible)["certificate"] == "none: the run ended infeasible"
    assert "C2" in cells(infeasible)["message"]
    failed = invoke("certificate", "--period", "2026-W30")
    assert failed.exit_code == NOT_OPTIMAL and cells(failed)["certificate"] == "none: the run ended failed"
    horizon = invoke("certificate", "--run", str(stored["horizon"]))
    assert horizon.exit_code == 0, horizon.output
    assert cells(horizon)["period"] == "2026-W10..2026-W11 (linked horizon)"
    assert cells(horizon)["certificate"] == "exact"
    assert invoke("certificate").exit_code == USAGE


def test_report_of_a_week_whose_only_run_is_infeasible_says_where_to_look(stored: dict[str, int]) -> None:
    result = invoke("report", "--period", "2026-W12")
    assert result.exit_code == 0
    run = stored["infeasible"]
    assert f"no optimal run of 2026-W12: its newest run {run} ended infeasible; see `planner certificate --run {run}`" in (
        " ".join(result.stdout.split())
    )


def test_explain_a_week_of_a_horizon_run(engine: sa.Engine, stored: dict[str, int]) -> None:
    run = stored["horizon"]
    with engine.connect() as conn:
        high = conn.execute(
            sa.text("SELECT price_high FROM site_price_history_of_run(:r) WHERE site = 'C1' AND period = '2026-W11'"),
            {"r": run},
        ).scalar_one()
    assert high == 14  # hand computed: the horizon carries no stock, so its weeks are the weeks alone
    explanation = explain_site(engine, "C1", "2026-W11", run_id=run)
    assert explanation.price == pytest.approx(float(high)) and explanation.period == "2026-W11"
    assert all("in 2026-W11" in step.label for step in explanation.steps if step.kind == "lane")
    result = invoke("explain", "C1", "--run", str(run), "--period", "2026-W11")
    assert result.exit_code == 0, result.output
    assert result.stdout.startswith("C1 in 2026-W11: one more unit costs 14.00 XXX")
    ambiguous = invoke("explain", "C1", "--run", str(run))
    assert ambiguous.exit_code == USAGE
    assert f"run {run} (linked horizon 2026-W10..2026-W11) covers several weeks" in ambiguous.stderr
    assert "--period 2026-W10" in ambiguous.stderr


def test_report_a_week_of_a_horizon_run(engine: sa.Engine, stored: dict[str, int]) -> None:
    run = stored["horizon"]
    weeks = [week_report(engine, week, run_id=run) for week in ("2026-W10", "2026-W11")]
    assert [w.cost_total for w in weeks] == [470, 460]  # hand computed: the weeks' costs, no stock
    assert sum(w.cost_total for w in weeks) == weeks[0].run["cost"] == 930
    second = weeks[1]
    assert second.horizon and second.run["period"] == "2026-W10..2026-W11"
    # The horizon's own previous week: C1 12 -> 14 and C2 13 -> 15, hand computed.
    assert second.previous_period == "2026-W10"
    assert second.moves[["site", "previous_price", "price"]].values.tolist() == [["C1", 12, 14], ["C2", 13, 15]]
    result = invoke("report", "--run", str(run), "--period", "2026-W11")
    assert result.exit_code == 0, result.output
    text = " ".join(result.stdout.split())
    assert "week 2026-W11 of the linked horizon 2026-W10..2026-W11" in text
    assert "cost of the week 460.00 XXX (of the horizon 930.00)" in text
    assert "total of 2026-W11" in text
    as_json = json.loads(invoke("report", "--run", str(run), "-p", "2026-W10", "--format", "json").stdout)
    assert (as_json["run"]["period"], as_json["week_cost"], as_json["run"]["cost"]) == (
        "2026-W10..2026-W11", "470.0000", "930.0000"
    )
    outside = invoke("report", "--run", str(run), "--period", "2026-W12")
    assert outside.exit_code == USAGE and "does not cover 2026-W12" in outside.stderr


def test_prices_and_rate_ranges_of_a_horizon_run(stored: dict[str, int]) -> None:
    run = stored["horizon"]
    prices = invoke("prices", "C2", "--run", str(run), "--format", "csv")
    assert prices.exit_code == 0, prices.output
    assert [(r["period"], r["price"]) for r in csv_rows(prices.stdout)] == [("2026-W10", "13.0000"), ("2026-W11", "15.0000")]
    rates = invoke("rate-ranges", "--run", str(run), "-p", "2026-W10", "--lane", "P2->C2 rail", "--format", "csv")
    assert rates.exit_code == 0, rates.output
    (row,) = csv_rows(rates.stdout)
    # Hand computed (tests/test_views.py): the rail lane is full, worth 9 more per unit of capacity,
    # so its rate may rise by 9 before flow leaves it.
    assert (row["state"], row["rate"], row["rate_high"]) == ("at capacity", "4.0000", "13.0000")
    week = invoke("rate-ranges", "--run", str(stored["2026-W10"]), "--lane", "P2->C2 rail", "--format", "csv")
    assert csv_rows(week.stdout)[0]["rate_high"] == row["rate_high"]


def test_report_of_a_week_never_loaded_advises_loading_it(stored: dict[str, int]) -> None:
    result = invoke("report", "-p", "2026-W40")
    assert result.exit_code == 0
    assert "2026-W40 was never loaded; load a folder that has it" in result.stdout
    assert "solve" not in result.stdout  # solving a week never loaded fails: load it first


def test_the_views_still_show_only_week_runs(engine: sa.Engine, stored: dict[str, int]) -> None:
    with engine.connect() as conn:
        runs = set(conn.execute(sa.text("SELECT DISTINCT run_id FROM site_price_history")).scalars())
    assert runs == {stored["2026-W10"], stored["2026-W11"]}
