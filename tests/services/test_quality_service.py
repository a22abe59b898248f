"""Quality checks on stored records: flags stored once, kept closed once resolved or accepted, cleared when
the data are corrected, and never raised from missing values.

The jump rule is the modified z-score |z| > 3.5 of Iglewicz & Hoaglin (1993) on log(1 + y) (checked in
tests/quality); here an invented, deliberately extreme value (a count of 500 at a station whose counts are
single figures) must be flagged, and its correction must clear the flag.
"""

from __future__ import annotations

import csv

import pytest

from monitor import columns as C
from monitor.db import Store
from monitor.errors import DataError, InputError
from monitor.services import quality
from monitor.services.corrections import set_value
from tests.services import test_records_data as shared
from tests.services.test_records_data import DEMO, dump

demo_template = shared.demo_template  # fixtures: the built demo database, copied per test
demo_db = shared.demo_db


def _typical_station(year: int = 2022) -> tuple[str, int]:
    """A station with MARVIO counts in at least seven seasons, small in ``year`` (the jump test makes it 500)."""
    counts: dict[str, dict[int, int]] = {}
    for season in range(2015, 2024):
        with open(DEMO / "records" / f"season_{season}.csv", newline="") as handle:
            for row in csv.DictReader(handle):
                if row["status"] == "done" and row["MARVIO:count"]:
                    counts.setdefault(row["station"], {})[season] = int(row["MARVIO:count"])
    for station, by_year in sorted(counts.items()):
        if len(by_year) >= 7 and 0 < by_year.get(year, 0) < 20:
            return station, by_year[year]
    raise AssertionError("no such station")


def _jumps(run, station):
    flags = run.open_flags
    return flags[(flags["kind"] == "jump") & (flags[C.STATION] == station)]


def test_a_jump_is_flagged_once_resolved_and_not_raised_again(demo_db):
    station, old = _typical_station()
    first = quality.run_checks(demo_db, current_year=2024)
    assert first.new == first.found == len(first.open_flags)
    set_value(demo_db, station, 2022, "MARVIO", "count", "500", reason="test: keying slip")
    run = quality.run_checks(demo_db, current_year=2024)
    jump = _jumps(run, station)
    assert list(jump[C.YEAR]) == [2022] and list(jump[C.SPECIES]) == ["MARVIO"] and run.new == 1
    # the same checks again store nothing new
    before = dump(demo_db)["quality_flag"]
    again = quality.run_checks(demo_db, current_year=2024)
    assert again.new == 0 and dump(demo_db)["quality_flag"] == before
    flag_id = int(jump["id"].iloc[0])
    assert "accepted" in quality.resolve_flag(demo_db, flag_id, note="paper sheet confirms 500", accept=True)
    with pytest.raises(DataError, match="already accepted"):
        quality.resolve_flag(demo_db, flag_id, note="again")
    with pytest.raises(InputError, match="note"):
        quality.resolve_flag(demo_db, int(again.open_flags["id"].iloc[0]), note="")
    later = quality.run_checks(demo_db, current_year=2024)
    assert _jumps(later, station).empty and later.already_closed == 1
    assert flag_id in set(later.all_flags["id"])


def test_correcting_the_value_clears_the_open_flag(demo_db):
    station, old = _typical_station()
    set_value(demo_db, station, 2022, "MARVIO", "count", "500", reason="test: keying slip")
    flagged = quality.run_checks(demo_db, current_year=2024)
    flag_id = int(_jumps(flagged, station)["id"].iloc[0])
    set_value(demo_db, station, 2022, "MARVIO", "count", str(old), reason="back to the paper sheet")
    cleared = quality.run_checks(demo_db, current_year=2024)
    assert cleared.cleared == 1 and _jumps(cleared, station).empty
    row = cleared.all_flags[cleared.all_flags["id"] == flag_id].iloc[0]
    assert row["state"] == "resolved" and quality.AUTO_CLEARED in row["note"]
    store = Store.open(demo_db)
    log = store.frame("SELECT table_name FROM change_log WHERE table_name = 'quality_flag'")
    store.dispose()
    assert log.empty  # only a person's decision goes to the change log


def test_missing_visits_raise_no_jumps_and_no_covariate_flags(demo_db):
    # missing is not zero: missed and inaccessible visits (the 2019 flood, demo_programme/TRUTH.md) have no
    # stored values, so no check may read them as zeros (a zero count at a station of typical 8 would jump)
    run = quality.run_checks(demo_db, current_year=2024)
    store = Store.open(demo_db)
    missed = store.frame("SELECT t.code AS station, r.year FROM visit v JOIN station t ON t.id = v.station_id "
                         "JOIN round r ON r.id = v.round_id WHERE v.status IN ('missed', 'inaccessible')")
    store.dispose()
    assert len(missed) >= 5
    flagged = set(zip(run.all_flags[C.STATION], run.all_flags[C.YEAR].astype(object)))
    for station, year in zip(missed["station"], missed["year"], strict=True):
        kinds = set(run.all_flags.loc[(run.all_flags[C.STATION] == station) & (run.all_flags[C.YEAR] == year), "kind"])
        assert not kinds & {"jump", "covariate_missing"}, (station, year, kinds)
    assert flagged is not None
