"""Tests of the synthetic network generators (no database needed).

Feasibility and binding capacities are checked against networkx, an outside
reference: ``networkx.maximum_flow_value`` (preflow-push) for the largest
deliverable quantity and ``networkx.network_simplex`` for optimal costs.
"""

from __future__ import annotations

import datetime
from pathlib import Path

import networkx as nx
import numpy as np
import pandas as pd
import pytest

from planner.synthetic.benchmark_network import benchmark_network
from planner.synthetic.demo_network import demo_network
from planner.synthetic.frames import (
    DEMAND_COLUMNS,
    INVENTED_NAME,
    LANE_COLUMNS,
    NAME_HEADS,
    NAME_LINKS,
    NAME_SUFFIXES,
    NAME_TAILS,
    SITE_COLUMNS,
    SUPPLY_COLUMNS,
    NetworkFrames,
    write_folder,
)

SEEDS_FOLDER = Path(__file__).resolve().parents[1] / "seeds"
CSV_FILES = ("sites.csv", "supply.csv", "demand.csv", "lanes.csv")
SOURCE, SINK = "source", "sink"


@pytest.fixture(scope="module")
def demo() -> NetworkFrames:
    return demo_network()


SMALL = {"n_plants": 5, "n_warehouses": 10, "n_customers": 200, "n_lanes": 2000, "weeks": 2}
MEDIUM = {"n_plants": 20, "n_warehouses": 80, "n_customers": 5000, "n_lanes": 50_000, "weeks": 2}
TINY = {"n_plants": 3, "n_warehouses": 6, "n_customers": 50, "n_lanes": 250}


@pytest.fixture(scope="module")
def small_benchmark() -> NetworkFrames:
    return benchmark_network(**SMALL)


@pytest.fixture(scope="module")
def medium_benchmark() -> NetworkFrames:
    return benchmark_network(**MEDIUM, seed=3)


# --- reference models (networkx) ---------------------------------------------


def _period_graph(
    frames: NetworkFrames,
    period: str,
    *,
    multigraph: bool,
    extra_throughput: dict[str, int] | None = None,
    extra_lane_capacity: int = 0,
) -> tuple[nx.DiGraph, dict[tuple[object, object, int], int]]:
    """One week as a flow graph from a super source to a super sink.

    source -> plant (capacity = supply), lanes (capacity blank = unlimited,
    i.e. no ``capacity`` attribute), warehouse split into ``in -> out`` with
    its throughput capacity and handling cost, customer -> sink (capacity =
    demand). Weights are costs in cents. Returns the graph and the lanes'
    lower bounds keyed by (tail, head, edge key) for the caller to apply.
    """
    sites = frames.sites.set_index("site")
    extra_throughput = extra_throughput or {}
    graph = nx.MultiDiGraph() if multigraph else nx.DiGraph()

    def tail(code: str) -> tuple[str, str]:
        return ("out", code) if sites.at[code, "kind"] == "warehouse" else ("site", code)

    def head(code: str) -> tuple[str, str]:
        return ("in", code) if sites.at[code, "kind"] == "warehouse" else ("site", code)

    for code, row in sites[sites["kind"] == "warehouse"].iterrows():
        handling = 0.0 if pd.isna(row["handling_cost"]) else row["handling_cost"]
        attributes = {"weight": round(100 * handling)}
        if not pd.isna(row["throughput_capacity"]):
            attributes["capacity"] = int(row["throughput_capacity"]) + extra_throughput.get(code, 0)
        graph.add_edge(("in", code), ("out", code), **attributes)
    for row in frames.supply[frames.supply["period"] == period].itertuples():
        graph.add_edge(SOURCE, ("site", row.site), capacity=int(row.quantity), weight=0)
    for row in frames.demand[frames.demand["period"] == period].itertuples():
        graph.add_edge(("site", row.site), SINK, capacity=int(row.quantity), weight=0)
    lower_bounds: dict[tuple[object, object, int], int] = {}
    lanes = frames.lanes[frames.lanes["period"] == period]
    if multigraph:
        for row in lanes.itertuples():
            attributes = {"weight": round(100 * row.unit_cost)}
            if not pd.isna(row.capacity):
                attributes["capacity"] = int(row.capacity) + extra_lane_capacity
            lower = 0 if pd.isna(row.min_quantity) else int(row.min_quantity)
            key = graph.add_edge(tail(row.origin), head(row.destination), **attributes)
            if lower:
                lower_bounds[(tail(row.origin), head(row.destination), key)] = lower
    else:
        # Parallel lanes (several modes) add up; one unlimited lane makes the pair unlimited.
        for (origin, destination), group in lanes.groupby(["origin", "destination"]):
            attributes = {}
            if group["capacity"].notna().all():
                attributes["capacity"] = int(group["capacity"].sum())
            graph.add_edge(tail(origin), head(destination), **attributes)
    return graph, lower_bounds


def max_deliverable(frames: NetworkFrames, period: str) -> int:
    """Largest quantity that can reach the customers in one week.

    Reference: networkx.maximum_flow_value (preflow-push). Minimum lane
    quantities are left out: meeting demand here is necessary for a
    feasible week, :func:`min_cost_full_delivery` checks them too.
    """
    graph, _ = _period_graph(frames, period, multigraph=False)
    return nx.maximum_flow_value(graph, SOURCE, SINK)


def min_cost_full_delivery(frames: NetworkFrames, period: str, **extra: object) -> int:
    """Least cost in cents of meeting all demand of one week, lower bounds included.

    Reference: networkx.network_simplex. A lower bound ``l`` on arc u -> v
    is moved into the node demands (u sends ``l`` more, v receives ``l``)
    and its cost added as a constant. Raises ``networkx.NetworkXUnfeasible``
    if the week cannot be met in full.
    """
    graph, lower_bounds = _period_graph(frames, period, multigraph=True, **extra)
    total_demand = int(frames.demand.loc[frames.demand["period"] == period, "quantity"].sum())
    nx.set_node_attributes(graph, 0, "demand")
    graph.nodes[SOURCE]["demand"] = -total_demand
    graph.nodes[SINK]["demand"] = total_demand
    fixed_cost = 0
    for (u, v, key), lower in lower_bounds.items():
        edge = graph.edges[u, v, key]
        if "capacity" in edge:
            edge["capacity"] -= lower
        graph.nodes[u]["demand"] += lower
        graph.nodes[v]["demand"] -= lower
        fixed_cost += lower * edge["weight"]
    cost, _ = nx.network_simplex(graph)
    return cost + fixed_cost


def periods_of(frames: NetworkFrames) -> list[str]:
    return sorted(frames.demand["period"].unique())


# --- contract ---------------------------------------------------------------


@pytest.mark.parametrize("make", [demo_network, lambda: benchmark_network(**TINY)])
def test_frames_have_exactly_the_csv_columns(make) -> None:
    frames = make()
    assert tuple(frames.sites.columns) == SITE_COLUMNS
    assert tuple(frames.supply.columns) == SUPPLY_COLUMNS
    assert tuple(frames.demand.columns) == DEMAND_COLUMNS
    assert tuple(frames.lanes.columns) == LANE_COLUMNS


def test_columns_agree_with_the_loader() -> None:
    """The generator and the folder loader spell the same contract (schema.md)."""
    from planner.database.ingest import FILE_COLUMNS

    assert FILE_COLUMNS == {
        "sites.csv": SITE_COLUMNS,
        "supply.csv": SUPPLY_COLUMNS,
        "demand.csv": DEMAND_COLUMNS,
        "lanes.csv": LANE_COLUMNS,
    }


def test_network_frames_refuse_wrong_columns(demo) -> None:
    with pytest.raises(ValueError, match="lanes.csv"):
        NetworkFrames(demo.sites, demo.supply, demo.demand, demo.lanes.drop(columns="mode"))


def _monday(code: str) -> datetime.date:
    return datetime.date.fromisocalendar(int(code[:4]), int(code[6:]), 1)


def test_demo_weeks_are_consecutive_iso_weeks(demo) -> None:
    assert periods_of(demo)[0] == "2026-W45" and len(periods_of(demo)) == 8
    mondays = [_monday(code) for code in periods_of(demo)]
    assert all((later - earlier).days == 7 for earlier, later in zip(mondays, mondays[1:]))


def test_weeks_run_across_a_53_week_year() -> None:
    shifted = demo_network(weeks=4, first_week="2026-W52")
    # 2026 has an ISO week 53 (its 1 January is a Thursday), 2027 has none.
    assert periods_of(shifted) == ["2026-W52", "2026-W53", "2027-W01", "2027-W02"]
    for frame in (shifted.supply, shifted.demand, shifted.lanes):
        assert set(frame["period"]) == set(periods_of(shifted))
    bench = benchmark_network(**TINY, weeks=2, first_week="2027-W52")
    assert periods_of(bench) == ["2027-W52", "2028-W01"]


@pytest.mark.parametrize("code", ["2026-45", "2025-W53", "2026-W00"])
def test_bad_first_week_is_refused(code: str) -> None:
    with pytest.raises(ValueError, match=code):
        demo_network(first_week=code)
    with pytest.raises(ValueError, match=code):
        benchmark_network(**TINY, first_week=code)


def test_weeks_below_one_are_refused() -> None:
    with pytest.raises(ValueError, match="weeks"):
        demo_network(weeks=0)


# --- determinism ------------------------------------------------------------


def _assert_same(a: NetworkFrames, b: NetworkFrames) -> None:
    for name in ("sites", "supply", "demand", "lanes"):
        pd.testing.assert_frame_equal(getattr(a, name), getattr(b, name))


def test_demo_is_deterministic_for_a_seed(demo) -> None:
    _assert_same(demo, demo_network(seed=7))
    other = demo_network(seed=8)
    assert not other.demand["quantity"].equals(demo.demand["quantity"])


def test_benchmark_is_deterministic_for_a_seed(small_benchmark) -> None:
    _assert_same(small_benchmark, benchmark_network(**SMALL))
    other = benchmark_network(**SMALL, seed=2)
    assert not other.lanes["unit_cost"].equals(small_benchmark.lanes["unit_cost"])


def test_seeds_folder_matches_the_generator(tmp_path) -> None:
    written = write_folder(demo_network(), tmp_path)
    for file_name in CSV_FILES:
        assert (SEEDS_FOLDER / file_name).read_bytes() == (written / file_name).read_bytes(), (
            f"seeds/{file_name} differs from demo_network(); "
            "regenerate it with write_folder(demo_network(), 'seeds')"
        )


# --- keys and roles ---------------------------------------------------------

FRAMES = ["demo", "small_benchmark", "medium_benchmark"]


@pytest.mark.parametrize("name", FRAMES)
def test_no_duplicate_keys(name, request) -> None:
    frames: NetworkFrames = request.getfixturevalue(name)
    assert not frames.sites.duplicated(["site"]).any()
    assert not frames.supply.duplicated(["period", "site"]).any()
    assert not frames.demand.duplicated(["period", "site"]).any()
    assert not frames.lanes.duplicated(["period", "origin", "destination", "mode"]).any()


@pytest.mark.parametrize("name", FRAMES)
def test_kinds_match_roles(name, request) -> None:
    frames: NetworkFrames = request.getfixturevalue(name)
    kind = frames.sites.set_index("site")["kind"]
    assert set(kind) == {"plant", "warehouse", "customer"}
    assert set(kind[frames.supply["site"]]) == {"plant"}
    assert set(kind[frames.demand["site"]]) == {"customer"}
    assert set(kind[frames.lanes["origin"]]) == {"plant", "warehouse"}
    assert set(kind[frames.lanes["destination"]]) == {"warehouse", "customer"}
    assert (frames.lanes["origin"] != frames.lanes["destination"]).all()
    between_warehouses = (kind[frames.lanes["origin"]].to_numpy() == "warehouse") & (
        kind[frames.lanes["destination"]].to_numpy() == "warehouse"
    )
    assert not between_warehouses.any()
    # Each period lists every plant's supply and every customer's demand.
    weeks = len(periods_of(frames))
    assert len(frames.supply) == weeks * (kind == "plant").sum()
    assert len(frames.demand) == weeks * (kind == "customer").sum()


@pytest.mark.parametrize("name", FRAMES)
def test_values_within_the_contract(name, request) -> None:
    frames: NetworkFrames = request.getfixturevalue(name)
    for frame, column in [(frames.supply, "quantity"), (frames.demand, "quantity")]:
        assert frame[column].dtype == np.int64
        assert (frame[column] >= 0).all()
    whole_columns = [
        (frames.lanes, "capacity"),
        (frames.lanes, "min_quantity"),
        (frames.sites, "throughput_capacity"),
        (frames.sites, "storage_capacity"),
    ]
    for frame, column in whole_columns:
        present = frame[column].dropna()
        assert (present >= 0).all() and (present == present.round()).all()
    lanes = frames.lanes
    assert (lanes["min_quantity"].fillna(0) <= lanes["capacity"].fillna(np.inf)).all()
    assert (lanes["unit_cost"] == lanes["unit_cost"].round(2)).all()
    assert lanes["capacity"].isna().any() and lanes["capacity"].notna().any()
    penalty = frames.demand["shortage_penalty"]
    assert penalty.isna().any() and penalty.notna().any() and (penalty.dropna() > 0).all()


# --- feasibility (reference: networkx) --------------------------------------


@pytest.mark.parametrize("name", ["demo", "small_benchmark"])
def test_every_week_is_feasible_by_max_flow(name, request) -> None:
    frames: NetworkFrames = request.getfixturevalue(name)
    for period in periods_of(frames):
        total_demand = int(frames.demand.loc[frames.demand["period"] == period, "quantity"].sum())
        # reference: networkx.maximum_flow_value, super source over plants, super sink over customers
        assert max_deliverable(frames, period) == total_demand, period


@pytest.mark.parametrize("name", FRAMES)
def test_supply_exceeds_demand_with_margin(name, request) -> None:
    frames: NetworkFrames = request.getfixturevalue(name)
    supply = frames.supply.groupby("period")["quantity"].sum()
    demand = frames.demand.groupby("period")["quantity"].sum()
    assert (supply >= 1.1 * demand).all()


def test_demo_weeks_are_feasible_with_minimum_quantities(demo) -> None:
    assert demo.lanes["min_quantity"].notna().any()
    for period in periods_of(demo):
        # reference: networkx.network_simplex; raises NetworkXUnfeasible if demand cannot be met
        assert min_cost_full_delivery(demo, period) > 0


def test_demo_capacities_bind_in_some_weeks(demo) -> None:
    """More throughput or lane capacity lowers the optimal cost in some weeks, not in all."""
    periods = periods_of(demo)
    # reference: networkx.network_simplex for each optimal cost
    base = {period: min_cost_full_delivery(demo, period) for period in periods}
    wider_lanes = {p: min_cost_full_delivery(demo, p, extra_lane_capacity=20) for p in periods}
    assert all(wider_lanes[p] < base[p] for p in periods)
    throughput_sites = demo.sites.loc[demo.sites["throughput_capacity"].notna(), "site"]
    binding_weeks = {
        site: [
            p
            for p in periods
            if min_cost_full_delivery(demo, p, extra_throughput={site: 50}) < base[p]
        ]
        for site in throughput_sites
    }
    assert any(0 < len(weeks) < len(periods) for weeks in binding_weeks.values()), binding_weeks


def test_demo_outage_week_makes_plant_supply_binding(demo) -> None:
    """In P02's maintenance week more supply there would lower the cost (its price is positive)."""
    outage = demo.supply[demo.supply["site"] == "P02"].set_index("period")["quantity"].idxmin()
    raised = NetworkFrames(
        demo.sites,
        demo.supply.assign(quantity=demo.supply["quantity"] + 200 * (demo.supply["site"] == "P02")),
        demo.demand,
        demo.lanes,
    )
    # reference: networkx.network_simplex
    assert min_cost_full_delivery(raised, outage) < min_cost_full_delivery(demo, outage)


# --- demo scenario ------------------------------------------------------------


def test_demo_sizes(demo) -> None:
    counts = demo.sites["kind"].value_counts()
    assert (counts["plant"], counts["warehouse"], counts["customer"]) == (3, 6, 60)
    assert 4 <= demo.sites["region"].nunique() <= 5
    assert demo.sites[["x", "y"]].notna().all().all()
    warehouses = demo.sites[demo.sites["kind"] == "warehouse"]
    assert warehouses["throughput_capacity"].notna().any()
    assert warehouses["handling_cost"].notna().any()


def test_demo_lanes_have_modes_and_direct_deliveries(demo) -> None:
    kind = demo.sites.set_index("site")["kind"]
    lanes = demo.lanes.assign(
        origin_kind=kind[demo.lanes["origin"]].to_numpy(),
        destination_kind=kind[demo.lanes["destination"]].to_numpy(),
    )
    modes_per_pair = lanes.groupby(["period", "origin", "destination"])["mode"].nunique()
    assert modes_per_pair.max() == 2
    assert set(lanes["mode"]) == {"road", "rail"}
    assert ((lanes["origin_kind"] == "plant") & (lanes["destination_kind"] == "customer")).sum() > 0
    assert set(lanes.loc[lanes["origin_kind"] == "warehouse", "mode"]) == {"road"}


def test_demo_every_customer_has_an_unlimited_lane(demo) -> None:
    unlimited = demo.lanes[demo.lanes["capacity"].isna()]
    customers = demo.sites.loc[demo.sites["kind"] == "customer", "site"]
    for period, group in unlimited.groupby("period"):
        assert set(customers) <= set(group["destination"]), period


def test_demo_demand_and_rates_drift(demo) -> None:
    first, last = periods_of(demo)[0], periods_of(demo)[-1]
    region = demo.sites.set_index("site")["region"]
    by_region = demo.demand.assign(region=region[demo.demand["site"]].to_numpy())
    totals = by_region.groupby(["region", "period"])["quantity"].sum().unstack()
    growth = totals[last] / totals[first]
    assert growth.max() > 1.2 and growth.min() < 1.05
    # Week-over-week the demand of a customer changes.
    quantity = demo.demand.pivot(index="site", columns="period", values="quantity")
    assert (quantity.diff(axis=1).iloc[:, 1:] != 0).mean().mean() > 0.8
    road = demo.lanes[demo.lanes["mode"] == "road"].pivot(
        index=["origin", "destination"], columns="period", values="unit_cost"
    )
    assert (road[last] > road[first]).mean() > 0.9


def test_names_are_built_from_the_syllable_scheme(demo) -> None:
    benchmark_regions = benchmark_network(**TINY).sites["region"]
    names = pd.concat([demo.sites["name"], demo.sites["region"], benchmark_regions])
    off_scheme = names[~names.map(lambda name: INVENTED_NAME.fullmatch(name) is not None)]
    assert off_scheme.empty, off_scheme.tolist()
    assert demo.sites["name"].is_unique
    assert not INVENTED_NAME.fullmatch("Springfield")
    syllables = NAME_HEADS + NAME_LINKS + NAME_TAILS + NAME_SUFFIXES
    assert all(syllable.isalpha() for syllable in syllables)


# --- benchmark generator ------------------------------------------------------


def test_benchmark_shape(medium_benchmark) -> None:
    frames = medium_benchmark
    assert len(frames.lanes) == 2 * 50_000
    kind = frames.sites["kind"].value_counts()
    assert (kind["plant"], kind["warehouse"], kind["customer"]) == (20, 80, 5000)
    assert frames.sites["site"].iloc[[0, 20, 100]].tolist() == ["P0001", "W0001", "C000001"]
    lanes = frames.lanes[frames.lanes["period"] == periods_of(frames)[0]]
    origin_kind = frames.sites.set_index("site")["kind"][lanes["origin"]].to_numpy()
    destination_kind = frames.sites.set_index("site")["kind"][lanes["destination"]].to_numpy()
    warehouse_to_customer = (origin_kind == "warehouse") & (destination_kind == "customer")
    assert warehouse_to_customer.mean() > 0.8
    assert ((origin_kind == "plant") & (destination_kind == "customer")).any()
    # Each plant serves several warehouses; each customer is served by several warehouses.
    plant_lanes = lanes[(origin_kind == "plant") & (destination_kind == "warehouse")]
    assert plant_lanes.groupby("origin")["destination"].nunique().min() >= 2
    assert lanes[warehouse_to_customer].groupby("destination").size().min() >= 5
    assert 0.1 < lanes["capacity"].notna().mean() < 0.5
    assert set(lanes["mode"]) == {"road", "rail"}


def test_benchmark_every_customer_has_an_unlimited_route(medium_benchmark) -> None:
    """Customer <- warehouse (unlimited) <- plant (unlimited) exists for every customer."""
    frames = medium_benchmark
    kind = frames.sites.set_index("site")["kind"]
    for _, lanes in frames.lanes[frames.lanes["capacity"].isna()].groupby("period"):
        origin_kind = kind[lanes["origin"]].to_numpy()
        destination_kind = kind[lanes["destination"]].to_numpy()
        fed = lanes.loc[(origin_kind == "plant") & (destination_kind == "warehouse"), "destination"]
        served = lanes[lanes["origin"].isin(set(fed)) & (destination_kind == "customer")]
        assert served["destination"].nunique() == (kind == "customer").sum()


def test_benchmark_total_supply_is_about_1_2_times_demand(medium_benchmark) -> None:
    supply = medium_benchmark.supply.groupby("period")["quantity"].sum()
    demand = medium_benchmark.demand.groupby("period")["quantity"].sum()
    assert ((supply / demand - 1.2).abs() < 0.05).all()


def test_benchmark_refuses_too_few_or_too_many_lanes() -> None:
    with pytest.raises(ValueError, match="too small"):
        benchmark_network(n_plants=5, n_warehouses=10, n_customers=200, n_lanes=250)
    with pytest.raises(ValueError, match="too large"):
        benchmark_network(n_plants=5, n_warehouses=10, n_customers=200, n_lanes=5000)


# --- CSV output ---------------------------------------------------------------


def test_written_numbers_have_no_float_noise(tmp_path, medium_benchmark) -> None:
    folder = write_folder(medium_benchmark, tmp_path)
    lanes = pd.read_csv(folder / "lanes.csv", dtype=str, keep_default_na=False)
    assert len(lanes) == len(medium_benchmark.lanes)
    assert lanes["capacity"].str.fullmatch(r"\d*").all()
    assert lanes["min_quantity"].eq("").all()
    assert lanes["unit_cost"].str.fullmatch(r"-?\d+(\.\d{1,2})?").all()
    for file_name in ("supply.csv", "demand.csv"):
        assert pd.read_csv(folder / file_name, dtype=str)["quantity"].str.fullmatch(r"\d+").all()
    sites = pd.read_csv(folder / "sites.csv", dtype=str, keep_default_na=False)
    assert sites["throughput_capacity"].str.fullmatch(r"\d*").all()
    assert sites["x"].str.fullmatch(r"\d+(\.\d)?").all()


def test_written_folder_reads_back_to_the_frames(tmp_path, demo) -> None:
    folder = write_folder(demo, tmp_path)
    for name, file_name in zip(("sites", "supply", "demand", "lanes"), CSV_FILES):
        read = pd.read_csv(folder / file_name)
        frame = getattr(demo, name)
        assert list(read.columns) == list(frame.columns)
        for column in frame.columns:
            if pd.api.types.is_numeric_dtype(frame[column]):
                np.testing.assert_array_equal(
                    read[column].to_numpy(float), frame[column].to_numpy(float), column
                )
            else:
                assert read[column].fillna("").astype(str).tolist() == frame[column].tolist(), column


def test_write_folder_refuses_fractional_quantities(tmp_path, demo) -> None:
    half_units = demo.supply.assign(quantity=demo.supply["quantity"] + 0.5)
    broken = NetworkFrames(demo.sites, half_units, demo.demand, demo.lanes)
    with pytest.raises(ValueError, match="supply.csv quantity"):
        write_folder(broken, tmp_path)
