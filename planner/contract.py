"""The load folder's contract: four CSV files, their columns and which columns are required.

One home for it: the loader (:mod:`planner.database.ingest`) checks files
against it, and the generators (:mod:`planner.synthetic`) write exactly it.
"""

from __future__ import annotations

__all__ = [
    "COST_COLUMNS",
    "DEMAND",
    "FILE_COLUMNS",
    "FILE_ORDER",
    "LANES",
    "QUANTITY_COLUMNS",
    "REQUIRED_COLUMNS",
    "SITES",
    "SUPPLY",
    "TEXT_LIMITS",
]

SITES, SUPPLY, DEMAND, LANES = "sites.csv", "supply.csv", "demand.csv", "lanes.csv"
#: The files of a load folder, in the order problems are reported.
FILE_ORDER = (SITES, SUPPLY, DEMAND, LANES)

#: Columns of each file, in the order of the contract and of the validated frames.
FILE_COLUMNS: dict[str, tuple[str, ...]] = {
    SITES: (
        "site",
        "kind",
        "name",
        "region",
        "throughput_capacity",
        "handling_cost",
        "holding_cost",
        "storage_capacity",
        "x",
        "y",
    ),
    SUPPLY: ("period", "site", "quantity"),
    DEMAND: ("period", "site", "quantity", "shortage_penalty"),
    LANES: ("period", "origin", "destination", "mode", "unit_cost", "capacity", "min_quantity"),
}
#: Columns that must be in the header; the others may be left out (all blank).
REQUIRED_COLUMNS: dict[str, tuple[str, ...]] = {
    SITES: ("site", "kind"),
    SUPPLY: ("period", "site", "quantity"),
    DEMAND: ("period", "site", "quantity"),
    LANES: ("period", "origin", "destination", "unit_cost"),
}
#: Longest text, in characters, of the free-text columns: codes are keys of
#: unique indexes (a btree entry holds at most about 2,700 bytes), names and
#: regions are labels. Site codes in supply, demand and lanes must name a site
#: of sites.csv, so they are bounded by the same limit.
TEXT_LIMITS: dict[str, dict[str, int]] = {
    SITES: {"site": 100, "name": 200, "region": 200},
    LANES: {"mode": 100},
}
#: Columns in quantity units: they keep at most the solve's quantity decimals.
QUANTITY_COLUMNS = frozenset({"quantity", "capacity", "min_quantity", "throughput_capacity", "storage_capacity"})
#: Columns in currency per unit: they keep at most the solve's cost decimals.
COST_COLUMNS = frozenset({"unit_cost", "shortage_penalty", "handling_cost", "holding_cost"})
