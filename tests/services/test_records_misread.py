"""Field records are never misread, never silently dropped (each kind of file, SQLite and PostgreSQL).

Every test builds its own files (CSV, or .xlsx written by openpyxl with number formats, hidden sheets and
formulas) from the invented demo programme's rows, runs ``monitor records import`` as a user does, and
checks the exit code, the one-line message naming file, row and field, and, where the file is refused,
that the database is unchanged: every row of every table, and on SQLite the file's bytes.
"""

from __future__ import annotations

import json
from pathlib import Path

import pytest
from sqlalchemy import create_engine, text

from monitor.cli.main import main
from tests.services.misread_files import demo_rows, write_csv, write_xlsx
from tests.services.test_records_data import dump

COVER = "GLASED:cover"
MOISTURE = "cov:soil_moisture[%]"


def snapshot(url: str) -> tuple:
    """Every row of every table, and on SQLite the database file's bytes."""
    raw = Path(url).read_bytes() if "://" not in url else None
    return dump(url), raw


def run(capsys, url: str, *args: str) -> tuple[int, str, str]:
    capsys.readouterr()
    code = main(["--db", url, *args])
    captured = capsys.readouterr()
    return code, captured.out, captured.err


def refused(capsys, url: str, *args: str) -> list[str]:
    """Run a command that must be refused: exit 1, nothing written; its error lines."""
    before = snapshot(url)
    code, _out, err = run(capsys, url, *args)
    assert code == 1, err
    assert snapshot(url) == before
    lines = [line for line in err.splitlines() if line.strip()]
    assert lines and all(line.startswith(("error:", "refused:")) for line in lines), err
    return lines


def stored(url: str, sql: str, **params) -> list[tuple]:
    engine = create_engine(url if "://" in url else f"sqlite:///{url}")
    try:
        with engine.connect() as connection:
            return [tuple(r) for r in connection.execute(text(sql), params).fetchall()]
    finally:
        engine.dispose()


def values_of(url: str, station: str, species: str, measure: str) -> list[float]:
    return [r[0] for r in stored(url, """
        SELECT o.value FROM observation o JOIN visit v ON v.id = o.visit_id JOIN station s ON s.id = v.station_id
        JOIN species p ON p.id = o.species_id WHERE s.code = :st AND p.code = :sp AND o.measure = :me""",
                                 st=station, sp=species, me=measure)]


def covariate_of(url: str, station: str) -> list[float]:
    return [r[0] for r in stored(url, """SELECT c.value FROM covariate c JOIN station s ON s.id = c.station_id
                                          WHERE s.code = :st AND c.name = 'soil_moisture'""", st=station)]


# --- 1. rows that do not line up with the header ------------------------------------------------------------

def test_a_decimal_comma_shifting_a_row_is_refused_naming_row_and_columns(programme_db, tmp_path, capsys):
    header, rows = demo_rows(3)
    at = header.index(COVER)
    rows[1][at] = "12,5"  # a decimal comma typed into a comma-separated file ...
    rows[1][-1] = ""      # ... with an empty last cell: the old reader shifted every later value one column
    text = "\n".join([",".join(header)] + [",".join(r) for r in rows]) + "\n"
    path = tmp_path / "decimal_comma.csv"
    path.write_text(text, encoding="utf-8")
    lines = refused(capsys, programme_db, "records", "import", str(path))
    assert len(lines) == 1
    assert "decimal_comma.csv, row 3, field 'GLASED:cover and every column after it'" in lines[0]
    assert f"{len(header)} cells as in the header, not {len(header) + 1}" in lines[0]
    assert "'12,5' under 'GLASED:cover' looks like a decimal comma" in lines[0]


def test_a_short_row_is_refused_and_a_padded_header_lines_up(programme_db, tmp_path, capsys):
    header, rows = demo_rows(2)
    text = ",".join(header) + "\n" + ",".join(rows[0]) + "\n" + ",".join(rows[1][:-2]) + "\n"
    path = tmp_path / "short.csv"
    path.write_text(text, encoding="utf-8")
    lines = refused(capsys, programme_db, "records", "import", str(path))
    assert f"short.csv, row 3, field 'columns {header[-2]} to {header[-1]}'" in lines[0]
    # a spreadsheet program that writes two empty columns on every line: each row still lines up
    padded = tmp_path / "padded.csv"
    padded.write_text("".join(",".join(r) + ",,\n" for r in [header, *rows]), encoding="utf-8")
    code, _out, err = run(capsys, programme_db, "records", "import", str(padded))
    assert code == 0, err
    assert values_of(programme_db, rows[1][0], "GLASED", "cover") == [float(rows[1][header.index(COVER)])]


# --- 2. workbooks with several sheets ------------------------------------------------------------------------

def test_a_hidden_draft_sheet_is_never_read_and_the_sheet_read_is_named(programme_db, tmp_path, capsys):
    header, rows = demo_rows(2)
    draft = [list(r) for r in rows]
    at = header.index("MARVIO:count")
    draft[0][at] = "99"  # the old draft, hidden, comes first
    path = write_xlsx(tmp_path / "hidden_first.xlsx", [("draft", header, draft), ("final", header, rows)],
                      hidden=("draft",))
    code, out, err = run(capsys, programme_db, "records", "import", str(path), "--json")
    assert code == 0, err
    assert json.loads(out)[0]["sheet"] == "final"
    assert values_of(programme_db, rows[0][0], "MARVIO", "count") == [float(rows[0][at])]


def test_several_visible_sheets_are_refused_unless_one_is_named(programme_db, tmp_path, capsys):
    header, rows = demo_rows(4)
    path = write_xlsx(tmp_path / "two_teams.xlsx", [("team A", header, rows[:2]), ("team B", header, rows[2:])])
    lines = refused(capsys, programme_db, "records", "import", str(path))
    assert len(lines) == 1
    assert "two_teams.xlsx, field '--sheet'" in lines[0] and "'team A', 'team B'" in lines[0]
    code, _out, err = run(capsys, programme_db, "records", "import", str(path), "--sheet", "team B")
    assert code == 0, err
    assert "sheet 'team B'" in err
    assert values_of(programme_db, rows[2][0], "MARVIO", "count") != []
    assert values_of(programme_db, rows[0][0], "MARVIO", "count") == []
    # a sheet name that is not there
    lines = refused(capsys, programme_db, "records", "import", str(path), "--sheet", "team C")
    assert "field '--sheet': got 'team C'" in lines[0] and "team A, team B" in lines[0]


# --- 3. percent-formatted cells --------------------------------------------------------------------------------

def test_a_percent_formatted_cover_cell_is_a_percent(programme_db, tmp_path, capsys):
    header, rows = demo_rows(2)
    at, moisture = header.index(COVER), header.index(MOISTURE)
    cells = [list(r) for r in rows]
    cells[0][at] = 0.125       # shows 12.5 % in the sheet
    cells[0][moisture] = 0.312  # shows 31.2 %; the covariate's unit is % (demo programme.json)
    path = write_xlsx(tmp_path / "percent.xlsx", [("sheet", header, cells)],
                      formats={("sheet", 2, at + 1): "0.0%", ("sheet", 2, moisture + 1): "0.0%"})
    code, _out, err = run(capsys, programme_db, "records", "import", str(path))
    assert code == 0, err
    assert values_of(programme_db, rows[0][0], "GLASED", "cover") == [12.5]
    assert covariate_of(programme_db, rows[0][0]) == [31.2]


def test_a_percent_in_a_count_column_is_refused(programme_db, tmp_path, capsys):
    header, rows = demo_rows(2)
    at = header.index("MARVIO:count")
    cells = [list(r) for r in rows]
    cells[1][at] = 0.5
    path = write_xlsx(tmp_path / "percent_count.xlsx", [("sheet", header, cells)],
                      formats={("sheet", 3, at + 1): "0%"})
    lines = refused(capsys, programme_db, "records", "import", str(path))
    assert lines == ["error: percent_count.xlsx, row 3, field 'MARVIO:count': got '50%'; expected a plain number "
                     "for count, not a percent (the cell shows a '%' or is formatted as a percent)"]


# --- 4. formulas without a stored result ---------------------------------------------------------------------------

def test_a_formula_without_a_stored_result_is_refused_naming_the_cell(programme_db, tmp_path, capsys):
    header, rows = demo_rows(2)
    at = header.index("CHAORC:count")
    cells = [list(r) for r in rows]
    cells[1][at] = "=1+2"  # openpyxl writes the formula and no cached result, as scripts do
    path = write_xlsx(tmp_path / "formula.xlsx", [("sheet", header, cells)])
    lines = refused(capsys, programme_db, "records", "import", str(path))
    column = chr(ord("A") + at)
    assert lines[0].startswith(f"error: formula.xlsx, row 3, field 'CHAORC:count (cell {column}3)': got '=1+2'; "
                               "expected a value: the formula has no stored result")


# --- 5. covariates, protocol, dates and observers on re-import ---------------------------------------------------------

def test_a_changed_covariate_and_protocol_are_corrections(programme_db, tmp_path, capsys):
    header, rows = demo_rows(2)
    first = write_csv(tmp_path / "first.csv", header, rows)
    assert run(capsys, programme_db, "records", "import", str(first))[0] == 0
    station = rows[0][0]
    moisture, protocol = header.index(MOISTURE), header.index("protocol")
    changed = [list(r) for r in rows]
    changed[0][moisture] = "44.4"
    changed[1][protocol] = "P1"
    second = write_csv(tmp_path / "second.csv", header, changed)
    lines = refused(capsys, programme_db, "records", "import", str(second))
    assert f"second.csv, row 2, field 'cov:soil_moisture': got 44.4; expected the stored value " \
           f"{float(rows[0][moisture])!r}" in lines[0]
    assert "second.csv, row 3, field 'protocol': got 'P1'; expected the stored value 'P2'" in lines[1]
    code, _out, err = run(capsys, programme_db, "records", "import", str(second), "--correct", "--reason",
                          "sheet re-keyed")
    assert code == 0, err
    assert covariate_of(programme_db, station) == [44.4]
    log = stored(programme_db, "SELECT field, old_value, new_value, reason FROM change_log ORDER BY id")
    assert ("cov:soil_moisture", rows[0][moisture], "44.4", "sheet re-keyed") in log
    assert ("protocol", "P2", "P1", "sheet re-keyed") in log


def test_an_import_that_applies_nothing_records_no_batch(programme_db, tmp_path, capsys):
    header, rows = demo_rows(2)
    first = write_csv(tmp_path / "first.csv", header, rows)
    assert run(capsys, programme_db, "records", "import", str(first))[0] == 0
    batches = stored(programme_db, "SELECT count(*) FROM import_batch")[0][0]
    same = tmp_path / "same_values.csv"  # other bytes (CRLF line ends), the same records
    same.write_bytes(first.read_bytes().replace(b"\n", b"\r\n"))
    before = snapshot(programme_db)
    code, out, err = run(capsys, programme_db, "records", "import", str(same), "--json")
    assert code == 0, err
    assert json.loads(out)[0]["outcome"] == "nothing to apply"
    assert stored(programme_db, "SELECT count(*) FROM import_batch")[0][0] == batches
    assert snapshot(programme_db)[0] == before[0]


def test_records_set_visit_corrects_a_covariate_and_the_protocol(programme_db, tmp_path, capsys):
    header, rows = demo_rows(1)
    assert run(capsys, programme_db, "records", "import", str(write_csv(tmp_path / "a.csv", header, rows)))[0] == 0
    station = rows[0][0]
    code, _out, err = run(capsys, programme_db, "records", "set-visit", station, "2024", "--protocol", "P1",
                          "--covariate", "soil_moisture=12.5", "--reason", "probe recalibrated")
    assert code == 0, err
    assert covariate_of(programme_db, station) == [12.5]
    log = stored(programme_db, "SELECT field, old_value, new_value FROM change_log ORDER BY id")
    assert log[-2:] == [("protocol", "P2", "P1"), ("cov:soil_moisture", rows[0][header.index(MOISTURE)], "12.5")]
    lines = refused(capsys, programme_db, "records", "set-visit", station, "2024", "--covariate",
                    "soil_moisture=12,5", "--reason", "x")
    assert lines == ["error: records set-visit, field 'cov:soil_moisture': got '12,5'; expected a number with "
                     "'.' as decimal mark, |x| <= 1e12"]


# --- 6. mixed encodings --------------------------------------------------------------------------------------------

def test_a_utf8_file_with_one_windows_1252_byte_is_refused_naming_the_row(programme_db, tmp_path, capsys):
    header, rows = demo_rows(3)
    notes = header.index("notes")
    rows[0][notes] = "Größe geschätzt"  # accents in UTF-8 ...
    body = ",".join(header) + "\n" + "\n".join(",".join(r) for r in rows) + "\n"
    data = body.encode("utf-8")
    third_row = rows[2][0].encode()
    pos = data.index(third_row)
    data = data[:pos] + third_row + data[pos + len(third_row):]
    lines_ = data.split(b"\n")
    lines_[3] = lines_[3].replace(b",,", ",caf\xe9,".encode("latin-1"), 1) if b",," in lines_[3] else lines_[3]
    path = tmp_path / "mixed.csv"
    path.write_bytes(b"\n".join(lines_))
    assert b"\xe9" in path.read_bytes()
    lines = refused(capsys, programme_db, "records", "import", str(path))
    assert lines[0].startswith("error: mixed.csv, row 4")
    assert "got 'byte 0xE9'; expected one encoding throughout: the file is UTF-8 but this byte is not" in lines[0]


def test_a_windows_1252_file_is_read_whole(programme_db, tmp_path, capsys):
    header, rows = demo_rows(1)
    rows[0][header.index("notes")] = "Größe geschätzt"
    path = write_csv(tmp_path / "cp1252.csv", header, rows, encoding="cp1252")
    code, _out, err = run(capsys, programme_db, "records", "import", str(path))
    assert code == 0, err
    assert stored(programme_db, "SELECT notes FROM visit") == [("Größe geschätzt",)]


# --- other files that used to pass or fail badly -------------------------------------------------------------------

def test_the_same_column_spelled_twice_is_refused_by_the_reader(programme_db, tmp_path, capsys):
    header, rows = demo_rows(1)
    path = write_csv(tmp_path / "twice.csv", [*header, "MARVIO: count"], [[*rows[0], "4"]])
    lines = refused(capsys, programme_db, "records", "import", str(path), "--dry-run")
    assert lines[0] == (f"error: twice.csv, row 1, field 'MARVIO: count': got 'MARVIO: count'; expected each column "
                        f"once; it repeats column {header.index('MARVIO:count') + 1} ('MARVIO:count')")


@pytest.mark.parametrize("kind", ["semicolon", "html", "title", "xls"])
def test_files_that_are_not_a_plain_table_are_named_for_what_they_are(programme_db, tmp_path, capsys, kind):
    header, rows = demo_rows(2)
    if kind == "semicolon":
        data = ("\n".join(";".join(r) for r in [header, *rows]) + "\n").encode()
        expected = "semicolon.csv, row 1; expected comma-separated values; this file is separated by semicolons"
    elif kind == "html":
        data = b"<html><body><table><tr><td>station</td></tr></table></body></html>"
        expected = "html.csv: got 'a web page (HTML) saved under a spreadsheet file name'; expected a CSV file or an"
    elif kind == "title":
        data = ("Field sheet 2024 - team A,,,\n" + "\n".join(",".join(r) for r in [header, *rows]) + "\n").encode()
        expected = ("title.csv, row 1: got 'Field sheet 2024 - team A'; expected the header (column names) on the "
                    "first row; row 1 looks like a title above the header on row 2")
    else:
        data = b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1" + b"\x00" * 100
        expected = "xls.csv: got 'an Excel 97-2003 .xls workbook'; expected a CSV file or an Excel 2007+ .xlsx"
    path = tmp_path / f"{kind}.csv"
    path.write_bytes(data)
    lines = refused(capsys, programme_db, "records", "import", str(path))
    assert len(lines) == 1
    assert lines[0].startswith("error: " + expected), lines[0]


def test_every_problem_is_listed_at_once_and_echoed_as_typed(programme_db, tmp_path, capsys):
    header, rows = demo_rows(3)
    rows[0][header.index("MARVIO:count")] = "x"               # not a number (the reader)
    rows[1][header.index("HEABEL:frequency/25")] = "26"       # out of range (the programme's checks)
    rows[2][0] = "NOPE-1"                                      # unknown station (the programme's checks)
    path = write_csv(tmp_path / "many.csv", header, rows)
    lines = refused(capsys, programme_db, "records", "import", str(path))
    assert lines == [
        "error: many.csv, row 2, field 'MARVIO:count': got 'x'; expected a number with '.' as decimal mark, "
        "|x| <= 1e12",
        "error: many.csv, row 3, field 'HEABEL:frequency/25': got '26'; expected a whole number of cells k with "
        "0 <= k <= n = 25",
        "error: many.csv, row 4, field 'station': got 'NOPE-1'; expected a station of the programme",
    ] or lines[2].startswith("error: many.csv, row 4, field 'station': got 'NOPE-1'")
    assert len(lines) == 3 and "got '26'" in lines[1]


def test_a_garbage_file_lists_100_problems_and_counts_the_rest(programme_db, tmp_path, capsys):
    header, rows = demo_rows(1)
    garbage = [[f"S{i}", "2024-06-15", "OBS01", "done", "no", "", "", "x", "y", "", "", "", ""] for i in range(400)]
    path = write_csv(tmp_path / "garbage.csv", header, garbage)
    lines = refused(capsys, programme_db, "records", "import", str(path))
    assert len(lines) == 101
    # 800 cells that are not numbers (the reader), 400 unknown stations and the targets left blank (the checks)
    assert lines[-1].startswith("error: ... and ")
    assert "problems in all: 800 x a number with '.' as decimal mark" in lines[-1]
    assert "400 x a station of the programme" in lines[-1]


# --- several files in one command ------------------------------------------------------------------------------------

def test_every_file_outcome_is_reported_and_dry_run_sees_earlier_files(programme_db, tmp_path, capsys):
    header, rows = demo_rows(3)
    first = write_csv(tmp_path / "first.csv", header, rows[:2])
    clash = [list(rows[1])]
    clash[0][header.index("MARVIO:count")] = str(int(rows[1][header.index("MARVIO:count")]) + 5)
    second = write_csv(tmp_path / "second.csv", header, clash)  # the same visit, another value
    third = write_csv(tmp_path / "third.csv", header, rows[2:])
    # a dry run checks the second file against the first: the clash shows without writing anything
    before = snapshot(programme_db)
    code, _out, err = run(capsys, programme_db, "records", "import", str(first), str(second), str(third), "--dry-run")
    assert code == 1 and snapshot(programme_db) == before
    lines = err.splitlines()
    assert lines[0].startswith("first.csv (wide layout): would add 2 visits")
    assert lines[1].startswith("third.csv: not attempted")
    assert lines[2].startswith("error: second.csv, row 2, field 'MARVIO:count'")
    # the real run: the first is committed, the second refused, the third not attempted; all reported
    code, out, err = run(capsys, programme_db, "records", "import", str(first), str(second), str(third), "--json")
    assert code == 1
    outcomes = [(r["file"], r["outcome"]) for r in json.loads(out)]
    assert outcomes == [("first.csv", "imported"), ("second.csv", "refused"), ("third.csv", "not attempted")]
    assert json.loads(out)[1]["problems"][0].startswith("second.csv, row 2, field 'MARVIO:count'")
    assert err.startswith("error: second.csv, row 2")
    assert values_of(programme_db, rows[0][0], "MARVIO", "count") != []
    assert values_of(programme_db, rows[2][0], "MARVIO", "count") == []


# --- a file written by a real spreadsheet program (LibreOffice Calc; tests/fixtures/records/README.md) ---------------

LIBREOFFICE_SHEET = Path(__file__).resolve().parents[1] / "fixtures" / "records" / "field_sheet_2024.xlsx"


def test_a_workbook_written_by_libreoffice_is_read_as_it_shows(programme_db, capsys):
    lines = refused(capsys, programme_db, "records", "import", str(LIBREOFFICE_SHEET))
    assert "field_sheet_2024.xlsx, field '--sheet'" in lines[0] and "'old draft', 'final'" in lines[0]
    code, out, err = run(capsys, programme_db, "records", "import", str(LIBREOFFICE_SHEET), "--sheet", "final",
                         "--json")
    assert code == 0, err
    assert json.loads(out)[0]["sheet"] == "final"
    assert values_of(programme_db, "HH-05", "GLASED", "cover") == [12.5]        # shown 12.5 %
    assert values_of(programme_db, "HH-05", "MARVIO", "count") == [0.0]         # not the draft's 99
    assert values_of(programme_db, "WE-08", "CHAORC", "count") == [2.0]         # =1+1, its stored result
    assert sorted(covariate_of(programme_db, "HH-05") + covariate_of(programme_db, "WE-08")) == [20.9, 31.2]
    assert ("Größe geschätzt",) in stored(programme_db, "SELECT notes FROM visit")
