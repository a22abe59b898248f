"""Reading a user's CSV or .xlsx file into a raw table of strings, with every problem collected.

Encoding rule (stated once, applied to every CSV the project reads):

1. A UTF-8 byte-order mark means UTF-8 (the mark is dropped); a UTF-16 mark means UTF-16.
2. Otherwise the bytes are decoded as strict UTF-8.
3. If that fails, and the file holds no valid UTF-8 sequence of two or more bytes either, it is read as
   Windows-1252 (what spreadsheet programs on Windows write), provided every byte is defined there.
4. A file that is UTF-8 except for a few bytes (a character pasted from another program) is refused,
   naming the row of the first bad byte: reading it whole as Windows-1252 would turn every accented
   letter of the file into mojibake, and guessing byte by byte would be guessing.
5. A NUL byte in a file that is not UTF-16 means the file is not text: an error.

A file that is not a CSV or .xlsx at all is named for what it is: a web page (HTML) or an XML
spreadsheet saved under a spreadsheet's name, an Excel 97-2003 .xls, an OpenDocument .ods.  A CSV
separated by semicolons or tabs is refused with that said.

Shape: every row of a CSV has as many cells as the header (RFC 4180 section 2.4: "Each line should
contain the same number of fields throughout the file").  A row with more cells is the mark of a
decimal comma (``12,5``) or a stray separator, which shifts every later value one column: refused,
naming the row and the columns.  Trailing empty cells are accepted only when every data row carries
the same ones (a writer that pads the whole file), so each row still lines up with the header.  A
title row above the header is refused with that said.

Workbooks (.xlsx): a hidden sheet is never read unless named; with more than one visible sheet that
holds anything, the sheet must be named (``sheet=``).  A cell's number format is read: a percent
format means a percent (a cell showing ``12.5 %`` holds 0.125 and is read as ``12.5%``), a date
format a date.  A formula whose result was never calculated and stored (files written by scripts)
is refused, naming the cell; so is a cell holding a spreadsheet error such as ``#DIV/0!``.

CSV follows RFC 4180 (Shafranovich 2005): comma separated, fields optionally enclosed in double
quotes, a doubled quote inside a quoted field; line ends CRLF or LF are both accepted.  Blank lines
are skipped.  Rows are numbered as a user sees them in an editor: the physical line of the file
(header usually line 1), or the sheet row in a workbook.
"""

from __future__ import annotations

import codecs
import csv
import datetime as dt
import itertools
import math
import os
import re
import zipfile
from collections.abc import Iterable, Iterator
from dataclasses import dataclass, field
from pathlib import Path

from monitor import measures
from monitor.errors import InputError, InputProblem, ProblemCounter
from monitor.io.headers import canonical_header

MAX_ABS_NUMBER = 1e12  # larger magnitudes are typing slips in field records, never real values (common practice)
MAX_FIELD_CHARS = 100_000


@dataclass
class RawTable:
    """A file read as strings: canonical header names, the headers as written, and numbered rows.

    ``rows`` is a list, or, read with ``stream=True``, an iterator that reads the file as it is consumed
    (once): the shape problems of its rows reach ``pending`` as they are read.
    """

    file: str
    raw_headers: list[str]                  # as written (stripped)
    headers: list[str]                      # canonical (see headers.HEADER_ALIASES), same order
    rows: Iterable[tuple[int, list[str]]] = field(default_factory=list)  # (row number, cells as strings)
    header_row: int = 1
    pending: ProblemCounter = field(default_factory=ProblemCounter)  # shape problems found while reading
    sheet: str | None = None                # the workbook sheet read (None for a CSV)

    def problems(self) -> Problems:
        """A problem collector for this file, holding the problems found while reading it (for a stream:
        the rows read so far)."""
        collector = Problems(self.file)
        collector.absorb(self.pending)
        return collector

    def raw_name(self, canonical: str) -> str:
        """The header as the user wrote it, for messages."""
        return self.raw_headers[self.headers.index(canonical)]


class Problems:
    """Collects InputProblem lines for one file and raises them all at once.

    At most :data:`monitor.errors.MAX_LISTED` are kept (the first added); all are counted by kind.
    """

    def __init__(self, file: str):
        self.file = file
        self.counter = ProblemCounter()

    def add(self, row: int | None, field_: str | None, value: object, expected: str,
            severity: str = "error") -> None:
        self.counter.add_parts(self.file, row, field_, value, expected, severity)

    def extend(self, problems: Iterable[InputProblem]) -> None:
        for problem in problems:
            self.counter.add(problem)

    def absorb(self, other: ProblemCounter) -> None:
        """Take over another collector's problems (after this one's) and its counts of all."""
        self.counter.merge(other)

    @property
    def items(self) -> list[InputProblem]:
        return self.counter.kept()

    @property
    def errors(self) -> list[InputProblem]:
        return [p for p in self.items if p.severity == "error"]

    @property
    def has_errors(self) -> bool:
        return self.counter.errors > 0

    def raise_if_any(self) -> None:
        if self.counter.errors:
            raise InputError(self.items, total=self.counter.total, counts=self.counter.counts)


def file_label(path: str | os.PathLike[str]) -> str:
    return os.path.basename(os.fspath(path)) or os.fspath(path)


# --- decoding ------------------------------------------------------------------------------------
#: a valid UTF-8 sequence of two or more bytes (RFC 3629 section 4); Windows-1252 text practically never
#: holds one (it would read as mojibake such as 'Ã©' in Windows-1252 itself)
_UTF8_MULTIBYTE = re.compile(rb"[\xc2-\xdf][\x80-\xbf]|[\xe0-\xef][\x80-\xbf]{2}|[\xf0-\xf4][\x80-\xbf]{3}")


def _line_of(data: bytes, offset: int) -> int:
    """The physical line (1-based) holding byte ``offset``: what an editor shows as the row."""
    newline = b"\n" if b"\n" in data else b"\r"
    return data.count(newline, 0, offset) + 1


def _field_at(data: bytes, offset: int, file: str) -> str | None:
    """The header of the column holding byte ``offset`` (best effort, for the message)."""
    line_start = max(data.rfind(b"\n", 0, offset), data.rfind(b"\r", 0, offset)) + 1
    line_end = data.find(b"\n", offset)
    line = data[line_start:line_end if line_end >= 0 else len(data)].decode("utf-8", errors="replace")
    header_end = data.find(b"\n")
    header = data[:header_end if header_end >= 0 else len(data)].decode("utf-8", errors="replace")
    try:
        cells = next(csv.reader([line]))
        names = next(csv.reader([header]))
    except (csv.Error, StopIteration):
        return None
    at = next((i for i, c in enumerate(cells) if "\ufffd" in c), None)
    if at is None or line_start == 0:
        return None
    return names[at].strip() if at < len(names) else f"column {at + 1}"


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
        first_bad = exc.start
    bad = data[first_bad:first_bad + 1]
    if encoding == "utf-8-sig" or _UTF8_MULTIBYTE.search(data):
        raise InputError(InputProblem(
            file, _line_of(data, first_bad), _field_at(data, first_bad, file), f"byte 0x{bad.hex().upper()}",
            "one encoding throughout: the file is UTF-8 but this byte is not (a character pasted from "
            "another program?); retype the character, or save the whole file again as UTF-8"))
    try:
        return data.decode("cp1252"), "cp1252"
    except UnicodeDecodeError as exc:
        bad = data[exc.start:exc.start + 1]
        raise InputError(InputProblem(file, _line_of(data, exc.start), None, f"byte 0x{bad.hex().upper()}",
                                      "text in UTF-8 or Windows-1252")) from None


def _not_a_table(data: bytes, path: Path, file: str) -> None:
    """Refuse, saying what it is, a file that is neither CSV nor .xlsx but carries a spreadsheet's name."""
    head = data[:512].lstrip(codecs.BOM_UTF8).lstrip().lower()
    if head.startswith((b"<!doctype html", b"<html", b"<table", b"<head", b"<body", b"<meta")):
        what = "a web page (HTML) saved under a spreadsheet file name"
    elif head.startswith(b"<?xml"):
        what = "an XML file (an 'XML spreadsheet' or a web export)"
    elif data.startswith(b"\xd0\xcf\x11\xe0\xa1\xb1\x1a\xe1"):
        what = "an Excel 97-2003 .xls workbook"
    elif data.startswith(b"PK\x03\x04") and b"opendocument.spreadsheet" in data[:200]:
        what = "an OpenDocument (.ods) spreadsheet"
    else:
        return
    raise InputError(InputProblem(file, None, None, what,
                                  "a CSV file or an Excel 2007+ .xlsx workbook: open it in a spreadsheet "
                                  "program and save it as CSV (comma-separated, UTF-8) or .xlsx"))


# --- CSV read as a stream -------------------------------------------------------------------------
#: bytes read at a time when a CSV file is scanned before it is read line by line
BLOCK = 1 << 20


def _streamable(path: Path) -> tuple[bool, str, bool] | None:
    """Scan a file once, a block at a time, without keeping it: (holds anything but white space, encoding,
    CRLF line ends) when it can be read line by line: UTF-8 throughout (a UTF-8 byte-order mark allowed),
    no NUL byte, lines ending in LF or CRLF.  None otherwise: then the whole file is decoded at once by
    the encoding rule above, which also words every refusal (a stray byte, a NUL, a lone CR)."""
    decoder = codecs.getincrementaldecoder("utf-8")()
    anything = False
    carriage, crlf, after_cr = 0, 0, False
    encoding = "utf-8"
    with path.open("rb") as handle:
        first = True
        while block := handle.read(BLOCK):
            if first:
                encoding = "utf-8-sig" if block.startswith(codecs.BOM_UTF8) else "utf-8"
                first = False
            if b"\x00" in block:
                return None
            try:
                decoder.decode(block)
            except UnicodeDecodeError:
                return None
            anything = anything or bool(block.strip())
            carriage += block.count(b"\r")
            crlf += block.count(b"\r\n") + (1 if after_cr and block.startswith(b"\n") else 0)
            after_cr = block.endswith(b"\r")
    try:
        decoder.decode(b"", final=True)
    except UnicodeDecodeError:
        return None
    if carriage != crlf:
        return None  # a lone CR ends a line: the whole-text reading splits there
    return anything, encoding, carriage > 0


def _file_lines(path: Path, encoding: str, crlf: bool) -> Iterator[str]:
    """The lines of a file that :func:`_streamable` passed, decoded one at a time (LF line ends)."""
    with path.open("rb") as handle:
        first = True
        for raw in handle:
            line = raw.decode("utf-8")  # a '\\n' byte never falls inside a UTF-8 sequence
            if first:
                if encoding == "utf-8-sig" and line.startswith("\ufeff"):
                    line = line[1:]
                first = False
            if crlf and line.endswith("\r\n"):
                line = line[:-2] + "\n"
            yield line


# --- CSV -----------------------------------------------------------------------------------------
def _lines(text: str) -> Iterator[str]:
    """The text's lines, each with its '\\n', one at a time (no copy of the whole text)."""
    start, end = 0, len(text)
    while start < end:
        stop = text.find("\n", start)
        stop = end if stop < 0 else stop + 1
        yield text[start:stop]
        start = stop


def _csv_rows(text: str | Iterable[str], file: str) -> Iterator[tuple[int, list[str]]]:
    """Split CSV text (RFC 4180), or its lines each ending in '\\n', into (line number, cells), one row at a
    time; blank lines dropped."""
    # csv.field_size_limit is process-global; we guard length ourselves instead of raising it.
    if isinstance(text, str):
        if "\r" in text:
            text = text.replace("\r\n", "\n").replace("\r", "\n")
        lines: Iterator[str] = _lines(text)
    else:
        lines = iter(text)
    first = list(itertools.islice(lines, 20))
    _check_separator(first, file)
    reader = csv.reader(itertools.chain(first, lines), strict=True)
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
        yield line, cells


def _check_separator(first: list[str], file: str) -> None:
    """A file separated by semicolons or tabs (what spreadsheet programs write in some locales) is named so
    (``first``: the file's first lines)."""
    lines = [line.rstrip("\n") for line in first if line.strip()]
    if not lines:
        return
    header = lines[0]
    commas = header.count(",")
    for mark, name in ((";", "semicolons (';')"), ("\t", "tabs")):
        if header.count(mark) > commas and all(line.count(mark) >= 1 for line in lines[:5]):
            raise InputError(InputProblem(
                file, 1, None, None,
                f"comma-separated values; this file is separated by {name}, as spreadsheet programs write "
                "where the decimal mark is a comma: save it as CSV with ',' between cells and '.' as the "
                "decimal mark"))


# --- xlsx ----------------------------------------------------------------------------------------
#: cell types of a spreadsheet error ('#DIV/0!', '#REF!', ...) and a formula (ECMA-376 Part 1, 18.18.11)
_ERROR_TYPE, _FORMULA_TYPE = "e", "f"


def _is_percent_format(number_format: str | None) -> bool:
    """A number format showing a percent: a '%' outside quoted text and brackets (ECMA-376 Part 1, 18.8.31)."""
    if not number_format or "%" not in number_format:
        return False
    plain = re.sub(r'"[^"]*"|\[[^\]]*\]|\\.', "", number_format)
    return "%" in plain


def _percent_text(value: float) -> str:
    """0.125 -> '12.5%': the number the cell shows before its percent sign, without binary-float noise."""
    from decimal import Decimal

    shown = (Decimal(repr(value)) * 100).normalize()
    text = format(shown, "f")
    return text + "%"


def _cell_text(value: object, number_format: str | None = None) -> str:
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
    if isinstance(value, (int, float)) and _is_percent_format(number_format):
        if isinstance(value, float) and not math.isfinite(value):
            return repr(value)
        return _percent_text(float(value))
    if isinstance(value, float):
        if math.isfinite(value) and value == int(value) and abs(value) < 1e15:
            return str(int(value))
        return repr(value)
    return str(value)


@dataclass(frozen=True)
class CellIssue:
    """A cell that cannot be read as a value (a formula without a stored result, a spreadsheet error)."""

    row: int
    column: int          # 0-based
    coordinate: str      # e.g. 'F7'
    value: str
    expected: str


def _pick_sheet(workbook, sheet: str | None, file: str):
    """The worksheet to read, by the workbook rule in the module docstring; returns (sheet, note)."""
    sheets = list(workbook.worksheets)
    names = [ws.title for ws in sheets]
    hidden = [ws.title for ws in sheets if ws.sheet_state != "visible"]
    if sheet is not None:
        chosen = next((ws for ws in sheets if ws.title == sheet), None) or next(
            (ws for ws in sheets if ws.title.strip().lower() == sheet.strip().lower()), None)
        if chosen is None:
            raise InputError(InputProblem(file, None, "--sheet", sheet,
                                          f"the name of a sheet of the workbook: {', '.join(names)}"))
        return chosen
    visible = [ws for ws in sheets if ws.sheet_state == "visible"]
    used = [ws for ws in visible if _sheet_has_cells(ws)]
    if len(used) == 1:
        return used[0]
    if not used:
        extra = f" (hidden sheets are read only when named with --sheet: {', '.join(hidden)})" if hidden else ""
        raise InputError(InputProblem(file, None, None, None,
                                      f"a visible sheet with a header row and data; the workbook has none{extra}"))
    raise InputError(InputProblem(file, None, "--sheet", None,
                                  f"one sheet named with --sheet NAME: the workbook has {len(used)} sheets "
                                  f"holding data ({', '.join(repr(ws.title) for ws in used)}) and only one is "
                                  "read"))


def _sheet_has_cells(worksheet) -> bool:
    worksheet.reset_dimensions()
    for values in worksheet.iter_rows(values_only=True):
        if any(v is not None and str(v).strip() for v in values):
            return True
    return False


def _xlsx_rows(path: Path, file: str, sheet: str | None = None
               ) -> tuple[Iterator[tuple[int, list[str], list[CellIssue]]], str]:
    """The chosen sheet's rows as text, each with the cells that hold no readable value, one row at a time,
    and the sheet's name.

    The workbook is opened twice (both read-only, streaming): once for the values, with the results of
    formulas as the spreadsheet program last stored them, and once for the formulas themselves, so that a
    formula with no stored result is told apart from a blank cell.  The sheet is chosen (or refused) at
    once; the rows are read as the iterator is consumed, and the workbooks closed at its end.
    """
    try:
        import openpyxl
    except ImportError:  # pragma: no cover - a declared dependency
        raise InputError(InputProblem(file, None, None, None, "openpyxl installed to read .xlsx")) from None
    books = []
    try:
        books.append(openpyxl.load_workbook(path, read_only=True, data_only=True))
        books.append(openpyxl.load_workbook(path, read_only=True, data_only=False))
        values_sheet = _pick_sheet(books[0], sheet, file)
        name = values_sheet.title
        formula_sheet = books[1][name]
        values_sheet.reset_dimensions()
        formula_sheet.reset_dimensions()
    except BaseException as exc:
        for book in books:
            book.close()
        _workbook_error(exc, file)
        raise
    return _xlsx_row_stream(values_sheet, formula_sheet, books, file), name


def _workbook_error(exc: BaseException, file: str) -> None:
    """Raise the one-line refusal for a workbook that cannot be read (a damaged file is the user's file)."""
    if isinstance(exc, InputError) or not isinstance(exc, Exception):
        return
    if isinstance(exc, (zipfile.BadZipFile, KeyError, OSError, ValueError, IndexError, TypeError, EOFError,
                        AttributeError)):
        raise InputError(InputProblem(file, None, None, type(exc).__name__,
                                      "a complete, readable .xlsx workbook (the file looks truncated "
                                      "or is not an Excel 2007+ workbook)")) from None
    # any other parser failure in a damaged workbook is the user's file too
    raise InputError(InputProblem(file, None, None, type(exc).__name__,
                                  "a complete, readable .xlsx workbook")) from None


def _xlsx_row_stream(values_sheet, formula_sheet, books: list, file: str
                     ) -> Iterator[tuple[int, list[str], list[CellIssue]]]:
    try:
        for number, (cells, formulas) in enumerate(zip(values_sheet.iter_rows(), formula_sheet.iter_rows(),
                                                       strict=False), start=1):
            texts = []
            issues: list[CellIssue] = []
            for k, cell in enumerate(cells):
                value = cell.value
                kind = getattr(cell, "data_type", None)
                if value is None and k < len(formulas) and getattr(formulas[k], "data_type", None) == _FORMULA_TYPE:
                    issues.append(CellIssue(number, k, f"{_column_letter(k)}{number}", str(formulas[k].value),
                                            "a value: the formula has no stored result (the file was written "
                                            "by a program that does not calculate); open and save it in a "
                                            "spreadsheet program, or type the value"))
                    texts.append("")
                    continue
                if kind == _ERROR_TYPE:
                    issues.append(CellIssue(number, k, f"{_column_letter(k)}{number}", str(value),
                                            "a value, not a spreadsheet error"))
                    texts.append("")
                    continue
                texts.append(_cell_text(value, getattr(cell, "number_format", None)))
            if not any(c.strip() for c in texts) and not issues:
                continue
            yield number, texts, issues
    except BaseException as exc:
        _workbook_error(exc, file)
        raise
    finally:
        for book in books:
            book.close()


def _column_letter(index: int) -> str:
    """0 -> 'A', 26 -> 'AA' (spreadsheet column names)."""
    letters = ""
    index += 1
    while index:
        index, rest = divmod(index - 1, 26)
        letters = chr(65 + rest) + letters
    return letters


# --- table -----------------------------------------------------------------------------------------
def read_raw_table(source: str | os.PathLike[str], *, file: str | None = None, sheet: str | None = None,
                   stream: bool = False) -> RawTable:
    """Read a CSV, or one sheet of an .xlsx, into a :class:`RawTable` (rules in the module docstring).

    Raises InputError for an empty file, an unreadable file, a missing header, duplicated header
    names (after case-folding and alias mapping), a row whose cells do not line up with the header,
    a formula without a stored result, or a workbook whose sheet to read is not clear.

    With ``stream=True`` the header is read at once and the rows as ``table.rows`` is iterated (once):
    memory then holds the file's text (a CSV) but not its rows, and the rows' problems reach
    ``table.pending`` as they are met, so take ``table.problems()`` after reading them.
    """
    path = Path(source)
    label = file or file_label(path)
    try:
        with path.open("rb") as handle:
            head = handle.read(512)
        scan = None
        if sheet is None and head[:4] != b"PK\x03\x04" and path.suffix.lower() not in (".xlsx", ".xlsm"):
            scan = _streamable(path)  # a CSV in UTF-8: read line by line, never held whole
        if scan is not None:
            anything, encoding, crlf = scan
            if not anything:
                raise InputError(InputProblem(label, None, None, None,
                                              "a file with a header row and data; it is empty"))
            _not_a_table(head, path, label)
            table = table_from_rows(((number, cells, ()) for number, cells
                                     in _csv_rows(_file_lines(path, encoding, crlf), label)), label)
            if not stream:
                table.rows = list(table.rows)
            return table
        data = path.read_bytes()
    except OSError as exc:
        raise InputError(InputProblem(label, None, None, None, f"a readable file ({exc.strerror})")) from None
    if not data.strip():
        raise InputError(InputProblem(label, None, None, None, "a file with a header row and data; it is empty"))
    _not_a_table(data, path, label)
    is_workbook = data[:4] == b"PK\x03\x04" or path.suffix.lower() in (".xlsx", ".xlsm")
    if sheet is not None and not is_workbook:
        raise InputError(InputProblem(label, None, "--sheet", sheet, "a workbook (.xlsx) when a sheet is named; "
                                                                     "a CSV file has no sheets"))
    if is_workbook:
        del data
        rows, name = _xlsx_rows(path, label, sheet)
        table = table_from_rows(rows, label, csv_shape=False)
        table.sheet = name
    else:
        text, _ = decode_bytes(data, label)
        del data
        table = table_from_rows(((number, cells, ()) for number, cells in _csv_rows(text, label)), label)
    if not stream:
        table.rows = list(table.rows)
    return table


def _title_rows(rows: list[tuple[int, list[str], object]], file: str) -> None:
    """Refuse one-cell rows above the header (a sheet's title), saying so."""
    first = 0
    while first < len(rows) - 1 and sum(1 for c in rows[first][1] if c.strip()) == 1:
        first += 1
    if first == 0 or sum(1 for c in rows[first][1] if c.strip()) < 2:
        return
    number, cells, _issues = rows[0]
    title = next(c for c in cells if c.strip()).strip()
    raise InputError(InputProblem(file, number, None, title,
                                  f"the header (column names) on the first row; row {number} looks like a title "
                                  f"above the header on row {rows[first][0]}: delete the row"
                                  f"{'s' if first > 1 else ''} above the header"))


def _wide_key(name: str) -> str:
    """'SP: count', 'sp:count ' and 'SP:Count' are one column: the key that tells them alike."""
    return re.sub(r"\s+", "", name).lower()


def table_from_rows(rows: Iterable[tuple[int, list[str], Iterable[CellIssue]]], file: str, *,
                    csv_shape: bool = True) -> RawTable:
    """The table of ``rows`` (row number, cells, the cells that hold no readable value): the header read and
    checked at once, the body an iterator that checks each row's shape as it is read."""
    problems = ProblemCounter()

    def add(row, field_, value, expected):
        problems.add(InputProblem(file, row, field_, value, expected))

    rows = iter(rows)
    head: list[tuple[int, list[str], Iterable[CellIssue]]] = []
    for row in rows:  # the rows up to the first that is not a single cell: a title above the header shows there
        head.append(row)
        if sum(1 for c in row[1] if c.strip()) != 1:
            break
    if not head:
        raise InputError(InputProblem(file, None, None, None, "a header row; the file has only blank lines"))
    _title_rows(head, file)
    header_row, header_cells, header_issues = head[0]
    written_width = len(header_cells)
    # trailing empty header cells are common in spreadsheets; drop them when their column is empty
    while header_cells and not header_cells[-1].strip():
        header_cells = header_cells[:-1]
    raw = [h.replace("\ufeff", "").strip() for h in header_cells]
    canonical = []
    for i, name in enumerate(raw):
        if not name:
            add(header_row, f"column {i + 1}", "", "a header name for every column")
        canonical.append(canonical_header(name) if not _is_wide_header(name) else name)
    seen: dict[str, int] = {}
    for i, name in enumerate(canonical):
        key = _wide_key(name) if _is_wide_header(name) else name.lower()
        if key in seen and name:
            add(header_row, raw[i], raw[i], f"each column once; it repeats column {seen[key] + 1} ('{raw[seen[key]]}')")
        seen.setdefault(key, i)
    width = len(raw)
    for issue in header_issues:
        add(issue.row, f"cell {issue.coordinate}", issue.value, issue.expected)

    def body() -> Iterator[tuple[int, list[str]]]:
        for number, cells, issues in itertools.chain(head[1:], rows):
            for issue in issues:
                name = raw[issue.column] if issue.column < width else f"column {issue.column + 1}"
                add(number, f"{name} (cell {issue.coordinate})", issue.value, issue.expected)
            if csv_shape and not width <= len(cells) <= written_width:
                # a row ending inside the header's own trailing empty cells still lines up; any other count not
                add(number, _shape_field(raw, cells, width), None, _shape_expected(raw, cells, width, written_width))
                continue
            extra = cells[width:]
            if any(c.strip() for c in extra):
                at = width + next(k for k, c in enumerate(extra) if c.strip())
                add(number, f"column {_column_letter(at)}", cells[at].strip(),
                    f"cells only under a header; column {_column_letter(at)} has no header name")
                continue
            cells = [c.strip() for c in cells[:width]] + [""] * max(0, width - len(cells))
            long_cell = next((c for c in cells if len(c) > MAX_FIELD_CHARS), None)
            if long_cell is not None:
                add(number, None, long_cell[:20] + "...", f"cells of at most {MAX_FIELD_CHARS} characters")
                continue
            yield number, cells

    return RawTable(file=file, raw_headers=raw, headers=canonical, rows=body(), header_row=header_row,
                    pending=problems)


def _shape_field(raw: list[str], cells: list[str], width: int) -> str:
    """Which columns a row of the wrong length touches, for the message."""
    if len(cells) > width:
        candidates = _decimal_comma_at(raw, cells)
        if candidates is not None:
            return f"{raw[candidates]} and every column after it"
        return f"columns {raw[0]} to {raw[-1]}" if raw else "columns"
    if len(cells) < width:
        return f"columns {raw[len(cells)]} to {raw[-1]}"
    return f"columns {raw[0]} to {raw[-1]}" if raw else "columns"


def _decimal_comma_at(raw: list[str], cells: list[str]) -> int | None:
    """The first column where two neighbouring cells read as one decimal number split by a comma ('12', '5')."""
    for i in range(min(len(raw), len(cells) - 1)):
        a, b = cells[i].strip(), cells[i + 1].strip()
        if a.isdigit() and b.isdigit() and ":" in raw[i] and raw[i].lower().split(":", 1)[1].strip().startswith(
                ("cover", "cov")):
            return i
    for i in range(min(len(raw), len(cells) - 1)):
        a, b = cells[i].strip(), cells[i + 1].strip()
        if a.isdigit() and b.isdigit() and ":" in raw[i]:
            return i
    return None


def _shape_expected(raw: list[str], cells: list[str], width: int, written_width: int) -> str:
    n = len(cells)
    if n > width:
        at = _decimal_comma_at(raw, cells)
        hint = (f"; '{cells[at]},{cells[at + 1]}' under '{raw[at]}' looks like a decimal comma: write "
                f"'{cells[at]}.{cells[at + 1]}' (or quote the cell)") if at is not None else \
            "; a decimal comma or a stray ',' shifts every later value one column: write '.' as decimal mark"
        return f"{written_width} cells as in the header, not {n}{hint}"
    return (f"{written_width} cells as in the header, not {n} (a missing ',' or cells left off the end of the "
            "row; write every cell, blank ones as nothing between two commas)")


_WIDE_RE = re.compile(r"^\s*[^:\s]+\s*:\s*(" + "|".join(
    re.escape(m.code) + (r"\s*/\s*\d+" if m.needs_n else "") for m in measures.REGISTRY.values()) + r")\s*$",
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


def parse_percent(text: str) -> float | None:
    """'12.5%' (typed, or a percent-formatted workbook cell) or '12.5' -> 12.5 (a percent); None if neither."""
    text = text.strip()
    if text.endswith("%"):
        text = text[:-1].rstrip()
    return parse_number(text)


def is_percent(text: str) -> bool:
    return text.rstrip().endswith("%")


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


def parse_typed_value(label: str, field_: str, measure: str, text: str) -> float:
    """A value typed at the command line or in a form, read as a field sheet's cell would be: presence
    as 0/1 or yes/no, any other measure as a decimal number; anything else is refused naming ``field_``."""
    if measure in measures.of_kind(measures.KIND_BINARY):
        flag = parse_bool(text) if text.strip() else None
        if flag is None:
            raise InputError(InputProblem(label, None, field_, text, "presence as 0/1 or yes/no"))
        return 1.0 if flag else 0.0
    value = parse_number(text)
    if value is None:
        raise InputError(InputProblem(label, None, field_, text, "a number with '.' as decimal mark, |x| <= 1e12"))
    return value


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
