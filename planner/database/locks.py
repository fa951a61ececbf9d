"""Locks only the planner can take, and how long the planner waits for them.

Loads and the solves of each week are serialised by row locks on the
``planner_lock`` table (migration 0007): a session holds the lock of ``name``
by holding that row ``FOR UPDATE`` in a transaction kept open for the guarded
work. Locking a row needs SELECT and UPDATE on the table, which only the
planner's own role has; the reporting role ``planner_reader`` cannot take, and
so cannot hold up, any of these locks. (Advisory locks, used before, can be
taken by anyone who may connect.)

Every wait is bounded by the lock timeout: ``PLANNER_LOCK_TIMEOUT`` seconds,
60 by default. A wait that runs out raises :class:`~planner.errors.LockTimeout`
naming what is locked, the session holding it and what to do.
"""

from __future__ import annotations

import math
import os
from contextlib import contextmanager
from typing import Iterator

import psycopg
import sqlalchemy as sa
from sqlalchemy import Connection, Engine, text

from planner.errors import LockTimeout, PlannerError

__all__ = [
    "DEFAULT_LOCK_TIMEOUT",
    "LOAD_LOCK",
    "LOCK_TIMEOUT_ENV",
    "is_lock_timeout",
    "lock_timeout",
    "lock_holder",
    "planner_lock",
    "set_lock_timeout",
    "week_lock_name",
]

#: Environment variable holding the lock timeout in seconds.
LOCK_TIMEOUT_ENV = "PLANNER_LOCK_TIMEOUT"
#: Seconds a lock wait lasts at most when ``PLANNER_LOCK_TIMEOUT`` is unset.
DEFAULT_LOCK_TIMEOUT = 60.0
#: The lock every load holds while it writes its batch.
LOAD_LOCK = "load"


def week_lock_name(period: str) -> str:
    """Name of the lock held while ``period`` is solved.

    Examples
    --------
    >>> week_lock_name("2026-W49")
    'week 2026-W49'
    """
    return f"week {period}"


def lock_timeout(value: str | None = None) -> float:
    """Seconds a lock wait may last: ``value``, else ``$PLANNER_LOCK_TIMEOUT``, else 60.

    Raises
    ------
    PlannerError
        When the setting is not a positive number of seconds.

    Examples
    --------
    >>> lock_timeout("2.5")
    2.5
    >>> lock_timeout("0")
    Traceback (most recent call last):
    ...
    planner.errors.PlannerError: PLANNER_LOCK_TIMEOUT must be a positive number of seconds, not '0'
    """
    setting = value if value is not None else os.environ.get(LOCK_TIMEOUT_ENV)
    if setting is None or not setting.strip():
        return DEFAULT_LOCK_TIMEOUT
    try:
        seconds = float(setting)
    except ValueError:
        seconds = math.nan
    if not math.isfinite(seconds) or seconds <= 0:
        raise PlannerError(f"{LOCK_TIMEOUT_ENV} must be a positive number of seconds, not {setting!r}")
    return seconds


def set_lock_timeout(conn: Connection, seconds: float) -> None:
    """Bound every lock wait of ``conn``'s current transaction by ``seconds`` (``SET LOCAL lock_timeout``)."""
    milliseconds = max(1, round(seconds * 1000))
    conn.execute(text("SELECT set_config('lock_timeout', :value, true)"), {"value": f"{milliseconds}ms"})


def is_lock_timeout(error: BaseException) -> bool:
    """Whether ``error`` is PostgreSQL giving up a lock wait (SQLSTATE 55P03)."""
    return isinstance(error, sa.exc.OperationalError) and isinstance(error.orig, psycopg.errors.LockNotAvailable)


@contextmanager
def planner_lock(
    engine: Engine,
    name: str,
    *,
    what: str,
    advice: str,
    wait: bool = True,
    timeout: float | None = None,
) -> Iterator[bool]:
    """Hold the planner's lock ``name`` for the block; yield whether it is held.

    The lock is the row ``name`` of ``planner_lock`` (inserted the first time
    it is needed), held ``FOR UPDATE`` by a session of its own whose
    transaction stays open until the block ends.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    name : str
        ``LOAD_LOCK`` or :func:`week_lock_name`.
    what : str
        What the lock guards, for the message: ``"week 2026-W49"``.
    advice : str
        What to do when the wait runs out: ``"let that solve finish and solve again"``.
    wait : bool, default True
        Wait for the lock (at most ``timeout``); without, the block starts at
        once and gets False when another session holds it.
    timeout : float, optional
        Seconds; default :func:`lock_timeout`.

    Raises
    ------
    LockTimeout
        When another session held the lock for longer than ``timeout``.
    """
    seconds = lock_timeout() if timeout is None else timeout
    with engine.connect() as conn:
        # In a transaction of its own: an uncommitted new row would make other
        # sessions inserting the same name wait for the whole guarded block.
        conn.execute(text("INSERT INTO planner_lock (name) VALUES (:name) ON CONFLICT DO NOTHING"), {"name": name})
        conn.commit()
        held = _take(conn, name, wait=wait, seconds=seconds, what=what, advice=advice)
        try:
            yield held
        finally:
            conn.rollback()


def _take(conn: Connection, name: str, *, wait: bool, seconds: float, what: str, advice: str) -> bool:
    set_lock_timeout(conn, seconds)
    # The transaction stays open for the guarded block: a server-wide idle
    # timeout must not end it (and drop the lock) while the work goes on.
    conn.execute(text("SELECT set_config('idle_in_transaction_session_timeout', '0', true)"))
    if not wait:
        query = "SELECT name FROM planner_lock WHERE name = :name FOR UPDATE SKIP LOCKED"
        return conn.execute(text(query), {"name": name}).first() is not None
    try:
        conn.execute(text("SELECT name FROM planner_lock WHERE name = :name FOR UPDATE"), {"name": name})
    except sa.exc.OperationalError as error:
        if not is_lock_timeout(error):
            raise
        conn.rollback()
        holder = lock_holder(conn, name)
        conn.rollback()
        session = "another session" if holder is None else f"another session ({holder})"
        raise LockTimeout(
            f"{what}: locked by {session}, which did not release it within {seconds:g} s; "
            f"{advice}, or set {LOCK_TIMEOUT_ENV} to wait longer",
            holder=holder,
            seconds=seconds,
        ) from None
    return True


def lock_holder(conn: Connection, name: str) -> str | None:
    """Who holds the lock ``name``, in words: pid, user, application, for how long; None if nobody now.

    A locked row's ``xmax`` is the holder's transaction id, which the holder's
    session holds a lock on (``pg_locks``); ``pg_stat_activity`` names it.
    """
    row = conn.execute(
        text(
            "SELECT l.pid, a.usename, a.application_name, "
            "extract(epoch FROM clock_timestamp() - a.xact_start) AS seconds "
            "FROM planner_lock r "
            "JOIN pg_locks l ON l.locktype = 'transactionid' AND l.transactionid = r.xmax "
            "AND l.mode = 'ExclusiveLock' AND l.granted "
            "LEFT JOIN pg_stat_activity a ON a.pid = l.pid "
            "WHERE r.name = :name"
        ),
        {"name": name},
    ).first()
    if row is None:
        return None
    parts = [f"pid {row.pid}"]
    if row.usename:
        parts.append(f"user {row.usename}")
    if row.application_name:
        parts.append(f"application {row.application_name!r}")
    if row.seconds is not None:
        parts.append(f"holding it for {float(row.seconds):.0f} s")
    return ", ".join(parts)
