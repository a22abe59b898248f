"""Seasons across the new year: the southern-summer variant of the demo (window 1 December to 28 February).

The variant is the demo moved six months on (monitor/services/demo_southern.py), so every rule must give
the same answer for the variant's season t (December t to February t+1) as for the demo's season t (May to
September): that is the outside reference here.  Dates are checked against the calendar (Python's datetime).
"""

from __future__ import annotations

import datetime as dt

import icalendar
import pytest

from monitor import columns as C
from monitor.db import Store, queries
from monitor.services import schedule, setup
from monitor.services.demo_southern import (
    SOUTHERN_BLOCKED,
    run_southern_demo,
    shift_date,
    shift_month_day,
    write_southern_variant,
)
from monitor.services.imports import import_records

SEASONS = (2023, 2024, 2025)


def test_shifts_follow_the_calendar():
    assert shift_date(dt.date(2020, 7, 10)) == dt.date(2021, 1, 10)
    assert shift_date(dt.date(2019, 8, 31)) == dt.date(2020, 2, 29)  # 2020 is a leap year
    assert shift_date(dt.date(2021, 8, 31)) == dt.date(2022, 2, 28)
    assert shift_month_day("08-31") == "02-28" and shift_month_day("05-01") == "11-01"


@pytest.fixture
def both(tmp_path, db_url, demo_source):
    """The demo (on each engine) and its southern variant (SQLite), each with seasons 2023-2025 imported."""
    south_files = write_southern_variant(tmp_path / "south")
    south = str(tmp_path / "south.sqlite")
    setup.init_database(south)
    for db, folder in ((db_url, demo_source), (south, south_files)):
        setup.setup_folder(db, folder)
        for year in SEASONS:
            import_records(db, folder / "records" / f"season_{year}.csv")
    return db_url, south


def test_january_visits_belong_to_the_round_that_opened_in_december(both):
    _north, south = both
    store = Store.open(south)
    try:
        visits = queries.visit_outcomes(store, store.programme().id)
        rounds = store.frame("SELECT year, window_start, window_end FROM round ORDER BY year")
    finally:
        store.dispose()
    dates = [d if isinstance(d, dt.date) else dt.date.fromisoformat(str(d)[:10]) for d in visits[C.DATE]]
    january = [y for y, d in zip(visits[C.YEAR], dates, strict=True) if d.month == 1]
    assert january and set(january) <= set(SEASONS)
    assert all(y == d.year - 1 for y, d in zip(visits[C.YEAR], dates, strict=True) if d.month == 1)
    assert list(rounds["year"]) == list(SEASONS)
    assert str(rounds["window_start"].iloc[0])[:10] == "2023-12-01" and str(rounds["window_end"].iloc[0])[:10] == "2024-02-28"


def test_due_overdue_and_plan_follow_across_the_new_year(both, tmp_path):
    north, south = both
    due_n = schedule.due_for_season(north, 2026).set_index(C.STATION)
    due_s = schedule.due_for_season(south, 2026).set_index(C.STATION)
    # the same stations are due and overdue, for the same reasons and by as many years
    assert sorted(due_s.index) == sorted(due_n.index)
    assert (due_s["reason"] == due_n.loc[due_s.index, "reason"]).all()
    assert (due_s["overdue_years"] == due_n.loc[due_s.index, "overdue_years"]).all()
    assert (due_s["reason"] == "overdue").any()
    # the narrowed window is the demo's 15 June - 10 July moved on: 15 December 2026 - 10 January 2027
    assert set(due_s["window_start"]) == {dt.date(2026, 12, 15)} and set(due_s["window_end"]) == {dt.date(2027, 1, 10)}
    plan = schedule.plan_season(south, 2026, crews_file=tmp_path / "south" / "crews.json", seed=1)
    days = sorted({td.date for td in plan.plan.team_days})
    assert days[0] >= dt.date(2026, 12, 15) and days[-1] <= dt.date(2027, 1, 10)
    assert any(d.year == 2027 for d in days) and any(d.year == 2026 for d in days)  # across the turn of the year
    # Tuesdays and Thursdays only (crews.json), never on a holiday
    assert all(d.weekday() in (1, 3) and d not in SOUTHERN_BLOCKED for d in days)
    # the days are counted on through 31 December: no gap is lost at the turn of the year
    assert plan.fits
    stored = schedule.due_for_season(south, 2026)
    assert set(stored["outcome"]) <= {"planned", "held_back"}
    january = next(td for td in plan.plan.team_days if td.date.year == 2027)
    pack = schedule.write_field_packs(south, 2026, tmp_path / "packs", team=january.team, day=january.date)
    cal = icalendar.Calendar.from_ical(pack.calendar.read_bytes())
    events = [e for e in cal.walk("VEVENT")]
    assert len(events) == 1 and events[0].decoded("DTSTART").date() == january.date
    folder = next((tmp_path / "packs").glob(f"{january.date.isoformat()}_*"))
    assert "2027-01" in folder.name and (folder / "field_sheet.html").exists()


def test_southern_demo_runs(tmp_path):
    steps = dict(run_southern_demo(tmp_path / "demo", last_season=2025))
    plan = steps["plan"]
    assert plan.stored and any(td.date.year == 2027 for td in plan.plan.team_days)
    assert steps["field_pack"].team_days[0]["date"].startswith("2027-01")
