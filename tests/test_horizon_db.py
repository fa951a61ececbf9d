"""Linked horizons through the command line: ``planner solve --horizon A..B``.

The horizon's optimal cost is checked against scipy's ``linprog`` with HiGHS
(outside reference) on a multi-week LP written here straight from the CSV
rows, without the planner's code: one column per lane and week, per plant and
week of unused supply, per penalised customer and week of shortage, and per
stocking site and week of stock carried to the next week (at that week's
holding cost, up to its storage capacity); one conservation row per site and
week. The stored rows are then checked for what a horizon run must hold: one
run, flows of every week, stock per site and week, a price per site and week,
and conservation at every site in every week.
"""

from __future__ import annotations

from collections import defaultdict
from decimal import Decimal

import sqlalchemy as sa
from typer.testing import CliRunner

from planner.cli import app
from planner.runs.schedule import stale_periods
from tests.helpers import csv_rows, planner
from tests.reference_model import reference_network, solve_lp, week_from_files

#: HiGHS answers in floats; the data have at most two decimals.
TOLERANCE = 1e-6

WEEKS = ["2026-W40", "2026-W41", "2026-W42"]

_WEEKLY_LANES = (
    "{w},P1,W1,road,{road},80,\n"
    "{w},P1,W1,rail,0.60,30,10\n"
    "{w},W1,C1,,{w1c1},,\n"
    "{w},W1,C2,,2.00,,\n"
    "{w},P1,C1,road,3.00,20,\n"
)

# Week 42 has no supply at all: its demand, and the rail minimum out of P1,
# can only be met from stock carried out of week 41.
STOCK_FILES = {
    "sites.csv": (
        "site,kind,holding_cost,storage_capacity\n"
        "P1,plant,0.10,50\n"
        "W1,warehouse,0.05,200\n"
        "C1,customer,,\n"
        "C2,customer,,\n"
    ),
    "supply.csv": "period,site,quantity\n2026-W40,P1,120\n2026-W41,P1,20\n",
    "demand.csv": (
        "period,site,quantity,shortage_penalty\n"
        "2026-W40,C1,40,\n2026-W40,C2,10,30\n"
        "2026-W41,C1,50,\n2026-W41,C2,20,30\n"
        "2026-W42,C1,40,\n2026-W42,C2,20,30\n"
    ),
    "lanes.csv": "period,origin,destination,mode,unit_cost,capacity,min_quantity\n"
    + _WEEKLY_LANES.format(w="2026-W40", road="1.00", w1c1="1.00")
    + _WEEKLY_LANES.format(w="2026-W41", road="1.10", w1c1="1.40")
    + _WEEKLY_LANES.format(w="2026-W42", road="1.20", w1c1="1.50"),
}




def load(folder, *options: str) -> None:
    result = CliRunner().invoke(app, ["load", str(folder), *options])
    assert result.exit_code == 0, result.output




def horizon_reference(files: dict[str, str], weeks: list[str]):
    """The horizon read straight from the CSV rows and solved by scipy's linprog (HiGHS), in currency.

    Returns the optimal cost and the reference's price per ``(week, site code)``.
    """
    read = [week_from_files(files, w) for w in weeks]
    net = reference_network([r.week for r in read])
    answer = solve_lp(net)
    assert answer.status == "optimal"
    prices = {
        (w, code): answer.potential[net.site_in[t][s]] / 10_000
        for t, w in enumerate(weeks) for s, code in enumerate(read[0].site_codes)
    }
    return answer.cost / 10_000, prices


def test_horizon_with_stock_is_one_run_with_flows_stock_and_prices_per_week(
    engine: sa.Engine, write_folder
) -> None:
    # Week 42 has no supply on purpose: it is served from stock.
    load(write_folder(STOCK_FILES), "--allow-missing-periods")
    result = planner("solve", "--horizon", "2026-W40..2026-W42")
    assert result.returncode == 0, result.stderr
    assert "2026-W40..2026-W42" in result.stdout

    with engine.connect() as conn:
        (run,) = conn.execute(sa.text("SELECT * FROM solve_run")).mappings().all()
        period_id = dict(conn.execute(sa.text("SELECT code, id FROM period")).all())
        flows = conn.execute(
            sa.text(
                "SELECT period AS week, origin, destination, flow, min_quantity, capacity "
                "FROM lane_flow_of_run(:r)"
            ),
            {"r": run["id"]},
        ).mappings().all()
        stock = conn.execute(
            sa.text(
                "SELECT k.period AS week, s.code AS site, k.stock, k.holding_cost FROM run_stock k "
                "JOIN site s ON s.id = k.site_id "
                "WHERE k.run_id = :r"
            ),
            {"r": run["id"]},
        ).mappings().all()
        prices = conn.execute(
            sa.text(
                "SELECT r.period AS week, s.code AS site, r.price, r.price_low, r.price_high, "
                "r.shortage, r.spare FROM run_site_price r "
                "JOIN site s ON s.id = r.site_id WHERE r.run_id = :r"
            ),
            {"r": run["id"]},
        ).mappings().all()

    assert run["kind"] == "horizon" and run["period_id"] is None
    assert (run["first_period_id"], run["last_period_id"]) == (
        period_id["2026-W40"], period_id["2026-W42"],
    )
    assert run["status"] == "optimal"
    assert run["certificate_ok"] is True and run["duality_gap"] == 0

    reference_cost, highs_price = horizon_reference(STOCK_FILES, WEEKS)
    # scipy.optimize.linprog (HiGHS) on the model read from the CSV rows, outside reference.
    assert abs(float(run["primal_cost"]) - reference_cost) < TOLERANCE

    # Flows of every lane in every week, within their minimum and capacity.
    lanes_per_week = defaultdict(int)
    for f in flows:
        lanes_per_week[f["week"]] += 1
        assert f["min_quantity"] <= f["flow"]
        assert f["capacity"] is None or f["flow"] <= f["capacity"]
    assert lanes_per_week == {w: 5 for w in WEEKS}

    # Stock out of every week but the last, for the two sites that can store.
    assert {(k["week"], k["site"]) for k in stock} == {
        (w, s) for w in WEEKS[:-1] for s in ("P1", "W1")
    }
    carried = {(k["week"], k["site"]): k["stock"] for k in stock}
    assert carried["2026-W40", "P1"] <= 50 and carried["2026-W41", "P1"] <= 50
    assert {k["site"]: k["holding_cost"] for k in stock} == {
        "P1": Decimal("0.10"), "W1": Decimal("0.05"),
    }
    # Week 42 has no supply: C1's 40 units come from stock, and P1's rail
    # minimum of 10 from stock kept at P1.
    assert carried["2026-W41", "P1"] >= 10
    assert carried["2026-W41", "P1"] + carried["2026-W41", "W1"] >= 40

    # A price per site and week; HiGHS's dual lies in each stored range.
    assert {(p["week"], p["site"]) for p in prices} == {
        (w, s) for w in WEEKS for s in ("P1", "W1", "C1", "C2")
    }
    for p in prices:
        assert p["price_low"] is None or p["price_low"] <= p["price"]
        assert p["price_high"] is None or p["price"] <= p["price_high"]
        dual = highs_price[p["week"], p["site"]]
        assert p["price_low"] is None or float(p["price_low"]) <= dual + TOLERANCE
        assert p["price_high"] is None or dual <= float(p["price_high"]) + TOLERANCE

    # Conservation at every site and week, from the stored rows alone.
    balance = defaultdict(Decimal)
    for r in csv_rows(STOCK_FILES["supply.csv"]):
        balance[r["period"], r["site"]] += Decimal(r["quantity"])
    for r in csv_rows(STOCK_FILES["demand.csv"]):
        balance[r["period"], r["site"]] -= Decimal(r["quantity"])
    for f in flows:
        balance[f["week"], f["origin"]] -= f["flow"]
        balance[f["week"], f["destination"]] += f["flow"]
    for (week, site), units in carried.items():
        balance[week, site] -= units
        balance[WEEKS[WEEKS.index(week) + 1], site] += units
    for p in prices:
        balance[p["week"], p["site"]] += (p["shortage"] or 0) - (p["spare"] or 0)
    assert all(units == 0 for units in balance.values()), dict(balance)

    shown = CliRunner().invoke(app, ["certificate", "--run", str(run["id"])])
    assert shown.exit_code == 0, shown.output
    assert "exact" in shown.output


def test_horizon_without_storage_costs_the_sum_of_its_weeks(
    engine: sa.Engine, write_folder, network_files
) -> None:
    # The shared network has no holding cost or storage capacity: nothing is
    # carried, so the horizon splits into independent weeks.
    load(write_folder(network_files))
    horizon = planner("solve", "--horizon", "2026-W40..2026-W41")
    assert horizon.returncode == 0, horizon.stderr
    # A horizon run is no week run: both weeks still wait for their own solve.
    assert [p for p, _ in stale_periods(engine)] == ["2026-W40", "2026-W41"]
    weeks = planner("solve", "--all")
    assert weeks.returncode == 0, weeks.stderr

    with engine.connect() as conn:
        rows = conn.execute(sa.text("SELECT id, kind, primal_cost, certificate_ok FROM solve_run")).all()
        stock_rows = conn.execute(sa.text("SELECT count(*) FROM run_stock")).scalar_one()
        flow_rows = dict(
            conn.execute(sa.text("SELECT run_id, count(*) FROM lane_flow_by_run GROUP BY run_id")).all()
        )
    (horizon_run,) = [r for r in rows if r.kind == "horizon"]
    week_runs = [r for r in rows if r.kind == "week"]
    assert len(week_runs) == 2
    assert all(r.certificate_ok for r in rows)
    assert horizon_run.primal_cost == sum(r.primal_cost for r in week_runs)
    assert stock_rows == 0
    assert flow_rows[horizon_run.id] == sum(flow_rows[r.id] for r in week_runs)


def test_infeasible_horizon_is_stored_with_the_week_in_its_message(
    engine: sa.Engine, write_folder, network_files
) -> None:
    # C3 has no shortage penalty; in week 41 it needs far more than all supply.
    network_files["demand.csv"] = network_files["demand.csv"].replace(
        "2026-W41,C3,15,", "2026-W41,C3,500,"
    )
    load(write_folder(network_files))
    result = CliRunner().invoke(app, ["solve", "--horizon", "2026-W40..2026-W41"])
    assert result.exit_code == 1
    with engine.connect() as conn:
        (run,) = conn.execute(sa.text("SELECT * FROM solve_run")).mappings().all()
    assert run["kind"] == "horizon" and run["status"] == "infeasible"
    assert "C3 in 2026-W41" in run["message"]


def test_horizon_over_a_week_without_snapshot_is_refused(
    engine: sa.Engine, write_folder, network_files
) -> None:
    load(write_folder(network_files))
    missing = CliRunner().invoke(app, ["solve", "--horizon", "2026-W40..2026-W42"])
    assert missing.exit_code == 2
    assert "2026-W42 has no loaded snapshot" in missing.output
    backwards = CliRunner().invoke(app, ["solve", "--horizon", "2026-W41..2026-W40"])
    assert backwards.exit_code == 2
    assert backwards.exception is None or isinstance(backwards.exception, SystemExit)
    with engine.connect() as conn:
        assert conn.execute(sa.text("SELECT count(*) FROM solve_run")).scalar_one() == 0
