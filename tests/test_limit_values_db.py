"""Exact limit values and rate ranges through the database: stored, viewed, reported, asked for.

The week below is built so that every figure can be worked out by hand beside
it; the values are also checked by re-solving with scipy HiGHS on the model
written from the input (``tests/reference_model.py``, outside reference).
"""

from __future__ import annotations

from decimal import Decimal as D

import sqlalchemy as sa
from typer.testing import CliRunner

from planner.cli import app
from planner.core.week import NONE, SiteKind, WeekData
from planner.database.ingest import load_folder
from planner.reports.queries import binding_capacities, limit_values, week_report
from planner.reports.rates import lane_rate_ranges
from planner.runs.weekly import solve_period
from tests.helpers import csv_rows
from tests.reference_model import optimal_cost, with_lane

runner = CliRunner()

# P (supply 10) -> W (capacity 5, cost 1) -> C (capacity 5, cost 1); C needs 8
# with a shortage penalty of 20; a committed lane P -> D (minimum 2, cost 3) to
# a second customer D needing 2, and a dear lane P -> D (cost 6).
# Both lanes to C are full: one more unit on either alone reaches nothing
# (worth 0, "full, no value"); one unit less on either leaves one more unit
# short: 20 - 2 = 18. The minimum on P -> D binds at 2 = D's demand: one unit
# less committed saves nothing (D still needs it, the lane is the cheapest),
# one more is impossible (D cannot take it and has no other way out).
FILES = {
    "sites.csv": "site,kind\nP,plant\nW,warehouse\nC,customer\nD,customer\n",
    "supply.csv": "period,site,quantity\n2026-W10,P,10\n",
    "demand.csv": "period,site,quantity,shortage_penalty\n2026-W10,C,8,20\n2026-W10,D,2,\n",
    "lanes.csv": (
        "period,origin,destination,mode,unit_cost,capacity,min_quantity\n"
        "2026-W10,P,W,road,1,5,\n2026-W10,W,C,road,1,5,\n2026-W10,P,D,road,3,,2\n2026-W10,P,D,rail,6,,\n"
    ),
}


def the_week() -> WeekData:
    """The same week as arrays (sites P, W, C, D; lanes in file order), costs scaled by 10**4."""
    return WeekData.from_arrays(
        [SiteKind.PLANT, SiteKind.WAREHOUSE, SiteKind.CUSTOMER, SiteKind.CUSTOMER],
        [0, 1, 0, 0], [1, 2, 3, 3], [10_000, 10_000, 30_000, 60_000],
        supply=[10, 0, 0, 0], demand=[0, 0, 8, 2], shortage_penalty=[NONE, NONE, 200_000, NONE],
        lane_capacity=[5, 5, NONE, NONE], lane_min=[0, 0, 2, 0],
    )


def solved(engine, write_folder) -> int:
    assert load_folder(engine, write_folder(FILES)).created
    summary = solve_period(engine, "2026-W10")
    assert summary.ok, summary.message
    return summary.run_id


def test_hand_week_by_resolving_with_highs():
    week = the_week()
    base = optimal_cost([week])  # scipy linprog (HiGHS) on the model from the input
    assert base == (5 * 2 + 3 * 20 + 2 * 3) * 10_000  # hand computed: 76
    assert optimal_cost([with_lane(week, 0, capacity=1)]) == base  # one more unit P->W: worth 0
    assert optimal_cost([with_lane(week, 0, capacity=-1)]) - base == 18 * 10_000  # one less: 18
    assert optimal_cost([with_lane(week, 2, minimum=-1)]) == base  # one less committed: 0
    assert optimal_cost([with_lane(week, 2, minimum=1)]) is None  # one more committed: no plan


def test_binding_capacity_ranks_only_what_is_worth_something(engine, write_folder):
    solved(engine, write_folder)
    ranked = binding_capacities(engine, "2026-W10")
    assert ranked.empty  # nothing is worth one more unit
    full = binding_capacities(engine, "2026-W10", full_without_value=True)
    got = {r["label"]: (r["rank"], r["capacity_value"], r["value_less"], r["status"]) for r in full.to_dict("records")}
    assert got == {
        "P->W road": (None, D(0), D(18), "full, no value"),  # hand computed above
        "W->C road": (None, D(0), D(18), "full, no value"),
    }
    report = week_report(engine, "2026-W10")
    assert report.binding.empty
    assert any("2 more capacities are full but worth nothing more" in note for note in report.notes)


def test_limit_value_view_lists_every_limit_with_both_sides(engine, write_folder):
    solved(engine, write_folder)
    rows = {(r["kind"], r["label"]): r for r in limit_values(engine, "2026-W10").to_dict("records")}
    assert set(rows) == {("lane capacity", "P->W road"), ("lane capacity", "W->C road"), ("lane minimum", "P->D road")}
    cap = rows[("lane capacity", "P->W road")]
    assert (cap["bound"], cap["flow"], cap["loosen_value"], cap["tighten_cost"]) == (5, 5, 0, 18)
    # One unit less costs 18 for all 5 units (down to 0): C's shortage can grow by 5.
    assert cap["loosen_units"] == D("Infinity") and cap["tighten_units"] == 5
    assert (cap["rate_low"], cap["rate_high"]) == (D("-Infinity"), D(19))  # 1 + 18: then short is cheaper
    minimum = rows[("lane minimum", "P->D road")]
    assert (minimum["loosen_value"], minimum["tighten_cost"]) == (0, None)
    assert minimum["tighten_blocked"].startswith("the extra committed unit has nowhere to go")
    assert (minimum["rate_low"], minimum["rate_high"]) == (D("-Infinity"), D("Infinity"))


def test_reader_role_may_read_the_limit_view(engine, write_folder):
    solved(engine, write_folder)
    with engine.connect() as conn:
        granted = conn.execute(
            sa.text("SELECT has_table_privilege('planner_reader', 'limit_value', 'SELECT')")
        ).scalar_one()
    assert granted


def test_rate_ranges_of_a_site_s_lanes_and_of_one_lane_with_routes(engine, write_folder):
    solved(engine, write_folder)
    found = {r.lane: r for r in lane_rate_ranges(engine, "2026-W10", site="D")}
    # The rail lane is idle whatever its rate: the committed road lane already
    # brings D all it needs, and no unit can leave D. Hand reasoning.
    rail = found["P->D rail"]
    assert (rail.state, rail.low, rail.high) == ("idle", None, None)
    assert found["P->D road"].state == "at minimum"
    (one,) = lane_rate_ranges(engine, "2026-W10", lanes=["W->C road"], routes=True)
    assert (one.low, one.high) == (None, D(19))
    assert one.high_route and "unmet demand" in one.text()


def test_rate_ranges_cli(engine, write_folder):
    solved(engine, write_folder)
    result = runner.invoke(app, ["rate-ranges", "-p", "2026-W10", "--format", "csv"])
    assert result.exit_code == 0, result.output
    rows = {r["lane"]: r for r in csv_rows(result.stdout)}
    assert set(rows) == {"P->W road", "W->C road", "P->D road", "P->D rail"}
    assert rows["W->C road"]["rate_high"] == "19.0000"
    result = runner.invoke(app, ["rate-ranges", "-p", "2026-W10", "--lane", "P->X road"])
    assert result.exit_code == 2 and "no lane P->X road" in result.output
