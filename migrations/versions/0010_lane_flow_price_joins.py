"""Lane views: end prices found by site, and a scenario run's own lane figures.

1. Row estimates of a week's stored results come out far too low: PostgreSQL
   sizes the join of a week's result rows to the run chosen for the week by the
   number of runs in ``solve_run`` (every run ever kept), not by the one or few
   runs the week's partition holds. With 500,000 lanes and eight weeks of
   history the estimate of a week's flow rows was 3,600 against 80,000, and
   ``lane_flow`` then joined the destination prices by a merge join on the run
   id alone, comparing every flow row with every site price of the run: the
   busiest 20 lanes of a week took minutes, a whole week never finished. The
   two joins to ``run_site_price`` now key on the site (and the week), with the
   run as a condition that no merge or hash join can use alone
   (``run_id + 0``): whatever the estimates, each lane meets only the prices of
   its own site in the week's few runs.
2. A scenario run was solved with its own lane figures (``run_lane_edit``:
   edited and added lanes), but ``lane_flow``, ``binding_capacity`` and
   ``limit_value`` read the base snapshot's: a scenario run's ``_by_run`` and
   ``_of_run`` rows showed the base rate, capacity and minimum of an edited
   lane (and a reduced cost and cost derived from them), and left out its added
   lanes. They now take the run's edit where there is one, and ``lane_flow``
   lists added lanes (flowing or idle). The week views never show scenario
   runs, so their answers do not change.

Same columns; ``*_of_run`` keep working (their row types are the views').

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
LANE_LABEL = SPARSE.LANE_LABEL

# A lane's figures in a run: its scenario edit when the run has one, else the snapshot's.
UNIT_COST = "coalesce(e.unit_cost, lr.unit_cost)"
CAPACITY = "CASE WHEN e.run_id IS NULL THEN lr.capacity ELSE e.capacity END"
MINIMUM = "coalesce(e.min_quantity, lr.min_quantity)"
EDIT_OF_LANE = "LEFT JOIN run_lane_edit e ON e.run_id = rp.run_id AND e.lane_id = {lane}"

_LANE_FLOW_PART = f"""
SELECT p.code AS period, o.code AS origin, d.code AS destination, l.mode,
       {{flow}} AS flow, {CAPACITY} AS capacity,
       {{flow}} / NULLIF({CAPACITY}, 0) AS utilisation,
       {UNIT_COST} AS unit_cost,
       round({UNIT_COST} + coalesce(po.price_out, po.price) - pd.price, sr.cost_decimals) AS reduced_cost,
       cap.loosen_value AS capacity_value,
       {{flow}} * {UNIT_COST} AS cost,
       ov.kind || '->' || dv.kind AS echelon,
       (cap.loosen_value IS NOT NULL) AS at_capacity,
       {MINIMUM} AS min_quantity, p.starts_on, rp.run_id, l.id AS lane_id,
       {LANE_LABEL} AS label
FROM run_period rp
JOIN solve_run sr ON sr.id = rp.run_id
JOIN period p ON p.id = rp.period_id
{{lanes}}
JOIN site o ON o.id = l.origin_id
JOIN site d ON d.id = l.destination_id
JOIN run_site_price po ON po.run_id + 0 = rp.run_id AND po.period = p.code AND po.site_id = l.origin_id
JOIN run_site_price pd ON pd.run_id + 0 = rp.run_id AND pd.period = p.code AND pd.site_id = l.destination_id
LEFT JOIN run_limit cap ON cap.run_id = rp.run_id AND cap.period = p.code
     AND cap.limit_kind = 'lane_capacity' AND cap.ref_id = l.id
LEFT JOIN site_version ov ON ov.batch_id = rp.batch_id AND ov.site_id = l.origin_id
LEFT JOIN site_version dv ON dv.batch_id = rp.batch_id AND dv.site_id = l.destination_id
{EDIT_OF_LANE.format(lane="l.id")}
"""
_NO_FLOW = ("NOT EXISTS (SELECT FROM run_flow f WHERE f.run_id = rp.run_id AND f.period = p.code\n"
            "                     AND f.lane_id = {lane})")
# The lanes that carry flow (stored, an added lane's too), then the snapshot's
# other lanes, then a scenario's added lanes that carry none. The edit is joined
# last: PostgreSQL keeps the written order beyond join_collapse_limit (8), and
# the site joins must stay free to come first (a filter on a site's code).
LANE_FLOW = "UNION ALL".join([
    _LANE_FLOW_PART.format(
        flow="f.flow",
        lanes="JOIN run_flow f ON f.run_id = rp.run_id AND f.period = p.code\n"
        "JOIN lane l ON l.id = f.lane_id\n"
        "LEFT JOIN lane_rate lr ON lr.batch_id = rp.batch_id AND lr.period_id = rp.period_id AND lr.lane_id = f.lane_id",
    ),
    _LANE_FLOW_PART.format(
        flow="round(0, sr.quantity_decimals)",
        lanes="JOIN lane_rate lr ON lr.batch_id = rp.batch_id AND lr.period_id = rp.period_id\n"
        f"     AND {_NO_FLOW.format(lane='lr.lane_id')}\n"
        "JOIN lane l ON l.id = lr.lane_id",
    ),
    _LANE_FLOW_PART.format(
        flow="round(0, sr.quantity_decimals)",
        lanes="JOIN run_lane_edit added ON added.run_id = rp.run_id\n"
        "     AND NOT EXISTS (SELECT FROM lane_rate x WHERE x.batch_id = rp.batch_id AND x.period_id = rp.period_id\n"
        "                     AND x.lane_id = added.lane_id)\n"
        f"     AND {_NO_FLOW.format(lane='added.lane_id')}\n"
        "JOIN lane l ON l.id = added.lane_id\n"
        "LEFT JOIN lane_rate lr ON false",
    ),
])


def _with_lane_edits(body: str, lane: str, replacements: dict[str, str], after: str) -> str:
    """``body`` reading a run's lane edit: ``replacements`` made once each, the edit joined after ``after``."""
    for old, new in {after: f"{after}\n    {EDIT_OF_LANE.format(lane=lane)}", **replacements}.items():
        assert body.count(old) == 1, old
        body = body.replace(old, new)
    return body


BINDING_CAPACITY = _with_lane_edits(
    SPARSE.BINDING_CAPACITY, "lim.ref_id", {"lr.capacity AS capacity": f"{CAPACITY} AS capacity"},
    after="         AND lr.lane_id = lim.ref_id",
)
LIMIT_VALUE = _with_lane_edits(
    SPARSE.LIMIT_VALUE, "l.id", {"lr.unit_cost,": f"{UNIT_COST} AS unit_cost,"},
    after="LEFT JOIN lane_rate lr ON lr.batch_id = rp.batch_id AND lr.period_id = rp.period_id AND lr.lane_id = l.id",
)
BODIES = {"lane_flow": LANE_FLOW, "binding_capacity": BINDING_CAPACITY, "limit_value": LIMIT_VALUE}


def _replace_views(bodies: dict[str, str]) -> None:
    """The views and their ``_by_run`` twins on 0005's run selections, as 0006 makes them."""
    for view, body in bodies.items():
        for name, runs in ((view, SPARSE.LATEST.LATEST_WEEK_RUNS), (f"{view}_by_run", SPARSE.LATEST.ALL_RUNS)):
            op.execute(f"CREATE OR REPLACE VIEW {name} AS WITH {runs}{body}")


def upgrade() -> None:
    _replace_views(BODIES)


def downgrade() -> None:
    _replace_views({view: SPARSE.BODIES[view] for view in BODIES})
