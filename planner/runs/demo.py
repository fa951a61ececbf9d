"""The demo: a fictional network loaded, solved week by week, and summarised."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from sqlalchemy import Engine, text

from planner.core.edits import WeekNames, apply_edits, parse_edit
from planner.core.network import assemble_instance
from planner.core.optimize import optimize
from planner.database.ingest import load_folder
from planner.database.snapshot import read_snapshot
from planner.runs.scenarios import ScenarioRun, create_scenario, scenario_runs, solve_scenario
from planner.runs.weekly import RunSummary, solve_period
from planner.synthetic.demo_network import demo_network
from planner.synthetic.frames import write_folder


@dataclass
class DemoReport:
    folder: Path
    load_message: str
    runs: list[RunSummary]
    movers: list[dict]
    #: The warehouse-closure scenario on the last week, and the runs it compares (base, scenario).
    scenario: ScenarioRun | None = None
    compared: tuple[int, int] | None = None


def price_movers(engine: Engine, limit: int = 10) -> list[dict]:
    """Sites whose price moved most across the solved periods (from ``site_price_history``)."""
    with engine.connect() as conn:
        rows = conn.execute(
            text(
                "SELECT site, min(kind) AS kind, min(region) AS region, min(price) AS low, "
                "max(price) AS high, max(price) - min(price) AS moved FROM site_price_history "
                "GROUP BY site ORDER BY moved DESC, site LIMIT :limit"
            ),
            {"limit": limit},
        ).mappings()
        return [dict(r) for r in rows]


def run_demo(engine: Engine, folder: Path) -> DemoReport:
    """Write the demo network's CSVs to ``folder``, load them, solve every week.

    Returns
    -------
    DemoReport
        The runs of the weeks and the ten sites whose price moved most.
    """
    frames = demo_network()
    write_folder(frames, folder)
    loaded = load_folder(engine, folder)
    weeks = sorted(frames.supply["period"].unique())
    runs = [solve_period(engine, week) for week in weeks]
    report = DemoReport(Path(folder), loaded.message, runs, price_movers(engine))
    if runs and runs[-1].ok:
        report.scenario = closure_scenario(engine, weeks[-1])
        if report.scenario is not None and report.scenario.summary.ok:
            report.compared = scenario_runs(engine, report.scenario.scenario)
    return report


def closure_scenario(engine: Engine, week: str) -> ScenarioRun | None:
    """Close the first warehouse (by code) whose week still has a plan without it, and solve that.

    The scenario is named ``close <code> <week>``; a demo run again on the same
    database solves the existing scenario again.
    """
    with engine.connect() as conn:
        snap = read_snapshot(conn, week)
        existing = conn.execute(text("SELECT name FROM scenario WHERE name LIKE :n ORDER BY name LIMIT 1"),
                                {"n": f"close % {week}"}).scalar()
    if existing is not None:
        return solve_scenario(engine, existing)
    names = WeekNames(snap.site_code, snap.lane_mode)
    for code in sorted(snap.site_code[snap.site_kind_name == "warehouse"]):
        edits = [parse_edit(f"close {code}")]
        edited, _ = apply_edits(snap.week, names, edits)
        if optimize(assemble_instance(edited)).ok:
            name = f"close {code} {week}"
            create_scenario(engine, name, week, edits, description=f"what if warehouse {code} closed in {week}")
            return solve_scenario(engine, name)
    return None
