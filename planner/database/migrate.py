"""Keeping the schema current: the Alembic glue.

The schema is created and upgraded only by the Alembic revisions in the
repository's ``migrations/`` folder. Alembic is configured in code
(:func:`alembic_config`); :func:`migrate` upgrades a database to the newest
revision in one transaction, and :func:`ensure_schema` does so only when needed.
"""

from __future__ import annotations

import functools
from pathlib import Path
from typing import TYPE_CHECKING

import sqlalchemy as sa

from planner.database.connect import get_engine, masked_url
from planner.database.locks import LOCK_TIMEOUT_ENV, is_lock_timeout, lock_timeout, set_lock_timeout
from planner.errors import LockTimeout, PlannerError

if TYPE_CHECKING:
    from alembic.config import Config

# Alembic is imported where a migration is looked at: a command on a database at
# head (every command but the first) checks its revision without it (0.1 s).

__all__ = [
    "MIGRATIONS_DIR",
    "alembic_config",
    "current_revision",
    "ensure_schema",
    "head_revision",
    "migrate",
]

#: The Alembic script folder at the top of the repository.
MIGRATIONS_DIR = Path(__file__).resolve().parents[2] / "migrations"
# Serialises the first upgrade of an empty database, which has no table to lock
# yet; an arbitrary constant (pg_advisory_xact_lock takes a bigint key).
_FIRST_MIGRATION_LOCK_KEY = 0x706C616E6E6572


def alembic_config(connection: sa.Connection | None = None) -> Config:
    """Alembic configuration for the planner's migrations, built in code.

    Parameters
    ----------
    connection : sqlalchemy.Connection, optional
        When given, migrations run on it (inside its transaction).

    Returns
    -------
    alembic.config.Config
        With ``script_location`` set to :data:`MIGRATIONS_DIR`.
    """
    from alembic.config import Config

    config = Config()
    config.set_main_option("script_location", str(MIGRATIONS_DIR))
    if connection is not None:
        config.attributes["connection"] = connection
    return config


@functools.cache
def head_revision() -> str:
    """Revision id of the newest migration in :data:`MIGRATIONS_DIR`.

    Returns
    -------
    str
        For example ``"0001"``.
    """
    from alembic.script import ScriptDirectory

    head = ScriptDirectory.from_config(alembic_config()).get_current_head()
    if head is None:
        raise PlannerError(f"no migrations found in {MIGRATIONS_DIR}")
    return head


def current_revision(connection: sa.Connection) -> str | None:
    """Revision id the database is at, or None if it was never migrated.

    Parameters
    ----------
    connection : sqlalchemy.Connection
        Connection to the database.

    Returns
    -------
    str or None
    """
    from alembic.runtime.migration import MigrationContext

    return MigrationContext.configure(connection).get_current_revision()


def migrate(engine_or_url: sa.Engine | str | None = None) -> None:
    """Upgrade the database schema to the newest migration (``alembic upgrade head``).

    Idempotent: a database already at head costs one query. Concurrent callers are
    serialised by a lock on ``alembic_version`` (see :func:`_lock_for_upgrade`), every
    lock wait of the upgrade lasts at most the lock timeout (``PLANNER_LOCK_TIMEOUT``),
    and the upgrade runs in one transaction, so a failed migration leaves the schema
    as it was.

    Parameters
    ----------
    engine_or_url : sqlalchemy.Engine or str, optional
        Target database; a URL or None is resolved with :func:`database_url`.

    Raises
    ------
    PlannerError
        If the database is at a revision this code does not know (it was upgraded by
        a newer planner).
    LockTimeout
        If another session held a lock the upgrade needs for longer than the lock timeout.
    """
    if isinstance(engine_or_url, sa.Engine):
        _upgrade(engine_or_url)
        return
    engine = get_engine(engine_or_url)
    try:
        _upgrade(engine)
    finally:
        engine.dispose()


def _upgrade(engine: sa.Engine) -> None:
    head = head_revision()
    seconds = lock_timeout()
    with engine.begin() as connection:
        if current_revision(connection) == head:
            return
        try:
            _lock_for_upgrade(connection, seconds)
            revision = current_revision(connection)
            if revision == head:
                return
            if revision is not None:
                _check_known_revision(revision, engine)
            from alembic import command

            command.upgrade(alembic_config(connection), "head")
        except sa.exc.OperationalError as error:
            if not is_lock_timeout(error):
                raise
            raise LockTimeout(
                f"upgrading the schema of {masked_url(engine.url)} waited more than {seconds:g} s for a lock "
                "held by another session (another upgrade, or a query or open transaction on the planner's "
                "tables: see pg_stat_activity); nothing was changed: run the command again once it ends, "
                f"or set {LOCK_TIMEOUT_ENV} to wait longer"
            ) from None


def _lock_for_upgrade(connection: sa.Connection, seconds: float) -> None:
    """Serialise upgrades of one database, and bound each of the upgrade's lock waits by ``seconds``.

    Once a schema exists, the lock is ``alembic_version`` itself, in a mode that
    conflicts only with itself and with writers: taking it needs rights on the
    table that only the schema's owner has, so the reporting role cannot hold
    upgrades up. An empty database has no table to lock yet; its first upgrade
    is serialised with a transaction-level advisory lock. Any role that may
    connect could take that key, but only before the first upgrade has made
    the database usable, and the wait is bounded like every other.
    """
    set_lock_timeout(connection, seconds)
    if not _has_version_table(connection):
        connection.execute(sa.text("SELECT pg_advisory_xact_lock(:key)"), {"key": _FIRST_MIGRATION_LOCK_KEY})
    else:
        connection.execute(sa.text("LOCK TABLE alembic_version IN SHARE ROW EXCLUSIVE MODE"))


def _has_version_table(connection: sa.Connection) -> bool:
    return connection.execute(sa.text("SELECT to_regclass('alembic_version')")).scalar_one() is not None


def _check_known_revision(revision: str, engine: sa.Engine) -> None:
    from alembic.script import ScriptDirectory
    from alembic.util import CommandError

    try:
        ScriptDirectory.from_config(alembic_config()).get_revision(revision)
    except CommandError as error:
        raise PlannerError(
            f"database {masked_url(engine.url)} is at schema revision {revision!r}, "
            "which this planner does not know; upgrade the planner"
        ) from error


def ensure_schema(engine: sa.Engine) -> None:
    """Migrate ``engine``'s database only if it is not at the newest revision.

    Parameters
    ----------
    engine : sqlalchemy.Engine
        Target database.
    """
    with engine.connect() as connection:
        at = []
        if _has_version_table(connection):
            at = connection.execute(sa.text("SELECT version_num FROM alembic_version")).scalars().all()
    if at != [newest_revision_file()]:
        migrate(engine)  # which asks Alembic itself


@functools.cache
def newest_revision_file() -> str | None:
    """The revision of the newest file in ``migrations/versions`` (``0012`` of ``0012_*.py``).

    Revision files are named after their revision, numbered in order, each
    revising the one before (a test holds them to it), so the highest number is
    the head, found without loading Alembic or the scripts.
    """
    numbers = sorted(path.name.split("_", 1)[0] for path in (MIGRATIONS_DIR / "versions").glob("[0-9]*_*.py"))
    return numbers[-1] if numbers else None
