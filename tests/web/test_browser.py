"""The workspace and the offline phone sheet in a real browser: Debian's chromium driven by Playwright
(``executable_path``; no browser is ever downloaded).  Skipped only where no chromium is installed; CI
installs it (.ci/run)."""

from __future__ import annotations

import csv
import io
import uuid
import zipfile
from pathlib import Path

import pandas as pd
import pytest

from monitor.cli.main import main
from monitor.services import web_users
from monitor.services.history import station_history
from monitor.services.imports import import_records
from monitor.web.app import WebConfig, create_app
from tests.conftest import POSTGRES_URL, _postgres_database, table_counts
from tests.web.conftest import PASSWORDS, RECORDS, _build
from tests.web.live import browser, chromium_path, served

pytestmark = [pytest.mark.browser,
              pytest.mark.skipif(chromium_path() is None, reason="no chromium installed (.ci/run installs it)")]

PHONE = {"width": 390, "height": 844}
DESKTOP = {"width": 1280, "height": 900}


@pytest.fixture(scope="module")
def chromium():
    with browser() as b:
        yield b


@pytest.fixture(scope="module")
def site(tmp_path_factory):
    """An SQLite programme with six seasons, served on loopback; yields (base URL, db, workdir, token)."""
    folder = tmp_path_factory.mktemp("browser")
    db = str(folder / "programme.sqlite")
    _build(db)
    config = WebConfig(db=db, workdir=folder / "web", open_token="open-" + uuid.uuid4().hex)
    with served(create_app(config)) as base:
        yield {"base": base, "db": db, "workdir": folder / "web", "token": config.open_token, "folder": folder}


@pytest.fixture(scope="module")
def signed_in(chromium, site):
    context = chromium.new_context(viewport=DESKTOP, accept_downloads=True)
    page = context.new_page()
    page.goto(f"{site['base']}/open?token={site['token']}")
    assert page.locator("h1").inner_text() == "Hollowmere Vale Reserve plant monitoring"
    yield page
    context.close()


def test_upload_with_problems_fix_import_and_find_the_values(signed_in, site, tmp_path):
    page = signed_in
    sheet = pd.read_csv(RECORDS / "season_2020.csv", dtype=str, keep_default_na=False)
    bad = sheet.copy()
    bad.loc[0, "GLASED:cover"] = "140"
    bad.loc[3, "HEABEL:frequency/25"] = "31"
    path = tmp_path / "season_2020.csv"
    bad.to_csv(path, index=False)
    page.click("nav >> text=Records")
    page.set_input_files("#sheet", str(path))
    page.click("text=Check the sheet")
    problems = page.locator("#problems tbody tr")
    assert problems.count() == 2
    assert "GLASED:cover" in problems.nth(0).inner_text() and "140" in problems.nth(0).inner_text()
    assert "HEABEL:frequency/25" in problems.nth(1).inner_text()
    assert page.locator("#preview tr.bad").count() == 2
    assert page.locator("#preview td.bad").all_inner_texts() == ["140", "31"]
    assert page.locator("text=Import season_2020.csv").count() == 0  # nothing to confirm while problems remain
    # fix the sheet and upload it again
    sheet.to_csv(path, index=False)
    page.click("nav >> text=Records")
    page.set_input_files("#sheet", str(path))
    page.click("text=Check the sheet")
    assert "No problems found" in page.locator("p.flash").inner_text()
    page.click("text=Import season_2020.csv")
    assert "imported" in page.locator("p.flash").inner_text()
    # the values are on the station's page
    row = sheet[sheet["status"] == "done"].iloc[1]
    page.goto(f"{site['base']}/stations/{row['station']}")
    table = page.locator("#visits")
    headers = table.locator("thead th").all_inner_texts()
    line = table.locator("tbody tr", has_text=row["date"])
    cells = line.locator("td").all_inner_texts()
    for column in [c for c in sheet.columns if ":" in c and not c.startswith("cov:")]:
        shown = cells[headers.index(column.split("/")[0])]
        assert float(shown) == pytest.approx(float(row[column])), column


def test_plan_a_season_and_download_its_pack(signed_in, site, tmp_path):
    page = signed_in
    page.goto(f"{site['base']}/season?year=2027")
    page.fill("input[name=teams]", "2")
    page.click("text=Plan 2027")
    assert "Season 2027 planned and stored" in page.locator("p.flash").inner_text()
    assert page.locator("#team-days tbody tr").count() >= 2
    page.click("text=Write the field packs for 2027")
    with page.expect_download() as info:
        page.click("text=Download all packs of 2027 (zip)")
    saved = tmp_path / "packs.zip"
    info.value.save_as(saved)
    names = zipfile.ZipFile(saved).namelist()
    assert sum(n.endswith("/phone_sheet.html") for n in names) == page.locator("#team-days tbody tr").count()


def test_open_a_species_trend_and_download_the_report(signed_in, site, tmp_path):
    page = signed_in
    page.goto(f"{site['base']}/trends")
    page.click("a[href='/trends/MARVIO']")
    assert page.locator("img.chart").is_visible()
    call = page.locator("p.call").inner_text().lower()
    assert any(word in call for word in ("rising", "declining", "stable", "unclear")) and "% a year" in call
    from monitor.services import workspace

    seasons = workspace.seasons(site["db"])
    assert page.locator("#indices tbody tr").count() == int((seasons["visits"] > 0).sum())  # one row a season
    page.goto(f"{site['base']}/trends")
    page.fill("input[name=year]", "2026")
    page.click("text=Build the report", no_wait_after=True)
    page.wait_for_selector("text=The 2026 report is built", timeout=240000)
    with page.expect_download() as info:
        page.click("a[href='/files/reports/2026/index.html']")
    saved = tmp_path / "report.html"
    info.value.save_as(saved)
    text = saved.read_text(encoding="utf-8")
    assert "<html" in text and "Hollowmere Vale" in text and "2026" in text
    with page.expect_download() as info:  # the report service writes the printed PDF beside the page
        page.click("a[href='/files/reports/2026/report.pdf']")
    pdf = tmp_path / "report.pdf"
    info.value.save_as(pdf)
    assert pdf.read_bytes()[:5] == b"%PDF-"


def _typed_values(fields: list[dict]) -> list[dict[str, str]]:
    """What the test types for three stations: in range for each measure, with deliberate zeros."""
    plans = []
    for k in range(3):
        values = {}
        for j, f in enumerate(fields):
            if f["kind"] == "covariate":
                values[f["header"]] = f"{41.5 + k}"
            elif (j + k) % 4 == 0:
                values[f["header"]] = "0"          # a zero: entered with the 0 button
            elif f["measure"] == "cover":
                values[f["header"]] = f"{12.5 + k}"
            elif f["n"] is not None:
                values[f["header"]] = str(min(f["n"], 3 + k))
            elif f["measure"] == "presence":
                values[f["header"]] = "1"
            else:
                values[f["header"]] = str(7 + 2 * k)
        plans.append(values)
    return plans


def test_offline_phone_sheet_fill_reload_export_and_import(chromium, tmp_path):
    """Fill three stations on the phone sheet opened from a file, reload, export, import with the command line,
    and find every typed value stored."""
    db = str(tmp_path / "programme.sqlite")
    _build(db)
    assert main(["--db", db, "season", "plan", "2027", "--teams", "2", "--seed", "7"]) == 0
    assert main(["--db", db, "season", "pack", "2027", str(tmp_path / "packs")]) == 0
    sheet = sorted((tmp_path / "packs").glob("*/phone_sheet.html"))[0]
    from monitor.schedule.fieldpack import phone_sheet_data  # noqa: F401  (the page's data: read back below)

    context = chromium.new_context(viewport=PHONE, accept_downloads=True, has_touch=True, is_mobile=True)
    page = context.new_page()
    page.route("**/*", lambda route: route.abort() if not route.request.url.startswith("file:") else route.continue_())
    page.goto(sheet.as_uri())
    data = page.evaluate("JSON.parse(document.getElementById('sheet-data').textContent)")
    fields = data["fields"]
    stations = [s["station"] for s in data["stations"]][:3]
    assert len(stations) == 3
    # large targets for a wet thumb: every control at least 48 px high at phone width
    for control in page.locator("section.stop button, section.stop input[type=text], fieldset.status label").all()[:40]:
        assert control.bounding_box()["height"] >= 48
    # checked as typed: the importer's rule for each measure
    first = page.locator("section.stop").nth(0)
    first.locator("fieldset.status label", has_text="done").click()
    cover = next(f for f in fields if f["measure"] == "cover")
    box = first.locator(f"input[data-header='{cover['header']}']")
    box.fill("130")
    assert box.get_attribute("aria-invalid") == "true"
    assert "cover in percent, 0 to 100" in first.locator(".msg").all_inner_texts()[fields.index(cover)]
    count = next(f for f in fields if f["measure"] == "count")
    box = first.locator(f"input[data-header='{count['header']}']")
    box.fill("2.5")
    assert "a count: a whole number >= 0" in first.locator(".msg").all_inner_texts()[fields.index(count)]
    box.fill("0")
    assert "tap the 0 button" in first.locator(".msg").all_inner_texts()[fields.index(count)]
    framed = next(f for f in fields if f["n"] is not None)
    box = first.locator(f"input[data-header='{framed['header']}']")
    box.fill(str(framed["n"] + 1))
    assert f"n = {framed['n']}" in first.locator(".msg").all_inner_texts()[fields.index(framed)]
    # fill three stations
    typed = _typed_values(fields)
    notes = ["gate chained, climbed over", 'marker "bent", re-set', "quadrat flooded at one corner, values ok"]
    for k, code in enumerate(stations):
        section = page.locator(f"section.stop[data-station='{code}']")
        section.locator("fieldset.status label", has_text="done").click()
        for f in fields:
            value = typed[k][f["header"]]
            box = section.locator(f"input[data-header='{f['header']}']")
            if value == "0" and f["kind"] == "value":
                box.fill("")
                section.locator(f"button.zero[data-header='{f['header']}']").click()
            else:
                box.fill(value)
            assert box.get_attribute("aria-invalid") == "false", (code, f["header"], value)
        section.locator("textarea[name=notes]").fill(notes[k])
    # reload (a flat battery, a closed tab): nothing is lost
    page.reload()
    for k, code in enumerate(stations):
        section = page.locator(f"section.stop[data-station='{code}']")
        assert section.locator("input[type=radio][value=done]").is_checked()
        for f in fields:
            assert section.locator(f"input[data-header='{f['header']}']").input_value() == typed[k][f["header"]]
        assert section.locator("textarea[name=notes]").input_value() == notes[k]
    # export the day's entry file
    with page.expect_download() as info:
        page.click("#export")
    exported = tmp_path / info.value.suggested_filename
    info.value.save_as(exported)
    context.close()
    rows = list(csv.DictReader(io.StringIO(exported.read_text(encoding="utf-8"))))
    assert [r["station"] for r in rows] == stations
    blank = pd.read_csv(sorted((tmp_path / "packs").glob("*/entry_sheet.csv"))[0], dtype=str)
    assert list(rows[0].keys()) == list(blank.columns)  # the same layout as the pack's blank entry sheet
    # import it with the command line (the planned day lies after today: its date warning is accepted)
    before = table_counts(db)
    assert main(["--db", db, "records", "import", str(exported), "--accept-warnings"]) == 0
    assert table_counts(db)["observation"] == before["observation"] + 3 * sum(f["kind"] == "value" for f in fields)
    for k, code in enumerate(stations):
        history = station_history(db, code)
        visit = next(v for v in history["visits"] if v["year"] == 2027)
        assert visit["status"] == "done" and visit["notes"] == notes[k]
        assert visit["observers"] == ";".join(data["members"])
        for f in fields:
            if f["kind"] == "value":
                key = f"{f['species']}:{f['measure']}"
                assert visit["values"][key] == pytest.approx(float(typed[k][f["header"]])), (code, key)


@pytest.mark.postgres
def test_a_reader_signs_in_and_is_refused_an_upload(chromium, tmp_path):
    if not POSTGRES_URL:
        import os

        if os.environ.get("MONITOR_REQUIRE_POSTGRES"):
            pytest.fail("MONITOR_REQUIRE_POSTGRES is set but MONITOR_TEST_POSTGRES_URL is not")
        pytest.skip("PostgreSQL run skipped: set MONITOR_TEST_POSTGRES_URL (.ci/run does)")
    from sqlalchemy import create_engine, text
    from sqlalchemy.engine import make_url

    from monitor.services import backup, setup

    generator = _postgres_database()
    url = next(generator)
    try:
        setup.init_database(url)
        setup.setup_folder(url, Path(RECORDS).parent)
        import_records(url, RECORDS / "season_2026.csv", who="test")
        backup.setup_access(url)
        web_users.add_user(url, "rhea", "reader", PASSWORDS["reader"])
        config = WebConfig(db=url, workdir=tmp_path / "web", shared=True, role_db=web_users.role_urls(url))
        before = table_counts(url)
        with served(create_app(config)) as base:
            context = chromium.new_context(viewport=DESKTOP)
            page = context.new_page()
            page.goto(f"{base}/records")
            assert page.url.endswith("/signin")
            page.fill("#login", "rhea")
            page.fill("#password", PASSWORDS["reader"])
            page.click("button:has-text('Sign in')")
            assert "rhea (reader)" in page.locator("header form.who").inner_text()
            page.goto(f"{base}/records")
            assert page.locator("#sheet").count() == 0
            assert "uploading and correcting need a recorder" in page.content()
            # a forged upload from the reader's own session, with a valid CSRF token, is refused too
            token = page.locator("input[name=csrf]").first.get_attribute("value")
            response = page.request.post(f"{base}/records/upload", multipart={
                "csrf": token, "sheet": {"name": "season_2025.csv", "mimeType": "text/csv",
                                         "buffer": (RECORDS / "season_2025.csv").read_bytes()}})
            assert response.status == 403 and "needs a recorder" in response.text()
            context.close()
        assert table_counts(url) == before
    finally:
        next(generator, None)
        database = make_url(url).database
        admin = create_engine(make_url(POSTGRES_URL), isolation_level="AUTOCOMMIT")
        with admin.connect() as connection:
            for group in ("reader", "recorder", "owner"):
                connection.execute(text(f'DROP ROLE IF EXISTS "{database}_{group}"'))
        admin.dispose()
