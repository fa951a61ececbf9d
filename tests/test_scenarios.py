"""Scenarios and comparisons against a real PostgreSQL: the base week is never touched, runs compare exactly."""

from __future__ import annotations

import json
from decimal import Decimal

import numpy as np
import psycopg
import pytest
import sqlalchemy as sa

from planner.core.edits import apply_edits
from planner.database.history import prune
from planner.database.snapshot import Scaling, read_snapshot, snapshot_names
from planner.reports.compare import compare_runs
from planner.runs.scenarios import scenario_runs, solve_scenario
from tests.helpers import csv_rows, invoke
from tests.reference_model import optimal_cost

#: Everything a load wrote: a scenario must leave it as it was.
SNAPSHOT_TABLES = ("load_batch", "site_version", "supply", "demand", "lane_rate", "period_snapshot")
#: What the week views and cron see.
WEEK_VIEWS = ("latest_week_run", "newest_week_run", "site_price_history", "lane_flow", "binding_capacity",
              "shortage", "run_summary", "limit_value")
EDITS = ["close C3", "rate from P2 +8%", "demand C1 40", "demand region south +10%", "capacity P1->W1 road none", "handling W1 0.25",
         "add-lane P2->C2 truck 4.5"]


def dump(engine: sa.Engine, relations) -> dict[str, list[tuple]]:
    with engine.connect() as conn:
        return {r: sorted(map(tuple, conn.execute(sa.text(f"SELECT * FROM {r}"))), key=repr) for r in relations}


def loaded_and_solved(write_folder, files) -> None:
    assert invoke("load", str(write_folder(files))).exit_code == 0
    result = invoke("solve", "--all")
    assert result.exit_code == 0, result.output


def create(name: str, *edits: str, base: str = "2026-W40") -> None:
    args = ["scenario", "create", name, "--base", base]
    for edit in edits:
        args += ["--edit", edit]
    result = invoke(*args)
    assert result.exit_code == 0, result.output


def test_a_scenario_leaves_the_snapshot_resolve_and_the_week_views_as_they_were(
    engine: sa.Engine, write_folder, network_files
) -> None:
    loaded_and_solved(write_folder, network_files)
    before = dump(engine, SNAPSHOT_TABLES + WEEK_VIEWS)
    dry_before = invoke("resolve", "--dry-run").output
    periods_before = invoke("periods").output
    certificate_before = invoke("certificate", "--period", "2026-W40").output

    create("what-if", *EDITS)
    solved = invoke("scenario", "solve", "what-if")
    assert solved.exit_code == 0, solved.output

    assert dump(engine, SNAPSHOT_TABLES + WEEK_VIEWS) == before
    assert invoke("resolve", "--dry-run").output == dry_before
    assert invoke("periods").output == periods_before
    assert invoke("certificate", "--period", "2026-W40").output == certificate_before
    with engine.connect() as conn:
        run = conn.execute(sa.text(
            "SELECT r.*, s.name, EXISTS (SELECT FROM run_pin p WHERE p.run_id = r.id) AS pinned "
            "FROM solve_run r JOIN scenario s ON s.id = r.scenario_id")).mappings().one()
        snap = read_snapshot(conn, "2026-W40", Scaling())
        names = snapshot_names(conn, snap)
    assert run["status"] == "optimal" and run["certificate_ok"] and run["pinned"]
    assert run["engine"] in ("warm", "ortools", "ortools after warm")
    from planner.core.edits import parse_edit

    week, _ = apply_edits(snap.week, names, [parse_edit(e) for e in EDITS])
    assert week.demand.tolist() != snap.week.demand.tolist()
    # scipy linprog(method="highs") on the edited week: the stored cost is its optimum
    assert run["primal_cost"] * 10_000 == optimal_cost(week)


def test_retention_keeps_the_week_plan_and_the_pinned_scenario_run(
    engine: sa.Engine, write_folder, network_files
) -> None:
    loaded_and_solved(write_folder, network_files)
    create("dearer", "rate all +10%")
    scenario_run = solve_scenario(engine, "dearer").summary.run_id
    with engine.connect() as conn:
        week_run = conn.execute(sa.text("SELECT run_id FROM latest_week_run WHERE period = '2026-W40'")).scalar()
    prune(engine, keep=1)
    with engine.connect() as conn:
        kept = set(conn.execute(sa.text("SELECT id FROM solve_run")).scalars())
        latest = conn.execute(sa.text("SELECT run_id FROM latest_week_run WHERE period = '2026-W40'")).scalar()
    assert {week_run, scenario_run} <= kept and latest == week_run


def test_warm_and_cold_solves_agree_and_say_which_engine(engine: sa.Engine, write_folder, network_files) -> None:
    loaded_and_solved(write_folder, network_files)
    create("rates", "rate to C2 +25%", "demand C1 33")
    warm = solve_scenario(engine, "rates")
    cold = solve_scenario(engine, "rates", warm=False)
    assert warm.base_run_id is not None and warm.engine in ("warm", "ortools after warm")
    assert cold.engine == "ortools"
    assert warm.summary.cost == cold.summary.cost and warm.summary.certificate_ok
    with engine.connect() as conn:
        engines = list(conn.execute(sa.text("SELECT engine FROM solve_run WHERE scenario_id IS NOT NULL ORDER BY id"))
                       .scalars())
    assert engines == [warm.engine, "ortools"]


def test_comparing_a_run_with_itself_shows_no_change(engine: sa.Engine, write_folder, network_files) -> None:
    loaded_and_solved(write_folder, network_files)
    with engine.connect() as conn:
        run = conn.execute(sa.text("SELECT run_id FROM latest_week_run WHERE period = '2026-W40'")).scalar()
    same = compare_runs(engine, run, run)
    assert len(same.cost) > 0 and (same.cost["difference"] == 0).all()
    assert len(same.prices) == 6 and (same.prices["difference"] == 0).all()
    assert same.flows.empty and same.binding.empty and same.cost_difference == 0
    out = invoke("compare", str(run), str(run), "--format", "json")
    assert out.exit_code == 0, out.output
    assert json.loads(out.output)["flows"] == []


def test_scenario_against_its_base_lists_what_moved(engine: sa.Engine, write_folder, network_files) -> None:
    loaded_and_solved(write_folder, network_files)
    create("less-rail", "capacity P2->W1 rail 10")
    solve_scenario(engine, "less-rail")
    base, run = scenario_runs(engine, "less-rail")
    moved = compare_runs(engine, base, run)
    # Worked out by hand (common practice, no source): the full 1.75 rail lane loses 20 units; P1's
    # 2.50 road lane takes the 15 units of P1's supply it had left, P2's 3.00 road lane the other 5.
    flows = {r.lane: (r.flow_a, r.flow_b) for r in moved.flows.itertuples()}
    assert flows == {"P2->W1 rail": (30, 10), "P1->W1 road": (45, 60), "P2->W1 road": (0, 5)}
    assert moved.cost_difference == Decimal("17.5")  # 15 x 2.50 + 5 x 3.00 - 20 x 1.75
    cost = moved.cost.set_index("mode")
    assert cost.loc["rail", "difference"] == -35 and cost.loc["road", "difference"] == 52.5
    rows = csv_rows(invoke("compare", "--scenario", "less-rail", "--format", "csv", "--section", "flows").output)
    assert {(r["lane"], float(r["difference"])) for r in rows} == {
        ("P2->W1 rail", -20), ("P1->W1 road", 15), ("P2->W1 road", 5)}


# Two separate plant -> customer pairs: P1's supply is all used (C1's price has no upper end),
# P2 has supply to spare (C2's price is unique). Worked out by hand (common practice, no source).
DEGENERATE = {
    "sites.csv": "site,kind,name,region,throughput_capacity,handling_cost\n"
                 "P1,plant,Tight Works,east,,\nP2,plant,Loose Works,west,,\n"
                 "C1,customer,East Shop,east,,\nC2,customer,West Shop,west,,\n",
    "supply.csv": "period,site,quantity\n2026-W40,P1,10\n2026-W40,P2,20\n",
    "demand.csv": "period,site,quantity,shortage_penalty\n2026-W40,C1,10,\n2026-W40,C2,10,\n",
    "lanes.csv": "period,origin,destination,mode,unit_cost,capacity,min_quantity\n"
                 "2026-W40,P1,C1,road,5,,\n2026-W40,P2,C2,road,5,,\n",
}


def test_price_moves_are_determined_only_where_the_ranges_do_not_overlap(engine: sa.Engine, write_folder) -> None:
    loaded_and_solved(write_folder, DEGENERATE)
    create("dearer", "rate all +20%")
    solve_scenario(engine, "dearer")
    moved = compare_runs(engine, *scenario_runs(engine, "dearer")).prices.set_index("site")
    # C2: unique price 5 -> 6, a move the data forces
    assert (moved.loc["C2", "low_a"], moved.loc["C2", "high_a"], moved.loc["C2", "price_b"]) == (5, 5, 6)
    assert bool(moved.loc["C2", "determined"])
    # C1: [5, no end] -> [6, no end]; the ranges overlap, so the move may be degeneracy
    assert (moved.loc["C1", "low_a"], moved.loc["C1", "low_b"]) == (5, 6)
    assert moved.loc["C1", "high_a"] is None or moved.loc["C1", "high_a"] != moved.loc["C1", "high_a"]
    assert not bool(moved.loc["C1", "determined"])


def test_reporting_role_may_compare_runs(engine: sa.Engine, write_folder, network_files, database_url) -> None:
    loaded_and_solved(write_folder, network_files)
    with engine.connect() as conn:
        run = conn.execute(sa.text("SELECT run_id FROM latest_week_run WHERE period = '2026-W40'")).scalar()
    url = sa.make_url(database_url).set(drivername="postgresql").render_as_string(hide_password=False)
    with psycopg.connect(url) as reader:
        reader.execute("SET ROLE planner_reader")
        assert reader.execute("SELECT count(*) FROM compare_flows(%s, %s)", (run, run)).fetchone() == (0,)
        with pytest.raises(psycopg.errors.InsufficientPrivilege):
            reader.execute("SELECT * FROM run_flow")


def test_edit_file_errors_name_file_line_column_and_value(engine: sa.Engine, write_folder, network_files, tmp_path) -> None:
    loaded_and_solved(write_folder, network_files)
    edits = tmp_path / "edits.csv"
    edits.write_text("action,target,value\nclose,W1,\nrate,P1->C9,3\ncapacity,P1->W1 road,-5\n")
    result = invoke("scenario", "create", "bad", "--base", "2026-W40", "--edits-file", str(edits))
    assert result.exit_code == 2
    assert f"{edits}:3: column target: value 'P1->C9': no such lane" in result.output
    assert f"{edits}:4: column value: value '-5'" in result.output
    toml = tmp_path / "edits.toml"
    toml.write_text('[[edit]]\naction = "rate"\ntarget = "all"\nvalue = "cheap"\n\n[[edit]]\naction = "shut"\n'
                    'target = "W1"\n')
    result = invoke("scenario", "create", "bad", "--base", "2026-W40", "--edits-file", str(toml))
    assert result.exit_code == 2
    assert f"{toml}:7: column action: value 'shut'" in result.output
    toml.write_text('[[edit]]\naction = "rate"\ntarget = "all"\nvalue = "cheap"\n')
    result = invoke("scenario", "create", "bad", "--base", "2026-W40", "--edits-file", str(toml))
    assert f"{toml}:4: column value: value 'cheap': not a number" in result.output
    with engine.connect() as conn:
        assert conn.execute(sa.text("SELECT count(*) FROM scenario")).scalar() == 0
    missing = invoke("scenario", "create", "bad", "--base", "2026-W40", "--edits-file", str(tmp_path / "none.csv"))
    assert missing.exit_code == 2 and "none.csv: cannot read the edit file" in missing.output
    good = tmp_path / "good.toml"
    good.write_text('[[edit]]\naction = "close"\ntarget = "C3"\n')
    assert invoke("scenario", "create", "ok", "--base", "2026-W40", "--edits-file", str(good)).exit_code == 0
    assert invoke("scenario", "create", "ok", "--base", "2026-W40").exit_code == 2  # the name is taken


def test_solving_after_the_base_week_was_reloaded_says_so(engine: sa.Engine, write_folder, network_files) -> None:
    loaded_and_solved(write_folder, network_files)
    create("later", "demand C1 20")
    first = solve_scenario(engine, "later")
    assert first.note == ""
    changed = dict(network_files)
    changed["supply.csv"] = changed["supply.csv"].replace("2026-W40,P1,60", "2026-W40,P1,70")
    assert invoke("load", str(write_folder(changed, name="second"))).exit_code == 0
    again = solve_scenario(engine, "later")
    assert "reloaded since run" in again.note and again.summary.ok
    with engine.connect() as conn:
        batches = list(conn.execute(sa.text("SELECT batch_id FROM solve_run WHERE scenario_id IS NOT NULL ORDER BY id"))
                       .scalars())
    assert batches[0] != batches[1]


def test_sweep_passes_through_the_stored_plan_at_the_lane_s_own_rate(
    engine: sa.Engine, write_folder, network_files
) -> None:
    loaded_and_solved(write_folder, network_files)
    out = invoke("sweep", "-p", "2026-W40", "--lane", "P1->W1 road", "--from", "0", "--to", "9", "--format", "json")
    assert out.exit_code == 0, out.output
    pieces = json.loads(out.output)
    with engine.connect() as conn:
        stored = conn.execute(sa.text(
            "SELECT lf.flow, lf.unit_cost, r.primal_cost FROM lane_flow lf JOIN solve_run r ON r.id = lf.run_id "
            "WHERE lf.period = '2026-W40' AND lf.label = 'P1->W1 road'")).one()
    # JSON carries exact decimals (as strings where a float would round them).
    piece = next(p for p in pieces if Decimal(str(p["rate_from"])) <= stored.unit_cost <= Decimal(str(p["rate_to"])))
    # on the piece holding the lane's own rate, the cost line passes through the stored optimum,
    # with the stored flow as its slope (parametric cost analysis; common practice, no source)
    assert Decimal(str(piece["flow"])) == stored.flow
    at_own_rate = Decimal(str(piece["cost_from"])) + (stored.unit_cost - Decimal(str(piece["rate_from"]))) * stored.flow
    assert at_own_rate == stored.primal_cost
    assert [p["rate_to"] for p in pieces[:-1]] == [p["rate_from"] for p in pieces[1:]]
    assert Decimal(pieces[0]["rate_from"]) == 0 and Decimal(pieces[-1]["rate_to"]) == 9


@pytest.mark.parametrize(
    ("option", "target", "low", "high", "own_sql", "slope_key"),
    [
        # one more unit of the full rail lane saves its stored exact capacity value
        ("--capacity", "P2->W1 rail", "10", "80",
         "SELECT bound, loosen_value FROM limit_value "
         "WHERE period = '2026-W40' AND label = 'P2->W1 rail' AND kind = 'lane capacity'",
         "saving_per_unit"),
        # one more unit needed at C3 (no shortage penalty) costs its stored price_high
        ("--demand", "C3", "0", "60",
         "SELECT 20, price_high FROM site_price_history WHERE period = '2026-W40' AND site = 'C3'", "cost_per_unit"),
        # the warehouse moves 75 of its 120 units: more throughput saves nothing
        ("--throughput", "W1", "50", "150", "SELECT 120, 0", "saving_per_unit"),
    ],
)
def test_figure_sweeps_pass_through_the_stored_plan_with_its_stored_marginal_value(
    engine: sa.Engine, write_folder, network_files, option, target, low, high, own_sql, slope_key
) -> None:
    loaded_and_solved(write_folder, network_files)
    with engine.connect() as conn:
        own, value = conn.execute(sa.text(own_sql)).one()
        primal = conn.execute(sa.text("SELECT primal_cost FROM solve_run WHERE id = "
                                      "(SELECT run_id FROM latest_week_run WHERE period = '2026-W40')")).scalar_one()
    out = invoke("sweep", "-p", "2026-W40", option, target, "--from", low, "--to", high, "--at", str(own),
                 "--format", "json")
    assert out.exit_code == 0, out.output
    answer = json.loads(out.output)
    (at_own,) = answer["at"]
    # the cost at the week's own figure is the stored optimum, the slope there the stored right derivative
    assert Decimal(str(at_own["cost"])) == primal
    assert Decimal(str(at_own[slope_key])) == Decimal(value)
    pieces = answer["pieces"]
    key = option.removeprefix("--")
    assert [p[f"{key}_to"] for p in pieces[:-1]] == [p[f"{key}_from"] for p in pieces[1:]]
    assert Decimal(str(pieces[0][f"{key}_from"])) == Decimal(low) and Decimal(str(pieces[-1][f"{key}_to"])) == Decimal(high)


def test_sweep_errors_name_the_figure(engine: sa.Engine, write_folder, network_files) -> None:
    loaded_and_solved(write_folder, network_files)
    # C3 has no shortage penalty and supply is 110 units; C1 and C2 may go short (at a penalty)
    out = invoke("sweep", "-p", "2026-W40", "--demand", "C3", "--from", "0", "--to", "500")
    assert out.exit_code == 2 and "2026-W40 has no plan above demand 110 of C3" in out.output, out.output
    out = invoke("sweep", "-p", "2026-W40", "--demand", "C9", "--from", "0", "--to", "5")
    assert out.exit_code == 2 and "no site 'C9'" in out.output
    out = invoke("sweep", "-p", "2026-W40", "--rate", "P1->W1 road", "--capacity", "P1->W1 road", "--from", "0",
                 "--to", "5")
    assert out.exit_code == 2 and "name one figure to vary" in out.output
    out = invoke("sweep", "-p", "2026-W40", "--capacity", "P1->W1 road", "--from", "0", "--to", "5", "--at", "9")
    assert out.exit_code == 2 and "9 lies outside the sweep" in out.output
    out = invoke("sweep", "-p", "2026-W40", "--demand", "C3", "--from", "inf", "--to", "5")
    assert out.exit_code == 2 and "demand 'inf' is not a number" in out.output
    out = invoke("sweep", "-p", "2026-W40", "--demand", "C3", "--from", "0.5", "--to", "5")
    assert out.exit_code == 2 and "demand '0.5' has more than 0 decimals" in out.output


def test_comparison_html_holds_the_same_rows_as_the_comparison(
    engine: sa.Engine, write_folder, network_files, tmp_path
) -> None:
    from html.parser import HTMLParser

    loaded_and_solved(write_folder, network_files)
    create("less-rail", "capacity P2->W1 rail 10")
    solve_scenario(engine, "less-rail")
    page = tmp_path / "compare.html"
    result = invoke("compare", "--scenario", "less-rail", "--html", str(page))
    assert result.exit_code == 0, result.output

    class Tables(HTMLParser):
        def __init__(self) -> None:
            super().__init__()
            self.tables: list[list[list[str]]] = []
            self.links = 0
            self.in_cell = False

        def handle_starttag(self, tag, attrs) -> None:
            if tag == "table":
                self.tables.append([])
            elif tag == "tr":
                self.tables[-1].append([])
            elif tag in ("td", "th"):
                self.tables[-1][-1].append("")
                self.in_cell = True
            elif tag in ("script", "link"):
                self.links += 1

        def handle_endtag(self, tag) -> None:
            self.in_cell = self.in_cell and tag not in ("td", "th")

        def handle_data(self, data) -> None:
            if self.in_cell:
                self.tables[-1][-1][-1] += data

    parsed = Tables()
    parsed.feed(page.read_text())
    assert parsed.links == 0 and len(parsed.tables) == 3  # nothing became or stopped binding: no table
    flows = parsed.tables[2]
    assert flows[0] == ["lane", "flow a", "flow b", "change"]
    compared = compare_runs(engine, *scenario_runs(engine, "less-rail")).flows
    assert [row[0] for row in flows[1:]] == list(compared["lane"])
    assert {row[0]: row[3] for row in flows[1:]} == {"P2->W1 rail": "-20", "P1->W1 road": "15", "P2->W1 road": "5"}


def test_explain_and_rate_ranges_read_a_scenario_run_on_its_own_figures(
    engine: sa.Engine, write_folder, network_files
) -> None:
    from planner.reports.explain import explain_site

    loaded_and_solved(write_folder, network_files)
    create("short-cut", "add-lane P2->C2 truck 0.5", "capacity P2->C2 truck 12")
    solve_scenario(engine, "short-cut")
    base, run = scenario_runs(engine, "short-cut")
    prices = compare_runs(engine, base, run).prices.set_index("site")
    for site in ("C1", "C2", "C3"):
        explanation = explain_site(engine, site, "2026-W40", run_id=run)
        # the marginal route's running cost is the scenario run's stored price of the site
        assert explanation.steps[-1].running == prices.loc[site, "price_b"]
    assert "P2->C2 truck" in invoke("rate-ranges", "-p", "2026-W40", "--run", str(run), "--format", "csv").output
    with engine.connect() as conn:
        flow = conn.execute(sa.text("SELECT f.flow FROM run_flow f JOIN lane l ON l.id = f.lane_id "
                                    "WHERE f.run_id = :r AND l.mode = 'truck'"), {"r": run}).scalar()
    assert flow == 12  # the 0.50 lane is the cheapest way to C2 and fills up (worked out by hand)


def test_show_and_list_give_the_edits_in_order_and_the_runs(engine: sa.Engine, write_folder, network_files) -> None:
    loaded_and_solved(write_folder, network_files)
    create("two", "rate mode rail -5%", "close C3")
    done = solve_scenario(engine, "two")
    shown = invoke("scenario", "show", "two")
    assert shown.exit_code == 0, shown.output
    first, second = shown.output.index("rate mode rail -5%"), shown.output.index("close C3")
    assert first < second and "--edit:1" in shown.output and "--edit:2" in shown.output
    assert str(done.summary.run_id) in shown.output
    listed = invoke("scenario", "list")
    assert "two" in listed.output and "2026-W40" in listed.output
    assert invoke("scenario", "show", "nothing").exit_code == 2


def test_solving_several_scenarios_goes_on_past_a_bad_one(engine: sa.Engine, write_folder, network_files) -> None:
    loaded_and_solved(write_folder, network_files)
    create("first", "rate all +5%")
    create("last", "demand C1 31")
    result = invoke("scenario", "solve", "first", "missing", "last")
    assert result.exit_code == 2
    assert "missing: no scenario named 'missing'" in result.output
    with engine.connect() as conn:
        solved = list(conn.execute(sa.text("SELECT s.name FROM solve_run r JOIN scenario s ON s.id = r.scenario_id "
                                           "WHERE r.status = 'optimal' ORDER BY r.id")).scalars())
    assert solved == ["first", "last"]


def test_a_scenario_on_a_linked_horizon_edits_every_week_and_leaves_the_horizon_plan_alone(
    engine: sa.Engine, write_folder, network_files
) -> None:
    from planner.core.edits import WeekNames, parse_edit
    from planner.database.linked import horizon_snapshots

    loaded_and_solved(write_folder, network_files)
    assert invoke("solve", "--horizon", "2026-W40..2026-W41").exit_code == 0
    before = dump(engine, SNAPSHOT_TABLES + WEEK_VIEWS)
    runs_before = invoke("runs", "--kind", "horizon").output
    # stock may now carry from week 40 to week 41 at the warehouse: the weeks are linked by the edits
    edits = ["storage W1 50", "holding W1 0.1", "rate all +10%", "add-lane P2->C2 truck 4.5"]
    create("stocked", *edits, base="2026-W40..2026-W41")
    solved = invoke("scenario", "solve", "stocked")
    assert solved.exit_code == 0, solved.output

    assert dump(engine, SNAPSHOT_TABLES + WEEK_VIEWS) == before  # run_summary keeps the plain horizon run
    assert invoke("runs", "--kind", "horizon").output.count("2026-W40..2026-W41") == runs_before.count(
        "2026-W40..2026-W41") + 1
    with engine.connect() as conn:
        run = conn.execute(sa.text(
            "SELECT r.*, EXISTS (SELECT FROM run_pin p WHERE p.run_id = r.id) AS pinned FROM solve_run r "
            "WHERE r.scenario_id IS NOT NULL")).mappings().one()
        snaps, merged = horizon_snapshots(conn, ["2026-W40", "2026-W41"], Scaling())
        modes = dict(conn.execute(sa.text("SELECT id, mode FROM lane")).all())
        stock_rows = conn.execute(sa.text("SELECT count(*) FROM run_stock WHERE run_id = :r"), {"r": run["id"]}).scalar()
    assert run["kind"] == "horizon" and run["status"] == "optimal" and run["certificate_ok"] and run["pinned"]
    assert stock_rows > 0
    names = WeekNames(merged["site_code"], np.array([modes[i] for i in merged["lane_id"]], dtype=object),
                      np.full(merged["site_id"].shape[0], None, dtype=object))
    weeks = [apply_edits(w, names, [parse_edit(e) for e in edits])[0] for w in merged["weeks"]]
    assert all(w.storage_capacity[list(merged["site_code"]).index("W1")] == 50 for w in weeks)
    # scipy linprog(method="highs") on both edited weeks linked by stock: the stored cost is its optimum
    assert run["primal_cost"] * 10_000 == optimal_cost(weeks)

    shown = invoke("scenario", "show", "stocked")
    assert shown.exit_code == 0 and "on 2026-W40..2026-W41" in shown.output
    assert "2026-W40..2026-W41" in invoke("scenario", "list").output
    compared = invoke("compare", "--scenario", "stocked")
    assert compared.exit_code == 2 and "linked horizon" in compared.output
    swept = invoke("sweep", "-s", "stocked", "--rate", "P1->W1 road", "--from", "1", "--to", "3")
    assert swept.exit_code == 2 and "linked horizon" in swept.output


def test_a_scenario_run_s_lane_views_read_its_own_lane_figures(engine: sa.Engine, write_folder, network_files) -> None:
    loaded_and_solved(write_folder, network_files)
    create("own-figures", "rate to C2 +40%", "capacity P1->W1 road 50", "add-lane P2->C2 truck 4.5",
           "add-lane P1->C3 truck 9")
    run = solve_scenario(engine, "own-figures").summary.run_id
    with engine.connect() as conn:
        lanes = conn.execute(sa.text("SELECT * FROM lane_flow_of_run(:r)"), {"r": run}).mappings().all()
        figures = {r.lane_id: r for r in conn.execute(sa.text("SELECT * FROM run_lane_rate(:r)"), {"r": run})}
        lane_cost = conn.execute(sa.text("SELECT sum(cost_a) FROM compare_cost(:r, :r)"), {"r": run}).scalar()
        binding = conn.execute(sa.text("SELECT label, capacity FROM binding_capacity_of_run(:r) WHERE kind = 'lane'"),
                               {"r": run}).all()
        limits = conn.execute(sa.text("SELECT label, unit_cost FROM limit_value_of_run(:r) WHERE origin IS NOT NULL"),
                              {"r": run}).all()
    by_label = {r["label"]: r for r in lanes}
    # every lane the run was solved with, once, with the figures it was solved with
    assert sorted(r["lane_id"] for r in lanes) == sorted(figures)
    assert {"P2->C2 truck", "P1->C3 truck"} <= set(by_label)
    for r in lanes:
        assert (r["unit_cost"], r["capacity"], r["min_quantity"]) == (
            figures[r["lane_id"]].unit_cost, figures[r["lane_id"]].capacity, figures[r["lane_id"]].min_quantity)
    assert by_label["W1->C2"]["unit_cost"] == Decimal("2.1") and by_label["P1->W1 road"]["capacity"] == 50
    # reduced-cost optimality on the derived reduced costs (common practice, no source: complementary slackness)
    for r in lanes:
        if r["capacity"] is None or r["flow"] < r["capacity"]:
            assert r["reduced_cost"] >= 0, r
        if r["flow"] > r["min_quantity"]:
            assert r["reduced_cost"] <= 0, r
    assert sum(r["cost"] for r in lanes) == lane_cost
    for label, capacity in binding:
        assert capacity == by_label[label]["capacity"]
    for label, unit_cost in limits:
        assert unit_cost == by_label[label]["unit_cost"]
