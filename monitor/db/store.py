"""Open a programme database and run work in one transaction; reading commands read one snapshot.

A reading command (report, trend, estimate, power, summary) runs inside :func:`read_snapshot`: every
``Store.open`` of the same database during it shares one connection holding one read transaction, so
the command sees the database as it was at one moment even while an import commits.  On PostgreSQL the
transaction is REPEATABLE READ (PostgreSQL manual, "Transaction Isolation": every statement sees the
snapshot taken at the transaction's first statement); on SQLite it is an explicit read transaction
(BEGIN, then a read that takes the shared lock: https://www.sqlite.org/lang_transaction.html), during
which a writer waits to commit (up to the busy timeout, then the import retries).
"""

from __future__ import annotations

import contextlib
import contextvars
import functools
import os
from collections.abc import Callable, Iterator
from dataclasses import dataclass, field
from typing import TypeVar

import pandas as pd
from sqlalchemy import select, text
from sqlalchemy.engine import Connection, Engine
from sqlalchemy.exc import DBAPIError, IntegrityError, OperationalError
from sqlmodel import Session

from monitor.config import database_url
from monitor.db import migrate, models
from monitor.db.engine import locked_message, make_engine
from monitor.errors import AccessError, DataError, MonitorError, SchemaError


#: the snapshots open in this context: database URL -> the shared Store reading it
_SNAPSHOTS: contextvars.ContextVar[dict[str, Store] | None] = contextvars.ContextVar("monitor_snapshots", default=None)
F = TypeVar("F", bound=Callable)


@dataclass
class Store:
    """A programme database: engine plus the schema check done once at open."""

    engine: Engine
    connection: Connection | None = field(default=None, repr=False)  # set inside a read snapshot
    shared: bool = False                                             # a snapshot's store: dispose() leaves it open
    #: tables derived once per snapshot (a shared store only: its data cannot change while it is open)
    memo: dict = field(default_factory=dict, repr=False)

    @classmethod
    def open(cls, path_or_url: str | None = None, *, check: bool = True) -> Store:
        snapshots = _SNAPSHOTS.get()
        if snapshots:
            shared = snapshots.get(database_url(path_or_url))
            if shared is not None:
                return shared
        engine = make_engine(path_or_url)
        try:
            if engine.url.get_backend_name() == "sqlite":
                db_path = engine.url.database
                if check and db_path and not os.path.exists(db_path):
                    raise SchemaError(f"{db_path} does not exist; run `monitor init --db {db_path}` first")
            if check:
                migrate.check_current(engine)
        except OperationalError as exc:
            engine.dispose()
            raise SchemaError(locked_message(exc, _where(engine))
                              or f"cannot open the database: {str(exc.orig).splitlines()[0]}") from exc
        except BaseException:
            engine.dispose()
            raise
        return cls(engine)

    @property
    def dialect(self) -> str:
        return self.engine.dialect.name

    @contextlib.contextmanager
    def session(self) -> Iterator[Session]:
        """One transaction: commit on success, roll back everything on any error."""
        with Session(self.engine, expire_on_commit=False) as session:
            try:
                yield session
                session.commit()
            except IntegrityError as exc:
                session.rollback()
                raise DataError(f"the database refused the change: {_first_line(exc)}") from exc
            except OperationalError as exc:
                session.rollback()
                raise MonitorError(locked_message(exc, _where(self.engine))
                                   or f"database error, nothing was written: {_first_line(exc)}") from exc
            except DBAPIError as exc:
                session.rollback()
                if _denied(exc):
                    raise AccessError(f"your database role may not do this, nothing was written: {_first_line(exc)}") from exc
                raise
            except BaseException:
                session.rollback()
                raise

    def frame(self, sql: str, **params: object) -> pd.DataFrame:
        """Run a read-only query and return a DataFrame."""
        try:
            with contextlib.ExitStack() as stack:
                connection = self.connection or stack.enter_context(self.engine.connect())
                result = connection.execute(text(sql), params)
                # plain tuples: pandas reads a list of tuples column by column at C speed, whereas rows of
                # another type go through a per-row attribute probe that costs seconds per million rows
                return pd.DataFrame([tuple(row) for row in result], columns=list(result.keys()))
        except OperationalError as exc:
            message = locked_message(exc, _where(self.engine))
            if message is None:
                raise
            raise MonitorError(message) from exc
        except DBAPIError as exc:
            if _denied(exc):
                raise AccessError(f"your database role may not read this: {_first_line(exc)}") from exc
            raise

    def programme(self, code: str | None = None) -> models.Programme:
        """The programme by code, or the only one in the database."""
        with Session(self.connection or self.engine) as session:
            rows = session.exec(select(models.Programme)).scalars().all()  # type: ignore[call-overload]
        if code is not None:
            rows = [r for r in rows if r.code == code]
            if not rows:
                raise DataError(f"no programme with code '{code}' in this database")
        if not rows:
            raise DataError("this database holds no programme yet; run `monitor setup all FOLDER` first (a folder of set-up files; `monitor setup blank FOLDER` writes one to fill in)")
        if len(rows) > 1:
            codes = ", ".join(sorted(r.code for r in rows))
            raise DataError(f"this database holds several programmes ({codes}); name one with --programme")
        return rows[0]

    def dispose(self) -> None:
        if not self.shared:
            self.engine.dispose()


@contextlib.contextmanager
def read_snapshot(path_or_url: str | None = None) -> Iterator[Store]:
    """Read the database as one snapshot: every ``Store.open`` of it inside shares one read transaction.

    Nested snapshots of the same database reuse the outer one.  Nothing is written through it.
    """
    url = database_url(path_or_url)
    current = _SNAPSHOTS.get() or {}
    if url in current:
        yield current[url]
        return
    store = Store.open(path_or_url)
    try:
        with store.engine.connect() as connection:
            if store.dialect == "postgresql":
                connection = connection.execution_options(isolation_level="REPEATABLE READ")
            with connection.begin() as transaction:
                if store.dialect == "sqlite":
                    # the sqlite3 module starts no transaction before a SELECT: start one, and read so that
                    # the shared lock (the snapshot) is taken now
                    connection.exec_driver_sql("BEGIN")
                connection.exec_driver_sql("SELECT 1")  # PostgreSQL takes the snapshot at the first statement
                connection.execute(select(models.Programme.id).limit(1))
                shared = Store(store.engine, connection, shared=True)
                token = _SNAPSHOTS.set({**current, url: shared})
                try:
                    yield shared
                finally:
                    _SNAPSHOTS.reset(token)
                    transaction.rollback()  # a read: nothing to keep
    except OperationalError as exc:
        raise MonitorError(locked_message(exc, _where(store.engine))
                           or f"cannot read the database: {_first_line(exc)}") from exc
    finally:
        store.dispose()


def one_snapshot(function: F) -> F:
    """Decorate a reading service ``function(db, ...)`` so that all it reads comes from one snapshot."""

    @functools.wraps(function)
    def wrapper(db, *args, **kwargs):
        with read_snapshot(db):
            return function(db, *args, **kwargs)

    return wrapper  # type: ignore[return-value]


def _where(engine: Engine) -> str:
    return str(engine.url.database) if engine.url.get_backend_name() == "sqlite" else \
        engine.url.render_as_string(hide_password=True)


def _denied(exc: DBAPIError) -> bool:
    """PostgreSQL's insufficient_privilege (SQLSTATE 42501)."""
    return getattr(exc.orig, "sqlstate", None) == "42501" or getattr(exc.orig, "pgcode", None) == "42501"


def _first_line(exc: DBAPIError) -> str:
    return str(exc.orig).strip().splitlines()[0] if exc.orig is not None else str(exc)
