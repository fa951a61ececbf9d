"""Read a period's current snapshot from PostgreSQL into integer arrays.

The figures are scaled to integers inside PostgreSQL, on exact NUMERIC
values, so nothing is rounded on the way: a figure with more decimals than the
chosen precision is refused with its table, key and value.
"""

from __future__ import annotations

import hashlib
import io
from dataclasses import dataclass

import numpy as np
import pandas as pd
from sqlalchemy import Connection, text

from planner.errors import PlannerError
from planner.instance import INT64_MAX, NONE, SiteKind, WeekData

KIND_CODES = {"plant": SiteKind.PLANT, "warehouse": SiteKind.WAREHOUSE, "customer": SiteKind.CUSTOMER}


@dataclass(frozen=True)
class Scaling:
    """Integer scaling of a run: unit costs keep ``cost_decimals`` places,
    quantities ``quantity_decimals`` places."""

    cost_decimals: int = 4
    quantity_decimals: int = 0

    def __post_init__(self):
        if not 0 <= self.cost_decimals <= 12 or not 0 <= self.quantity_decimals <= 6:
            raise PlannerError(
                "cost decimals must be between 0 and 12 and quantity decimals between 0 and 6"
            )

    @property
    def quantity_scale(self) -> int:
        return 10**self.quantity_decimals

    @property
    def unit_cost_scale(self) -> int:
        return 10**self.cost_decimals

    @property
    def cost_scale(self) -> int:
        """Scaled total cost per currency unit (unit cost scale times quantity scale)."""
        return 10 ** (self.cost_decimals + self.quantity_decimals)


@dataclass(frozen=True)
class Snapshot:
    """One period's snapshot: database ids, codes and the scaled :class:`WeekData`."""

    period_id: int
    period: str
    batch_id: int
    fingerprint: str
    site_id: np.ndarray
    site_code: np.ndarray
    site_kind_name: np.ndarray
    lane_id: np.ndarray
    lane_mode: np.ndarray
    week: WeekData

    def lane_labels(self) -> np.ndarray:
        """``ORIGIN->DESTINATION mode`` per lane."""
        o = self.site_code[self.week.lane_origin].astype(str)
        d = self.site_code[self.week.lane_destination].astype(str)
        label = np.char.add(np.char.add(o, "->"), d)
        with_mode = np.char.add(np.char.add(label, " "), self.lane_mode.astype(str))
        return np.where(self.lane_mode.astype(str) == "", label, with_mode)


def run_fingerprint(snapshot_fingerprint: str, scaling: Scaling) -> str:
    """Fingerprint of a run's input: the snapshot's content and the precision used."""
    text_ = f"{snapshot_fingerprint}|cost_decimals={scaling.cost_decimals}|quantity_decimals={scaling.quantity_decimals}"
    return hashlib.sha256(text_.encode()).hexdigest()


def copy_frame(conn: Connection, query: str, params: dict, columns: list[str]) -> pd.DataFrame:
    """Run ``query`` through ``COPY ... TO STDOUT`` and parse it with pandas.

    ``params`` are bound by psycopg (never formatted into the SQL text).
    """
    raw = conn.connection.driver_connection
    buf = io.BytesIO()
    with raw.cursor() as cur:
        with cur.copy(f"COPY ({query}) TO STDOUT", params) as copy:
            for block in copy:
                buf.write(block)
    buf.seek(0)
    if buf.getbuffer().nbytes == 0:
        return pd.DataFrame({c: pd.Series(dtype=object) for c in columns})
    return pd.read_csv(
        buf, sep="\t", header=None, names=columns, na_values=["\\N"], keep_default_na=False,
        dtype=object,
    )


def current_batch(conn: Connection, period: str, batch_id: int | None = None) -> tuple[int, int, str]:
    """``(period_id, batch_id, fingerprint)`` of the period's current snapshot
    (or of its snapshot in ``batch_id``).

    Raises
    ------
    PlannerError
        When no load has defined the period.
    """
    row = conn.execute(
        text(
            "SELECT p.id, ps.batch_id, ps.fingerprint FROM period p "
            "JOIN period_snapshot ps ON ps.period_id = p.id WHERE p.code = :code "
            "AND (CAST(:batch AS bigint) IS NULL OR ps.batch_id = :batch) "
            "ORDER BY ps.batch_id DESC LIMIT 1"
        ),
        {"code": period, "batch": batch_id},
    ).first()
    if row is None:
        raise PlannerError(
            f"period {period} has no loaded snapshot; load a folder with `planner load DIR` "
            "or list the loaded periods with `planner periods`"
        )
    return int(row[0]), int(row[1]), str(row[2])


# The scaled figures of each table: column -> (scale attribute, CSV file).
_SCALED = {
    "site_version": {
        "throughput_capacity": "quantity_scale",
        "handling_cost": "unit_cost_scale",
        "holding_cost": "unit_cost_scale",
        "storage_capacity": "quantity_scale",
    },
    "supply": {"quantity": "quantity_scale"},
    "demand": {"quantity": "quantity_scale", "shortage_penalty": "unit_cost_scale"},
    "lane_rate": {
        "unit_cost": "unit_cost_scale",
        "capacity": "quantity_scale",
        "min_quantity": "quantity_scale",
    },
}
_FILES = {"site_version": "sites.csv", "supply": "supply.csv", "demand": "demand.csv", "lane_rate": "lanes.csv"}
# How each table names the row a bad figure is on.
_ROW_NAME = {
    "site_version": "(SELECT code FROM site WHERE id = t.site_id)",
    "supply": "(SELECT code FROM site WHERE id = t.site_id)",
    "demand": "(SELECT code FROM site WHERE id = t.site_id)",
    "lane_rate": "(SELECT o.code || '->' || d.code || CASE WHEN l.mode = '' THEN '' ELSE ' ' || l.mode END "
    "FROM lane l JOIN site o ON o.id = l.origin_id JOIN site d ON d.id = l.destination_id "
    "WHERE l.id = t.lane_id)",
}


def _check_precision(conn: Connection, period_id: int, batch_id: int, scaling: Scaling) -> None:
    """Refuse figures with more decimals than the precision, or beyond 64 bits once scaled.

    One cheap scan per table finds whether any figure is off; only then is
    the offending row looked up by name. The scaled casts of
    :func:`read_snapshot` would otherwise round or fail inside PostgreSQL.
    """
    problems = []
    params = {"b": batch_id, "p": period_id, "limit": INT64_MAX}
    for table, columns in _SCALED.items():
        period_filter = "" if table == "site_version" else " AND period_id = :p"
        tests = []
        for column, scale_attr in columns.items():
            s = getattr(scaling, scale_attr)
            tests.append((column, scale_attr, f"{column} * {s} <> trunc({column} * {s})", "inexact"))
            tests.append((column, scale_attr, f"abs({column} * {s}) > :limit", "huge"))
        flags = conn.execute(
            text(
                "SELECT " + ", ".join(f"coalesce(bool_or({cond}), false)" for _, _, cond, _ in tests)
                + f" FROM {table} t WHERE batch_id = :b{period_filter}"
            ),
            params,
        ).one()
        for (column, scale_attr, cond, problem), flagged in zip(tests, flags):
            if not flagged:
                continue
            value, name = conn.execute(
                text(
                    f"SELECT {column}::text, {_ROW_NAME[table]} FROM {table} t "
                    f"WHERE batch_id = :b{period_filter} AND {cond} LIMIT 1"
                ),
                params,
            ).one()
            quantity = scale_attr == "quantity_scale"
            decimals = scaling.quantity_decimals if quantity else scaling.cost_decimals
            option = "--quantity-decimals" if quantity else "--cost-decimals"
            where = f"{_FILES[table]} column {column}"
            what = "lane" if table == "lane_rate" else "site"
            if problem == "inexact":
                problems.append(
                    f"{where}: value {value} has more than {decimals} decimals ({what} {name}); "
                    f"solve with a larger {option}"
                )
            else:
                advice = f"reduce the figure or solve with a smaller {option}" if decimals else "reduce the figure"
                problems.append(
                    f"{where}: value {value} does not fit 64-bit integers at {decimals} decimals "
                    f"({what} {name}); {advice}"
                )
    if problems:
        raise PlannerError("; ".join(problems))


def read_snapshot(
    conn: Connection, period: str, scaling: Scaling = Scaling(), batch_id: int | None = None
) -> Snapshot:
    """Assemble the current snapshot of ``period`` as scaled integer arrays.

    Parameters
    ----------
    conn : sqlalchemy.Connection
    period : str
        ISO week code, for example ``"2026-W49"``.
    scaling : Scaling
    batch_id : int, optional
        Read the period as that load batch left it instead of the current snapshot.

    Returns
    -------
    Snapshot

    Raises
    ------
    PlannerError
        When the period has no snapshot or a figure does not fit the precision.
    """
    period_id, batch_id, fingerprint = current_batch(conn, period, batch_id)
    _check_precision(conn, period_id, batch_id, scaling)
    q, c = scaling.quantity_scale, scaling.unit_cost_scale
    params = {"b": batch_id, "p": period_id, "q": q, "c": c}
    sites = copy_frame(
        conn,
        "SELECT sv.site_id, s.code, sv.kind, "
        "coalesce((sv.throughput_capacity * %(q)s)::bigint, -1), "
        "coalesce((sv.handling_cost * %(c)s)::bigint, 0), "
        "coalesce((sv.holding_cost * %(c)s)::bigint, 0), "
        # No storage figure: carry nothing, unless a holding cost says the site stocks.
        "coalesce((sv.storage_capacity * %(q)s)::bigint, "
        "         CASE WHEN sv.holding_cost IS NULL THEN 0 ELSE -1 END) "
        "FROM site_version sv JOIN site s ON s.id = sv.site_id "
        "WHERE sv.batch_id = %(b)s ORDER BY sv.site_id",
        params,
        ["site_id", "code", "kind", "throughput", "handling", "holding", "storage"],
    )
    site_id = sites["site_id"].to_numpy(np.int64)
    n = site_id.shape[0]
    kind = sites["kind"].map(KIND_CODES).to_numpy(np.int8)

    def site_index(ids: np.ndarray) -> np.ndarray:
        return np.searchsorted(site_id, ids)

    supply_rows = copy_frame(
        conn,
        "SELECT site_id, (quantity * %(q)s)::bigint FROM supply "
        "WHERE batch_id = %(b)s AND period_id = %(p)s",
        params,
        ["site_id", "quantity"],
    )
    demand_rows = copy_frame(
        conn,
        "SELECT site_id, (quantity * %(q)s)::bigint, coalesce((shortage_penalty * %(c)s)::bigint, -1) "
        "FROM demand WHERE batch_id = %(b)s AND period_id = %(p)s",
        params,
        ["site_id", "quantity", "penalty"],
    )
    lanes = copy_frame(
        conn,
        "SELECT lr.lane_id, l.origin_id, l.destination_id, l.mode, "
        "(lr.unit_cost * %(c)s)::bigint, coalesce((lr.capacity * %(q)s)::bigint, -1), "
        "(lr.min_quantity * %(q)s)::bigint "
        "FROM lane_rate lr JOIN lane l ON l.id = lr.lane_id "
        "WHERE lr.batch_id = %(b)s AND lr.period_id = %(p)s ORDER BY lr.lane_id",
        params,
        ["lane_id", "origin", "destination", "mode", "cost", "capacity", "min"],
    )

    supply = np.zeros(n, np.int64)
    supply[site_index(supply_rows["site_id"].to_numpy(np.int64))] = supply_rows["quantity"].to_numpy(np.int64)
    demand = np.zeros(n, np.int64)
    penalty = np.full(n, NONE, np.int64)
    d_idx = site_index(demand_rows["site_id"].to_numpy(np.int64))
    demand[d_idx] = demand_rows["quantity"].to_numpy(np.int64)
    penalty[d_idx] = demand_rows["penalty"].to_numpy(np.int64)

    week = WeekData(
        site_kind=kind,
        supply=supply,
        demand=demand,
        shortage_penalty=penalty,
        throughput_capacity=sites["throughput"].to_numpy(np.int64),
        handling_cost=sites["handling"].to_numpy(np.int64),
        lane_origin=site_index(lanes["origin"].to_numpy(np.int64)),
        lane_destination=site_index(lanes["destination"].to_numpy(np.int64)),
        lane_cost=lanes["cost"].to_numpy(np.int64),
        lane_capacity=lanes["capacity"].to_numpy(np.int64),
        lane_min=lanes["min"].to_numpy(np.int64),
        holding_cost=sites["holding"].to_numpy(np.int64),
        storage_capacity=sites["storage"].to_numpy(np.int64),
    )
    return Snapshot(
        period_id=period_id,
        period=period,
        batch_id=batch_id,
        fingerprint=fingerprint,
        site_id=site_id,
        site_code=sites["code"].to_numpy(object),
        site_kind_name=sites["kind"].to_numpy(object),
        lane_id=lanes["lane_id"].to_numpy(np.int64),
        lane_mode=lanes["mode"].fillna("").to_numpy(object),
        week=week,
    )


def loaded_periods(conn: Connection) -> list[str]:
    """Codes of all periods with a loaded snapshot, in time order."""
    rows = conn.execute(
        text(
            "SELECT p.code FROM period p WHERE EXISTS "
            "(SELECT 1 FROM period_snapshot ps WHERE ps.period_id = p.id) ORDER BY p.starts_on"
        )
    )
    return [r[0] for r in rows]
