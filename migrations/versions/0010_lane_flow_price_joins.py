"""``lane_flow`` finds a lane's end prices by site, not by run.

Row estimates of a week's stored results come out far too low: PostgreSQL
sizes the join of a week's result rows to the run chosen for the week by the
number of runs in ``solve_run`` (every run ever kept), not by the one or few
runs the week's partition holds. With 500,000 lanes and eight weeks of history
the estimate of a week's flow rows was 3,600 against 80,000, and ``lane_flow``
then joined the destination prices by a merge join on the run id alone,
comparing every flow row with every site price of the run: the busiest 20 lanes
of a week took minutes, a whole week never finished.

The two joins to ``run_site_price`` now key on the site (and the week), with the
run as a condition that no merge or hash join can use alone (``run_id + 0``):
whatever the estimates, each lane meets only the prices of its own site in the
week's few runs (by the index on ``site_id``, or a hash on it). Same columns,
same rows; ``lane_flow_of_run`` keeps working (its row type is the view's).

Revision ID: 0010
Revises: 0009
Create Date: 2026-12-05
"""

import importlib.util
from collections.abc import Sequence
from pathlib import Path

from alembic import op

revision: str = "0010"
down_revision: str | Sequence[str] | None = "0009"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def _load(name: str):
    path = Path(__file__).with_name(name)
    spec = importlib.util.spec_from_file_location(f"planner_migration_{path.stem}", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


SPARSE = _load("0006_sparse_results.py")
PRICE_JOINS = {
    "JOIN run_site_price po ON po.run_id = rp.run_id AND": "JOIN run_site_price po ON po.run_id + 0 = rp.run_id AND",
    "JOIN run_site_price pd ON pd.run_id = rp.run_id AND": "JOIN run_site_price pd ON pd.run_id + 0 = rp.run_id AND",
}


def lane_flow_by_site() -> str:
    """0006's ``lane_flow`` body with the price joins keyed on the site."""
    body = SPARSE.LANE_FLOW
    for old, new in PRICE_JOINS.items():
        assert body.count(old) == 2, old  # once in the flowing part, once in the idle part
        body = body.replace(old, new)
    return body


def _replace_views(body: str) -> None:
    """``lane_flow`` and ``lane_flow_by_run`` on 0005's run selections, as 0006 makes them."""
    for name, runs in (("lane_flow", SPARSE.LATEST.LATEST_WEEK_RUNS), ("lane_flow_by_run", SPARSE.LATEST.ALL_RUNS)):
        op.execute(f"CREATE OR REPLACE VIEW {name} AS WITH {runs}{body}")


def upgrade() -> None:
    _replace_views(lane_flow_by_site())


def downgrade() -> None:
    _replace_views(SPARSE.LANE_FLOW)
