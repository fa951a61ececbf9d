"""Scenarios on a linked horizon.

- ``scenario.last_period_id``: NULL for a scenario on one week; otherwise its
  base is the linked horizon from ``period_id`` to ``last_period_id`` (its
  edits apply to every week of it), and it is solved into horizon runs tagged
  with the scenario.
- ``scenario.base_fingerprint``: the horizon's input (its weeks' snapshots)
  when the scenario was made, so that a solve says when a base week was
  reloaded since (a week scenario keeps using ``batch_id`` for that).
- ``run_summary`` picks the latest horizon run of a span among runs without a
  scenario, as ``latest_week_run`` does for weeks.

The downgrade drops both columns: a horizon scenario then reads as a scenario
on its first week (its runs stay, pinned).

Revision ID: 0011
Revises: 0010
Create Date: 2026-12-05
"""

import importlib.util
from collections.abc import Sequence
from pathlib import Path

import sqlalchemy as sa
from alembic import op

revision: str = "0011"
down_revision: str | Sequence[str] | None = "0010"
branch_labels: str | Sequence[str] | None = None
depends_on: str | Sequence[str] | None = None


def _load(name: str):
    path = Path(__file__).with_name(name)
    spec = importlib.util.spec_from_file_location(f"planner_migration_{path.stem}", path)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


REPORTING = _load("0003_reporting.py")
LATEST = _load("0005_latest_week_run.py")
HORIZON_FILTER = ("WHERE period_id IS NULL AND status = 'optimal' AND kind = 'horizon'",
                  "WHERE period_id IS NULL AND status = 'optimal' AND kind = 'horizon' AND scenario_id IS NULL")


def _run_summary(latest: str) -> str:
    return f"CREATE OR REPLACE VIEW run_summary AS WITH {LATEST.LATEST_WEEK_RUNS},{latest}{REPORTING.RUN_SUMMARY_BODY}"


def upgrade() -> None:
    op.add_column("scenario", sa.Column("last_period_id", sa.Integer(), nullable=True))
    op.add_column("scenario", sa.Column("base_fingerprint", sa.Text(), nullable=True))
    op.create_foreign_key(op.f("fk_scenario_last_period_id_period"), "scenario", "period", ["last_period_id"], ["id"])
    old, new = HORIZON_FILTER
    assert REPORTING.RUN_SUMMARY_LATEST.count(old) == 1
    op.execute(_run_summary(REPORTING.RUN_SUMMARY_LATEST.replace(old, new)))


def downgrade() -> None:
    op.execute(_run_summary(REPORTING.RUN_SUMMARY_LATEST))
    op.drop_constraint(op.f("fk_scenario_last_period_id_period"), "scenario", type_="foreignkey")
    op.drop_column("scenario", "base_fingerprint")
    op.drop_column("scenario", "last_period_id")
