"""The invented demo scenario: 3 plants, 6 warehouses and 60 customer towns over consecutive weeks.

The country is fictional: five regions, sites placed on a plane with
coordinates in km. Demand drifts by region, road rates follow a fuel surcharge
trend, and some lanes, one warehouse and one plant bind in some weeks, so the
site prices move from week to week. Deterministic for a given seed.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from planner.synthetic.frames import (
    LANE_COLUMNS,
    NAME_HEADS,
    NAME_LINKS,
    NAME_TAILS,
    SITE_COLUMNS,
    NetworkFrames,
    consecutive_weeks,
)

__all__ = ["demo_network"]

_DEMO_REGIONS = {
    "Quorathal": (130.0, 380.0, 0.045, 14),
    "Liskmir": (420.0, 420.0, 0.015, 12),
    "Gorvenn": (700.0, 330.0, 0.0, 12),
    "Vaskodun": (250.0, 110.0, -0.012, 12),
    "Elvara": (600.0, 90.0, 0.025, 10),
}
# code, name, region, x, y, share of the peak weekly demand it can ship
_DEMO_PLANTS = (
    ("P01", "Daskmir Works", "Quorathal", 95.0, 415.0, 0.26),
    ("P02", "Fyrovesh Works", "Gorvenn", 735.0, 300.0, 0.34),
    ("P03", "Tiborn Works", "Vaskodun", 265.0, 85.0, 0.40),
)
# Plant P02 is down for maintenance in this week (index into the horizon) and
# ships only this share of its usual supply.
_DEMO_OUTAGE = ("P02", 5, 0.55)
# code, name, region, x, y, throughput capacity, handling cost, holding cost, storage capacity
_DEMO_WAREHOUSES = (
    ("W01", "Zorenn Depot", "Quorathal", 170.0, 345.0, np.nan, 0.45, 0.08, 600.0),
    ("W02", "Haskethal Depot", "Liskmir", 380.0, 400.0, 950.0, 0.60, np.nan, np.nan),
    ("W03", "Wemast Depot", "Liskmir", 495.0, 340.0, np.nan, np.nan, np.nan, np.nan),
    ("W04", "Selorn Depot", "Gorvenn", 665.0, 375.0, np.nan, 0.35, 0.06, 800.0),
    ("W05", "Kwedun Depot", "Vaskodun", 305.0, 165.0, 1300.0, 0.50, np.nan, np.nan),
    ("W06", "Orvusk Depot", "Elvara", 585.0, 130.0, np.nan, 0.40, 0.07, 500.0),
)
# This warehouse's throughput capacity is this multiple of the first week's
# demand of the customers nearest to it; its region grows fastest, so it binds
# in the later weeks.
_DEMO_TIGHT_WAREHOUSE = ("W01", 1.12)
# Long plant -> warehouse pairs with a rail service: origin, destination,
# weekly capacity, contracted minimum quantity (NaN: none).
_DEMO_RAIL = (
    ("P01", "W04", 450.0, np.nan),
    ("P01", "W06", 350.0, np.nan),
    ("P02", "W01", 500.0, 150.0),
    ("P02", "W05", 300.0, np.nan),
    ("P03", "W02", 400.0, np.nan),
)
# Weekly rate increase of each mode (fuel surcharge trend).
_DEMO_SURCHARGE = {"road": 0.015, "rail": 0.005}


def demo_network(seed: int = 7, weeks: int = 8, first_week: str = "2026-W45") -> NetworkFrames:
    """The invented demo scenario: 3 plants, 6 warehouses, 60 customer towns.

    The country is fictional: five regions (Quorathal, Liskmir, Gorvenn,
    Vaskodun, Elvara), sites placed on a plane with coordinates in km.
    Customer demand follows a trend per region (Quorathal grows fastest)
    plus noise; road rates rise with a fuel surcharge each week, rail rates
    more slowly. Plant P02 ships little in its maintenance week (the sixth).
    Rail lanes, direct plant -> customer lanes and some road lanes have
    capacities, one rail lane a contracted minimum quantity. Warehouses
    W01, W02 and W05 have a throughput capacity; W01's is sized so that the
    growth of Quorathal makes it bind in the later weeks. Total supply
    exceeds total demand by more than 10 % every week and every customer
    has an uncapacitated road lane, so every week is feasible without
    shortages.

    Parameters
    ----------
    seed : int
        Seed of the random numbers (demand, customer towns, noise).
    weeks : int
        Number of consecutive ISO weeks.
    first_week : str
        Code of the first week, ``YYYY-Www``.

    Returns
    -------
    NetworkFrames
        Sites, weekly supply and demand, and weekly lane rates.

    Raises
    ------
    ValueError
        If ``first_week`` is not a valid ISO week code or ``weeks`` < 1.

    Examples
    --------
    >>> frames = demo_network()
    >>> frames.sites["kind"].value_counts().to_dict()
    {'customer': 60, 'warehouse': 6, 'plant': 3}
    >>> frames.supply["period"].unique()[[0, -1]].tolist()
    ['2026-W45', '2026-W52']
    """
    # One stream per concern, so that changing how one part is drawn leaves
    # the others as they were.
    name_rng, place_rng, demand_rng, supply_rng, lane_rng = np.random.default_rng(seed).spawn(5)
    periods = consecutive_weeks(first_week, weeks)
    customers = _demo_customers(name_rng, place_rng)
    weekly_demand = _demo_weekly_demand(demand_rng, customers, weeks)
    demand = pd.DataFrame(
        {
            "period": np.repeat(periods, len(customers)),
            "site": np.tile(customers["site"].to_numpy(), weeks),
            "quantity": weekly_demand.T.ravel(),
            "shortage_penalty": np.tile(customers["shortage_penalty"].to_numpy(), weeks),
        }
    )
    sites = _demo_sites(customers, weekly_demand)
    supply = _demo_supply(supply_rng, periods, weekly_demand)
    lanes = _demo_lanes(lane_rng, sites, customers, periods)
    return NetworkFrames(sites=sites, supply=supply, demand=demand, lanes=lanes)


def _demo_weekly_demand(rng: np.random.Generator, customers: pd.DataFrame, weeks: int) -> np.ndarray:
    """(customer, week) demand: base demand, the region's trend, 6 % noise."""
    trend = customers["region"].map({region: spec[2] for region, spec in _DEMO_REGIONS.items()})
    growth = (1.0 + trend.to_numpy()[:, None]) ** np.arange(weeks)[None, :]
    noise = 1.0 + rng.normal(0.0, 0.06, size=growth.shape)
    base_demand = customers["base_demand"].to_numpy()[:, None]
    return np.maximum(0, np.rint(base_demand * growth * noise)).astype(np.int64)


def _demo_sites(customers: pd.DataFrame, weekly_demand: np.ndarray) -> pd.DataFrame:
    """Plants, warehouses (the tight one's throughput sized on its first week) and customers."""
    warehouses = pd.DataFrame(
        _DEMO_WAREHOUSES,
        columns=["site", "name", "region", "x", "y", "throughput_capacity",
                 "handling_cost", "holding_cost", "storage_capacity"],
    ).assign(kind="warehouse")
    tight_code, tight_factor = _DEMO_TIGHT_WAREHOUSE
    to_warehouse = np.hypot(
        customers["x"].to_numpy()[:, None] - warehouses["x"].to_numpy()[None, :],
        customers["y"].to_numpy()[:, None] - warehouses["y"].to_numpy()[None, :],
    )
    served_first = warehouses["site"].to_numpy()[np.argmin(to_warehouse, axis=1)] == tight_code
    tight_throughput = 10.0 * np.ceil(tight_factor * weekly_demand[served_first, 0].sum() / 10.0)
    warehouses.loc[warehouses["site"] == tight_code, "throughput_capacity"] = tight_throughput
    return pd.concat(
        [
            pd.DataFrame(
                {"site": code, "kind": "plant", "name": name, "region": region, "x": x, "y": y}
                for code, name, region, x, y, _ in _DEMO_PLANTS
            ),
            warehouses,
            customers[["site", "name", "region", "x", "y"]].assign(kind="customer"),
        ],
        ignore_index=True,
    ).reindex(columns=list(SITE_COLUMNS))


def _demo_supply(rng: np.random.Generator, periods: list[str], weekly_demand: np.ndarray) -> pd.DataFrame:
    """Plants ship a fixed share of the peak week's demand; one plant has a maintenance week.

    Every week keeps the margin: 1.35 * (1 - 0.03 noise) * (1 - 0.34 * 0.45 outage) > 1.13.
    """
    weeks = len(periods)
    peak_demand = weekly_demand.sum(axis=0).max()
    plant_codes = [plant[0] for plant in _DEMO_PLANTS]
    shares = np.array([plant[5] for plant in _DEMO_PLANTS])
    supply_noise = rng.uniform(0.97, 1.03, size=(len(shares), weeks))
    weekly_supply = shares[:, None] * 1.35 * peak_demand * supply_noise
    outage_plant, outage_week, outage_share = _DEMO_OUTAGE
    if outage_week < weeks:
        weekly_supply[plant_codes.index(outage_plant), outage_week] *= outage_share
    return pd.DataFrame(
        {
            "period": np.repeat(periods, len(plant_codes)),
            "site": np.tile(plant_codes, weeks),
            "quantity": np.floor(weekly_supply).astype(np.int64).T.ravel(),
        }
    )


def _demo_customers(name_rng: np.random.Generator, place_rng: np.random.Generator) -> pd.DataFrame:
    """Customer towns with position, base weekly demand and shortage penalty."""
    taken = set(_DEMO_REGIONS)
    taken |= {plant[1].split()[0] for plant in _DEMO_PLANTS}
    taken |= {warehouse[1].split()[0] for warehouse in _DEMO_WAREHOUSES}
    rows = []
    for region, (centre_x, centre_y, _, count) in _DEMO_REGIONS.items():
        for _ in range(count):
            name = _invented_town(name_rng)
            while name in taken:
                name = _invented_town(name_rng)
            taken.add(name)
            rows.append(
                {
                    "site": f"C{len(rows) + 1:02d}",
                    "name": name,
                    "region": region,
                    "x": round(float(np.clip(centre_x + place_rng.normal(0.0, 55.0), 0, 800)), 1),
                    "y": round(float(np.clip(centre_y + place_rng.normal(0.0, 45.0), 0, 500)), 1),
                    "base_demand": int(place_rng.integers(30, 121)),
                    # Penalties lie above any delivered cost, so a shortage is a last resort.
                    "shortage_penalty": (
                        round(float(place_rng.uniform(45.0, 90.0)), 2)
                        if place_rng.random() < 0.4
                        else np.nan
                    ),
                }
            )
    return pd.DataFrame(rows)


def _invented_town(rng: np.random.Generator) -> str:
    head = NAME_HEADS[rng.integers(len(NAME_HEADS))]
    tail = NAME_TAILS[rng.integers(len(NAME_TAILS))]
    # A joining vowel only before a consonant, so no vowels pile up.
    if tail[0] in "aeiouy" or rng.random() < 0.5:
        return head + tail
    return head + NAME_LINKS[rng.integers(len(NAME_LINKS))] + tail


class _Distances:
    """Plane distances between sites by code."""

    def __init__(self, sites: pd.DataFrame) -> None:
        self.position = sites.set_index("site")[["x", "y"]]

    def __call__(self, origins: list[str], destinations: list[str]) -> np.ndarray:
        delta = self.position.loc[origins].to_numpy() - self.position.loc[destinations].to_numpy()
        return np.hypot(delta[:, 0], delta[:, 1])


def _demo_lanes(
    rng: np.random.Generator, sites: pd.DataFrame, customers: pd.DataFrame, periods: list[str]
) -> pd.DataFrame:
    """Lane rates of every week: base rates from distance, drifting by mode."""
    distance = _Distances(sites)
    base_demand = customers.set_index("site")["base_demand"]
    rail = pd.DataFrame(_DEMO_RAIL, columns=["origin", "destination", "capacity", "min_quantity"])
    rail_distance = distance(rail["origin"].tolist(), rail["destination"].tolist())
    base = pd.concat(
        [
            _plant_warehouse_roads(rng, distance),
            rail.assign(mode="rail", base_cost=2.20 + 0.0045 * rail_distance),
            _warehouse_customer_roads(rng, distance, base_demand),
            _direct_roads(distance, base_demand),
        ],
        ignore_index=True,
    )
    weeks = len(periods)
    surcharge = base["mode"].map(_DEMO_SURCHARGE).to_numpy()[:, None]
    rate_noise = rng.uniform(0.99, 1.01, size=(len(base), weeks))
    surcharge_factor = 1.0 + surcharge * np.arange(weeks)
    unit_cost = base["base_cost"].to_numpy()[:, None] * surcharge_factor * rate_noise
    weekly = base.loc[np.tile(base.index, weeks)].reset_index(drop=True)
    weekly["period"] = np.repeat(periods, len(base))
    weekly["unit_cost"] = np.round(unit_cost.T.ravel(), 2)
    return weekly.reindex(columns=list(LANE_COLUMNS))


def _plant_warehouse_roads(rng: np.random.Generator, distance: _Distances) -> pd.DataFrame:
    """Plant -> warehouse by road, every pair.

    The lane from a warehouse's nearest plant is uncapacitated; other lanes
    under 420 km are capped, so that a second plant nearby is no unlimited
    cheap way in.
    """
    plant_codes = [plant[0] for plant in _DEMO_PLANTS]
    warehouse_codes = [warehouse[0] for warehouse in _DEMO_WAREHOUSES]
    pw_origin = [p for p in plant_codes for _ in warehouse_codes]
    pw_destination = [w for _ in plant_codes for w in warehouse_codes]
    pw_distance = distance(pw_origin, pw_destination)
    pw_capacity = np.full(len(pw_origin), np.nan)
    nearest_plant = {
        w: plant_codes[int(np.argmin(distance(plant_codes, [w] * len(plant_codes))))]
        for w in warehouse_codes
    }
    for index, (origin, destination) in enumerate(zip(pw_origin, pw_destination)):
        if nearest_plant[destination] != origin and pw_distance[index] < 420.0:
            pw_capacity[index] = 10.0 * np.floor(rng.uniform(35.0, 70.0))
    return pd.DataFrame(
        {
            "origin": pw_origin,
            "destination": pw_destination,
            "mode": "road",
            "base_cost": 1.10 + 0.011 * pw_distance,
            "capacity": pw_capacity,
            "min_quantity": np.nan,
        }
    )


def _warehouse_customer_roads(rng: np.random.Generator, distance: _Distances, base_demand: pd.Series) -> pd.DataFrame:
    """Warehouse -> customer by road from the two nearest warehouses, the third too for every third customer.

    The lane from the nearest warehouse is capped below the customer's demand
    for one customer in five, so its second warehouse has to help out.
    """
    warehouse_codes = [warehouse[0] for warehouse in _DEMO_WAREHOUSES]
    rows = []
    for number, customer in enumerate(base_demand.index):
        to_customer = distance(warehouse_codes, [customer] * len(warehouse_codes))
        ranked = np.argsort(to_customer, kind="stable")[: 3 if number % 3 == 0 else 2]
        for rank, w in enumerate(ranked):
            capped = rank == 0 and rng.random() < 0.2
            rows.append(
                {
                    "origin": warehouse_codes[w],
                    "destination": customer,
                    "mode": "road",
                    "base_cost": 0.40 + 0.018 * to_customer[w],
                    "capacity": np.floor(0.6 * base_demand[customer]) if capped else np.nan,
                    "min_quantity": np.nan,
                }
            )
    return pd.DataFrame(rows)


def _direct_roads(distance: _Distances, base_demand: pd.Series) -> pd.DataFrame:
    """Plant -> customer road lanes to each plant's two nearest customers, capped at about half their demand."""
    customer_codes = base_demand.index.tolist()
    rows = []
    for plant in (plant[0] for plant in _DEMO_PLANTS):
        to_customers = distance([plant] * len(customer_codes), customer_codes)
        for c in np.argsort(to_customers, kind="stable")[:2]:
            customer = customer_codes[c]
            rows.append(
                {
                    "origin": plant,
                    "destination": customer,
                    "mode": "road",
                    "base_cost": 0.90 + 0.02 * to_customers[c],
                    "capacity": np.floor(0.5 * base_demand[customer]),
                    "min_quantity": np.nan,
                }
            )
    return pd.DataFrame(rows)
