"""A programme with six seasons of records on each engine (SQLite, and PostgreSQL with the database group
roles of ``monitor access setup``), and clients of the workspace signed in as each role."""

from __future__ import annotations

import re
import uuid
from pathlib import Path

import pytest

from tests.conftest import POSTGRES_URL, REPO_ROOT, _postgres_database

RECORDS = REPO_ROOT / "demo_programme" / "records"
#: seasons stored before the tests; the demo's 2020 sheet is left for the upload tests
STORED_SEASONS = (2021, 2022, 2023, 2024, 2025, 2026)
HOSTILE = '<script>alert("owned")</script><img src=x onerror=alert(2)>'
PASSWORDS = {"owner": "owner-password-1", "recorder": "recorder-password-1", "reader": "reader-password-1"}


def _build(url: str) -> None:
    from monitor.services import setup
    from monitor.services.imports import import_records

    setup.init_database(url)
    setup.setup_folder(url, REPO_ROOT / "demo_programme")
    for year in STORED_SEASONS:
        import_records(url, RECORDS / f"season_{year}.csv", who="test")


@pytest.fixture(scope="module", params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def programme(request, tmp_path_factory):
    """(engine, database URL) of a programme with six seasons stored; each test module gets its own."""
    if request.param == "sqlite":
        url = str(tmp_path_factory.mktemp("web") / "programme.sqlite")
        _build(url)
        yield "sqlite", url
        return
    if not POSTGRES_URL:
        import os

        if os.environ.get("MONITOR_REQUIRE_POSTGRES"):
            pytest.fail("MONITOR_REQUIRE_POSTGRES is set but MONITOR_TEST_POSTGRES_URL is not")
        pytest.skip("PostgreSQL run skipped: set MONITOR_TEST_POSTGRES_URL to a server URL (.ci/run does)")
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url

    from monitor.services import backup

    generator = _postgres_database()
    url = next(generator)
    try:
        _build(url)
        backup.setup_access(url)
        yield "postgresql", url
    finally:
        next(generator, None)
        database = make_url(url).database
        admin = create_engine(make_url(POSTGRES_URL), isolation_level="AUTOCOMMIT")
        with admin.connect() as connection:
            for group in ("reader", "recorder", "owner"):
                connection.execute(text(f'DROP ROLE IF EXISTS "{database}_{group}"'))
        admin.dispose()


CSRF = re.compile(r'name="csrf" value="([^"]+)"')


class Client:
    """A test client of the workspace that knows its session's CSRF token."""

    def __init__(self, client, app):
        self.http = client
        self.app = app

    def get(self, url, **kw):
        return self.http.get(url, **kw)

    def csrf(self, page: str = "/records") -> str:
        found = CSRF.search(self.http.get(page).text)
        assert found, f"no CSRF token on {page}"
        return found.group(1)

    def post(self, url, data=None, files=None, *, page="/records", csrf=True, **kw):
        data = dict(data or {})
        if csrf:
            data["csrf"] = self.csrf(page)
        return self.http.post(url, data=data, files=files, **kw)


def make_client(engine: str, url: str, workdir: Path, role: str = "owner", *, limiter=None) -> Client:
    """A client signed in as ``role``: by the one-time token on SQLite, by password on PostgreSQL."""
    from starlette.testclient import TestClient

    from monitor.services import web_users
    from monitor.web.app import WebConfig, create_app

    if engine == "sqlite":
        config = WebConfig(db=url, workdir=workdir, open_token="t-" + uuid.uuid4().hex)
        app = create_app(config, limiter=limiter)
        client = TestClient(app, follow_redirects=True)
        assert client.get(f"/open?token={config.open_token}").status_code == 200
        return Client(client, app)
    config = WebConfig(db=url, workdir=workdir, shared=True, role_db=web_users.role_urls(url))
    app = create_app(config, limiter=limiter)
    client = TestClient(app, follow_redirects=True)
    login = f"{role}-{uuid.uuid4().hex[:6]}"
    web_users.add_user(url, login, role, PASSWORDS[role])
    c = Client(client, app)
    response = c.post("/signin", {"login": login, "password": PASSWORDS[role]}, page="/signin")
    assert response.status_code == 200 and f"{login} ({role})" in response.text
    return c


@pytest.fixture
def owner(programme, tmp_path):
    return make_client(*programme, tmp_path / "web", "owner")
