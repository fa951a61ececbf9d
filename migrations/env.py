"""Alembic environment of the planner.

The planner configures Alembic in code (see :func:`planner.database.migrate.alembic_config`), so no
``alembic.ini`` is needed. :func:`planner.database.migrate.migrate` hands over an open connection in
``config.attributes["connection"]`` so the upgrade runs inside the caller's transaction.
Without one, the URL comes from the ``sqlalchemy.url`` option or, failing that, from
:func:`planner.database.connect.database_url` (``PLANNER_DATABASE_URL`` or the embedded server).
"""

from alembic import context
from sqlalchemy import Connection, create_engine, pool

from planner.database.connect import database_url
from planner.database.models import Base

config = context.config
target_metadata = Base.metadata


def _configured_url() -> str:
    return config.get_main_option("sqlalchemy.url") or database_url()


def run_migrations_offline() -> None:
    """Emit the migration SQL as text instead of running it."""
    context.configure(
        url=_configured_url(),
        target_metadata=target_metadata,
        literal_binds=True,
        dialect_opts={"paramstyle": "named"},
    )
    with context.begin_transaction():
        context.run_migrations()


def _run_on(connection: Connection) -> None:
    context.configure(connection=connection, target_metadata=target_metadata)
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    """Run the migrations on the caller's connection, or on a new one."""
    connection = config.attributes.get("connection")
    if connection is not None:
        _run_on(connection)
        return
    engine = create_engine(_configured_url(), poolclass=pool.NullPool)
    with engine.connect() as new_connection:
        _run_on(new_connection)


if context.is_offline_mode():
    run_migrations_offline()
else:
    run_migrations_online()
