"""Read a period's current snapshot from PostgreSQL into integer arrays.

The figures are scaled to integers inside PostgreSQL, on exact NUMERIC
values, so nothing is rounded on the way: a figure with more decimals than the
chosen precision is refused with its table, key and value.
"""

from __future__ import annotations

import hashlib
from collections.abc import Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from dataclasses import dataclass

import numpy as np
import psycopg
from sqlalchemy import Connection, text
from sqlalchemy.exc import SQLAlchemyError

from planner.core.edits import WeekNames
from planner.core.week import INT64_MAX, NONE, SiteKind, WeekData
from planner.errors import PlannerError

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


def fetch_columns(
    conn: Connection,
    query: str,
    params: dict,
    *,
    ints: Sequence[str],
    texts: Sequence[str] = (),
    order_by: str | None = None,
) -> dict[str, np.ndarray]:
    """The rows of ``query`` as one array per named column, in one round trip.

    PostgreSQL packs each integer column into a single ``bytea`` of big-endian
    int8 values (``int8send``), which numpy reads in place, and each text
    column into one array: no Python object per row on the way. The integer
    columns must not be NULL (coalesce them in ``query``); a NULL would shift
    the packed values, so it is refused. ``params`` are bound by psycopg.

    Parameters
    ----------
    query : str
        A SELECT whose output columns carry the names in ``ints`` and ``texts``.
    order_by : str, optional
        An integer column the arrays are sorted on (stably) before they are
        returned; aggregates keep the rows aligned but need not keep their order.

    Returns
    -------
    dict of str to numpy.ndarray
        int64 arrays for ``ints``, object arrays of str for ``texts``.
    """
    parts = ["count(*)"]
    parts += [f"string_agg(int8send(q.{c}::int8), ''::bytea)" for c in ints]
    parts += [f"array_agg(q.{c})" for c in texts]
    raw = conn.connection.driver_connection
    with raw.cursor(binary=True) as cur:
        row = cur.execute(f"SELECT {', '.join(parts)} FROM ({query}) q", params).fetchone()
    count, values = int(row[0]), row[1:]
    out: dict[str, np.ndarray] = {}
    for column, packed in zip(ints, values):
        packed = bytes(packed or b"")
        if len(packed) != 8 * count:
            raise PlannerError(f"internal error: column {column} holds NULL values")
        out[column] = np.frombuffer(packed, dtype=">i8").astype(np.int64)
    for column, items in zip(texts, values[len(ints):]):
        arr = np.empty(count, dtype=object)
        arr[:] = items or []
        out[column] = arr
    if order_by is not None and count > 1:
        key = out[order_by]
        if (key[1:] < key[:-1]).any():
            order = np.argsort(key, kind="stable")
            out = {k: v[order] for k, v in out.items()}
    return out


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


def _decimals(scaling: Scaling, scale_attr: str) -> int:
    return scaling.quantity_decimals if scale_attr == "quantity_scale" else scaling.cost_decimals


def _check_precision(conn: Connection, period_id: int, batch_id: int, scaling: Scaling) -> None:
    """Refuse figures with more decimals than the precision, or beyond 64 bits once scaled.

    One cheap scan per table reads each column's largest display scale and
    magnitude; a column is cleared when those fit. Only a column they do not
    clear (a figure may show trailing zeros, ``1.50`` at one decimal) gets the
    exact test of every figure, and only a failing one the lookup of the
    offending row by name. The scaled casts of :func:`read_snapshot` would
    otherwise round or fail inside PostgreSQL.
    """
    problems = []
    params = {"b": batch_id, "p": period_id, "limit": INT64_MAX}
    for table, columns in _SCALED.items():
        period_filter = "" if table == "site_version" else " AND period_id = :p"
        stats = conn.execute(
            text(
                "SELECT " + ", ".join(f"max(scale({c})), max(abs({c}))" for c in columns)
                + f" FROM {table} t WHERE batch_id = :b{period_filter}"
            ),
            params,
        ).one()
        tests = []
        for i, (column, scale_attr) in enumerate(columns.items()):
            s = getattr(scaling, scale_attr)
            top_scale, top = stats[2 * i], stats[2 * i + 1]
            if top is None or (top_scale <= _decimals(scaling, scale_attr) and top * s <= INT64_MAX):
                continue
            tests.append((column, scale_attr, f"{column} * {s} <> trunc({column} * {s})", "inexact"))
            tests.append((column, scale_attr, f"abs({column} * {s}) > :limit", "huge"))
        if not tests:
            continue
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
            decimals = _decimals(scaling, scale_attr)
            option = "--quantity-decimals" if scale_attr == "quantity_scale" else "--cost-decimals"
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


def read_lanes(conn: Connection) -> dict[str, np.ndarray]:
    """The lane registry: ``id`` (sorted), ``origin_id``, ``destination_id`` and ``mode``.

    Lanes are only ever added, never changed, so one read can serve the
    snapshots of several periods (``read_snapshot(..., lanes=...)``).
    """
    return fetch_columns(
        conn,
        "SELECT id, origin_id, destination_id, mode FROM lane",
        {},
        ints=["id", "origin_id", "destination_id"],
        texts=["mode"],
        order_by="id",
    )


def _lanes_or_none(engine) -> dict[str, np.ndarray] | None:
    """The lane registry read on a connection of its own, beside the week's own reads.

    The registry is as large as the week's rates (a 500,000-lane week: 0.4 s
    each, server-side); read side by side, on two server processes, they cost
    one. Lanes are only ever added, so a registry read in another transaction
    serves as well; one that lacks a lane of the week (added in the reader's own
    transaction, say) is read again on the reader's connection by
    :func:`_read_rates`, as is the registry when this read fails (None).
    """
    try:
        with engine.connect() as other:
            return read_lanes(other)
    except (SQLAlchemyError, psycopg.Error, PlannerError):
        return None


def _holds(ids: np.ndarray, at: np.ndarray, wanted: np.ndarray) -> bool:
    """Whether the sorted ``ids`` hold every ``wanted`` id at the positions ``at``."""
    inside = at < ids.shape[0]
    return bool(inside.all() and (ids[at] == wanted).all())


def read_snapshot(
    conn: Connection,
    period: str,
    scaling: Scaling = Scaling(),
    batch_id: int | None = None,
    lanes: dict[str, np.ndarray] | None = None,
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
    lanes : dict, optional
        The lane registry from :func:`read_lanes`, read once for several
        periods; read here when None, or again when it lacks a lane of the week.

    Returns
    -------
    Snapshot

    Raises
    ------
    PlannerError
        When the period has no snapshot or a figure does not fit the precision.
    """
    period_id, batch_id, fingerprint = current_batch(conn, period, batch_id)
    # Leaving the pool waits for the registry read, also behind a failed read.
    with ThreadPoolExecutor(max_workers=1, thread_name_prefix="read-lane-registry") as pool:
        beside = pool.submit(_lanes_or_none, conn.engine) if lanes is None else None
        _check_precision(conn, period_id, batch_id, scaling)
        params = {"b": batch_id, "p": period_id, "q": scaling.quantity_scale, "c": scaling.unit_cost_scale}
        sites = _read_sites(conn, params)
        supply, demand, penalty = _read_needs(conn, params, sites["site_id"])
        rates, registry, at = _read_rates(conn, params, lanes, beside)
    origin = np.searchsorted(sites["site_id"], registry["origin_id"][at])
    destination = np.searchsorted(sites["site_id"], registry["destination_id"][at])
    week = WeekData(
        site_kind=np.array([KIND_CODES[k] for k in sites["kind"]], dtype=np.int8),
        supply=supply,
        demand=demand,
        shortage_penalty=penalty,
        throughput_capacity=sites["throughput"],
        handling_cost=sites["handling"],
        lane_origin=origin,
        lane_destination=destination,
        lane_cost=rates["cost"],
        lane_capacity=rates["capacity"],
        lane_min=rates["min"],
        holding_cost=sites["holding"],
        storage_capacity=sites["storage"],
    )
    return Snapshot(
        period_id=period_id,
        period=period,
        batch_id=batch_id,
        fingerprint=fingerprint,
        site_id=sites["site_id"],
        site_code=sites["code"],
        site_kind_name=sites["kind"],
        lane_id=rates["lane_id"],
        lane_mode=registry["mode"][at],
        week=week,
    )


def _read_sites(conn: Connection, params: dict) -> dict[str, np.ndarray]:
    """The batch's sites, sorted by id, with their scaled warehouse figures."""
    return fetch_columns(
        conn,
        "SELECT sv.site_id, s.code, sv.kind, "
        "coalesce((sv.throughput_capacity * %(q)s)::bigint, -1) AS throughput, "
        "coalesce((sv.handling_cost * %(c)s)::bigint, 0) AS handling, "
        "coalesce((sv.holding_cost * %(c)s)::bigint, 0) AS holding, "
        # No storage figure: carry nothing, unless a holding cost says the site stocks.
        "coalesce((sv.storage_capacity * %(q)s)::bigint, "
        "         CASE WHEN sv.holding_cost IS NULL THEN 0 ELSE -1 END) AS storage "
        "FROM site_version sv JOIN site s ON s.id = sv.site_id "
        "WHERE sv.batch_id = %(b)s",
        params,
        ints=["site_id", "throughput", "handling", "holding", "storage"],
        texts=["code", "kind"],
        order_by="site_id",
    )


def _read_needs(conn: Connection, params: dict, site_id: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Supply, demand and shortage penalty per site (indexed like ``site_id``)."""
    supply_rows = fetch_columns(
        conn,
        "SELECT site_id, (quantity * %(q)s)::bigint AS quantity FROM supply "
        "WHERE batch_id = %(b)s AND period_id = %(p)s",
        params,
        ints=["site_id", "quantity"],
    )
    demand_rows = fetch_columns(
        conn,
        "SELECT site_id, (quantity * %(q)s)::bigint AS quantity, "
        "coalesce((shortage_penalty * %(c)s)::bigint, -1) AS penalty "
        "FROM demand WHERE batch_id = %(b)s AND period_id = %(p)s",
        params,
        ints=["site_id", "quantity", "penalty"],
    )
    n = site_id.shape[0]
    supply = np.zeros(n, np.int64)
    supply[np.searchsorted(site_id, supply_rows["site_id"])] = supply_rows["quantity"]
    demand = np.zeros(n, np.int64)
    penalty = np.full(n, NONE, np.int64)
    d_idx = np.searchsorted(site_id, demand_rows["site_id"])
    demand[d_idx] = demand_rows["quantity"]
    penalty[d_idx] = demand_rows["penalty"]
    return supply, demand, penalty


def _read_rates(conn: Connection, params: dict, lanes: dict[str, np.ndarray] | None,
                beside: Future | None = None):
    """The week's lane rates sorted by lane id, the lane registry, and each rate's position in it.

    The week's rates alone (an index range of lane_rate) and the lane registry
    beside them (``lanes``, else the one ``beside`` reads, else read here):
    cheaper than a join of the two. Sorting the arrays on the id in numpy
    spares PostgreSQL a sort.
    """
    rates = fetch_columns(
        conn,
        "SELECT lane_id, (unit_cost * %(c)s)::bigint AS cost, "
        "coalesce((capacity * %(q)s)::bigint, -1) AS capacity, "
        "(min_quantity * %(q)s)::bigint AS min "
        "FROM lane_rate WHERE batch_id = %(b)s AND period_id = %(p)s",
        params,
        ints=["lane_id", "cost", "capacity", "min"],
        order_by="lane_id",
    )
    if lanes is None and beside is not None:
        lanes = beside.result()
    registry = lanes if lanes is not None else read_lanes(conn)
    at = np.searchsorted(registry["id"], rates["lane_id"])
    if not _holds(registry["id"], at, rates["lane_id"]):
        # A lane loaded after ``lanes`` was read: read the registry afresh.
        registry = read_lanes(conn)
        at = np.searchsorted(registry["id"], rates["lane_id"])
    return rates, registry, at


def snapshot_names(conn: Connection, snap: Snapshot) -> WeekNames:
    """Site codes, lane modes and site regions of a snapshot, for resolving what-if edits."""
    rows = fetch_columns(conn, "SELECT site_id, region FROM site_version WHERE batch_id = %(b)s",
                         {"b": snap.batch_id}, ints=["site_id"], texts=["region"], order_by="site_id")
    region = np.full(snap.site_id.shape[0], None, dtype=object)
    region[np.searchsorted(snap.site_id, rows["site_id"])] = rows["region"]
    return WeekNames(snap.site_code, snap.lane_mode, region)


def loaded_periods(conn: Connection) -> list[str]:
    """Codes of all periods with a loaded snapshot, in time order."""
    rows = conn.execute(
        text(
            "SELECT p.code FROM period p WHERE EXISTS "
            "(SELECT 1 FROM period_snapshot ps WHERE ps.period_id = p.id) ORDER BY p.starts_on"
        )
    )
    return [r[0] for r in rows]
