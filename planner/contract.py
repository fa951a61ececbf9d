"""The load folder's contract: four CSV files, their columns and which columns are required.

One home for it: the loader (:mod:`planner.database.ingest`) checks files
against it, and the generators (:mod:`planner.synthetic`) write exactly it.
"""

from __future__ import annotations

__all__ = ["DEMAND", "FILE_COLUMNS", "FILE_ORDER", "LANES", "REQUIRED_COLUMNS", "SITES", "SUPPLY"]

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
