"""The input of one planning period as scaled integer arrays.

A :class:`WeekData` holds one period's sites, supply, demand and lanes with
every figure already scaled to an integer (:func:`scale_exact`): unit costs by
``10**cost_decimals``, quantities by ``10**quantity_decimals``. It is what the
database side reads a snapshot into, and what :mod:`planner.core.network`
turns into a min-cost-flow instance.
"""

from __future__ import annotations

from dataclasses import dataclass
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
