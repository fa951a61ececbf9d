"""``planner explain`` and :func:`planner.reports.explain.explain_site` on stored runs.

The chain of a site is the cheapest residual path from SPARE that sets its
``price_high``; its unit costs must add up to the stored price. The hand-built
networks below have one cheapest path each, computed by hand beside them.
"""

from __future__ import annotations

import re
from decimal import Decimal

import pytest
from sqlalchemy import text
from typer.testing import CliRunner

from planner.cli import app
from planner.database.ingest import load_folder
from planner.errors import PlannerError
from planner.reports.explain import explain_site
from planner.runs.weekly import solve_period

runner = CliRunner()


def explain_cli(site: str, period: str, *more: str):
    return runner.invoke(app, ["explain", site, "--period", period, *more])


def stored_prices(engine, run_id: int) -> dict[str, tuple[Decimal | None, str | None]]:
    """Site code -> (price_high, high_reason) of a run."""
    with engine.connect() as conn:
        rows = conn.execute(
            text(
                "SELECT s.code, p.price_high, p.high_reason FROM run_site_price p "
                "JOIN site s ON s.id = p.site_id WHERE p.run_id = :r"
            ),
            {"r": run_id},
        ).all()
    return {code: (high, reason) for code, high, reason in rows}


def load_and_solve(engine, write_folder, files: dict[str, str], period: str) -> int:
    assert load_folder(engine, write_folder(files)).created
    summary = solve_period(engine, period)
    assert summary.status == "optimal", summary.message
    return summary.run_id


def chain_files(handling: str = "") -> dict[str, str]:
    """Plant A ships 4 of its 9 units to customer C17 through warehouse W2."""
    return {
        "sites.csv": f"site,kind,handling_cost\nA,plant,\nW2,warehouse,{handling}\nC17,customer,\n",
        "supply.csv": "period,site,quantity\n2026-W49,A,9\n",
        "demand.csv": "period,site,quantity\n2026-W49,C17,4\n",
        "lanes.csv": "period,origin,destination,mode,unit_cost\n2026-W49,A,W2,road,12.30\n2026-W49,W2,C17,road,29.80\n",
    }


def table_rows(output: str) -> list[list[str]]:
    """The cells of a rich table's body rows."""
    return [[cell.strip() for cell in line.split("│")[1:-1]] for line in output.splitlines() if line.startswith("│")]


def test_explain_prints_the_route_once_on_a_hand_built_chain(engine, write_folder):
    # Hand computed: 12.30 + 29.80 = 42.10. W2 has no handling cost, so it is
    # not split and the chain has no warehouse step.
    run_id = load_and_solve(engine, write_folder, chain_files(), "2026-W49")
    assert stored_prices(engine, run_id)["C17"][0] == Decimal("42.10")
    assert explain_site(engine, "C17", "2026-W49").text() == (
        "plant A (value 0.00) -> lane A->W2 road 12.30 -> lane W2->C17 road 29.80 = 42.10"
    )
    result = explain_cli("C17", "2026-W49")
    assert result.exit_code == 0, result.output
    assert result.stdout.splitlines()[0] == "C17 in 2026-W49: one more unit costs 42.10 XXX, by this route:"
    assert table_rows(result.stdout) == [
        ["spare supply of plant A", "0.0000", "0.0000"],
        ["lane A->W2 road", "12.3000", "12.3000"],
        ["lane W2->C17 road", "29.8000", "42.1000"],
    ]
    assert result.stdout.count("A->W2 road") == 1  # the route once, not a line and a table


def test_explain_shows_the_warehouse_step_as_handling(engine, write_folder):
    # Hand computed: 12.30 + 0.50 handling + 29.80 = 42.60.
    run_id = load_and_solve(engine, write_folder, chain_files(handling="0.50"), "2026-W49")
    assert stored_prices(engine, run_id)["C17"][0] == Decimal("42.60")
    assert explain_site(engine, "C17", "2026-W49").text() == (
        "plant A (value 0.00) -> lane A->W2 road 12.30 -> handling at warehouse W2 0.50 "
        "-> lane W2->C17 road 29.80 = 42.60"
    )
    result = explain_cli("C17", "2026-W49")
    assert result.exit_code == 0, result.output
    assert ["handling warehouse W2", "0.5000", "12.8000"] in table_rows(result.stdout)
    assert "throughput" not in result.stdout


# P1 has 10 units, close to both customers; P2 has plenty, far from C2.
# C1 needs 10, C2 needs 1. Optimal: P1 -> C1 9, P1 -> C2 1, P2 -> C1 1, cost
# 9 * 1 + 1 * 2 + 1 * 3 = 14 (serving C2 from P2 instead costs 10 + 10 = 20).
# One more unit at C2: P2 -> C1 (+3), one unit less P1 -> C1 (-1), P1 -> C2
# (+2) = 4.00, cheaper than P2 -> C2 at 10.00.
REROUTE_FILES = {
    "sites.csv": "site,kind\nP1,plant\nP2,plant\nC1,customer\nC2,customer\n",
    "supply.csv": "period,site,quantity\n2026-W03,P1,10\n2026-W03,P2,100\n",
    "demand.csv": "period,site,quantity\n2026-W03,C1,10\n2026-W03,C2,1\n",
    "lanes.csv": (
        "period,origin,destination,mode,unit_cost\n"
        "2026-W03,P1,C1,road,1\n2026-W03,P1,C2,road,2\n2026-W03,P2,C1,road,3\n2026-W03,P2,C2,road,10\n"
    ),
}


def test_explain_names_a_rerouted_lane_with_one_unit_less(engine, write_folder):
    run_id = load_and_solve(engine, write_folder, REROUTE_FILES, "2026-W03")
    assert stored_prices(engine, run_id)["C2"][0] == Decimal(4)  # hand computed above
    explanation = explain_site(engine, "C2", "2026-W03")
    assert explanation.text() == (
        "plant P2 (value 0.00) -> lane P2->C1 road 3.00 -> one unit less on lane P1->C1 road -1.00 "
        "-> lane P1->C2 road 2.00 = 4.00"
    )
    assert [(s.kind, s.forward) for s in explanation.steps] == [
        ("spare", False), ("lane", True), ("lane", False), ("lane", True)
    ]


def test_explain_a_customer_priced_by_its_shortage_penalty(engine, write_folder):
    # P can ship 5 of the 8 units C needs; the rest is short at 7.50 per unit,
    # so one more unit needed at C costs the penalty.
    files = {
        "sites.csv": "site,kind\nP,plant\nC,customer\n",
        "supply.csv": "period,site,quantity\n2026-W05,P,5\n",
        "demand.csv": "period,site,quantity,shortage_penalty\n2026-W05,C,8,7.50\n",
        "lanes.csv": "period,origin,destination,unit_cost\n2026-W05,P,C,2\n",
    }
    run_id = load_and_solve(engine, write_folder, files, "2026-W05")
    assert stored_prices(engine, run_id)["C"][0] == Decimal("7.50")
    assert explain_site(engine, "C", "2026-W05").text() == "unmet demand -> short at customer C 7.50 = 7.50"
    result = explain_cli("C", "2026-W05")
    assert result.exit_code == 0, result.output
    assert table_rows(result.stdout)[0][0] == "unmet demand"
    assert "SHORT" not in result.stdout and "SPARE" not in result.stdout


@pytest.mark.parametrize("period", ["2026-W40", "2026-W41"])
def test_every_site_chain_adds_up_to_its_stored_price_high(engine, write_folder, network_files, period):
    run_id = load_and_solve(engine, write_folder, network_files, period)
    prices = stored_prices(engine, run_id)
    assert len(prices) == 6
    for site, (high, reason) in prices.items():
        explanation = explain_site(engine, site, period)
        if high is None:
            assert explanation.price is None and explanation.reason == reason
            continue
        assert explanation.price == pytest.approx(float(high), abs=1e-9), site
        assert explanation.steps, site
        assert sum(step.unit_cost for step in explanation.steps) == pytest.approx(float(high), abs=1e-9), site
        assert explanation.steps[-1].running == pytest.approx(float(high), abs=1e-9), site
        assert explanation.steps[0].kind in ("spare", "short-feed"), site
        assert explanation.text().endswith(f"= {high:.2f}"), site


def test_cli_chain_starts_at_a_plant_and_its_running_total_is_the_stored_price(engine, write_folder, network_files):
    run_id = load_and_solve(engine, write_folder, network_files, "2026-W40")
    high = stored_prices(engine, run_id)["C3"][0]
    result = explain_cli("C3", "2026-W40")
    assert result.exit_code == 0, result.output
    assert result.stdout.splitlines()[0] == f"C3 in 2026-W40: one more unit costs {high:.2f} XXX, by this route:"
    rows = table_rows(result.stdout)
    assert re.match(r"spare supply of plant P\d$", rows[0][0]), rows[0]
    # The step table's last running total is the price to four decimals.
    assert Decimal(rows[-1][2].replace(",", "")) == high


def test_explain_of_an_earlier_run_uses_that_run_s_snapshot(engine, write_folder):
    first = load_and_solve(engine, write_folder, chain_files(), "2026-W49")
    changed = chain_files()
    changed["lanes.csv"] = changed["lanes.csv"].replace("29.80", "30.00")
    second = load_and_solve(engine, write_folder, changed, "2026-W49")
    assert explain_site(engine, "C17", "2026-W49").text().endswith("= 42.30")
    assert explain_site(engine, "C17", "2026-W49", run_id=second).text().endswith("= 42.30")
    assert explain_site(engine, "C17", "2026-W49", run_id=first).text().endswith("= 42.10")


def test_explain_a_site_without_price_high_prints_the_reason(engine, write_folder):
    files = chain_files()
    files["demand.csv"] = "period,site,quantity\n2026-W49,C17,9\n"  # every unit of supply used
    run_id = load_and_solve(engine, write_folder, files, "2026-W49")
    high, reason = stored_prices(engine, run_id)["C17"]
    assert high is None and reason
    result = explain_cli("C17", "2026-W49")
    assert result.exit_code == 0, result.output
    assert " ".join(result.stdout.split()) == f"C17 in 2026-W49: {reason}"


def test_explain_errors_are_usage_errors_that_advise_a_step_that_works(engine, write_folder):
    nothing = explain_cli("C17", "2026-W49")
    assert nothing.exit_code == 2
    assert "nothing is loaded yet" in nothing.stderr and "planner load DIR" in nothing.stderr
    assert load_folder(engine, write_folder(chain_files())).created
    not_solved = explain_cli("C17", "2026-W49")
    assert not_solved.exit_code == 2
    assert "2026-W49 is loaded but not solved yet; solve it with `planner solve --period 2026-W49`" in not_solved.stderr
    never_loaded = explain_cli("C17", "2026-W48")
    assert never_loaded.exit_code == 2
    assert "2026-W48 was never loaded; load a folder that has it" in never_loaded.stderr
    assert "planner solve" not in never_loaded.stderr  # solving it would fail: it must be loaded first
    run_id = solve_period(engine, "2026-W49").run_id
    unknown = explain_cli("C99", "2026-W49")
    assert unknown.exit_code == 2
    assert f"site C99 is not in run {run_id} (week 2026-W49)" in unknown.stderr
    with pytest.raises(PlannerError, match="2026-W48 was never loaded"):
        explain_site(engine, "C17", "2026-W48")
    for args, message in (
        (["explain", "C17", "--run", "999"], "there is no run 999"),
        (["explain", "C17", "--run", str(run_id), "--period", "2026-W50"], "does not cover 2026-W50"),
        (["explain", "C17"], "name a week with --period WEEK or a run with --run ID"),
    ):
        result = runner.invoke(app, args)
        assert result.exit_code == 2, (args, result.output)
        assert message in result.stderr, (args, result.stderr)
    by_run = runner.invoke(app, ["explain", "C17", "--run", str(run_id)])  # a week run needs no --period
    assert by_run.exit_code == 0, by_run.output
    assert by_run.stdout.startswith("C17 in 2026-W49: one more unit costs 42.10")
