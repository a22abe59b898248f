"""Tables for spreadsheets: .xlsx workbooks of result tables, several tables in one CSV, and the .xlsx
entry sheet with drop-down lists that the records importer reads back.

Workbooks are written with openpyxl (Office Open XML, ECMA-376); drop-down lists are its data
validation of type "list" (ECMA-376 Part 1, 18.3.1.32 dataValidation).
"""

from __future__ import annotations

import datetime as dt
import math
from collections.abc import Mapping, Sequence
from pathlib import Path

import numpy as np
import pandas as pd

from monitor import measures

SHEET_NAME_LIMIT = 31  # Excel's limit on a sheet name (common practice)


def is_missing(value: object) -> bool:
    """None, NaN, pd.NA or NaT: a cell with nothing in it."""
    if value is None:
        return True
    try:
        return bool(pd.isna(value))
    except (TypeError, ValueError):  # a list or tuple is a value, not a missing one
        return False


def cell_text(value: object) -> str:
    """A cell as text: ``""`` for a missing value, otherwise ``str(value)``."""
    return "" if is_missing(value) else str(value)


def _cell_value(value: object) -> object:
    if value is None or value is pd.NA or value is pd.NaT:
        return None
    if isinstance(value, (np.integer,)):
        return int(value)
    if isinstance(value, (np.floating, float)):
        f = float(value)
        return None if math.isnan(f) or math.isinf(f) else f
    if isinstance(value, np.bool_):
        return bool(value)
    if isinstance(value, pd.Timestamp):
        return value.to_pydatetime()
    if isinstance(value, (list, tuple, set, dict)):
        return ", ".join(str(v) for v in value) if not isinstance(value, dict) else str(value)
    return value


def write_xlsx(path: str | Path, sheets: Mapping[str, pd.DataFrame]) -> Path:
    """Write each table to a sheet of its own: a bold header row, numbers as numbers, columns sized."""
    from openpyxl import Workbook
    from openpyxl.styles import Font
    from openpyxl.utils import get_column_letter

    path = Path(path)
    book = Workbook()
    book.remove(book.active)
    for name, frame in sheets.items():
        sheet = book.create_sheet(str(name)[:SHEET_NAME_LIMIT])
        columns = [str(c) for c in frame.columns]
        sheet.append(columns)
        for cell in sheet[1]:
            cell.font = Font(bold=True)
        for row in frame.itertuples(index=False, name=None):
            sheet.append([_cell_value(v) for v in row])
        for i, column in enumerate(columns, start=1):
            width = max([len(column)] + [len(str(v)) for v in frame.iloc[:, i - 1].head(200).tolist()])
            sheet.column_dimensions[get_column_letter(i)].width = min(max(width + 2, 8), 60)
        sheet.freeze_panes = "A2"
    path.parent.mkdir(parents=True, exist_ok=True)
    book.save(path)
    return path


def tables_csv(sheets: Mapping[str, pd.DataFrame]) -> str:
    """Several tables in one CSV: a first column ``table`` names the table each row belongs to; the other
    columns are the union of the tables' columns in first-seen order (blank where a table has none)."""
    frames = []
    for name, frame in sheets.items():
        f = frame.copy()
        f.insert(0, "table", name)
        frames.append(f)
    columns: list[str] = []
    for f in frames:
        columns += [c for c in f.columns if c not in columns]
    return pd.concat([f.reindex(columns=columns) for f in frames], ignore_index=True).to_csv(index=False)


# --- the entry sheet ---------------------------------------------------------------------------------------
ENTRY_SHEET = "records"
LISTS_SHEET = "lists"


def _value_validation(header: str) -> dict:
    """The spreadsheet's check of one value column: the measure's rule from the registry
    (``SPECIES:measure[/n]``), else (a covariate) a number of 0 or more."""
    species_measure = header.split(":", 1)
    code, _, n_text = (species_measure[1] if len(species_measure) == 2 else "").partition("/")
    entry = measures.REGISTRY.get(code.strip().lower())
    if entry is None:
        return {"type": "decimal", "operator": "greaterThanOrEqual", "formula1": "0", "error": "A number of 0 or more"}
    rule = entry.rule
    kind = "whole" if rule.whole else "decimal"
    upper = n_text.strip() if rule.up_to_n and n_text.strip().isdigit() else \
        (None if rule.maximum is None else f"{rule.maximum:g}")
    error = "Expected " + rule.wording(int(n_text) if n_text.strip().isdigit() else None)
    if upper is not None:
        return {"type": kind, "operator": "between", "formula1": f"{rule.minimum:g}", "formula2": upper, "error": error}
    operator = "greaterThan" if rule.above_minimum else "greaterThanOrEqual"
    return {"type": kind, "operator": operator, "formula1": f"{rule.minimum:g}", "error": error}


def entry_workbook(path: str | Path, rows: pd.DataFrame, *, statuses: Sequence[str], observers: Sequence[str],
                   value_columns: Sequence[str], title: str | None = None) -> Path:
    """An .xlsx entry sheet: one row per planned visit, drop-down lists for the visit status and the
    observers, and each value column checked by its measure's rule (``monitor.measures``: whole numbers,
    0-100 for cover, at most n for k of n, above 0 for a length).

    ``rows`` holds the visit columns already filled in (station, planned date, ...); the value columns
    are left blank to fill in.  The lists live on a sheet of their own (``lists``), so a list longer
    than the 255 characters of an inline list still works; that sheet is hidden, and the importer reads
    the one visible sheet.
    """
    from openpyxl import Workbook
    from openpyxl.styles import Font
    from openpyxl.utils import get_column_letter
    from openpyxl.worksheet.datavalidation import DataValidation

    path = Path(path)
    book = Workbook()
    sheet = book.active
    sheet.title = ENTRY_SHEET
    columns = list(rows.columns) + [c for c in value_columns if c not in rows.columns]
    sheet.append(columns)
    for cell in sheet[1]:
        cell.font = Font(bold=True)
    for record in rows.itertuples(index=False, name=None):
        values = [_cell_value(v) for v in record]
        values = [v.isoformat() if isinstance(v, (dt.date, dt.datetime)) else v for v in values]
        sheet.append(values + [None] * (len(columns) - len(values)))
    last = max(sheet.max_row, 2) + 20  # room for visits added on the day
    lists = book.create_sheet(LISTS_SHEET)
    # hidden, so the workbook has one visible sheet: the importer reads that one and never a hidden one
    lists.sheet_state = "hidden"
    lists.append(["status", "observer"])
    for i in range(max(len(statuses), len(observers))):
        lists.append([statuses[i] if i < len(statuses) else None, observers[i] if i < len(observers) else None])

    def column_of(name: str) -> str:
        return get_column_letter(columns.index(name) + 1)

    status = DataValidation(type="list", formula1=f"={LISTS_SHEET}!$A$2:$A${len(statuses) + 1}", allow_blank=False,
                            showErrorMessage=True, errorTitle="status",
                            error=f"Choose one of: {', '.join(statuses)}")
    status.add(f"{column_of('status')}2:{column_of('status')}{last}")
    sheet.add_data_validation(status)
    if "observers" in columns and observers:
        # one observer per cell from the list; a second observer is typed after a ';' (so no error stop)
        observer = DataValidation(type="list", formula1=f"={LISTS_SHEET}!$B$2:$B${len(observers) + 1}",
                                  allow_blank=True, showErrorMessage=False,
                                  prompt="Choose an observer; add a second after ';'", showInputMessage=True)
        observer.add(f"{column_of('observers')}2:{column_of('observers')}{last}")
        sheet.add_data_validation(observer)
    for name in value_columns:
        number = DataValidation(**_value_validation(name), allow_blank=True, showErrorMessage=True, errorTitle=name)
        number.add(f"{column_of(name)}2:{column_of(name)}{last}")
        sheet.add_data_validation(number)
    for i, column in enumerate(columns, start=1):
        sheet.column_dimensions[get_column_letter(i)].width = max(len(column) + 2, 12)
    sheet.freeze_panes = "B2"
    if title:
        book.properties.title = title
    path.parent.mkdir(parents=True, exist_ok=True)
    book.save(path)
    return path
