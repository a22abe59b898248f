"""Property test: malformed field-record files give InputError naming the row and field, never a traceback.

Starting from a valid invented wide field sheet, hypothesis applies one damage at a time (text in a
number column, huge or negative numbers, dates in odd formats, duplicated or stray headers, BOMs, other
encodings, blank lines, empty files, truncated workbooks, arbitrary bytes).  The whole path a user's
file takes before anything is stored runs: read_field_records -> validate_records -> raise_for_problems.

CSV form per RFC 4180; encodings per the rule stated in monitor.io._tables.
"""

from __future__ import annotations

import datetime as dt
import io
import tempfile
from pathlib import Path

import openpyxl
import pandas as pd
import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from monitor.errors import InputError
from monitor.io.records import read_field_records
from monitor.io.validate import Reference, raise_for_problems, validate_records

HEADER = ["station", "date", "observers", "status", "notes", "ANEMNE:count", "CALLUV:cover",
          "PRIMUL:frequency/25", "cov:soil_moisture[%]"]
NUMERIC = {"ANEMNE:count": "count", "CALLUV:cover": "cover", "PRIMUL:frequency/25": "frequency",
           "cov:soil_moisture[%]": "covariate"}
STATIONS = [f"Q{i:02d}" for i in range(1, 13)]
REFERENCE = Reference(
    stations=pd.DataFrame({"station": STATIONS, "retired": [None] * len(STATIONS)}),
    species=pd.DataFrame({"species": ["ANEMNE", "CALLUV", "PRIMUL"], "measure": ["count", "cover", "frequency"],
                          "n": pd.array([None, None, 25], dtype="Int64")}),
    today=dt.date(2030, 1, 1),
)
SETTINGS = settings(max_examples=40, deadline=None, suppress_health_check=[HealthCheck.too_slow])


@st.composite
def valid_rows(draw):
    n = draw(st.integers(1, 6))
    stations = draw(st.lists(st.sampled_from(STATIONS), min_size=n, max_size=n, unique=True))
    rows = []
    for station in stations:
        day = draw(st.integers(1, 28))
        rows.append([station, f"2021-06-{day:02d}", "OB1", "done", draw(st.sampled_from(["", "wet", "café"])),
                     str(draw(st.integers(0, 500))), str(draw(st.integers(0, 100))), str(draw(st.integers(0, 25))),
                     draw(st.sampled_from(["", "12.5", "40"]))])
    return rows


def _csv(header, rows) -> str:
    out = io.StringIO()
    import csv

    writer = csv.writer(out, lineterminator="\r\n")  # RFC 4180 sect. 2 rule 1: CRLF line breaks
    writer.writerow(header)
    writer.writerows(rows)
    return out.getvalue()


def _run(path: Path) -> None:
    records = read_field_records(path)
    problems = validate_records(records.visits, records.observations, records.covariates, REFERENCE)
    raise_for_problems(problems)


def _expect_named(path: Path, row: int, field: str) -> InputError:
    with pytest.raises(InputError) as exc:
        _run(path)
    named = [(p.row, p.field) for p in exc.value.problems]
    assert (row, field) in named, named
    assert all(p.file == path.name for p in exc.value.problems)
    return exc.value


def _expect_clean_or_input_error(path: Path) -> None:
    try:
        _run(path)
    except InputError as exc:
        assert exc.problems and all(p.file == path.name for p in exc.problems)
        assert str(exc).startswith(path.name)
        assert "\n" not in str(exc).split(" (and ")[0]  # one line


@given(rows=valid_rows())
@SETTINGS
def test_valid_sheets_pass(rows):
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "sheet.csv"
        path.write_text(_csv(HEADER, rows), encoding="utf-8")
        _run(path)


BAD_NUMBERS = st.one_of(
    st.sampled_from(["twelve", "1,5", "12 plants", "NaN", "inf", "-", "1e13", "99999999999999999999",
                     "0x1F", "½", "1.2.3", "--4", "1e400"]),
    st.text(st.characters(codec="utf-8", exclude_characters="\r\n\"\x00"), min_size=1, max_size=8).filter(
        lambda s: s.strip() != "" and not _is_plain_number(s)),
)


def _is_plain_number(text: str) -> bool:
    from monitor.io._tables import parse_number

    return parse_number(text) is not None


@given(rows=valid_rows(), data=st.data())
@SETTINGS
def test_text_and_huge_numbers_in_number_columns(rows, data):
    i = data.draw(st.integers(0, len(rows) - 1))
    column = data.draw(st.sampled_from(sorted(NUMERIC)))
    rows[i][HEADER.index(column)] = data.draw(BAD_NUMBERS)
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "sheet.csv"
        path.write_text(_csv(HEADER, rows), encoding="utf-8")
        _expect_named(path, i + 2, column)


@given(rows=valid_rows(), data=st.data())
@SETTINGS
def test_out_of_range_values(rows, data):
    i = data.draw(st.integers(0, len(rows) - 1))
    column, bad = data.draw(st.sampled_from([("ANEMNE:count", "-3"), ("ANEMNE:count", "2.5"),
                                             ("CALLUV:cover", "100.1"), ("CALLUV:cover", "-0.5"),
                                             ("PRIMUL:frequency/25", "26"), ("PRIMUL:frequency/25", "-1")]))
    rows[i][HEADER.index(column)] = bad
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "sheet.csv"
        path.write_text(_csv(HEADER, rows), encoding="utf-8")
        _expect_named(path, i + 2, column)


@given(rows=valid_rows(), data=st.data())
@SETTINGS
def test_odd_dates(rows, data):
    i = data.draw(st.integers(0, len(rows) - 1))
    rows[i][1] = data.draw(st.sampled_from(["2021/06/03", "June 3 2021", "03-06-21", "2021-13-01", "2021-02-29",
                                            "06/03/2021", "6/13/2021", "20210603", "yesterday", "2021-6-3x"]))
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "sheet.csv"
        path.write_text(_csv(HEADER, rows), encoding="utf-8")
        _expect_named(path, i + 2, "date")


@given(rows=valid_rows(), data=st.data())
@SETTINGS
def test_duplicated_and_stray_headers(rows, data):
    header = list(HEADER)
    kind = data.draw(st.sampled_from(["duplicate", "stray"]))
    if kind == "duplicate":
        name = data.draw(st.sampled_from(HEADER))
        added = data.draw(st.sampled_from([name, name.upper(), f" {name} "]))
    else:
        added = data.draw(st.sampled_from(["colour", "Weather", "ANEMNE:abundance", "PRIMUL:frequency"]))
    header.append(added)
    rows = [r + ["1"] for r in rows]
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "sheet.csv"
        path.write_text(_csv(header, rows), encoding="utf-8")
        _expect_named(path, 1, added.strip())


@given(rows=valid_rows(), data=st.data())
@SETTINGS
def test_harmless_damage_is_read_correctly(rows, data):
    text = _csv(HEADER, rows)
    lines = text.split("\r\n")
    blank_at = sorted(data.draw(st.lists(st.integers(1, len(lines) - 1), max_size=3)))
    for k in reversed(blank_at):
        lines.insert(k, data.draw(st.sampled_from(["", ",,,,", "   "])))
    text = "\r\n".join(lines)
    encoding = data.draw(st.sampled_from(["utf-8", "utf-8-sig", "cp1252", "utf-16"]))
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "sheet.csv"
        path.write_bytes(text.encode(encoding))
        records = read_field_records(path)
    assert list(records.visits["station"]) == [r[0] for r in rows]
    assert list(records.visits["notes"].fillna("")) == [r[4] for r in rows]
    # row numbers stay the physical lines a user sees, blank lines included
    expected_rows = [k + 1 for k, line in enumerate(lines) if line.startswith("Q")]
    assert list(records.visits["source_row"]) == expected_rows


@given(data=st.binary(max_size=400))
@settings(max_examples=150, deadline=None)
def test_arbitrary_bytes_never_crash(data):
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "junk.csv"
        path.write_bytes(data)
        _expect_clean_or_input_error(path)


@given(text=st.text(max_size=300), prefix=st.sampled_from(["", "station,date,status\n",
                                                           ",".join(HEADER) + "\n"]))
@settings(max_examples=150, deadline=None)
def test_arbitrary_text_never_crashes(text, prefix):
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "junk.csv"
        path.write_text(prefix + text, encoding="utf-8", errors="surrogatepass")
        _expect_clean_or_input_error(path)


def _xlsx_bytes(rows) -> bytes:
    wb = openpyxl.Workbook()
    ws = wb.active
    ws.append(HEADER)
    for r in rows:
        ws.append(r)
    buf = io.BytesIO()
    wb.save(buf)
    return buf.getvalue()


@given(rows=valid_rows(), data=st.data())
@settings(max_examples=25, deadline=None)
def test_truncated_or_corrupted_xlsx(rows, data):
    content = _xlsx_bytes(rows)
    how = data.draw(st.sampled_from(["truncate", "flip"]))
    if how == "truncate":
        content = content[: data.draw(st.integers(0, len(content) - 1))]
    else:
        k = data.draw(st.integers(0, len(content) - 1))
        content = content[:k] + bytes([content[k] ^ 0xFF]) + content[k + 1:]
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "sheet.xlsx"
        path.write_bytes(content)
        _expect_clean_or_input_error(path)
        if how == "truncate":
            # a zip whose central directory is cut off cannot be read (APPNOTE.TXT 4.3.16): always an error
            with pytest.raises(InputError):
                read_field_records(path)


def test_empty_file():
    with tempfile.TemporaryDirectory() as d:
        path = Path(d) / "empty.csv"
        path.write_bytes(b"")
        with pytest.raises(InputError, match="empty.csv"):
            _run(path)
