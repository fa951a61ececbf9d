"""Networks as the four tables of a load folder, and writing them as CSV files.

:class:`NetworkFrames` holds a network in the CSV contract of the planner
(:mod:`planner.contract`); :func:`write_folder` writes it as a load folder and
:func:`frames_to_weeks` turns it into scaled ``WeekData`` arrays.
Every site name the generators invent is composed from the syllables of
:data:`NAME_HEADS`, :data:`NAME_LINKS` and :data:`NAME_TAILS` (optionally
followed by one of :data:`NAME_SUFFIXES`), so :data:`INVENTED_NAME` matches
each of them.
"""

from __future__ import annotations

import datetime
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pandas as pd

from planner.contract import FILE_COLUMNS
from planner.core.week import NONE, SiteKind, WeekData, scale_exact
from planner.periods import parse_week, week_code

__all__ = [
    "INVENTED_NAME",
    "NAME_HEADS",
    "NAME_LINKS",
    "NAME_SUFFIXES",
    "NAME_TAILS",
    "NetworkFrames",
    "consecutive_weeks",
    "frames_to_weeks",
    "write_folder",
]

# The CSV contract has one home; the generators write exactly it.
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
    >>> from planner.synthetic.demo_network import demo_network
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


def consecutive_weeks(first_week: str, weeks: int) -> list[str]:
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
    >>> from planner.synthetic.demo_network import demo_network
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


def frames_to_weeks(frames: NetworkFrames, cost_decimals: int = 4, quantity_decimals: int = 0) -> tuple[list[str], list[WeekData]]:
    """The weeks of a generated network as scaled ``WeekData``, over one site list and one lane list.

    For benchmarks and tests that want the arrays without a database; the
    network must give every week the same lanes in the same order (the
    generators do).
    """
    cd, qd = cost_decimals, quantity_decimals
    sites = frames.sites
    n = len(sites)
    index = pd.Series(np.arange(n), index=sites["site"].to_numpy())
    kind = sites["kind"].map({"plant": SiteKind.PLANT, "warehouse": SiteKind.WAREHOUSE, "customer": SiteKind.CUSTOMER}).to_numpy(np.int8)
    throughput = scale_exact(sites["throughput_capacity"].to_numpy(float), qd, "throughput_capacity")
    handling = np.maximum(scale_exact(sites["handling_cost"].to_numpy(float), cd, "handling_cost"), 0)
    holding = np.maximum(scale_exact(sites["holding_cost"].to_numpy(float), cd, "holding_cost"), 0)
    storage = scale_exact(sites["storage_capacity"].to_numpy(float), qd, "storage_capacity")
    storage[np.isnan(sites["storage_capacity"].to_numpy(float))] = 0

    periods = sorted(frames.lanes["period"].unique())
    supply_by, demand_by, lanes_by = (
        dict(tuple(f.groupby("period"))) for f in (frames.supply, frames.demand, frames.lanes)
    )
    first = lanes_by[periods[0]]
    origin = index[first["origin"].to_numpy()].to_numpy()
    destination = index[first["destination"].to_numpy()].to_numpy()
    key = (first["origin"] + "|" + first["destination"] + "|" + first["mode"]).to_numpy()
    weeks = []
    for period in periods:
        lanes = lanes_by[period]
        # benchmark_network gives every week the same lanes in the same order.
        week_key = (lanes["origin"] + "|" + lanes["destination"] + "|" + lanes["mode"]).to_numpy()
        assert np.array_equal(week_key, key)
        supply = np.zeros(n, np.int64)
        s = supply_by[period]
        s_idx = index[s["site"].to_numpy()].to_numpy()
        supply[s_idx] = scale_exact(s["quantity"].to_numpy(float), qd, "supply")
        demand = np.zeros(n, np.int64)
        penalty = np.full(n, NONE, np.int64)
        d = demand_by[period]
        d_idx = index[d["site"].to_numpy()].to_numpy()
        demand[d_idx] = scale_exact(d["quantity"].to_numpy(float), qd, "demand")
        penalty[d_idx] = scale_exact(d["shortage_penalty"].to_numpy(float), cd, "shortage_penalty")
        lane_min = scale_exact(lanes["min_quantity"].to_numpy(float), qd, "min_quantity")
        weeks.append(
            WeekData(
                site_kind=kind,
                supply=supply,
                demand=demand,
                shortage_penalty=penalty,
                throughput_capacity=throughput,
                handling_cost=handling,
                lane_origin=origin,
                lane_destination=destination,
                lane_cost=scale_exact(lanes["unit_cost"].to_numpy(float), cd, "unit_cost"),
                lane_capacity=scale_exact(lanes["capacity"].to_numpy(float), qd, "capacity"),
                lane_min=np.maximum(lane_min, 0),
                holding_cost=holding,
                storage_capacity=storage,
            )
        )
    return periods, weeks
