"""Lane minimums, several modes on one pair, and bad weeks, from CSV files to stored runs.

Every week here goes through the real command line: ``planner load`` of a CSV
folder, then ``planner solve`` in a subprocess (so a stack trace would show in
its stderr; follow-up solves run in-process with typer's CliRunner), and the
stored ``solve_run``/``run_site_price`` rows and the ``lane_flow`` view are read back with SQL.

The week with lane minimums is checked against scipy's ``linprog`` with HiGHS
(outside reference) on the model read straight from the CSV rows (``tests/reference_model.py``), without
any of the planner's code: one column per lane bounded by its minimum and
capacity, one per plant for unused supply, one per penalised customer for
shortage, one conservation row per site. The bad weeks are small enough that
the expected diagnosis is worked out by hand beside each test.
"""

from __future__ import annotations

import dataclasses
import subprocess
from decimal import Decimal
from pathlib import Path

import numpy as np
import pytest
import sqlalchemy as sa

from tests.helpers import invoke, planner
from tests.reference_model import reference_network, solve_lp, week_from_files

#: HiGHS answers in floats; the data have at most two decimals.
TOLERANCE = 1e-6






def load(folder: Path, *options: str) -> None:
    result = invoke("load", str(folder), *options)
    assert result.exit_code == 0, result.output




def runs(engine: sa.Engine) -> list[sa.RowMapping]:
    with engine.connect() as conn:
        return list(
            conn.execute(
                sa.text(
                    "SELECT r.*, p.code AS period FROM solve_run r "
                    "LEFT JOIN period p ON p.id = r.period_id ORDER BY r.id"
                )
            ).mappings()
        )


# --------------------------------------------------------------------------- lane minimums

MINIMUM_WEEK = {
    "sites.csv": (
        "site,kind,handling_cost\n"
        "P1,plant,\n"
        "P2,plant,\n"
        "W1,warehouse,0.40\n"
        "W2,warehouse,\n"
        "C1,customer,\n"
        "C2,customer,\n"
        "C3,customer,\n"
    ),
    "supply.csv": "period,site,quantity\n2026-W40,P1,100\n2026-W40,P2,80\n",
    "demand.csv": (
        "period,site,quantity,shortage_penalty\n"
        "2026-W40,C1,60,\n"
        "2026-W40,C2,50,\n"
        "2026-W40,C3,40,20\n"
    ),
    # Two modes on P1->W1, P2->W2 and W1->C3; minimums on an expensive rail
    # lane, a road lane and a direct lane.
    "lanes.csv": (
        "period,origin,destination,mode,unit_cost,capacity,min_quantity\n"
        "2026-W40,P1,W1,road,2.00,,\n"
        "2026-W40,P1,W1,rail,1.20,40,\n"
        "2026-W40,P1,W2,road,3.00,,\n"
        "2026-W40,P2,W1,road,2.50,,\n"
        "2026-W40,P2,W2,road,1.50,60,\n"
        "2026-W40,P2,W2,rail,2.80,,30\n"
        "2026-W40,W1,C1,,1.00,,\n"
        "2026-W40,W1,C2,,2.00,,\n"
        "2026-W40,W2,C2,,1.00,,\n"
        "2026-W40,W2,C3,,1.50,,\n"
        "2026-W40,W1,C3,road,2.50,,10\n"
        "2026-W40,W1,C3,rail,2.00,20,\n"
        "2026-W40,P1,C1,road,5.00,15,5\n"
    ),
}


def week_reference(files: dict[str, str], *, with_minimums: bool = True):
    """The week read straight from the CSV rows and solved by scipy's linprog (HiGHS), in currency.

    Returns the optimal cost, the reference's price per site code and the lane keys in file order.
    """
    read = week_from_files(files, "2026-W40")
    week = read.week if with_minimums else dataclasses.replace(read.week, lane_min=np.zeros_like(read.week.lane_min))
    net = reference_network(week)
    answer = solve_lp(net)
    assert answer.status == "optimal"
    prices = {code: answer.potential[net.site_in[0][s]] / 10_000 for s, code in enumerate(read.site_codes)}
    return answer.cost / 10_000, prices, read.lane_keys


def test_lane_minimums_and_modes_match_highs_with_an_exact_certificate(
    engine: sa.Engine, write_folder
) -> None:
    solved = solve_week(write_folder, MINIMUM_WEEK)
    assert solved.returncode == 0, solved.stderr

    (run,) = runs(engine)
    assert run["status"] == "optimal" and run["kind"] == "week"
    assert run["certificate_ok"] is True
    assert run["duality_gap"] == 0
    assert run["primal_cost"] == run["dual_objective"]

    reference_cost, highs_price, lane_keys = week_reference(MINIMUM_WEEK)
    # scipy.optimize.linprog (HiGHS) on the model read from the CSV rows, outside reference: the optimal cost.
    assert abs(float(run["primal_cost"]) - reference_cost) < TOLERANCE
    # The minimums matter in this week: without them HiGHS finds a cheaper plan.
    assert week_reference(MINIMUM_WEEK, with_minimums=False)[0] < reference_cost - 1

    with engine.connect() as conn:
        flows = conn.execute(
            sa.text(
                "SELECT origin, destination, mode, flow, reduced_cost, unit_cost, capacity, min_quantity "
                "FROM lane_flow_of_run(:run)"
            ),
            {"run": run["id"]},
        ).mappings().all()
        prices = {
            r.code: r
            for r in conn.execute(
                sa.text(
                    "SELECT s.code, p.price, p.price_low, p.price_high FROM run_site_price p "
                    "JOIN site s ON s.id = p.site_id WHERE p.run_id = :run"
                ),
                {"run": run["id"]},
            )
        }
    by_lane = {(f["origin"], f["destination"], f["mode"]): f for f in flows}
    # Each mode is its own lane with its own flow row.
    assert set(by_lane) == set(lane_keys)
    for f in flows:
        assert f["min_quantity"] <= f["flow"]
        assert f["capacity"] is None or f["flow"] <= f["capacity"]
    # At least one minimum binds: the lane carries exactly its minimum.
    assert any(f["min_quantity"] > 0 and f["flow"] == f["min_quantity"] for f in flows)
    # By hand: P2->W2 road runs strictly between its bounds (reduced cost 0),
    # so the rail mode on the same pair, held at its minimum of 30, has the
    # exact reduced cost 2.80 - 1.50 = 1.30: the saving per unit of a lower minimum.
    road, rail = by_lane["P2", "W2", "road"], by_lane["P2", "W2", "rail"]
    assert 0 < road["flow"] < road["capacity"] and road["reduced_cost"] == 0
    assert rail["flow"] == rail["min_quantity"] == 30
    assert rail["reduced_cost"] == Decimal("1.30")

    # Stored reduced costs follow the stored prices (lanes out of plants leave
    # the plant's own node: unit_cost + price(origin) - price(destination)).
    for f in flows:
        if f["origin"].startswith("P"):
            expected = f["unit_cost"] + prices[f["origin"]].price - prices[f["destination"]].price
            assert f["reduced_cost"] == expected

    # HiGHS's duals are one optimal dual; each must lie in the stored exact range.
    for code, dual in highs_price.items():
        low, high = prices[code].price_low, prices[code].price_high
        assert low is None or float(low) <= dual + TOLERANCE
        assert high is None or dual <= float(high) + TOLERANCE


# --------------------------------------------------------------------------- bad weeks

BAD_SITES = "site,kind\nP1,plant\nW1,warehouse\nW2,warehouse\nC1,customer\nC2,customer\n"
BAD_SUPPLY = "period,site,quantity\n2026-W40,P1,100\n"
BAD_DEMAND = "period,site,quantity\n2026-W40,C1,50\n2026-W40,C2,10\n"
LANE_HEADER = "period,origin,destination,mode,unit_cost,capacity,min_quantity\n"


def bad_week(lanes: str) -> dict[str, str]:
    return {
        "sites.csv": BAD_SITES,
        "supply.csv": BAD_SUPPLY,
        "demand.csv": BAD_DEMAND,
        "lanes.csv": LANE_HEADER + lanes,
    }


def solve_week(write_folder, files: dict[str, str]) -> subprocess.CompletedProcess:
    """Load ``files`` and run ``planner solve`` on their week, 2026-W40."""
    load(write_folder(files))
    return planner("solve", "--period", "2026-W40")


def assert_clean_failure(result: subprocess.CompletedProcess) -> None:
    """Exit code 1 (a week did not end optimal) and a message, never a stack trace."""
    assert result.returncode == 1, (result.stdout, result.stderr)
    assert "Traceback" not in result.stderr
    assert "Traceback" not in result.stdout


def test_infeasible_week_names_customer_lane_and_shortfall(engine: sa.Engine, write_folder) -> None:
    # By hand: C1 needs 50 and only P1->W1 road (cap 30) leads to it, so 20
    # units cannot be served; C2 is served by W2.
    result = solve_week(
        write_folder,
        bad_week(
            "2026-W40,P1,W1,road,2,30,\n"
            "2026-W40,W1,C1,road,1,,\n"
            "2026-W40,P1,W2,road,2,,\n"
            "2026-W40,W2,C2,road,1,,\n"
        ),
    )
    assert_clean_failure(result)

    (run,) = runs(engine)
    assert run["status"] == "infeasible"
    message = run["message"]
    assert "20 units" in message
    assert "C1 (20)" in message
    assert "P1->W1 road (cap 30)" in message
    assert "C2" not in message
    assert run["certificate_ok"] is None and run["primal_cost"] is None
    assert message in result.stderr
    with engine.connect() as conn:
        assert conn.execute(sa.text("SELECT count(*) FROM run_flow")).scalar_one() == 0


def test_infeasible_week_names_the_lane_minimum_that_cannot_be_met(
    engine: sa.Engine, write_folder
) -> None:
    # By hand: W2->C2 must carry 40 units but C2 takes 10 and has no lane on.
    result = solve_week(
        write_folder,
        bad_week(
            "2026-W40,P1,W1,road,2,,\n"
            "2026-W40,W1,C1,road,1,,\n"
            "2026-W40,P1,W2,road,2,,\n"
            "2026-W40,W2,C2,road,1,,40\n"
        ),
    )
    assert_clean_failure(result)
    (run,) = runs(engine)
    assert run["status"] == "infeasible"
    assert "Lane minimums that cannot be met: W2->C2 road (min 40)" in run["message"]


def test_unbounded_week_names_the_lanes_of_the_cycle(engine: sa.Engine, write_folder) -> None:
    # By hand: W1->W2 road (-3) and W2->W1 rail (+1), both without capacity,
    # earn 2 per unit sent round them.
    result = solve_week(
        write_folder,
        bad_week(
            "2026-W40,P1,W1,road,2,,\n"
            "2026-W40,W1,C1,road,1,,\n"
            "2026-W40,W1,W2,road,-3,,\n"
            "2026-W40,W2,W1,rail,1,,\n"
            "2026-W40,W2,C2,road,1,,\n"
        ),
    )
    assert_clean_failure(result)
    (run,) = runs(engine)
    assert run["status"] == "unbounded"
    assert "W1->W2 road" in run["message"] and "W2->W1 rail" in run["message"]
    assert "-2.00 per unit" in run["message"]
    assert "P1->W1" not in run["message"]
    assert run["message"] in result.stderr


def test_overflow_week_names_the_column_and_a_precision_that_fits(
    engine: sa.Engine, write_folder
) -> None:
    # 10^14 per unit at 4 decimals is 10^18 scaled; times the ~200-unit bound
    # of the lane it is far beyond 2^62.
    result = solve_week(
        write_folder,
        bad_week(
            "2026-W40,P1,W1,road,2,,\n"
            "2026-W40,W1,C1,road,100000000000000,,\n"
            "2026-W40,P1,W2,road,2,,\n"
            "2026-W40,W2,C2,road,1,,\n"
        ),
    )
    assert_clean_failure(result)
    (run,) = runs(engine)
    assert run["status"] == "failed"
    assert "lanes.csv unit_cost" in run["message"]
    assert "--cost-decimals 2" in run["message"]

    # The advised precision fits, and the cost is exact at that size:
    # 50 x 2 + 50 x 10^14 + 10 x 2 + 10 x 1.
    advised = invoke("solve", "--period", "2026-W40", "--cost-decimals", "2")
    assert advised.exit_code == 0, advised.output
    last = runs(engine)[-1]
    assert last["status"] == "optimal" and last["certificate_ok"] is True
    assert last["primal_cost"] == Decimal("5000000000000130")


def test_figure_beyond_int64_once_scaled_is_refused_naming_column_and_lane(
    engine: sa.Engine, write_folder
) -> None:
    # 10^16 per unit at 4 decimals is 10^20 scaled: the figure itself does not
    # fit int64. It is refused when the week is read, before any cast.
    result = solve_week(
        write_folder,
        bad_week(
            "2026-W40,P1,W1,road,2,,\n"
            "2026-W40,W1,C1,road,10000000000000000,,\n"
            "2026-W40,P1,W2,road,2,,\n"
            "2026-W40,W2,C2,road,1,,\n"
        ),
    )
    assert_clean_failure(result)
    assert "lanes.csv column unit_cost: value 10000000000000000 does not fit 64-bit integers" in result.stderr
    assert "(lane W1->C1 road)" in result.stderr
    assert "--cost-decimals" in result.stderr
    (failed,) = runs(engine)
    assert failed["status"] == "failed" and "does not fit 64-bit integers" in failed["message"]

    # At 0 decimals the figure fits, and so do its products: 50 x 10^16 + 130.
    smaller = invoke("solve", "--period", "2026-W40", "--cost-decimals", "0")
    assert smaller.exit_code == 0, smaller.output
    run = runs(engine)[-1]
    assert run["status"] == "optimal" and run["certificate_ok"] is True
    assert run["primal_cost"] == Decimal("500000000000000130")


@pytest.mark.parametrize(
    ("lane_cost", "demand_quantity", "column", "option"),
    [
        ("2.123456", "50", "lanes.csv column unit_cost: value 2.123456", "--cost-decimals"),
        ("2", "49.5", "demand.csv column quantity: value 49.5", "--quantity-decimals"),
    ],
)
def test_figure_with_more_decimals_than_the_precision_is_a_clear_error(
    engine: sa.Engine, write_folder, lane_cost, demand_quantity, column, option
) -> None:
    files = bad_week(
        f"2026-W40,P1,W1,road,{lane_cost},,\n"
        "2026-W40,W1,C1,road,1,,\n"
        "2026-W40,P1,W2,road,2,,\n"
        "2026-W40,W2,C2,road,1,,\n"
    )
    files["demand.csv"] = f"period,site,quantity\n2026-W40,C1,{demand_quantity}\n2026-W40,C2,10\n"
    folder = write_folder(files)
    # The load checks the figures against the precision first, naming the option.
    at_load = invoke("load", str(folder))
    assert at_load.exit_code == 2
    assert f"{option} " in " ".join(at_load.output.split())
    # Loaded for a finer precision, a solve at the default one still refuses cleanly.
    load(folder, option, "6")
    result = planner("solve", "--period", "2026-W40")
    assert_clean_failure(result)
    assert column in result.stderr
    assert option in result.stderr
    assert not any(r["status"] == "optimal" for r in runs(engine))

    # With the precision the message asks for, the week solves.
    more = invoke("solve", "--period", "2026-W40", option, "6")
    assert more.exit_code == 0, more.output
    assert runs(engine)[-1]["certificate_ok"] is True


def test_trailing_zeros_past_the_precision_are_not_extra_decimals(engine: sa.Engine, write_folder) -> None:
    # "2.500000" is 2.5 (common practice, no source: trailing zeros carry no
    # value). PostgreSQL keeps the display scale 6, which the cheap scan of
    # the precision check cannot clear at 4 decimals; the exact test must.
    files = bad_week(
        "2026-W40,P1,W1,road,2.500000,,\n"
        "2026-W40,W1,C1,road,1,,\n"
        "2026-W40,P1,W2,road,2,,\n"
        "2026-W40,W2,C2,road,1.0000000,,\n"
    )
    files["demand.csv"] = "period,site,quantity\n2026-W40,C1,50.000\n2026-W40,C2,10\n"
    result = solve_week(write_folder, files)
    assert result.returncode == 0, result.stderr
    (run,) = runs(engine)
    assert run["status"] == "optimal" and run["certificate_ok"] is True
    # By hand: 50 x (2.5 + 1) + 10 x (2 + 1).
    assert run["primal_cost"] == Decimal("205")
