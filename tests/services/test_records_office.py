"""Office commands on stored records: one value (audited, locked seasons, range rules), photos, retiring a
station, a station's history, and double entry.

The range rules checked are those agreed for the measures (monitor/measures.py; common practice for permanent-quadrat records): a count
is a whole number >= 0, cover a percent 0-100, k of n with 0 <= k <= n.  Values in the demo sheets are
invented (demo_programme/generate.py).
"""

from __future__ import annotations

import csv
import datetime as dt

import pytest

from monitor import columns as C
from monitor.db import Store, queries
from monitor.errors import DataError, InputError, LockedError
from monitor.services.corrections import set_value
from monitor.services.double_entry import compare_files
from monitor.services.history import station_history
from monitor.services.imports import import_records
from monitor.services.locks import set_lock
from monitor.services.photos import add_photo
from monitor.services.stations import retire_station
from tests.services import test_records_data as shared
from tests.services.test_records_data import DEMO, dump

demo_template = shared.demo_template  # fixtures: the built demo database, copied per test
demo_db = shared.demo_db


def _sheet_rows(year: int) -> list[dict]:
    with open(DEMO / "records" / f"season_{year}.csv", newline="") as handle:
        return list(csv.DictReader(handle))


def _first(year: int, status: str = "done") -> dict:
    return next(r for r in _sheet_rows(year) if r["status"] == status)


def _stored(db: str, station: str, year: int, species: str) -> list[float]:
    store = Store.open(db)
    try:
        values = queries.observations_long(store, store.programme().id, species=species)
    finally:
        store.dispose()
    return list(values.loc[(values[C.STATION] == station) & (values[C.YEAR] == year), "value"])


def _log(db: str):
    store = Store.open(db)
    try:
        return store.frame("SELECT table_name, field, old_value, new_value, reason, changed_by FROM change_log ORDER BY id")
    finally:
        store.dispose()


def test_set_value_corrects_one_value_and_logs_it(demo_db):
    row = _first(2020)
    old = float(row["MARVIO:count"])
    change = set_value(demo_db, row["station"], 2020, "MARVIO", "count", str(int(old) + 5),
                               reason="paper sheet re-read", who="office")
    assert (change.old, change.new) == (old, old + 5)
    assert _stored(demo_db, row["station"], 2020, "MARVIO") == [old + 5]
    log = _log(demo_db).to_dict(orient="records")
    assert log == [{"table_name": "observation", "field": "value", "old_value": str(old), "new_value": str(old + 5),
                    "reason": "paper sheet re-read", "changed_by": "office"}]


def test_set_value_refuses_bad_values_with_one_line_and_changes_nothing(demo_db):
    row = _first(2020)
    before = dump(demo_db)
    cases = [("MARVIO", "count", "-3", "whole number >= 0"), ("MARVIO", "count", "2.5", "whole number >= 0"),
             ("GLASED", "cover", "130", "0 to 100"), ("HEABEL", "frequency", "26", "0 <= k <= n = 25"),
             ("SILGRA", "pin_hits", "11", "0 <= k <= n = 10"), ("MARVIO", "count", "lots", "a number"),
             ("MARVIO", "count", "1e30", "|x| <= 1e12"), ("NOSUCH", "count", "1", "a species and measure")]
    for species, measure, value, expected in cases:
        with pytest.raises(InputError) as info:
            set_value(demo_db, row["station"], 2020, species, measure, value, reason="test")
        assert expected in str(info.value), (value, str(info.value))
        assert "np.float64" not in str(info.value)
    with pytest.raises(InputError, match="reason"):
        set_value(demo_db, row["station"], 2020, "MARVIO", "count", "4", reason=" ")
    assert dump(demo_db) == before


def test_set_value_adds_a_missing_value_but_never_to_a_missed_visit(demo_db):
    # missing is not zero: a missed or inaccessible visit carries no values, not even through the office
    missed = next(r for y in range(2015, 2024) for r in _sheet_rows(y) if r["status"] in ("missed", "inaccessible"))
    year = int(missed["date"][:4])
    with pytest.raises(DataError, match="carries no values"):
        set_value(demo_db, missed["station"], year, "MARVIO", "count", "0", reason="test")
    assert _stored(demo_db, missed["station"], year, "MARVIO") == []
    with pytest.raises(DataError, match="no visit"):
        set_value(demo_db, missed["station"], 2030, "MARVIO", "count", "1", reason="test")
    with pytest.raises(InputError, match="closest"):
        set_value(demo_db, missed["station"] + "X", year, "MARVIO", "count", "1", reason="test")


def test_set_value_respects_the_certification_lock(demo_db):
    row = _first(2021)
    set_lock(demo_db, 2021, lock=True, who="reviewer")
    with pytest.raises(LockedError, match="unlock"):
        set_value(demo_db, row["station"], 2021, "MARVIO", "count", "99", reason="late")
    set_lock(demo_db, 2021, lock=False, reason="late correction", who="reviewer")
    set_value(demo_db, row["station"], 2021, "MARVIO", "count", "99", reason="late")
    assert _stored(demo_db, row["station"], 2021, "MARVIO") == [99.0]
    assert list(_log(demo_db)["field"]) == ["status", "status", "value"]


def test_photo_is_linked_to_the_visit_with_its_framing(demo_db):
    row = _first(2022)
    pid = add_photo(demo_db, row["station"], path="photos/2022/a.jpg",
                            visit_date=dt.date.fromisoformat(row["date"]), bearing=45.0, height=1.5,
                            notes="from the SW pin")
    history = station_history(demo_db, row["station"])
    photos = history["photos"].to_dict(orient="records")
    assert [(p["id"], p["path"], p["bearing_deg"], p["height_m"], p["notes"]) for p in photos] == [
        (pid, "photos/2022/a.jpg", 45.0, 1.5, "from the SW pin")]
    assert str(photos[0]["visit_date"])[:10] == row["date"]
    for bad in ({"bearing": 360.0}, {"bearing": -1.0}, {"height": -0.5},
                {"visit_date": dt.date(2022, 1, 1)}):
        with pytest.raises(InputError):
            add_photo(demo_db, row["station"], path="p.jpg", **bad)


def test_retire_station_is_logged_and_later_visits_are_refused(demo_db, tmp_path):
    rows = _sheet_rows(2024)
    done = [r for r in rows if r["status"] == "done"]
    station, other = done[0]["station"], done[1]["station"]
    message = retire_station(demo_db, station, reason="marker lost to erosion", replaced_by=other,
                                     date=dt.date(2024, 1, 15), who="office")
    assert "retired" in message
    with pytest.raises(DataError, match="already retired"):
        retire_station(demo_db, station, reason="again")
    log = _log(demo_db)
    assert set(log["field"]) == {"state", "retired", "retired_reason", "replaced_by"}
    assert set(log["reason"]) == {"marker lost to erosion"}
    history = station_history(demo_db, station)
    assert history["station"]["state"] == "retired" and history["station"]["replaced_by"] == other
    # the import now refuses a 2024 visit of the retired station, naming row and field
    with pytest.raises(InputError) as info:
        import_records(demo_db, DEMO / "records" / "season_2024.csv")
    row_number = next(i for i, r in enumerate(rows, start=2) if r["station"] == station)
    assert any(p.row == row_number and p.field == C.STATION for p in info.value.problems)
    # a date before the station's last stored visit is refused
    last = max(dt.date.fromisoformat(r["date"]) for y in range(2015, 2024) for r in _sheet_rows(y)
               if r["station"] == other)
    with pytest.raises(InputError, match="last visit"):
        retire_station(demo_db, other, reason="test", date=last)


def test_station_history_holds_visits_values_changes_and_events(demo_db):
    station = "SM-16"
    sheet = {int(r["date"][:4]): r for y in range(2015, 2024) for r in _sheet_rows(y) if r["station"] == station}
    set_value(demo_db, station, 2020, "MARVIO", "count", "44", reason="re-read", who="office")
    history = station_history(demo_db, station)
    visits = {v["year"]: v for v in history["visits"]}
    assert set(visits) == set(sheet)
    for year, row in sheet.items():
        v = visits[year]
        assert v["status"] == row["status"] and v["observers"] == row["observers"]
        if row["status"] in ("missed", "inaccessible"):
            assert v["values"] == {}  # missing, never zero
        else:
            expected = 44.0 if year == 2020 else float(row["MARVIO:count"])
            assert v["values"]["MARVIO:count"] == expected
            assert v["values"]["HEABEL:frequency"] == float(row["HEABEL:frequency/25"])
    assert list(history["changes"]["new_value"]) == ["44.0"]
    # the 2019 flood on the meadow site is a site event (demo_programme/management_events.csv)
    assert "flooding" in set(history["events"]["kind"])


def test_double_entry_compare_lists_every_mismatch(tmp_path):
    rows = _sheet_rows(2024)
    header = list(rows[0])
    first, second = tmp_path / "a.csv", tmp_path / "b.csv"
    for path in (first, second):
        with open(path, "w", newline="") as handle:
            writer = csv.DictWriter(handle, header)
            writer.writeheader()
            writer.writerows(rows)
    assert compare_files(first, second).empty
    changed = [dict(r) for r in rows]
    done = [i for i, r in enumerate(changed) if r["status"] == "done"]
    changed[done[0]]["MARVIO:count"] = str(int(changed[done[0]]["MARVIO:count"]) + 1)
    changed[done[1]]["GLASED:cover"] = ""
    changed[done[2]]["observers"] = "OBS05"
    with open(second, "w", newline="") as handle:
        writer = csv.DictWriter(handle, header)
        writer.writeheader()
        writer.writerows(changed)
    got = compare_files(first, second)
    assert len(got) == 3
    by_field = {f: r for f, r in zip(got["field"], got.to_dict(orient="records"), strict=True)}
    assert by_field["count"]["station"] == rows[done[0]]["station"]
    assert by_field["count"]["row_a"] == done[0] + 2 and by_field["count"]["row_b"] == done[0] + 2
    assert by_field["cover"]["value_b"] is None
    assert by_field["observers"]["value_b"] == "OBS05"
