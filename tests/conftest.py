"""Shared fixtures: a fresh database on SQLite, and on PostgreSQL when a server is given.

Set MONITOR_TEST_POSTGRES_URL (``.ci/run`` does) to run every database test on PostgreSQL
too; without it those runs are skipped with the reason shown.
"""

from __future__ import annotations

import os
import uuid
from collections.abc import Iterator
from pathlib import Path

import matplotlib
import pytest

matplotlib.use("Agg")

POSTGRES_URL = os.environ.get("MONITOR_TEST_POSTGRES_URL")
REPO_ROOT = Path(__file__).resolve().parents[1]
#: the official GPX 1.1 schema (TopoGrafix 2004), unchanged: tests/fixtures/gpx/README.md
GPX_SCHEMA = REPO_ROOT / "tests" / "fixtures" / "gpx" / "gpx-1.1.xsd"


def _postgres_database() -> Iterator[str]:
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url

    assert POSTGRES_URL is not None
    admin_url = make_url(POSTGRES_URL)
    name = f"monitor_t_{uuid.uuid4().hex[:12]}"
    admin = create_engine(admin_url, isolation_level="AUTOCOMMIT")
    with admin.connect() as connection:
        connection.execute(text(f'CREATE DATABASE "{name}"'))
    try:
        yield admin_url.set(database=name).render_as_string(hide_password=False)
    finally:
        with admin.connect() as connection:
            connection.execute(
                text("SELECT pg_terminate_backend(pid) FROM pg_stat_activity WHERE datname = :n"), {"n": name}
            )
            connection.execute(text(f'DROP DATABASE IF EXISTS "{name}"'))
        admin.dispose()


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def empty_db_url(request, tmp_path) -> Iterator[str]:
    """The URL of an empty database (no schema yet) on each engine."""
    if request.param == "sqlite":
        yield str(tmp_path / "programme.sqlite")
        return
    if not POSTGRES_URL:
        if os.environ.get("MONITOR_REQUIRE_POSTGRES"):
            pytest.fail("MONITOR_REQUIRE_POSTGRES is set but MONITOR_TEST_POSTGRES_URL is not")
        pytest.skip("PostgreSQL run skipped: set MONITOR_TEST_POSTGRES_URL to a server URL (.ci/run does)")
    yield from _postgres_database()


@pytest.fixture
def db_url(empty_db_url) -> str:
    """A database migrated to head, on each engine."""
    from monitor.db import migrate
    from monitor.db.engine import make_engine

    engine = make_engine(empty_db_url)
    migrate.upgrade(engine)
    engine.dispose()
    return empty_db_url


@pytest.fixture
def store(db_url):
    from monitor.db import Store

    s = Store.open(db_url)
    yield s
    s.dispose()


@pytest.fixture(scope="session")
def demo_source() -> Path:
    return REPO_ROOT / "demo_programme"


@pytest.fixture
def programme_db(db_url, demo_source) -> str:
    """A database on each engine holding the demo programme's set-up (no records yet)."""
    from monitor.services import setup

    setup.setup_folder(db_url, demo_source)
    return db_url


def table_counts(db_url: str) -> dict[str, int]:
    """Rows in every table: compared before and after a refused command to show nothing was written."""
    from monitor.db import Store, queries

    store = Store.open(db_url)
    try:
        return queries.table_counts(store)
    finally:
        store.dispose()


@pytest.fixture(scope="session")
def demo_db(tmp_path_factory) -> str:
    """The demo programme built once (set up and all seasons imported) in SQLite; tests must not change it."""
    from monitor.services import demo

    run = demo.build_programme(tmp_path_factory.mktemp("demo") / "demo")
    return str(run.database)
