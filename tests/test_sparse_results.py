"""Sparse results (migration 0006) answer exactly as the dense storage did.

The same runs are read through every view on the sparse storage, on the dense
storage the downgrade to 0005 rebuilds, and on the sparse storage again after
the upgrade; every row and every printed figure must agree. The dense rows the
downgrade rebuilds are checked against the solver's own arrays (flows, reduced
costs, capacity values), so the derivation of reduced costs from stored prices
is checked against an outside computation, not against itself. Runs stored
before exact limit values (0004) are simulated at 0005 and upgraded.
"""

from __future__ import annotations

import csv
import io
import re
import shutil
from pathlib import Path

import numpy as np
import pytest
import sqlalchemy as sa
from alembic import command

from planner.core.network import ArcKind
from planner.database.history import ensure_partitions
from planner.database.ingest import load_folder
from planner.database.migrate import alembic_config
from planner.database.snapshot import Scaling, read_snapshot
from planner.reports.queries import VIEWS
from planner.runs.horizon import solve_horizon
from planner.runs.weekly import solve_period, solve_snapshot

SEEDS = Path(__file__).resolve().parents[1] / "seeds"
WEEKS = ["2026-W45", "2026-W46", "2026-W47"]


def _edit(path: Path, change) -> None:
    rows = list(csv.DictReader(io.StringIO(path.read_text())))
    change(rows)
    out = io.StringIO()
    writer = csv.DictWriter(out, fieldnames=list(rows[0]), lineterminator="\n")
    writer.writeheader()
    writer.writerows(rows)
    path.write_text(out.getvalue())


def seeds_with_edge_cases(folder: Path) -> Path:
    """The demo seeds, with in 2026-W46 a lane of capacity 0 and a lane whose capacity
    equals its minimum, and in 2026-W47 a customer asking more than all supply (shortage)."""
    shutil.copytree(SEEDS, folder)

    def lanes(rows):
        week = [r for r in rows if r["period"] == "2026-W46"]
        week[0]["capacity"], week[0]["min_quantity"] = "0", ""
        week[1]["capacity"], week[1]["min_quantity"] = "40", "40"

    def demand(rows):
        row = next(r for r in rows if r["period"] == "2026-W47" and r["shortage_penalty"])
        row["quantity"] = "100000"

    _edit(folder / "lanes.csv", lanes)
    _edit(folder / "demand.csv", demand)
    return folder


def every_view(engine: sa.Engine) -> dict[str, list[tuple[str, ...]]]:
    """Every row of every view and ``_by_run`` view, each figure as PostgreSQL prints it."""
    out = {}
    with engine.connect() as conn:
        for view in VIEWS:
            for name in (view, f"{view}_by_run"):
                rows = conn.execute(sa.text(f"SELECT * FROM {name}")).all()
                out[name] = sorted(tuple("NULL" if v is None else str(v) for v in row) for row in rows)
    return out


def migrate_to(engine: sa.Engine, revision: str, direction: str) -> None:
    with engine.begin() as connection:
        getattr(command, direction)(alembic_config(connection), revision)


@pytest.fixture
def runs(engine: sa.Engine, tmp_path: Path) -> dict[str, int]:
    """Week runs (one week solved twice), a linked horizon with stock, and a failed run."""
    assert load_folder(engine, seeds_with_edge_cases(tmp_path / "seeds")).created
    ids = {week: solve_period(engine, week).run_id for week in WEEKS}
    ids["again"] = solve_period(engine, "2026-W45").run_id
    ids["horizon"] = solve_horizon(engine, ["2026-W48", "2026-W49", "2026-W50"]).run_id
    failed = solve_period(engine, "2026-W51", Scaling(cost_decimals=0))
    assert failed.status == "failed"
    return ids


def test_views_answer_the_same_on_dense_and_sparse_storage(engine: sa.Engine, runs: dict[str, int]) -> None:
    sparse = every_view(engine)
    assert all(sparse[f"{view}_by_run"] for view in VIEWS), str({k: len(v) for k, v in sparse.items()})
    with engine.connect() as conn:
        stored, shown = conn.execute(
            sa.text("SELECT (SELECT count(*) FROM run_flow), (SELECT count(*) FROM lane_flow_by_run)")
        ).one()
    assert stored < shown  # sparse: idle lanes have no row

    migrate_to(engine, "0005", "downgrade")
    assert every_view(engine) == sparse
    with engine.connect() as conn:
        dense = conn.execute(sa.text("SELECT count(*) FROM run_flow")).scalar_one()
    assert dense == shown

    migrate_to(engine, "head", "upgrade")
    assert every_view(engine) == sparse


def test_dense_rows_rebuilt_by_the_downgrade_equal_the_solver_arrays(
    engine: sa.Engine, runs: dict[str, int]
) -> None:
    migrate_to(engine, "0005", "downgrade")
    scaling = Scaling()
    with engine.connect() as conn:
        for week in WEEKS:
            run_id = runs["again"] if week == "2026-W45" else runs[week]
            batch = conn.execute(sa.text("SELECT batch_id FROM solve_run WHERE id = :r"), {"r": run_id}).scalar_one()
            snapshot = read_snapshot(conn, week, scaling, batch_id=batch)
            inst, outcome = solve_snapshot(snapshot, scaling)
            arcs = inst.lane_arc[0]
            rows = conn.execute(
                sa.text(
                    "SELECT lane_id, flow, reduced_cost, capacity_value FROM run_flow "
                    "WHERE run_id = :r ORDER BY lane_id"
                ),
                {"r": run_id},
            ).all()
            assert [r.lane_id for r in rows] == snapshot.lane_id.tolist()
            got = np.array([[r.flow * 1, r.reduced_cost * 10**4] for r in rows], dtype=np.int64)
            # The solver's flows and reduced costs (scaled integers), the same solve.
            assert got[:, 0].tolist() == outcome.flow[arcs].tolist()
            assert got[:, 1].tolist() == outcome.reduced[arcs].tolist()
            full = ~inst.unlimited[arcs] & (outcome.flow[arcs] >= inst.upper[arcs])
            values = [None if r.capacity_value is None else int(r.capacity_value * 10**4) for r in rows]
            assert values == [int(v) if f else None for v, f in zip(outcome.capacity_value[arcs], full)]
            assert (inst.arc_kind[arcs] == ArcKind.LANE).all()


def _pre_0004(engine: sa.Engine, run_id: int) -> None:
    """Make a stored run look as a planner before 0004 stored it (at 0005)."""
    with engine.begin() as conn:
        conn.execute(sa.text("UPDATE solve_run SET planner_version = NULL WHERE id = :r"), {"r": run_id})
        conn.execute(sa.text("UPDATE run_site_price SET price_out = NULL WHERE run_id = :r"), {"r": run_id})
        conn.execute(sa.text("DELETE FROM run_limit WHERE run_id = :r"), {"r": run_id})


def test_runs_stored_before_exact_limit_values_answer_the_same_after_the_upgrade(
    engine: sa.Engine, runs: dict[str, int]
) -> None:
    with engine.connect() as conn:
        out_prices = conn.execute(
            sa.text("SELECT run_id, site_id, price_out FROM run_site_price WHERE price_out IS NOT NULL "
                    "ORDER BY 1, 2")
        ).all()
    assert out_prices  # warehouses with handling costs are split
    migrate_to(engine, "0005", "downgrade")
    for key in ("2026-W46", "horizon"):
        _pre_0004(engine, runs[key])
    before = every_view(engine)
    assert any(r for r in before["binding_capacity_by_run"] if r[12] == str(runs["2026-W46"]))
    migrate_to(engine, "head", "upgrade")
    assert every_view(engine) == before
    with engine.connect() as conn:
        # The upgrade recovers the outgoing-side prices from the dense reduced costs.
        assert conn.execute(
            sa.text("SELECT run_id, site_id, price_out FROM run_site_price WHERE price_out IS NOT NULL "
                    "ORDER BY 1, 2")
        ).all() == out_prices
        legacy = conn.execute(
            sa.text("SELECT DISTINCT run_id FROM run_limit WHERE NOT exact ORDER BY 1")
        ).scalars().all()
    assert legacy == sorted([runs["2026-W46"], runs["horizon"]])


def test_each_week_has_its_own_partition(engine: sa.Engine, runs: dict[str, int]) -> None:
    with engine.connect() as conn:
        parts = conn.execute(
            sa.text(
                "SELECT parent.relname AS parent, child.relname AS part FROM pg_inherits i "
                "JOIN pg_class parent ON parent.oid = i.inhparent JOIN pg_class child ON child.oid = i.inhrelid "
                "WHERE parent.relname = 'run_flow' ORDER BY child.relname"
            )
        ).all()
        weeks = conn.execute(sa.text("SELECT code FROM period ORDER BY code")).scalars().all()
        # A week's read touches its partitions only.
        plan = "\n".join(
            conn.execute(
                sa.text("EXPLAIN SELECT * FROM lane_flow WHERE period = '2026-W46'")
            ).scalars()
        )
    assert [p.part for p in parts] == [f"run_flow_{w.lower().replace('-', '_')}" for w in weeks]
    # Planned with that week's partitions only, whatever the join order.
    assert {m for m in re.findall(r"run_\w+?_(\d{4}_w\d\d)", plan)} == {"2026_w46"}


def test_partitions_are_made_once_whoever_asks(engine: sa.Engine, runs: dict[str, int]) -> None:
    with engine.begin() as conn:
        codes = conn.execute(sa.text("SELECT code FROM period")).scalars().all()
        before = conn.execute(sa.text("SELECT count(*) FROM pg_inherits")).scalar_one()
        ensure_partitions(conn, codes)
        ensure_partitions(conn, codes)
        assert conn.execute(sa.text("SELECT count(*) FROM pg_inherits")).scalar_one() == before
        with pytest.raises(sa.exc.DBAPIError, match="no period 2031-W01"):
            ensure_partitions(conn, ["2031-W01"])
