"""Open a programme database and run work in one transaction."""

from __future__ import annotations

import contextlib
import os
from collections.abc import Iterator
from dataclasses import dataclass

import pandas as pd
from sqlalchemy import select, text
from sqlalchemy.engine import Engine
from sqlalchemy.exc import DBAPIError, IntegrityError, OperationalError
from sqlmodel import Session

from monitor.db import migrate, models
from monitor.db.engine import make_engine
from monitor.errors import AccessError, DataError, MonitorError, SchemaError


@dataclass
class Store:
    """A programme database: engine plus the schema check done once at open."""

    engine: Engine

    @classmethod
    def open(cls, path_or_url: str | None = None, *, check: bool = True) -> Store:
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
            raise SchemaError(f"cannot open the database: {str(exc.orig).splitlines()[0]}") from exc
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
                raise MonitorError(f"database error, nothing was written: {_first_line(exc)}") from exc
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
            with self.engine.connect() as connection:
                result = connection.execute(text(sql), params)
                # plain tuples: pandas reads a list of tuples column by column at C speed, whereas rows of
                # another type go through a per-row attribute probe that costs seconds per million rows
                return pd.DataFrame([tuple(row) for row in result], columns=list(result.keys()))
        except DBAPIError as exc:
            if _denied(exc):
                raise AccessError(f"your database role may not read this: {_first_line(exc)}") from exc
            raise

    def programme(self, code: str | None = None) -> models.Programme:
        """The programme by code, or the only one in the database."""
        with Session(self.engine) as session:
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
        self.engine.dispose()


def _denied(exc: DBAPIError) -> bool:
    """PostgreSQL's insufficient_privilege (SQLSTATE 42501)."""
    return getattr(exc.orig, "sqlstate", None) == "42501" or getattr(exc.orig, "pgcode", None) == "42501"


def _first_line(exc: DBAPIError) -> str:
    return str(exc.orig).strip().splitlines()[0] if exc.orig is not None else str(exc)
