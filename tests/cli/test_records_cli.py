"""The records commands from the command line, and malformed field sheets tried for real.

Property test (hypothesis): starting from a valid invented sheet (the demo's 2024 season, not yet stored),
one damage at a time (text, huge or negative numbers in number columns, odd date formats, duplicated or stray
columns, unknown stations, values on a missed visit), optionally with blank lines, a byte-order mark or
another encoding (Windows-1252, UTF-16 with its mark), plus whole-file damage (empty file, UTF-16 without a
mark, bytes undefined in Windows-1252, a truncated .xlsx) goes through ``monitor records import``.  Each
must give exit code 1, no traceback, one line per problem on stderr naming the file (and the row and field
where the damage has them), and leave the SQLite file byte-for-byte as it was.

Rows are numbered as the user's editor shows them: the physical line of the file, header = 1 (RFC 4180,
Shafranovich 2005, for the CSV form; the encoding rule is the one stated in monitor.io._tables).
"""

from __future__ import annotations

import contextlib
import csv
import io
import json
import tempfile
from pathlib import Path

import openpyxl
import pytest
from hypothesis import HealthCheck, event, given, settings
from hypothesis import strategies as st

from monitor.cli.main import main
from tests.services import test_records_data as shared
from tests.services.test_records_data import DEMO, Template, build_demo, dump

SHEET = DEMO / "records" / "season_2024.csv"
HEADER = SHEET.read_text().splitlines()[0].split(",")
ROWS = [r for r in csv.reader(io.StringIO(SHEET.read_text()))][1:]
VALUE_COLUMNS = [h for h in HEADER if ":" in h and not h.startswith("cov:")]

demo_template = shared.demo_template  # fixtures: the built demo database, copied per test
demo_db = shared.demo_db


@pytest.fixture(scope="module")
def small_db(tmp_path_factory):
    """The demo programme with two seasons stored (SQLite), shared by the property examples: every example
    must leave it unchanged, which is what the test checks."""
    template = Template("sqlite", tmp_path_factory.mktemp("cli_db"),
                        lambda url: build_demo(url, seasons=(2015, 2016)))
    return template.url


def _run(*args: str) -> tuple[int, str, str]:
    out, err = io.StringIO(), io.StringIO()
    with contextlib.redirect_stdout(out), contextlib.redirect_stderr(err):
        code = main(list(args))
    return code, out.getvalue(), err.getvalue()


def _text(rows: list[list[str]], header: list[str] | None = None) -> str:
    buffer = io.StringIO()
    writer = csv.writer(buffer, lineterminator="\r\n")
    writer.writerow(header or HEADER)
    writer.writerows(rows)
    return buffer.getvalue()


@st.composite
def damaged_sheets(draw):
    """(file bytes, suffix, expected (row, field) or None for a whole-file problem)."""
    rows = [list(r) for r in ROWS]
    header = list(HEADER)
    kind = draw(st.sampled_from(["number_text", "huge", "negative", "range", "date", "duplicate_header",
                                 "stray_header", "stray_cell", "unknown_station", "missed_with_value",
                                 "empty", "utf16_no_bom", "undefined_cp1252", "truncated_xlsx"]))
    event(kind)
    i = draw(st.integers(0, len(rows) - 1))
    line = i + 2  # header is line 1
    field: str | None = None
    if kind in ("number_text", "huge", "negative", "range"):
        field = draw(st.sampled_from(VALUE_COLUMNS))
        measure = field.split(":")[1].split("/")[0]
        bad = {"number_text": draw(st.sampled_from(["abc", "12 plants", "1,5", "five", "NaN", "½", "--4"])),
               "huge": draw(st.sampled_from(["1e30", "99999999999999999999", "1e400"])),
               "negative": "-3",
               "range": {"count": "2.5", "cover": "100.5", "frequency": "26", "pin_hits": "11",
                         "presence": "2"}[measure]}[kind]
        rows[i][header.index(field)] = bad
    elif kind == "date":
        field = "date"
        y, m, d = rows[i][1].split("-")
        rows[i][1] = draw(st.sampled_from([f"{m}/{d}/{y}", f"{d}.{m}.{y[2:]}", f"{y}/{m}/{d}", f"June {d} {y}",
                                           f"{y}-{m}-32", "03/04/2024", f"{d}-{m}-{y}", "yesterday"]))
    elif kind == "duplicate_header":
        target = draw(st.sampled_from(VALUE_COLUMNS))
        header[header.index("notes")] = target
        line, field = 1, target
    elif kind == "stray_header":
        header.append("colour")
        for r in rows:
            r.append("green")
        line, field = 1, "colour"
    elif kind == "stray_cell":
        rows[i].append("stray")
    elif kind == "unknown_station":
        rows[i][0] = "ZZ-99"
        field = "station"
    elif kind == "missed_with_value":
        rows[i][header.index("status")] = "missed"
        rows[i][header.index("observers")] = ""
        field = "MARVIO:count"
        rows[i][header.index(field)] = "4"
    whole_file = kind in ("empty", "utf16_no_bom", "undefined_cp1252", "truncated_xlsx")
    if kind == "truncated_xlsx":
        workbook = openpyxl.Workbook()
        sheet = workbook.active
        sheet.append(header)
        for r in rows:
            sheet.append(r)
        buffer = io.BytesIO()
        workbook.save(buffer)
        data = buffer.getvalue()
        return data[: draw(st.integers(30, len(data) - 30))], ".xlsx", None
    # blank lines shift the physical line numbers of the rows after them
    blanks = draw(st.integers(0, 3)) if not whole_file else 0
    lines = _text(rows, header).split("\r\n")
    at = draw(st.integers(2, len(lines) - 1)) if blanks else len(lines)
    lines[at:at] = [""] * blanks
    if line >= at + 1 and line > 1:
        line += blanks
    text = "\r\n".join(lines)
    encoding = draw(st.sampled_from(["utf-8", "utf-8-sig", "cp1252", "utf-16"]))
    if kind == "empty":
        return draw(st.sampled_from([b"", b"\r\n\r\n", b"   "])), ".csv", None
    if kind == "utf16_no_bom":
        return text.encode("utf-16-le"), ".csv", None
    if kind == "undefined_cp1252":
        # 0x81 is undefined in Windows-1252 and is not valid UTF-8 either
        return text.replace("flood", "fl\x00od").encode("utf-8").replace(b"\x00", b"\x81") + b"\x81", ".csv", None
    if encoding == "cp1252":
        text = text.replace("ran out of time", "ran out of time at the caf\u00e9")
    return text.encode(encoding), ".csv", (line, field)


@given(case=damaged_sheets())
@settings(max_examples=50, deadline=None,
          suppress_health_check=[HealthCheck.too_slow, HealthCheck.function_scoped_fixture])
def test_malformed_sheets_exit_1_name_row_and_field_and_change_nothing(small_db, case):
    data, suffix, expected = case
    before = Path(small_db).read_bytes()
    with tempfile.TemporaryDirectory() as folder:
        path = Path(folder) / f"season{suffix}"
        path.write_bytes(data)
        code, out, err = _run("--db", small_db, "records", "import", str(path))
    assert code == 1, (code, out, err)
    assert "Traceback" not in err and out == ""
    lines = err.strip().splitlines()
    assert lines and all(line.startswith(("error: ", "refused: ")) for line in lines), err
    assert all(path.name in line for line in lines), err
    if expected is not None:
        row, field = expected
        wanted = f"row {row}" + (f", field '{field}'" if field else "")
        assert any(wanted in line for line in lines), (wanted, err)
    assert Path(small_db).read_bytes() == before


BAD_SHEETS = {
    "negative count": lambda rows: rows[3].__setitem__(HEADER.index("MARVIO:count"), "-3"),
    "cover over 100": lambda rows: rows[4].__setitem__(HEADER.index("GLASED:cover"), "130"),
    "ambiguous date": lambda rows: rows[5].__setitem__(1, "03/04/2024"),
}


@pytest.mark.parametrize("damage", sorted(BAD_SHEETS))
def test_bad_sheet_leaves_every_table_unchanged_on_each_engine(demo_db, damage, tmp_path):
    rows = [list(r) for r in ROWS]
    BAD_SHEETS[damage](rows)
    path = tmp_path / "bad.csv"
    path.write_text(_text(rows))
    before = dump(demo_db)
    code, _out, err = _run("--db", demo_db, "records", "import", str(path))
    assert code == 1 and "bad.csv, row " in err and "Traceback" not in err
    assert dump(demo_db) == before


def test_office_commands_from_the_command_line(demo_db, tmp_path):
    db = ["--db", demo_db]
    done = next(r for r in ROWS if r[3] == "done")
    station = done[0]
    code, _o, err = _run(*db, "records", "import", str(SHEET))
    assert code == 0, err
    code, _o, err = _run(*db, "records", "set", station, "2024", "MARVIO", "count", "-3", "--reason", "x")
    assert code == 1 and "whole number >= 0" in err and len(err.strip().splitlines()) == 1
    code, _o, err = _run(*db, "records", "set", station, "2024", "MARVIO", "count", "41", "--reason", "re-read")
    assert code == 0 and "-> 41" in err
    code, _o, err = _run(*db, "records", "photo", station, "--visit-date", done[1], "--path", "p/1.jpg",
                         "--bearing", "90", "--height", "1.2", "--notes", "from the SW pin")
    assert code == 0, err
    code, out, _e = _run(*db, "station", "history", station, "--json")
    history = json.loads(out)
    visit = next(v for v in history["visits"] if v["year"] == 2024)
    assert visit["values"]["MARVIO:count"] == 41.0 and history["photos"][0]["bearing_deg"] == 90.0
    assert history["changes"][0]["new_value"] == "41.0"
    code, out, err = _run(*db, "station", "retire", station, "--reason", "marker lost", "--date", "2026-11-30")
    assert code == 0 and "retired" in err
    code, out, _e = _run(*db, "quality", "--json")
    flags = json.loads(out)
    assert code == 0 and all(f["state"] == "open" for f in flags)
    if flags:
        code, _o, err = _run(*db, "quality", "resolve", str(flags[0]["id"]), "--note", "checked")
        assert code == 0 and "resolved" in err
    for what, target in (("csv", tmp_path / "csv"), ("geojson", tmp_path / "s.geojson"), ("dwca", tmp_path / "a.zip")):
        code, _o, err = _run(*db, "export", what, str(target))
        assert code == 0 and target.exists(), err


def test_compare_lists_mismatches_and_exits_1(tmp_path):
    first, second = tmp_path / "a.csv", tmp_path / "b.csv"
    rows = [list(r) for r in ROWS]
    first.write_text(_text(rows))
    second.write_text(_text(rows))
    assert _run("records", "compare", str(first), str(second))[0] == 0
    i = next(k for k, r in enumerate(rows) if r[3] == "done")
    rows[i][HEADER.index("MARVIO:count")] = "999"
    second.write_text(_text(rows))
    code, out, err = _run("records", "compare", str(first), str(second), "--json")
    assert code == 1 and "1 mismatch" in err
    got = json.loads(out)
    assert [(m["station"], m["field"], m["value_b"], m["row_a"]) for m in got] == [(rows[i][0], "count", 999.0, i + 2)]
