"""Reading a user's CSV or .xlsx file into a raw table of strings, with every problem collected.

Encoding rule (stated once, applied to every CSV the project reads):

1. A UTF-8 byte-order mark means UTF-8 (the mark is dropped); a UTF-16 mark means UTF-16.
2. Otherwise the bytes are decoded as strict UTF-8.
3. If that fails, they are decoded as Windows-1252 (what spreadsheet programs on Windows write),
   provided every byte is defined there.  Anything else is an error naming the first bad byte.
4. A NUL byte in a file that is not UTF-16 means the file is not text: an error.

CSV follows RFC 4180 (Shafranovich 2005): comma separated, fields optionally enclosed in double
quotes, a doubled quote inside a quoted field; line ends CRLF or LF are both accepted.  Blank lines
are skipped.  Rows are numbered as a user sees them in an editor: the physical line of the file
(header usually line 1), or the sheet row in a workbook.
"""

from __future__ import annotations

import codecs
import csv
import datetime as dt
import io
import math
import os
import re
import zipfile
from collections.abc import Iterable
from dataclasses import dataclass, field
from pathlib import Path

from monitor.errors import InputError, InputProblem
from monitor.io.headers import canonical_header

MAX_ABS_NUMBER = 1e12  # larger magnitudes are typing slips in field records, never real values (common practice)
MAX_FIELD_CHARS = 100_000


@dataclass
class RawTable:
    """A file read as strings: canonical header names, the headers as written, and numbered rows."""

    file: str
    raw_headers: list[str]                  # as written (stripped)
    headers: list[str]                      # canonical (see headers.HEADER_ALIASES), same order
    rows: list[tuple[int, list[str]]] = field(default_factory=list)  # (row number, cells as strings)
    header_row: int = 1
    pending: list[InputProblem] = field(default_factory=list)  # shape problems found while reading

    def problems(self) -> Problems:
        """A problem collector for this file, already holding the problems found while reading it."""
        collector = Problems(self.file)
        collector.extend(self.pending)
        return collector

    def raw_name(self, canonical: str) -> str:
        """The header as the user wrote it, for messages."""
        return self.raw_headers[self.headers.index(canonical)]


class Problems:
    """Collects InputProblem lines for one file and raises them all at once."""

    def __init__(self, file: str):
        self.file = file
        self.items: list[InputProblem] = []

    def add(self, row: int | None, field_: str | None, value: object, expected: str,
            severity: str = "error") -> None:
        self.items.append(InputProblem(self.file, row, field_, value, expected, severity))

    def extend(self, problems: Iterable[InputProblem]) -> None:
        self.items.extend(problems)

    @property
    def errors(self) -> list[InputProblem]:
        return [p for p in self.items if p.severity == "error"]

    def raise_if_any(self) -> None:
        if self.errors:
            raise InputError(self.items)


def file_label(path: str | os.PathLike[str]) -> str:
    return os.path.basename(os.fspath(path)) or os.fspath(path)


# --- decoding ------------------------------------------------------------------------------------
def decode_bytes(data: bytes, file: str) -> tuple[str, str]:
    """Decode per the module's encoding rule; return (text, encoding used)."""
    if data.startswith(codecs.BOM_UTF8):
        encoding = "utf-8-sig"
    elif data.startswith(codecs.BOM_UTF16_LE) or data.startswith(codecs.BOM_UTF16_BE):
        encoding = "utf-16"
    else:
        encoding = "utf-8"
    if encoding != "utf-16" and b"\x00" in data:
        pos = data.index(b"\x00")
        raise InputError(InputProblem(file, None, None, f"NUL byte at offset {pos}",
                                      "a text file (CSV in UTF-8 or Windows-1252), not a binary file"))
    try:
        return data.decode(encoding), encoding
    except UnicodeDecodeError as exc:
        if encoding == "utf-16":
            raise InputError(InputProblem(file, None, None, f"byte offset {exc.start}",
                                          "valid UTF-16 text after the UTF-16 byte-order mark")) from None
    try:
        return data.decode("cp1252"), "cp1252"
    except UnicodeDecodeError as exc:
        bad = data[exc.start:exc.start + 1]
        raise InputError(InputProblem(file, None, None, f"byte {bad!r} at offset {exc.start}",
                                      "text in UTF-8 or Windows-1252")) from None


# --- CSV -----------------------------------------------------------------------------------------
def _csv_rows(text: str, file: str) -> list[tuple[int, list[str]]]:
    """Split CSV text (RFC 4180) into (line number, cells); blank lines dropped."""
    # csv.field_size_limit is process-global; we guard length ourselves instead of raising it.
    text = text.replace("\r\n", "\n").replace("\r", "\n")
    reader = csv.reader(io.StringIO(text, newline=""), strict=True)
    out: list[tuple[int, list[str]]] = []
    start = 1
    while True:
        try:
            cells = next(reader)
        except StopIteration:
            break
        except csv.Error as exc:
            raise InputError(InputProblem(file, reader.line_num or start, None, None,
                                          f"well-formed CSV per RFC 4180 ({exc})")) from None
        line = start
        start = reader.line_num + 1
        if not any(c.strip() for c in cells):
            continue
        out.append((line, cells))
    return out


# --- xlsx ----------------------------------------------------------------------------------------
def _cell_text(value: object) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "yes" if value else "no"
    if isinstance(value, dt.datetime):
        if value.time() == dt.time(0):
            return value.date().isoformat()
        return value.isoformat()
    if isinstance(value, dt.date):
        return value.isoformat()
    if isinstance(value, float):
        if math.isfinite(value) and value == int(value) and abs(value) < 1e15:
            return str(int(value))
        return repr(value)
    return str(value)


def _xlsx_rows(path: Path, file: str) -> list[tuple[int, list[str]]]:
    try:
        import openpyxl
    except ImportError:  # pragma: no cover - a declared dependency
        raise InputError(InputProblem(file, None, None, None, "openpyxl installed to read .xlsx")) from None
    out: list[tuple[int, list[str]]] = []
    try:
        workbook = openpyxl.load_workbook(path, read_only=True, data_only=True)
        try:
            sheet = workbook.worksheets[0]
            for number, values in enumerate(sheet.iter_rows(values_only=True), start=1):
                cells = [_cell_text(v) for v in values]
                if not any(c.strip() for c in cells):
                    continue
                out.append((number, cells))
        finally:
            workbook.close()
    except InputError:
        raise
    except (zipfile.BadZipFile, KeyError, OSError, ValueError, IndexError, TypeError, EOFError,
            AttributeError) as exc:
        raise InputError(InputProblem(file, None, None, type(exc).__name__,
                                      "a complete, readable .xlsx workbook (the file looks truncated "
                                      "or is not an Excel 2007+ workbook)")) from None
    except Exception as exc:  # noqa: BLE001 - any parser failure in a damaged workbook is the user's file
        raise InputError(InputProblem(file, None, None, type(exc).__name__,
                                      "a complete, readable .xlsx workbook")) from None
    return out


# --- table -----------------------------------------------------------------------------------------
def read_raw_table(source: str | os.PathLike[str], *, file: str | None = None) -> RawTable:
    """Read the first sheet of an .xlsx, or a CSV, into a :class:`RawTable`.

    Raises InputError for an empty file, an unreadable file, a missing header, duplicated header
    names (after case-folding and alias mapping), or a row with more cells than the header.
    """
    path = Path(source)
    label = file or file_label(path)
    try:
        data = path.read_bytes()
    except OSError as exc:
        raise InputError(InputProblem(label, None, None, None, f"a readable file ({exc.strerror})")) from None
    if not data.strip():
        raise InputError(InputProblem(label, None, None, None, "a file with a header row and data; it is empty"))
    if data[:4] == b"PK\x03\x04" or path.suffix.lower() in (".xlsx", ".xlsm"):
        rows = _xlsx_rows(path, label)
    else:
        text, _ = decode_bytes(data, label)
        rows = _csv_rows(text, label)
    return table_from_rows(rows, label)


def table_from_rows(rows: list[tuple[int, list[str]]], file: str) -> RawTable:
    problems = Problems(file)
    if not rows:
        raise InputError(InputProblem(file, None, None, None, "a header row; the file has only blank lines"))
    header_row, header_cells = rows[0]
    # trailing empty header cells are common in spreadsheets; drop them when their column is empty
    while header_cells and not header_cells[-1].strip():
        header_cells = header_cells[:-1]
    raw = [h.replace("\ufeff", "").strip() for h in header_cells]
    canonical = []
    for i, name in enumerate(raw):
        if not name:
            problems.add(header_row, f"column {i + 1}", "", "a header name for every column")
        canonical.append(canonical_header(name) if not _is_wide_header(name) else name)
    seen: dict[str, int] = {}
    for i, name in enumerate(canonical):
        key = name.lower()
        if key in seen and name:
            problems.add(header_row, raw[i], raw[i],
                         f"each column once; it repeats column {seen[key] + 1} ('{raw[seen[key]]}')")
        seen.setdefault(key, i)
    width = len(raw)
    body: list[tuple[int, list[str]]] = []
    for number, cells in rows[1:]:
        extra = cells[width:]
        if any(c.strip() for c in extra):
            problems.add(number, None, len(cells), f"at most {width} cells as in the header")
            continue
        cells = [c.strip() for c in cells[:width]] + [""] * max(0, width - len(cells))
        long_cell = next((c for c in cells if len(c) > MAX_FIELD_CHARS), None)
        if long_cell is not None:
            problems.add(number, None, long_cell[:20] + "...", f"cells of at most {MAX_FIELD_CHARS} characters")
            continue
        body.append((number, cells))
    return RawTable(file=file, raw_headers=raw, headers=canonical, rows=body, header_row=header_row,
                    pending=list(problems.items))


_WIDE_RE = re.compile(r"^\s*[^:\s]+\s*:\s*(count|cover|presence|frequency\s*/\s*\d+|pin_hits\s*/\s*\d+)\s*$",
                      re.IGNORECASE)
_COV_RE = re.compile(r"^\s*cov\s*:\s*([^\[\]]+?)\s*(?:\[\s*([^\[\]]*?)\s*\])?\s*$", re.IGNORECASE)


def _is_wide_header(name: str) -> bool:
    return bool(_WIDE_RE.match(name) or _COV_RE.match(name))


# --- checks shared by the readers ------------------------------------------------------------------
def check_columns(table: RawTable, required: Iterable[str], optional: Iterable[str],
                  problems: Problems, *, allow_wide: bool = False) -> bool:
    """Missing required columns, and unknown columns with the closest known name suggested.

    Returns True when a required column is missing (rows cannot be read then).
    """
    import difflib

    required = list(required)
    known = required + list(optional)
    missing = False
    for name in required:
        if name not in table.headers:
            missing = True
            problems.add(table.header_row, name, None, f"a column '{name}' (required)")
    for raw, name in zip(table.raw_headers, table.headers, strict=True):
        if not raw or name in known or (allow_wide and _is_wide_header(raw)):
            continue
        close = difflib.get_close_matches(name, known, n=1, cutoff=0.6)
        hint = f"; did you mean '{close[0]}'?" if close else ""
        problems.add(table.header_row, raw, raw, f"one of the known columns {', '.join(known)}{hint}")
    return missing


def get(table: RawTable, cells: list[str], name: str) -> str:
    if name not in table.headers:
        return ""
    return cells[table.headers.index(name)]


_NUMBER_RE = re.compile(r"^[+-]?(\d+(\.\d*)?|\.\d+)([eE][+-]?\d+)?$")


def parse_number(text: str) -> float | None:
    """A finite decimal number with '.' as the decimal mark; None if not one.  '1,5' is refused."""
    text = text.strip()
    if not (text.isascii() and text.isdigit()) and not _NUMBER_RE.match(text):
        return None
    value = float(text)
    if not math.isfinite(value) or abs(value) > MAX_ABS_NUMBER:
        return None
    return value


def parse_int(text: str) -> int | None:
    value = parse_number(text)
    if value is None or value != int(value):
        return None
    return int(value)


YES = {"yes", "y", "true", "1"}
NO = {"no", "n", "false", "0", ""}


def parse_bool(text: str) -> bool | None:
    t = text.strip().lower()
    if t in YES:
        return True
    if t in NO:
        return False
    return None


_ISO_DATE = re.compile(r"^(\d{4})-(\d{2})-(\d{2})$")
_SLASH_DATE = re.compile(r"^(\d{1,2})[/.](\d{1,2})[/.](\d{4})$")
DATE_RULE = ("an ISO date YYYY-MM-DD, or DD/MM/YYYY where day and month cannot be swapped "
             "(day > 12 or day = month); other slash dates are ambiguous")


def parse_date(text: str, *, day_first: bool | None = None) -> tuple[dt.date | None, str | None]:
    """Parse a visit date; return (date, None) or (None, what was expected).

    Rule: ISO 8601 ``YYYY-MM-DD`` always.  ``DD/MM/YYYY`` (or with dots) is read day first only when
    that reading is the only one possible (day > 12, or day equals month); with ``day_first=True``
    every slash date is read day first, with ``day_first=False`` month first.  We never guess.
    """
    text = text.strip()
    if text.endswith("T00:00:00"):
        text = text[:-9]
    m = _ISO_DATE.match(text)
    try:
        if m:
            return dt.date(int(m[1]), int(m[2]), int(m[3])), None
        m = _SLASH_DATE.match(text)
        if m:
            a, b, year = int(m[1]), int(m[2]), int(m[3])
            if day_first is None:
                if a == b or a > 12:
                    return dt.date(year, b, a), None
                if b > 12:
                    return None, "day/month/year order (this looks like month/day/year); use YYYY-MM-DD"
                return None, "an unambiguous date: D/M and M/D both fit; use YYYY-MM-DD"
            if day_first:
                return dt.date(year, b, a), None
            return dt.date(year, a, b), None
    except ValueError:
        return None, "a real calendar date"
    return None, DATE_RULE


_MONTH_DAY = re.compile(r"^(\d{1,2})-(\d{1,2})$")


def parse_month_day(text: str) -> str | None:
    """'MM-DD' (Feb 29 allowed) -> normalised 'MM-DD', or None."""
    m = _MONTH_DAY.match(text.strip())
    if not m:
        return None
    month, day = int(m[1]), int(m[2])
    try:
        dt.date(2000, month, day)  # a leap year, so 02-29 is allowed
    except ValueError:
        return None
    return f"{month:02d}-{day:02d}"
