"""Property: a field sheet is either stored exactly as a person sees it, or refused with nothing written.

Hypothesis builds workbooks (openpyxl: number formats General, 0, 0.0, 0.0 %, 0 %, text and date formats,
formulas without a stored result, a hidden or a second visible sheet, a title row) and CSV files (UTF-8
with or without a byte-order mark, Windows-1252, UTF-8 with one stray Windows-1252 byte, a decimal comma)
from the invented demo programme's stations, and imports each into a fresh copy of the demo's set-up,
on SQLite and, where MONITOR_TEST_POSTGRES_URL names a server, on PostgreSQL (fewer examples there: each
needs a database of its own).  The oracle is independent of the reader: every cell is generated with the text a spreadsheet
shows for it (a value written with exactly the decimals its format shows, so the display is exact), and a
person reads that text as a number, a percent sign meaning percent.  Then:

* if the import succeeds, every stored value and covariate equals the number the person reads, and
  nothing else was stored;
* if it is refused, every row of every table is as before (and on SQLite the file byte for byte);
* a sheet built only from good cells and shapes is never refused.

The example count is modest (the default run stays fast); ``--hypothesis-seed`` reproduces a failure.
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sqlalchemy import create_engine, text

from monitor.errors import MonitorError
from monitor.services import setup
from monitor.services.imports import import_records
from tests.conftest import REPO_ROOT
from tests.services.misread_files import demo_rows
from tests.services.test_records_data import Template, drop_postgres_database, dump, skip_without_postgres

HEADER, ROWS = demo_rows(4)
STATIONS = [r[0] for r in ROWS]
VISIT = ["2024-06-15", "OBS01", "done", "no", "P2", ""]  # date, observers, status, repeat, protocol, notes
#: value column -> (species, measure or None for the covariate, largest good value)
COLUMNS = {"MARVIO:count": ("MARVIO", "count", 60), "CHAORC:count": ("CHAORC", "count", 60),
           "GLASED:cover": ("GLASED", "cover", 100), "HEABEL:frequency/25": ("HEABEL", "frequency", 25),
           "SILGRA:pin_hits/10": ("SILGRA", "pin_hits", 10), "cov:soil_moisture[%]": ("soil_moisture", None, 100)}
SHEET_HEADER = ["station", "date", "observers", "status", "repeat", "protocol", "notes", *COLUMNS]


@dataclass(frozen=True)
class Cell:
    value: object          # what the workbook cell holds (a number, a text, or a formula)
    number_format: str     # its number format
    shown: str             # what a spreadsheet shows a person
    good: bool             # a value the programme accepts, as the person reads it


def _shown_number(x: float, decimals: int) -> str:
    return f"{x:.{decimals}f}"


@st.composite
def good_cell(draw, column: str) -> Cell:
    _species, measure, top = COLUMNS[column]
    whole = measure in ("count", "frequency", "pin_hits")
    if whole:
        k = draw(st.integers(0, top))
        number_format, decimals = draw(st.sampled_from([("General", 0), ("0", 0), ("0.0", 1), ("@", 0)]))
        value = k if number_format != "@" else str(k)
        return Cell(value, number_format, _shown_number(k, decimals), True)
    tenths = draw(st.integers(0, top * 10))
    if draw(st.booleans()):  # a percent cell: holds the fraction, shows the percent
        return Cell(tenths / 1000, "0.0%", _shown_number(tenths / 10, 1) + "%", True)
    number_format = draw(st.sampled_from(["General", "0.0"]))
    return Cell(tenths / 10, number_format, _shown_number(tenths / 10, 1), True)


@st.composite
def bad_cell(draw, column: str) -> Cell:
    _species, measure, _top = COLUMNS[column]
    kind = draw(st.sampled_from(["decimal comma", "text", "formula", "date", "percent count"]))
    if kind == "decimal comma":
        return Cell("12,5", "@", "12,5", False)
    if kind == "text":
        return Cell(draw(st.sampled_from(["x", "n/a", "-", "1 2"])), "General", "?", False)
    if kind == "formula":  # openpyxl stores no result: a spreadsheet would show one, the file holds none
        return Cell("=1+1", "General", "?", False)
    if kind == "date":
        return Cell(45000, "yyyy-mm-dd", "2023-03-15", False)
    if measure in (None, "cover"):
        return Cell("12,5", "@", "12,5", False)
    return Cell(0.5, "0%", "50%", False)


@st.composite
def sheets(draw):
    n = draw(st.integers(1, 4))
    rows, all_good = [], True
    for station in STATIONS[:n]:
        cells = []
        for column in COLUMNS:
            if draw(st.integers(0, 9)) == 0:
                cell = draw(bad_cell(column))
                all_good = False
            else:
                cell = draw(good_cell(column))
            cells.append(cell)
        rows.append((station, cells))
    return rows, all_good


def _person_reads(cell: Cell) -> float:
    """How a person reads the text a spreadsheet shows: a number, a trailing '%' meaning percent."""
    return float(cell.shown.rstrip("%"))


#: examples per test and engine: a PostgreSQL example creates (and drops) a database of its own
EXAMPLES = {"sqlite": 25, "postgresql": 6}
CHECKS = [HealthCheck.too_slow, HealthCheck.function_scoped_fixture]


@pytest.fixture(scope="module", params=["sqlite", pytest.param("postgresql", marks=pytest.mark.postgres)])
def template(request, tmp_path_factory) -> Template:
    """The demo's set-up (no records), once per engine; each example imports into a copy of it."""
    if request.param == "postgresql":
        skip_without_postgres()
    made = Template(request.param, tmp_path_factory.mktemp(f"property_{request.param}"),
                    lambda url: setup.setup_folder(url, REPO_ROOT / "demo_programme"))
    yield made
    made.close()


def _stored(db: str) -> dict[tuple[str, str], float]:
    engine = create_engine(db if "://" in db else f"sqlite:///{db}")
    try:
        with engine.connect() as connection:
            values = connection.execute(text(
                "SELECT s.code, p.code, o.value FROM observation o JOIN visit v ON v.id = o.visit_id "
                "JOIN station s ON s.id = v.station_id JOIN species p ON p.id = o.species_id")).fetchall()
            covariates = connection.execute(text(
                "SELECT s.code, c.name, c.value FROM covariate c JOIN station s ON s.id = c.station_id")).fetchall()
    finally:
        engine.dispose()
    return {**{(a, b): v for a, b, v in values}, **{(a, b): v for a, b, v in covariates}}


def _check(template: Template, path: Path, rows, accepted_expected: bool, *, again: str | None = None) -> None:
    """Import ``path`` into a fresh copy of the set-up and hold the property; with ``again``, import it once
    more expecting a refusal that says so."""
    db = template.copy()
    try:
        before = dump(db)
        before_bytes = Path(db).read_bytes() if template.engine == "sqlite" else None
        try:
            import_records(db, path)
        except MonitorError as exc:
            assert not accepted_expected, f"a good sheet was refused: {exc}"
            assert dump(db) == before  # refused: nothing written
            if before_bytes is not None:
                assert Path(db).read_bytes() == before_bytes
            if again is not None:
                with pytest.raises(MonitorError, match=again):
                    import_records(db, path)
            return
        assert all(cell.good for _station, cells in rows for cell in cells), \
            "a cell no person reads as a value was stored"
        expected = {}
        for station, cells in rows:
            for column, cell in zip(COLUMNS, cells, strict=True):
                expected[(station, COLUMNS[column][0])] = _person_reads(cell)
        assert _stored(db) == expected
        assert again is None, "a file that must be refused was imported"
    finally:
        if template.engine == "postgresql":
            drop_postgres_database(db)


def test_workbooks_are_stored_as_shown_or_refused(template, tmp_path_factory):
    import openpyxl

    @settings(max_examples=EXAMPLES[template.engine], deadline=None, suppress_health_check=CHECKS)
    @given(data=sheets(), extra=st.sampled_from(["none", "hidden", "visible", "title"]))
    def check(data, extra):
        rows, all_good = data
        folder = tmp_path_factory.mktemp("xlsx")
        book = openpyxl.Workbook()
        sheet = book.active
        sheet.title = "records"
        if extra == "title":
            sheet.append(["Field sheet 2024, team A"])
        sheet.append(SHEET_HEADER)
        for station, cells in rows:
            sheet.append([station, *VISIT, *(c.value for c in cells)])
            for k, cell in enumerate(cells):
                sheet.cell(row=sheet.max_row, column=len(VISIT) + 2 + k).number_format = cell.number_format
        if extra in ("hidden", "visible"):
            other = book.create_sheet("draft", 0)  # first in the workbook: the old reader read only this one
            other.append(SHEET_HEADER)
            other.append([STATIONS[0], *VISIT, *([7] * len(COLUMNS))])
            if extra == "hidden":
                other.sheet_state = "hidden"
        path = folder / "sheet.xlsx"
        book.save(path)
        _check(template, path, rows, all_good and extra in ("none", "hidden"))

    check()


def test_csv_files_are_stored_as_shown_or_refused(template, tmp_path_factory):
    @settings(max_examples=EXAMPLES[template.engine], deadline=None, suppress_health_check=CHECKS)
    @given(data=sheets(), encoding=st.sampled_from(["utf-8", "utf-8-sig", "cp1252", "mixed"]),
           accents=st.booleans())
    def check(data, encoding, accents):
        rows, all_good = data
        folder = tmp_path_factory.mktemp("csv")
        accents = accents or encoding == "mixed"
        lines = [",".join(SHEET_HEADER)]
        for k, (station, cells) in enumerate(rows):
            visit = list(VISIT)
            if accents and k == 0:
                visit[-1] = "Größe geschätzt"
            if encoding == "mixed" and k == len(rows) - 1:
                visit[-1] = (visit[-1] + " " if visit[-1] else "") + "STRAY"
            # the text a spreadsheet shows, written unquoted as a hand or a careless export would: a decimal
            # comma then splits its cell in two
            lines.append(",".join([station, *visit, *(c.shown if c.shown != "?" else str(c.value) for c in cells)]))
        content = "\n".join(lines) + "\n"
        if encoding == "mixed":  # UTF-8 throughout but for one byte pasted from a Windows-1252 program
            data_bytes = content.encode("utf-8").replace(b"STRAY", b"caf\xe9")
        else:
            data_bytes = content.encode(encoding)
        path = folder / "sheet.csv"
        path.write_bytes(data_bytes)
        _check(template, path, rows, all_good and encoding != "mixed",
               again="one encoding throughout" if encoding == "mixed" else None)

    check()
