"""Files for spreadsheets: numbers in columns of their own, every summary table, .xlsx workbooks."""

from __future__ import annotations

import io

import openpyxl
import pandas as pd

from monitor.cli.main import main


def test_trend_csv_gives_numbers_their_own_columns(demo_db, capsys, tmp_path):
    assert main(["--db", demo_db, "trend", "--species", "MARVIO", "--csv", "--xlsx", str(tmp_path / "t.xlsx")]) == 0
    frame = pd.read_csv(io.StringIO(capsys.readouterr().out))
    row = frame.iloc[0]
    for name in ("annual_change", "period_change"):
        for part in ("pct", "lower_pct", "upper_pct"):
            column = f"{name}_{part}" if part == "pct" else f"{name}_{part}"
            assert pd.api.types.is_float_dtype(frame[column]), column  # read by pandas as numbers
        assert row[f"{name}_lower_pct"] <= row[f"{name}_pct"] <= row[f"{name}_upper_pct"]
    # the same numbers as the JSON (fractions there, percent here)
    assert main(["--db", demo_db, "trend", "--species", "MARVIO", "--json"]) == 0
    import json

    doc = json.loads(capsys.readouterr().out)[0]
    assert abs(row["period_change_lower_pct"] - 100 * doc["period_change"]["lower"]) < 0.006
    assert abs(row["annual_change_upper_pct"] - 100 * doc["annual_change"]["upper"]) < 0.006
    sheet = openpyxl.load_workbook(tmp_path / "t.xlsx")["trends"]
    header = [c.value for c in sheet[1]]
    value = sheet.cell(2, header.index("annual_change_pct") + 1).value
    assert isinstance(value, float) and abs(value - row["annual_change_pct"]) < 1e-9


def test_summary_csv_has_all_three_tables_and_xlsx_three_sheets(demo_db, capsys, tmp_path):
    assert main(["--db", demo_db, "summary", "--csv", "--xlsx", str(tmp_path / "s.xlsx")]) == 0
    frame = pd.read_csv(io.StringIO(capsys.readouterr().out))
    assert frame.columns[0] == "table"
    assert list(dict.fromkeys(frame["table"])) == ["sites", "species", "visits_by_year"]
    assert set(frame.loc[frame["table"] == "sites", "site"]) == {"CB", "HH", "SM", "WE"}
    assert len(frame[frame["table"] == "species"]) == 5
    book = openpyxl.load_workbook(tmp_path / "s.xlsx")
    assert book.sheetnames == ["sites", "species", "visits_by_year"]
    sites = book["sites"]
    header = [c.value for c in sites[1]]
    assert isinstance(sites.cell(2, header.index("area_m2") + 1).value, (int, float))


def test_estimate_xlsx(demo_db, capsys, tmp_path):
    assert main(["--db", demo_db, "estimate", "2024", "--species", "MARVIO", "--xlsx", str(tmp_path / "e.xlsx")]) == 0
    sheet = openpyxl.load_workbook(tmp_path / "e.xlsx")["estimates 2024"]
    header = [c.value for c in sheet[1]]
    assert {"estimate", "lower", "upper"} <= set(header)
    assert all(isinstance(sheet.cell(r, header.index("estimate") + 1).value, (int, float)) for r in range(2, 6))
