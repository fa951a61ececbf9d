"""Load, solve and store end to end on a real PostgreSQL: costs, certificates and stored prices.

The optimal cost of every stored run is checked against two outside references
on the model read straight from the CSV rows (``tests/reference_model.py``, not
the planner's instance): scipy's ``linprog`` with HiGHS and networkx's
``network_simplex``.

The stored prices are checked against the optimality conditions of min-cost
flow (complementary slackness: R. K. Ahuja, T. L. Magnanti and J. B. Orlin,
"Network Flows", Prentice Hall, 1993, chapter 9, from memory) and against the
derivative definition of ``price_high`` by re-solving with more demand.
"""

from __future__ import annotations

import dataclasses
from decimal import Decimal

import numpy as np
import pytest
from sqlalchemy import text

from planner.database.ingest import load_folder
from planner.database.snapshot import Scaling, read_lanes, read_snapshot
from planner.runs.weekly import solve_period, solve_snapshot
from tests.reference_model import reference_network, solve_lp, solve_networkx, week_from_files

#: Default precision of a run (``--cost-decimals 4``, ``--quantity-decimals 0``).
COST_DECIMALS = 4

# Week 2026-W10 is tight: more demand than supply (C2 pays a shortage penalty),
# a warehouse with a throughput limit and handling cost (W1, split in -> out),
# one without (W2), lanes at capacity, a committed minimum, two modes at a tied
# cost, a credit (negative unit cost), lanes of capacity 0, a lane whose minimum
# equals its capacity, and one plant with spare supply. Week 2026-W11 uses every unit of
# supply and has no shortage penalty, so one more unit cannot be had anywhere.
TIGHT_FILES = {
    "sites.csv": (
        "site,kind,name,region,throughput_capacity,handling_cost\n"
        "P1,plant,Fenwick Mill,east,,\n"
        "P2,plant,Gorse Mill,west,,\n"
        "P3,plant,Heath Mill,west,,\n"
        "W1,warehouse,Iris Depot,east,30,0.5\n"
        "W2,warehouse,Juniper Depot,west,,\n"
        "C1,customer,Kestrel Shop,east,,\n"
        "C2,customer,Linnet Shop,west,,\n"
        "C3,customer,Merlin Shop,west,,\n"
    ),
    "supply.csv": (
        "period,site,quantity\n"
        "2026-W10,P1,50\n2026-W10,P2,40\n2026-W10,P3,8\n"
        "2026-W11,P1,50\n2026-W11,P2,40\n2026-W11,P3,0\n"
    ),
    "demand.csv": (
        "period,site,quantity,shortage_penalty\n"
        "2026-W10,C1,40,\n2026-W10,C2,35,9\n2026-W10,C3,25,\n"
        "2026-W11,C1,40,\n2026-W11,C2,25,\n2026-W11,C3,25,\n"
    ),
    "lanes.csv": "period,origin,destination,mode,unit_cost,capacity,min_quantity\n"
    + "".join(
        f"{week},{lane}\n"
        for week in ("2026-W10", "2026-W11")
        for lane in (
            "P1,W1,road,1.00,,",
            "P1,W2,road,2.00,25,",
            "P2,W1,rail,1.50,20,5",
            "P2,W2,road,1.20,,",
            "P2,C3,road,4.00,,10",
            "P3,C3,road,9.50,,",
            "W1,C1,,1.00,,",
            "W1,C2,,2.00,,",
            "W2,C1,,1.50,15,",
            "W2,C2,,2.50,,",
            "W2,C3,,1.00,,",
            "P1,C1,road,5.00,10,",
            "P1,C1,rail,5.00,,",
            "P3,C1,road,-0.50,3,",
            "P3,C3,rail,1.00,0,",
            "P2,C1,rail,9.00,0,",
            "P2,C2,road,3.00,4,4",
        )
    ),
}


# --------------------------------------------------------------------------- outside references


def reference_costs(files: dict[str, str], period: str) -> tuple[Decimal, Decimal]:
    """Optimal cost of a week read straight from its CSV rows, by scipy HiGHS and by networkx (currency)."""
    net = reference_network(week_from_files(files, period, COST_DECIMALS).week)
    highs, simplex = solve_lp(net), solve_networkx(net)
    assert highs.status == simplex.status == "optimal"
    return Decimal(highs.cost).scaleb(-COST_DECIMALS), Decimal(simplex.cost).scaleb(-COST_DECIMALS)


# --------------------------------------------------------------------------- stored rows


def run_row(engine, run_id: int) -> dict:
    with engine.connect() as conn:
        return dict(
            conn.execute(
                text(
                    "SELECT *, primal_cost = dual_objective AS strong_duality, "
                    "duality_gap = 0 AS zero_gap FROM solve_run WHERE id = :id"
                ),
                {"id": run_id},
            ).mappings().one()
        )


def lane_results(engine, run_id: int) -> list[dict]:
    """Each lane of a run (the ``lane_flow`` view) with its origin's kind and both end prices."""
    with engine.connect() as conn:
        rows = conn.execute(
            text(
                """
                SELECT f.origin, f.destination, f.mode, f.unit_cost, f.capacity,
                       f.min_quantity, f.flow, f.reduced_cost, f.capacity_value,
                       po.price AS origin_price, po.price_out AS origin_price_out, pd.price AS destination_price,
                       (ov.kind = 'warehouse' AND (ov.throughput_capacity IS NOT NULL
                                                   OR coalesce(ov.handling_cost, 0) <> 0)) AS origin_split
                FROM lane_flow_of_run(:run) f
                JOIN solve_run r ON r.id = f.run_id
                JOIN lane l ON l.id = f.lane_id
                JOIN site_version ov ON ov.batch_id = r.batch_id AND ov.site_id = l.origin_id
                JOIN run_site_price po ON po.run_id = f.run_id AND po.site_id = l.origin_id
                JOIN run_site_price pd ON pd.run_id = f.run_id AND pd.site_id = l.destination_id
                ORDER BY l.id
                """
            ),
            {"run": run_id},
        ).mappings()
        return [dict(r) for r in rows]


def site_results(engine, run_id: int) -> dict[str, dict]:
    with engine.connect() as conn:
        rows = conn.execute(
            text(
                "SELECT s.code, sv.kind, p.*, (SELECT lim.loosen_value FROM run_limit lim "
                "WHERE lim.run_id = p.run_id AND lim.period = p.period AND lim.limit_kind = 'throughput' "
                "AND lim.ref_id = p.site_id) AS throughput_value "
                "FROM run_site_price p JOIN solve_run r ON r.id = p.run_id "
                "JOIN site s ON s.id = p.site_id "
                "JOIN site_version sv ON sv.batch_id = r.batch_id AND sv.site_id = p.site_id "
                "WHERE p.run_id = :run"
            ),
            {"run": run_id},
        ).mappings()
        return {r["code"]: dict(r) for r in rows}


def stored_cost_identity(engine, run_id: int) -> tuple[Decimal, Decimal]:
    """``(primal_cost, sum flow * unit_cost + handling + shortage penalties)``, in SQL."""
    with engine.connect() as conn:
        return tuple(
            conn.execute(
                text(
                    """
                    SELECT r.primal_cost,
                      (SELECT sum(f.flow * lr.unit_cost) FROM run_flow f JOIN lane_rate lr
                         ON lr.batch_id = r.batch_id AND lr.period_id = r.period_id
                        AND lr.lane_id = f.lane_id WHERE f.run_id = r.id)
                    + (SELECT coalesce(sum(p.throughput_flow * sv.handling_cost), 0)
                         FROM run_site_price p JOIN site_version sv
                         ON sv.batch_id = r.batch_id AND sv.site_id = p.site_id
                        WHERE p.run_id = r.id AND p.throughput_flow IS NOT NULL
                          AND sv.handling_cost IS NOT NULL)
                    + (SELECT coalesce(sum(p.shortage * d.shortage_penalty), 0)
                         FROM run_site_price p JOIN demand d ON d.batch_id = r.batch_id
                          AND d.period_id = r.period_id AND d.site_id = p.site_id
                        WHERE p.run_id = r.id AND d.shortage_penalty IS NOT NULL)
                    FROM solve_run r WHERE r.id = :run
                    """
                ),
                {"run": run_id},
            ).one()
        )


def load(engine, write_folder, files: dict[str, str]) -> None:
    assert load_folder(engine, write_folder(files)).created


WEEKS = [
    pytest.param("network", "2026-W40", id="network-W40"),
    pytest.param("network", "2026-W41", id="network-W41"),
    pytest.param("tight", "2026-W10", id="tight-shortage"),
    pytest.param("tight", "2026-W11", id="tight-all-supply-used"),
]


@pytest.fixture
def files_of(network_files):
    return {"network": network_files, "tight": TIGHT_FILES}


# --------------------------------------------------------------------------- cost and certificate


@pytest.mark.parametrize(("network", "period"), WEEKS)
def test_stored_cost_matches_highs_and_networkx_and_certificate_is_exact(
    engine, write_folder, files_of, network, period
):
    files = files_of[network]
    load(engine, write_folder, files)
    summary = solve_period(engine, period)
    assert summary.status == "optimal", summary.message
    run = run_row(engine, summary.run_id)
    highs, simplex = reference_costs(files, period)

    # Outside references: scipy linprog (HiGHS) and networkx min_cost_flow_cost.
    assert run["primal_cost"] == highs  # scipy linprog (HiGHS) on the model read from the CSV rows
    assert run["primal_cost"] == simplex  # networkx network_simplex on the same model
    assert summary.cost == run["primal_cost"]

    # The certificate: exact NUMERIC equalities, compared inside PostgreSQL.
    assert run["strong_duality"] is True
    assert run["zero_gap"] is True
    assert run["dual_objective"] == run["primal_cost"]
    assert run["certificate_ok"] is True
    assert run["max_conservation_violation"] == 0
    assert run["max_bound_violation"] == 0
    assert run["min_reduced_cost"] >= 0
    assert (run["cost_decimals"], run["quantity_decimals"]) == (4, 0)

    # The stored flows reproduce the stored cost exactly.
    primal, rebuilt = stored_cost_identity(engine, summary.run_id)
    assert rebuilt == primal


def test_a_run_stores_every_site_and_the_lanes_with_flow_and_shows_every_lane(engine, write_folder, network_files):
    load(engine, write_folder, network_files)
    run_id = solve_period(engine, "2026-W40").run_id
    with engine.connect() as conn:
        counts = conn.execute(
            text(
                "SELECT (SELECT count(*) FROM run_flow WHERE run_id = :r), "
                "(SELECT count(*) FROM lane_flow_of_run(:r) WHERE flow <> 0), "
                "(SELECT count(*) FROM lane_flow_of_run(:r)), "
                "(SELECT count(*) FROM lane_rate lr JOIN solve_run s ON s.id = :r "
                " WHERE lr.batch_id = s.batch_id AND lr.period_id = s.period_id), "
                "(SELECT count(*) FROM run_site_price WHERE run_id = :r), "
                "(SELECT count(*) FROM site_version sv JOIN solve_run s ON s.id = :r "
                " WHERE sv.batch_id = s.batch_id)"
            ),
            {"r": run_id},
        ).one()
    # 2026-W40 leaves two of its seven lanes idle: they have no row, the view shows them with 0.
    assert counts == (5, 5, 7, 7, 6, 6)


def test_a_lane_registry_read_before_a_new_lane_was_loaded_is_read_again(
    engine, write_folder, network_files
):
    load(engine, write_folder, network_files)
    with engine.connect() as conn:
        stale = read_lanes(conn)
    # A second load opens a new lane P2->C3 in 2026-W41.
    files = dict(network_files)
    files["lanes.csv"] += "2026-W41,P2,C3,,4,,\n"
    load(engine, write_folder, files)
    with engine.connect() as conn:
        fresh = read_snapshot(conn, "2026-W41")
        shared = read_snapshot(conn, "2026-W41", lanes=stale)
        assert conn.execute(text("SELECT count(*) FROM lane")).scalar_one() == stale["id"].shape[0] + 1
    for name in ("lane_origin", "lane_destination"):
        assert getattr(shared.week, name).tolist() == getattr(fresh.week, name).tolist()
    assert shared.lane_labels().tolist() == fresh.lane_labels().tolist()
    assert "P2->C3" in fresh.lane_labels().tolist()


def test_a_lane_added_in_the_reading_transaction_is_found_though_the_registry_is_read_beside_it(
    engine, write_folder, network_files
):
    # read_snapshot reads the lane registry on a second connection, which cannot
    # see a lane the reading transaction itself added: it reads it again there.
    load(engine, write_folder, network_files)
    with engine.connect() as conn:
        before = read_snapshot(conn, "2026-W41")
    with engine.begin() as conn:
        lane_id = conn.execute(text(
            "INSERT INTO lane (origin_id, destination_id, mode) SELECT o.id, d.id, 'rail' "
            "FROM site o, site d WHERE o.code = 'P2' AND d.code = 'C3' RETURNING id"
        )).scalar_one()
        conn.execute(text(
            "INSERT INTO lane_rate (batch_id, period_id, lane_id, unit_cost) "
            "SELECT ps.batch_id, ps.period_id, :lane, 4 FROM period_snapshot ps JOIN period p ON p.id = ps.period_id "
            "WHERE p.code = '2026-W41'"
        ), {"lane": lane_id})
        inside = read_snapshot(conn, "2026-W41")
        conn.rollback()
    assert inside.lane_labels().tolist() == [*before.lane_labels().tolist(), "P2->C3 rail"]
    assert inside.lane_id.tolist() == [*before.lane_id.tolist(), lane_id]


def test_tight_week_really_is_tight(engine, write_folder):
    """The hand-made week exercises what the price checks below rely on."""
    load(engine, write_folder, TIGHT_FILES)
    run_id = solve_period(engine, "2026-W10").run_id
    run = run_row(engine, run_id)
    sites = site_results(engine, run_id)
    assert run["shortage_units"] > 0 and sites["C2"]["shortage"] == run["shortage_units"]
    assert sites["P3"]["spare"] > 0
    assert sites["W1"]["throughput_flow"] == 30  # at its throughput limit
    assert sites["W1"]["throughput_value"] > 0


# --------------------------------------------------------------------------- stored prices


@pytest.mark.parametrize(("network", "period"), WEEKS)
def test_stored_lane_prices_satisfy_complementary_slackness(engine, write_folder, files_of, network, period):
    load(engine, write_folder, files_of[network])
    run_id = solve_period(engine, period).run_id
    lanes = lane_results(engine, run_id)
    assert lanes
    out_price_of_split: dict[str, set[Decimal]] = {}
    for lane in lanes:
        where = f"{lane['origin']}->{lane['destination']} {lane['mode']}"
        spare_room = lane["capacity"] is None or lane["flow"] < lane["capacity"]
        at_capacity = lane["capacity"] is not None and lane["flow"] >= lane["capacity"]
        if spare_room and not lane["origin_split"]:
            assert lane["destination_price"] - lane["origin_price"] <= lane["unit_cost"], where
        if spare_room:
            assert lane["reduced_cost"] >= 0, where
        if lane["flow"] > lane["min_quantity"]:
            assert lane["reduced_cost"] <= 0, where
        if lane["origin_split"]:
            # Lanes leave a split warehouse from its out node, whose price is
            # stored apart; all its lanes must imply that one.
            out_price = lane["destination_price"] + lane["reduced_cost"] - lane["unit_cost"]
            out_price_of_split.setdefault(lane["origin"], set()).add(out_price)
            assert out_price == lane["origin_price_out"], where
        else:
            assert lane["reduced_cost"] == lane["unit_cost"] + lane["origin_price"] - lane["destination_price"], where
        if at_capacity and lane["flow"] > lane["min_quantity"]:
            assert lane["capacity_value"] == -lane["reduced_cost"], where
            assert lane["capacity_value"] >= 0, where
        elif at_capacity:
            # Capacity equal to the minimum: the flow is fixed and r may have
            # either sign; more capacity is worth -r where that is positive, else 0.
            assert lane["capacity_value"] == max(Decimal(0), -lane["reduced_cost"]), where
        else:
            assert lane["capacity_value"] is None, where
    assert all(len(prices) == 1 for prices in out_price_of_split.values()), out_price_of_split


def test_price_checks_are_not_vacuous(engine, write_folder, network_files):
    """Across the checked weeks there are idle lanes, full lanes with a value, and split origins."""
    load(engine, write_folder, TIGHT_FILES)
    load(engine, write_folder, network_files)
    lanes = [lane for p in ("2026-W10", "2026-W40") for lane in lane_results(engine, solve_period(engine, p).run_id)]
    assert any(l["reduced_cost"] > 0 and l["flow"] == l["min_quantity"] for l in lanes)
    assert any(l["capacity_value"] is not None and l["capacity_value"] > 0 for l in lanes)
    assert any(l["origin_split"] for l in lanes)
    assert any(l["min_quantity"] > 0 and l["flow"] > l["min_quantity"] for l in lanes)
    assert any(l["min_quantity"] > 0 and l["flow"] == l["min_quantity"] for l in lanes)


@pytest.mark.parametrize(("network", "period"), WEEKS)
def test_stored_price_lies_in_its_range_and_missing_bounds_have_reasons(
    engine, write_folder, files_of, network, period
):
    load(engine, write_folder, files_of[network])
    run_id = solve_period(engine, period).run_id
    sites = site_results(engine, run_id)
    assert sites
    for code, s in sites.items():
        assert s["price"].is_finite(), code
        if s["price_low"] is not None:
            assert s["price_low"] <= s["price"], code
        if s["price_high"] is not None:
            assert s["price"] <= s["price_high"], code
        assert (s["price_low"] is None) == (s["low_reason"] is not None), code
        assert (s["price_high"] is None) == (s["high_reason"] is not None), code
        assert (s["price_high"] is None) == (s["high_units"] is None), code


def test_week_using_all_supply_without_penalty_has_no_price_high_but_finite_prices(engine, write_folder):
    load(engine, write_folder, TIGHT_FILES)
    summary = solve_period(engine, "2026-W11")
    assert summary.status == "optimal" and summary.certificate_ok
    run = run_row(engine, summary.run_id)
    assert run["spare_units"] == 0 and run["shortage_units"] == 0
    sites = site_results(engine, summary.run_id)
    assert len(sites) == 8
    for code, s in sites.items():
        assert s["price_high"] is None, code
        assert "cannot be had at any cost" in s["high_reason"], code
        assert s["price"].is_finite(), code
    # The lower bound still exists at customers (one unit less can go back to spare).
    assert all(sites[c]["price_low"] is not None for c in ("C1", "C2", "C3"))


# --------------------------------------------------------------------------- derivatives


def resolved_cost(snapshot, **changes) -> Decimal:
    """Optimal cost of ``snapshot`` with some week arrays replaced, solved in memory."""
    week = dataclasses.replace(snapshot.week, **changes)
    _, outcome = solve_snapshot(dataclasses.replace(snapshot, week=week), Scaling())
    assert outcome.status == "optimal", outcome.message
    return Decimal(outcome.certificate.primal_cost).scaleb(-COST_DECIMALS)


@pytest.mark.parametrize(("network", "period"), WEEKS[:3])
def test_price_high_is_the_cost_of_each_of_high_units_more_units(engine, write_folder, files_of, network, period):
    """Derivative definition: k <= high_units more units at a customer cost exactly k * price_high."""
    load(engine, write_folder, files_of[network])
    summary = solve_period(engine, period)
    sites = site_results(engine, summary.run_id)
    with engine.connect() as conn:
        snapshot = read_snapshot(conn, period)
    checked = 0
    for code, s in sites.items():
        if s["kind"] != "customer" or s["price_high"] is None:
            continue
        index = int(np.flatnonzero(snapshot.site_code == code)[0])
        units = s["high_units"]
        for k in sorted({1, 3 if units.is_infinite() else int(units)}):
            demand = snapshot.week.demand.copy()
            demand[index] += k
            assert resolved_cost(snapshot, demand=demand) == summary.cost + k * s["price_high"], (code, k)
            checked += 1
        if units.is_finite():
            # Past high_units the next units cost at least as much (the cost is convex).
            demand = snapshot.week.demand.copy()
            demand[index] += int(units) + 1
            assert resolved_cost(snapshot, demand=demand) >= summary.cost + (units + 1) * s["price_high"]
    assert checked >= 3


# Hand example for the value of throughput (costs in currency per unit):
# P ships to C either directly at 10.00 or through W at 2.00 + 1.00 handling +
# 3.00 = 6.00. W handles at most 40 units; C needs 50. The plan sends 40 via W
# and 10 direct: cost 40 * 6 + 10 * 10 = 340. One more unit of throughput moves
# one unit from the direct lane to W: 41 * 6 + 9 * 10 = 336, a saving of 4.00.
# The flow is not degenerate (the direct lane and P's spare supply are strictly
# inside their bounds), so 4.00 is the only optimal value.
THROUGHPUT_FILES = {
    "sites.csv": (
        "site,kind,throughput_capacity,handling_cost\n"
        "P,plant,,\nW,warehouse,{throughput},1\nC,customer,,\n"
    ),
    "supply.csv": "period,site,quantity\n2026-W20,P,100\n",
    "demand.csv": "period,site,quantity\n2026-W20,C,50\n",
    "lanes.csv": (
        "period,origin,destination,unit_cost\n"
        "2026-W20,P,C,10\n2026-W20,P,W,2\n2026-W20,W,C,3\n"
    ),
}


def throughput_files(throughput: int) -> dict[str, str]:
    files = dict(THROUGHPUT_FILES)
    files["sites.csv"] = files["sites.csv"].format(throughput=throughput)
    return files


def test_throughput_value_is_the_saving_of_one_more_unit_of_throughput(engine, write_folder):
    load(engine, write_folder, throughput_files(40))
    first = solve_period(engine, "2026-W20")
    assert first.cost == Decimal(340)  # hand computed above
    sites = site_results(engine, first.run_id)
    assert sites["W"]["throughput_flow"] == 40
    assert sites["W"]["throughput_value"] == Decimal(4)  # hand computed above

    # -reduced cost of W's in -> out arc: handling + price(in) - price(out), with
    # price(out) read off the lane W->C that leaves the out node.
    lane_wc = next(l for l in lane_results(engine, first.run_id) if l["origin"] == "W")
    price_out = lane_wc["destination_price"] + lane_wc["reduced_cost"] - lane_wc["unit_cost"]
    assert -(Decimal(1) + sites["W"]["price"] - price_out) == sites["W"]["throughput_value"]

    # Re-solve from a new load batch with one more unit of throughput.
    load(engine, write_folder, throughput_files(41))
    second = solve_period(engine, "2026-W20")
    assert second.cost == Decimal(336)  # hand computed above
    assert first.cost - second.cost == sites["W"]["throughput_value"]
