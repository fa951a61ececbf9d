"""Min-cost-flow instances of a planning week, as integer numpy arrays.

A week's network (sites, supply, demand, lanes) becomes a directed graph whose
arcs carry an integer unit cost and integer lower and upper bounds, plus an
integer net supply per node. Two virtual nodes make real weeks balance:

* ``SPARE`` absorbs the supply that plants do not ship, at zero cost. Its
  potential is fixed at 0, so a price reads "relative to a unit that would
  otherwise stay unused".
* ``SHORT`` delivers the demand that cannot (or should not) be met, at the
  customer's shortage penalty per unit. It is fed from ``SPARE`` at zero cost,
  so a unit short is equivalent to a unit of supply left unused.

A warehouse with a throughput capacity or a handling cost becomes two nodes,
``in -> out``, joined by one arc that carries that capacity and cost. Lanes
arrive at the ``in`` node and leave from the ``out`` node.

Costs are scaled to integers with ``cost_scale`` (10**4 by default, four
decimals) and quantities with ``quantity_scale`` (whole units by default), so
that the optimum, the prices and the certificate are exact integers.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from enum import IntEnum

import numpy as np

from planner.errors import PlannerError

INT64_MAX = np.iinfo(np.int64).max
#: Marker for "no value" in integer input arrays (no capacity, no penalty).
NONE = -1


class SiteKind(IntEnum):
    """Kind of a site; the integer codes used in arrays."""

    PLANT = 0
    WAREHOUSE = 1
    CUSTOMER = 2


class NodeRole(IntEnum):
    """What a node of the flow graph stands for."""

    SITE = 0  #: a site (the ``in`` node of a split warehouse)
    SITE_OUT = 1  #: the ``out`` node of a split warehouse
    SPARE = 2
    SHORT = 3


class ArcKind(IntEnum):
    """What an arc of the flow graph stands for."""

    LANE = 0  #: a lane of the input; ``arc_ref`` is the lane index
    THROUGHPUT = 1  #: warehouse in -> out; ``arc_ref`` is the site index
    TO_SPARE = 2  #: plant -> SPARE (unused supply); ``arc_ref`` is the site
    SHORTAGE = 3  #: SHORT -> customer (unmet demand); ``arc_ref`` is the site
    SPARE_TO_SHORT = 4  #: SPARE -> SHORT; ``arc_ref`` is -1
    STOCK = 5  #: inventory carried to the next period; ``arc_ref`` is the site


class OverflowError_(PlannerError):
    """The scaled instance does not fit the solver's 64-bit integers."""


@dataclass(frozen=True)
class WeekData:
    """The input of one period, already scaled to integers.

    Site arrays have one entry per site, lane arrays one per lane. Use
    :func:`scale_exact` to turn decimal figures into these integers.

    Parameters
    ----------
    site_kind : int8 array of :class:`SiteKind` codes.
    supply : int64 array, units a plant can ship (0 elsewhere).
    demand : int64 array, units a customer needs (0 elsewhere).
    shortage_penalty : int64 array, scaled cost per unit short, ``NONE`` (-1)
        where unmet demand is not allowed.
    throughput_capacity : int64 array, ``NONE`` where unlimited.
    handling_cost : int64 array, scaled cost per unit through a warehouse.
    lane_origin, lane_destination : int64 arrays of site indices.
    lane_cost : int64 array, scaled cost per unit (any sign).
    lane_capacity : int64 array, ``NONE`` where unlimited.
    lane_min : int64 array, minimum commitment (lower bound), 0 for none.
    holding_cost : int64 array, scaled cost per unit of stock carried to the
        next period (linked horizons only).
    storage_capacity : int64 array, units of stock a site may carry to the
        next period; 0 (the default) carries none, ``NONE`` is unlimited.
    """

    site_kind: np.ndarray
    supply: np.ndarray
    demand: np.ndarray
    shortage_penalty: np.ndarray
    throughput_capacity: np.ndarray
    handling_cost: np.ndarray
    lane_origin: np.ndarray
    lane_destination: np.ndarray
    lane_cost: np.ndarray
    lane_capacity: np.ndarray
    lane_min: np.ndarray
    holding_cost: np.ndarray | None = None
    storage_capacity: np.ndarray | None = None

    @property
    def n_sites(self) -> int:
        return int(self.site_kind.shape[0])

    @property
    def n_lanes(self) -> int:
        return int(self.lane_origin.shape[0])

    @classmethod
    def from_arrays(
        cls,
        site_kind,
        lane_origin,
        lane_destination,
        lane_cost,
        *,
        supply=None,
        demand=None,
        shortage_penalty=None,
        throughput_capacity=None,
        handling_cost=None,
        lane_capacity=None,
        lane_min=None,
        holding_cost=None,
        storage_capacity=None,
    ) -> "WeekData":
        """Build a week from array-likes, filling the optional ones.

        Examples
        --------
        >>> w = WeekData.from_arrays([0, 2], [0], [1], [5], supply=[4, 0], demand=[0, 3])
        >>> w.n_sites, w.n_lanes, int(w.lane_capacity[0])
        (2, 1, -1)
        """
        kind = np.asarray(site_kind, dtype=np.int8)
        n, m = kind.shape[0], len(lane_origin)

        def site_array(values, default):
            if values is None:
                return np.full(n, default, dtype=np.int64)
            return np.asarray(values, dtype=np.int64)

        def lane_array(values, default):
            if values is None:
                return np.full(m, default, dtype=np.int64)
            return np.asarray(values, dtype=np.int64)

        return cls(
            site_kind=kind,
            supply=site_array(supply, 0),
            demand=site_array(demand, 0),
            shortage_penalty=site_array(shortage_penalty, NONE),
            throughput_capacity=site_array(throughput_capacity, NONE),
            handling_cost=site_array(handling_cost, 0),
            lane_origin=np.asarray(lane_origin, dtype=np.int64),
            lane_destination=np.asarray(lane_destination, dtype=np.int64),
            lane_cost=np.asarray(lane_cost, dtype=np.int64),
            lane_capacity=lane_array(lane_capacity, NONE),
            lane_min=lane_array(lane_min, 0),
            holding_cost=site_array(holding_cost, 0),
            storage_capacity=site_array(storage_capacity, 0),
        )


@dataclass(frozen=True)
class Instance:
    """A min-cost-flow instance: integer arrays plus the map back to sites and lanes.

    ``supply`` is the net supply ``b`` of each node (positive at sources).
    ``upper`` holds a finite bound on every arc; where the input had none,
    ``unlimited`` is True and ``upper`` is a bound no optimal flow reaches.
    ``node_site``/``node_period`` and ``arc_ref``/``arc_period`` map nodes and
    arcs back to sites, lanes and periods (period 0 for a single week).
    """

    supply: np.ndarray
    tail: np.ndarray
    head: np.ndarray
    cost: np.ndarray
    lower: np.ndarray
    upper: np.ndarray
    unlimited: np.ndarray
    arc_kind: np.ndarray
    arc_ref: np.ndarray
    arc_period: np.ndarray
    node_role: np.ndarray
    node_site: np.ndarray
    node_period: np.ndarray
    site_node: np.ndarray  #: (n_periods, n_sites) node where a site's units arrive
    site_out_node: np.ndarray  #: (n_periods, n_sites) node lanes leave from
    spare: int
    short: int
    cost_scale: int = 10_000
    quantity_scale: int = 1
    lane_arc: np.ndarray = field(default_factory=lambda: np.empty((0, 0), np.int64))

    @property
    def n_nodes(self) -> int:
        return int(self.supply.shape[0])

    @property
    def n_arcs(self) -> int:
        return int(self.tail.shape[0])

    def currency(self, scaled_cost_per_unit):
        """Scaled cost per scaled quantity unit -> currency per quantity unit."""
        return np.asarray(scaled_cost_per_unit, dtype=np.float64) * (
            self.quantity_scale / self.cost_scale
        )

    def units(self, scaled_quantity):
        """Scaled quantity -> quantity in the stated unit."""
        return np.asarray(scaled_quantity, dtype=np.float64) / self.quantity_scale


def scale_exact(values, decimals: int, what: str) -> np.ndarray:
    """Scale decimal figures to int64 at ``decimals`` places, refusing any loss.

    Parameters
    ----------
    values : array-like of float
        Figures in their natural unit; NaN stays ``NONE`` (-1) in the result.
    decimals : int
        Number of decimal places kept.
    what : str
        Name of the figure, for the error message (for example ``"unit_cost"``).

    Returns
    -------
    numpy.ndarray of int64

    Raises
    ------
    PlannerError
        When a figure has more decimals than ``decimals`` or does not fit int64.

    Examples
    --------
    >>> scale_exact([1.25, 3.0], 2, "unit_cost").tolist()
    [125, 300]
    >>> scale_exact([1.255], 2, "unit_cost")
    Traceback (most recent call last):
    ...
    planner.errors.PlannerError: unit_cost 1.255 has more than 2 decimals; raise the precision
    """
    x = np.asarray(values, dtype=np.float64)
    missing = np.isnan(x)
    scaled = np.where(missing, 0.0, x) * (10.0**decimals)
    if np.any(np.abs(scaled) >= 2.0**62):
        bad = float(x[np.argmax(np.abs(scaled))])
        raise PlannerError(f"{what} {bad!r} does not fit 64-bit integers at {decimals} decimals")
    rounded = np.rint(scaled)
    off = np.abs(scaled - rounded) > 1e-6 * np.maximum(1.0, np.abs(scaled))
    if np.any(off):
        bad = float(x[np.argmax(off)])
        raise PlannerError(f"{what} {bad!r} has more than {decimals} decimals; raise the precision")
    out = rounded.astype(np.int64)
    out[missing] = NONE
    return out


def assemble_instance(week: WeekData, *, cost_scale: int = 10_000, quantity_scale: int = 1) -> Instance:
    """Turn one week into a min-cost-flow :class:`Instance`.

    Parameters
    ----------
    week : WeekData
        Scaled integer input of one period.
    cost_scale, quantity_scale : int
        The factors the input was scaled with (kept for reporting back).

    Returns
    -------
    Instance

    Examples
    --------
    Two plants, one customer needing 5 units:

    >>> w = WeekData.from_arrays([0, 0, 2], [0, 1], [2, 2], [10, 30],
    ...                          supply=[3, 4, 0], demand=[0, 0, 5])
    >>> inst = assemble_instance(w)
    >>> inst.n_nodes, inst.n_arcs, int(inst.supply[inst.spare])
    (5, 4, -2)
    """
    from planner.horizon import time_expand

    return time_expand([week], cost_scale=cost_scale, quantity_scale=quantity_scale)


def check_int64(inst: Instance) -> None:
    """Refuse instances whose cost sums could overflow the solver's int64.

    The cost-scaling solver multiplies unit costs by ``n_nodes + 1``
    internally, and the objective is a sum of cost times flow; both must stay
    inside 64-bit integers.

    Raises
    ------
    OverflowError_
        Naming the largest figure and a cost precision that would fit.
    """
    if inst.n_arcs == 0:
        return
    abs_cost = np.abs(inst.cost).astype(np.float64)
    max_cost = float(abs_cost.max())
    bound = float(np.dot(abs_cost, inst.upper.astype(np.float64)))
    limit = 2.0**62
    factor = max(max_cost * (inst.n_nodes + 1), bound) / limit
    if factor <= 1.0:
        return
    worst = int(np.argmax(abs_cost * inst.upper))
    drop = int(np.ceil(np.log10(factor)))
    # cost_scale = 10^(cost decimals + quantity decimals); advise on the cost decimals.
    decimals = int(round(np.log10(inst.cost_scale))) - int(round(np.log10(inst.quantity_scale)))
    kind = ArcKind(int(inst.arc_kind[worst])).name.lower()
    column = {
        "lane": "lanes.csv unit_cost",
        "throughput": "sites.csv handling_cost",
        "shortage": "demand.csv shortage_penalty",
        "stock": "sites.csv holding_cost",
    }.get(kind, kind)
    fits = decimals - drop
    advice = (
        f"use a cost precision of {fits} decimals (--cost-decimals {fits})"
        if fits >= 0
        else "reduce the figures or the quantity unit: no cost precision fits"
    )
    raise OverflowError_(
        f"costs at {decimals} decimals overflow 64-bit integers by a factor of about {factor:.3g}; "
        f"the largest cost x capacity term is in {column} (arc {worst}, scaled cost "
        f"{int(inst.cost[worst])}, bound {int(inst.upper[worst])}); {advice}"
    )
