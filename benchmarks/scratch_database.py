"""A database of a benchmark's own, made beside the one a URL names, and dropped after."""

from __future__ import annotations

import psycopg
import sqlalchemy as sa
from psycopg import sql

from planner.database import connect as db


class ScratchDatabase:
    """Database ``name`` on the server of ``url`` (default ``$PLANNER_DATABASE_URL``, else embedded).

    ``url`` is the scratch database's own URL (plain ``postgresql://`` form).
    """

    def __init__(self, url: str | None, name: str) -> None:
        server = sa.make_url(db.database_url(url)).set(drivername="postgresql")
        self.name = name
        self.admin_url = server.render_as_string(hide_password=False)
        self.url = server.set(database=name).render_as_string(hide_password=False)

    def create(self) -> str:
        """Make the database anew (dropping an older one); return its URL."""
        self.drop()
        with psycopg.connect(self.admin_url, autocommit=True) as admin:
            admin.execute(sql.SQL("CREATE DATABASE {}").format(sql.Identifier(self.name)))
        return self.url

    def drop(self) -> None:
        with psycopg.connect(self.admin_url, autocommit=True) as admin:
            admin.execute(sql.SQL("DROP DATABASE IF EXISTS {} WITH (FORCE)").format(sql.Identifier(self.name)))
