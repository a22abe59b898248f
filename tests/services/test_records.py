"""Importing field records: all or nothing, idempotent, corrections audited, locked seasons, missing is not zero."""

from __future__ import annotations

import pytest

from monitor import columns as C
from monitor.db import Store, queries
from monitor.errors import InputError, LockedError
from monitor.services.imports import import_records
from monitor.services.locks import set_lock
from tests.conftest import table_counts


def _sheet(demo_source, year=2024):
    return demo_source / "records" / f"season_{year}.csv"


def _edit_first_value(text: str, column: str, new: str) -> tuple[str, str, str]:
    """Change the value of `column` in the first done row; return the new text, station and old value."""
    lines = text.splitlines()
    header = lines[0].split(",")
    col = header.index(column)
    for i, line in enumerate(lines[1:], start=1):
        cells = line.split(",")
        if cells[header.index("status")] == "done":
            old = cells[col]
            cells[col] = new
            lines[i] = ",".join(cells)
            return "\n".join(lines) + "\n", cells[0], old
    raise AssertionError("no done row")


def test_import_then_reimport_is_a_no_op(programme_db, demo_source):
    first = import_records(programme_db, _sheet(demo_source))
    assert first.visits_added == 36 and first.observations_added > 100
    counts = table_counts(programme_db)
    again = import_records(programme_db, _sheet(demo_source))
    assert again.already_imported and again.visits_added == 0
    assert table_counts(programme_db) == counts


def test_missed_and_inaccessible_visits_store_no_values(programme_db, demo_source):
    import_records(programme_db, _sheet(demo_source, 2019))
    store = Store.open(programme_db)
    pid = store.programme().id
    outcomes = queries.visit_outcomes(store, pid)
    values = queries.observations_long(store, pid)
    store.dispose()
    not_done = outcomes[outcomes[C.VISIT_STATUS].isin(["missed", "inaccessible"])]
    assert len(not_done) >= 5  # the 2019 flood (demo_programme/TRUTH.md)
    assert set(values[C.VISIT_STATUS]) == {"done"}
    keyed = set(zip(values[C.STATION], values[C.YEAR]))
    assert not any((s, y) in keyed for s, y in zip(not_done[C.STATION], not_done[C.YEAR]))
    # a done visit with a species recorded absent keeps a stored zero
    assert (values["value"] == 0).sum() > 0


def test_dry_run_writes_nothing(programme_db, demo_source):
    before = table_counts(programme_db)
    report = import_records(programme_db, _sheet(demo_source), dry_run=True)
    assert report.dry_run and report.visits_added == 36
    assert table_counts(programme_db) == before


def test_changing_a_stored_value_needs_correct_and_reason(programme_db, demo_source, tmp_path):
    import_records(programme_db, _sheet(demo_source))
    text, station, old = _edit_first_value(_sheet(demo_source).read_text(), "MARVIO:count", "977")
    changed = tmp_path / "season_2024_fixed.csv"
    changed.write_text(text)
    before = table_counts(programme_db)
    with pytest.raises(InputError, match="--correct"):
        import_records(programme_db, changed)
    assert table_counts(programme_db) == before
    with pytest.raises(InputError, match="reason"):
        import_records(programme_db, changed, correct=True, reason="  ")
    report = import_records(programme_db, changed, correct=True, reason="keying error, paper sheet says 977",
                                    who="checker")
    assert [(c.station, c.field, c.old, c.new) for c in report.changes] == [(station, "MARVIO:count", float(old), 977.0)]
    store = Store.open(programme_db)
    log = store.frame("SELECT table_name, field, old_value, new_value, reason, changed_by FROM change_log")
    values = queries.observations_long(store, store.programme().id, species="MARVIO")
    store.dispose()
    assert log.to_dict(orient="records") == [{
        "table_name": "observation", "field": "value", "old_value": str(float(old)), "new_value": "977.0",
        "reason": "keying error, paper sheet says 977", "changed_by": "checker"}]
    row = values[(values[C.STATION] == station) & (values[C.YEAR] == 2024)]
    assert list(row["value"]) == [977.0]


def test_certified_season_is_locked_until_unlocked_with_reason(programme_db, demo_source, tmp_path):
    import_records(programme_db, _sheet(demo_source))
    set_lock(programme_db, 2024, lock=True, who="reviewer")
    text, _station, _old = _edit_first_value(_sheet(demo_source).read_text(), "MARVIO:count", "977")
    changed = tmp_path / "late_fix.csv"
    changed.write_text(text)
    with pytest.raises(LockedError, match="certified"):
        import_records(programme_db, changed, correct=True, reason="late fix")
    with pytest.raises(InputError):
        set_lock(programme_db, 2024, lock=False, reason="")
    set_lock(programme_db, 2024, lock=False, reason="late correction from the paper sheet", who="reviewer")
    import_records(programme_db, changed, correct=True, reason="late fix")
    store = Store.open(programme_db)
    log = store.frame("SELECT table_name, field, old_value, new_value, reason FROM change_log ORDER BY id")
    store.dispose()
    assert list(log["table_name"]) == ["round", "round", "observation"]
    assert list(log["new_value"])[:2] == ["certified", "open"]
    assert log["reason"][1] == "late correction from the paper sheet"


def test_an_unknown_station_fails_the_whole_file(programme_db, demo_source, tmp_path):
    text = _sheet(demo_source).read_text()
    first_station = text.splitlines()[1].split(",")[0]
    bad = tmp_path / "bad.csv"
    bad.write_text(text.replace(first_station + ",", "XX-99,", 1))
    before = table_counts(programme_db)
    with pytest.raises(InputError) as info:
        import_records(programme_db, bad)
    assert "XX-99" in str(info.value) and "row 2" in str(info.value)
    assert table_counts(programme_db) == before
