"""Report library, charts and the `planner prices` / `planner report` commands, on the
hand network of tests/test_views.py (every expected figure is computed by hand there)."""

from __future__ import annotations

import json
from decimal import Decimal as D
from pathlib import Path

import matplotlib.image
import pandas as pd
import pytest
import sqlalchemy as sa
from typer.testing import CliRunner

from planner.cli import app
from planner.database.ingest import load_folder
from planner.reports.charts import network_chart, price_chart, site_positions
from planner.reports.queries import (
    cost_breakdown,
    network_of_week,
    price_moves,
    site_prices,
    week_report,
)
from planner.runs.weekly import solve_period
from tests.helpers import csv_rows
from tests.test_views import SITES, hand_network, solve_hand_network

runner = CliRunner()


@pytest.fixture
def solved(engine: sa.Engine, write_folder) -> dict[str, int]:
    return solve_hand_network(engine, write_folder)


def run_cli(*args: str):
    return runner.invoke(app, list(args))




def test_prices_csv_hand_computed(solved: dict[str, int]) -> None:
    result = run_cli("prices", "--format", "csv")
    assert result.exit_code == 0, result.output
    got = {
        (r["period"], r["site"]): (D(r["price"]), D(r["price_low"]), D(r["price_high"]), r["degenerate"], r["price_change"])
        for r in csv_rows(result.stdout)
    }
    # Hand computed in tests/test_views.py.
    assert got[("2026-W10", "C1")] == (12, 12, 12, "false", "")
    assert got[("2026-W11", "C2")] == (15, 15, 15, "false", "2.0000")
    assert got[("2026-W11", "C3")] == (5, 3, 5, "true", "0.0000")
    assert got[("2026-W11", "P3")] == (2, 0, 2, "true", "0.0000")
    assert len(got) == 14
    # Every price at the run's precision (4 cost decimals), the currency on every row.
    rows = csv_rows(result.stdout)
    assert {len(r["price"].split(".")[1]) for r in rows} == {4}
    assert {r["currency"] for r in rows} == {"XXX"}


def test_prices_of_one_site_in_a_week_range(solved: dict[str, int]) -> None:
    result = run_cli("prices", "C3", "--from", "2026-W11", "--to", "2026-W11", "--format", "csv")
    assert result.exit_code == 0, result.output
    assert [(r["period"], r["price"], r["price_low"], r["price_high"]) for r in csv_rows(result.stdout)] == [
        ("2026-W11", "5.0000", "3.0000", "5.0000")
    ]
    table = run_cli("prices", "C3")
    assert table.exit_code == 0
    assert "3.00" in table.stdout and "yes" in table.stdout  # W11: low 3, degenerate
    plants = run_cli("prices", "--kind", "plant", "--format", "json")
    assert {(r["period"], r["site"], r["price"]) for r in json.loads(plants.stdout)} == {
        (week, site, price)
        for week in ("2026-W10", "2026-W11")
        for site, price in (("P1", "0.0000"), ("P2", "0.0000"), ("P3", "2.0000"))
    }


def test_prices_of_one_run(solved: dict[str, int]) -> None:
    result = run_cli("prices", "C1", "--run", str(solved["2026-W11"]), "--format", "json")
    assert [(r["period"], r["price"], r["price_change"]) for r in json.loads(result.stdout)] == [
        ("2026-W11", "14.0000", "2.0000")
    ]


def test_prices_nothing_to_show_and_bad_input(engine: sa.Engine, solved: dict[str, int]) -> None:
    empty = run_cli("prices", "--from", "2027-W01")
    assert empty.exit_code == 0
    assert "no prices for any site between 2027-W01" in empty.stdout
    empty_csv = run_cli("prices", "C1", "--from", "2027-W01", "--format", "csv")
    assert empty_csv.exit_code == 0
    assert empty_csv.stdout.startswith("period,starts_on,site,")  # the header, for scripts
    assert len(empty_csv.stdout.splitlines()) == 1
    for args, message in (
        (("prices", "Q9"), "site Q9 is not known"),
        (("prices", "--from", "2026-10"), "not an ISO week code"),
        (("prices", "--kind", "depot"), "not a site kind"),
        (("prices", "--chart", "x.png"), "--chart draws one site"),
    ):
        result = run_cli(*args)
        assert result.exit_code == 2, args
        assert message in result.stderr


def test_prices_chart(solved: dict[str, int], tmp_path: Path) -> None:
    path = tmp_path / "c3.png"
    result = run_cli("prices", "C3", "--chart", str(path))
    assert result.exit_code == 0, result.output
    assert matplotlib.image.imread(path).shape[:2] == (400, 800)


COST_W10 = [  # hand computed: lanes in use by echelon then mode, then handling 50 x 1 and penalties 15 x 5
    ("plant->warehouse", "road", "50", "100.0000"),
    ("plant->customer", "rail", "10", "40.0000"),
    ("plant->customer", "road", "15", "135.0000"),
    ("warehouse->customer", "", "50", "70.0000"),
    ("warehouse handling", "", "50", "50.0000"),
    ("shortage penalty", "", "15", "75.0000"),
]


def test_report_csv_sections_hand_computed(solved: dict[str, int]) -> None:
    cost = run_cli("report", "--period", "2026-W10", "--format", "csv", "--section", "cost")
    assert cost.exit_code == 0, cost.output
    assert [(r["echelon"], r["mode"], r["units"], r["cost"]) for r in csv_rows(cost.stdout)] == COST_W10

    binding = csv_rows(run_cli("report", "--period", "2026-W11", "--format", "csv", "--section", "binding").stdout)
    assert [(r["rank"], r["kind"], r["label"], r["capacity_value"]) for r in binding] == [
        ("1", "lane", "P2->C2 rail", "11.0000"),
        ("2", "warehouse", "W1", "10.0000"),
    ]
    moves = csv_rows(run_cli("report", "--period", "2026-W11", "--format", "csv", "--section", "moves").stdout)
    assert [(r["site"], r["previous_price"], r["price"], r["change"]) for r in moves] == [
        ("C1", "12.0000", "14.0000", "2.0000"),
        ("C2", "13.0000", "15.0000", "2.0000"),
    ]
    shortages = csv_rows(run_cli("report", "--period", "2026-W10", "--format", "csv", "--section", "shortages").stdout)
    assert [(r["customer"], r["units_short"], r["penalty"], r["penalty_cost"]) for r in shortages] == [
        ("C3", "15", "5.0000", "75.0000")
    ]
    # One section with nothing in it is a header only.
    none = run_cli("report", "--period", "2026-W11", "--format", "csv", "--section", "shortages")
    assert none.exit_code == 0 and len(none.stdout.splitlines()) == 1


def test_report_csv_all_sections_in_one_table(solved: dict[str, int]) -> None:
    result = run_cli("report", "--period", "2026-W10", "--format", "csv", "--top", "1")
    assert result.exit_code == 0, result.output
    found = csv_rows(result.stdout)
    assert [r["section"] for r in found] == ["cost"] * 6 + ["binding", "shortages"]  # W09 unsolved: no moves
    assert (found[6]["label"], found[6]["capacity_value"]) == ("P2->C2 rail", "9.0000")


def test_report_json(solved: dict[str, int]) -> None:
    result = run_cli("report", "--period", "2026-W11", "--format", "json")
    body = json.loads(result.stdout)
    assert (body["period"], body["previous_period"]) == ("2026-W11", "2026-W10")
    assert (body["run"]["run_id"], body["run"]["cost"], body["run"]["certificate_ok"]) == (
        solved["2026-W11"], "460.0000", True
    )
    assert sum(D(row["cost"]) for row in body["cost"]) == 460  # hand computed
    assert body["currency"] == "XXX"
    assert [m["site"] for m in body["moves"]] == ["C1", "C2"]
    assert body["shortages"] == [] and body["notes"] == []


def test_report_table(solved: dict[str, int]) -> None:
    result = run_cli("report", "--period", "2026-W10")
    assert result.exit_code == 0, result.output
    out = result.stdout
    for expected in (
        "cost 470.00", "certificate exact", "Cost by echelon and mode", "total", "470.00",
        "P2->C2 rail", "9.00", "Shortages", "75.00",
        "no previous week to compare prices with: 2026-W09 was never loaded",
        "no previous week to compare 2026-W10 with",
    ):
        assert expected in out, expected


def test_report_nothing_to_show(engine: sa.Engine, solved: dict[str, int], write_folder) -> None:
    unsolved = run_cli("report", "--period", "2026-W12")
    assert unsolved.exit_code == 0
    assert "2026-W12 was never loaded; load a folder that has it with `planner load DIR`" in unsolved.stdout
    as_json = run_cli("report", "--period", "2026-W12", "--format", "json")
    assert as_json.exit_code == 0
    assert json.loads(as_json.stdout)["run"] is None
    assert "2026-W12 was never loaded" in as_json.stderr
    # A week whose only run is infeasible: C2 (no penalty) has no lane into it.
    week12 = {
        "sites.csv": SITES,
        "supply.csv": "period,site,quantity\n2026-W12,P1,100\n",
        "demand.csv": "period,site,quantity,shortage_penalty\n2026-W12,C2,30,\n",
        "lanes.csv": "period,origin,destination,mode,unit_cost,capacity,min_quantity\n2026-W12,P1,W1,road,2,,\n",
    }
    load_folder(engine, write_folder(week12))
    assert solve_period(engine, "2026-W12").status == "infeasible"
    infeasible = run_cli("report", "--period", "2026-W12")
    assert infeasible.exit_code == 0
    assert "no optimal run of 2026-W12: its newest run" in infeasible.stdout
    assert "ended infeasible; see `planner certificate --run" in infeasible.stdout


def test_report_bad_input(solved: dict[str, int]) -> None:
    for args, message in (
        (("report", "--period", "2026-W54"), "does not exist"),
        (("report", "--period", "2026-W10", "--run", str(solved["2026-W11"])),
         f"run {solved['2026-W11']} (week 2026-W11) does not cover 2026-W10"),
    ):
        result = run_cli(*args)
        assert result.exit_code == 2, args
        assert message in result.stderr


def test_report_chart(solved: dict[str, int], tmp_path: Path) -> None:
    path = tmp_path / "network.png"
    result = run_cli("report", "--period", "2026-W10", "--format", "json", "--chart", str(path))
    assert result.exit_code == 0, result.output
    assert json.loads(result.stdout)["period"] == "2026-W10"  # the chart message goes to stderr
    assert matplotlib.image.imread(path).shape[:2] == (650, 900)


def test_week_report_library(engine: sa.Engine, solved: dict[str, int], write_folder) -> None:
    report = week_report(engine, "2026-W10")
    assert report.cost_total == report.run["cost"] == 470
    assert report.notes == ["no previous week to compare prices with: 2026-W09 was never loaded"]
    # A newer run that ended infeasible is named, and the latest optimal one reported.
    load_folder(engine, write_folder(hand_network({"2026-W10": 12}, cut_off_c2=True)))
    failed = solve_period(engine, "2026-W10")
    again = week_report(engine, "2026-W10")
    assert again.run["run_id"] == solved["2026-W10"]
    assert f"the newest run of 2026-W10 (run {failed.run_id}) ended infeasible" in again.notes[0]
    older = week_report(engine, "2026-W10", run_id=solved["2026-W10"])
    assert older.cost_total == 470 and older.notes[-1].startswith("no previous week to compare prices with")


def test_cost_breakdown_matches_lane_flow(engine: sa.Engine, solved: dict[str, int]) -> None:
    frame = cost_breakdown(engine, "2026-W11")
    lanes = planner_frame(engine, "SELECT echelon, mode, sum(cost) AS cost FROM lane_flow WHERE period = '2026-W11' GROUP BY 1, 2")
    lane_part = frame[~frame["echelon"].isin(["warehouse handling", "shortage penalty"])]
    assert dict(zip(zip(lane_part["echelon"], lane_part["mode"]), lane_part["cost"])) == dict(
        zip(zip(lanes["echelon"], lanes["mode"]), lanes["cost"])
    )
    assert cost_breakdown(engine, "2026-W12").empty


def planner_frame(engine: sa.Engine, query: str) -> pd.DataFrame:
    with engine.connect() as conn:
        return pd.read_sql(sa.text(query), conn)


def test_price_moves_and_network(engine: sa.Engine, solved: dict[str, int]) -> None:
    moves = price_moves(engine, "2026-W11", top=1)
    assert moves[["site", "change"]].values.tolist() == [["C1", 2]]  # C1 and C2 tie at +2: by code
    assert price_moves(engine, "2026-W10").empty  # no W09
    sites, lanes, in_use = network_of_week(engine, "2026-W10", max_lanes=2)
    assert sorted(sites["site"]) == ["C1", "C2", "C3", "P1", "P2", "P3", "W1"]
    assert in_use == 6  # hand computed: every lane but P2->C3
    assert lanes[["origin", "destination", "flow"]].values.tolist() == [["P1", "W1", 50], ["W1", "C1", 30]]
    _, every, _ = network_of_week(engine, "2026-W10")
    assert every[every["at_capacity"].astype(bool)][["origin", "destination"]].values.tolist() == [["P2", "C2"]]


def test_site_prices_library(engine: sa.Engine, solved: dict[str, int]) -> None:
    frame = site_prices(engine, "P3", first="2026-W10", last="2026-W11")
    assert frame[["period", "price", "price_low", "price_high"]].values.tolist() == [
        ["2026-W10", 2, 2, 2], ["2026-W11", 2, 0, 2]
    ]


def test_site_positions() -> None:
    sites = pd.DataFrame(
        {
            "site": ["P1", "W1", "C1", "C2"],
            "kind": ["plant", "warehouse", "customer", "customer"],
            "region": ["north", "north", "north", "south"],
            "x": [0.0, 4.0, None, 8.0],
            "y": [0.0, 2.0, None, 2.0],
        }
    )
    xy = site_positions(sites)
    assert xy[[0, 1, 3]].tolist() == [[0.0, 0.0], [4.0, 2.0], [8.0, 2.0]]
    # C1 has no coordinates: beside the centre of its region's sites (2, 1).
    assert abs(xy[2, 0] - 2.0) <= 0.5 and abs(xy[2, 1] - 1.0) <= 0.5
    layered = site_positions(sites.assign(x=None, y=None))
    assert layered[:, 0].tolist() == [0.0, 1.0, 2.0, 2.0]
    assert layered[2, 1] > layered[3, 1]  # north above south


def test_charts_refuse_what_they_cannot_draw() -> None:
    with pytest.raises(ValueError, match="no prices to chart"):
        price_chart(pd.DataFrame(columns=["site", "period", "price", "price_low", "price_high", "degenerate"]))
    two = pd.DataFrame(
        {"site": ["C1", "C2"], "period": ["2026-W10"] * 2, "price": [1, 2], "price_low": [1, 2],
         "price_high": [1, 2], "degenerate": [False, False]}
    )
    with pytest.raises(ValueError, match="one site"):
        price_chart(two)
    empty_sites = pd.DataFrame(columns=["site", "kind", "region", "x", "y"])
    empty_lanes = pd.DataFrame(columns=["origin", "destination", "flow", "at_capacity"])
    assert network_chart(empty_sites, empty_lanes)[:4] == b"\x89PNG"
