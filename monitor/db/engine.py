"""Engine and session set-up for SQLite (embedded default) and PostgreSQL (shared programmes)."""

from __future__ import annotations

import contextlib
from collections.abc import Iterator

from sqlalchemy import create_engine, event
from sqlalchemy.engine import Engine
from sqlmodel import Session

from monitor.config import database_url, is_sqlite


def _sqlite_on_connect(dbapi_connection, _record) -> None:
    cursor = dbapi_connection.cursor()
    cursor.execute("PRAGMA foreign_keys = ON")
    cursor.execute("PRAGMA busy_timeout = 30000")
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
