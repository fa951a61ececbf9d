"""A large random network for benchmarks, built with numpy array operations only.

Feasible by construction, deterministic for a given seed
(``numpy.random.default_rng``); see :func:`benchmark_network`.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from planner.synthetic.frames import (
    NAME_HEADS,
    NAME_TAILS,
    NetworkFrames,
    consecutive_weeks,
)

__all__ = ["benchmark_network"]


def benchmark_network(
    n_plants: int = 200,
    n_warehouses: int = 800,
    n_customers: int = 50_000,
    n_lanes: int = 500_000,
    weeks: int = 1,
    seed: int = 1,
    first_week: str = "2026-W49",
) -> NetworkFrames:
    """A large random network, feasible by construction, for benchmarks.

    Sites lie on a 2000 km square. Each customer belongs to a home warehouse
    near it and is served by that warehouse and its nearest neighbours (the
    bulk of the lanes); each warehouse is served by its nearest plants and
    each plant serves its nearest warehouses, by road and on some pairs also
    by rail; some customers also have a direct lane from a plant. About a
    third of the other lanes have a capacity. Feasibility with margin: every
    customer's lane from its home warehouse is uncapacitated, so is the road
    lane into that warehouse from its nearest plant, a warehouse's
    throughput capacity (where given) is 1.5 times the demand of its home
    customers, and each plant can ship 1.1 times the demand that reaches it
    that way; spread extra supply brings the total to about 1.2 times the
    total demand. Built with array operations only (well under 2 s at the
    default size).

    Parameters
    ----------
    n_plants, n_warehouses, n_customers : int
        Number of sites of each kind (codes ``P0001``, ``W0001``,
        ``C000001``).
    n_lanes : int
        Number of distinct lanes; each week has a rate for every lane.
    weeks : int
        Number of consecutive ISO weeks; demand and rates drift per week.
    seed : int
        Seed of the random numbers.
    first_week : str
        Code of the first week, ``YYYY-Www``.

    Returns
    -------
    NetworkFrames
        Sites (without names), weekly supply and demand, weekly lane rates.

    Raises
    ------
    ValueError
        If a count is below 1, if ``n_lanes`` leaves fewer than one lane per
        customer after the plant lanes, or if it asks for more lanes per
        customer than there are warehouses.

    Examples
    --------
    >>> frames = benchmark_network(n_plants=3, n_warehouses=5, n_customers=40, n_lanes=150)
    >>> len(frames.lanes), frames.lanes["origin"].iloc[0], frames.demand["site"].iloc[0]
    (150, 'P0001', 'C000001')
    >>> int(frames.supply["quantity"].sum()) > 1.15 * int(frames.demand["quantity"].sum())
    True
    """
    counts = {"n_plants": n_plants, "n_warehouses": n_warehouses, "n_customers": n_customers}
    for label, count in counts.items():
        if count < 1:
            raise ValueError(f"{label} must be at least 1, got {count}")
    # The steps draw from one stream in a fixed order, so a seed gives one network.
    rng = np.random.default_rng(seed)
    periods = consecutive_weeks(first_week, weeks)
    places = _Places(rng, n_plants, n_warehouses, n_customers)
    lanes = _choose_lanes(rng, places, n_lanes)
    volumes = _draw_volumes(rng, places, weeks)
    capacity = _draw_capacities(rng, lanes, volumes)
    sites = _site_frame(rng, places, volumes)
    demand = _demand_frame(rng, periods, places, volumes)
    return NetworkFrames(
        sites=sites,
        supply=_weekly_frame(periods, places.plant_codes, "quantity", volumes.supply),
        demand=demand,
        lanes=_lane_frame(periods, places, lanes, capacity),
    )


_SIDE = 2000.0  # km, the side of the square the sites lie on


class _Places:
    """Where the sites are, and each customer's home warehouse."""

    def __init__(self, rng: np.random.Generator, n_plants: int, n_warehouses: int, n_customers: int) -> None:
        self.plant_xy = rng.uniform(0.0, _SIDE, size=(n_plants, 2))
        self.warehouse_xy = rng.uniform(0.0, _SIDE, size=(n_warehouses, 2))
        self.home = rng.integers(0, n_warehouses, size=n_customers)
        customer_xy = self.warehouse_xy[self.home] + rng.normal(0.0, 40.0, size=(n_customers, 2))
        self.customer_xy = np.clip(customer_xy, 0.0, _SIDE)
        self.warehouse_to_plant = _distances(self.warehouse_xy, self.plant_xy)
        self.nearest_plant = np.argmin(self.warehouse_to_plant, axis=1)
        self.regions = _GridRegions(_SIDE)
        self.plant_codes = _codes("P", n_plants, 4)
        self.warehouse_codes = _codes("W", n_warehouses, 4)
        self.customer_codes = _codes("C", n_customers, 6)

    @property
    def counts(self) -> tuple[int, int, int]:
        return len(self.plant_xy), len(self.warehouse_xy), len(self.customer_xy)


class _Lanes:
    """The lane groups, in order: plant -> warehouse road, rail, plant -> customer, warehouse -> customer."""

    pw_plant: np.ndarray
    pw_warehouse: np.ndarray
    pw_distance: np.ndarray
    pw_primary: np.ndarray
    rail_plant: np.ndarray
    rail_warehouse: np.ndarray
    rail_distance: np.ndarray
    direct_customer: np.ndarray
    direct_plant: np.ndarray
    direct_distance: np.ndarray
    wc_customer: np.ndarray
    wc_warehouse: np.ndarray
    wc_rank: np.ndarray
    wc_distance: np.ndarray


def _choose_lanes(rng: np.random.Generator, places: _Places, n_lanes: int) -> _Lanes:
    """Plant -> warehouse pairs and rail, direct plant -> customer lanes, then warehouse -> customer lanes."""
    n_plants, n_warehouses, n_customers = places.counts
    lanes = _Lanes()
    # Each warehouse's nearest plants and each plant's nearest warehouses, without repeats.
    plants_per_warehouse = _nearest(places.warehouse_to_plant, min(4, n_plants))
    warehouses_per_plant = _nearest(places.warehouse_to_plant.T, min(8, n_warehouses))
    warehouse_rows = np.repeat(np.arange(n_warehouses), plants_per_warehouse.shape[1])
    plant_rows = np.repeat(np.arange(n_plants), warehouses_per_plant.shape[1])
    pair_key = np.unique(
        np.concatenate(
            [
                plants_per_warehouse.ravel() * n_warehouses + warehouse_rows,
                plant_rows * n_warehouses + warehouses_per_plant.ravel(),
            ]
        )
    )
    lanes.pw_plant, lanes.pw_warehouse = np.divmod(pair_key, n_warehouses)
    lanes.pw_distance = places.warehouse_to_plant[lanes.pw_warehouse, lanes.pw_plant]
    lanes.pw_primary = places.nearest_plant[lanes.pw_warehouse] == lanes.pw_plant
    rail = (lanes.pw_distance > np.median(lanes.pw_distance)) & (rng.random(len(pair_key)) < 0.5)
    lanes.rail_plant, lanes.rail_warehouse = lanes.pw_plant[rail], lanes.pw_warehouse[rail]
    lanes.rail_distance = lanes.pw_distance[rail]

    n_direct = min(n_lanes // 50, n_customers)
    lanes.direct_customer = np.sort(rng.choice(n_customers, size=n_direct, replace=False))
    lanes.direct_plant = places.nearest_plant[places.home[lanes.direct_customer]]
    lanes.direct_distance = np.hypot(
        *(places.customer_xy[lanes.direct_customer] - places.plant_xy[lanes.direct_plant]).T
    )
    _customer_lanes(rng, places, lanes, n_lanes, len(pair_key) + len(lanes.rail_plant) + n_direct)
    return lanes


def _customer_lanes(
    rng: np.random.Generator, places: _Places, lanes: _Lanes, n_lanes: int, n_plant_lanes: int
) -> None:
    """Each customer's lanes from its home warehouse and the warehouses nearest to it."""
    _, n_warehouses, n_customers = places.counts
    n_customer_lanes = n_lanes - n_plant_lanes
    if n_customer_lanes < n_customers:
        raise ValueError(
            f"n_lanes={n_lanes} is too small: {n_plant_lanes} lanes leave plants, and each of "
            f"the {n_customers} customers needs at least one lane from a warehouse"
        )
    per_customer, extra = divmod(n_customer_lanes, n_customers)
    most_per_customer = per_customer + (extra > 0)
    if most_per_customer > n_warehouses:
        raise ValueError(
            f"n_lanes={n_lanes} is too large: it asks for {most_per_customer} warehouse lanes "
            f"per customer but there are only {n_warehouses} warehouses"
        )
    lanes_of_customer = per_customer + (rng.permutation(n_customers) < extra)
    warehouse_to_warehouse = _distances(places.warehouse_xy, places.warehouse_xy)
    np.fill_diagonal(warehouse_to_warehouse, -1.0)  # each warehouse ranks itself first
    neighbours = _nearest(warehouse_to_warehouse, most_per_customer, ordered=True)
    lanes.wc_customer = np.repeat(np.arange(n_customers), lanes_of_customer)
    first_lane = np.cumsum(lanes_of_customer) - lanes_of_customer
    lanes.wc_rank = np.arange(n_customer_lanes) - np.repeat(first_lane, lanes_of_customer)
    lanes.wc_warehouse = neighbours[places.home[lanes.wc_customer], lanes.wc_rank]
    lanes.wc_distance = np.hypot(*(places.customer_xy[lanes.wc_customer] - places.warehouse_xy[lanes.wc_warehouse]).T)


class _Volumes:
    """Weekly demand and supply, and the loads they put on warehouses and plants."""

    demand: np.ndarray  #: (customer, week)
    supply: np.ndarray  #: (plant, week)
    home_load: np.ndarray  #: (warehouse, week) demand of each warehouse's home customers
    customer_region: np.ndarray


def _draw_volumes(rng: np.random.Generator, places: _Places, weeks: int) -> _Volumes:
    """Lognormal demand with a trend per region and noise per week; supply 1.1 x the load plus a spread 10 %."""
    n_plants, n_warehouses, n_customers = places.counts
    volumes = _Volumes()
    volumes.customer_region = places.regions(places.customer_xy)
    trend = rng.uniform(-0.01, 0.03, size=places.regions.count)[volumes.customer_region]
    base_demand = np.maximum(1.0, rng.lognormal(np.log(20.0), 0.6, size=n_customers))
    growth = (1.0 + trend[:, None]) ** np.arange(weeks)[None, :]
    noise = rng.uniform(0.9, 1.1, size=(n_customers, weeks))
    volumes.demand = np.rint(base_demand[:, None] * growth * noise).astype(np.int64)
    volumes.home_load = np.stack(
        [np.bincount(places.home, weights=volumes.demand[:, t], minlength=n_warehouses) for t in range(weeks)],
        axis=1,
    )
    plant_load = np.stack(
        [np.bincount(places.nearest_plant, weights=volumes.home_load[:, t], minlength=n_plants) for t in range(weeks)],
        axis=1,
    )
    spread_share = rng.random(n_plants)
    spread_share /= spread_share.sum()
    spread_supply = np.floor(0.1 * volumes.demand.sum(axis=0)[None, :] * spread_share[:, None])
    volumes.supply = (np.ceil(1.1 * plant_load) + spread_supply).astype(np.int64)
    return volumes


def _draw_capacities(rng: np.random.Generator, lanes: _Lanes, volumes: _Volumes) -> np.ndarray:
    """Capacities (NaN: none) on about a third of the lanes the feasible route does not use, in lane order."""
    n_customer_lanes = len(lanes.wc_customer)
    peak_demand = volumes.demand.max(axis=1)
    mean_home_load = volumes.home_load.max(axis=1).mean()
    wc_share = rng.uniform(0.2, 0.8, n_customer_lanes)
    wc_capacity = np.where(
        (lanes.wc_rank > 0) & (rng.random(n_customer_lanes) < 0.3),
        np.maximum(1.0, np.floor(peak_demand[lanes.wc_customer] * wc_share)),
        np.nan,
    )
    n_pairs = len(lanes.pw_plant)
    pw_capacity = np.where(
        ~lanes.pw_primary & (rng.random(n_pairs) < 0.3),
        np.maximum(1.0, np.floor(mean_home_load * rng.uniform(0.2, 0.6, n_pairs))),
        np.nan,
    )
    rail_capacity = np.maximum(1.0, np.floor(mean_home_load * rng.uniform(0.3, 0.8, len(lanes.rail_plant))))
    direct_share = rng.uniform(0.3, 0.7, len(lanes.direct_customer))
    direct_capacity = np.maximum(1.0, np.floor(peak_demand[lanes.direct_customer] * direct_share))
    return np.concatenate([pw_capacity, rail_capacity, direct_capacity, wc_capacity])


def _lane_frame(periods: list[str], places: _Places, lanes: _Lanes, capacity: np.ndarray) -> pd.DataFrame:
    """One rate per lane and week; rates drift up 1 % a week."""
    origin = np.concatenate(
        [
            places.plant_codes[lanes.pw_plant],
            places.plant_codes[lanes.rail_plant],
            places.plant_codes[lanes.direct_plant],
            places.warehouse_codes[lanes.wc_warehouse],
        ]
    )
    destination = np.concatenate(
        [
            places.warehouse_codes[lanes.pw_warehouse],
            places.warehouse_codes[lanes.rail_warehouse],
            places.customer_codes[lanes.direct_customer],
            places.customer_codes[lanes.wc_customer],
        ]
    )
    group_sizes = [len(lanes.pw_plant), len(lanes.rail_plant), len(lanes.direct_plant), len(lanes.wc_customer)]
    mode = np.repeat(np.array(["road", "rail", "road", "road"]), group_sizes)
    base_cost = np.concatenate(
        [
            0.80 + 0.008 * lanes.pw_distance,
            1.50 + 0.004 * lanes.rail_distance,
            0.60 + 0.015 * lanes.direct_distance,
            0.30 + 0.012 * lanes.wc_distance,
        ]
    )
    weeks, n_lanes = len(periods), len(origin)
    rate_drift = 1.0 + 0.01 * np.arange(weeks)
    return pd.DataFrame(
        {
            "period": np.repeat(periods, n_lanes),
            "origin": np.tile(origin, weeks),
            "destination": np.tile(destination, weeks),
            "mode": np.tile(mode, weeks),
            "unit_cost": np.round((rate_drift[:, None] * base_cost[None, :]).ravel(), 2),
            "capacity": np.tile(capacity, weeks),
            "min_quantity": np.nan,
        }
    )


def _site_frame(rng: np.random.Generator, places: _Places, volumes: _Volumes) -> pd.DataFrame:
    """Sites without names; a quarter of the warehouses with throughput capacity, half with handling cost."""
    n_plants, n_warehouses, n_customers = places.counts
    throughput = np.where(
        rng.random(n_warehouses) < 0.25, np.ceil(1.5 * volumes.home_load.max(axis=1)) + 10.0, np.nan
    )
    handling = np.where(
        rng.random(n_warehouses) < 0.5, np.round(rng.uniform(0.2, 1.5, n_warehouses), 2), np.nan
    )
    no_plant_value, no_customer_value = np.full(n_plants, np.nan), np.full(n_customers, np.nan)
    regions = places.regions
    region = np.concatenate(
        [regions(places.plant_xy), regions(places.warehouse_xy), volumes.customer_region]
    )
    xy = np.concatenate([places.plant_xy, places.warehouse_xy, places.customer_xy])
    return pd.DataFrame(
        {
            "site": np.concatenate([places.plant_codes, places.warehouse_codes, places.customer_codes]),
            "kind": np.repeat(
                np.array(["plant", "warehouse", "customer"]), [n_plants, n_warehouses, n_customers]
            ),
            "name": "",
            "region": np.array(regions.names)[region],
            "throughput_capacity": np.concatenate([no_plant_value, throughput, no_customer_value]),
            "handling_cost": np.concatenate([no_plant_value, handling, no_customer_value]),
            "holding_cost": np.nan,
            "storage_capacity": np.nan,
            "x": np.round(xy[:, 0], 1),
            "y": np.round(xy[:, 1], 1),
        }
    )


def _weekly_frame(periods: list[str], codes: np.ndarray, column: str, values: np.ndarray) -> pd.DataFrame:
    """``period, site, column`` rows from a (site, week) array."""
    weeks = len(periods)
    return pd.DataFrame(
        {"period": np.repeat(periods, len(codes)), "site": np.tile(codes, weeks), column: values.T.ravel()}
    )


def _demand_frame(rng: np.random.Generator, periods: list[str], places: _Places, volumes: _Volumes) -> pd.DataFrame:
    """Weekly demand; three customers in ten have a shortage penalty of 50 to 150."""
    n_customers = len(places.customer_codes)
    frame = _weekly_frame(periods, places.customer_codes, "quantity", volumes.demand)
    shortage_penalty = np.where(
        rng.random(n_customers) < 0.3, np.round(rng.uniform(50.0, 150.0, n_customers), 2), np.nan
    )
    return frame.assign(shortage_penalty=np.tile(shortage_penalty, len(periods)))


def _distances(a: np.ndarray, b: np.ndarray) -> np.ndarray:
    """Matrix of plane distances between the rows of ``a`` and ``b``."""
    return np.hypot(a[:, None, 0] - b[None, :, 0], a[:, None, 1] - b[None, :, 1])


def _nearest(distance: np.ndarray, k: int, ordered: bool = False) -> np.ndarray:
    """Column indices of the ``k`` smallest entries of each row."""
    if k < distance.shape[1]:
        picked = np.argpartition(distance, k - 1, axis=1)[:, :k]
    else:
        picked = np.broadcast_to(np.arange(distance.shape[1]), distance.shape).copy()
    if ordered:
        order = np.argsort(np.take_along_axis(distance, picked, axis=1), axis=1, kind="stable")
        picked = np.take_along_axis(picked, order, axis=1)
    return picked


def _codes(prefix: str, count: int, width: int) -> np.ndarray:
    """Site codes ``prefix`` + zero-padded number, ``P0001`` ..."""
    width = max(width, len(str(count)))
    return np.char.add(prefix, np.char.zfill(np.arange(1, count + 1).astype(str), width))


class _GridRegions:
    """A 4 x 4 grid of invented regions over the square of the benchmark."""

    size = 4

    def __init__(self, side: float) -> None:
        self.side = side
        self.count = self.size * self.size
        self.names = [
            NAME_HEADS[i % len(NAME_HEADS)] + NAME_TAILS[(5 * i + 3) % len(NAME_TAILS)]
            for i in range(self.count)
        ]

    def __call__(self, xy: np.ndarray) -> np.ndarray:
        cell = np.clip((xy / self.side * self.size).astype(np.int64), 0, self.size - 1)
        return cell[:, 0] * self.size + cell[:, 1]
