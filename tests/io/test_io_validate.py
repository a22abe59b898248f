"""validate_records: every check of the programme's rules (module docstring of monitor.io.validate), one test each.  Invented programme and records."""

from __future__ import annotations

import datetime as dt

import pandas as pd
import pytest

from monitor.errors import InputError
from monitor.io.records import read_field_records
from monitor.io.validate import Reference, fill_blank_targets, raise_for_problems, validate_records

STATIONS = pd.DataFrame({"station": ["Q01", "Q02", "Q03", "Q10", "Q11"],
                         "retired": [None, None, dt.date(2020, 9, 1), None, None]})
SPECIES = pd.DataFrame({"species": ["ANEMNE", "CALLUV", "PRIMUL", "SUCCIS", "ORCHID"],
                        "measure": ["count", "cover", "frequency", "pin_hits", "presence"],
                        "n": pd.array([None, None, 25, 10, None], dtype="Int64")})
TARGETS = (("ANEMNE", "count"), ("PRIMUL", "frequency"))


def _ref(**kw):
    base = dict(stations=STATIONS, species=SPECIES, targets=TARGETS, today=dt.date(2021, 12, 31),
                windows={2021: (dt.date(2021, 4, 15), dt.date(2021, 8, 31))})
    base.update(kw)
    return Reference(**base)


def _records(tmp_path, body, header="station,date,observers,status,repeat,ANEMNE:count,PRIMUL:frequency/25"):
    path = tmp_path / "season.csv"
    path.write_text(header + "\n" + body, encoding="utf-8")
    return read_field_records(path)


def _check(rec, ref):
    return validate_records(rec.visits, rec.observations, rec.covariates, ref)


def _rows(problems, severity="error"):
    return [(p.row, p.field, p.value) for p in problems if p.severity == severity]


def test_clean_records_have_no_problems(tmp_path):
    rec = _records(tmp_path, "Q01,2021-05-03,OB1,done,,3,5\nQ02,2021-05-03,,missed,,,\n")
    assert _check(rec, _ref()) == []


def test_unknown_station_suggests_closest(tmp_path):
    rec = _records(tmp_path, "Q1O,2021-05-03,OB1,done,,3,5\n")
    problems = _check(rec, _ref())
    assert _rows(problems) == [(2, "station", "Q1O")]
    # difflib.SequenceMatcher ratio (Python standard library): Q10, Q11 and Q01 each share 2 of 3
    # characters with Q1O (ratio 0.67), Q20-like codes would not; all three are offered
    suggested = problems[0].line().split("closest: ")[1].split(", ")
    assert sorted(suggested) == ["Q01", "Q10", "Q11"]


def test_retired_station(tmp_path):
    rec = _records(tmp_path, "Q03,2021-05-03,OB1,done,,3,5\n")
    problems = _check(rec, _ref())
    assert _rows(problems) == [(2, "station", "Q03")]
    assert "retired on 2020-09-01" in problems[0].line()


def test_unknown_species_and_unregistered_measure(tmp_path):
    rec = _records(tmp_path, "Q01,2021-05-03,OB1,done,,3,5,1,2\n",
                   header="station,date,observers,status,repeat,ANEMNE:count,PRIMUL:frequency/25,"
                          "ANEMEN:count,ANEMNE:cover")
    got = _rows(_check(rec, _ref()))
    assert (2, "ANEMEN:count", "ANEMEN") in got
    assert (2, "ANEMNE:cover", "cover") in got


@pytest.mark.parametrize("header,value,ok", [
    # monitor/measures.py (common practice): count a whole number >= 0; cover 0-100; k of n with 0 <= k <= n; presence 0/1
    ("ANEMNE:count", "-1", False), ("ANEMNE:count", "2.5", False), ("ANEMNE:count", "0", True),
    ("CALLUV:cover", "100", True), ("CALLUV:cover", "100.5", False), ("CALLUV:cover", "0.1", True),
    ("PRIMUL:frequency/25", "25", True), ("PRIMUL:frequency/25", "26", False),
    ("PRIMUL:frequency/25", "3.5", False), ("SUCCIS:pin_hits/10", "10", True),
    ("SUCCIS:pin_hits/10", "11", False), ("ORCHID:presence", "1", True),
])
def test_value_ranges(tmp_path, header, value, ok):
    rec = _records(tmp_path, f"Q01,2021-05-03,OB1,done,{value}\n", header=f"station,date,observers,status,{header}")
    got = _rows(_check(rec, _ref(targets=())))
    assert (got == []) is ok
    if not ok:
        assert got == [(2, header, value)]  # echoed as typed ('11', never 11.0)


def test_n_must_match_programme_quadrat(tmp_path):
    rec = _records(tmp_path, "Q01,2021-05-03,OB1,done,,3,5\n",
                   header="station,date,observers,status,repeat,ANEMNE:count,PRIMUL:frequency/16")
    problems = _check(rec, _ref())
    assert _rows(problems) == [(2, "PRIMUL:frequency/16", "n=16")]
    assert "n = 25 cells" in problems[0].line()


def test_future_and_out_of_window_dates_are_warnings(tmp_path):
    rec = _records(tmp_path, "Q01,2022-05-03,OB1,done,,3,5\nQ02,2021-03-01,OB1,done,,1,1\n")
    problems = _check(rec, _ref())
    assert _rows(problems) == []
    assert _rows(problems, "warning") == [(2, "date", "2022-05-03"), (3, "date", "2021-03-01")]
    with pytest.raises(InputError):
        raise_for_problems(problems)
    assert len(raise_for_problems(problems, accept_warnings=True)) == 2


def test_second_visit_in_round_needs_repeat(tmp_path):
    rec = _records(tmp_path, "Q01,2021-05-03,OB1,done,,3,5\nQ01,2021-06-03,OB1,done,,3,5\n"
                             "Q01,2021-07-03,OB1,done,yes,3,5\nQ02,2021-06-01,OB1,done,,1,1\n")
    existing = pd.DataFrame({"station": ["Q02", "Q01"], "date": [dt.date(2021, 5, 1), dt.date(2021, 5, 3)],
                             "repeat": [False, False]})
    got = _rows(_check(rec, _ref(existing_visits=existing)))
    # row 3 repeats Q01 without repeat=yes; row 5 is a second Q02 visit after a stored one;
    # row 2 is the stored Q01 visit itself (same date: a correction), not a second visit
    assert got == [(3, "repeat", "no"), (5, "repeat", "no")]


def test_done_visit_missing_target(tmp_path):
    rec = _records(tmp_path, "Q01,2021-05-03,OB1,done,,3,\nQ02,2021-05-03,OB1,partial,,3,\n")
    assert _rows(_check(rec, _ref())) == [(2, "PRIMUL:frequency", None)]
    assert _rows(_check(rec, _ref(blanks_mean_zero=True))) == []
    filled = fill_blank_targets(rec.visits, rec.observations, _ref(blanks_mean_zero=True))
    added = filled[filled["source_field"] == "(blank = 0)"]
    # only the done visit is filled; the partial visit's blank stays missing (missing is not zero)
    assert list(zip(added["station"], added["species"], added["value"], added["n"], strict=True)) == [("Q01", "PRIMUL", 0.0, 25)]


def test_missed_visit_carrying_values(tmp_path):
    rec = _records(tmp_path, "Q01,2021-05-03,,missed,,3,\nQ02,2021-05-03,,inaccessible,,,0\n")
    got = _rows(_check(rec, _ref()))
    assert got == [(2, "ANEMNE:count", "3"), (3, "PRIMUL:frequency/25", "0")]  # echoed as typed


def test_observers_and_covariates_against_register(tmp_path):
    rec = _records(tmp_path, "Q01,2021-05-03,OB1;OX9,done,3,5,30,2\n",
                   header="station,date,observers,status,ANEMNE:count,PRIMUL:frequency/25,"
                          "cov:soil_moisture[%],cov:lihgt[lux]")
    got = _rows(_check(rec, _ref(observers=frozenset({"OB1", "OB2"}),
                                 covariate_units={"soil_moisture": "%", "light": "lux"})))
    assert got == [(2, "observers", "OX9"), (2, "cov:lihgt", "lihgt")]


def test_species_window_warning(tmp_path):
    rec = _records(tmp_path, "Q01,2021-07-03,OB1,done,,3,5\n")
    problems = _check(rec, _ref(species_windows={"ANEMNE": ("04-01", "05-31")}))
    assert _rows(problems, "warning") == [(2, "ANEMNE:count", "2021-07-03")]
