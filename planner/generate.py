"""Synthetic supply networks: the demo scenario and benchmark instances.

Two generators build load folders in the CSV contract of the planner
(``sites.csv``, ``supply.csv``, ``demand.csv``, ``lanes.csv``):

* :func:`demo_network` is a small invented scenario (3 plants, 6 warehouses,
  60 customer towns in 5 regions of a fictional country) over consecutive ISO
  weeks. Demand drifts by region, road rates follow a fuel surcharge trend,
  and some lanes, one warehouse and one plant bind in some weeks, so the site
  prices move from week to week.
* :func:`benchmark_network` is a large random network built with numpy array
  operations only, feasible by construction, for timing the load and solve
  path.

Both are deterministic for a given seed (``numpy.random.default_rng``).
:func:`write_folder` writes either one as a load folder.

Every site name is composed from the syllables of :data:`NAME_HEADS`,
:data:`NAME_LINKS` and :data:`NAME_TAILS` (optionally followed by one of
:data:`NAME_SUFFIXES`), so :data:`INVENTED_NAME` matches each of them.
"""

from __future__ import annotations

import datetime
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from planner.ingest import FILE_COLUMNS
from planner.periods import parse_week, week_code

# The CSV contract has one home, the loader; the generator writes exactly it.
SITE_COLUMNS = FILE_COLUMNS["sites.csv"]
SUPPLY_COLUMNS = FILE_COLUMNS["supply.csv"]
DEMAND_COLUMNS = FILE_COLUMNS["demand.csv"]
LANE_COLUMNS = FILE_COLUMNS["lanes.csv"]

#: First syllable of an invented name.
NAME_HEADS = (
    "Brel", "Dask", "Elv", "Fyr", "Gorv", "Hask", "Iln", "Jev", "Kwe", "Lisk",
    "Mab", "Orv", "Pim", "Quor", "Sel", "Tib", "Vask", "Wem", "Zor",
)
#: Optional joining vowel between head and tail.
NAME_LINKS = ("a", "e", "i", "o")
#: Last syllable of an invented name.
NAME_TAILS = ("mir", "thal", "vesh", "dun", "ast", "usk", "enn", "ost", "ara", "orn", "yth", "ev")
#: Words that may follow a plant or warehouse name.
NAME_SUFFIXES = ("Works", "Depot")
#: Matches every name the generators produce, and only names of that shape.
INVENTED_NAME = re.compile(
    f"(?:{'|'.join(NAME_HEADS)})(?:{'|'.join(NAME_LINKS)})?(?:{'|'.join(NAME_TAILS)})"
    f"(?: (?:{'|'.join(NAME_SUFFIXES)}))?"
)


@dataclass(frozen=True)
class NetworkFrames:
    """The four tables of a load folder as pandas DataFrames.

    Each frame has exactly the CSV columns of its file, in contract order.
    Optional values are NaN (numbers) or empty strings (text).

    Parameters
    ----------
    sites : DataFrame with the columns of ``sites.csv``.
    supply : DataFrame with the columns of ``supply.csv``.
    demand : DataFrame with the columns of ``demand.csv``.
    lanes : DataFrame with the columns of ``lanes.csv``.

    Raises
    ------
    ValueError
        If a frame's columns are not exactly those of its CSV file.

    Examples
    --------
    >>> frames = demo_network(weeks=1)
    >>> list(frames.supply.columns)
    ['period', 'site', 'quantity']
    """

    sites: pd.DataFrame
    supply: pd.DataFrame
    demand: pd.DataFrame
    lanes: pd.DataFrame

    def __post_init__(self) -> None:
        for file_name, frame, columns in self._files():
            if tuple(frame.columns) != columns:
                raise ValueError(
                    f"{file_name}: columns {list(frame.columns)} differ from the contract "
                    f"{list(columns)}"
                )

    def _files(self) -> tuple[tuple[str, pd.DataFrame, tuple[str, ...]], ...]:
        return (
            ("sites.csv", self.sites, SITE_COLUMNS),
            ("supply.csv", self.supply, SUPPLY_COLUMNS),
            ("demand.csv", self.demand, DEMAND_COLUMNS),
            ("lanes.csv", self.lanes, LANE_COLUMNS),
        )


def _consecutive_weeks(first_week: str, weeks: int) -> list[str]:
    """Codes of ``weeks`` consecutive ISO weeks from ``first_week`` on."""
    if weeks < 1:
        raise ValueError(f"weeks must be at least 1, got {weeks}")
    monday = parse_week(first_week)
    return [week_code(monday + datetime.timedelta(weeks=offset)) for offset in range(weeks)]


def write_folder(frames: NetworkFrames, folder: str | Path) -> Path:
    """Write a network as a load folder of four CSV files.

    Quantities and capacities are written as integers, costs and coordinates
    as the shortest decimal that reads back to the stored value (at most four
    decimals), missing values as blank fields.

    Parameters
    ----------
    frames : NetworkFrames
        The network to write.
    folder : str or Path
        Target folder; created if missing. Existing files of the same names
        are replaced.

    Returns
    -------
    Path
        The folder.

    Raises
    ------
    ValueError
        If a quantity or capacity is not a whole number.

    Examples
    --------
    >>> import tempfile
    >>> folder = write_folder(demo_network(weeks=1), tempfile.mkdtemp())
    >>> sorted(path.name for path in folder.iterdir())
    ['demand.csv', 'lanes.csv', 'sites.csv', 'supply.csv']
    >>> (folder / "supply.csv").read_text().splitlines()[0]
    'period,site,quantity'
    """
    folder = Path(folder)
    folder.mkdir(parents=True, exist_ok=True)
    whole_columns = {"throughput_capacity", "storage_capacity", "quantity", "capacity", "min_quantity"}
    decimal_columns = {"handling_cost", "holding_cost", "x", "y", "shortage_penalty", "unit_cost"}
    for file_name, frame, _ in frames._files():
        out = frame.copy()
        for column in out.columns:
            if column in whole_columns:
                out[column] = _whole_numbers(out[column], f"{file_name} {column}")
            elif column in decimal_columns:
                out[column] = pd.to_numeric(out[column]).astype("float64").round(4)
        out.to_csv(folder / file_name, index=False, na_rep="", lineterminator="\n")
    return folder


def _whole_numbers(values: pd.Series, where: str) -> pd.Series:
    """``values`` as nullable integers, refusing fractions."""
    if pd.api.types.is_integer_dtype(values):
        return values
    numbers = pd.to_numeric(values).astype("float64")
    fractional = numbers.notna() & (numbers != numbers.round())
    if fractional.any():
        raise ValueError(f"{where}: {numbers[fractional].iloc[0]} is not a whole number")
    return numbers.astype("Int64")


# --- demo scenario ---------------------------------------------------------

# region: (centre x km, centre y km, demand trend per week, number of customers)
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
    periods = _consecutive_weeks(first_week, weeks)

    customers = _demo_customers(name_rng, place_rng)
    trend = customers["region"].map({region: spec[2] for region, spec in _DEMO_REGIONS.items()})
    growth = (1.0 + trend.to_numpy()[:, None]) ** np.arange(weeks)[None, :]
    noise = 1.0 + demand_rng.normal(0.0, 0.06, size=growth.shape)
    base_demand = customers["base_demand"].to_numpy()[:, None]
    weekly_demand = np.maximum(0, np.rint(base_demand * growth * noise)).astype(np.int64)
    demand = pd.DataFrame(
        {
            "period": np.repeat(periods, len(customers)),
            "site": np.tile(customers["site"].to_numpy(), weeks),
            "quantity": weekly_demand.T.ravel(),
            "shortage_penalty": np.tile(customers["shortage_penalty"].to_numpy(), weeks),
        }
    )

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
    sites = pd.concat(
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

    # Plants ship a fixed share of the peak week's demand, so every week keeps
    # the margin: 1.35 * (1 - 0.03 noise) * (1 - 0.34 * 0.45 outage) > 1.13.
    peak_demand = weekly_demand.sum(axis=0).max()
    plant_codes = [plant[0] for plant in _DEMO_PLANTS]
    shares = np.array([plant[5] for plant in _DEMO_PLANTS])
    supply_noise = supply_rng.uniform(0.97, 1.03, size=(len(shares), weeks))
    weekly_supply = shares[:, None] * 1.35 * peak_demand * supply_noise
    outage_plant, outage_week, outage_share = _DEMO_OUTAGE
    if outage_week < weeks:
        weekly_supply[plant_codes.index(outage_plant), outage_week] *= outage_share
    supply = pd.DataFrame(
        {
            "period": np.repeat(periods, len(plant_codes)),
            "site": np.tile(plant_codes, weeks),
            "quantity": np.floor(weekly_supply).astype(np.int64).T.ravel(),
        }
    )

    lanes = _demo_lanes(lane_rng, sites, customers, periods)
    return NetworkFrames(sites=sites, supply=supply, demand=demand, lanes=lanes)


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


def _demo_lanes(
    rng: np.random.Generator, sites: pd.DataFrame, customers: pd.DataFrame, periods: list[str]
) -> pd.DataFrame:
    """Lane rates of every week: base rates from distance, drifting by mode."""
    position = sites.set_index("site")[["x", "y"]]

    def distance(origins: list[str], destinations: list[str]) -> np.ndarray:
        delta = position.loc[origins].to_numpy() - position.loc[destinations].to_numpy()
        return np.hypot(delta[:, 0], delta[:, 1])

    plant_codes = [plant[0] for plant in _DEMO_PLANTS]
    warehouse_codes = [warehouse[0] for warehouse in _DEMO_WAREHOUSES]
    customer_codes = customers["site"].tolist()
    base_demand = customers.set_index("site")["base_demand"]

    # Plant -> warehouse by road, every pair. The lane from a warehouse's
    # nearest plant is uncapacitated; other lanes under 420 km are capped,
    # so that a second plant nearby is no unlimited cheap way in.
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
    road_pw = pd.DataFrame(
        {
            "origin": pw_origin,
            "destination": pw_destination,
            "mode": "road",
            "base_cost": 1.10 + 0.011 * pw_distance,
            "capacity": pw_capacity,
            "min_quantity": np.nan,
        }
    )

    rail = pd.DataFrame(_DEMO_RAIL, columns=["origin", "destination", "capacity", "min_quantity"])
    rail_distance = distance(rail["origin"].tolist(), rail["destination"].tolist())
    rail = rail.assign(mode="rail", base_cost=2.20 + 0.0045 * rail_distance)

    # Warehouse -> customer by road from the two nearest warehouses, the third
    # nearest too for every third customer. The lane from the nearest
    # warehouse is capped below the customer's demand for one customer in
    # five, so its second warehouse has to help out.
    wc_rows = []
    for number, customer in enumerate(customer_codes):
        to_customer = distance(warehouse_codes, [customer] * len(warehouse_codes))
        ranked = np.argsort(to_customer, kind="stable")[: 3 if number % 3 == 0 else 2]
        for rank, w in enumerate(ranked):
            capped = rank == 0 and rng.random() < 0.2
            wc_rows.append(
                {
                    "origin": warehouse_codes[w],
                    "destination": customer,
                    "mode": "road",
                    "base_cost": 0.40 + 0.018 * to_customer[w],
                    "capacity": np.floor(0.6 * base_demand[customer]) if capped else np.nan,
                    "min_quantity": np.nan,
                }
            )
    road_wc = pd.DataFrame(wc_rows)

    # Direct plant -> customer road lanes to the two nearest customers of
    # each plant, capped at about half their demand.
    direct_rows = []
    for plant in plant_codes:
        to_customers = distance([plant] * len(customer_codes), customer_codes)
        for c in np.argsort(to_customers, kind="stable")[:2]:
            customer = customer_codes[c]
            direct_rows.append(
                {
                    "origin": plant,
                    "destination": customer,
                    "mode": "road",
                    "base_cost": 0.90 + 0.02 * to_customers[c],
                    "capacity": np.floor(0.5 * base_demand[customer]),
                    "min_quantity": np.nan,
                }
            )
    direct = pd.DataFrame(direct_rows)

    base = pd.concat([road_pw, rail, road_wc, direct], ignore_index=True)
    weeks = len(periods)
    surcharge = base["mode"].map(_DEMO_SURCHARGE).to_numpy()[:, None]
    rate_noise = rng.uniform(0.99, 1.01, size=(len(base), weeks))
    surcharge_factor = 1.0 + surcharge * np.arange(weeks)
    unit_cost = base["base_cost"].to_numpy()[:, None] * surcharge_factor * rate_noise
    weekly = base.loc[np.tile(base.index, weeks)].reset_index(drop=True)
    weekly["period"] = np.repeat(periods, len(base))
    weekly["unit_cost"] = np.round(unit_cost.T.ravel(), 2)
    return weekly.reindex(columns=list(LANE_COLUMNS))


# --- benchmark instances ---------------------------------------------------


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
    rng = np.random.default_rng(seed)
    periods = _consecutive_weeks(first_week, weeks)
    side = 2000.0

    plant_xy = rng.uniform(0.0, side, size=(n_plants, 2))
    warehouse_xy = rng.uniform(0.0, side, size=(n_warehouses, 2))
    home = rng.integers(0, n_warehouses, size=n_customers)
    customer_xy = warehouse_xy[home] + rng.normal(0.0, 40.0, size=(n_customers, 2))
    customer_xy = np.clip(customer_xy, 0.0, side)

    # Plant -> warehouse pairs: each warehouse's nearest plants and each
    # plant's nearest warehouses, without repeats.
    warehouse_to_plant = _distances(warehouse_xy, plant_xy)
    nearest_plant = np.argmin(warehouse_to_plant, axis=1)
    plants_per_warehouse = _nearest(warehouse_to_plant, min(4, n_plants))
    warehouses_per_plant = _nearest(warehouse_to_plant.T, min(8, n_warehouses))
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
    pw_plant, pw_warehouse = np.divmod(pair_key, n_warehouses)
    pw_distance = warehouse_to_plant[pw_warehouse, pw_plant]
    pw_primary = nearest_plant[pw_warehouse] == pw_plant
    rail = (pw_distance > np.median(pw_distance)) & (rng.random(len(pair_key)) < 0.5)
    rail_plant, rail_warehouse, rail_distance = pw_plant[rail], pw_warehouse[rail], pw_distance[rail]

    n_direct = min(n_lanes // 50, n_customers)
    direct_customer = np.sort(rng.choice(n_customers, size=n_direct, replace=False))
    direct_plant = nearest_plant[home[direct_customer]]
    direct_distance = np.hypot(*(customer_xy[direct_customer] - plant_xy[direct_plant]).T)

    n_plant_lanes = len(pair_key) + len(rail_plant) + n_direct
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
    warehouse_to_warehouse = _distances(warehouse_xy, warehouse_xy)
    np.fill_diagonal(warehouse_to_warehouse, -1.0)  # each warehouse ranks itself first
    neighbours = _nearest(warehouse_to_warehouse, most_per_customer, ordered=True)
    wc_customer = np.repeat(np.arange(n_customers), lanes_of_customer)
    first_lane = np.cumsum(lanes_of_customer) - lanes_of_customer
    wc_rank = np.arange(n_customer_lanes) - np.repeat(first_lane, lanes_of_customer)
    wc_warehouse = neighbours[home[wc_customer], wc_rank]
    wc_distance = np.hypot(*(customer_xy[wc_customer] - warehouse_xy[wc_warehouse]).T)

    # Demand: lognormal sizes, a trend per region, noise per week.
    region_of = _GridRegions(side)
    customer_region = region_of(customer_xy)
    trend = rng.uniform(-0.01, 0.03, size=region_of.count)[customer_region]
    base_demand = np.maximum(1.0, rng.lognormal(np.log(20.0), 0.6, size=n_customers))
    growth = (1.0 + trend[:, None]) ** np.arange(weeks)[None, :]
    noise = rng.uniform(0.9, 1.1, size=(n_customers, weeks))
    demand_qty = np.rint(base_demand[:, None] * growth * noise).astype(np.int64)
    home_load = np.stack(
        [np.bincount(home, weights=demand_qty[:, t], minlength=n_warehouses) for t in range(weeks)],
        axis=1,
    )
    plant_load = np.stack(
        [np.bincount(nearest_plant, weights=home_load[:, t], minlength=n_plants) for t in range(weeks)],
        axis=1,
    )
    spread_share = rng.random(n_plants)
    spread_share /= spread_share.sum()
    spread_supply = np.floor(0.1 * demand_qty.sum(axis=0)[None, :] * spread_share[:, None])
    supply_qty = (np.ceil(1.1 * plant_load) + spread_supply).astype(np.int64)

    # Capacities on about a third of the lanes that the feasible route does not use.
    peak_demand = demand_qty.max(axis=1)
    mean_home_load = home_load.max(axis=1).mean()
    wc_share = rng.uniform(0.2, 0.8, n_customer_lanes)
    wc_capacity = np.where(
        (wc_rank > 0) & (rng.random(n_customer_lanes) < 0.3),
        np.maximum(1.0, np.floor(peak_demand[wc_customer] * wc_share)),
        np.nan,
    )
    pw_capacity = np.where(
        ~pw_primary & (rng.random(len(pair_key)) < 0.3),
        np.maximum(1.0, np.floor(mean_home_load * rng.uniform(0.2, 0.6, len(pair_key)))),
        np.nan,
    )
    rail_capacity = np.maximum(1.0, np.floor(mean_home_load * rng.uniform(0.3, 0.8, len(rail_plant))))
    direct_share = rng.uniform(0.3, 0.7, n_direct)
    direct_capacity = np.maximum(1.0, np.floor(peak_demand[direct_customer] * direct_share))

    plant_codes = _codes("P", n_plants, 4)
    warehouse_codes = _codes("W", n_warehouses, 4)
    customer_codes = _codes("C", n_customers, 6)
    # Lane groups in order: plant -> warehouse road, rail, plant -> customer, warehouse -> customer.
    origin = np.concatenate(
        [
            plant_codes[pw_plant],
            plant_codes[rail_plant],
            plant_codes[direct_plant],
            warehouse_codes[wc_warehouse],
        ]
    )
    destination = np.concatenate(
        [
            warehouse_codes[pw_warehouse],
            warehouse_codes[rail_warehouse],
            customer_codes[direct_customer],
            customer_codes[wc_customer],
        ]
    )
    group_sizes = [len(pair_key), len(rail_plant), n_direct, n_customer_lanes]
    mode = np.repeat(np.array(["road", "rail", "road", "road"]), group_sizes)
    base_cost = np.concatenate(
        [
            0.80 + 0.008 * pw_distance,
            1.50 + 0.004 * rail_distance,
            0.60 + 0.015 * direct_distance,
            0.30 + 0.012 * wc_distance,
        ]
    )
    capacity = np.concatenate([pw_capacity, rail_capacity, direct_capacity, wc_capacity])
    rate_drift = 1.0 + 0.01 * np.arange(weeks)
    lanes = pd.DataFrame(
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

    throughput = np.where(
        rng.random(n_warehouses) < 0.25, np.ceil(1.5 * home_load.max(axis=1)) + 10.0, np.nan
    )
    handling = np.where(
        rng.random(n_warehouses) < 0.5, np.round(rng.uniform(0.2, 1.5, n_warehouses), 2), np.nan
    )
    no_plant_value, no_customer_value = np.full(n_plants, np.nan), np.full(n_customers, np.nan)
    region = np.concatenate([region_of(plant_xy), region_of(warehouse_xy), customer_region])
    sites = pd.DataFrame(
        {
            "site": np.concatenate([plant_codes, warehouse_codes, customer_codes]),
            "kind": np.repeat(
                np.array(["plant", "warehouse", "customer"]), [n_plants, n_warehouses, n_customers]
            ),
            "name": "",
            "region": np.array(region_of.names)[region],
            "throughput_capacity": np.concatenate([no_plant_value, throughput, no_customer_value]),
            "handling_cost": np.concatenate([no_plant_value, handling, no_customer_value]),
            "holding_cost": np.nan,
            "storage_capacity": np.nan,
            "x": np.round(np.concatenate([plant_xy[:, 0], warehouse_xy[:, 0], customer_xy[:, 0]]), 1),
            "y": np.round(np.concatenate([plant_xy[:, 1], warehouse_xy[:, 1], customer_xy[:, 1]]), 1),
        }
    )
    supply = pd.DataFrame(
        {
            "period": np.repeat(periods, n_plants),
            "site": np.tile(plant_codes, weeks),
            "quantity": supply_qty.T.ravel(),
        }
    )
    shortage_penalty = np.where(
        rng.random(n_customers) < 0.3, np.round(rng.uniform(50.0, 150.0, n_customers), 2), np.nan
    )
    demand = pd.DataFrame(
        {
            "period": np.repeat(periods, n_customers),
            "site": np.tile(customer_codes, weeks),
            "quantity": demand_qty.T.ravel(),
            "shortage_penalty": np.tile(shortage_penalty, weeks),
        }
    )
    return NetworkFrames(sites=sites, supply=supply, demand=demand, lanes=lanes)


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
