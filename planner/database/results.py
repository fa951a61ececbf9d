"""Persist a run: one ``solve_run`` row plus its flows and site prices, in one transaction.

Results are sparse (migration 0006): prices of every site, the flow of every
lane that carries flow, and every limit at its bound with its values. The
reduced cost of any lane follows exactly from the stored prices and the
snapshot's rate, and the views derive it. The result tables have one
partition per period (:func:`planner.database.history.ensure_partitions`).

Bulk rows go in with PostgreSQL COPY. The per-lane flows and the stock rows,
the large tables, go in binary (:mod:`planner.database.pgbinary`: NUMERIC digits built
by numpy from the scaled integers); the per-site prices, with their reason
texts, as text, where scaled integers are written as exact decimal literals
in scientific notation (``123456e-4`` is the NUMERIC ``12.3456``). Either
way nothing is rounded between the solver and the table.
"""

from __future__ import annotations

from dataclasses import dataclass
from decimal import Decimal

import numpy as np
from sqlalchemy import Connection, text

from planner import __version__
from planner.core.limits import CAPACITY, MINIMUM, TightenBlock
from planner.core.network import ArcKind, Instance
from planner.core.optimize import Outcome, shortage_units, spare_units
from planner.core.paths import UNLIMITED
from planner.core.prices import HIGH_REASON, LOW_REASON
from planner.core.rates import limit_rate_ranges
from planner.core.week import SiteKind
from planner.database.pgbinary import Column, copy_binary
from planner.database.snapshot import Scaling

NULL = "\\N"


def decimal_text(values: np.ndarray, decimals: int) -> list[str]:
    """Exact NUMERIC literals for scaled integers (``value * 10**-decimals``).

    Examples
    --------
    >>> decimal_text(np.array([123456, -5]), 4)
    ['123456e-4', '-5e-4']
    """
    return list(map(f"{{}}e-{decimals}".format, np.asarray(values, dtype=np.int64).tolist()))


def to_decimal(value: int, decimals: int) -> Decimal:
    """A scaled integer as an exact :class:`~decimal.Decimal`."""
    return Decimal(value).scaleb(-decimals)


def _with_nulls(strings: list[str], present: np.ndarray) -> list[str]:
    if present.all():
        return strings
    arr = np.array(strings, dtype=object)
    arr[~present] = NULL
    return arr.tolist()


def _copy_rows(conn: Connection, table: str, columns: list[str], cols: list[list[str]]) -> None:
    """COPY text rows built column-wise (C-level joins, no per-row Python code)."""
    if not cols or not cols[0]:
        return
    body = "\n".join(map("\t".join, zip(*cols))) + "\n"
    raw = conn.connection.driver_connection
    with raw.cursor() as cur:
        with cur.copy(f"COPY {table} ({', '.join(columns)}) FROM STDIN") as copy:
            copy.write(body)


#: COPY of text rows built column-wise, for other stores of run rows.
copy_text_rows = _copy_rows


@dataclass(frozen=True)
class RunKey:
    """What a run was solved from."""

    kind: str
    period_id: int | None
    first_period_id: int
    last_period_id: int
    batch_id: int | None
    input_fingerprint: str
    #: The scenario a run solves (None for the real plan).
    scenario_id: int | None = None


def insert_run(
    conn: Connection,
    key: RunKey,
    scaling: Scaling,
    inst: Instance | None,
    outcome: Outcome,
    total_seconds: float,
    engine: str | None = None,
) -> int:
    """Insert the ``solve_run`` row of an outcome and return its id.

    ``engine`` names what produced the flow (``ortools``, ``warm``, ``ortools after warm``).
    """
    cd, qd, td = scaling.cost_decimals, scaling.quantity_decimals, scaling.cost_decimals + scaling.quantity_decimals
    values = {
        "kind": key.kind,
        "period_id": key.period_id,
        "first": key.first_period_id,
        "last": key.last_period_id,
        "batch": key.batch_id,
        "fp": key.input_fingerprint,
        "status": outcome.status,
        "message": outcome.message or None,
        "cd": cd,
        "qd": qd,
        "solver": outcome.solver_seconds,
        "total": total_seconds,
        "primal": None,
        "dual": None,
        "gap": None,
        "cons": None,
        "bound": None,
        "minrc": None,
        "ok": None,
        "short": None,
        "spare": None,
        "nodes": inst.n_nodes if inst is not None else None,
        "arcs": inst.n_arcs if inst is not None else None,
        "version": __version__,
        "scenario": key.scenario_id,
        "engine": engine,
    }
    cert = outcome.certificate
    if cert is not None:
        values.update(
            primal=to_decimal(cert.primal_cost, td),
            dual=to_decimal(cert.dual_objective, td),
            gap=to_decimal(cert.gap, td),
            cons=to_decimal(cert.max_conservation_violation, qd),
            bound=to_decimal(cert.max_bound_violation, qd),
            minrc=None if cert.min_reduced_cost is None else to_decimal(cert.min_reduced_cost, cd),
            ok=cert.ok,
            short=to_decimal(shortage_units(inst, outcome.flow), qd),
            spare=to_decimal(spare_units(inst, outcome.flow), qd),
        )
    row = conn.execute(
        text(
            "INSERT INTO solve_run (kind, period_id, first_period_id, last_period_id, batch_id, "
            "input_fingerprint, status, message, finished_at, cost_decimals, quantity_decimals, "
            "solver_seconds, total_seconds, primal_cost, dual_objective, duality_gap, "
            "max_conservation_violation, max_bound_violation, min_reduced_cost, certificate_ok, "
            "shortage_units, spare_units, node_count, arc_count, planner_version, scenario_id, engine) VALUES "
            "(:kind, :period_id, :first, :last, :batch, :fp, :status, :message, clock_timestamp(), "
            ":cd, :qd, :solver, :total, :primal, :dual, :gap, :cons, :bound, :minrc, :ok, "
            ":short, :spare, :nodes, :arcs, :version, :scenario, :engine) RETURNING id"
        ),
        values,
    ).one()
    return int(row[0])


def store_results(
    conn: Connection,
    run_id: int,
    inst: Instance,
    outcome: Outcome,
    scaling: Scaling,
    periods: list[str],
    site_ids: np.ndarray,
    lane_ids: np.ndarray,
    site_kind: np.ndarray,
    lane_present: np.ndarray | None = None,
) -> None:
    """COPY the flows per lane, prices per site and stock per site of an optimal outcome.

    Parameters
    ----------
    periods : codes of the instance's periods, in order (the result tables' ``period``).
    site_ids : database ids of the sites (instance site index -> id).
    lane_ids : database ids of the lanes (instance lane index -> id).
    site_kind : :class:`SiteKind` code per site.
    lane_present : bool array (period, lane), optional
        Which lanes exist in which period (a horizon's periods may differ);
        all of them by default.
    """
    codes = np.array([code.encode() for code in periods])
    ids = _RunIds(run_id, scaling, codes, np.asarray(site_ids), np.asarray(lane_ids), site_kind)
    if lane_present is None:
        lane_present = np.ones((inst.site_node.shape[0], len(lane_ids)), dtype=bool)
    _store_lane_flows(conn, ids, inst, outcome, lane_present)
    _store_site_prices(conn, ids, inst, outcome)
    _store_stock(conn, ids, inst, outcome)
    _store_limits(conn, ids, inst, outcome)


@dataclass(frozen=True)
class _RunIds:
    """A run's id and precision, and the database ids behind the instance's indices."""

    run_id: int
    scaling: Scaling
    #: Period codes as fixed-width bytes (binary COPY ``text``).
    periods: np.ndarray
    site_ids: np.ndarray
    lane_ids: np.ndarray
    site_kind: np.ndarray


def _store_lane_flows(conn: Connection, ids: _RunIds, inst: Instance, outcome: Outcome, lane_present) -> None:
    """Flows of the lanes that carry flow, in every period (the others carry nothing)."""
    flow = outcome.flow
    t_idx, l_idx = np.nonzero(lane_present)
    arcs = inst.lane_arc[t_idx, l_idx]
    used = flow[arcs] != 0
    t_idx, l_idx, arcs = t_idx[used], l_idx[used], arcs[used]
    _copy_figures(
        conn, "run_flow", ["run_id", "period", "lane_id", "flow"],
        ids.run_id, ids.periods[t_idx], ids.lane_ids[l_idx],
        [(flow[arcs], ids.scaling.quantity_decimals, None)],
    )


def _store_site_prices(conn: Connection, ids: _RunIds, inst: Instance, outcome: Outcome) -> None:
    """Prices, ranges and per-site figures for every site of every period."""
    cd, qd = ids.scaling.cost_decimals, ids.scaling.quantity_decimals
    flow, ranges = outcome.flow, outcome.ranges
    n_periods, n_sites = inst.site_node.shape
    nodes = inst.site_node.reshape(-1)
    site_index = np.tile(np.arange(n_sites), n_periods)
    period_index = np.repeat(np.arange(n_periods), n_sites)

    def per_site(values, kind: ArcKind) -> np.ndarray:
        return _per_site(inst, values, kind, n_periods, n_sites)

    kind = ids.site_kind[site_index]
    has_high, has_low = ranges.has_high[nodes], ranges.has_low[nodes]
    out_nodes = inst.site_out_node.reshape(-1)
    k = nodes.shape[0]
    _copy_rows(
        conn,
        "run_site_price",
        [
            "run_id", "period", "site_id", "price", "price_low", "price_high", "low_reason",
            "high_reason", "high_units", "throughput_flow", "shortage", "spare", "price_out",
        ],
        [
            [str(ids.run_id)] * k,
            np.char.decode(ids.periods[period_index]).tolist(),
            list(map(str, ids.site_ids[site_index].tolist())),
            decimal_text(ranges.price[nodes], cd),
            _with_nulls(decimal_text(ranges.low[nodes], cd), has_low),
            _with_nulls(decimal_text(ranges.high[nodes], cd), has_high),
            _reasons(~has_low, LOW_REASON, k),
            _reasons(~has_high, HIGH_REASON, k),
            _with_nulls(_units_text(ranges.high_units[nodes], qd), has_high),
            _with_nulls(decimal_text(per_site(flow, ArcKind.THROUGHPUT), qd),
                        per_site(np.ones_like(flow), ArcKind.THROUGHPUT) > 0),
            _with_nulls(decimal_text(per_site(flow, ArcKind.SHORTAGE), qd), kind == SiteKind.CUSTOMER),
            _with_nulls(decimal_text(per_site(flow, ArcKind.TO_SPARE), qd), kind == SiteKind.PLANT),
            _with_nulls(decimal_text(ranges.price[out_nodes], cd), out_nodes != nodes),
        ],
    )


def _store_stock(conn: Connection, ids: _RunIds, inst: Instance, outcome: Outcome) -> None:
    """Stock carried out of each period (linked horizons)."""
    stock_arcs = np.flatnonzero(inst.arc_kind == ArcKind.STOCK)
    if stock_arcs.shape[0] == 0:
        return
    cd, qd = ids.scaling.cost_decimals, ids.scaling.quantity_decimals
    _copy_figures(
        conn, "run_stock", ["run_id", "period", "site_id", "stock", "holding_cost"],
        ids.run_id,
        ids.periods[inst.arc_period[stock_arcs]],
        ids.site_ids[inst.arc_ref[stock_arcs]],
        [(outcome.flow[stock_arcs], qd, None), (inst.cost[stock_arcs], cd, None)],
    )


#: ``run_limit.limit_kind`` of each arc kind on the capacity side.
_CAPACITY_KIND = {ArcKind.LANE: "lane_capacity", ArcKind.THROUGHPUT: "throughput", ArcKind.STOCK: "storage"}
#: Why a limit cannot be tightened by one unit, per (blocked code, side).
BLOCKED_REASON = {
    (TightenBlock.BELOW_MINIMUM, CAPACITY): "one unit less capacity would fall below the minimum commitment or below 0",
    (TightenBlock.NO_ROUTE, CAPACITY): (
        "no other route can take the unit: with one unit less capacity the week has no feasible plan"
    ),
    (TightenBlock.ABOVE_CAPACITY, MINIMUM): "one more committed unit would exceed the lane's capacity",
    (TightenBlock.NO_ROUTE, MINIMUM): (
        "the extra committed unit has nowhere to go: the week would have no feasible plan"
    ),
}


def _store_limits(conn: Connection, ids: _RunIds, inst: Instance, outcome: Outcome) -> None:
    """Every limit at its bound with both one-sided values, and the rate range of lanes at a limit."""
    limits = outcome.limits
    k = limits.arc.shape[0]
    if k == 0:
        return
    cd, qd = ids.scaling.cost_decimals, ids.scaling.quantity_decimals
    arc, side = limits.arc, limits.side
    kind = inst.arc_kind[arc]
    lane = kind == ArcKind.LANE
    ref = inst.arc_ref[arc]
    names = np.array([_CAPACITY_KIND.get(ArcKind(int(c)), "") for c in kind], dtype=object)
    names[lane & (side == MINIMUM)] = "lane_minimum"
    ref_db = np.where(lane, ids.lane_ids[np.where(lane, ref, 0)], ids.site_ids[np.where(lane, 0, ref)])
    bound = np.where(side == CAPACITY, inst.upper[arc], inst.lower[arc])
    possible = limits.blocked == TightenBlock.NONE
    reasons = np.full(k, NULL, dtype=object)
    for (code, on_side), text_ in BLOCKED_REASON.items():
        reasons[(limits.blocked == code) & (side == on_side)] = text_
    rates = limit_rate_ranges(inst, limits)
    low = np.full(k, "-Infinity", dtype=object)
    high = np.full(k, "Infinity", dtype=object)
    low[~lane], high[~lane] = NULL, NULL
    rows = np.flatnonzero(lane)
    low[rows[rates.has_low]] = decimal_text(rates.low[rates.has_low], cd)
    high[rows[rates.has_high]] = decimal_text(rates.high[rates.has_high], cd)
    _copy_rows(
        conn,
        "run_limit",
        [
            "run_id", "period", "limit_kind", "ref_id", "bound", "flow", "loosen_value", "loosen_units",
            "tighten_cost", "tighten_units", "tighten_blocked", "rate_low", "rate_high",
        ],
        [
            [str(ids.run_id)] * k,
            np.char.decode(ids.periods[np.maximum(inst.arc_period[arc], 0)]).tolist(),
            names.tolist(),
            list(map(str, ref_db.tolist())),
            decimal_text(bound, qd),
            decimal_text(outcome.flow[arc], qd),
            decimal_text(limits.loosen, cd),
            _units_text(limits.loosen_units, qd),
            _with_nulls(decimal_text(limits.tighten, cd), possible),
            _with_nulls(_units_text(limits.tighten_units, qd), possible),
            reasons.tolist(),
            low.tolist(),
            high.tolist(),
        ],
    )


def _copy_figures(conn, table, names, run_id, periods, ref_db, figures) -> None:
    """Binary COPY of ``(run, period, lane or site, figures...)`` rows.

    ``figures`` are ``(scaled integers, decimals, present or None)`` per NUMERIC column.
    """
    columns = [
        Column("int8", np.full(np.asarray(ref_db).shape[0], run_id, dtype=np.int64)),
        Column("text", periods),
        Column("int4", ref_db),
    ] + [Column("numeric", values, decimals, present=present) for values, decimals, present in figures]
    with conn.connection.driver_connection.cursor() as cur:
        copy_binary(cur, table, names, columns)


def _reasons(missing: np.ndarray, reason: str, k: int) -> list[str]:
    out = np.full(k, NULL, dtype=object)
    out[missing] = reason
    return out.tolist()


def _units_text(units: np.ndarray, qd: int) -> list[str]:
    # An unlimited bottleneck means the route has no capacity limit at all.
    arr = np.array(decimal_text(np.where(units == UNLIMITED, 0, units), qd), dtype=object)
    arr[units == UNLIMITED] = "Infinity"
    return arr.tolist()


def _per_site(inst: Instance, values: np.ndarray, kind: ArcKind, n_periods: int, n_sites: int) -> np.ndarray:
    """Sum ``values`` over the arcs of ``kind`` into a (period, site) grid, flattened."""
    sel = np.flatnonzero(inst.arc_kind == kind)
    grid = np.zeros(n_periods * n_sites, dtype=np.int64)
    if sel.shape[0]:
        np.add.at(grid, inst.arc_period[sel] * n_sites + inst.arc_ref[sel], np.asarray(values)[sel])
    return grid
