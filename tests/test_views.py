"""The reporting views, their run-id functions and the read-only role, on a small
network whose every figure is computed by hand below."""

from __future__ import annotations

from decimal import Decimal as D

import psycopg
import pytest
import sqlalchemy as sa
from alembic import command

from planner.database.ingest import load_folder
from planner.database.migrate import alembic_config, current_revision, head_revision
from planner.reports.queries import READER_ROLE, VIEWS
from planner.runs.horizon import solve_horizon
from planner.runs.weekly import solve_period

# Hand network. Two weeks, invented sites:
#   plants P1 (north, 100), P2 (south, 100), P3 (south, 5 in W10, 20 in W11);
#   warehouse W1: throughput 50 units, handling 1 per unit;
#   customers C1 (40, penalty 30), C2 (30, no penalty: must be met), C3 (20, penalty 5).
# Lanes (cost, capacity): P1->W1 road 2 cap 60; W1->C1 1; W1->C2 2; P2->C2 rail 4 cap 10;
#   P2->C1 road 12 (14 in W11); P2->C3 road 8; P3->C3 road 3.
#
# Week W10, by hand. C3: its cheapest delivery beyond P3's 5 units is P2 at 8 > penalty 5,
# so P3 ships 5 and 15 units are short (price 5, P3's price 5 - 3 = 2). C1 and C2 need 70:
# W1 passes its 50 (P1->W1 at 2 + handling 1), the rail lane its 10 into C2, and C2's
# remaining 20 can only come through W1, so W1 sends 20 to C2 and 30 to C1; C1's last 10
# come by P2->C1 at 12. Cost 100 + 50 + 30 + 40 + 40 + 120 + 15 + 75 = 470.
# Prices (SPARE = 0; P1, P2 have spare supply): C1 = 12 (P2->C1); C2 = 13 (one more unit
# at C2 moves one W1 unit from C1, which then takes P2->C1: 2 - 1 + 12); W1 (arrival) = 2.
# Rail P2->C2 at capacity: value 13 - 4 = 9. W1 throughput at capacity: value
# 12 - (2 + 1 + 1) = 8. All prices unique.
#
# Week W11: P2->C1 costs 14 and P3 has 20, exactly C3's demand. The same flows except
# P3->C3 = 20 and no shortage. Cost 100 + 50 + 30 + 40 + 40 + 140 + 60 = 460. C1 = 14,
# C2 = 15, rail value 11, W1 value 10. C3: one more unit comes short at 5, one less saves
# P3's 3, so [3, 5] (degenerate, price 5); P3: [0, 2] (degenerate, price 2).
SITES = (
    "site,kind,name,region,throughput_capacity,handling_cost,x,y\n"
    "P1,plant,North Works,north,,,0,10\n"
    "P2,plant,South Works,south,,,0,0\n"
    "P3,plant,Harbour Works,south,,,0,-5\n"
    "W1,warehouse,Central Depot,central,50,1,5,5\n"
    "C1,customer,North Shop,north,,,10,10\n"
    "C2,customer,South Shop,south,,,10,0\n"
    "C3,customer,Harbour Shop,south,,,10,-5\n"
)
SUPPLY = (
    "period,site,quantity\n"
    "2026-W10,P1,100\n2026-W10,P2,100\n2026-W10,P3,5\n"
    "2026-W11,P1,100\n2026-W11,P2,100\n2026-W11,P3,20\n"
)
DEMAND = (
    "period,site,quantity,shortage_penalty\n"
    "2026-W10,C1,40,30\n2026-W10,C2,30,\n2026-W10,C3,20,5\n"
    "2026-W11,C1,40,30\n2026-W11,C2,30,\n2026-W11,C3,20,5\n"
)
LANE_ROWS = [
    ("P1", "W1", "road", "2", "60"),
    ("W1", "C1", "", "1", ""),
    ("W1", "C2", "", "2", ""),
    ("P2", "C2", "rail", "4", "10"),
    ("P2", "C1", "road", "{c1}", ""),
    ("P2", "C3", "road", "8", ""),
    ("P3", "C3", "road", "3", ""),
]


def lanes_csv(weeks: dict[str, int], *, cut_off_c2: bool = False) -> str:
    """lanes.csv for ``weeks`` (week -> unit cost of P2->C1); without C2's two lanes in
    ``cut_off_c2``, which makes those weeks infeasible (C2 has no shortage penalty)."""
    lines = ["period,origin,destination,mode,unit_cost,capacity,min_quantity"]
    for week, c1 in weeks.items():
        for origin, destination, mode, cost, capacity in LANE_ROWS:
            if not (cut_off_c2 and destination == "C2"):
                lines.append(f"{week},{origin},{destination},{mode},{cost.format(c1=c1)},{capacity},")
    return "\n".join(lines) + "\n"


def _weeks_only(text: str, weeks: dict[str, int]) -> str:
    header, *lines = text.splitlines()
    return "\n".join([header] + [line for line in lines if line.split(",")[0] in weeks]) + "\n"


def hand_network(weeks: dict[str, int] | None = None, *, cut_off_c2: bool = False) -> dict[str, str]:
    """Load folder of the hand network for ``weeks`` (default: W10 and W11 as above)."""
    weeks = weeks or {"2026-W10": 12, "2026-W11": 14}
    return {
        "sites.csv": SITES,
        "supply.csv": _weeks_only(SUPPLY, weeks),
        "demand.csv": _weeks_only(DEMAND, weeks),
        "lanes.csv": lanes_csv(weeks, cut_off_c2=cut_off_c2),
    }


HAND_NETWORK = hand_network()


def solve_hand_network(engine: sa.Engine, write_folder) -> dict[str, int]:
    """Load the hand network, solve both weeks; week -> run id."""
    load_folder(engine, write_folder(HAND_NETWORK))
    return {week: solve_period(engine, week).run_id for week in ("2026-W10", "2026-W11")}


def rows(engine: sa.Engine, query: str, **params) -> list[dict]:
    with engine.connect() as conn:
        return [dict(r) for r in conn.execute(sa.text(query), params).mappings()]


@pytest.fixture
def solved(engine: sa.Engine, write_folder) -> dict[str, int]:
    return solve_hand_network(engine, write_folder)


# (period, site) -> (price, price_low, price_high, degenerate, price_change): hand computed.
PRICES = {
    ("2026-W10", "P1"): (0, 0, 0, False, None),
    ("2026-W10", "P2"): (0, 0, 0, False, None),
    ("2026-W10", "P3"): (2, 2, 2, False, None),
    ("2026-W10", "W1"): (2, 2, 2, False, None),
    ("2026-W10", "C1"): (12, 12, 12, False, None),
    ("2026-W10", "C2"): (13, 13, 13, False, None),
    ("2026-W10", "C3"): (5, 5, 5, False, None),
    ("2026-W11", "P1"): (0, 0, 0, False, 0),
    ("2026-W11", "P2"): (0, 0, 0, False, 0),
    ("2026-W11", "P3"): (2, 0, 2, True, 0),
    ("2026-W11", "W1"): (2, 2, 2, False, 0),
    ("2026-W11", "C1"): (14, 14, 14, False, 2),
    ("2026-W11", "C2"): (15, 15, 15, False, 2),
    ("2026-W11", "C3"): (5, 3, 5, True, 0),
}


def test_site_price_history_hand_computed(engine: sa.Engine, solved: dict[str, int]) -> None:
    found = rows(engine, "SELECT * FROM site_price_history")
    got = {
        (r["period"], r["site"]): (r["price"], r["price_low"], r["price_high"], r["degenerate"], r["price_change"])
        for r in found
    }
    assert got == PRICES
    by_key = {(r["period"], r["site"]): r for r in found}
    assert by_key["2026-W10", "C1"]["run_id"] == solved["2026-W10"]
    assert by_key["2026-W11", "W1"]["kind"] == "warehouse"
    assert (by_key["2026-W11", "C3"]["x"], by_key["2026-W11", "C3"]["y"]) == (10.0, -5.0)


# Lanes of W10: label -> (flow, capacity, utilisation, unit_cost, reduced_cost,
# capacity_value, cost, echelon, at_capacity). Hand computed: reduced cost =
# unit cost + price(origin) - price(destination), with W1's departure price 11
# (arrival 2 + handling 1 + throughput value 8).
LANES_W10 = {
    "P1->W1 road": (50, 60, round(D(50) / D(60), 12), 2, 0, None, 100, "plant->warehouse", False),
    "W1->C1": (30, None, None, 1, 0, None, 30, "warehouse->customer", False),
    "W1->C2": (20, None, None, 2, 0, None, 40, "warehouse->customer", False),
    "P2->C2 rail": (10, 10, 1, 4, -9, 9, 40, "plant->customer", True),
    "P2->C1 road": (10, None, None, 12, 0, None, 120, "plant->customer", False),
    "P2->C3 road": (0, None, None, 8, 3, None, 0, "plant->customer", False),
    "P3->C3 road": (5, None, None, 3, 0, None, 15, "plant->customer", False),
}


def _rounded(ratio: D | None) -> D | None:
    # PostgreSQL divides NUMERIC to 20 significant digits.
    return None if ratio is None else round(ratio, 12)


def test_lane_flow_hand_computed(engine: sa.Engine, solved: dict[str, int]) -> None:
    found = rows(engine, "SELECT * FROM lane_flow WHERE period = '2026-W10'")
    got = {
        r["label"]: (
            r["flow"], r["capacity"], _rounded(r["utilisation"]), r["unit_cost"], r["reduced_cost"],
            r["capacity_value"], r["cost"], r["echelon"], r["at_capacity"],
        )
        for r in found
    }
    assert got == LANES_W10
    rail = next(r for r in found if r["label"] == "P2->C2 rail")
    assert (rail["origin"], rail["destination"], rail["mode"], rail["run_id"]) == ("P2", "C2", "rail", solved["2026-W10"])
    # The lanes' cost plus handling (50) and penalties (75) is the run's cost, 470.
    assert sum(r["cost"] for r in found) + 50 + 75 == 470
    w11 = {r["label"]: r for r in rows(engine, "SELECT * FROM lane_flow WHERE period = '2026-W11'")}
    assert (w11["P2->C1 road"]["unit_cost"], w11["P2->C1 road"]["cost"]) == (14, 140)
    assert (w11["P2->C2 rail"]["reduced_cost"], w11["P2->C2 rail"]["capacity_value"]) == (-11, 11)


def test_binding_capacity_hand_computed(engine: sa.Engine, solved: dict[str, int]) -> None:
    found = rows(engine, "SELECT * FROM binding_capacity ORDER BY period, rank")
    got = [(r["period"], r["rank"], r["kind"], r["label"], r["capacity_value"], r["capacity"], r["flow"]) for r in found]
    # Hand computed: the rail lane is worth more per unit of capacity than W1's throughput.
    assert got == [
        ("2026-W10", 1, "lane", "P2->C2 rail", 9, 10, 10),
        ("2026-W10", 2, "warehouse", "W1", 8, 50, 50),
        ("2026-W11", 1, "lane", "P2->C2 rail", 11, 10, 10),
        ("2026-W11", 2, "warehouse", "W1", 10, 50, 50),
    ]
    assert (found[0]["origin"], found[0]["destination"], found[0]["mode"], found[0]["site"]) == ("P2", "C2", "rail", None)
    assert (found[1]["origin"], found[1]["site"]) == (None, "W1")


def test_shortage_hand_computed(engine: sa.Engine, solved: dict[str, int]) -> None:
    found = rows(engine, "SELECT * FROM shortage")
    assert [
        (r["period"], r["customer"], r["units_short"], r["penalty"], r["penalty_cost"], r["demand"], r["region"])
        for r in found
    ] == [("2026-W10", "C3", 15, 5, 75, 20, "south")]  # hand computed: 20 - 5 from P3


def test_run_summary_hand_computed(engine: sa.Engine, solved: dict[str, int]) -> None:
    found = rows(engine, "SELECT * FROM run_summary ORDER BY period")
    got = [
        (r["period"], r["kind"], r["status"], r["cost"], r["dual_objective"], r["certificate_ok"], r["shortage_units"])
        for r in found
    ]
    assert got == [
        ("2026-W10", "week", "optimal", 470, 470, True, 15),
        ("2026-W11", "week", "optimal", 460, 460, True, 0),
    ]
    stored = {
        r["id"]: r for r in rows(engine, "SELECT id, input_fingerprint, finished_at, solver_seconds FROM solve_run")
    }
    for r in found:
        run = stored[r["run_id"]]
        assert (r["input_fingerprint"], r["solved_at"], r["solver_seconds"]) == (
            run["input_fingerprint"], run["finished_at"], run["solver_seconds"],
        )
    assert [r["run_id"] for r in found] == [solved["2026-W10"], solved["2026-W11"]]


def test_views_read_the_latest_optimal_run(engine: sa.Engine, solved: dict[str, int], write_folder) -> None:
    # A new snapshot of W10 with P2->C1 at 13: C1's price becomes 13 (hand computed).
    load_folder(engine, write_folder(hand_network({"2026-W10": 13})))
    newer = solve_period(engine, "2026-W10").run_id
    # Then one where C2 (no penalty) cannot be served at all: that run is infeasible.
    load_folder(engine, write_folder(hand_network({"2026-W10": 13}, cut_off_c2=True)))
    failed = solve_period(engine, "2026-W10")
    assert failed.status == "infeasible"

    price = rows(engine, "SELECT price, run_id FROM site_price_history WHERE period = '2026-W10' AND site = 'C1'")
    assert price == [{"price": 13, "run_id": newer}]
    assert {r["run_id"] for r in rows(engine, "SELECT run_id FROM lane_flow WHERE period = '2026-W10'")} == {newer}
    summary = rows(engine, "SELECT run_id, cost FROM run_summary WHERE period = '2026-W10'")
    assert summary == [{"run_id": newer, "cost": 480}]  # 470 + 10 units x 1 more on P2->C1

    # The older run and the failed one stay readable by id.
    old = rows(engine, "SELECT price FROM site_price_history_of_run(:run) WHERE site = 'C1'", run=solved["2026-W10"])
    assert old == [{"price": 12}]
    assert rows(engine, "SELECT status, cost FROM run_summary_of_run(:run)", run=failed.run_id) == [
        {"status": "infeasible", "cost": None}
    ]
    assert rows(engine, "SELECT * FROM lane_flow_of_run(:run)", run=failed.run_id) == []


def test_functions_and_by_run_views_return_one_run(engine: sa.Engine, solved: dict[str, int]) -> None:
    run = solved["2026-W10"]
    for view in VIEWS:
        latest = rows(engine, f"SELECT * FROM {view} WHERE run_id = :run", run=run)
        assert latest, view
        assert rows(engine, f"SELECT * FROM {view}_of_run(:run)", run=run) == latest, view
        assert rows(engine, f"SELECT * FROM {view}_by_run WHERE run_id = :run", run=run) == latest, view
    # Comparing with the previous solved week works for one run too (hand computed: +2).
    change = rows(
        engine, "SELECT price_change FROM site_price_history_of_run(:run) WHERE site = 'C2'", run=solved["2026-W11"]
    )
    assert change == [{"price_change": 2}]


def test_horizon_run_by_id(engine: sa.Engine, solved: dict[str, int]) -> None:
    horizon = solve_horizon(engine, ["2026-W10", "2026-W11"])
    # No stock is carried (no holding cost given), so the horizon is the two weeks: 470 + 460.
    summary = rows(engine, "SELECT period, kind, cost, shortage_units FROM run_summary_of_run(:run)", run=horizon.run_id)
    assert summary == [{"period": "2026-W10..2026-W11", "kind": "horizon", "cost": 930, "shortage_units": 15}]
    assert rows(engine, "SELECT period, kind FROM run_summary WHERE kind = 'horizon'") == [
        {"period": "2026-W10..2026-W11", "kind": "horizon"}
    ]
    lanes = rows(
        engine, "SELECT period, unit_cost, flow FROM lane_flow_of_run(:run) WHERE label = 'P2->C1 road' ORDER BY period",
        run=horizon.run_id,
    )
    assert lanes == [
        {"period": "2026-W10", "unit_cost": 12, "flow": 10},
        {"period": "2026-W11", "unit_cost": 14, "flow": 10},
    ]
    binding = rows(engine, "SELECT period, rank, label FROM binding_capacity_of_run(:run) ORDER BY period, rank", run=horizon.run_id)
    assert [(r["period"], r["rank"], r["label"]) for r in binding] == [
        ("2026-W10", 1, "P2->C2 rail"), ("2026-W10", 2, "W1"), ("2026-W11", 1, "P2->C2 rail"), ("2026-W11", 2, "W1"),
    ]
    # Within a horizon, the second week's price changes compare with its first week.
    c1 = rows(engine, "SELECT period, price_change FROM site_price_history_of_run(:run) WHERE site = 'C1' ORDER BY period", run=horizon.run_id)
    assert c1 == [{"period": "2026-W10", "price_change": None}, {"period": "2026-W11", "price_change": 2}]
    # The per-period views still read week runs only.
    assert {r["run_id"] for r in rows(engine, "SELECT run_id FROM lane_flow")} == set(solved.values())


RAW_TABLES = (
    "load_batch", "site", "site_version", "period", "period_snapshot", "supply", "demand", "lane",
    "lane_rate", "solve_run", "run_flow", "run_site_price", "run_stock",
)


def _as_reader(database_url: str) -> psycopg.Connection:
    connection = psycopg.connect(sa.make_url(database_url).set(drivername="postgresql").render_as_string(hide_password=False))
    connection.execute(f"SET ROLE {READER_ROLE}")
    return connection


def test_reader_role_reads_the_views_only(engine: sa.Engine, solved: dict[str, int], database_url: str) -> None:
    role = rows(engine, "SELECT rolcanlogin, rolsuper FROM pg_roles WHERE rolname = :role", role=READER_ROLE)
    assert role == [{"rolcanlogin": False, "rolsuper": False}]
    run = solved["2026-W10"]
    with _as_reader(database_url) as reader:
        for view in VIEWS:
            assert reader.execute(f"SELECT count(*) FROM {view}").fetchone()[0] > 0
            assert reader.execute(f"SELECT count(*) FROM {view}_of_run(%s)", [run]).fetchone()[0] > 0
            assert reader.execute(f"SELECT count(*) FROM {view}_by_run").fetchone()[0] > 0
        denied = [f"SELECT * FROM {table}" for table in RAW_TABLES] + [
            "INSERT INTO site (code) VALUES ('X1')",
            "UPDATE solve_run SET status = 'failed'",
            "DELETE FROM run_flow",
            "TRUNCATE run_site_price",
            "CREATE VIEW my_copy AS SELECT * FROM run_flow",
            "DROP VIEW lane_flow",
        ]
        if reader.info.server_version >= 150000:  # PUBLIC may create in schema public before 15
            denied.append("CREATE TABLE my_table (x int)")
        for statement in denied:
            with pytest.raises(psycopg.errors.InsufficientPrivilege), reader.transaction():
                reader.execute(statement)


def test_role_and_views_survive_a_downgrade_and_upgrade(engine: sa.Engine, solved: dict[str, int]) -> None:
    with engine.begin() as connection:
        command.downgrade(alembic_config(connection), "0002")
    with engine.connect() as connection:
        assert sa.inspect(connection).get_view_names() == ["site_price_history"]
        columns = [c["name"] for c in sa.inspect(connection).get_columns("site_price_history")]
        assert columns[-1] == "run_id"  # 0001's view again
    # The role is cluster-wide and stays; creating it again must not fail.
    assert rows(engine, "SELECT 1 AS found FROM pg_roles WHERE rolname = :role", role=READER_ROLE) == [{"found": 1}]
    with engine.begin() as connection:
        command.upgrade(alembic_config(connection), "head")
        assert current_revision(connection) == head_revision() == "0012"
    assert len(rows(engine, "SELECT * FROM site_price_history")) == len(PRICES)


