"""A linked horizon's snapshots, put on one site and lane list.

A linked horizon solves consecutive weeks as one time-expanded network, so its
weeks must share site and lane indices. :func:`horizon_snapshots` reads each
week's snapshot (the current one, or the batch a stored run used) and re-indexes
them onto the union of their sites and lanes; a lane missing from a week exists
there with no capacity. Solving a horizon (:mod:`planner.runs.horizon`) and
reading a stored horizon run back (:mod:`planner.database.reopen`) both use it.
"""

from __future__ import annotations

import hashlib

import numpy as np
from sqlalchemy import Connection

from planner.core.week import NONE, WeekData
from planner.database.snapshot import Scaling, Snapshot, read_lanes, read_snapshot, run_fingerprint

__all__ = ["horizon_fingerprint", "horizon_snapshots"]


def horizon_fingerprint(snapshots: list[Snapshot], scaling: Scaling) -> str:
    """A horizon run's input fingerprint: its weeks' snapshots, in order, and the precision."""
    return hashlib.sha256("|".join(run_fingerprint(s.fingerprint, scaling) for s in snapshots).encode()).hexdigest()


def horizon_snapshots(
    conn: Connection, periods: list[str], scaling: Scaling, batch_ids: list[int] | None = None
) -> tuple[list[Snapshot], dict]:
    """The snapshots of ``periods`` re-indexed onto one site and lane list.

    Parameters
    ----------
    conn : sqlalchemy.Connection
    periods : list of str
        Consecutive ISO weeks.
    scaling : Scaling
    batch_ids : list of int, optional
        The load batch to read each period from (a stored run's input); default:
        each period's current snapshot.

    Returns
    -------
    snapshots : list of Snapshot
    merged : dict
        ``site_id``, ``site_code``, ``site_kind``, ``site_kind_name``, ``lane_id``,
        ``lane_labels``, ``lane_present`` (period x lane) and the re-indexed
        ``weeks`` (:class:`WeekData` per period).

    Raises
    ------
    PlannerError
        When a period has no snapshot (in the batch asked for).
    """
    registry = read_lanes(conn)
    batches = batch_ids or [None] * len(periods)
    snaps = [read_snapshot(conn, p, scaling, batch_id=b, lanes=registry) for p, b in zip(periods, batches)]
    site_id = np.unique(np.concatenate([s.site_id for s in snaps]))
    lane_id = np.unique(np.concatenate([s.lane_id for s in snaps]))
    n, m = site_id.shape[0], lane_id.shape[0]
    code = np.empty(n, dtype=object)
    kind = np.zeros(n, dtype=np.int8)
    kind_name = np.empty(n, dtype=object)
    labels = np.empty(m, dtype=object)
    present = np.zeros((len(snaps), m), dtype=bool)
    # A lane's origin and destination are part of its identity, the same in
    # every period; a lane missing from a period exists there with no
    # capacity, so lane indices mean the same in every period of the horizon.
    origin = np.zeros(m, np.int64)
    destination = np.zeros(m, np.int64)
    # Each period's site and lane indices on the merged lists.
    indices = [(np.searchsorted(site_id, s.site_id), np.searchsorted(lane_id, s.lane_id)) for s in snaps]
    for t, (s, (si, li)) in enumerate(zip(snaps, indices)):
        code[si], kind[si], kind_name[si] = s.site_code, s.week.site_kind, s.site_kind_name
        labels[li] = s.lane_labels()
        present[t, li] = True
        origin[li] = si[s.week.lane_origin]
        destination[li] = si[s.week.lane_destination]
    weeks = [_on_merged_lists(s.week, si, li, kind, origin, destination) for s, (si, li) in zip(snaps, indices)]
    return snaps, {
        "site_id": site_id,
        "site_code": code,
        "site_kind": kind,
        "site_kind_name": kind_name,
        "lane_id": lane_id,
        "lane_labels": labels,
        "lane_present": present,
        "weeks": weeks,
    }


def _on_merged_lists(w: WeekData, si: np.ndarray, li: np.ndarray, kind, origin, destination) -> WeekData:
    """One week's figures moved to the merged site and lane indices ``si``, ``li``; absent ones get defaults."""
    n, m = kind.shape[0], origin.shape[0]

    def sites(values, default):
        out = np.full(n, default, dtype=np.int64)
        out[si] = values
        return out

    def lanes(values, default):
        out = np.full(m, default, dtype=np.int64)
        out[li] = values
        return out

    return WeekData(
        site_kind=kind,
        supply=sites(w.supply, 0),
        demand=sites(w.demand, 0),
        shortage_penalty=sites(w.shortage_penalty, NONE),
        throughput_capacity=sites(w.throughput_capacity, NONE),
        handling_cost=sites(w.handling_cost, 0),
        lane_origin=origin,
        lane_destination=destination,
        lane_cost=lanes(w.lane_cost, 0),
        lane_capacity=lanes(w.lane_capacity, 0),
        lane_min=lanes(w.lane_min, 0),
        holding_cost=sites(w.holding_cost, 0),
        storage_capacity=sites(w.storage_capacity, 0),
    )
