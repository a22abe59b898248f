"""Field sheets that real spreadsheets and tired hands produce, built by the tests themselves.

The rows are the invented demo programme's 2024 sheet (demo_programme/records/season_2024.csv); the
workbooks are written by openpyxl with the number formats, hidden sheets and formulas a test asks for.
No tests live here.
"""

from __future__ import annotations

import csv
import io
from pathlib import Path

from tests.conftest import REPO_ROOT

SEASON_2024 = REPO_ROOT / "demo_programme" / "records" / "season_2024.csv"


def demo_rows(n: int = 3, *, status: str = "done") -> tuple[list[str], list[list[str]]]:
    """The header and the first ``n`` rows of the demo's 2024 sheet with the given status."""
    with open(SEASON_2024, newline="", encoding="utf-8") as handle:
        reader = csv.reader(handle)
        header = next(reader)
        rows = [row for row in reader if row[3] == status][:n]
    return header, rows


def csv_text(header: list[str], rows: list[list[str]]) -> str:
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(header)
    writer.writerows(rows)
    return out.getvalue()


def write_csv(path: Path, header: list[str], rows: list[list[str]], *, encoding: str = "utf-8") -> Path:
    Path(path).write_bytes(csv_text(header, rows).encode(encoding))
    return Path(path)


def cell_value(text: str) -> object:
    """A cell as a person types it into a spreadsheet: numbers become numbers, the rest stays text."""
    try:
        number = float(text)
    except ValueError:
        return text if text else None
    return int(number) if number.is_integer() and "." not in text else number


def write_xlsx(path: Path, sheets: list[tuple[str, list[str], list[list[object]]]], *, hidden: tuple[str, ...] = (),
               formats: dict[tuple[str, int, int], str] | None = None) -> Path:
    """A workbook of the given sheets (name, header, rows); ``formats[(sheet, row, column)]`` number formats
    (1-based, row 1 the header); sheets in ``hidden`` are hidden."""
    import openpyxl

    book = openpyxl.Workbook()
    book.remove(book.active)
    for name, header, rows in sheets:
        sheet = book.create_sheet(name)
        sheet.append(header)
        for row in rows:
            sheet.append([cell_value(c) if isinstance(c, str) else c for c in row])
        if name in hidden:
            sheet.sheet_state = "hidden"
    for (name, row, column), number_format in (formats or {}).items():
        book[name].cell(row=row, column=column).number_format = number_format
    book.save(path)
    return Path(path)
