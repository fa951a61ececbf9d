"""The planning model written once as a plain LP from the input, for outside solvers.

:func:`plan_lp` states a week (or a linked horizon of weeks) from the
``WeekData`` arrays alone, the way the README describes the model, without any
of the planner's code: one column per lane and week (a warehouse's handling
cost added to the lanes it ships on), per plant and week of unused supply, per
penalised customer and week of shortage, per site and week of stock carried to
the next week; one conservation row per site and week; one row per warehouse
and week capping what it ships at its throughput capacity. The LP is solved by
scipy's ``linprog(method="highs")`` (:func:`solve_plan`) or by HiGHS through
``highspy`` (:func:`highs_cost_ranging`), both outside references.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass

import numpy as np
import scipy.sparse as sp
from scipy.optimize import linprog

from planner.core.week import NONE, SiteKind, WeekData

#: HiGHS answers in floats; integer data has integer optima.
TOLERANCE = 1e-6


@dataclass(frozen=True)
class PlanLP:
    """The LP ``min c x`` s.t. ``A_eq x = b_eq``, ``A_ub x <= b_ub``, ``low <= x <= high``.

    ``lane_column[t][l]`` is the column of lane ``l`` in week ``t``;
    ``stock_column[(t, s)]`` the stock site ``s`` carries out of week ``t``.
    Rows of ``A_eq`` are ``t * n_sites + s``.
    """

    cost: np.ndarray
    a_eq: sp.csr_matrix
    b_eq: np.ndarray
    a_ub: sp.csr_matrix | None
    b_ub: np.ndarray | None
    low: np.ndarray
    high: np.ndarray  #: inf where unbounded
    lane_column: list[np.ndarray]
    stock_column: dict
    n_sites: int


def plan_lp(weeks: list[WeekData]) -> PlanLP:
    """The model of consecutive weeks (one week is the one-period case).

    A row per site and week reads ``out + unused + stock out - in - shortage -
    stock in = supply - demand``. A warehouse's handling cost and throughput
    capacity apply to the units it ships out in the week (stock waits before
    handling). Customers carry no stock; the last week carries none either. A
    customer with a penalty may be short even at zero demand.
    """
    n_weeks, n_sites = len(weeks), weeks[0].n_sites
    kind = weeks[0].site_kind
    costs, low, high, eq, ub, ub_rhs = [], [], [], [], [], []
    lane_column, stock_column = [], {}
    rhs = np.zeros(n_weeks * n_sites)

    def column(cost, lower, upper) -> int:
        costs.append(float(cost))
        low.append(float(lower))
        high.append(np.inf if upper is None else float(upper))
        return len(costs) - 1

    for t, w in enumerate(weeks):
        rows = t * n_sites
        rhs[rows : rows + n_sites] = w.supply - w.demand
        shipped_from: dict[int, list[int]] = {s: [] for s in range(n_sites)}
        columns = []
        for lane in range(w.n_lanes):
            o, d = int(w.lane_origin[lane]), int(w.lane_destination[lane])
            handling = int(w.handling_cost[o]) if kind[o] == SiteKind.WAREHOUSE else 0
            cap = int(w.lane_capacity[lane])
            j = column(int(w.lane_cost[lane]) + handling, w.lane_min[lane], None if cap == NONE else cap)
            eq += [(rows + o, j, 1.0), (rows + d, j, -1.0)]
            shipped_from[o].append(j)
            columns.append(j)
        lane_column.append(np.array(columns, dtype=np.int64))
        for s in range(n_sites):
            if w.supply[s] > 0:
                eq.append((rows + s, column(0, 0, w.supply[s]), 1.0))
            if w.shortage_penalty[s] != NONE:
                eq.append((rows + s, column(w.shortage_penalty[s], 0, None), -1.0))
            if kind[s] == SiteKind.WAREHOUSE and w.throughput_capacity[s] != NONE:
                ub += [(len(ub_rhs), j, 1.0) for j in shipped_from[s]]
                ub_rhs.append(float(w.throughput_capacity[s]))
            store = int(w.storage_capacity[s]) if w.storage_capacity is not None else 0
            if t + 1 < n_weeks and kind[s] != SiteKind.CUSTOMER and store != 0:
                j = column(w.holding_cost[s], 0, None if store == NONE else store)
                eq += [(rows + s, j, 1.0), (rows + n_sites + s, j, -1.0)]
                stock_column[(t, s)] = j

    def matrix(entries, n_rows):
        r, c, v = zip(*entries) if entries else ((), (), ())
        return sp.csr_matrix((v, (r, c)), shape=(n_rows, len(costs)))

    return PlanLP(
        cost=np.array(costs),
        a_eq=matrix(eq, rhs.shape[0]),
        b_eq=rhs,
        a_ub=matrix(ub, len(ub_rhs)) if ub_rhs else None,
        b_ub=np.array(ub_rhs) if ub_rhs else None,
        low=np.array(low),
        high=np.array(high),
        lane_column=lane_column,
        stock_column=stock_column,
        n_sites=n_sites,
    )


@dataclass(frozen=True)
class Plan:
    """scipy HiGHS's answer: cost (the integer it must be), lane flows per week, site duals."""

    feasible: bool
    cost: int | None = None  #: None when feasible but unbounded
    lane_flow: list[np.ndarray] | None = None
    price: np.ndarray | None = None  #: (weeks, sites): -d cost / d (supply - demand), the planner's sign


def exact_integer(value: float, what: str) -> int:
    """The integer a float from a reference solver stands for; fail loudly if it is not one."""
    nearest = round(value)
    assert abs(value - nearest) <= TOLERANCE * max(1.0, abs(value)), f"{what} {value!r} is not integral"
    return int(nearest)


def solve_plan(weeks: list[WeekData] | WeekData) -> Plan:
    """Solve :func:`plan_lp` with scipy's ``linprog(method="highs")``."""
    weeks = [weeks] if isinstance(weeks, WeekData) else list(weeks)
    if any(((w.lane_capacity != NONE) & (w.lane_min > w.lane_capacity)).any() for w in weeks):
        return Plan(False)  # a minimum above its capacity admits no plan
    lp = plan_lp(weeks)
    result = linprog(
        lp.cost, A_ub=lp.a_ub, b_ub=lp.b_ub, A_eq=lp.a_eq, b_eq=lp.b_eq,
        bounds=np.column_stack([lp.low, np.where(np.isinf(lp.high), None, lp.high)]), method="highs",
    )
    if result.status == 2:
        return Plan(False)
    if result.status == 3:  # a negative cycle without capacity: no least cost
        return Plan(True, None)
    assert result.status == 0, f"HiGHS stopped with status {result.status}: {result.message}"
    flows = [np.rint(result.x[cols]).astype(np.int64) for cols in lp.lane_column]
    price = -np.asarray(result.eqlin.marginals).reshape(len(weeks), lp.n_sites)
    return Plan(True, exact_integer(result.fun, "HiGHS optimal cost"), flows, price)


def optimal_cost(weeks: list[WeekData] | WeekData) -> int | float | None:
    """The optimal cost by scipy HiGHS, None when no plan exists, minus infinity when unbounded."""
    plan = solve_plan(weeks)
    if not plan.feasible:
        return None
    return -math.inf if plan.cost is None else plan.cost


def highs_cost_ranging(week: WeekData) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """HiGHS's cost ranging of each lane column of one week: ``(down, up, value)``.

    ``down``/``up`` are the lowest and highest lane rates (handling removed)
    for which HiGHS's optimal basis stays optimal; infinite where unbounded.
    ``value`` is HiGHS's lane flow.
    """
    import highspy

    lp = plan_lp([week])
    model = highspy.HighsLp()
    a = sp.vstack([lp.a_eq] + ([lp.a_ub] if lp.a_ub is not None else [])).tocsc()
    n_ub = 0 if lp.a_ub is None else lp.a_ub.shape[0]
    model.num_col_, model.num_row_ = a.shape[1], a.shape[0]
    model.col_cost_ = lp.cost
    model.col_lower_ = lp.low
    model.col_upper_ = np.where(np.isinf(lp.high), highspy.kHighsInf, lp.high)
    model.row_lower_ = np.concatenate([lp.b_eq, np.full(n_ub, -highspy.kHighsInf)])
    model.row_upper_ = np.concatenate([lp.b_eq, lp.b_ub if n_ub else np.empty(0)])
    model.a_matrix_.format_ = highspy.MatrixFormat.kColwise
    model.a_matrix_.start_ = a.indptr
    model.a_matrix_.index_ = a.indices
    model.a_matrix_.value_ = a.data
    highs = highspy.Highs()
    highs.setOptionValue("output_flag", False)
    highs.passModel(model)
    highs.run()
    assert highs.getModelStatus() == highspy.HighsModelStatus.kOptimal
    _, ranging = highs.getRanging()
    cols = lp.lane_column[0]
    handling = lp.cost[cols] - week.lane_cost
    down = np.asarray(ranging.col_cost_dn.value_)[cols] - handling
    up = np.asarray(ranging.col_cost_up.value_)[cols] - handling
    return down, up, np.asarray(highs.getSolution().col_value)[cols]


def with_lane(week: WeekData, lane: int, **changes: int) -> WeekData:
    """``week`` with one lane's ``capacity``, ``minimum`` or ``cost`` changed by the given amounts."""
    fields = {"capacity": "lane_capacity", "minimum": "lane_min", "cost": "lane_cost"}
    arrays = {}
    for name, delta in changes.items():
        values = getattr(week, fields[name]).copy()
        values[lane] += delta
        arrays[fields[name]] = values
    return dataclasses.replace(week, **arrays)


def with_site(week: WeekData, site: int, **changes: int) -> WeekData:
    """``week`` with one site's ``throughput``, ``storage`` or ``supply`` changed by the given amounts."""
    fields = {"throughput": "throughput_capacity", "storage": "storage_capacity", "supply": "supply", "demand": "demand"}
    arrays = {}
    for name, delta in changes.items():
        values = getattr(week, fields[name]).copy()
        values[site] += delta
        arrays[fields[name]] = values
    return dataclasses.replace(week, **arrays)
