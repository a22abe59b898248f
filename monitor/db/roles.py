"""Roles for a shared PostgreSQL programme: readers, recorders and an owner.

Three group roles per database (named after it, since PostgreSQL roles belong to the whole server):

``<db>_reader``
    reads every table: for report readers and analysts.
``<db>_recorder``
    reads everything and adds records: visits, values, covariates, photos, rounds, plans, quality flags,
    management events, import batches, stored fits and reports issued; may correct values (logged) and retire stations (only the
    lineage columns of ``station``); may add to the change log but never alter or delete it; no schema
    changes.
``<db>_owner``
    owns the tables: runs ``monitor init`` (migrations) and everything else.

People log in with their own roles and are made members of one group (``monitor access grant``).
"""

from __future__ import annotations

import time

from sqlalchemy import text
from sqlalchemy.engine import Engine
from sqlalchemy.exc import OperationalError

from monitor.db.models import metadata
from monitor.errors import DataError

GROUPS = ("reader", "recorder", "owner")
RECORDER_WRITES = ("visit", "observation", "visit_observer", "covariate", "round", "import_batch", "photo",
                   "quality_flag", "planned_visit", "management_event", "stored_fit", "report_issue", "report_fit")
RECORDER_DELETES = ("observation", "visit_observer", "planned_visit")
STATION_LINEAGE_COLUMNS = ("state", "retired", "retired_reason", "replaced_by_id")
PRIVATE_TABLE = "web_user"


def _require_postgresql(engine: Engine) -> str:
    if engine.dialect.name != "postgresql":
        raise DataError("roles apply to a shared PostgreSQL programme; an SQLite file has no roles")
    return engine.url.database or "monitor"


def role_name(database: str, group: str) -> str:
    return f"{database}_{group}"


def _quote(name: str) -> str:
    return '"' + name.replace('"', '""') + '"'


DEADLOCK_RETRIES = 3  # ALTER TABLE ... OWNER TO takes each table's strongest lock: on a live database it can
                      # deadlock with a running transaction; PostgreSQL rolls the victim back whole, so the
                      # idempotent setup is simply run again


def setup_roles(engine: Engine) -> list[str]:
    """Create (if needed) the three group roles and grant them what they may do.  Idempotent.

    A deadlock with other work on the database (SQLSTATE 40P01, the whole transaction rolled back) is
    retried up to ``DEADLOCK_RETRIES`` times."""
    for attempt in range(1, DEADLOCK_RETRIES + 1):
        try:
            return _setup_roles_once(engine)
        except OperationalError as err:
            if getattr(err.orig, "sqlstate", None) != "40P01" or attempt == DEADLOCK_RETRIES:
                raise
            time.sleep(0.2 * attempt)
    raise AssertionError("unreachable")  # pragma: no cover


def _setup_roles_once(engine: Engine) -> list[str]:
    database = _require_postgresql(engine)
    names = {g: role_name(database, g) for g in GROUPS}
    tables = [t.name for t in metadata.sorted_tables] + ["alembic_version"]
    statements = []
    with engine.begin() as connection:
        for name in names.values():
            exists = connection.execute(text("SELECT 1 FROM pg_roles WHERE rolname = :n"), {"n": name}).first()
            if not exists:
                statements.append(f"CREATE ROLE {_quote(name)} NOLOGIN")
        reader, recorder, owner = (_quote(names[g]) for g in GROUPS)
        statements += [
            f"GRANT CONNECT ON DATABASE {_quote(database)} TO {reader}, {recorder}, {owner}",
            f"GRANT USAGE ON SCHEMA public TO {reader}, {recorder}",
            f"GRANT USAGE, CREATE ON SCHEMA public TO {owner}",
            f"GRANT SELECT ON ALL TABLES IN SCHEMA public TO {reader}, {recorder}",
            f"GRANT USAGE, SELECT ON ALL SEQUENCES IN SCHEMA public TO {recorder}",
        ]
        # the workspace's password hashes are read by the serving login only, never by readers or recorders
        statements.append(f"REVOKE ALL ON {_quote(PRIVATE_TABLE)} FROM {reader}, {recorder}")
        for table in RECORDER_WRITES:
            statements.append(f"GRANT INSERT, UPDATE ON {_quote(table)} TO {recorder}")
        for table in RECORDER_DELETES:
            statements.append(f"GRANT DELETE ON {_quote(table)} TO {recorder}")
        statements.append(f"GRANT INSERT ON change_log TO {recorder}")
        columns = ", ".join(STATION_LINEAGE_COLUMNS)
        statements.append(f"GRANT UPDATE ({columns}) ON station TO {recorder}")
        for table in tables:
            statements.append(f"ALTER TABLE {_quote(table)} OWNER TO {owner}")
        for statement in statements:
            connection.execute(text(statement))
    return statements


def grant(engine: Engine, login: str, group: str) -> str:
    """Make an existing login role a member of one group (and of no other monitor group)."""
    database = _require_postgresql(engine)
    if group not in GROUPS:
        raise DataError(f"unknown group '{group}'; expected one of {', '.join(GROUPS)}")
    with engine.begin() as connection:
        if not connection.execute(text("SELECT 1 FROM pg_roles WHERE rolname = :n"), {"n": login}).first():
            raise DataError(f"no role '{login}' on this server; create it first (CREATE ROLE ... LOGIN)")
        for other in GROUPS:
            if other != group:
                connection.execute(text(f"REVOKE {_quote(role_name(database, other))} FROM {_quote(login)}"))
        connection.execute(text(f"GRANT {_quote(role_name(database, group))} TO {_quote(login)}"))
    return role_name(database, group)


def group_urls(engine: Engine) -> dict[str, str]:
    """A database URL per group that works under that group's role (``options=-c role=...``), so that the
    browser workspace does each person's work with exactly the rights of their group.  The groups must exist
    (``monitor access setup``) and the serving login must be a member of each."""
    database = _require_postgresql(engine)
    names = {g: role_name(database, g) for g in GROUPS}
    with engine.connect() as connection:
        for name in names.values():
            row = connection.execute(text("SELECT pg_has_role(current_user, oid, 'MEMBER') FROM pg_roles "
                                          "WHERE rolname = :n"), {"n": name}).first()
            if row is None:
                raise DataError(f"the group role {name} does not exist; run `monitor access setup` first")
            if not row[0]:
                raise DataError(f"the login serving the workspace is not a member of {name}; serve with the "
                                "owner's login (or grant it the group)")
    return {g: engine.url.update_query_dict({"options": f"-c role={name}"}).render_as_string(hide_password=False)
            for g, name in names.items()}
