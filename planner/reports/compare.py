"""What moved between two week runs: cost, site prices, lane flows, binding limits.

Any two optimal week runs compare: a week with another week, a scenario with
its base, two scenarios. The figures come from the SQL functions of migration
0009 (``compare_cost``, ``compare_prices``, ``compare_flows``,
``compare_binding``), which the reporting role may call too. A price move is
*determined* when both prices are unique or their ranges do not overlap; an
undetermined move could be an artefact of degeneracy (another optimal dual of
either run shows no move), so an analyst need not chase it.
"""

from __future__ import annotations

from concurrent.futures import ThreadPoolExecutor
from dataclasses import dataclass

import pandas as pd
from sqlalchemy import Engine, text

from planner.errors import PlannerError

__all__ = ["Comparison", "SECTIONS", "compare_runs"]

#: Section name -> SQL function.
SECTIONS = {"cost": "compare_cost", "prices": "compare_prices", "flows": "compare_flows", "binding": "compare_binding"}


@dataclass(frozen=True)
class Comparison:
    """Two runs side by side: ``a`` is the reference, ``b`` the one compared with it."""

    run_a: dict
    run_b: dict
    cost: pd.DataFrame
    prices: pd.DataFrame
    flows: pd.DataFrame
    binding: pd.DataFrame

    @property
    def cost_difference(self):
        return self.run_b["cost"] - self.run_a["cost"]

    def section(self, name: str) -> pd.DataFrame:
        return getattr(self, name)

    def headline(self) -> str:
        """One line per run and the count of what moved."""
        moved = self.prices[self.prices["difference"] != 0]
        determined = int(moved["determined"].sum()) if len(moved) else 0
        return (
            f"run {self.run_a['run_id']} ({self.run_a['label']}): cost {self.run_a['cost']:,.2f}\n"
            f"run {self.run_b['run_id']} ({self.run_b['label']}): cost {self.run_b['cost']:,.2f}"
            f" ({self.cost_difference:+,.2f})\n"
            f"{len(self.flows)} lanes changed flow; {len(moved)} site prices moved, {determined} of them determined; "
            f"{int((self.binding['change'] == 'became binding').sum())} limits became binding, "
            f"{int((self.binding['change'] == 'stopped binding').sum())} stopped"
        )


def _run(conn, run_id: int) -> dict:
    row = conn.execute(
        text("SELECT r.id AS run_id, r.status, r.kind, r.primal_cost AS cost, p.code AS period, s.name AS scenario, "
             "r.engine FROM solve_run r LEFT JOIN period p ON p.id = r.period_id "
             "LEFT JOIN scenario s ON s.id = r.scenario_id WHERE r.id = :r"),
        {"r": run_id},
    ).mappings().first()
    if row is None:
        raise PlannerError(f"no run {run_id}; list runs with `planner periods` or `planner scenario list`")
    if row["status"] != "optimal" or row["kind"] != "week":
        raise PlannerError(f"run {run_id} is not an optimal week run ({row['kind']}, {row['status']}); "
                           "compare optimal week runs only")
    out = dict(row)
    out["label"] = row["period"] + (f" scenario {row['scenario']}" if row["scenario"] else "")
    return out


def compare_runs(engine: Engine, run_a: int, run_b: int) -> Comparison:
    """Compare week run ``run_b`` with week run ``run_a``.

    Raises
    ------
    PlannerError
        When either run does not exist or is not an optimal week run.
    """
    with engine.connect() as conn:
        a, b = _run(conn, run_a), _run(conn, run_b)

    def section(function: str) -> pd.DataFrame:
        with engine.connect() as conn:
            return pd.read_sql_query(text(f"SELECT * FROM {function}(:a, :b)"), conn, params={"a": run_a, "b": run_b})

    # The cost section takes about as long as the other three together: two
    # connections answer in about half the time. A stored run never changes,
    # so sections read in different transactions agree.
    with ThreadPoolExecutor(max_workers=2) as pool:
        frames = dict(zip(SECTIONS, pool.map(section, SECTIONS.values())))
    return Comparison(a, b, **frames)
