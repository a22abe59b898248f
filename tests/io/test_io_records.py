"""Field-record readers: CSV and .xlsx, wide and long layouts (docs/files.md, "field records").  Invented data."""

from __future__ import annotations

import datetime as dt

import openpyxl
import pytest

from monitor.errors import InputError
from monitor.io.records import parse_covariate_header, parse_value_header, read_field_records

WIDE = ("station,date,observers,status,repeat,notes,ANEMNE:count,CALLUV:cover,PRIMUL:frequency/25,"
        "SUCCIS:pin_hits/10,ORCHID:presence,cov:soil_moisture[%]\n"
        "Q01,2021-05-03,OB1;OB2,done,,,12,35.5,7,3,yes,31.5\n"
        "Q02,2021-05-04,OB1,done,no,,0,0,0,0,0,\n"
        "Q03,2021-05-04,,missed,,gate locked,,,,,,\n")

LONG = ("station,date,observers,status,species,measure,value,n,cov:soil_moisture[%]\n"
        "Q01,2021-05-03,OB1;OB2,done,ANEMNE,count,12,,31.5\n"
        "Q01,2021-05-03,OB1;OB2,done,PRIMUL,frequency,7,25,31.5\n"
        "Q03,2021-05-04,,missed,,,,,\n")


def _write(tmp_path, name, text, encoding="utf-8"):
    path = tmp_path / name
    path.write_bytes(text.encode(encoding))
    return path


def _xlsx(tmp_path, rows, name="sheet.xlsx"):
    wb = openpyxl.Workbook()
    ws = wb.active
    for row in rows:
        ws.append(row)
    path = tmp_path / name
    wb.save(path)
    return path


def _problems(exc):
    return [(p.row, p.field, p.value) for p in exc.value.problems]


def test_header_parsers():
    assert parse_value_header("PRIMUL:frequency/25") == ("PRIMUL", "frequency", 25)
    assert parse_value_header("SUCCIS:pin_hits/10") == ("SUCCIS", "pin_hits", 10)
    assert parse_value_header("ANEMNE:count") == ("ANEMNE", "count", None)
    assert isinstance(parse_value_header("PRIMUL:frequency"), str)
    assert isinstance(parse_value_header("ANEMNE:abundance"), str)
    assert parse_covariate_header("cov:soil_moisture[%]") == ("soil_moisture", "%")
    assert parse_covariate_header("cov:light") == ("light", None)


def test_wide_csv(tmp_path):
    rec = read_field_records(_write(tmp_path, "wide.csv", WIDE))
    assert rec.layout == "wide"
    v = rec.visits
    assert list(v["station"]) == ["Q01", "Q02", "Q03"]
    assert v.loc[0, "observers"] == ("OB1", "OB2")
    assert v.loc[0, "date"] == dt.date(2021, 5, 3) and v.loc[0, "year"] == 2021
    assert list(v["source_row"]) == [2, 3, 4]
    o = rec.observations
    # blank = not recorded (no row); 0 = recorded absence (a row with value 0)
    assert len(o) == 10
    assert not (o["station"] == "Q03").any()
    q2 = o[o["station"] == "Q02"]
    assert (q2["value"] == 0).all() and len(q2) == 5
    freq = o[(o["species"] == "PRIMUL") & (o["station"] == "Q01")].iloc[0]
    assert freq["n"] == 25 and freq["value"] == 7 and freq["source_field"] == "PRIMUL:frequency/25"
    assert o[(o["species"] == "ORCHID") & (o["station"] == "Q01")]["value"].iloc[0] == 1.0
    c = rec.covariates
    assert len(c) == 1 and c.loc[0, "name"] == "soil_moisture" and c.loc[0, "unit"] == "%"


def test_long_csv_same_content_as_wide(tmp_path):
    rec = read_field_records(_write(tmp_path, "long.csv", LONG))
    assert rec.layout == "long"
    assert list(rec.visits["status"]) == ["done", "missed"]
    assert sorted(rec.observations["species"]) == ["ANEMNE", "PRIMUL"]
    assert len(rec.covariates) == 1


def test_long_visit_fields_must_agree(tmp_path):
    text = ("station,date,observers,status,species,measure,value,n\n"
            "Q01,2021-05-03,OB1,done,ANEMNE,count,12,\n"
            "Q01,2021-05-03,OB2,done,PRIMUL,frequency,7,\n"
            "Q01,2021-05-03,OB1,done,ANEMNE,count,13,\n")
    with pytest.raises(InputError) as exc:
        read_field_records(_write(tmp_path, "long.csv", text))
    got = _problems(exc)
    assert (3, "observers", "OB2") in got
    assert (3, "n", None) in got
    assert (4, "species", "ANEMNE") in got


def test_xlsx_wide_with_real_dates(tmp_path):
    path = _xlsx(tmp_path, [["Station", "Date", "Observers", "Status", "ANEMNE:count"],
                            ["Q01", dt.datetime(2021, 5, 3), "OB1", "done", 4],
                            [None, None, None, None, None],
                            ["Q02", dt.date(2021, 5, 4), "OB1", "done", 2.5]])
    rec = read_field_records(path)
    assert list(rec.visits["date"]) == [dt.date(2021, 5, 3), dt.date(2021, 5, 4)]
    # rows keep the sheet's numbering across the blank row
    assert list(rec.visits["source_row"]) == [2, 4]
    assert list(rec.observations["value"]) == [4.0, 2.5]


def test_truncated_xlsx_is_an_input_error(tmp_path):
    path = _xlsx(tmp_path, [["station", "date", "status"], ["Q01", "2021-05-03", "missed"]])
    data = path.read_bytes()
    cut = tmp_path / "cut.xlsx"
    cut.write_bytes(data[: len(data) // 2])
    with pytest.raises(InputError, match="cut.xlsx.*xlsx"):
        read_field_records(cut)


@pytest.mark.parametrize("encoding", ["utf-8", "utf-8-sig", "cp1252", "utf-16"])
def test_encodings(tmp_path, encoding):
    # the notes hold characters outside ASCII that Windows-1252 can encode
    text = WIDE.replace("gate locked", "gate locked – café")
    rec = read_field_records(_write(tmp_path, "enc.csv", text, encoding))
    assert rec.visits.loc[2, "notes"] == "gate locked – café"


def test_undecodable_bytes(tmp_path):
    # 0x81 is undefined in Windows-1252 (Unicode mapping table cp1252.txt) and invalid as UTF-8 start byte
    path = tmp_path / "bad.csv"
    path.write_bytes(WIDE.encode() + b"Q09,2021-05-04,,missed,,\x81,,,,,,\n")
    with pytest.raises(InputError, match="UTF-8 or Windows-1252"):
        read_field_records(path)


def test_empty_and_blank_files(tmp_path):
    for content in ("", "\n\n  \n"):
        with pytest.raises(InputError, match="empty|blank"):
            read_field_records(_write(tmp_path, "empty.csv", content))
    with pytest.raises(InputError):
        read_field_records(_write(tmp_path, "header_only.csv", ",,,\n"))


def test_duplicated_headers(tmp_path):
    text = "station,date,Status,STATUS,ANEMNE:count,anemne:COUNT\nQ01,2021-05-03,done,done,1,1\n"
    with pytest.raises(InputError) as exc:
        read_field_records(_write(tmp_path, "dup.csv", text))
    got = _problems(exc)
    assert (1, "STATUS", "STATUS") in got and (1, "anemne:COUNT", "anemne:COUNT") in got


def test_cell_problems_named_by_row_and_field(tmp_path):
    text = ("station,date,observers,status,ANEMNE:count,CALLUV:cover\n"
            "Q01,2021-05-03,OB1,done,twelve,1e400\n"
            "Q02,05/04/2021,OB1,done,3,99999999999999\n"
            "Q03,2021-02-30,OB1,visited,1,1\n"
            ",2021-05-03,,done,,\n"
            "Q01,2021-05-03,OB1,done,3,\n")
    with pytest.raises(InputError) as exc:
        read_field_records(_write(tmp_path, "cells.csv", text))
    got = _problems(exc)
    assert (2, "ANEMNE:count", "twelve") in got
    assert (2, "CALLUV:cover", "1e400") in got          # overflows to infinity: not a number we keep
    assert (3, "date", "05/04/2021") in got              # D/M and M/D both fit: never guessed
    assert (3, "CALLUV:cover", "99999999999999") in got  # beyond 1e12: a typing slip
    assert (4, "date", "2021-02-30") in got
    assert (4, "status", "visited") in got
    assert (5, "station", None) in got and (5, "observers", None) in got
    assert (6, "date", "2021-05-03") in got              # second visit to Q01 on the same date


def test_slash_dates_rule(tmp_path):
    text = "station,date,status\nQ01,17/05/2021,missed\nQ02,05/05/2021,missed\n"
    rec = read_field_records(_write(tmp_path, "d.csv", text))
    assert list(rec.visits["date"]) == [dt.date(2021, 5, 17), dt.date(2021, 5, 5)]
    text = "station,date,status\nQ01,05/17/2021,missed\n"
    with pytest.raises(InputError, match="month/day"):
        read_field_records(_write(tmp_path, "d2.csv", text))
    text = "station,date,status\nQ01,03/04/2021,missed\n"
    assert read_field_records(_write(tmp_path, "d3.csv", text), day_first=True).visits.loc[0, "date"] == \
        dt.date(2021, 4, 3)


def test_stray_column_and_extra_cells(tmp_path):
    text = "station,date,status,colour,ANEMNE:abundance\nQ01,2021-05-03,missed,,\nQ02,2021-05-03,missed,,,,x\n"
    with pytest.raises(InputError) as exc:
        read_field_records(_write(tmp_path, "s.csv", text))
    got = _problems(exc)
    assert (1, "colour", "colour") in got
    assert (1, "ANEMNE:abundance", "ANEMNE:abundance") in got
    assert any(r == 3 for r, _, _ in got)


def test_both_layouts_is_ambiguous(tmp_path):
    text = "station,date,status,species,measure,value,ANEMNE:count\nQ01,2021-05-03,done,A,count,1,1\n"
    with pytest.raises(InputError, match="either the wide"):
        read_field_records(_write(tmp_path, "both.csv", text))
