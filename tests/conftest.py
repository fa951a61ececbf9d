"""Shared fixtures: a real PostgreSQL server, a fresh database per test, load folders.

Server: ``PLANNER_TEST_DATABASE_URL`` when set (any database on the server; the tests
create and drop their own), otherwise an embedded server started in a temporary
folder for the test session. The schema is migrated once into a template database
``planner_tmpl_<pid>``; each test that asks for ``database_url`` or ``engine`` gets a
new database cloned from it with ``CREATE DATABASE ... TEMPLATE``, dropped afterwards.
"""

from __future__ import annotations

import csv
import io
import itertools
import os
from collections.abc import Callable, Iterator, Mapping, Sequence
from concurrent.futures import Future, ThreadPoolExecutor
from pathlib import Path

import psycopg
import pytest
import sqlalchemy as sa
from hypothesis import HealthCheck, settings
from psycopg import sql
from sqlalchemy.engine import make_url

from planner.database.connect import (
    DATABASE_URL_ENV,
    HOME_ENV,
    embedded_server_url,
    get_engine,
    normalize_url,
)
from planner.database.migrate import migrate

TEST_DATABASE_URL_ENV = "PLANNER_TEST_DATABASE_URL"

# Property tests: a fixed, derandomised profile for CI and everyday runs, and a
# longer random one for a nightly run (HYPOTHESIS_PROFILE=nightly pytest).
_PROPERTY_DEFAULTS = {"deadline": None, "database": None, "suppress_health_check": [HealthCheck.too_slow]}
settings.register_profile("ci", max_examples=60, derandomize=True, **_PROPERTY_DEFAULTS)
settings.register_profile("nightly", max_examples=1000, **_PROPERTY_DEFAULTS)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "ci"))

FileContent = str | bytes | Sequence[Mapping[str, object]] | None
WriteFolder = Callable[..., Path]

_database_numbers = itertools.count()


def _libpq(url: sa.URL, database: str | None = None) -> str:
    """libpq form of a SQLAlchemy URL, for plain psycopg connections."""
    if database is not None:
        url = url.set(database=database)
    return url.set(drivername="postgresql").render_as_string(hide_password=False)


def _sqlalchemy(url: sa.URL, database: str) -> str:
    return url.set(database=database).render_as_string(hide_password=False)


def _run_admin(server: sa.URL, statement: sql.Composable) -> None:
    with psycopg.connect(_libpq(server), autocommit=True) as connection:
        connection.execute(statement)


def _drop_database(server: sa.URL, name: str) -> None:
    # FORCE terminates sessions a test may have left open (PostgreSQL 13+).
    _run_admin(
        server, sql.SQL("DROP DATABASE IF EXISTS {} WITH (FORCE)").format(sql.Identifier(name))
    )


@pytest.fixture(scope="session")
def embedded_home(tmp_path_factory: pytest.TempPathFactory) -> Path:
    """Per-session ``PLANNER_HOME`` of the embedded server used by the tests."""
    return tmp_path_factory.mktemp("planner-home")


@pytest.fixture(scope="session")
def embedded_url(embedded_home: Path) -> str:
    """URL of the ``planner`` database on an embedded server started for the session."""
    with pytest.MonkeyPatch.context() as patch:
        patch.setenv(HOME_ENV, str(embedded_home))
        url = embedded_server_url()
    # This throw-away server needs no crash safety; skipping flushes makes the many
    # CREATE/DROP DATABASE of the tests cheaper.
    with psycopg.connect(_libpq(make_url(url)), autocommit=True) as connection:
        for setting in ("fsync", "full_page_writes", "synchronous_commit"):
            connection.execute(sql.SQL("ALTER SYSTEM SET {} = off").format(sql.Identifier(setting)))
        connection.execute("SELECT pg_reload_conf()")
    return url


@pytest.fixture(scope="session")
def test_server(request: pytest.FixtureRequest) -> sa.URL:
    """URL of an existing database on the test server, used to create and drop others."""
    configured = os.environ.get(TEST_DATABASE_URL_ENV)
    if configured:
        return make_url(normalize_url(configured))
    return make_url(request.getfixturevalue("embedded_url"))


@pytest.fixture(scope="session")
def template_database(test_server: sa.URL) -> Iterator[str]:
    """Name of a database migrated to head, cloned by every test database."""
    name = f"planner_tmpl_{os.getpid()}"
    _drop_database(test_server, name)
    _run_admin(test_server, sql.SQL("CREATE DATABASE {}").format(sql.Identifier(name)))
    engine = get_engine(_sqlalchemy(test_server, name))
    try:
        migrate(engine)
    finally:
        # A template must have no open sessions when it is cloned.
        engine.dispose()
    yield name
    _drop_database(test_server, name)


class _DatabasePool:
    """Fresh databases cloned from the template, the next one always prepared ahead.

    One worker thread creates the next test's database while the current test runs;
    another drops finished ones (DROP DATABASE forces a checkpoint and deletes files,
    which can take a second on a busy server), so tests rarely wait for either.
    """

    def __init__(self, server: sa.URL, template: str) -> None:
        self.server = server
        self.template = template
        self.creator = ThreadPoolExecutor(max_workers=1, thread_name_prefix="create-test-database")
        self.dropper = ThreadPoolExecutor(max_workers=4, thread_name_prefix="drop-test-database")
        self.drops: list[Future[None]] = []
        self.prepared = self.creator.submit(self._create)

    def _create(self) -> str:
        name = f"planner_test_{os.getpid()}_{next(_database_numbers)}"
        _run_admin(
            self.server,
            sql.SQL("CREATE DATABASE {} TEMPLATE {}").format(
                sql.Identifier(name), sql.Identifier(self.template)
            ),
        )
        return name

    def take(self) -> str:
        name = self.prepared.result()
        self.prepared = self.creator.submit(self._create)
        return name

    def give_back(self, name: str) -> None:
        self.drops.append(self.dropper.submit(_drop_database, self.server, name))

    def close(self) -> None:
        self.give_back(self.prepared.result())
        self.creator.shutdown(wait=True)
        self.dropper.shutdown(wait=True)
        for drop in self.drops:
            drop.result()  # surface a failed DROP instead of leaving databases behind


@pytest.fixture(scope="session")
def _database_pool(test_server: sa.URL, template_database: str) -> Iterator[_DatabasePool]:
    pool = _DatabasePool(test_server, template_database)
    yield pool
    pool.close()


@pytest.fixture
def database_url(
    test_server: sa.URL, _database_pool: _DatabasePool, monkeypatch: pytest.MonkeyPatch
) -> Iterator[str]:
    """URL of a fresh, migrated database for this test; also set as PLANNER_DATABASE_URL."""
    name = _database_pool.take()
    url = _sqlalchemy(test_server, name)
    monkeypatch.setenv(DATABASE_URL_ENV, url)
    yield url
    _database_pool.give_back(name)


@pytest.fixture
def engine(database_url: str) -> Iterator[sa.Engine]:
    """Engine on this test's fresh database."""
    test_engine = get_engine(database_url)
    yield test_engine
    test_engine.dispose()


def _write_file(path: Path, content: str | bytes | Sequence[Mapping[str, object]]) -> None:
    if isinstance(content, bytes):
        path.write_bytes(content)
        return
    if isinstance(content, str):
        path.write_text(content, encoding="utf-8", newline="")
        return
    columns = list(dict.fromkeys(column for row in content for column in row))
    buffer = io.StringIO()
    writer = csv.DictWriter(buffer, fieldnames=columns, lineterminator="\n")
    writer.writeheader()
    writer.writerows(content)
    path.write_text(buffer.getvalue(), encoding="utf-8", newline="")


@pytest.fixture
def write_folder(tmp_path: Path) -> WriteFolder:
    """Function writing a load folder under ``tmp_path`` and returning its path.

    ``write_folder(files, name=None)`` takes a mapping of file name to content: a
    string (written verbatim), bytes, a list of row dicts (header = their keys in
    order of appearance) or None (file left out). Each call makes a new folder.
    """
    numbers = itertools.count()

    def write(files: Mapping[str, FileContent], name: str | None = None) -> Path:
        folder = tmp_path / (name or f"load{next(numbers)}")
        folder.mkdir()
        for file_name, content in files.items():
            if content is not None:
                _write_file(folder / file_name, content)
        return folder

    return write


NETWORK_FILES = {
    "sites.csv": (
        "site,kind,name,region,throughput_capacity,handling_cost\n"
        "P1,plant,Alder Works,north,,\n"
        "P2,plant,Birch Works,south,,\n"
        "W1,warehouse,Central Depot,central,120,0.5\n"
        "C1,customer,Shop One,north,,\n"
        "C2,customer,Shop Two,south,,\n"
        "C3,customer,Shop Three,south,,\n"
    ),
    "supply.csv": (
        "period,site,quantity\n2026-W40,P1,60\n2026-W40,P2,50\n2026-W41,P1,60\n2026-W41,P2,40\n"
    ),
    "demand.csv": (
        "period,site,quantity,shortage_penalty\n"
        "2026-W40,C1,30,90\n"
        "2026-W40,C2,25,90\n"
        "2026-W40,C3,20,\n"
        "2026-W41,C1,35,90\n"
        "2026-W41,C2,25,90\n"
        "2026-W41,C3,15,\n"
    ),
    "lanes.csv": (
        "period,origin,destination,mode,unit_cost,capacity,min_quantity\n"
        "2026-W40,P1,W1,road,2.50,80,\n"
        "2026-W40,P2,W1,road,3,,\n"
        "2026-W40,P2,W1,rail,1.75,30,10\n"
        "2026-W40,W1,C1,,1,,\n"
        "2026-W40,W1,C2,,1.5,,\n"
        "2026-W40,W1,C3,,2,,\n"
        "2026-W40,P1,C1,,6,10,\n"
        "2026-W41,P1,W1,road,2.50,80,\n"
        "2026-W41,P2,W1,road,3,,\n"
        "2026-W41,W1,C1,,1,,\n"
        "2026-W41,W1,C2,,1.5,,\n"
        "2026-W41,W1,C3,,2,,\n"
    ),
}


@pytest.fixture
def network_files() -> dict[str, str]:
    """A small valid two-week network (invented sites) as file name -> CSV text.

    Two plants, one warehouse with throughput capacity and handling cost, three
    customers (two with a shortage penalty), weeks 2026-W40 and 2026-W41. A fresh dict
    each time, so a test may edit it.
    """
    return dict(NETWORK_FILES)
