"""Programmatic migrations: create or upgrade a database, and refuse one whose schema is behind."""

from __future__ import annotations

from alembic import command
from alembic.config import Config
from alembic.runtime.migration import MigrationContext
from alembic.script import ScriptDirectory
from sqlalchemy import inspect
from sqlalchemy.engine import Engine
from sqlalchemy.exc import DatabaseError, DBAPIError, OperationalError

from monitor.config import migrations_dir
from monitor.errors import AccessError, SchemaError


def alembic_config(engine: Engine) -> Config:
    cfg = Config()
    cfg.set_main_option("script_location", str(migrations_dir()))
    cfg.set_main_option("sqlalchemy.url", engine.url.render_as_string(hide_password=False))
    cfg.attributes["engine"] = engine
    return cfg


def head_revision() -> str:
    script = ScriptDirectory(str(migrations_dir()))
    head = script.get_current_head()
    assert head is not None
    return head


def _known_revisions() -> set[str]:
    return {rev.revision for rev in ScriptDirectory(str(migrations_dir())).walk_revisions()}


def current_revision(engine: Engine) -> str | None:
    try:
        with engine.connect() as connection:
            return MigrationContext.configure(connection).get_current_revision()
    except DatabaseError as exc:
        from monitor.db.engine import locked_message

        raise SchemaError(locked_message(exc, _where(engine))
                          or f"{_where(engine)} is not a database monitor can read ({_short(exc)})") from exc


def _where(engine: Engine) -> str:
    return engine.url.database if engine.url.get_backend_name() == "sqlite" else engine.url.render_as_string()


def _short(exc: Exception) -> str:
    return str(getattr(exc, "orig", exc)).splitlines()[0]


def _foreign_tables(engine: Engine) -> list[str]:
    with engine.connect() as connection:
        names = inspect(connection).get_table_names()
    return [n for n in names if n != "alembic_version"]


def upgrade(engine: Engine, revision: str = "head") -> tuple[str | None, str]:
    """Create or upgrade the schema.  Returns (revision before, revision after)."""
    before = current_revision(engine)
    if before is not None and before not in _known_revisions():
        raise SchemaError(f"{_where(engine)} has schema revision {before}, made by a newer version of monitor; "
                          "nothing was changed: upgrade monitor to use it")
    if before is None and _foreign_tables(engine):
        raise SchemaError(
            f"{_where(engine)} holds tables but is not a monitor database; refusing to change it"
        )
    try:
        command.upgrade(alembic_config(engine), revision)
    except OperationalError as exc:
        raise SchemaError(f"cannot write the schema to {_where(engine)}: {_short(exc)}") from exc
    except DBAPIError as exc:
        if getattr(exc.orig, "sqlstate", None) == "42501":
            raise AccessError(f"your database role may not change the schema (owner only): {_short(exc)}") from exc
        raise
    return before, current_revision(engine) or ""


def downgrade(engine: Engine, revision: str) -> str | None:
    command.downgrade(alembic_config(engine), revision)
    return current_revision(engine)


def check_current(engine: Engine) -> None:
    """Refuse, with a one-line hint, a database that is missing, foreign, or behind the code."""
    current = current_revision(engine)
    head = head_revision()
    if current is None:
        if _foreign_tables(engine):
            raise SchemaError(f"{_where(engine)} is not a monitor database (no schema revision found)")
        raise SchemaError(f"{_where(engine)} has no monitor schema yet; run `monitor init` first")
    if current != head:
        if current not in _known_revisions():
            raise SchemaError(f"{_where(engine)} has schema revision {current}, made by a newer version of monitor; "
                              "upgrade monitor to use it")
        raise SchemaError(
            f"{_where(engine)} has schema revision {current} but this monitor needs {head}; "
            "run `monitor init` to upgrade it"
        )
