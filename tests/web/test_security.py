"""The workspace's defences: CSRF on every form, names always text, downloads confined to their folder, the
sign-in limit, the one-time opening link, cookies, and each role held to its database group's rights."""

from __future__ import annotations

import re
import uuid

import pytest
from starlette.testclient import TestClient

from monitor.security import SignInLimiter, hash_password, safe_file, verify_password
from monitor.services import web_users
from monitor.services.history import station_history
from monitor.services.imports import import_records
from monitor.web.app import SESSION_COOKIE, WebConfig, create_app
from tests.conftest import table_counts
from tests.web.conftest import HOSTILE, PASSWORDS, RECORDS, make_client

#: every form of the workspace (path, fields other than the CSRF token); each must refuse a post without it
FORMS = [
    ("/season/plan", {"year": "2027", "teams": "2"}),
    ("/season/packs", {"year": "2026"}),
    ("/records/correct", {"station": "SM-17", "year": "2024", "field": "MARVIO:count", "value": "99",
                          "reason": "forged"}),
    ("/records/certify", {"year": "2024"}),
    ("/records/unlock", {"year": "2024", "reason": "forged"}),
    ("/quality/check", {}),
    ("/quality/resolve", {"flag": "1", "note": "forged"}),
    ("/trends/report", {"year": "2026"}),
    ("/records/upload", {}),
    ("/records/import/anything", {}),
    ("/signout", {}),
]


@pytest.mark.parametrize("path,fields", FORMS, ids=[p for p, _ in FORMS])
def test_a_form_posted_without_its_csrf_token_is_refused_and_writes_nothing(owner, programme, path, fields):
    _engine, url = programme
    before = table_counts(url)
    for token in (None, "not-the-token"):
        data = dict(fields) if token is None else {**fields, "csrf": token}
        response = owner.http.post(path, data=data)
        assert response.status_code == 403, (path, response.status_code)
        assert "security token" in response.text
    assert table_counts(url) == before
    assert owner.get("/").status_code == 200  # still signed in: sign-out too needs the token


def test_every_form_in_the_pages_carries_the_token(owner):
    pages = ["/", "/stations", "/stations/SM-17", "/season?year=2026", "/records", "/quality", "/trends"]
    owner.post("/season/plan", {"year": "2027", "teams": "2"}, page="/season")
    pages.append("/season?year=2027")
    forms = 0
    for page in pages:
        text = owner.get(page).text
        for form in re.findall(r"<form[^>]*method=\"post\"[^>]*>(.*?)</form>", text, flags=re.S):
            forms += 1
            assert 'name="csrf"' in form, page
    assert forms >= 8


def _make_hostile(url: str) -> None:
    from sqlalchemy import create_engine, text

    from monitor.config import database_url

    engine = create_engine(database_url(url))
    with engine.begin() as connection:
        connection.execute(text("UPDATE species SET common_name = :h, scientific_name = :h WHERE code = 'MARVIO'"),
                           {"h": HOSTILE})
        connection.execute(text("UPDATE site SET name = :h WHERE code = 'SM'"), {"h": HOSTILE})
        connection.execute(text("UPDATE station SET relocation_notes = :h, marker = :h WHERE code = 'SM-17'"),
                           {"h": HOSTILE})
        connection.execute(text("UPDATE programme SET name = :h"), {"h": HOSTILE})
    engine.dispose()


def test_hostile_names_from_the_database_show_as_text_on_every_page(programme, tmp_path):
    engine, url = programme
    if engine != "sqlite":
        pytest.skip("one engine is enough: the names pass through the same templates")
    import shutil

    copy = tmp_path / "hostile.sqlite"
    shutil.copy(url, copy)
    _make_hostile(str(copy))
    client = make_client("sqlite", str(copy), tmp_path / "web")
    client.post("/season/plan", {"year": "2027", "teams": "2"}, page="/season")
    client.post("/quality/check", page="/quality")
    pages = ["/", "/stations", "/stations/SM-17", "/season?year=2027", "/records", "/quality", "/trends",
             "/trends/MARVIO"]
    escaped = "&lt;script&gt;alert(&#34;owned&#34;)&lt;/script&gt;&lt;img src=x onerror=alert(2)&gt;"
    shown = 0
    for page in pages:
        response = client.get(page)
        assert response.status_code == 200, page
        assert "<script" not in response.text.lower(), page
        assert "<img src=x" not in response.text, page
        shown += response.text.count(escaped)
    assert shown >= 6  # programme name on the overview, site name, species names, marker and notes
    # and the upload preview shows a hostile cell as text
    sheet = tmp_path / "hostile.csv"
    text = (RECORDS / "season_2020.csv").read_text().splitlines()
    cells = text[1].split(",")
    cells[6] = '"' + HOSTILE.replace('"', '""') + '"'
    sheet.write_text("\n".join([text[0], ",".join(cells), *text[2:]]) + "\n")
    check = client.post("/records/upload", files={"sheet": (sheet.name, sheet.read_bytes(), "text/csv")})
    assert "<script" not in check.text.lower() and escaped in check.text
    # a response never allows inline script
    assert "script-src 'none'" in check.headers["content-security-policy"]


@pytest.mark.parametrize("path", [
    "/files/packs/../../programme.sqlite",
    "/files/packs/%2e%2e/%2e%2e/programme.sqlite",
    "/files/packs/..%2f..%2fprogramme.sqlite",
    "/files/reports/2026/..%2f..%2f..%2fprogramme.sqlite",
    "/files/packs/%2fetc%2fpasswd",
    "/files/other/anything",
])
def test_a_download_path_reaching_outside_its_folder_is_refused(owner, path):
    response = owner.http.get(path)
    assert response.status_code in (404, 400), path
    assert b"SQLite format" not in response.content and b"root:" not in response.content


def test_safe_file_keeps_inside_its_folder(tmp_path):
    base = tmp_path / "packs"
    (base / "2027").mkdir(parents=True)
    (base / "2027" / "a.csv").write_text("x")
    (tmp_path / "secret.txt").write_text("s")
    (base / "link").symlink_to(tmp_path / "secret.txt")
    assert safe_file(base, "2027/a.csv") == (base / "2027" / "a.csv").resolve()
    for bad in ("../secret.txt", "2027/../../secret.txt", "/etc/passwd", "2027\\..\\..\\secret.txt", "link",
                "", "2027", "./2027/a.csv", "2027//a.csv", "2027/a.csv\x00"):
        assert safe_file(base, bad) is None, bad


def test_scrypt_hash_is_salted_and_checks_only_the_right_password():
    first, second = hash_password("correct horse"), hash_password("correct horse")
    assert first != second and first.startswith("scrypt$32768$8$1$")
    assert verify_password("correct horse", first) and verify_password("correct horse", second)
    assert not verify_password("correct hors", first) and not verify_password("", first)
    assert not verify_password("correct horse", "md5$abc")
    # RFC 7914 section 12, second test vector (scrypt, "password", "NaCl", N=1024, r=8, p=16, 64 bytes)
    import hashlib

    assert hashlib.scrypt(b"password", salt=b"NaCl", n=1024, r=8, p=16, dklen=64).hex().startswith(
        "fdbabe1c9d3472007856e7190d01e9fe7c6ad7cbc8237830e77376634b373162")


def test_sign_in_limiter_locks_and_doubles():
    now = [0.0]
    limiter = SignInLimiter(allowed=3, window=60, lock=10, clock=lambda: now[0])
    for _ in range(3):
        assert limiter.wait("ann", "1.2.3.4") == 0
        limiter.failed("ann", "1.2.3.4")
    assert limiter.wait("ann", "1.2.3.4") == pytest.approx(10)
    assert limiter.wait("ann", "5.6.7.8") == pytest.approx(10)   # the login is locked from anywhere
    assert limiter.wait("bob", "1.2.3.4") == pytest.approx(10)   # and the address for any login
    now[0] = 11.0
    assert limiter.wait("ann", "9.9.9.9") == 0
    for _ in range(3):
        limiter.failed("ann", "9.9.9.9")
    assert limiter.wait("ann", "9.9.9.9") == pytest.approx(20)   # the second lockout is twice as long


def _shared_client(url, tmp_path, limiter=None):
    """A shared (sign-in) workspace; on SQLite without database roles, to test the sign-in itself."""
    config = WebConfig(db=url, workdir=tmp_path / "web", shared=True)
    return TestClient(create_app(config, limiter=limiter), follow_redirects=False)


def _csrf(client, page="/signin"):
    return re.search(r'name="csrf" value="([^"]+)"', client.get(page).text).group(1)


def test_repeated_wrong_passwords_lock_the_login(programme, tmp_path):
    _engine, url = programme
    login = f"ann-{uuid.uuid4().hex[:6]}"
    web_users.add_user(url, login, "recorder", PASSWORDS["recorder"])
    client = _shared_client(url, tmp_path, SignInLimiter(allowed=5, window=900, lock=60))
    token = _csrf(client)
    for _ in range(5):
        r = client.post("/signin", data={"login": login, "password": "wrong-password", "csrf": token})
        assert r.status_code == 401 and "do not match" in r.text
    locked = client.post("/signin", data={"login": login, "password": PASSWORDS["recorder"], "csrf": token})
    assert locked.status_code == 429 and "Too many wrong passwords" in locked.text
    assert SESSION_COOKIE not in locked.headers.get("set-cookie", "")
    assert client.get("/").status_code == 303  # still not signed in


def test_sign_in_sets_a_new_http_only_strict_cookie_and_sign_out_ends_it(programme, tmp_path):
    _engine, url = programme
    login = f"bo-{uuid.uuid4().hex[:6]}"
    web_users.add_user(url, login, "reader", PASSWORDS["reader"])
    client = _shared_client(url, tmp_path)
    assert client.get("/").headers["location"] == "/signin"
    first = client.cookies.get(SESSION_COOKIE)
    r = client.post("/signin", data={"login": login, "password": PASSWORDS["reader"], "csrf": _csrf(client)})
    assert r.status_code == 303
    cookie = r.headers["set-cookie"]
    assert "HttpOnly" in cookie and "samesite=strict" in cookie.lower() and "Secure" not in cookie
    assert client.cookies.get(SESSION_COOKIE) != first  # a fresh session id on sign-in
    assert client.get("/").status_code == 200
    client.post("/signout", data={"csrf": _csrf(client, "/")})
    assert client.get("/").status_code == 303


def test_cookies_are_secure_when_served_over_https(programme, tmp_path):
    _engine, url = programme
    config = WebConfig(db=url, workdir=tmp_path / "web", open_token="tok", secure_cookies=True)
    client = TestClient(create_app(config), base_url="https://testserver", follow_redirects=False)
    r = client.get("/open?token=tok")
    assert r.status_code == 303 and "Secure" in r.headers["set-cookie"] and "HttpOnly" in r.headers["set-cookie"]


def test_the_opening_link_works_once(programme, tmp_path):
    engine, url = programme
    if engine != "sqlite":
        pytest.skip("the one-time link is the single-user (SQLite) way in")
    config = WebConfig(db=url, workdir=tmp_path / "web", open_token="once")
    app = create_app(config)
    first, second = TestClient(app, follow_redirects=False), TestClient(app, follow_redirects=False)
    assert first.get("/").status_code == 401
    assert first.get("/open?token=wrong").status_code == 401
    assert first.get("/open?token=once").status_code == 303
    assert first.get("/").status_code == 200
    assert second.get("/open?token=once").status_code == 401  # used: another browser cannot come in with it
    assert second.get("/records").status_code == 401


def test_an_sqlite_workspace_listens_on_loopback_only(tmp_path):
    from monitor.errors import InputError
    from monitor.web import server

    with pytest.raises(InputError, match="loopback"):
        server.configure(str(tmp_path / "x.sqlite"), host="0.0.0.0")
    config = server.configure(str(tmp_path / "x.sqlite"), host="127.0.0.1")
    assert not config.shared and len(config.open_token) >= 24
    assert server.opening_url(config, "127.0.0.1", 8765).startswith("http://127.0.0.1:8765/open?token=")


def test_a_reader_may_read_but_never_upload_or_correct(programme, tmp_path):
    engine, url = programme
    if engine != "postgresql":
        pytest.skip("readers and recorders are people of a shared (PostgreSQL) programme")
    reader = make_client(engine, url, tmp_path / "web", "reader")
    page = reader.get("/records")
    assert page.status_code == 200 and 'action="/records/upload"' not in page.text
    before = table_counts(url)
    sheet = RECORDS / "season_2020.csv"
    refused = reader.post("/records/upload", files={"sheet": (sheet.name, sheet.read_bytes(), "text/csv")})
    assert refused.status_code == 403 and "needs a recorder" in refused.text
    refused = reader.post("/records/correct", {"station": "SM-17", "year": "2024", "field": "MARVIO:count",
                                               "value": "99", "reason": "x"})
    assert refused.status_code == 403
    assert table_counts(url) == before
    # and the database itself refuses the reader's role a write, whatever the pages do
    from monitor.errors import AccessError

    with pytest.raises(AccessError):
        import_records(web_users.role_urls(url)["reader"], sheet, who="test")
    assert table_counts(url) == before


def test_a_recorder_works_under_the_recorder_role_and_cannot_touch_the_change_log(programme, tmp_path):
    engine, url = programme
    if engine != "postgresql":
        pytest.skip("roles are PostgreSQL's")
    from sqlalchemy import create_engine, text
    from sqlalchemy.exc import ProgrammingError

    recorder = make_client(engine, url, tmp_path / "web", "recorder")
    visit = next(v for v in station_history(url, "SM-17")["visits"] if v["status"] == "done")
    done = recorder.post("/records/correct", {"station": "SM-17", "year": str(visit["year"]), "field": "GLASED:cover",
                                              "value": str(visit["values"]["GLASED:cover"] + 1),
                                              "reason": "typo on the sheet"})
    assert done.status_code == 200 and "(logged)" in done.text
    role_url = web_users.role_urls(url)["recorder"]
    engine_ = create_engine(role_url)
    try:
        with engine_.connect() as connection:
            assert connection.execute(text("SELECT current_user")).scalar().endswith("_recorder")
            last = connection.execute(text("SELECT changed_by FROM change_log ORDER BY id DESC LIMIT 1")).scalar()
            assert last.startswith("web:recorder-")
            connection.rollback()
        for statement in ("UPDATE change_log SET reason = 'rewritten'", "DELETE FROM change_log",
                          "ALTER TABLE station ADD COLUMN x2 integer", "SELECT * FROM web_user"):
            with pytest.raises(ProgrammingError, match="permission denied|must be owner"):
                with engine_.begin() as connection:
                    connection.execute(text(statement))
    finally:
        engine_.dispose()
