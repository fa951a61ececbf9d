"""The demo: a fictional network loaded, solved week by week, and summarised."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

from sqlalchemy import Engine, text

from planner.database.ingest import load_folder
from planner.runs.weekly import RunSummary, solve_period
from planner.synthetic.demo_network import demo_network
from planner.synthetic.frames import write_folder


@dataclass
class DemoReport:
    folder: Path
    load_message: str
    runs: list[RunSummary]
    movers: list[dict]


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
    return DemoReport(Path(folder), loaded.message, runs, price_movers(engine))
