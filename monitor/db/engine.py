"""Engine and session set-up for SQLite (embedded default) and PostgreSQL (shared programmes)."""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator

from sqlalchemy import create_engine, event
from sqlalchemy.engine import Engine, make_url
from sqlalchemy.exc import ArgumentError
from sqlmodel import Session

from monitor.config import database_url, is_sqlite
from monitor.errors import InputError, InputProblem

#: the database engines and drivers monitor runs on (the same migrations and tests on both)
SUPPORTED = {"sqlite": ("pysqlite", None), "postgresql": ("psycopg", None)}
DB_EXPECTED = ("a file path (an SQLite database) or a URL postgresql+psycopg://USER@HOST[:PORT]/DATABASE "
               "(monitor runs on SQLite and PostgreSQL)")

#: Test hook, not for users: a number of pages that an SQLite database may not grow beyond
#: (``PRAGMA max_page_count``), so that a test sees what a full disk does: SQLite then fails a write that
#: needs a new page with SQLITE_FULL ("database or disk is full"), as when the disk itself is full
#: (https://www.sqlite.org/pragma.html#pragma_max_page_count).
MAX_PAGES_HOOK = "MONITOR_TEST_SQLITE_MAX_PAGES"
#: how long a command waits for an SQLite file another program holds locked before it says so [ms];
#: the test hook ``MONITOR_TEST_SQLITE_BUSY_MS`` shortens it
BUSY_TIMEOUT_MS = 30000
BUSY_HOOK = "MONITOR_TEST_SQLITE_BUSY_MS"


def busy_timeout_ms() -> int:
    return int(os.environ.get(BUSY_HOOK) or BUSY_TIMEOUT_MS)


def locked_message(exc: BaseException, where: str) -> str | None:
    """One line for an SQLite file that another program holds locked, or None for any other failure."""
    text = str(getattr(exc, "orig", None) or exc)
    if "database is locked" not in text and "database table is locked" not in text:
        return None
    return (f"{where} is locked by another program (still after {busy_timeout_ms() / 1000:g} s); nothing was "
            "written: close whatever else has it open (a database browser, a copy or sync in progress, another "
            "monitor command) and try again")


def _sqlite_on_connect(dbapi_connection, _record) -> None:
    cursor = dbapi_connection.cursor()
    cursor.execute("PRAGMA foreign_keys = ON")
    cursor.execute(f"PRAGMA busy_timeout = {busy_timeout_ms()}")
    max_pages = os.environ.get(MAX_PAGES_HOOK)
    if max_pages:
        cursor.execute(f"PRAGMA max_page_count = {int(max_pages)}")
    cursor.close()


def checked_url(path_or_url: str | None = None) -> str:
    """``--db`` as a URL of an engine we support, or one line saying what is wrong with it (no traceback)."""
    url = database_url(path_or_url)
    try:
        parsed = make_url(url)
        port = parsed.port  # a port that is not a number is found here
    except (ArgumentError, ValueError) as exc:
        raise InputError(InputProblem("--db", None, None, _shown(url), f"{DB_EXPECTED}; this one is malformed "
                                                                       f"({str(exc).splitlines()[0]})")) from None
    backend, driver = parsed.get_backend_name(), parsed.get_driver_name()
    if backend not in SUPPORTED:
        raise InputError(InputProblem("--db", None, None, _shown(url),
                                      f"{DB_EXPECTED}; the engine '{backend}' is not supported"))
    if backend == "postgresql":
        if driver != "psycopg":
            raise InputError(InputProblem("--db", None, None, _shown(url),
                                          f"{DB_EXPECTED}; write postgresql+psycopg:// (driver '{driver}' is not "
                                          "the one monitor uses)"))
        if not parsed.database or not parsed.host or (port is not None and not 0 < port < 65536):
            raise InputError(InputProblem("--db", None, None, _shown(url),
                                          f"{DB_EXPECTED}; this one names no "
                                          f"{'database' if not parsed.database else 'host' if not parsed.host else 'valid port'}"))
    return url


def _shown(url: str) -> str:
    """The URL for a message, with any password hidden."""
    import re

    try:
        return make_url(url).render_as_string(hide_password=True)
    except (ArgumentError, ValueError):
        return re.sub(r"(://[^:/@]*:)[^@/]*@", r"\1***@", url)


def make_engine(path_or_url: str | None = None) -> Engine:
    """An engine for ``--db`` (a bare path is an SQLite file)."""
    url = checked_url(path_or_url)
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
