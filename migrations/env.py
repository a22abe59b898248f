"""Alembic environment: uses the engine the application hands over, or the configured URL."""

from __future__ import annotations

from alembic import context
from sqlalchemy import create_engine

from monitor.db import models  # noqa: F401  (registers the tables on the metadata)
from monitor.db.engine import _sqlite_on_connect

config = context.config
target_metadata = models.metadata


def run_migrations_online() -> None:
    engine = config.attributes.get("engine")
    if engine is None:
        from sqlalchemy import event

        engine = create_engine(config.get_main_option("sqlalchemy.url"))
        if engine.url.get_backend_name() == "sqlite":
            event.listen(engine, "connect", _sqlite_on_connect)
    with engine.connect() as connection:
        is_sqlite = connection.dialect.name == "sqlite"
        if is_sqlite:
            # batch mode rebuilds tables; foreign keys must be off while it does (SQLite docs, ALTER TABLE)
            connection.exec_driver_sql("PRAGMA foreign_keys = OFF")
            connection.commit()
        context.configure(
            connection=connection,
            target_metadata=target_metadata,
            render_as_batch=is_sqlite,
            compare_type=True,
            transaction_per_migration=False,
        )
        with context.begin_transaction():
            context.run_migrations()
        if is_sqlite:
            connection.exec_driver_sql("PRAGMA foreign_keys = ON")
            connection.commit()


if context.is_offline_mode():
    raise SystemExit("offline (SQL script) migrations are not supported; run `monitor init`")
run_migrations_online()
