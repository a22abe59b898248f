"""A plain long table of one measure brought from elsewhere for ``monitor trend --table``: station, year, an
optional site, and the measure's value columns (``monitor.measures``), every cell checked as written."""

from __future__ import annotations

from pathlib import Path

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor import measures
from monitor.errors import InputError, InputProblem

MEASURE_BY_COLUMNS = measures.by_columns()   # (value columns, measure), k-of-n first


def read_trend_table(path: str | Path, *, measure: str | None = None) -> tuple[pd.DataFrame, str]:
    """The table (numbers parsed) and its measure (found from its columns when not given); every cell that is
    not what its column needs is refused at once, naming file, row and column."""
    path = Path(path)
    try:
        if path.suffix.lower() == ".xlsx":
            table = pd.read_excel(path, dtype=str, keep_default_na=False)
        else:
            table = pd.read_csv(path, dtype=str, keep_default_na=False)
    except (OSError, ValueError, UnicodeDecodeError) as exc:
        raise InputError(InputProblem(path.name, None, None, None, f"a readable CSV or .xlsx table ({exc})")) from None
    table.columns = [str(c).strip().lower() for c in table.columns]
    table = table.fillna("").astype(str)
    if measure is None:
        found = [m for cols, m in MEASURE_BY_COLUMNS if all(c in table.columns for c in cols)]
        if not found:
            raise InputError(InputProblem(path.name, 1, None, ", ".join(table.columns),
                                          "columns station, year and one of: "
                                          + "; ".join("+".join(cols) for cols, _ in MEASURE_BY_COLUMNS)))
        measure = found[0]
    missing = [InputProblem(path.name, 1, column, None, f"a column '{column}'")
               for column in (C.STATION, C.YEAR, *C.MEASURE_COLUMNS[measure]) if column not in table.columns]
    if missing:
        raise InputError(missing)
    table, problems = _checked_table(table, measure, path.name)
    if problems:
        raise InputError(problems)
    return table, measure


def _checked_table(table: pd.DataFrame, measure: str, name: str) -> tuple[pd.DataFrame, list[InputProblem]]:
    """Numbers from the text of a --table file, and every cell that is not what its column needs."""
    problems: list[InputProblem] = []

    def numbers(column: str, expected: str, low=None, high=None, whole=False, above=False) -> pd.Series:
        text = table[column].str.strip()
        values = pd.to_numeric(text, errors="coerce")
        ok = values.notna() & np.isfinite(values.to_numpy(float, na_value=np.nan))
        if whole:
            ok &= values == values.round()
        if low is not None:
            ok &= (values > low) if above else (values >= low)
        if high is not None:
            ok &= values <= high
        for i in np.flatnonzero(~ok.to_numpy()):
            raw = text.iloc[i]
            problems.append(InputProblem(name, int(i) + 2, column, raw if raw else None,
                                         expected + ("" if raw else " (the cell is blank)")))
        return values

    station = table[C.STATION].str.strip()
    for i in np.flatnonzero((station == "").to_numpy()):
        problems.append(InputProblem(name, int(i) + 2, C.STATION, None, "a station code (the cell is blank)"))
    out = table.copy()
    out[C.STATION] = station
    out[C.YEAR] = numbers(C.YEAR, "a whole year", whole=True)
    entry = measures.get(measure)
    for r in entry.column_rules:   # each value column's rule, from the registry
        out[r.column] = numbers(r.column, r.expected, r.minimum, r.maximum, r.whole, r.above_minimum)
    if entry.trials_column is not None and not problems:
        k, n = entry.columns
        for i in np.flatnonzero((out[k] > out[n]).to_numpy()):
            problems.append(InputProblem(name, int(i) + 2, k, table[k].iloc[i],
                                         f"at most the number in '{n}' ({table[n].iloc[i]})"))
    if problems:
        return out, problems
    out[C.YEAR] = out[C.YEAR].astype(int)
    if C.SITE in out:
        out[C.SITE] = out[C.SITE].str.strip()
    if C.QUADRAT_AREA in out:
        out[C.QUADRAT_AREA] = pd.to_numeric(out[C.QUADRAT_AREA], errors="coerce")
    return out, problems
