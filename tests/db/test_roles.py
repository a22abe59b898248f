"""Roles of a shared PostgreSQL programme: each may do its job and is refused the rest with one clear line."""

from __future__ import annotations

import uuid

import pytest
from sqlalchemy import create_engine, text
from sqlalchemy.engine import make_url

from monitor.cli.main import main
from monitor.services import backup, setup
from tests.conftest import POSTGRES_URL, REPO_ROOT, _postgres_database

pytestmark = pytest.mark.postgres


@pytest.fixture
def shared(tmp_path):
    if not POSTGRES_URL:
        pytest.skip("PostgreSQL run skipped: set MONITOR_TEST_POSTGRES_URL (.ci/run does)")
    generator = _postgres_database()
    url = next(generator)
    setup.init_database(url)
    setup.setup_folder(url, REPO_ROOT / "demo_programme")
    backup.setup_access(url)
    admin = create_engine(make_url(POSTGRES_URL), isolation_level="AUTOCOMMIT")
    logins = {group: f"t_{group}_{uuid.uuid4().hex[:8]}" for group in ("reader", "recorder", "owner")}
    with admin.connect() as connection:
        for login in logins.values():
            connection.execute(text(f'CREATE ROLE "{login}" LOGIN'))
    for group, login in logins.items():
        backup.grant_access(url, login, group)
    urls = {group: make_url(url).set(username=login).render_as_string(hide_password=False)
            for group, login in logins.items()}
    try:
        yield url, urls
    finally:
        next(generator, None)
        database = make_url(url).database
        with admin.connect() as connection:
            for login in logins.values():
                connection.execute(text(f'DROP ROLE IF EXISTS "{login}"'))
            for group in ("reader", "recorder", "owner"):
                connection.execute(text(f'DROP ROLE IF EXISTS "{database}_{group}"'))
        admin.dispose()


def _run(url, *args, capsys):
    code = main(["--db", url, *args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def test_reader_reads_and_is_refused_writes(shared, capsys):
    _url, urls = shared
    code, out, _err = _run(urls["reader"], "summary", capsys=capsys)
    assert code == 0 and "Stream Meadow" in out
    sheet = str(REPO_ROOT / "demo_programme" / "records" / "season_2024.csv")
    code, _out, err = _run(urls["reader"], "records", "import", sheet, capsys=capsys)
    assert code == 1 and "may not" in err and "Traceback" not in err
    assert len(err.strip().splitlines()) == 1


def test_recorder_imports_but_cannot_alter_the_change_log_or_schema(shared, capsys):
    url, urls = shared
    sheet = str(REPO_ROOT / "demo_programme" / "records" / "season_2024.csv")
    code, _out, err = _run(urls["recorder"], "records", "import", sheet, capsys=capsys)
    assert code == 0, err
    engine = create_engine(urls["recorder"])
    with pytest.raises(Exception, match="permission denied"):
        with engine.begin() as connection:
            connection.execute(text("UPDATE change_log SET reason = 'rewritten'"))
    with pytest.raises(Exception, match="permission denied"):
        with engine.begin() as connection:
            connection.execute(text("DELETE FROM change_log"))
    with pytest.raises(Exception, match="permission denied|must be owner"):
        with engine.begin() as connection:
            connection.execute(text("ALTER TABLE observation ADD COLUMN x integer"))
    engine.dispose()


def test_only_the_owner_changes_the_schema(shared, capsys):
    from monitor.db import migrate
    from monitor.db.engine import make_engine

    url, urls = shared
    engine = make_engine(url)
    migrate.downgrade(engine, "-1")  # an older schema, as after installing a newer monitor
    engine.dispose()
    code, _out, err = _run(urls["recorder"], "init", capsys=capsys)
    assert code == 1 and "may not change the schema" in err and "Traceback" not in err
    code, _out, err = _run(urls["owner"], "init", capsys=capsys)
    assert code == 0, err
    engine = make_engine(url)
    assert migrate.current_revision(engine) == migrate.head_revision()
    engine.dispose()


class _PgError(Exception):
    def __init__(self, sqlstate):
        super().__init__(sqlstate)
        self.sqlstate = sqlstate


def test_role_setup_runs_again_after_a_deadlock_and_only_then(monkeypatch):
    """SQLSTATE 40P01 is PostgreSQL's deadlock_detected (PostgreSQL 15 docs, Appendix A, error codes): the
    victim's transaction is rolled back whole, so the idempotent setup may run again; any other error is
    raised at once."""
    from sqlalchemy.exc import OperationalError

    from monitor.db import roles

    calls = []

    def once(engine, failures):
        calls.append(engine)
        if len(calls) <= failures:
            raise OperationalError("ALTER TABLE station OWNER TO x", {}, _PgError("40P01"))
        return ["done"]

    monkeypatch.setattr(roles.time, "sleep", lambda s: None)
    monkeypatch.setattr(roles, "_setup_roles_once", lambda e: once(e, 1))
    assert roles.setup_roles("engine") == ["done"] and len(calls) == 2

    calls.clear()
    monkeypatch.setattr(roles, "_setup_roles_once", lambda e: once(e, roles.DEADLOCK_RETRIES))
    with pytest.raises(OperationalError):
        roles.setup_roles("engine")
    assert len(calls) == roles.DEADLOCK_RETRIES

    calls.clear()

    def other(engine):
        calls.append(engine)
        raise OperationalError("GRANT", {}, _PgError("42501"))  # insufficient_privilege

    monkeypatch.setattr(roles, "_setup_roles_once", other)
    with pytest.raises(OperationalError):
        roles.setup_roles("engine")
    assert len(calls) == 1
