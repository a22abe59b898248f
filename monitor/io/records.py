"""Field-record readers: a season's visits and values from CSV or .xlsx, wide or long layout.

The layouts are those of docs/files.md ("field records"): the wide "field sheet" (one row per station visit,
one ``<SPECIES>:<measure>`` column per target species and measure, ``cov:<name>[<unit>]`` covariate
columns) and the long layout (one row per station, date, species and measure).  The layout is detected
from the header: ``species``, ``measure`` and ``value`` columns mean long; ``SPECIES:measure`` columns
mean wide.

The reader checks the file's form (columns, types, dates, one visit per station and date, visit
fields agreeing across a visit's rows in the long layout).  What the values mean against the programme
(known stations and species, ranges, windows, targets) is checked by
:func:`monitor.io.validate.validate_records`.

A blank value cell means "not recorded" and yields no observation; ``0`` is a recorded absence.
"""

from __future__ import annotations

import datetime as dt
import itertools
import os
import re
from dataclasses import dataclass

import numpy as np
import pandas as pd

from monitor import columns as C
from monitor import measures
from monitor.errors import InputError, InputProblem
from monitor.io import filespec as FS
from monitor.io import headers as H
from monitor.io._tables import (
    _COV_RE,
    Problems,
    RawTable,
    check_columns,
    get,
    is_percent,
    parse_bool,
    parse_date,
    parse_int,
    parse_number,
    parse_percent,
    read_raw_table,
)
from monitor.errors import ProblemCounter

WIDE = "wide"
LONG = "long"
#: rows of a wide sheet read at a time: memory holds one chunk of the file's rows as strings, the frames
#: of what was read, and the first problems (a million-row sheet of garbage stays within about 200 MB)
CHUNK_ROWS = 20_000
NUMBER_EXPECTED = "a number with '.' as decimal mark, |x| <= 1e12"

VISIT_COLUMNS = [C.STATION, C.DATE, C.YEAR, H.OBSERVERS, C.VISIT_STATUS, H.REPEAT, C.PROTOCOL, H.NOTES,
                 H.SOURCE_ROW]
OBSERVATION_COLUMNS = [C.STATION, C.DATE, C.SPECIES, C.MEASURE, H.VALUE, H.N, H.SOURCE_ROW, H.SOURCE_FIELD,
                       H.SOURCE_TEXT]
COVARIATE_COLUMNS = [C.STATION, C.DATE, "name", H.UNIT, H.VALUE, H.SOURCE_ROW]

# the visit columns, from the one definition of the file (docs/files.md is made from it); the value and
# covariate columns are patterns (SPECIES:measure, cov:NAME[UNIT]) recognised by their form
VISIT_REQUIRED = FS.RECORDS.required()
VISIT_OPTIONAL = [f.name for f in FS.RECORDS.fields if not f.required and ":" not in f.name]
LONG_REQUIRED = VISIT_REQUIRED + list(FS.RECORDS_LONG_EXTRA)
LONG_OPTIONAL = VISIT_OPTIONAL + [H.N]

_VALUE_HEADER = re.compile(r"^\s*([^:\s]+)\s*:\s*([A-Za-z_ ]+?)\s*(?:/\s*(\S+))?\s*$")


@dataclass(frozen=True)
class FieldRecords:
    """A season's field records read from one file, in the canonical frames below."""

    file: str
    layout: str               # "wide" or "long"
    visits: pd.DataFrame      # VISIT_COLUMNS
    observations: pd.DataFrame  # OBSERVATION_COLUMNS
    covariates: pd.DataFrame  # COVARIATE_COLUMNS
    sheet: str | None = None  # the workbook sheet read (None for a CSV)
    #: with ``keep_going=True``: the problems of the rows and cells that could not be read (the frames hold
    #: the rest), so that the programme's checks can report theirs too, all in one listing
    problems: ProblemCounter | None = None
    #: the covariates the file has a column for (a blank cell there means "not recorded")
    covariate_names: tuple[str, ...] = ()


def parse_value_header(raw: str) -> tuple[str, str, int | None] | str:
    """``"PRIMUL:frequency/25"`` -> ("PRIMUL", "frequency", 25); a string saying what is wrong otherwise."""
    m = _VALUE_HEADER.match(raw)
    if not m:
        return "a value column <SPECIES>:<measure> such as 'ANEMNE:count' or 'PRIMUL:frequency/25'"
    species, measure, n_text = m[1], m[2].strip().lower().replace(" ", "_"), m[3]
    if measure not in measures.REGISTRY:
        return f"a measure among {', '.join(C.MEASURES)} after the ':'"
    if measures.REGISTRY[measure].needs_n:
        n = parse_int(n_text) if n_text else None
        if n is None or n <= 0:
            return f"'{species}:{measure}/<n>' with n the whole number of {measures.REGISTRY[measure].trials} > 0"
        return species, measure, n
    if n_text is not None:
        return f"no '/n' after measure '{measure}'"
    return species, measure, None


def parse_covariate_header(raw: str) -> tuple[str, str | None] | None:
    """``"cov:soil_moisture[%]"`` -> ("soil_moisture", "%"); None if not a covariate header."""
    m = _COV_RE.match(raw)
    if not m:
        return None
    return m[1].strip(), (m[2].strip() or None) if m[2] is not None else None


def detect_layout(table: RawTable) -> str | None:
    """'long' if species, measure and value columns exist; 'wide' if SPECIES:measure columns do."""
    long_ = all(name in table.headers for name in (C.SPECIES, C.MEASURE, H.VALUE))
    wide = any(":" in raw and not parse_covariate_header(raw) for raw in table.raw_headers)
    if long_ and not wide:
        return LONG
    if wide and not long_:
        return WIDE
    if not long_ and not wide and C.STATION in table.headers:
        return WIDE  # visits only (e.g. a sheet of missed visits), possibly with covariates
    return None


def read_field_records(source: str | os.PathLike[str], *, layout: str | None = None,
                       day_first: bool | None = None, sheet: str | None = None,
                       keep_going: bool = False) -> FieldRecords:
    """Read a season's field records from CSV or .xlsx into canonical frames.

    Parameters
    ----------
    source : path
        CSV (encoding rule in :mod:`monitor.io._tables`) or .xlsx file.
    layout : {"wide", "long"}, optional
        Force a layout; detected from the header when omitted.
    day_first : bool, optional
        How to read slash dates.  Default: only unambiguous DD/MM/YYYY dates are accepted.
    sheet : str, optional
        The workbook sheet to read; needed when more than one visible sheet holds data (hidden sheets are
        read only when named).
    keep_going : bool
        Return what could be read, with the problems in ``FieldRecords.problems``, rather than raise for
        problems of single rows and cells (a missing column or an unreadable file still raises).

    Raises
    ------
    InputError
        With every problem found (file, row, field, value, expected).
    """
    table = read_raw_table(source, sheet=sheet, stream=True)  # the rows are read chunk by chunk below
    problems = Problems(table.file)  # the header's problems; the rows' own come after the rows are read
    found = detect_layout(table)
    if layout is None:
        if found is None:
            raise InputError(InputProblem(table.file, table.header_row, None, None,
                                          "either the wide layout (station, date, status and SPECIES:measure "
                                          "columns) or the long layout (station, date, status, species, "
                                          "measure, value), not both"))
        layout = found
    if layout not in (WIDE, LONG):
        raise InputError(f"layout must be 'wide' or 'long', got {layout!r}")

    value_columns: dict[int, tuple[str, str, int | None]] = {}
    cov_columns: dict[int, tuple[str, str | None]] = {}
    for i, raw in enumerate(table.raw_headers):
        cov = parse_covariate_header(raw)
        if cov is not None:
            cov_columns[i] = cov
        elif ":" in raw:
            parsed = parse_value_header(raw)
            if isinstance(parsed, str):
                problems.add(table.header_row, raw, raw, parsed)
            elif layout == LONG:
                problems.add(table.header_row, raw, raw, "no SPECIES:measure columns in the long layout")
            else:
                value_columns[i] = parsed
    special = {table.headers[i] for i in (*value_columns, *cov_columns)}
    base = [name for name in table.headers if ":" not in name or name in special]
    base_table = RawTable(table.file, [table.raw_headers[table.headers.index(n)] for n in base], base,
                          [], table.header_row)
    required, optional = (VISIT_REQUIRED, VISIT_OPTIONAL) if layout == WIDE else (LONG_REQUIRED, LONG_OPTIONAL)
    missing = check_columns(base_table, required, optional + sorted(special), problems)
    if missing:
        for _row in table.rows:  # the shape of every row is checked and listed all the same
            pass
        _in_file_order(table, problems).raise_if_any()

    reader = _Reader(table, Problems(table.file), day_first, cov_columns)
    if layout == WIDE:
        reader.read_wide(value_columns)
    else:
        reader.read_long()
    problems = _in_file_order(table, problems, reader.problems)
    if not keep_going:
        problems.raise_if_any()
    visits = reader.visit_frame if reader.visit_frame is not None else pd.DataFrame(reader.visits,
                                                                                      columns=VISIT_COLUMNS)
    observations = (reader.observation_frame if reader.observation_frame is not None
                    else pd.DataFrame(reader.observations, columns=OBSERVATION_COLUMNS))
    observations[H.N] = observations[H.N].astype("Int64")
    observations[H.VALUE] = observations[H.VALUE].astype(float)
    covariates = pd.DataFrame(reader.covariates, columns=COVARIATE_COLUMNS)
    covariates[H.VALUE] = covariates[H.VALUE].astype(float)
    for frame in (visits, observations, covariates):
        frame.attrs["file"] = table.file
    return FieldRecords(table.file, layout, visits, observations, covariates, table.sheet,
                        problems.counter if problems.has_errors else None,
                        tuple(dict.fromkeys(name for name, _unit in cov_columns.values())))


def _in_file_order(table: RawTable, header: Problems, rows: Problems | None = None) -> Problems:
    """Every problem in the order a whole-file reading meets them: the file's shape (found while its rows were
    read), then the header's, then the rows' values."""
    problems = table.problems()
    problems.absorb(header.counter)
    if rows is not None:
        problems.absorb(rows.counter)
    return problems


def covariate_number(text: str, unit: str | None, problems, row: int, field: str) -> float | None:
    """A covariate cell's number; a percent (typed '40%' or a percent-formatted cell) only where the unit is %."""
    if is_percent(text):
        if (unit or "").strip() != "%":
            problems.add(row, field, text, f"a plain number in [{unit or 'no unit'}], not a percent (the cell "
                                           "shows a '%' or is formatted as a percent)")
            return None
        value = parse_percent(text)
    else:
        value = parse_number(text)
    if value is None:
        problems.add(row, field, text, NUMBER_EXPECTED)
    return value


class _KeyedProblems:
    """Collects problems with a sort key, so that reading column by column reports them row by row.

    The key is (row, phase, column position, arrival): phase 0 visit fields, 1 value cells, 2 covariate
    cells, 3 a repeated station and date, as a row-by-row reading meets them.  Only the first
    :data:`monitor.errors.MAX_LISTED` by key are kept; all are counted.
    """

    def __init__(self, file: str):
        self.file = file
        self.phase: tuple[int, int] = (0, 0)
        self.counter = ProblemCounter()

    def add(self, row: int | None, field_: str | None, value: object, expected: str,
            severity: str = "error") -> None:
        self.counter.add_parts(self.file, row, field_, value, expected, severity,
                               key=(-1 if row is None else row, *self.phase))


class _Reader:
    def __init__(self, table: RawTable, problems: Problems, day_first: bool | None,
                 cov_columns: dict[int, tuple[str, str | None]]):
        self.table = table
        self.problems = problems
        self.day_first = day_first
        self.cov_columns = cov_columns
        self.visits: list[dict] = []
        self.observations: list[dict] = []
        self.covariates: list[dict] = []
        self.visit_rows: dict[tuple[str, dt.date], int] = {}
        self.visits_by_index: dict[int, tuple] = {}  # wide layout: row index -> its visit's fields
        self.visit_frame: pd.DataFrame | None = None        # wide layout builds its frames column-wise
        self.observation_frame: pd.DataFrame | None = None

    def raw(self, name: str) -> str:
        return self.table.raw_name(name) if name in self.table.headers else name

    # visit-level fields ------------------------------------------------------------------------
    def visit_fields(self, number: int, cells: list[str]) -> dict | None:
        t, p = self.table, self.problems
        ok = True
        station = get(t, cells, C.STATION)
        if not station:
            p.add(number, self.raw(C.STATION), None, "a station code")
            ok = False
        date_text = get(t, cells, C.DATE)
        date, why = parse_date(date_text, day_first=self.day_first) if date_text else (None, "a visit date")
        if date is None:
            p.add(number, self.raw(C.DATE), date_text or None, why or "a date")
            ok = False
        status_text = get(t, cells, C.VISIT_STATUS)
        status = status_text.lower()
        if status not in C.VISIT_STATUSES:
            p.add(number, self.raw(C.VISIT_STATUS), status_text or None, f"one of {', '.join(C.VISIT_STATUSES)}")
            ok = False
        observers_text = get(t, cells, H.OBSERVERS)
        observers = tuple(o.strip() for o in observers_text.split(";") if o.strip())
        if status in C.STATUSES_WITH_VALUES and not observers:
            p.add(number, self.raw(H.OBSERVERS), observers_text or None,
                  f"observer codes separated by ';' for a {status} visit")
        repeat_text = get(t, cells, H.REPEAT)
        repeat = parse_bool(repeat_text)
        if repeat is None:
            p.add(number, self.raw(H.REPEAT), repeat_text, "yes or no (blank = no)")
            repeat = False
        if not ok:
            return None
        return {C.STATION: station, C.DATE: date, C.YEAR: date.year, H.OBSERVERS: observers,
                C.VISIT_STATUS: status, H.REPEAT: repeat, C.PROTOCOL: get(t, cells, C.PROTOCOL) or None,
                H.NOTES: get(t, cells, H.NOTES) or None, H.SOURCE_ROW: number}

    def covariate_values(self, number: int, cells: list[str], visit: dict | None) -> list[dict]:
        out = []
        for i, (name, unit) in self.cov_columns.items():
            text = cells[i]
            if not text:
                continue
            value = covariate_number(text, unit, self.problems, number, self.table.raw_headers[i])
            if value is None:
                continue
            if visit is not None:
                out.append({C.STATION: visit[C.STATION], C.DATE: visit[C.DATE], "name": name, H.UNIT: unit,
                            H.VALUE: value, H.SOURCE_ROW: number})
        return out

    def value(self, number: int, field: str, measure: str, text: str) -> float | None:
        if measures.REGISTRY[measure].kind == measures.KIND_BINARY:
            flag = parse_bool(text)
            if flag is None or not text:
                self.problems.add(number, field, text, "presence as 0/1 or yes/no")
                return None
            return 1.0 if flag else 0.0
        if is_percent(text):
            if measures.REGISTRY[measure].kind != measures.KIND_PERCENT:
                self.problems.add(number, field, text, f"a plain number for {measure}, not a percent (the cell "
                                                       "shows a '%' or is formatted as a percent)")
                return None
            value = parse_percent(text)  # a percent cell means a percent: '12.5%' is 12.5 % cover
        else:
            value = parse_number(text)
        if value is None:
            self.problems.add(number, field, text, NUMBER_EXPECTED)
        return value

    def new_visit(self, visit: dict) -> bool:
        key = (visit[C.STATION], visit[C.DATE])
        if key in self.visit_rows:
            self.problems.add(visit[H.SOURCE_ROW], self.raw(C.DATE), visit[C.DATE].isoformat(),
                              f"one visit per station and date (station {visit[C.STATION]} also on row "
                              f"{self.visit_rows[key]})")
            return False
        self.visit_rows[key] = visit[H.SOURCE_ROW]
        self.visits.append(visit)
        return True

    # layouts ------------------------------------------------------------------------------------
    def read_wide(self, value_columns: dict[int, tuple[str, str, int | None]]) -> None:
        """Read the wide layout column by column (fast for big sheets), :data:`CHUNK_ROWS` rows at a time
        (memory holds one chunk of the file's rows, not all of them).

        The result, and the problems with their order, are those of reading row by row: visit fields,
        then value cells and covariate cells in header order, then a repeated station and date.
        """
        keyed = _KeyedProblems(self.problems.file)
        collector, self.problems = self.problems, keyed  # type: ignore[assignment]
        visit_frames: list[pd.DataFrame] = []
        observation_frames: list[pd.DataFrame] = []
        try:
            rows = iter(self.table.rows)
            while chunk := list(itertools.islice(rows, CHUNK_ROWS)):
                numbers = [number for number, _ in chunk]
                columns = list(zip(*(cells for _, cells in chunk), strict=True))
                del chunk
                good = self._wide_visit_fields(numbers, columns, keyed)
                kept = self._wide_new_visits(numbers, good, keyed)
                if self.visit_frame is not None:
                    visit_frames.append(self.visit_frame)
                self._wide_values(numbers, columns, value_columns, kept, keyed)
                if self.observation_frame is not None:
                    observation_frames.append(self.observation_frame)
                self._wide_covariates(numbers, columns, kept, keyed)
                self.visit_frame = self.observation_frame = None
        finally:
            self.problems = collector
        if visit_frames:
            self.visit_frame = pd.concat(visit_frames, ignore_index=True) if len(visit_frames) > 1 else visit_frames[0]
        if observation_frames:
            self.observation_frame = (pd.concat(observation_frames, ignore_index=True) if len(observation_frames) > 1
                                      else observation_frames[0])
        collector.absorb(keyed.counter)

    def _wide_visit_fields(self, numbers: list[int], columns: list[tuple[str, ...]],
                           keyed: _KeyedProblems) -> dict[int, dict]:
        t = self.table
        n = len(numbers)

        def column(name: str) -> tuple[str, ...]:
            return columns[t.headers.index(name)] if name in t.headers else ("",) * n

        stations, dates, statuses = column(C.STATION), column(C.DATE), column(C.VISIT_STATUS)
        teams, repeats = column(H.OBSERVERS), column(H.REPEAT)
        protocols, notes = column(C.PROTOCOL), column(H.NOTES)
        raw_station, raw_date, raw_status = self.raw(C.STATION), self.raw(C.DATE), self.raw(C.VISIT_STATUS)
        raw_observers, raw_repeat = self.raw(H.OBSERVERS), self.raw(H.REPEAT)
        date_cache: dict[str, tuple[dt.date | None, str | None]] = {}
        team_cache: dict[str, tuple[str, ...]] = {}
        repeat_cache: dict[str, bool | None] = {}
        statuses_text = ", ".join(C.VISIT_STATUSES)
        keyed.phase = (0, 0)
        good: dict[int, dict] = {}
        for i in range(n):
            number = numbers[i]
            ok = True
            station = stations[i]
            if not station:
                keyed.add(number, raw_station, None, "a station code")
                ok = False
            date_text = dates[i]
            if date_text:
                parsed = date_cache.get(date_text)
                if parsed is None:
                    parsed = date_cache[date_text] = parse_date(date_text, day_first=self.day_first)
                date, why = parsed
            else:
                date, why = None, "a visit date"
            if date is None:
                keyed.add(number, raw_date, date_text or None, why or "a date")
                ok = False
            status_text = statuses[i]
            status = status_text.lower()
            if status not in C.VISIT_STATUSES:
                keyed.add(number, raw_status, status_text or None, f"one of {statuses_text}")
                ok = False
            team_text = teams[i]
            team = team_cache.get(team_text)
            if team is None:
                team = team_cache[team_text] = tuple(o.strip() for o in team_text.split(";") if o.strip())
            if status in C.STATUSES_WITH_VALUES and not team:
                keyed.add(number, raw_observers, team_text or None,
                          f"observer codes separated by ';' for a {status} visit")
            repeat_text = repeats[i]
            if repeat_text in repeat_cache:
                repeat = repeat_cache[repeat_text]
            else:
                repeat = repeat_cache[repeat_text] = parse_bool(repeat_text)
            if repeat is None:
                keyed.add(number, raw_repeat, repeat_text, "yes or no (blank = no)")
                repeat = False
            if ok:
                good[i] = (station, date, team, status, repeat, protocols[i] or None, notes[i] or None, number)
        return good

    def _wide_new_visits(self, numbers: list[int], good: dict[int, tuple], keyed: _KeyedProblems) -> list[int]:
        """Keep the first visit of each station and date (a repeated one is a problem), as new_visit does."""
        keyed.phase = (3, 0)
        raw_date = self.raw(C.DATE)
        self.visits_by_index = {}
        kept = []
        for i, (station, date, *_rest, number) in good.items():
            key = (station, date)
            first = self.visit_rows.get(key)
            if first is not None:
                keyed.add(number, raw_date, date.isoformat(),
                          f"one visit per station and date (station {station} also on row {first})")
                continue
            self.visit_rows[key] = number
            kept.append(i)
        if kept:
            fields = list(zip(*(good[i] for i in kept), strict=True))
            stations, dates, teams, statuses, repeats, protocols, notes, rows = (list(f) for f in fields)
            self.visit_frame = pd.DataFrame({
                C.STATION: stations, C.DATE: dates, C.YEAR: [d.year for d in dates], H.OBSERVERS: teams,
                C.VISIT_STATUS: statuses, H.REPEAT: repeats, C.PROTOCOL: protocols, H.NOTES: notes,
                H.SOURCE_ROW: rows}, columns=VISIT_COLUMNS)
            self.visits_by_index = {i: good[i] for i in kept}
        return kept

    def _wide_values(self, numbers: list[int], columns: list[tuple[str, ...]],
                     value_columns: dict[int, tuple[str, str, int | None]], kept: list[int],
                     keyed: _KeyedProblems) -> None:
        headers = self.table.raw_headers
        keep = set(kept)
        at_row: list[int] = []
        at_column: list[int] = []
        values: list[float] = []
        texts: list[str] = []
        for position, (i, (_species, measure, _n)) in enumerate(value_columns.items()):
            keyed.phase = (1, position)
            field = headers[i]
            presence = measures.REGISTRY[measure].kind == measures.KIND_BINARY
            for r, text in enumerate(columns[i]):
                if not text:
                    continue  # blank = not recorded
                if not presence and text.isascii() and text.isdigit() and len(text) < 12:
                    value: float | None = float(text)  # the common case, a plain whole number
                else:
                    value = self.value(numbers[r], field, measure, text)
                if value is None or r not in keep:
                    continue
                at_row.append(r)
                at_column.append(position)
                values.append(value)
                texts.append(text)
        if not values:
            return
        rows_ = np.asarray(at_row)
        positions = np.asarray(at_column)
        order = np.lexsort((positions, rows_))
        rows_, positions = rows_[order].tolist(), positions[order].tolist()
        specs = list(value_columns.items())
        visits = self.visits_by_index
        self.observation_frame = pd.DataFrame({
            C.STATION: [visits[r][0] for r in rows_], C.DATE: [visits[r][1] for r in rows_],
            C.SPECIES: [specs[k][1][0] for k in positions], C.MEASURE: [specs[k][1][1] for k in positions],
            H.VALUE: np.asarray(values, dtype=float)[order], H.N: [specs[k][1][2] for k in positions],
            H.SOURCE_ROW: [numbers[r] for r in rows_], H.SOURCE_FIELD: [headers[specs[k][0]] for k in positions],
            H.SOURCE_TEXT: np.asarray(texts, dtype=object)[order],
        }, columns=OBSERVATION_COLUMNS)

    def _wide_covariates(self, numbers: list[int], columns: list[tuple[str, ...]], kept: list[int],
                         keyed: _KeyedProblems) -> None:
        if not self.cov_columns:
            return
        keep = set(kept)
        at_row: list[int] = []
        at_column: list[int] = []
        records: list[dict] = []
        for position, (i, (name, unit)) in enumerate(self.cov_columns.items()):
            keyed.phase = (2, position)
            for r, text in enumerate(columns[i]):
                if not text:
                    continue
                value = covariate_number(text, unit, keyed, numbers[r], self.table.raw_headers[i])
                if value is None:
                    continue
                if r in keep:
                    station, date = self.visits_by_index[r][:2]
                    at_row.append(r)
                    at_column.append(position)
                    records.append({C.STATION: station, C.DATE: date, "name": name, H.UNIT: unit,
                                    H.VALUE: value, H.SOURCE_ROW: numbers[r]})
        if records:
            order = np.lexsort((np.asarray(at_column), np.asarray(at_row)))
            self.covariates.extend(records[k] for k in order)

    def read_long(self) -> None:
        t, p = self.table, self.problems
        by_key: dict[tuple[str, dt.date], dict] = {}
        cov_seen: dict[tuple[str, dt.date, str], tuple[float, int]] = {}
        obs_seen: dict[tuple[str, dt.date, str, str], int] = {}
        for number, cells in t.rows:
            visit = self.visit_fields(number, cells)
            if visit is not None:
                key = (visit[C.STATION], visit[C.DATE])
                first = by_key.get(key)
                if first is None:
                    by_key[key] = visit
                    self.new_visit(visit)
                else:
                    for name in (H.OBSERVERS, C.VISIT_STATUS, H.REPEAT, C.PROTOCOL, H.NOTES):
                        if visit[name] != first[name] and not (name == H.NOTES and visit[name] is None):
                            shown = ";".join(visit[name]) if name == H.OBSERVERS else visit[name]
                            p.add(number, self.raw(name), shown,
                                  f"the same {name} as row {first[H.SOURCE_ROW]} for this visit")
            for cov in self.covariate_values(number, cells, visit):
                ckey = (cov[C.STATION], cov[C.DATE], cov["name"])
                if ckey in cov_seen:
                    if cov_seen[ckey][0] != cov[H.VALUE]:
                        p.add(number, f"cov:{cov['name']}", cov[H.VALUE],
                              f"the same covariate value as row {cov_seen[ckey][1]} for this visit")
                    continue
                cov_seen[ckey] = (cov[H.VALUE], number)
                self.covariates.append(cov)
            species = get(t, cells, C.SPECIES)
            measure_text = get(t, cells, C.MEASURE)
            value_text = get(t, cells, H.VALUE)
            n_text = get(t, cells, H.N)
            if not (species or measure_text or value_text or n_text):
                continue  # a visit-only row (missed / inaccessible visits, or a done visit with covariates)
            measure = measure_text.lower().replace(" ", "_").replace("-", "_")
            if not species:
                p.add(number, self.raw(C.SPECIES), None, "a species code beside a measure or value")
            if measure not in measures.REGISTRY:
                p.add(number, self.raw(C.MEASURE), measure_text or None, f"one of {', '.join(C.MEASURES)}")
                continue
            n = None
            if measures.REGISTRY[measure].needs_n:
                n = parse_int(n_text) if n_text else None
                if n is None or n <= 0:
                    p.add(number, self.raw(H.N), n_text or None,
                          f"a whole number of {measures.REGISTRY[measure].trials} > 0 for {measure}")
            elif n_text:
                p.add(number, self.raw(H.N), n_text, f"a blank n for measure '{measure}'")
            if not value_text:
                continue  # not recorded
            value = self.value(number, self.raw(H.VALUE), measure, value_text)
            if value is None or visit is None or not species:
                continue
            okey = (visit[C.STATION], visit[C.DATE], species, measure)
            if okey in obs_seen:
                p.add(number, self.raw(C.SPECIES), species,
                      f"one value per visit, species and measure (also row {obs_seen[okey]})")
                continue
            obs_seen[okey] = number
            self.observations.append({C.STATION: visit[C.STATION], C.DATE: visit[C.DATE], C.SPECIES: species,
                                      C.MEASURE: measure, H.VALUE: value, H.N: n, H.SOURCE_ROW: number,
                                      H.SOURCE_FIELD: self.raw(H.VALUE), H.SOURCE_TEXT: value_text})
