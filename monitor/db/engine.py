"""Engine and session set-up for SQLite (embedded default) and PostgreSQL (shared programmes)."""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator

from sqlalchemy import create_engine, event
from sqlalchemy.engine import Engine
from sqlmodel import Session

from monitor.config import database_url, is_sqlite

#: Test hook, not for users: a number of pages that an SQLite database may not grow beyond
#: (``PRAGMA max_page_count``), so that a test sees what a full disk does: SQLite then fails a write that
#: needs a new page with SQLITE_FULL ("database or disk is full"), as when the disk itself is full
#: (https://www.sqlite.org/pragma.html#pragma_max_page_count).
MAX_PAGES_HOOK = "MONITOR_TEST_SQLITE_MAX_PAGES"


def _sqlite_on_connect(dbapi_connection, _record) -> None:
    cursor = dbapi_connection.cursor()
    cursor.execute("PRAGMA foreign_keys = ON")
    cursor.execute("PRAGMA busy_timeout = 30000")
    max_pages = os.environ.get(MAX_PAGES_HOOK)
    if max_pages:
        cursor.execute(f"PRAGMA max_page_count = {int(max_pages)}")
    cursor.close()


def make_engine(path_or_url: str | None = None) -> Engine:
    """An engine for ``--db`` (a bare path is an SQLite file)."""
    url = database_url(path_or_url)
    if is_sqlite(url):
        engine = create_engine(url, future=True)
        event.listen(engine, "connect", _sqlite_on_connect)
    else:
        engine = create_engine(url, future=True, pool_pre_ping=True)
    return engine


@contextlib.contextmanager
def transaction(engine: Engine) -> Iterator[Session]:
    """One session, one transaction: commit on success, roll back everything on any error."""
    with Session(engine, expire_on_commit=False) as session:
        try:
            yield session
            session.commit()
        except BaseException:
            session.rollback()
            raise
