"""Reports on stored runs, read from the reporting views.

The views (created by migration 0003) show the latest optimal week run of every
period; each has a function ``<view>_of_run(run_id)`` with the same columns for
any one run:

=====================  =====================================================
``site_price_history``  price of every site and week, its range, degeneracy
``lane_flow``           flow, capacity, utilisation, cost and reduced cost
``binding_capacity``    lanes and warehouses at capacity, ranked by value
``shortage``            customers left short and the penalty paid
``run_summary``         cost, dual objective, certificate, timings per run
``limit_value``         every limit at its bound, both one-sided values
=====================  =====================================================

The functions here return pandas DataFrames (exact :class:`~decimal.Decimal`
numbers, one row per view row) for the command line, the charts, the HTML
report and Python users. Every query binds its values as parameters.
:data:`READER_ROLE` is the database role that may read the views and nothing else.
"""

from __future__ import annotations

import datetime
import math
from dataclasses import dataclass, field
from decimal import Decimal

import pandas as pd
from sqlalchemy import Connection, Engine, text

from planner.database.settings import DEFAULT_CURRENCY, currency
from planner.errors import PlannerError
from planner.periods import parse_week, week_code
from planner.reports.catalog import RunInfo, choose_run
from planner.reports.formats import Precision

__all__ = [
    "READER_ROLE",
    "REPORT_SECTIONS",
    "VIEWS",
    "WeekReport",
    "binding_capacities",
    "cost_breakdown",
    "format_number",
    "full_without_value",
    "limit_values",
    "lane_flows",
    "network_of_week",
    "previous_week",
    "price_moves",
    "run_summaries",
    "shortages",
    "site_prices",
    "view_source",
    "week_report",
]

#: The reporting views, in the order the README documents them.
VIEWS = ("site_price_history", "lane_flow", "binding_capacity", "shortage", "run_summary", "limit_value")
#: NOLOGIN role (cluster-wide) allowed to SELECT the views and EXECUTE their functions.
READER_ROLE = "planner_reader"
#: Sections of the weekly report, in the order they are shown.
REPORT_SECTIONS = ("cost", "binding", "moves", "shortages")
SITE_KINDS = ("plant", "warehouse", "customer")


def view_source(view: str, run_id: int | None = None) -> str:
    """SQL ``FROM`` item of a reporting view, or of its function for one run.

    The run id stays a bound parameter (``:run_id``); only the view name, checked
    against :data:`VIEWS`, is written into the SQL.

    Parameters
    ----------
    view : str
        One of :data:`VIEWS`.
    run_id : int, optional
        A run id: the function ``<view>_of_run`` instead of the view.

    Returns
    -------
    str

    Raises
    ------
    ValueError
        If ``view`` is not a reporting view.

    Examples
    --------
    >>> view_source("lane_flow")
    'lane_flow'
    >>> view_source("lane_flow", run_id=42)
    'lane_flow_of_run(:run_id)'
    """
    if view not in VIEWS:
        raise ValueError(f"{view!r} is not a reporting view; choose one of {', '.join(VIEWS)}")
    return view if run_id is None else f"{view}_of_run(:run_id)"


def format_number(value, decimals: int = 2) -> str:
    """A figure for a table: thousands separators, at least ``decimals`` places, no
    trailing zeros beyond them; ``-`` for none.

    Examples
    --------
    >>> format_number(Decimal("12.0000")), format_number(Decimal("0.4567")), format_number(Decimal("1234567.5")), format_number(None)
    ('12.00', '0.4567', '1,234,567.50', '-')
    >>> format_number(Decimal("50"), 0)
    '50'
    """
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "-"
    exact = Decimal(str(value)).normalize()
    places = max(decimals, -exact.as_tuple().exponent if exact.as_tuple().exponent < 0 else 0)
    return f"{exact:,.{places}f}"


def _frame(conn: Connection, query: str, params: dict) -> pd.DataFrame:
    # object columns keep the database's values as they are: Decimal, None for NULL.
    # Built column by column, which is several times faster than from row objects.
    result = conn.execute(text(query), params)
    names = list(result.keys())
    columns = list(zip(*result.fetchall())) or [()] * len(names)
    return pd.DataFrame({name: pd.Series(values, dtype=object) for name, values in zip(names, columns)})


def _connect(engine: Engine) -> Connection:
    """A connection for report queries (used as a context manager).

    Just-in-time compilation is off for its transaction: on a week of 500,000 lanes
    PostgreSQL's cost estimates cross the JIT thresholds, and compiling then takes
    longer than the query itself.
    """
    conn = engine.connect()
    conn.execute(text("SET LOCAL jit = off"))
    return conn


def _read(engine: Engine, query: str, params: dict) -> pd.DataFrame:
    with _connect(engine) as conn:
        return _frame(conn, query, params)


def _check_week(period: str | None) -> None:
    if period is not None:
        parse_week(period)


def site_prices(
    engine: Engine,
    site: str | None = None,
    first: str | None = None,
    last: str | None = None,
    *,
    kind: str | None = None,
    run_id: int | None = None,
) -> pd.DataFrame:
    """Site prices with their ranges, from ``site_price_history``, by period then site.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    site : str, optional
        One site code (default: every site).
    first, last : str, optional
        First and last ISO week to include (default: all solved weeks).
    kind : {"plant", "warehouse", "customer"}, optional
        Only sites of this kind.
    run_id : int, optional
        One run instead of the latest optimal run of each week.

    Returns
    -------
    pandas.DataFrame
        The view's columns: ``period``, ``starts_on``, ``site``, ``kind``, ``name``,
        ``region``, ``price``, ``price_low``, ``price_high``, ``degenerate``,
        ``price_change``, ``run_id``, ``x``, ``y``.

    Raises
    ------
    ValueError
        If a week code is invalid or ``kind`` is not a site kind.
    PlannerError
        If ``site`` names no known site.
    """
    for week in (first, last):
        _check_week(week)
    if kind is not None and kind not in SITE_KINDS:
        raise ValueError(f"kind {kind!r} is not a site kind; choose one of {', '.join(SITE_KINDS)}")
    params = {
        "site": site,
        "kind": kind,
        "first": None if first is None else parse_week(first),
        "last": None if last is None else parse_week(last),
        "run_id": run_id,
    }
    query = (
        f"SELECT * FROM {view_source('site_price_history', run_id)} "
        "WHERE (CAST(:site AS text) IS NULL OR site = :site) "
        "AND (CAST(:kind AS text) IS NULL OR kind = :kind) "
        "AND (CAST(:first AS date) IS NULL OR starts_on >= :first) "
        "AND (CAST(:last AS date) IS NULL OR starts_on <= :last) "
        "ORDER BY starts_on, site"
    )
    with _connect(engine) as conn:
        if site is not None and conn.execute(
            text("SELECT 1 FROM site WHERE code = :site"), {"site": site}
        ).first() is None:
            raise PlannerError(f"site {site} is not known; check the code in sites.csv")
        return _frame(conn, query, params)


def lane_flows(engine: Engine, period: str | None = None, *, run_id: int | None = None) -> pd.DataFrame:
    """Rows of ``lane_flow`` for one week (or all), by period then lane label.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    period : str, optional
        ISO week (default: every solved week).
    run_id : int, optional
        One run instead of the latest optimal run of each week.

    Returns
    -------
    pandas.DataFrame
        ``period``, ``origin``, ``destination``, ``mode``, ``flow``, ``capacity``,
        ``utilisation``, ``unit_cost``, ``reduced_cost``, ``capacity_value``, ``cost``,
        ``echelon``, ``at_capacity``, ``min_quantity``, ``starts_on``, ``run_id``,
        ``lane_id``, ``label``.
    """
    _check_week(period)
    return _read(
        engine,
        f"SELECT * FROM {view_source('lane_flow', run_id)} "
        "WHERE (CAST(:period AS text) IS NULL OR period = :period) ORDER BY starts_on, label",
        {"period": period, "run_id": run_id},
    )


def binding_capacities(
    engine: Engine,
    period: str | None = None,
    *,
    top: int | None = None,
    run_id: int | None = None,
    full_without_value: bool = False,
) -> pd.DataFrame:
    """Capacities used to the limit, most valuable first, from ``binding_capacity``.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    period : str, optional
        ISO week (default: every solved week).
    top : int, optional
        At most this many rows per call (by rank; default all).
    run_id : int, optional
        One run instead of the latest optimal run of each week.
    full_without_value : bool
        Also the capacities that are full but worth nothing more (status
        ``full, no value``, no rank), after the ranked ones.

    Returns
    -------
    pandas.DataFrame
        ``period``, ``rank``, ``kind`` (``lane``, ``warehouse`` or ``storage``),
        ``label``, ``capacity_value`` (exactly what one more unit of capacity
        saves), ``capacity``, ``flow``, ``origin``, ``destination``, ``mode``,
        ``site``, ``starts_on``, ``run_id``, ``value_less`` (what one unit less
        costs; NULL where it leaves no feasible plan), ``units_more``,
        ``units_less`` (units each holds for at least), ``less_blocked`` (why
        one unit less is impossible), ``status``.
    """
    _check_week(period)
    return _read(
        engine,
        f"SELECT * FROM {view_source('binding_capacity', run_id)} "
        "WHERE (CAST(:period AS text) IS NULL OR period = :period) "
        "AND (:full OR status = 'binding') "
        "ORDER BY starts_on, rank, label LIMIT :top",
        {"period": period, "top": top, "run_id": run_id, "full": full_without_value},
    )


def full_without_value(engine: Engine, period: str, *, run_id: int | None = None) -> int:
    """How many capacities of a week are full but worth nothing more (degeneracy)."""
    _check_week(period)
    with _connect(engine) as conn:
        return int(
            conn.execute(
                text(
                    f"SELECT count(*) FROM {view_source('binding_capacity', run_id)} "
                    "WHERE period = :period AND status = 'full, no value'"
                ),
                {"period": period, "run_id": run_id},
            ).scalar_one()
        )


def limit_values(engine: Engine, period: str | None = None, *, run_id: int | None = None) -> pd.DataFrame:
    """Every limit at its bound with both one-sided values, from ``limit_value``, most valuable first.

    Returns
    -------
    pandas.DataFrame
        ``period``, ``kind`` (``lane capacity``, ``lane minimum``, ``warehouse
        throughput``, ``storage``), ``label``, ``bound``, ``flow``, ``loosen_value``
        (what one unit more capacity, or one unit less commitment, saves),
        ``loosen_units``, ``tighten_cost`` (what one unit less capacity, or one
        more unit committed, costs; NULL where impossible), ``tighten_units``,
        ``tighten_blocked``, ``rate_low``, ``rate_high`` (the lane's rate range;
        -Infinity / Infinity where open), ``unit_cost``, ``origin``,
        ``destination``, ``mode``, ``site``, ``starts_on``, ``run_id``.
    """
    _check_week(period)
    return _read(
        engine,
        f"SELECT * FROM {view_source('limit_value', run_id)} "
        "WHERE (CAST(:period AS text) IS NULL OR period = :period) "
        "ORDER BY starts_on, loosen_value DESC, label, kind",
        {"period": period, "run_id": run_id},
    )


def shortages(engine: Engine, period: str | None = None, *, run_id: int | None = None) -> pd.DataFrame:
    """Customers left short, largest shortage first, from ``shortage``.

    Returns
    -------
    pandas.DataFrame
        ``period``, ``customer``, ``units_short``, ``penalty`` (per unit),
        ``penalty_cost``, ``demand``, ``name``, ``region``, ``price``, ``starts_on``,
        ``run_id``.
    """
    _check_week(period)
    return _read(
        engine,
        f"SELECT * FROM {view_source('shortage', run_id)} "
        "WHERE (CAST(:period AS text) IS NULL OR period = :period) "
        "ORDER BY starts_on, units_short DESC, customer",
        {"period": period, "run_id": run_id},
    )


def run_summaries(engine: Engine, period: str | None = None, *, run_id: int | None = None) -> pd.DataFrame:
    """The latest optimal run of each week and of each horizon (or one run), from ``run_summary``.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    period : str, optional
        Only this row's ``period`` (an ISO week, or ``FIRST..LAST`` for a horizon).
    run_id : int, optional
        This run, whatever its status.

    Returns
    -------
    pandas.DataFrame
        ``period``, ``status``, ``cost``, ``dual_objective``, ``certificate_ok``,
        ``shortage_units``, ``solved_at``, ``input_fingerprint``, ``solver_seconds``,
        ``kind``, ``run_id``, ``first_period``, ``last_period``, ``starts_on``,
        ``duality_gap``, ``spare_units``, ``total_seconds``, ``batch_id``, ``message``.
    """
    return _read(
        engine,
        f"SELECT * FROM {view_source('run_summary', run_id)} "
        "WHERE (CAST(:period AS text) IS NULL OR period = :period) "
        "ORDER BY starts_on, kind DESC, last_period",
        {"period": period, "run_id": run_id},
    )


def previous_week(period: str) -> str:
    """ISO week before ``period``.

    Examples
    --------
    >>> previous_week("2027-W01")
    '2026-W53'
    """
    return week_code(parse_week(period) - datetime.timedelta(days=7))


def cost_breakdown(engine: Engine, period: str, *, run_id: int | None = None) -> pd.DataFrame:
    """A week's cost by echelon and mode, plus warehouse handling, stock holding and shortage penalties.

    The rows add up to the week's cost (for a week run, the run's cost): lane
    costs (``flow * unit_cost``) over the lanes in use, grouped by echelon
    (``plant->warehouse``, ``plant->customer``, ``warehouse->customer``, ...,
    in the order goods move) then mode, then ``warehouse handling``
    (throughput times handling cost), ``stock holding`` (units carried to the
    next week times the holding cost; linked horizons only) and ``shortage
    penalty``.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    period : str
        ISO week.
    run_id : int, optional
        A run that covers ``period``: a week run of it, or a linked horizon
        (default: the week's latest optimal run).

    Returns
    -------
    pandas.DataFrame
        ``echelon``, ``mode``, ``units``, ``cost``; empty when the week has no run.
    """
    _check_week(period)
    with _connect(engine) as conn:
        run = _week_run(conn, period, run_id)
        if run is None:
            return pd.DataFrame(columns=["echelon", "mode", "units", "cost"], dtype=object)
        # With the run's ids known, PostgreSQL plans with their values and estimates
        # the rows of the big tables well (a view's lateral run lookup hides them).
        return _frame(conn, _COST_BREAKDOWN, run)


_COST_BREAKDOWN = """
SELECT echelon, mode, units, cost FROM (
    SELECT 1 AS part, ok.rank * 3 + dk.rank AS stage, ov.kind || '->' || dv.kind AS echelon, l.mode,
           sum(f.flow) AS units, sum(f.flow * lr.unit_cost) AS cost
    FROM run_flow f
    JOIN lane_rate lr ON lr.batch_id = :batch_id AND lr.period_id = :period_id
         AND lr.lane_id = f.lane_id
    JOIN lane l ON l.id = f.lane_id
    JOIN site_version ov ON ov.batch_id = :batch_id AND ov.site_id = l.origin_id
    JOIN site_version dv ON dv.batch_id = :batch_id AND dv.site_id = l.destination_id
    JOIN (VALUES ('plant', 0), ('warehouse', 1), ('customer', 2)) ok (kind, rank) ON ok.kind = ov.kind
    JOIN (VALUES ('plant', 0), ('warehouse', 1), ('customer', 2)) dk (kind, rank) ON dk.kind = dv.kind
    WHERE f.run_id = :run_id AND f.period = :period AND f.flow > 0
    GROUP BY 2, 3, 4
    UNION ALL
    SELECT 2, 0, 'warehouse handling', '', sum(r.throughput_flow),
           sum(r.throughput_flow * sv.handling_cost)
    FROM run_site_price r
    JOIN site_version sv ON sv.batch_id = :batch_id AND sv.site_id = r.site_id
    WHERE r.run_id = :run_id AND r.period = :period AND sv.handling_cost > 0
    HAVING count(*) > 0
    UNION ALL
    SELECT 3, 0, 'stock holding', '', sum(s.stock), sum(s.stock * s.holding_cost)
    FROM run_stock s
    WHERE s.run_id = :run_id AND s.period = :period AND s.stock > 0
    HAVING count(*) > 0
    UNION ALL
    SELECT 4, 0, 'shortage penalty', '', sum(r.shortage), sum(r.shortage * d.shortage_penalty)
    FROM run_site_price r
    JOIN demand d ON d.batch_id = :batch_id AND d.period_id = :period_id AND d.site_id = r.site_id
    WHERE r.run_id = :run_id AND r.period = :period AND r.shortage > 0
    HAVING count(*) > 0
) parts
ORDER BY part, stage, mode = '', mode, echelon
"""


def _week_run(conn: Connection, period: str, run_id: int | None) -> dict | None:
    """``run_id``, ``period_id``, ``period`` (code), ``batch_id`` of the optimal run reported on in ``period``, or None.

    Without ``run_id``, the week's latest optimal run (decided by the
    ``latest_week_run`` view alone). A linked horizon stores no batch: each of
    its weeks was read from the newest batch loaded before the run was stored.
    """
    row = conn.execute(
        text(
            "SELECT r.id AS run_id, p.id AS period_id, p.code AS period, coalesce(r.batch_id, ("
            "  SELECT max(ps.batch_id) FROM period_snapshot ps JOIN load_batch b ON b.id = ps.batch_id"
            "  WHERE ps.period_id = p.id AND b.loaded_at <= r.started_at)) AS batch_id "
            "FROM solve_run r JOIN period f ON f.id = r.first_period_id JOIN period l ON l.id = r.last_period_id "
            "JOIN period p ON p.code = :period AND p.starts_on BETWEEN f.starts_on AND l.starts_on "
            "WHERE r.status = 'optimal' AND r.id = coalesce(CAST(:run_id AS bigint), "
            "  (SELECT run_id FROM latest_week_run WHERE period = :period))"
        ),
        {"period": period, "run_id": run_id},
    ).mappings().first()
    return None if row is None else dict(row)


def price_moves(
    engine: Engine,
    period: str,
    *,
    top: int | None = 10,
    run_id: int | None = None,
    previous_run_id: int | None = None,
) -> pd.DataFrame:
    """Sites whose price changed most from the previous ISO week, largest change first.

    Compares the prices of ``period`` (its latest optimal run, or ``run_id``)
    with those of the week before: in ``previous_run_id`` when given (a linked
    horizon's own previous week), else in that week's latest optimal run.
    Sites whose price did not change are left out.

    Returns
    -------
    pandas.DataFrame
        ``site``, ``kind``, ``region``, ``previous_price``, ``price``, ``change``,
        ``price_low``, ``price_high``, ``degenerate``; empty when either week has
        no optimal run.
    """
    _check_week(period)
    # Each week is read on its own and the two are matched here: joined in one
    # query on the site code, PostgreSQL's estimates of the two views led it to
    # a nested loop of every site against every site (0.5 s at 2,200 sites
    # after three years of history).
    columns = "site, kind, region, price, price_low, price_high, degenerate"
    previous_source = "site_price_history" if previous_run_id is None else "site_price_history_of_run(:previous_run)"
    with _connect(engine) as conn:
        cur = _frame(conn, f"SELECT {columns} FROM {view_source('site_price_history', run_id)} "
                           "WHERE period = :period", {"period": period, "run_id": run_id})
        prev = _frame(conn, f"SELECT site, price AS previous_price FROM {previous_source} WHERE period = :previous",
                      {"previous": previous_week(period), "previous_run": previous_run_id})
    moved = cur.merge(prev, on="site", how="inner")
    moved = moved[moved["price"] != moved["previous_price"]]
    moved.insert(5, "change", moved["price"] - moved["previous_price"])
    moved = moved.assign(_size=moved["change"].map(abs)).sort_values(["_size", "site"], ascending=[False, True])
    moved = moved.drop(columns="_size").reset_index(drop=True)
    order = ["site", "kind", "region", "previous_price", "price", "change", "price_low", "price_high", "degenerate"]
    return (moved if top is None else moved.head(top))[order]


def network_of_week(
    engine: Engine, period: str, *, max_lanes: int = 3000, run_id: int | None = None
) -> tuple[pd.DataFrame, pd.DataFrame, int]:
    """Sites and busiest lanes of a week, for the network picture.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    period : str
        ISO week.
    max_lanes : int
        At most this many lanes in use, the busiest first.
    run_id : int, optional
        One run instead of the week's latest optimal run.

    Returns
    -------
    sites : pandas.DataFrame
        ``site``, ``kind``, ``region``, ``x``, ``y``, ``units_short`` (at customers left short, else None).
    lanes : pandas.DataFrame
        ``origin``, ``destination``, ``mode``, ``flow``, ``at_capacity``.
    lanes_in_use : int
        How many lanes carry flow in the week (may exceed ``len(lanes)``).
    """
    _check_week(period)
    params = {"period": period, "run_id": run_id, "limit": max_lanes}
    with _connect(engine) as conn:
        sites = _frame(
            conn,
            f"SELECT h.site, h.kind, h.region, h.x, h.y, s.units_short "
            f"FROM {view_source('site_price_history', run_id)} h "
            f"LEFT JOIN {view_source('shortage', run_id)} s ON s.customer = h.site AND s.period = h.period "
            "WHERE h.period = :period ORDER BY h.site",
            params,
        )
        lanes = _frame(
            conn,
            "SELECT origin, destination, mode, flow, at_capacity, count(*) OVER () AS lanes_in_use "
            f"FROM {view_source('lane_flow', run_id)} WHERE period = :period AND flow > 0 "
            "ORDER BY flow DESC, at_capacity DESC, label LIMIT :limit",
            params,
        )
    in_use = 0 if lanes.empty else lanes["lanes_in_use"].iloc[0]
    lanes = lanes.drop(columns="lanes_in_use")
    return sites, lanes, int(in_use)


@dataclass(frozen=True)
class WeekReport:
    """Everything the weekly report shows about one week.

    ``run`` is the ``run_summary`` row of the run reported on (a week run, or
    the linked horizon the week belongs to), or None when the week has no
    optimal run (then ``message`` says why and what to do, and the tables are
    empty). ``previous_period`` is the week the prices are compared with, or
    None when there is none to compare with (a note says why).
    """

    period: str | None
    previous_period: str | None
    run: dict | None
    cost: pd.DataFrame
    binding: pd.DataFrame
    moves: pd.DataFrame
    shortages: pd.DataFrame
    message: str = ""
    notes: list[str] = field(default_factory=list)
    currency: str = DEFAULT_CURRENCY
    precision: Precision = Precision()

    @property
    def empty(self) -> bool:
        """True when there is no run to report on."""
        return self.run is None

    @property
    def horizon(self) -> bool:
        """True when the week is one week of a linked horizon run."""
        return self.run is not None and self.run["kind"] == "horizon"

    def sections(self) -> dict[str, pd.DataFrame]:
        """The report's tables by section name (:data:`REPORT_SECTIONS`)."""
        return {"cost": self.cost, "binding": self.binding, "moves": self.moves, "shortages": self.shortages}

    @property
    def cost_total(self) -> Decimal:
        """Sum of the cost breakdown: the week's cost (for a week run, the run's cost)."""
        return sum(self.cost["cost"], Decimal(0))


def _newest_attempt(conn: Connection, period: str) -> dict | None:
    row = conn.execute(
        text("SELECT run_id AS id, status FROM newest_week_run WHERE period = :period"), {"period": period}
    ).mappings().first()
    return None if row is None else dict(row)


def _comparison(conn: Connection, run: RunInfo, period: str) -> tuple[str | None, int | None, str]:
    """The week ``period`` is compared with: ``(week, run of that week or None for its latest, why not)``.

    Inside a linked horizon, the horizon's own previous week; otherwise the
    previous ISO week's latest optimal run. None, with the reason, when there
    is no such week to compare with.
    """
    previous = previous_week(period)
    if run.kind != "week" and run.covers(previous):
        return previous, run.run_id, ""
    if conn.execute(text("SELECT 1 FROM latest_week_run WHERE period = :p"), {"p": previous}).first():
        return previous, None, ""
    loaded = conn.execute(
        text("SELECT 1 FROM period p JOIN period_snapshot ps ON ps.period_id = p.id WHERE p.code = :p LIMIT 1"),
        {"p": previous},
    ).first()
    why = "was never loaded" if loaded is None else "has no optimal run"
    return None, None, f"no previous week to compare prices with: {previous} {why}"


def week_report(
    engine: Engine, period: str | None = None, *, top: int = 10, run_id: int | None = None
) -> WeekReport:
    """The weekly report of ``period``: cost, binding capacities, price moves, shortages.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    period : str, optional
        ISO week, for example ``"2026-W49"``; may be left out with a ``run_id``
        of one week.
    top : int
        How many binding capacities and price moves to show.
    run_id : int, optional
        Any optimal run to report on (default: the week's latest optimal run);
        for a linked horizon, ``period`` picks the week.

    Returns
    -------
    WeekReport
        With ``run`` None and a ``message`` when the week has no optimal run.

    Raises
    ------
    PlannerError
        A bad week code, an unknown run, a week the run does not cover.
    NotOptimal
        When run ``run_id`` did not end optimal.
    """
    chosen = choose_run(engine, period=period, run_id=run_id)
    empty = pd.DataFrame()
    with _connect(engine) as conn:
        money = currency(conn)
        if chosen.run is None:
            return WeekReport(period, None, None, empty, empty, empty, empty, message=chosen.message, currency=money)
        info, period = chosen.run, chosen.period
        run = _frame(conn, "SELECT * FROM run_summary_of_run(:run)", {"run": info.run_id}).iloc[0].to_dict()
        newest = _newest_attempt(conn, period)
        previous, previous_run, why_not = _comparison(conn, info, period)
    notes = []
    if run_id is None and newest is not None and newest["id"] != info.run_id:
        notes.append(
            f"the newest run of {period} (run {newest['id']}) ended {newest['status']}; "
            f"this report shows run {info.run_id}, the latest optimal one"
        )
    if why_not:
        notes.append(why_not)
    full = full_without_value(engine, period, run_id=info.run_id)
    if full:
        notes.append(
            f"{full} more {'capacity is' if full == 1 else 'capacities are'} full but worth nothing more "
            "(one more unit would save nothing: status 'full, no value' in binding_capacity)"
        )
    moves = (
        price_moves(engine, period, top=top, run_id=info.run_id, previous_run_id=previous_run)
        if previous is not None else pd.DataFrame()
    )
    return WeekReport(
        period=period,
        previous_period=previous,
        run=run,
        cost=cost_breakdown(engine, period, run_id=info.run_id),
        binding=binding_capacities(engine, period, top=top, run_id=info.run_id),
        moves=moves,
        shortages=shortages(engine, period, run_id=info.run_id),
        notes=notes,
        currency=money,
        precision=Precision(info.cost_decimals, info.quantity_decimals),
    )
