"""Keeping the schema current: the Alembic glue.

The schema is created and upgraded only by the Alembic revisions in the
repository's ``migrations/`` folder. Alembic is configured in code
(:func:`alembic_config`); :func:`migrate` upgrades a database to the newest
revision in one transaction, and :func:`ensure_schema` does so only when needed.
"""

from __future__ import annotations

import functools
from pathlib import Path

import sqlalchemy as sa
from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from alembic.util import CommandError

from planner.database.connect import get_engine, masked_url
from planner.errors import PlannerError

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
# Serialises concurrent upgrades of one database; an arbitrary constant that the
# planner reserves for this purpose (pg_advisory_xact_lock takes a bigint key).
_MIGRATION_LOCK_KEY = 0x706C616E6E6572


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
    return MigrationContext.configure(connection).get_current_revision()


def migrate(engine_or_url: sa.Engine | str | None = None) -> None:
    """Upgrade the database schema to the newest migration (``alembic upgrade head``).

    Idempotent: a database already at head costs one query. Concurrent callers are
    serialised with a transaction-level advisory lock, and the upgrade runs in one
    transaction, so a failed migration leaves the schema as it was.

    Parameters
    ----------
    engine_or_url : sqlalchemy.Engine or str, optional
        Target database; a URL or None is resolved with :func:`database_url`.

    Raises
    ------
    PlannerError
        If the database is at a revision this code does not know (it was upgraded by
        a newer planner).
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
    with engine.begin() as connection:
        if current_revision(connection) == head:
            return
        connection.execute(
            sa.text("SELECT pg_advisory_xact_lock(:key)"), {"key": _MIGRATION_LOCK_KEY}
        )
        revision = current_revision(connection)
        if revision == head:
            return
        if revision is not None:
            _check_known_revision(revision, engine)
        command.upgrade(alembic_config(connection), "head")


def _check_known_revision(revision: str, engine: sa.Engine) -> None:
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
        at_head = current_revision(connection) == head_revision()
    if not at_head:
        migrate(engine)
