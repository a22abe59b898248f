"""Season service: due and overdue stations from stored visits, a stored plan inside windows and access,
work that does not fit, replacing a plan, outcomes from records, field packs read back by the importer."""

from __future__ import annotations

import csv
import datetime as dt
import json

import icalendar
import pandas as pd
import pytest
from lxml import etree, html

from monitor import columns as C
from monitor.db import Store, queries
from monitor.errors import DesignError
from monitor.schedule import fieldpack
from monitor.services import schedule, setup
from monitor.services.imports import import_records
from tests.conftest import GPX_SCHEMA, table_counts

YEARS = (2024, 2025, 2026)


@pytest.fixture
def season_db(db_url, demo_source):
    """The demo programme with its last three seasons of records."""
    setup.setup_folder(db_url, demo_source)
    for year in YEARS:
        import_records(db_url, demo_source / "records" / f"season_{year}.csv")
    return db_url



def _sheet_rows(demo_source, year):
    with open(demo_source / "records" / f"season_{year}.csv", newline="") as handle:
        return list(csv.DictReader(handle))


def _csv(path):
    with open(path, newline="") as handle:
        return list(csv.DictReader(handle))


def _expected_due_and_overdue(demo_source):
    """From the set-up files and field sheets alone: panels due in 2027 and stations overdue.

    Panels (panels.csv): [1-0] every year; [1-2] one year in three from its start year (McDonald 2003).
    Overdue: a missed or inaccessible visit in 2024-2026 not followed by a done or partial one.
    """
    panel_rule = {r["code"]: (r["rule"], int(r["start_year"])) for r in _csv(demo_source / "panels.csv")}

    def due(panel):
        rule, start = panel_rule[panel]
        return rule == "[1-0]" or (2027 - start) % 3 == 0

    stations = [r for r in _csv(demo_source / "stations.csv") if not r["retired"]]
    due_set = {r["code"] for r in stations if due(r["panel"])}
    last_done, missed = {}, {}
    for year in YEARS:
        for row in _sheet_rows(demo_source, year):
            if row["status"] in ("done", "partial"):
                last_done[row["station"]] = year
            else:
                missed.setdefault(row["station"], []).append(year)
    overdue = {s for s, ys in missed.items() if max(ys) > last_done.get(s, 0)}
    return due_set, overdue


def test_due_and_overdue_stations_come_from_panels_and_stored_visits(season_db, demo_source):
    due = schedule.due_for_season(season_db, 2027)
    due_set, overdue = _expected_due_and_overdue(demo_source)
    assert set(due[C.STATION]) == due_set | overdue
    assert set(due.loc[due["reason"] == "overdue", C.STATION]) == overdue
    # most overdue first
    assert list(due["overdue_years"]) == sorted(due["overdue_years"], reverse=True)
    # the window is the programme window narrowed by every species' window (windows.csv, species.csv):
    # 05-01..09-15 cut by 05-01..07-15, 06-01..07-10, 05-15..08-31, 06-15..08-31, 05-01..09-15
    assert set(due["window_start"]) == {dt.date(2027, 6, 15)} and set(due["window_end"]) == {dt.date(2027, 7, 10)}
    # effort from programme.json: set-up 5 min + count 6 + count 6 + cover 4 + frequency 8 + pin hits 6
    assert set(due["effort_min"]) == {35.0}
    assert set(due["outcome"]) == {"not planned"}


def test_plan_is_stored_inside_windows_access_and_crew_rules(season_db, demo_source):
    result = schedule.plan_season(season_db, 2027, teams=2, seed=17)
    assert result.stored and result.fits
    store = Store.open(season_db)
    try:
        pid = store.programme().id
        rows = queries.planned_visits(store, pid, 2027)
    finally:
        store.dispose()
    due_set, overdue = _expected_due_and_overdue(demo_source)
    # every due or overdue station is in the plan exactly once: never dropped
    assert sorted(rows[C.STATION]) == sorted(due_set | overdue)
    assert set(rows.loc[rows[C.STATION].isin(overdue), "reason"]) == {"overdue"}
    # Hilltop Heath's permission ends 2026-09-30 (sites.geojson): its stations are held back
    sites = json.loads((demo_source / "sites.geojson").read_text())
    lapsed = {f["properties"]["code"] for f in sites["features"]
              if dt.date.fromisoformat(f["properties"]["access_until"]) < dt.date(2027, 6, 15)}
    assert lapsed == {"HH"}
    held = rows[rows["outcome"] == "held_back"]
    assert set(held[C.SITE]) == lapsed and held["team"].isna().all()
    assert set(rows.loc[rows[C.SITE].isin(lapsed), "outcome"]) == {"held_back"}
    planned = rows[rows["outcome"] == "planned"].copy()
    days = [d if isinstance(d, dt.date) else dt.date.fromisoformat(str(d)) for d in planned["day"]]
    assert all(dt.date(2027, 6, 15) <= d <= dt.date(2027, 7, 10) and d.weekday() < 5 for d in days)
    assert set(planned["seed"]) == {17}
    # one site per team-day, route order 1..k, arrivals in route order
    planned["day"] = days
    for (_team, _day), group in planned.groupby(["team", "day"]):
        assert group[C.SITE].nunique() == 1
        group = group.sort_values("route_order")
        assert list(group["route_order"]) == list(range(1, len(group) + 1))
        assert list(group["arrival"]) == sorted(group["arrival"])
    # no lone working (programme.json: allow_lone_working false): every team has two or more members
    assert all(len(td.members) >= 2 for td in result.plan.team_days)


def test_work_that_does_not_fit_is_said_and_kept_in_the_plan(season_db):
    result = schedule.plan_season(season_db, 2027, teams=1, seed=3, window=("06-15", "06-16"))
    assert not result.fits and result.plan.extra_team_days >= 1
    assert "more team-days needed" in result.summary()
    store = Store.open(season_db)
    try:
        rows = queries.planned_visits(store, store.programme().id, 2027)
    finally:
        store.dispose()
    unscheduled = rows[(rows["outcome"] == "planned") & rows["team"].isna()]
    assert set(unscheduled[C.STATION]) == set(result.plan.unplanned[C.STATION]) and len(unscheduled) > 0
    assert len(rows) == len(result.due)


def test_a_stored_plan_is_replaced_only_when_asked(season_db):
    schedule.plan_season(season_db, 2027, teams=2, seed=1)
    before = table_counts(season_db)
    with pytest.raises(DesignError, match="--replace"):
        schedule.plan_season(season_db, 2027, teams=2, seed=2)
    assert table_counts(season_db) == before
    again = schedule.plan_season(season_db, 2027, teams=2, seed=2, replace=True)
    assert again.replaced == before["planned_visit"]
    assert table_counts(season_db)["planned_visit"] == before["planned_visit"]
    store = Store.open(season_db)
    try:
        assert set(queries.planned_visits(store, store.programme().id, 2027)["seed"]) == {2}
    finally:
        store.dispose()


def _fill(entry: pd.DataFrame, day: dt.date, members: tuple[str, ...]) -> pd.DataFrame:
    """Fill the blank entry table as a recorder would: one done visit per station, a value per box."""
    filled = entry.copy()
    filled["date"] = day.isoformat()
    filled["observers"] = ";".join(members[:2])
    filled["status"] = "done"
    filled["repeat"] = "no"
    for k, column in enumerate(filled.columns[len(fieldpack.BASE_HEADERS):]):
        if column.endswith(":count"):
            values = [str(3 + i + k) for i in range(len(filled))]
        elif column.endswith(":cover"):
            values = [f"{10.5 + i:g}" for i in range(len(filled))]
        elif ":frequency/" in column or ":pin_hits/" in column:
            n = int(column.rsplit("/", 1)[1])
            values = [str(min(i + 1, n)) for i in range(len(filled))]
        else:  # a visit covariate
            values = [f"{30 + i}" for i in range(len(filled))]
        filled[column] = values
    # one station missed: all its value boxes stay blank (docs/files.md, "field records")
    filled.loc[filled.index[-1], "status"] = "missed"
    filled.loc[filled.index[-1], "observers"] = ""
    filled.loc[filled.index[-1], list(filled.columns[len(fieldpack.BASE_HEADERS):])] = ""
    return filled


def test_field_pack_is_read_back_by_the_records_importer(season_db, demo_source, tmp_path):
    plan = schedule.plan_season(season_db, 2027, teams=2, seed=2027)
    first = plan.plan.team_days[0]
    pack = schedule.write_field_packs(season_db, 2027, tmp_path / "packs", team=first.team, day=first.date)
    folder = tmp_path / "packs" / f"{first.date.isoformat()}_{first.team}_{first.site}"
    assert [d["folder"] for d in pack.team_days] == [str(folder)]

    # the printed sheet's table headers are the wide layout of docs/files.md ("field records"), in the entry sheet's order
    page = html.fromstring((folder / "field_sheet.html").read_text())
    # (a species' common name is printed under its header, in a span of its own)
    headers = [th.text_content().strip().removesuffix(th.xpath("string(.//span[@class='label'])")).strip()
               for th in page.xpath("//table[@class='entry']/thead/tr/th")]
    entry = pd.read_csv(folder / "entry_sheet.csv", dtype=str, keep_default_na=False)
    assert headers == list(entry.columns)
    assert headers[:7] == ["station", "date", "observers", "status", "repeat", "protocol", "notes"]
    assert list(entry["station"]) == list(first.stations)
    # the last two visits' values printed for reference are those on the demo's field sheets
    station = first.stations[0]
    seen = [r for y in YEARS for r in _sheet_rows(demo_source, y) if r["station"] == station]
    seen.sort(key=lambda r: r["date"], reverse=True)
    previous = [[td.text_content().strip() for td in tr.xpath("td")]
                for tr in page.xpath("//tbody[@class='stop'][1]/tr[@class='previous']")]
    assert len(previous) == min(2, len(seen))
    for printed, row in zip(previous, seen, strict=False):
        assert printed[1] == row["date"] and printed[3] == row["status"]
        for column in headers[7:]:
            if column.startswith("cov:") or row["status"] not in ("done", "partial"):
                continue
            assert float(printed[headers.index(column)]) == float(row[column]), column
    assert "lone" in page.text_content().lower() and "tick" in page.text_content().lower()

    # fill the blank entry table, save it as CSV and import it through the records importer
    filled = _fill(entry, first.date, first.members)
    sheet = tmp_path / "keyed_2027.csv"
    filled.to_csv(sheet, index=False)
    before = table_counts(season_db)
    report = import_records(season_db, sheet, accept_warnings=True)
    assert report.visits_added == len(first.stations)
    # the only warning allowed is a visit date still in the future on the day the test runs
    assert all("not after today" in w for w in report.warnings)
    after = table_counts(season_db)
    assert after["visit"] == before["visit"] + len(first.stations)

    # outcomes: read at read time from the stored visits, and written by refresh_outcomes
    store = Store.open(season_db)
    try:
        rows = queries.planned_visits(store, store.programme().id, 2027).set_index(C.STATION)
    finally:
        store.dispose()
    assert rows.loc[list(first.stations[:-1]), "outcome"].eq("done").all()
    assert rows.loc[first.stations[-1], "outcome"] == "missed"
    # the import itself wrote the outcomes into the stored plan; refreshing again changes nothing
    assert rows.loc[list(first.stations[:-1]), "stored_outcome"].eq("done").all()
    assert rows.loc[first.stations[-1], "stored_outcome"] == "missed"
    assert schedule.update_outcomes(season_db, [2027]) == 0
    due = schedule.due_for_season(season_db, 2027).set_index(C.STATION)
    assert due.loc[first.stations[0], "outcome"] == "done"

    # replanning part-way through the season: recorded stations keep their planned visit and outcome and
    # are not sent out again; the station missed today is planned again
    again = schedule.plan_season(season_db, 2027, teams=2, seed=9, replace=True)
    recorded = set(first.stations[:-1])
    assert set(again.already_recorded) == recorded
    assert not recorded & set(again.plan.visits[C.STATION])
    assert first.stations[-1] in set(again.plan.visits[C.STATION])
    store = Store.open(season_db)
    try:
        rows = queries.planned_visits(store, store.programme().id, 2027).set_index(C.STATION)
    finally:
        store.dispose()
    assert rows.loc[sorted(recorded), "stored_outcome"].eq("done").all()
    assert len(rows) == len(schedule.due_for_season(season_db, 2027))


def test_field_pack_gpx_and_calendar_follow_their_standards(season_db, tmp_path):
    plan = schedule.plan_season(season_db, 2027, teams=2, seed=5)
    pack = schedule.write_field_packs(season_db, 2027, tmp_path / "packs")
    assert len(pack.team_days) == len(plan.plan.team_days)
    schema = etree.XMLSchema(etree.parse(str(GPX_SCHEMA)))  # the official GPX 1.1 schema
    for day in pack.team_days:
        doc = etree.parse(str(tmp_path / "packs" / day["folder"].rsplit("/", 1)[1] / "route.gpx"))
        # GPX 1.1 (TopoGrafix 2004): valid against the schema; start point plus one waypoint per station
        assert schema.validate(doc), schema.error_log
        assert len(doc.findall("{http://www.topografix.com/GPX/1/1}wpt")) == day["stations"] + 1
    # RFC 5545 via the icalendar library: one VEVENT per team-day with UID, DTSTAMP and DTSTART
    calendar = icalendar.Calendar.from_ical(pack.calendar.read_bytes())
    events = [c for c in calendar.walk() if c.name == "VEVENT"]
    assert len(events) == len(plan.plan.team_days)
    starts = sorted(e.decoded("DTSTART").date() for e in events)
    assert starts == sorted(td.date for td in plan.plan.team_days)
    assert all(e.get("UID") and e.get("DTSTAMP") for e in events)
    # the programme's time zone (programme.json time_zone, Europe/London in the demo): TZID and VTIMEZONE
    assert [str(z["TZID"]) for z in calendar.walk("VTIMEZONE")] == ["Europe/London"]
    assert all(e["DTSTART"].params["TZID"] == "Europe/London" for e in events)


def test_xlsx_entry_sheet_has_drop_downs_and_is_read_back(season_db, tmp_path):
    """The .xlsx entry sheet: openpyxl data validation of type list (ECMA-376 dataValidation) for status
    and observers; filled in as a person would (openpyxl writing cells) it imports like the CSV."""
    import openpyxl

    schedule.plan_season(season_db, 2027, teams=2, seed=5)
    pack = schedule.write_field_packs(season_db, 2027, tmp_path / "packs")
    day = pack.team_days[0]
    path = tmp_path / "packs" / day["folder"].rsplit("/", 1)[1] / "entry_sheet.xlsx"
    book = openpyxl.load_workbook(path)
    sheet = book["records"]
    header = [c.value for c in sheet[1]]
    lists = {dv.type: dv for dv in sheet.data_validations.dataValidation if dv.type == "list"}
    assert len([dv for dv in sheet.data_validations.dataValidation if dv.type == "list"]) == 2
    status_col = openpyxl.utils.get_column_letter(header.index("status") + 1)
    status_dv = next(dv for dv in sheet.data_validations.dataValidation
                     if dv.type == "list" and f"{status_col}2" in str(dv.sqref).split(":")[0])
    assert status_dv.formula1 == "=lists!$A$2:$A$5" and lists
    assert [book["lists"][f"A{i}"].value for i in range(2, 6)] == ["done", "partial", "missed", "inaccessible"]
    assert [book["lists"][f"B{i}"].value for i in range(2, 4)] == ["OBS01", "OBS02"]
    # fill in every station as done on the planned day, two observers, 1 in every value column (a valid
    # count, cover %, frequency, pin hits and presence alike) and 30 in the covariate columns
    for r in range(2, 2 + day["stations"]):
        sheet.cell(r, header.index("date") + 1, day["date"])
        sheet.cell(r, header.index("observers") + 1, "OBS01;OBS02")
        sheet.cell(r, header.index("status") + 1, "done")
        for name in header:
            if ":" in name:
                sheet.cell(r, header.index(name) + 1, 30 if name.startswith("cov:") else 1)
    book.save(path)
    # the plan is for a season still to come, so dates "after today" are warnings to accept
    report = import_records(season_db, path, accept_warnings=True)
    assert report.visits_added == day["stations"]
