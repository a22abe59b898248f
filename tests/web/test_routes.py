"""Every page and form of the workspace through Starlette's test client, on SQLite and PostgreSQL: what a page
shows is what the services hold, and what a form does is what the same command does."""

from __future__ import annotations

import io
import re
import zipfile

import pandas as pd
import pytest

from monitor.services import quality, schedule, workspace
from monitor.services.corrections import set_value
from monitor.services.history import station_history
from tests.conftest import table_counts
from tests.web.conftest import RECORDS


def test_every_page_shows_the_programme(owner, programme):
    _engine, url = programme
    overview = owner.get("/")
    assert overview.status_code == 200
    assert "Hollowmere Vale Reserve plant monitoring" in overview.text
    for site in ("Stream Meadow", "SM", "CB", "HH", "WE"):
        assert site in overview.text
    stations = owner.get("/stations")
    assert stations.status_code == 200 and "<svg" in stations.text
    for code in workspace.reserve(url)["stations"]["station"]:
        assert f'href="/stations/{code}"' in stations.text
    # the station page: every stored value of the station's visits is in its table (values from the service)
    history = station_history(url, "SM-17")
    page = owner.get("/stations/SM-17")
    assert page.status_code == 200
    for visit in history["visits"]:
        assert visit["date"].isoformat() in page.text
    assert "relocation_notes" in page.text and "steel pin" in page.text
    for path in ("/season", "/season?year=2027", "/records", "/quality", "/trends"):
        response = owner.get(path)
        assert response.status_code == 200, (path, response.text[:500])
    trend = owner.get("/trends/MARVIO")
    assert trend.status_code == 200 and "data:image/png;base64," in trend.text
    assert any(call in trend.text for call in ("rising", "declining", "stable", "unclear"))


def test_unknown_station_is_a_clear_page(owner):
    response = owner.get("/stations/NOPE-99")
    assert response.status_code == 400 and "a station of the programme" in response.text


def _sheet_with_problems(tmp_path):
    frame = pd.read_csv(RECORDS / "season_2020.csv", dtype=str, keep_default_na=False)
    bad = frame.copy()
    bad.loc[2, "GLASED:cover"] = "130"       # sheet row 4 (header is row 1)
    bad.loc[5, "MARVIO:count"] = "2.5"       # sheet row 7
    bad.loc[8, "station"] = "SM-99"          # sheet row 10
    path = tmp_path / "season_2020.csv"
    bad.to_csv(path, index=False)
    return path, frame


def test_upload_lists_every_problem_marks_the_rows_and_stores_nothing(owner, programme, tmp_path):
    _engine, url = programme
    path, _good = _sheet_with_problems(tmp_path)
    before = table_counts(url)
    page = owner.post("/records/upload", files={"sheet": (path.name, path.read_bytes(), "text/csv")})
    assert page.status_code == 200
    text = page.text
    assert "nothing has been stored" in text
    # each problem by row and field, as the importer numbers them
    flat = text.replace("\n", "")
    assert '<a href="#row-4">4</a></td><td>GLASED:cover</td><td>130</td>' in flat
    assert '<a href="#row-7">7</a></td><td>MARVIO:count</td><td>2.5</td>' in flat
    assert "SM-99" in text and '<a href="#row-10">10</a></td><td>station</td>' in flat
    # the preview marks those rows and cells
    assert len(re.findall(r'<tr id="row-(4|7|10)" class="bad">', text)) == 3 and text.count('class="bad">') == 6
    assert '<td class="bad">130</td>' in text and '<td class="bad">2.5</td>' in text
    assert table_counts(url) == before


def test_upload_clean_sheet_dry_run_then_import_on_confirmation(owner, programme, tmp_path):
    _engine, url = programme
    path = tmp_path / "season_2020.csv"
    path.write_bytes((RECORDS / "season_2020.csv").read_bytes())
    before = table_counts(url)
    check = owner.post("/records/upload", files={"sheet": (path.name, path.read_bytes(), "text/csv")})
    assert check.status_code == 200 and "No problems found" in check.text
    assert table_counts(url) == before  # the dry run wrote nothing
    token = check.url.path.rsplit("/", 1)[1]
    done = owner.post(f"/records/import/{token}", page=f"/records/check/{token}")
    assert done.status_code == 200 and "imported" in done.text
    assert list((tmp_path / "web" / "uploads").iterdir()) == []  # the saved upload goes once it is stored
    sheet = pd.read_csv(RECORDS / "season_2020.csv", dtype=str, keep_default_na=False)
    row = sheet[sheet["status"] == "done"].iloc[0]
    history = station_history(url, row["station"])
    stored = next(v for v in history["visits"] if v["date"].isoformat() == row["date"])
    for column in [c for c in sheet.columns if ":" in c and not c.startswith("cov:")]:
        key = column.split("/")[0]
        assert stored["values"][key] == pytest.approx(float(row[column]))
    # the station page shows them
    page = owner.get(f"/stations/{row['station']}")
    assert row["date"] in page.text
    # confirming the same upload again is refused: it is no longer waiting
    again = owner.post(f"/records/import/{token}", page="/records")
    assert again.status_code == 400


def test_correct_certify_and_unlock(owner, programme):
    _engine, url = programme
    # the stored value is the demo's field sheet (read here, so a regenerated demo keeps the test whole)
    sheet = pd.read_csv(RECORDS / "season_2024.csv")
    before = int(sheet.loc[sheet["station"] == "SM-17", "MARVIO:count"].iloc[0])
    after = before + 1
    page = owner.post("/records/correct", {"station": "SM-17", "year": "2024", "field": "MARVIO:count",
                                           "value": str(after), "reason": "recount from the photo"})
    assert page.status_code == 200 and f"corrected {before} -&gt; {after} (logged)" in page.text
    history = station_history(url, "SM-17")
    assert history["visits"][-1]["values"]["MARVIO:count"] == after
    assert "recount from the photo" in history["changes"]["reason"].tolist()
    # without a reason: refused, nothing changed
    refused = owner.post("/records/correct", {"station": "SM-17", "year": "2024", "field": "MARVIO:count",
                                              "value": str(after + 3), "reason": ""})
    assert refused.status_code == 400 and "reason" in refused.text
    assert station_history(url, "SM-17")["visits"][-1]["values"]["MARVIO:count"] == after
    certified = owner.post("/records/certify", {"year": "2024"})
    assert "season 2024 certified (locked)" in certified.text
    seasons = workspace.seasons(url).set_index("year")
    assert seasons.loc[2024, "status"] == "certified"
    locked = owner.post("/records/correct", {"station": "SM-17", "year": "2024", "field": "MARVIO:count",
                                             "value": "28", "reason": "again"})
    assert locked.status_code == 400 and "certified" in locked.text
    unlocked = owner.post("/records/unlock", {"year": "2024", "reason": "a recount came in"})
    assert "season 2024 unlocked" in unlocked.text
    assert workspace.seasons(url).set_index("year").loc[2024, "status"] == "open"


def test_quality_checks_and_resolve_with_a_note(owner, programme):
    _engine, url = programme
    ran = owner.post("/quality/check", page="/quality")
    assert ran.status_code == 200 and "Checks run" in ran.text
    flags = quality.list_flags(url)
    assert len(flags) > 0
    flag = int(flags["id"].iloc[0])
    assert f"note for flag {flag}" in ran.text
    done = owner.post("/quality/resolve", {"flag": str(flag), "note": "checked on site", "accept": "yes"},
                      page="/quality")
    assert f"quality flag {flag} accepted" in done.text
    stored = quality.list_flags(url, states=None).set_index("id")
    assert stored.loc[flag, "state"] == "accepted" and stored.loc[flag, "note"] == "checked on site"


def test_plan_a_season_write_and_download_its_packs(owner, programme):
    _engine, url = programme
    planned = owner.post("/season/plan", {"year": "2027", "teams": "2"}, page="/season")
    assert planned.status_code == 200 and "Season 2027 planned and stored" in planned.text
    plan = workspace.season_plan(url, 2027)
    assert len(plan) > 0
    day_rows = plan[plan["day"].notna()]
    for team, day in set(zip(day_rows["team"], day_rows["day"], strict=True)):
        assert f"<td>{day.isoformat()}</td><td>{team}</td>" in planned.text
    packs = owner.post("/season/packs", {"year": "2027"}, page="/season?year=2027")
    assert packs.status_code == 200 and "Field packs written" in packs.text
    archive = owner.get("/season/2027/packs.zip")
    assert archive.status_code == 200 and archive.headers["content-type"] == "application/zip"
    names = zipfile.ZipFile(io.BytesIO(archive.content)).namelist()
    team_days = {n.split("/")[0] for n in names if "/" in n}
    assert len(team_days) == len(set(zip(day_rows["team"], day_rows["day"], strict=True)))
    for folder in team_days:
        for name in ("phone_sheet.html", "field_sheet.html", "entry_sheet.csv", "route.gpx"):
            assert f"{folder}/{name}" in names
    one = owner.get(f"/files/packs/2027/{sorted(team_days)[0]}/phone_sheet.html")
    assert one.status_code == 200 and one.headers["content-disposition"].startswith("attachment")
    # the due table reads the stored plan
    due = schedule.due_for_season(url, 2027)
    assert set(due.loc[due["outcome"] == "planned", "station"]) == set(day_rows["station"])


def test_build_the_report_and_download_it(owner, programme):
    if programme[0] == "sqlite":
        pytest.skip("built on SQLite by tests/web/test_browser.py (a report fits every species: once an engine)")
    response = owner.post("/trends/report", {"year": "2026"}, page="/trends")
    assert response.status_code == 200 and "The 2026 report is built (index.html" in response.text
    assert 'href="/files/reports/2026/index.html"' in response.text
    html = owner.get("/files/reports/2026/index.html")
    assert html.status_code == 200 and "Hollowmere Vale" in html.text
    assert html.headers["content-disposition"].startswith("attachment")


def test_a_trend_is_fitted_again_after_the_records_change_elsewhere(owner, programme):
    _engine, url = programme
    cache = owner.app.state.workspace.cache
    assert owner.get("/trends/GLASED").status_code == 200
    fitted = [k for k in cache if k[:2] == ("trend", "GLASED")]
    assert owner.get("/trends/GLASED").status_code == 200
    assert [k for k in cache if k[:2] == ("trend", "GLASED")] == fitted  # reused while nothing changed
    done = next(v for v in station_history(url, "SM-17")["visits"] if v["status"] == "done")
    set_value(url, "SM-17", done["year"], "GLASED", "cover", str(done["values"]["GLASED:cover"] + 1),
                      reason="recount, from the command line")
    assert owner.get("/trends/GLASED").status_code == 200
    assert len([k for k in cache if k[:2] == ("trend", "GLASED")]) == len(fitted) + 1
